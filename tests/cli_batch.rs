//! `stairstep render` over folders, `analyze`, `sweep`, `presets`: the real binary on temporary folders.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use std::path::Path;
use std::process::{Command, Output};

fn run(args: &[&str], dir: &Path) -> Output {
    Command::new(common::bin()).args(args).current_dir(dir).output().expect("run stairstep")
}

fn ok(out: &Output) {
    assert!(out.status.success(), "{}\n{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr));
}

const PRESET: &str = r#"{"format":"stairstep-preset","version":1,"name":"Batch Test","seed":5,
  "stages":[{"kind":"rate","rate_hz":11025},{"kind":"quantize","bits":8,"dither":"tpdf"}],
  "export":{"type":"wav","encoding":"pcm-u8"}}"#;

fn folder_with_sounds(dir: &Path) {
    std::fs::create_dir_all(dir.join("in/sub")).unwrap();
    for (name, demo) in [("in/a.wav", "tone"), ("in/b.wav", "drum-hit"), ("in/sub/c.wav", "sweep")] {
        ok(&run(&["demo", demo, "-o", name], dir));
    }
    std::fs::write(dir.join("in/broken.wav"), b"RIFF\x04\x00\x00\x00WAVE").unwrap();
    std::fs::write(dir.join("in/notes.txt"), b"not a sound").unwrap();
    std::fs::write(dir.join("p.json"), PRESET).unwrap();
}

#[test]
fn batch_continues_past_bad_files_reports_them_and_exits_non_zero() {
    let t = tempfile::tempdir().unwrap();
    folder_with_sounds(t.path());
    let out = run(&["render", "--preset", "p.json", "in", "--recursive", "--out-dir", "out", "--json"], t.path());
    assert_eq!(out.status.code(), Some(3), "{}", String::from_utf8_lossy(&out.stderr));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = report.as_array().unwrap();
    assert_eq!(rows.len(), 4, "three sounds and the broken one; the .txt is not a WAV");
    let broken = rows.iter().find(|r| r["input"].as_str().unwrap().ends_with("broken.wav")).unwrap();
    assert_eq!(broken["ok"], false);
    assert!(broken["error"].as_str().unwrap().contains("fmt"), "{broken}");
    for r in rows.iter().filter(|r| r["ok"] == true) {
        let size = std::fs::metadata(t.path().join(r["output"].as_str().unwrap())).unwrap().len();
        assert_eq!(r["bytes"].as_u64().unwrap(), size);
        assert!(r["duration_s"].as_f64().unwrap() > 0.5);
        assert!(r["sqnr_db"].as_f64().unwrap().is_finite());
    }
    assert!(t.path().join("out/a.wav").exists());
    assert!(t.path().join("out/sub/c.wav").exists(), "{{dir}} keeps the sub-folder");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("3 rendered, 0 up to date, 1 failed") && stderr.contains("broken.wav"), "{stderr}");
}

#[test]
fn refuses_to_overwrite_without_force_and_replaces_with_it() {
    let t = tempfile::tempdir().unwrap();
    folder_with_sounds(t.path());
    std::fs::remove_file(t.path().join("in/broken.wav")).unwrap();
    ok(&run(&["render", "--preset", "p.json", "in", "--out-dir", "out", "--quiet"], t.path()));
    let before = std::fs::read(t.path().join("out/a.wav")).unwrap();
    std::fs::write(t.path().join("out/a.wav"), b"keep me").unwrap();
    let again = run(&["render", "--preset", "p.json", "in", "--out-dir", "out"], t.path());
    assert_ne!(again.status.code(), Some(0));
    assert_eq!(std::fs::read(t.path().join("out/a.wav")).unwrap(), b"keep me");
    assert!(String::from_utf8_lossy(&again.stderr).contains("--force"));
    ok(&run(&["render", "--preset", "p.json", "in", "--out-dir", "out", "--force", "--quiet"], t.path()));
    assert_eq!(std::fs::read(t.path().join("out/a.wav")).unwrap(), before);
    // Two inputs onto one output name is refused before anything is written.
    let clash = run(&["render", "--preset", "p.json", "in", "--out-dir", "flat", "--name", "same.wav"], t.path());
    assert_eq!(clash.status.code(), Some(2));
    assert!(!t.path().join("flat").exists());
}

