//! The real `stairstep` binary on temporary folders.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use std::process::Command;

fn run(args: &[&str], dir: &std::path::Path) -> std::process::Output {
    Command::new(common::bin()).args(args).current_dir(dir).output().expect("run stairstep")
}

#[test]
fn demo_then_render_writes_a_quantized_16_bit_wav() {
    let dir = tempfile::tempdir().unwrap();
    let out = run(&["demo", "tone", "-o", "tone.wav"], dir.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    std::fs::write(
        dir.path().join("p.json"),
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"quantize","bits":4}],"export":{"type":"wav","encoding":"pcm-s16"}}"#,
    )
    .unwrap();
    let out = run(&["render", "--preset", "p.json", "tone.wav", "-o", "crushed.wav"], dir.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    // Read back by libsndfile (Python soundfile): every sample is a multiple of the 4-bit step, 2^(16-4) = 4096.
    let bytes = std::fs::read(dir.path().join("crushed.wav")).unwrap();
    let report = common::run_python(
        "import sys, io, soundfile as sf, numpy as np\n\
         d, r = sf.read(io.BytesIO(sys.stdin.buffer.read()), dtype='int16')\n\
         print(r, len(d), int(np.count_nonzero(d % 4096)), len(np.unique(d)))",
        &bytes,
    );
    let report = String::from_utf8(report).unwrap();
    let f: Vec<&str> = report.split_whitespace().collect();
    assert_eq!(f[0], "48000");
    assert_eq!(f[1], "96000");
    assert_eq!(f[2], "0", "samples off the 4-bit grid");
    assert!(f[3].parse::<u32>().unwrap() <= 16);
}

#[test]
fn never_overwrites_without_force_and_reports_errors_with_exit_codes() {
    let dir = tempfile::tempdir().unwrap();
    assert!(run(&["demo", "-o", "a.wav"], dir.path()).status.success());
    let again = run(&["demo", "-o", "a.wav"], dir.path());
    assert_eq!(again.status.code(), Some(4));
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    assert!(run(&["demo", "-o", "a.wav", "--force"], dir.path()).status.success());

    std::fs::write(
        dir.path().join("bad.json"),
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"quantize","bits":99}]}"#,
    )
    .unwrap();
    let bad = run(&["render", "--preset", "bad.json", "a.wav", "-o", "b.wav"], dir.path());
    assert_eq!(bad.status.code(), Some(2));
    assert!(
        String::from_utf8_lossy(&bad.stderr).contains("stages[0].bits"),
        "{}",
        String::from_utf8_lossy(&bad.stderr)
    );

    std::fs::write(dir.path().join("p.json"), r#"{"format":"stairstep-preset","version":1}"#).unwrap();
    std::fs::write(dir.path().join("junk.wav"), b"not a wav").unwrap();
    let junk = run(&["render", "--preset", "p.json", "junk.wav", "-o", "c.wav"], dir.path());
    assert_eq!(junk.status.code(), Some(3));
    assert!(!dir.path().join("c.wav").exists());
    let onto_input = run(&["render", "--preset", "p.json", "a.wav", "-o", "a.wav", "--force"], dir.path());
    assert_eq!(onto_input.status.code(), Some(4));
    assert_eq!(run(&["no-such-command"], dir.path()).status.code(), Some(2));
}
