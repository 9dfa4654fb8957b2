//! Blend: the chain's `mix` and a stage's `mix` are equal-gain crossfades, `mix·wet + (1 − mix)·dry`, sample for
//! sample, with the dry signal aligned to the wet one (a clean rate stage's latency applies to both).
//! The reference is the definition itself, evaluated here from separate renders of the wet and the dry chains.

use serde_json::json;
use stairstep::render::render;
use stairstep::Preset;

fn preset(mix: f64, stages: serde_json::Value) -> Preset {
    Preset::from_json(
        &json!({"format": "stairstep-preset", "version": 1, "seed": 3, "mix": mix, "stages": stages}).to_string(),
    )
    .unwrap()
}

fn max_diff(a: &[f32], b: &[f32]) -> f32 {
    assert_eq!(a.len(), b.len());
    a.iter().zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f32::max)
}

#[test]
fn chain_mix_blends_with_the_dry_signal_through_the_rate_stage_alone() {
    let clip = stairstep::demo::demo("chime-loop").unwrap();
    let rate = json!({"kind": "rate", "rate_hz": 8000, "mode": "clean"});
    let crush = json!({"kind": "quantize", "bits": 4, "dither": "tpdf"});
    let wet = render(&preset(1.0, json!([rate, crush])), &clip).unwrap();
    let dry = render(&preset(1.0, json!([rate])), &clip).unwrap();
    assert!(wet.report.latency_frames > 0, "the clean rate stage has latency");
    for mix in [0.0, 0.4, 0.75] {
        let r = render(&preset(mix, json!([rate, crush])), &clip).unwrap();
        for ch in 0..clip.channel_count() {
            let expect: Vec<f32> = wet.export.channels[ch]
                .iter()
                .zip(&dry.export.channels[ch])
                .map(|(&w, &d)| (mix * w as f64 + (1.0 - mix) * d as f64) as f32)
                .collect();
            assert_eq!(r.export.channels[ch], expect, "mix {mix}: export, channel {ch}");
            // The audition is the blended export brought back to the source rate (a linear expander).
            let expect: Vec<f32> = wet.audition.channels[ch]
                .iter()
                .zip(&dry.audition.channels[ch])
                .map(|(&w, &d)| (mix * w as f64 + (1.0 - mix) * d as f64) as f32)
                .collect();
            assert!(max_diff(&r.audition.channels[ch], &expect) < 1e-5, "mix {mix}: audition");
        }
    }
}

#[test]
fn stage_mix_blends_with_the_stage_input() {
    let clip = stairstep::demo::demo("tone").unwrap();
    let gain = json!({"kind": "gain", "gain_db": -3});
    let q = |mix: f64| json!({"kind": "quantize", "bits": 3, "mix": mix});
    let before = render(&preset(1.0, json!([gain])), &clip).unwrap();
    let full = render(&preset(1.0, json!([gain, q(1.0)])), &clip).unwrap();
    let half = render(&preset(1.0, json!([gain, q(0.6)])), &clip).unwrap();
    for ch in 0..clip.channel_count() {
        let expect: Vec<f32> = full.export.channels[ch]
            .iter()
            .zip(&before.export.channels[ch])
            .map(|(&w, &d)| (0.6 * w as f64 + 0.4 * d as f64) as f32)
            .collect();
        assert_eq!(half.export.channels[ch], expect);
    }
}

#[test]
fn mix_is_refused_out_of_range_and_on_the_rate_stage() {
    let bad = |p: serde_json::Value| Preset::from_json(&p.to_string()).unwrap_err().to_string();
    let e = bad(json!({"format": "stairstep-preset", "version": 1, "mix": 1.5}));
    assert!(e.contains("`mix`"), "{e}");
    let e = bad(json!({"format": "stairstep-preset", "version": 1, "stages": [{"kind": "rate", "mix": 0.5}]}));
    assert!(e.contains("stages[0].mix") && e.contains("chain's mix"), "{e}");
    // A full mix is not written out, so presets without a blend keep their JSON.
    let p = preset(1.0, json!([{"kind": "quantize", "bits": 8}]));
    assert!(!p.to_json().contains("mix"));
}
