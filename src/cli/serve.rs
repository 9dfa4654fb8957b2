//! A tiny HTTP server for the offline page, bound to 127.0.0.1 only.
//!
//! The page is one self-contained file, so the server answers `GET /` with it and everything else with 404. It exists
//! so `make run` can hand a URL to a browser; opening the file from disk works just as well.

use super::{Failure, EXIT_INPUT, EXIT_OUTPUT};
use std::io::{BufRead, BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::path::Path;

pub fn serve(page: &Path, port: u16) -> Result<(), Failure> {
    if !page.is_file() {
        return Err(Failure::new(EXIT_INPUT, format!("{}: no such page (build it with `make page`)", page.display())));
    }
    let listener = TcpListener::bind(("127.0.0.1", port))
        .or_else(|_| TcpListener::bind(("127.0.0.1", 0)))
        .map_err(|e| Failure::new(EXIT_OUTPUT, format!("cannot listen on 127.0.0.1: {e}")))?;
    let addr = listener.local_addr().map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
    println!("Stairstep is ready: http://{addr}/   (the demo loads by itself; Ctrl-C stops the server)");
    println!("Offline use needs no server: open {} in a browser.", page.display());
    for stream in listener.incoming().flatten() {
        let page = page.to_path_buf();
        std::thread::spawn(move || {
            let _ = answer(stream, &page);
        });
    }
    Ok(())
}

fn answer(mut stream: TcpStream, page: &Path) -> std::io::Result<()> {
    let mut line = String::new();
    let mut reader = BufReader::new(stream.try_clone()?);
    reader.read_line(&mut line)?;
    // Drain the request headers.
    let mut h = String::new();
    while reader.read_line(&mut h)? > 2 {
        h.clear();
    }
    let path = line.split_whitespace().nth(1).unwrap_or("/");
    let path = path.split('?').next().unwrap_or("/");
    let (status, body, kind) = if line.starts_with("GET ") && (path == "/" || path == "/stairstep.html") {
        ("200 OK", std::fs::read(page)?, "text/html; charset=utf-8")
    } else {
        ("404 Not Found", b"not found\n".to_vec(), "text/plain")
    };
    write!(
        stream,
        "HTTP/1.1 {status}\r\nContent-Type: {kind}\r\nContent-Length: {}\r\nCache-Control: no-store\r\nConnection: close\r\n\r\n",
        body.len()
    )?;
    stream.write_all(&body)
}
