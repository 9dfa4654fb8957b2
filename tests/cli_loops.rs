//! Loops that fit every sound of a batch: `prep.loop_region` in seconds from the start or the end, as a fraction of
//! the length, or the file's own loop, through the real binary over folders of sounds of different lengths. The
//! exports' `smpl` chunks are read back by an independent parser (Python's `struct`, not the crate's reader).
#![cfg(not(target_arch = "wasm32"))]

mod common;

use sha2::{Digest, Sha256};
use std::path::Path;
use std::process::{Command, Output};

fn run(args: &[&str], dir: &Path) -> Output {
    Command::new(common::bin()).args(args).current_dir(dir).output().expect("run stairstep")
}

fn text(out: &Output) -> String {
    format!("{}\n{}", String::from_utf8_lossy(&out.stdout), String::from_utf8_lossy(&out.stderr))
}

/// Writes noise WAVs (16-bit, mono) of the given (name, rate, frames) with soundfile, so that the inputs are not
/// written by the code under test.
fn sounds(dir: &Path, list: &[(&str, u32, usize)]) {
    let spec: Vec<String> = list.iter().map(|(n, r, f)| format!("({n:?}, {r}, {f})")).collect();
    // Reference: soundfile (libsndfile) writes plain PCM WAVs without a smpl chunk.
    common::run_python(
        &format!(
            "import numpy as np, soundfile as sf, os\n\
             rng = np.random.default_rng(3)\n\
             for name, rate, frames in [{}]:\n\
             \x20   sf.write(os.path.join({:?}, name), rng.uniform(-0.5, 0.5, frames), rate, subtype='PCM_16', format='WAV')\n",
            spec.join(", "),
            dir.to_str().unwrap()
        ),
        b"",
    );
}

/// A file's name, rate, frames and first `smpl` loop (start, end inclusive, type).
type WavLoop = (String, u64, u64, Option<(u64, u64, u32)>);

/// The first `smpl` loop of each WAV (start, end inclusive, type) and its frame count and rate, parsed with Python's
/// `struct` from the RIFF chunks: an independent reader (soundfile does not expose `smpl`). One line per file:
/// `name rate frames start end type` (`-` when there is no loop).
fn smpl_loops(dir: &Path, names: &[&str]) -> Vec<WavLoop> {
    let list: Vec<String> = names.iter().map(|n| format!("{n:?}")).collect();
    // Reference: the RIFF/WAVE chunk layout (Microsoft Multimedia Programmer's Reference), `smpl` as in its 1994
    // update: 36 bytes of header (num_sample_loops at offset 28), then 24-byte loops (cue id, type, start, end,
    // fraction, play count), end inclusive.
    let out = common::run_python(
        &format!(
            "import struct, os\n\
             for name in [{}]:\n\
             \x20   b = open(os.path.join({:?}, name), 'rb').read()\n\
             \x20   assert b[:4] == b'RIFF' and b[8:12] == b'WAVE'\n\
             \x20   i, rate, block, data, loop = 12, 0, 1, 0, None\n\
             \x20   while i + 8 <= len(b):\n\
             \x20       cid, size = b[i:i+4], struct.unpack('<I', b[i+4:i+8])[0]\n\
             \x20       body = b[i+8:i+8+size]\n\
             \x20       if cid == b'fmt ':\n\
             \x20           _, ch, rate, _, block = struct.unpack('<HHIIH', body[:14])\n\
             \x20       elif cid == b'data':\n\
             \x20           data = size\n\
             \x20       elif cid == b'smpl' and struct.unpack('<I', body[28:32])[0] > 0:\n\
             \x20           _, typ, start, end, _, _ = struct.unpack('<6I', body[36:60])\n\
             \x20           loop = (start, end, typ)\n\
             \x20       i += 8 + size + (size & 1)\n\
             \x20   l = '%d %d %d' % loop if loop else '- - -'\n\
             \x20   print(name, rate, data // block, l)\n",
            list.join(", "),
            dir.to_str().unwrap()
        ),
        b"",
    );
    String::from_utf8(out)
        .unwrap()
        .lines()
        .map(|l| {
            let f: Vec<&str> = l.split(' ').collect();
            let n = |i: usize| f[i].parse::<u64>().ok();
            let lp = n(3).map(|s| (s, n(4).unwrap(), n(5).unwrap() as u32));
            (f[0].to_string(), n(1).unwrap(), n(2).unwrap(), lp)
        })
        .collect()
}