#[test]
fn parallel_batch_equals_single_threaded_and_the_library() {
    let t = tempfile::tempdir().unwrap();
    folder_with_sounds(t.path());
    std::fs::remove_file(t.path().join("in/broken.wav")).unwrap();
    ok(&run(&["render", "--preset", "p.json", "in", "-r", "--out-dir", "par", "--quiet"], t.path()));
    ok(&run(&["render", "--preset", "p.json", "in", "-r", "--out-dir", "one", "--jobs", "1", "--quiet"], t.path()));
    let preset = stairstep::Preset::from_json(PRESET).unwrap();
    for f in ["a.wav", "b.wav", "sub/c.wav"] {
        let par = std::fs::read(t.path().join("par").join(f)).unwrap();
        assert_eq!(par, std::fs::read(t.path().join("one").join(f)).unwrap(), "{f}");
        let input = stairstep::io::wav::read(&std::fs::read(t.path().join("in").join(f)).unwrap()).unwrap();
        let lib = preset.export.encode(&stairstep::render::render(&preset, &input).unwrap().export).unwrap();
        assert_eq!(par, lib, "{f}: CLI and library differ");
    }
}

#[test]
fn name_template_and_format_override() {
    let t = tempfile::tempdir().unwrap();
    folder_with_sounds(t.path());
    let out = run(
        &[
            "render",
            "--preset",
            "p.json",
            "in/a.wav",
            "--out-dir",
            "o",
            "--name",
            "{stem}-{preset}.{ext}",
            "--format",
            r#"{"type":"c-array","element":"uint8","name":"blip"}"#,
            "--quiet",
        ],
        t.path(),
    );
    ok(&out);
    let text = std::fs::read_to_string(t.path().join("o/a-batch-test.h")).unwrap();
    assert!(text.contains("blip"), "{text:.200}");
    let bad =
        run(&["render", "--preset", "p.json", "in/a.wav", "-o", "x.wav", "--format", r#"{"type":"nope"}"#], t.path());
    assert_eq!(bad.status.code(), Some(2));
}

/// Kill the process mid-write: the output either does not exist or is complete (outputs are renamed into place only
/// when fully written).
#[test]
fn an_interrupted_render_leaves_no_partial_output() {
    let t = tempfile::tempdir().unwrap();
    // A long input: 40 s stereo at 48 kHz, written by the library (not the CLI, to keep the test quick).
    let n = 48_000 * 40;
    let ch: Vec<f32> = (0..n).map(|i| ((i as f32) * 0.01).sin() * 0.5).collect();
    let clip = stairstep::Clip::new(48_000, vec![ch.clone(), ch]).unwrap();
    std::fs::write(t.path().join("long.wav"), stairstep::io::ExportFormat::default().encode(&clip).unwrap()).unwrap();
    std::fs::write(
        t.path().join("slow.json"),
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"rate","rate_hz":44100,"mode":"clean"},{"kind":"quantize","bits":12,"dither":"tpdf","shaping":"ewt9"}],"export":{"type":"wav","encoding":"pcm-s24"}}"#,
    )
    .unwrap();
    for delay_ms in [50u64, 300, 900] {
        let out = t.path().join(format!("out-{delay_ms}.wav"));
        let mut child = Command::new(common::bin())
            .args(["render", "--preset", "slow.json", "long.wav", "-o"])
            .arg(&out)
            .current_dir(t.path())
            .spawn()
            .unwrap();
        std::thread::sleep(std::time::Duration::from_millis(delay_ms));
        let _ = child.kill();
        let _ = child.wait();
        if out.exists() {
            let back = stairstep::io::wav::read(&std::fs::read(&out).unwrap()).unwrap();
            assert_eq!(back.frames(), 44_100 * 40, "a complete file or none");
        }
    }
}

