//! A tiny HTTP server for the offline page, bound to 127.0.0.1 only.
//!
//! The page is one self-contained file, so the server answers `GET /` with it and everything else with 404. It exists
//! so `make run` can hand a URL to a browser; opening the file from disk works just as well. The built page
//! (dist/stairstep.html, as committed when the binary was built) is part of the binary, so `stairstep serve` works
//! from any folder; `--page FILE` serves a file from disk instead.

use super::{read_file, Failure, EXIT_OUTPUT};
use std::io::{BufRead, BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::path::Path;
use std::sync::Arc;

/// The page, built into the binary.
const PAGE: &[u8] = include_bytes!("../../dist/stairstep.html");

pub fn serve(page: Option<&Path>, port: u16) -> Result<(), Failure> {
    let body: Arc<Vec<u8>> = Arc::new(match page {
        Some(p) => read_file(p)?,
        None => PAGE.to_vec(),
    });
    let listener = TcpListener::bind(("127.0.0.1", port))
        .or_else(|_| TcpListener::bind(("127.0.0.1", 0)))
        .map_err(|e| Failure::new(EXIT_OUTPUT, format!("cannot listen on 127.0.0.1: {e}")))?;
    let addr = listener.local_addr().map_err(|e| Failure::new(EXIT_OUTPUT, e.to_string()))?;
    println!("Stairstep is ready: http://{addr}/   (the demo loads by itself; Ctrl-C stops the server)");
    match page {
        Some(p) => println!("Offline use needs no server: open {} in a browser.", p.display()),
        None => println!("Offline use needs no server: open dist/stairstep.html (in the source tree) in a browser."),
    }
    for stream in listener.incoming().flatten() {
        let body = Arc::clone(&body);
        std::thread::spawn(move || {
            let _ = answer(stream, &body);
        });
    }
    Ok(())
}

fn answer(mut stream: TcpStream, page: &[u8]) -> std::io::Result<()> {
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
        ("200 OK", page, "text/html; charset=utf-8")
    } else {
        ("404 Not Found", &b"not found\n"[..], "text/plain")
    };
    write!(
        stream,
        "HTTP/1.1 {status}\r\nContent-Type: {kind}\r\nContent-Length: {}\r\nCache-Control: no-store\r\nConnection: close\r\n\r\n",
        body.len()
    )?;
    stream.write_all(body)
}
