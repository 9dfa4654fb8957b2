//! Per-stage figures and taps: they only read the signal (the same bytes with and without them), each stage is
//! measured against its own input, and a tap is exactly what the whole chain computes after that stage.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use stairstep::chain::{Chain, ChainOutput};
use stairstep::preset::Preset;
use stairstep::render;
use stairstep::Clip;

fn preset(json_stages: &str) -> Preset {
    Preset::from_json(&format!(r#"{{"format":"stairstep-preset","version":1,"stages":[{json_stages}]}}"#)).unwrap()
}

fn bits(c: &Clip) -> Vec<Vec<u32>> {
    c.channels.iter().map(|ch| ch.iter().map(|v| v.to_bits()).collect()).collect()
}

fn every_kind(mode: &str) -> Preset {
    preset(&format!(
        r#"{{"kind":"gain","gain_db":12,"overflow":"fold"}},{{"kind":"compand","bits":9}},
           {{"kind":"quantize","bits":10,"dither":"tpdf"}},{{"kind":"rate","rate_hz":11025,"mode":"{mode}"}},
           {{"kind":"minifloat"}},{{"kind":"g711"}},{{"kind":"adpcm"}},{{"kind":"quantize","bits":6,"bypass":true}},
           {{"kind":"quantize","bits":5,"dither":"tpdf","shaping":"ewt9"}}"#
    ))
}

/// The per-stage accounting reads the signal only: a chain with it and one without give the same bits.
#[test]
fn stage_figures_change_no_sample() {
    let pad = stairstep::demo::demo("pad").unwrap();
    for mode in ["hold", "clean"] {
        let p = every_kind(mode);
        let with = Chain::new(&p, 2, pad.sample_rate, pad.frames()).unwrap().process_clip(&pad).unwrap();
        let without =
            Chain::new(&p, 2, pad.sample_rate, pad.frames()).unwrap().without_stage_stats().process_clip(&pad).unwrap();
        assert_eq!(bits(&with.export), bits(&without.export), "{mode}: export");
        assert_eq!(bits(&with.audition), bits(&without.audition), "{mode}: audition");
        assert_eq!(with.report.sqnr_db, without.report.sqnr_db);
        let kinds: Vec<&str> = with.report.stages.iter().map(|s| s.kind.as_str()).collect();
        assert_eq!(
            kinds,
            ["gain", "compand", "quantize", "rate", "minifloat", "g711", "adpcm", "quantize", "quantize"]
        );
        for (i, s) in with.report.stages.iter().enumerate() {
            assert_eq!(s.rate_hz, if i < 3 { 48_000 } else { 11_025 }, "stage {i}");
            assert_eq!(s.active, i != 7, "stage {i}");
            assert_eq!(s.sqnr_db.is_some(), i != 7, "stage {i}: {:?}", s.sqnr_db);
            assert_eq!(s.clipped, with.report.clipped_per_stage[i]);
            let quantizer = [1, 2, 4, 5, 8].contains(&i);
            assert_eq!(s.codes_used.is_some(), quantizer, "stage {i}");
            assert!(s.codes_used <= s.code_space, "stage {i}");
        }
        assert_eq!(with.report.stages[7].code_space, None, "a bypassed stage is not built");
        // Without the accounting: kinds and rates, but no figures.
        assert!(without.report.stages.iter().all(|s| s.sqnr_db.is_none() && s.codes_used.is_none()));
        assert_eq!(without.report.stages[2].code_space, Some(1024));
    }
}

/// Fed in odd-sized blocks, the chain gives the same samples and stage figures within rounding (the `f32` partial
/// sums follow the blocks).
#[test]
fn streaming_in_other_blocks_gives_the_same_figures() {
    let pad = stairstep::demo::demo("pad").unwrap();
    let p = every_kind("hold");
    let whole = Chain::new(&p, 2, pad.sample_rate, pad.frames()).unwrap().process_clip(&pad).unwrap();
    let mut c = Chain::new(&p, 2, pad.sample_rate, pad.frames()).unwrap();
    let mut out = ChainOutput::new(2);
    let mut start = 0;
    while start < pad.frames() {
        let end = (start + 1000).min(pad.frames());
        let block: Vec<&[f32]> = pad.channels.iter().map(|ch| &ch[start..end]).collect();
        c.process_block(&block, &mut out);
        start = end;
    }
    let report = c.finish(&mut out);
    assert_eq!(
        out.export.iter().map(|c| c.iter().map(|v| v.to_bits()).collect()).collect::<Vec<Vec<u32>>>(),
        bits(&whole.export)
    );
    for (a, b) in report.stages.iter().zip(&whole.report.stages) {
        assert_eq!(a.codes_used, b.codes_used);
        assert_eq!(a.clipped, b.clipped);
        match (a.sqnr_db, b.sqnr_db) {
            (Some(x), Some(y)) => assert!((x - y).abs() < 1e-3, "{} {x} vs {y}", a.kind),
            (x, y) => assert_eq!(x, y),
        }
    }
}

/// The gain stage is measured against its input times its gain: no overflow, no error; the error is the overflow.
#[test]
fn gain_counts_only_its_overflow() {
    let x: Vec<f32> = (0..48_000).map(|i| (0.3 * (i as f64 * 0.01).sin()) as f32).collect();
    let clip = Clip::new(48_000, vec![x]).unwrap();
    let quiet = render::render(&preset(r#"{"kind":"gain","gain_db":-6}"#), &clip).unwrap();
    assert_eq!(quiet.report.stages[0].sqnr_db, None, "a gain below full scale adds no error");
    assert!(quiet.report.sqnr_db < 10.0, "while the chain's own figure counts the gain as a difference");
    let loud = render::render(&preset(r#"{"kind":"gain","gain_db":12}"#), &clip).unwrap();
    let s = loud.report.stages[0].sqnr_db.unwrap();
    assert!(loud.report.stages[0].clipped > 0 && s > 0.0 && s < 30.0, "{s}");
}

/// A tap is the chain cut after the stage: the last stage's tap is the render's audition; each tap's error is its
/// signal minus the previous tap's; a tap before the rate stage reports the same SQNR as the render's stage figure.
#[test]
fn taps_are_the_chain_cut_after_a_stage() {
    let pad = stairstep::demo::demo("pad").unwrap();
    let p = every_kind("hold");
    let full = render::render(&p, &pad).unwrap();
    let last = render::render_tap(&p, &pad, p.stages.len() - 1).unwrap();
    assert_eq!(bits(&last.signal), bits(&full.audition));
    assert_eq!(bits(&last.at_stage_rate), bits(&full.export));
    let t1 = render::render_tap(&p, &pad, 1).unwrap();
    let t2 = render::render_tap(&p, &pad, 2).unwrap();
    for ch in 0..2 {
        for i in (0..pad.frames()).step_by(97) {
            assert_eq!(t2.error.channels[ch][i], t2.signal.channels[ch][i] - t1.signal.channels[ch][i]);
        }
    }
    let (tap, report) = (t2.sqnr_db.unwrap(), full.report.stages[2].sqnr_db.unwrap());
    assert!((tap - report).abs() < 1e-3, "tap {tap} vs report {report}");
    assert_eq!(t2.at_stage_rate.sample_rate, 48_000);
    // A bypassed stage adds nothing.
    let t7 = render::render_tap(&p, &pad, 7).unwrap();
    assert_eq!(t7.sqnr_db, None);
    assert!(t7.error.channels.iter().flatten().all(|&e| e == 0.0));
    // Out of range: an error naming the range, no panic.
    let e = render::render_tap(&p, &pad, 9).unwrap_err().to_string();
    assert!(e.contains("0 to 8"), "{e}");
}

/// `stairstep render --json` lists the stages; `stairstep analyze --spectrogram` writes a PGM image of the size it
/// reports and refuses to overwrite it.
#[test]
fn cli_reports_stages_and_writes_a_spectrogram() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("in.wav");
    let out = dir.path().join("out.wav");
    let run = |args: &[&std::ffi::OsStr]| std::process::Command::new(common::bin()).args(args).output().unwrap();
    assert!(run(&["demo".as_ref(), "tone".as_ref(), "-o".as_ref(), wav.as_os_str()]).status.success());
    let o = run(&[
        "render".as_ref(),
        "--preset".as_ref(),
        "handheld".as_ref(),
        wav.as_os_str(),
        "-o".as_ref(),
        out.as_os_str(),
        "--json".as_ref(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let stages = v[0]["stages"].as_array().unwrap();
    assert_eq!(stages[0]["kind"], "rate");
    assert_eq!(stages[1]["kind"], "quantize");
    assert_eq!(stages[1]["code_space"], 256);
    assert!(stages[1]["codes_used"].as_u64().unwrap() > 1);
    assert!(stages[1]["sqnr_db"].as_f64().unwrap() > 20.0);
    let pgm = dir.path().join("s.pgm");
    let args = [
        "analyze".as_ref(),
        out.as_os_str(),
        "--spectrogram".as_ref(),
        pgm.as_os_str(),
        "--spectrogram-size".as_ref(),
        "512".as_ref(),
        "--json".as_ref(),
    ];
    let o = run(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let (w, h) = (v["spectrogram"]["frames"].as_u64().unwrap(), v["spectrogram"]["bins"].as_u64().unwrap());
    assert_eq!(h, 257);
    let bytes = std::fs::read(&pgm).unwrap();
    let header = format!("P5\n{w} {h}\n255\n");
    assert!(bytes.starts_with(header.as_bytes()));
    assert_eq!(bytes.len() as u64, header.len() as u64 + w * h);
    let again = run(&args);
    assert_eq!(again.status.code(), Some(4), "an existing image is not overwritten without --force");
}
