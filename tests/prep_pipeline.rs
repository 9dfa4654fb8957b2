//! Asset preparation through the whole pipeline: preset → CLI → file, checked by an independent RIFF reader.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use std::path::Path;
use std::process::Command;

fn run(args: &[&str], dir: &Path) -> std::process::Output {
    Command::new(common::bin()).args(args).current_dir(dir).output().expect("run stairstep")
}

/// Python's standard `chunk` module (an independent RIFF reader) walks the file and prints the `smpl` loops and the
/// `fmt ` rate and frame count.
fn riff_summary(bytes: &[u8]) -> String {
    let out = common::run_python(
        "import sys, io, chunk, struct, warnings\n\
         warnings.simplefilter('ignore')\n\
         f = io.BytesIO(sys.stdin.buffer.read())\n\
         riff = chunk.Chunk(f, bigendian=False)\n\
         assert riff.getname() == b'RIFF' and riff.read(4) == b'WAVE'\n\
         res = []\n\
         while True:\n\
         \x20   try: c = chunk.Chunk(riff, bigendian=False)\n\
         \x20   except EOFError: break\n\
         \x20   body = c.read()\n\
         \x20   if c.getname() == b'fmt ': res.append('rate %d ch %d bits %d' % (struct.unpack('<I', body[4:8])[0], struct.unpack('<H', body[2:4])[0], struct.unpack('<H', body[14:16])[0]))\n\
         \x20   if c.getname() == b'data': res.append('data %d' % len(body))\n\
         \x20   if c.getname() == b'smpl':\n\
         \x20       n = struct.unpack('<I', body[28:32])[0]\n\
         \x20       for i in range(n):\n\
         \x20           cue, typ, start, end, frac, count = struct.unpack('<6I', body[36 + 24 * i: 60 + 24 * i])\n\
         \x20           res.append('loop %d %d type %d' % (start, end, typ))\n\
         print('; '.join(res))",
        bytes,
    );
    String::from_utf8(out).unwrap().trim().to_string()
}

/// A stereo 44.1 kHz "engine" sound with silence at both ends, written as 16-bit WAV by the library.
fn engine(dir: &Path) {
    let rate = 44_100usize;
    let (lead, body, tail) = (rate / 2, rate * 4, rate / 2);
    let mut l = vec![0f32; lead];
    let mut r = vec![0f32; lead];
    for i in 0..body {
        let t = i as f64 / rate as f64;
        let v =
            0.3 * (2.0 * std::f64::consts::PI * 55.0 * t).sin() + 0.1 * (2.0 * std::f64::consts::PI * 110.0 * t).sin();
        l.push(v as f32);
        r.push((v * 0.8) as f32);
    }
    l.extend(vec![0f32; tail]);
    r.extend(vec![0f32; tail]);
    let clip = stairstep::Clip::new(44_100, vec![l, r]).unwrap();
    std::fs::write(dir.join("engine.wav"), stairstep::io::ExportFormat::default().encode(&clip).unwrap()).unwrap();
}

/// The README's batch example: a mono, trimmed, normalised, looped 8-bit asset at 11,025 Hz.
#[test]
fn readme_example_makes_a_mono_trimmed_normalised_looped_8_bit_asset() {
    let t = tempfile::tempdir().unwrap();
    engine(t.path());
    let preset = common::root().join("examples/presets/engine-loop.json");
    let out = run(
        &["render", "--preset", preset.to_str().unwrap(), "engine.wav", "-o", "engine-8bit.wav", "--json"],
        t.path(),
    );
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let bytes = std::fs::read(t.path().join("engine-8bit.wav")).unwrap();
    let summary = riff_summary(&bytes);
    assert!(summary.starts_with("rate 11025 ch 1 bits 8"), "{summary}");
    // Trim removes the silent half-seconds bar a 5 ms margin; the loop moves with the trim: source frames
    // 44,100..132,300 minus the trimmed lead, then to 11,025 Hz (exactly a quarter).
    let lib = stairstep::render::render(
        &stairstep::Preset::from_json(&std::fs::read_to_string(&preset).unwrap()).unwrap(),
        &stairstep::io::wav::read(&std::fs::read(t.path().join("engine.wav")).unwrap()).unwrap(),
    )
    .unwrap();
    let prep = lib.prep.as_ref().unwrap();
    let trimmed = prep.trimmed_start_frames as u64;
    // Half a second of silence less a 5 ms margin (220 frames at 44.1 kHz).
    assert!((21_820..=21_840).contains(&trimmed), "{trimmed}");
    let (s, e) = (44_100 - trimmed, 132_300 - trimmed);
    let want = format!("loop {} {} type 0", s.div_ceil(4), e.div_ceil(4) - 1);
    assert!(summary.contains(&want), "{summary} lacks {want}");
    assert_eq!(report[0]["loop_frames"][0].as_u64().unwrap(), s.div_ceil(4));
    // Normalised to −1 dBFS before the 8-bit stage: the export's peak is within a step and a dither of it.
    let back = stairstep::io::wav::read(&bytes).unwrap();
    let peak = stairstep::analysis::Levels::measure(&back.channels).peak_dbfs;
    assert!((peak + 1.0).abs() < 0.3, "peak {peak}");
    assert_eq!(bytes, lib.encode(&lib_export()).unwrap(), "CLI and library agree");
    // The fade-in starts at exactly zero.
    assert_eq!(lib.prepared.as_ref().unwrap().channels[0][0], 0.0);
}