#[test]
fn analyze_and_sweep_print_json_that_scripts_can_read() {
    let t = tempfile::tempdir().unwrap();
    ok(&run(&["demo", "tone", "-o", "tone.wav"], t.path()));
    std::fs::write(
        t.path().join("q.json"),
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"quantize","bits":8}]}"#,
    )
    .unwrap();
    ok(&run(&["render", "--preset", "q.json", "tone.wav", "-o", "q.wav"], t.path()));
    let a = run(&["analyze", "q.wav", "--reference", "tone.wav", "--json"], t.path());
    ok(&a);
    let v: serde_json::Value = serde_json::from_slice(&a.stdout).unwrap();
    assert_eq!(v["sample_rate"], 48_000);
    assert!((v["levels"]["peak_dbfs"].as_f64().unwrap() + 6.02).abs() < 0.1, "{v}");
    assert!((v["spectrum"]["peaks"][0]["hz"].as_f64().unwrap() - 997.0).abs() < 12.0);
    // 8-bit rounding of a −6 dBFS sine: about 6.02·8 + 1.76 − 6.02 ≈ 43.9 dB.
    let sqnr = v["sqnr_db"].as_f64().unwrap();
    assert!((sqnr - 43.9).abs() < 1.0, "{sqnr}");
    let s = run(&["sweep", "tone.wav", "--json"], t.path());
    ok(&s);
    let pts: serde_json::Value = serde_json::from_slice(&s.stdout).unwrap();
    assert_eq!(pts.as_array().unwrap().len(), 24);
    let text = run(&["sweep", "tone.wav"], t.path());
    assert!(String::from_utf8_lossy(&text.stdout).contains("measured dB"));
    let presets = run(&["presets"], t.path());
    assert!(String::from_utf8_lossy(&presets.stdout).contains("handheld"));
    let one = run(&["presets", "handheld"], t.path());
    stairstep::Preset::from_json(&String::from_utf8_lossy(&one.stdout)).unwrap();
    // A built-in preset by name.
    ok(&run(&["render", "--preset", "handheld", "tone.wav", "-o", "h.wav"], t.path()));
    let bad = run(&["analyze", "q.wav", "--reference", "h.wav"], t.path());
    assert_eq!(bad.status.code(), Some(3), "{}", String::from_utf8_lossy(&bad.stderr));
}

/// Two sounds with one stem in one folder (a.wav and a.flac): the default name is refused before anything is written,
/// with a template that tells them apart; `{input_ext}` does, and both are rendered.
#[test]
fn inputs_with_one_stem_need_the_input_extension_in_the_name() {
    let t = tempfile::tempdir().unwrap();
    folder_with_sounds(t.path());
    std::fs::remove_file(t.path().join("in/broken.wav")).unwrap();
    // A copy of a.wav under another extension: the reader goes by content, as for any misnamed file.
    std::fs::copy(t.path().join("in/a.wav"), t.path().join("in/a.wave")).unwrap();
    let clash = run(&["render", "--preset", "p.json", "--recursive", "in", "--out-dir", "o"], t.path());
    assert_eq!(clash.status.code(), Some(2));
    let msg = String::from_utf8_lossy(&clash.stderr);
    assert!(msg.contains("would both be written to") && msg.contains("{input_ext}"), "{msg}");
    assert!(!t.path().join("o").join("a.wav").exists());
    let out = run(
        &[
            "render",
            "--preset",
            "p.json",
            "--recursive",
            "in",
            "--out-dir",
            "o",
            "--name",
            "{dir}/{stem}-{input_ext}.{ext}",
        ],
        t.path(),
    );
    ok(&out);
    let (a, b) =
        (std::fs::read(t.path().join("o/a-wav.wav")).unwrap(), std::fs::read(t.path().join("o/a-wave.wav")).unwrap());
    assert_eq!(a, b, "the same sound under two names renders to the same bytes");
    assert!(t.path().join("o/sub/c-wav.wav").exists());
}
