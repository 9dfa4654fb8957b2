//! Shared helpers for integration tests: the pinned Python reference libraries and the real binary.
#![allow(dead_code)]

pub mod alloc;
pub mod libsndfile;

use std::io::Write;
use std::path::PathBuf;
use std::process::{Command, Stdio};

/// Root of the repository.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// The project's Python with the pinned reference libraries (numpy, scipy, soundfile, pyloudnorm, audioop).
pub fn python() -> PathBuf {
    let p = root().join(".venv/bin/python");
    assert!(p.exists(), "{} is missing: run scripts/setup.sh (the README's test command does)", p.display());
    p
}

/// Runs a Python snippet with `stdin` as input and returns its standard output; panics with its stderr on failure.
pub fn run_python(code: &str, stdin: &[u8]) -> Vec<u8> {
    let mut child = Command::new(python())
        .arg("-c")
        .arg(code)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start python");
    child.stdin.take().unwrap().write_all(stdin).unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(out.status.success(), "python failed:\n{}", String::from_utf8_lossy(&out.stderr));
    out.stdout
}

/// Path of the `stairstep` binary built for these tests.
pub fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_stairstep"))
}

/// The bodies of the `fmt ` and `data` chunks of a WAV file, by a plain walk of its chunks (the files read here are
/// well formed: libsndfile's or ours).
pub fn wav_chunks(file: &[u8]) -> (Vec<u8>, Vec<u8>) {
    let (mut fmt, mut data) = (Vec::new(), Vec::new());
    let mut pos = 12;
    while pos + 8 <= file.len() {
        let size = u32::from_le_bytes(file[pos + 4..pos + 8].try_into().unwrap()) as usize;
        let body = file[pos + 8..(pos + 8 + size).min(file.len())].to_vec();
        match &file[pos..pos + 4] {
            b"fmt " => fmt = body,
            b"data" => data = body,
            _ => {}
        }
        pos += 8 + size + (size & 1);
    }
    (fmt, data)
}