fn lib_export() -> stairstep::io::ExportFormat {
    stairstep::io::ExportFormat::Wav { encoding: stairstep::io::WavEncoding::PcmU8, block_align: None }
}

/// A loop in the input's own `smpl` chunk is carried to the export, rescaled exactly; for IMA ADPCM it is snapped to
/// whole blocks (505 samples each at the default block size).
#[test]
fn a_loop_from_the_input_file_is_kept_rescaled_and_snapped_for_adpcm() {
    let t = tempfile::tempdir().unwrap();
    let n = 44_100 * 3;
    let x: Vec<f32> = (0..n).map(|i| ((i as f32) * 0.05).sin() * 0.5).collect();
    let clip = stairstep::Clip::new(44_100, vec![x]).unwrap();
    let meta = stairstep::io::ExportMeta {
        loops: vec![stairstep::io::SampleLoop::forward(8_820, 88_199)],
        ..Default::default()
    };
    let wav = stairstep::io::ExportFormat::default().encode_with(&clip, &meta).unwrap();
    assert!(riff_summary(&wav).contains("loop 8820 88199"));
    std::fs::write(t.path().join("in.wav"), wav).unwrap();
    std::fs::write(
        t.path().join("p.json"),
        r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"rate","rate_hz":11025}],"export":{"type":"wav","encoding":"pcm-u8"}}"#,
    )
    .unwrap();
    assert!(run(&["render", "--preset", "p.json", "in.wav", "-o", "u8.wav"], t.path()).status.success());
    // 8,820..88,200 (exclusive) at a quarter of the rate: 2,205..22,050, smpl end inclusive 22,049.
    let s = riff_summary(&std::fs::read(t.path().join("u8.wav")).unwrap());
    assert!(s.contains("loop 2205 22049 type 0"), "{s}");
    let adpcm = r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"rate","rate_hz":11025}],"export":{"type":"wav","encoding":"ima-adpcm"}}"#;
    std::fs::write(t.path().join("a.json"), adpcm).unwrap();
    assert!(run(&["render", "--preset", "a.json", "in.wav", "-o", "a.wav"], t.path()).status.success());
    let s = riff_summary(&std::fs::read(t.path().join("a.wav")).unwrap());
    // Nearest block boundaries: 2,205 → 2,020 (4 × 505), 22,050 → 22,220 (44 × 505); end inclusive.
    assert!(s.contains("loop 2020 22219 type 0"), "{s}");
}

/// A malformed `smpl` chunk in an input is reported and ignored; the file still renders.
#[test]
fn a_malformed_smpl_chunk_is_a_warning_not_a_failure() {
    let t = tempfile::tempdir().unwrap();
    let clip = stairstep::Clip::new(8_000, vec![vec![0.25f32; 800]]).unwrap();
    let mut wav = stairstep::io::ExportFormat::default().encode(&clip).unwrap();
    // Append a `smpl` chunk that claims three loops but holds none, and fix the RIFF size.
    let mut smpl = vec![0u8; 36];
    smpl[28..32].copy_from_slice(&3u32.to_le_bytes());
    wav.extend_from_slice(b"smpl");
    wav.extend_from_slice(&(smpl.len() as u32).to_le_bytes());
    wav.extend_from_slice(&smpl);
    let riff = (wav.len() - 8) as u32;
    wav[4..8].copy_from_slice(&riff.to_le_bytes());
    std::fs::write(t.path().join("odd.wav"), wav).unwrap();
    std::fs::write(t.path().join("p.json"), r#"{"format":"stairstep-preset","version":1}"#).unwrap();
    let out = run(&["render", "--preset", "p.json", "odd.wav", "-o", "o.wav", "--json"], t.path());
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let w = v[0]["warnings"].as_array().expect("a warning");
    assert!(w.iter().any(|w| w.as_str().unwrap().contains("smpl")), "{v}");
}

/// Bad loop and trim parameters are errors naming the values, and nothing is written.
#[test]
fn bad_loops_and_empty_trims_are_clear_errors() {
    let t = tempfile::tempdir().unwrap();
    engine(t.path());
    for (prep, needle) in [
        (r#"{"loop_region":{"start":500,"end":100}}"#, "loop_region"),
        (r#"{"loop_region":{"start":0,"end":99999999}}"#, "loop_region"),
        (r#"{"trim":{"threshold_dbfs":-1}}"#, "threshold"),
    ] {
        let p = format!(r#"{{"format":"stairstep-preset","version":1,"prep":{prep}}}"#);
        std::fs::write(t.path().join("p.json"), p).unwrap();
        let out = run(&["render", "--preset", "p.json", "engine.wav", "-o", "x.wav"], t.path());
        // Checked when the preset is read (exit 2) or against the sound (exit 3).
        assert!(matches!(out.status.code(), Some(2) | Some(3)), "{prep}");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(needle), "{prep}: {err}");
        assert!(!t.path().join("x.wav").exists());
    }
}
