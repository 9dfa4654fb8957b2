//! The chain: rates, alignment, streaming in blocks, bypass, validation.
#![cfg(not(target_arch = "wasm32"))]

use stairstep::analysis::spectrum::peak_bin;
use stairstep::analysis::{SpectrumAnalyzer, Window};
use stairstep::chain::{Chain, ChainOutput};
use stairstep::preset::{Preset, StageSlot};
use stairstep::render;
use stairstep::stages::quantize::QuantizeParams;
use stairstep::stages::rate::{self, RateParams};
use stairstep::stages::{StageSpec, BLOCK};
use stairstep::Clip;

fn tone(rate: u32, hz: f64, amp: f64, n: usize) -> Vec<f32> {
    (0..n).map(|i| (amp * (2.0 * std::f64::consts::PI * hz * i as f64 / rate as f64).sin()) as f32).collect()
}

fn preset(stages: Vec<StageSpec>) -> Preset {
    Preset::with_stages("t", stages)
}

#[test]
fn hold_to_a_quarter_rate_exports_every_fourth_sample_quantized() {
    let x = tone(44_100, 440.0, 0.8, 10_001);
    let clip = Clip::new(44_100, vec![x.clone()]).unwrap();
    let p = preset(vec![StageSpec::Rate(RateParams::hold(11_025)), StageSpec::Quantize(QuantizeParams::bits(8))]);
    let r = render::render(&p, &clip).unwrap();
    assert_eq!(r.export.sample_rate, 11_025);
    assert_eq!(r.export.frames(), 2501); // ⌈10001 / 4⌉
    for (k, &y) in r.export.channels[0].iter().enumerate() {
        assert_eq!(y, (x[4 * k] * 128.0).round().clamp(-128.0, 127.0) / 128.0, "sample {k}");
    }
    // The audition holds each export sample for four source samples, aligned with the input.
    assert_eq!(r.audition.frames(), 10_001);
    for (j, &a) in r.audition.channels[0].iter().enumerate() {
        assert_eq!(a, r.export.channels[0][j / 4]);
    }
}

/// Aliasing, handbook: a tone at f above the new Nyquist frequency folds to |f − fs|. 5 kHz held down to 8 kHz shows
/// up at 3 kHz; the clean mode removes it (≥ 60 dB down).
#[test]
fn aliasing_through_the_chain() {
    let clip = Clip::new(48_000, vec![tone(48_000, 5_000.0, 0.5, 48_000)]).unwrap();
    let mut a = SpectrumAnalyzer::new(1024, Window::BlackmanHarris).unwrap();
    let held = render::render(&preset(vec![StageSpec::Rate(RateParams::hold(8_000))]), &clip).unwrap();
    let (k, level) = peak_bin(&a.analyze(&held.export.channels));
    assert!((a.bin_hz(k, 8_000) - 3_000.0).abs() <= a.bin_hz(1, 8_000), "alias at {} Hz", a.bin_hz(k, 8_000));
    assert!(level > -7.0, "alias level {level}");
    let clean = render::render(&preset(vec![StageSpec::Rate(RateParams::clean(8_000))]), &clip).unwrap();
    let (_, level) = peak_bin(&a.analyze(&clean.export.channels));
    assert!(level < -6.0 - 60.0, "clean mode leaves {level} dBFS");
}

#[test]
fn clean_mode_export_and_audition_line_up_with_the_input() {
    let x = tone(48_000, 1_000.0, 0.5, 30_000);
    let clip = Clip::new(48_000, vec![x.clone()]).unwrap();
    let params = RateParams::clean(8_000);
    let r = render::render(&preset(vec![StageSpec::Rate(params.clone())]), &clip).unwrap();
    assert_eq!(r.export.channels[0], rate::reduce(&params, 48_000, &x).unwrap());
    assert_eq!(r.audition.frames(), x.len());
    assert!(r.report.latency_frames > 0);
    // A 1 kHz tone passes the 4 kHz band untouched: the aligned error is tiny away from the ends.
    let err: f64 = r.audition.channels[0][3000..27_000]
        .iter()
        .zip(&x[3000..27_000])
        .map(|(a, b)| (a - b).abs() as f64)
        .fold(0.0, f64::max);
    assert!(err < 1e-4, "aligned error {err}");
    // Over the whole clip the abrupt start and end of the tone (broadband clicks the filter removes) dominate.
    assert!(r.report.sqnr_db > 45.0, "{}", r.report.sqnr_db);
}