fn preset(loop_region: &str) -> String {
    format!(
        r#"{{"format":"stairstep-preset","version":1,"name":"loops","seed":2,
        "prep":{{"loop_region":{loop_region}}},
        "stages":[{{"kind":"quantize","bits":8,"dither":"tpdf"}}],
        "export":{{"type":"wav","encoding":"pcm-s16"}}}}"#
    )
}

/// Round half away from zero, as the preset docs state.
fn round(x: f64) -> u64 {
    x.round() as u64
}

/// One preset over sounds of different lengths and rates: each export's loop lands where the formula puts it on
/// that sound — start `round(0.25 · rate)`, end `frames − round(0.1 · rate)` (`smpl` holds end − 1) — and a sound
/// too short for it fails alone, named, with exit code 3.
#[test]
fn a_seconds_from_end_loop_fits_every_sound_of_a_batch() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    std::fs::create_dir(dir.join("in")).unwrap();
    let list = [
        ("a.wav", 22_050, 11_025),
        ("b.wav", 44_100, 100_003),
        ("c.wav", 48_000, 30_001),
        ("d.wav", 8_000, 64_321),
        ("e.wav", 11_025, 11_111),
        ("short.wav", 44_100, 14_000), // 0.317 s: start at 0.25 s is after the end at 0.217 s
    ];
    sounds(&dir.join("in"), &list);
    std::fs::write(
        dir.join("p.json"),
        preset(r#"{"start":{"seconds":0.25},"end":{"seconds_from_end":0.1},"crossfade_ms":5}"#),
    )
    .unwrap();
    let out = run(&["render", "--preset", "p.json", "in", "--out-dir", "out", "--json"], dir);
    assert_eq!(out.status.code(), Some(3), "{}", text(&out));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = report.as_array().unwrap();
    assert_eq!(rows.len(), list.len());
    let short = rows.iter().find(|r| r["input"].as_str().unwrap().ends_with("short.wav")).unwrap();
    assert_eq!(short["ok"], false);
    let e = short["error"].as_str().unwrap();
    assert!(e.contains("prep.loop_region") && e.contains("14000 frames") && e.contains("44100 Hz"), "{e}");
    assert!(e.contains(r#"{"seconds":0.25}..{"seconds_from_end":0.1}"#), "{e}");
    assert!(!dir.join("out/short.wav").exists());
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.contains("short.wav") && stderr.contains("5 rendered") && stderr.contains("1 failed"), "{stderr}");

    let names: Vec<&str> = list.iter().map(|l| l.0).filter(|n| *n != "short.wav").collect();
    let loops = smpl_loops(&dir.join("out"), &names);
    assert_eq!(loops.len(), names.len());
    for ((name, rate, frames), (got_name, got_rate, got_frames, lp)) in
        list.iter().filter(|l| l.0 != "short.wav").zip(&loops)
    {
        assert_eq!((name.to_string(), *rate as u64, *frames as u64), (got_name.clone(), *got_rate, *got_frames));
        let start = round(0.25 * *rate as f64);
        let end = *frames as u64 - round(0.1 * *rate as f64);
        assert_eq!(*lp, Some((start, end - 1, 0)), "{name}: {rate} Hz, {frames} frames");
    }
}

/// Fractions of the length, and halves rounding away from zero: 0.5 of 11,025 frames is 5,512.5, so 5,513.
#[test]
fn a_fraction_loop_rounds_half_away_from_zero() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    std::fs::create_dir(dir.join("in")).unwrap();
    sounds(&dir.join("in"), &[("odd.wav", 22_050, 11_025), ("even.wav", 16_000, 20_000)]);
    std::fs::write(dir.join("p.json"), preset(r#"{"start":{"fraction":0.5},"end":{"fraction":1}}"#)).unwrap();
    let out = run(&["render", "--preset", "p.json", "in", "--out-dir", "out", "--quiet"], dir);
    assert!(out.status.success(), "{}", text(&out));
    let loops = smpl_loops(&dir.join("out"), &["odd.wav", "even.wav"]);
    assert_eq!(loops[0].3, Some((5_513, 11_024, 0)));
    assert_eq!(loops[1].3, Some((10_000, 19_999, 0)));
}

/// `"file"`: the input's own `smpl` loop, kept with a crossfade; a file without one fails (exit 3, named) unless
/// `"if_missing": "warn"`, which renders it without a loop and warns (and so fails under `--strict`).
#[test]
fn the_files_own_loop_and_a_file_without_one() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    std::fs::create_dir(dir.join("in")).unwrap();
    std::fs::copy(common::root().join("tests/fixtures/smpl-loop-s16-mono-22050.wav"), dir.join("in/looped.wav"))
        .unwrap();
    sounds(&dir.join("in"), &[("plain.wav", 22_050, 30_000)]);
    let own = smpl_loops(&dir.join("in"), &["looped.wav"])[0].3.expect("the fixture has a loop");

    std::fs::write(dir.join("file.json"), preset(r#""file""#)).unwrap();
    let out = run(&["render", "--preset", "file.json", "in", "--out-dir", "a", "--json"], dir);
    assert_eq!(out.status.code(), Some(3), "{}", text(&out));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let plain =
        report.as_array().unwrap().iter().find(|r| r["input"].as_str().unwrap().ends_with("plain.wav")).unwrap();
    let e = plain["error"].as_str().unwrap();
    assert!(e.contains("prep.loop_region") && e.contains("has none"), "{e}");
    assert_eq!(smpl_loops(&dir.join("a"), &["looped.wav"])[0].3, Some(own), "the file's loop, unchanged");

    std::fs::write(dir.join("warn.json"), preset(r#"{"from":"file","crossfade_ms":0.5,"if_missing":"warn"}"#)).unwrap();
    let out = run(&["render", "--preset", "warn.json", "in", "--out-dir", "b", "--json"], dir);
    assert!(out.status.success(), "{}", text(&out));
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        stderr.contains("warn") && stderr.contains("plain.wav") && stderr.contains("no loop of its own"),
        "{stderr}"
    );
    let loops = smpl_loops(&dir.join("b"), &["looped.wav", "plain.wav"]);
    assert_eq!(loops[0].3, Some(own));
    assert_eq!(loops[1].3, None);
    let out = run(&["render", "--preset", "warn.json", "in", "--out-dir", "c", "--strict"], dir);
    assert_eq!(out.status.code(), Some(3), "{}", text(&out));
}

fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes).iter().map(|b| format!("{b:02x}")).collect()
}

/// The original integer form (and a file's loop kept when the preset sets none) gives the bytes it gave before
/// relative loops existed: the hashes were taken from the previous release's binary on the same inputs.
#[test]
fn the_integer_form_gives_the_same_bytes_as_before() {
    let t = tempfile::tempdir().unwrap();
    let dir = t.path();
    assert!(run(&["demo", "chime-loop", "-o", "chime.wav"], dir).status.success());
    std::fs::copy(common::root().join("tests/fixtures/smpl-loop-s16-mono-22050.wav"), dir.join("looped.wav")).unwrap();
    let engine = common::root().join("examples/presets/engine-loop.json");
    std::fs::write(
        dir.join("int.json"),
        r#"{"format":"stairstep-preset","version":1,"name":"int","seed":4,
        "prep":{"trim":{"threshold_dbfs":-70,"margin_ms":5},"loop_region":{"start":4410,"end":30000,"crossfade_ms":12}},
        "stages":[{"kind":"rate","rate_hz":11025},{"kind":"quantize","bits":8,"dither":"tpdf"}],
        "export":{"type":"wav","encoding":"ima-adpcm"}}"#,
    )
    .unwrap();
    std::fs::write(
        dir.join("none.json"),
        r#"{"format":"stairstep-preset","version":1,"name":"none","seed":4,
        "stages":[{"kind":"rate","rate_hz":8000},{"kind":"quantize","bits":8}],
        "export":{"type":"wav","encoding":"pcm-u8"}}"#,
    )
    .unwrap();
    for (preset, input, want) in [
        (engine.to_str().unwrap(), "chime.wav", EXPECT_ENGINE),
        ("int.json", "chime.wav", EXPECT_INT),
        ("none.json", "looped.wav", EXPECT_FILE_LOOP),
    ] {
        let out = run(&["render", "--preset", preset, input, "-o", "out.wav", "--force"], dir);
        assert!(out.status.success(), "{preset}: {}", text(&out));
        assert_eq!(sha256_hex(&std::fs::read(dir.join("out.wav")).unwrap()), want, "{preset} on {input}");
    }
}

const EXPECT_ENGINE: &str = "a2aa5477079b8bec2b4ab495938d1b1e2a59696cfd21426f011d4f8528d481e2";
const EXPECT_INT: &str = "12a1cea29e6179aca703e649a25d196660a3807117355c90efec505659a41a63";
const EXPECT_FILE_LOOP: &str = "43d541a92182abeb70b456177be728724738a32f1977cc9bfb9d7106a31545b2";