#[test]
fn any_block_sizes_give_the_same_samples_as_one_render() {
    let n = 20_000;
    let clip = Clip::new(48_000, vec![tone(48_000, 300.0, 0.7, n), tone(48_000, 1234.0, 0.4, n)]).unwrap();
    for rate in [RateParams::hold(7_300), RateParams::clean(11_025)] {
        let p = preset(vec![
            StageSpec::Quantize(QuantizeParams {
                dither: stairstep::stages::dither::DitherKind::Tpdf,
                ..QuantizeParams::bits(10)
            }),
            StageSpec::Rate(rate),
            StageSpec::Quantize(QuantizeParams {
                dither: stairstep::stages::dither::DitherKind::Tpdf,
                ..QuantizeParams::bits(6)
            }),
        ]);
        let whole = render::render(&p, &clip).unwrap();
        let mut c = Chain::new(&p, 2, 48_000, n).unwrap();
        let mut out = ChainOutput::new(2);
        let mut rng = stairstep::rng::Pcg32::from_seed(9, 9);
        let mut start = 0;
        while start < n {
            let len = ((rng.next_u32() as usize) % BLOCK + 1).min(n - start);
            let block: Vec<&[f32]> = clip.channels.iter().map(|ch| &ch[start..start + len]).collect();
            c.process_block(&block, &mut out);
            start += len;
        }
        let report = c.finish(&mut out);
        assert_eq!(out.export, whole.export.channels);
        assert_eq!(out.audition, whole.audition.channels);
        let direct = stairstep::analysis::sqnr_db(&clip.channels, &out.audition);
        assert!(
            (report.sqnr_db - direct).abs() < 1e-9,
            "streamed SQNR {} vs measured on the output {direct}",
            report.sqnr_db
        );
        assert!((whole.report.sqnr_db - direct).abs() < 1e-9, "whole SQNR {} vs {direct}", whole.report.sqnr_db);
    }
}

#[test]
fn at_most_one_active_rate_stage_and_bypass_skips_a_stage() {
    let clip = Clip::new(48_000, vec![tone(48_000, 100.0, 0.5, 1000)]).unwrap();
    let two = preset(vec![StageSpec::Rate(RateParams::hold(24_000)), StageSpec::Rate(RateParams::hold(12_000))]);
    let e = render::render(&two, &clip).unwrap_err().to_string();
    assert!(e.contains("stages[1].kind"), "{e}");
    let mut bypassed = two.clone();
    bypassed.stages[1] = StageSlot { bypass: true, ..bypassed.stages[1].clone() };
    let r = render::render(&bypassed, &clip).unwrap();
    assert_eq!(r.export.sample_rate, 24_000);
    // A rate above the source is an error naming it.
    let up = preset(vec![StageSpec::Rate(RateParams::hold(96_000))]);
    assert!(render::render(&up, &clip).unwrap_err().to_string().contains("stages[0].rate_hz"));
}

#[test]
fn empty_and_one_sample_clips_render() {
    for n in [0usize, 1] {
        let clip = Clip::new(44_100, vec![vec![0.25; n]]).unwrap();
        for rate in [RateParams::hold(11_025), RateParams::clean(11_025)] {
            let p = preset(vec![StageSpec::Rate(rate), StageSpec::Quantize(QuantizeParams::bits(4))]);
            let r = render::render(&p, &clip).unwrap();
            assert_eq!(r.audition.frames(), n);
            assert_eq!(r.export.frames(), n);
        }
    }
}

#[test]
fn non_finite_inputs_are_counted_and_never_reach_the_export() {
    let clip = Clip::new(8_000, vec![vec![f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.5]]).unwrap();
    let r = render::render(&preset(vec![StageSpec::Quantize(QuantizeParams::bits(8))]), &clip).unwrap();
    assert_eq!(r.report.non_finite_inputs, 3);
    assert!(r.export.channels[0].iter().all(|v| v.is_finite()));
    let r = render::render(&preset(vec![]), &clip).unwrap();
    assert_eq!(r.export.channels[0], vec![0.0, 1.0, -1.0, 0.5]);
}
