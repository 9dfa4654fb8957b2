//! The instrument's data against the outside world: the spectrogram (sampling theory's folding, scipy's STFT), the
//! codes a quantizer emits (numpy.unique), the static transfer curve (the definition of an N-bit word; ITU-T G.711's
//! μ-law table and audioop), and per-stage SQNR (Bennett's formula).
#![cfg(not(target_arch = "wasm32"))]

mod common;

use stairstep::analysis::codes::code_histogram;
use stairstep::analysis::spectrogram::{SpectrogramAnalyzer, SpectrogramParams};
use stairstep::analysis::transfer::transfer_curve;
use stairstep::preset::Preset;
use stairstep::render;
use stairstep::stages::g711::G711Params;
use stairstep::stages::quantize::QuantizeParams;
use stairstep::stages::StageSpec;
use stairstep::Clip;
use std::f64::consts::PI;

fn sine(n: usize, hz: f64, fs: u32, a: f64) -> Vec<f32> {
    (0..n).map(|i| (a * (2.0 * PI * hz * i as f64 / fs as f64).sin()) as f32).collect()
}

fn f32_bytes(x: &[f32]) -> Vec<u8> {
    x.iter().flat_map(|v| v.to_le_bytes()).collect()
}

fn f64s(bytes: &[u8]) -> Vec<f64> {
    bytes.chunks_exact(8).map(|b| f64::from_le_bytes(b.try_into().unwrap())).collect()
}

fn preset(json_stages: &str) -> Preset {
    Preset::from_json(&format!(r#"{{"format":"stairstep-preset","version":1,"stages":[{json_stages}]}}"#)).unwrap()
}

fn peak(frame: &[f32]) -> usize {
    frame.iter().enumerate().fold((0, f32::MIN), |b, (i, &v)| if v > b.1 { (i, v) } else { b }).0
}

// ---- spectrogram --------------------------------------------------------------------------------------------------

/// dBFS convention (AES17, as the Welch spectra): a full-scale sine centred on a bin reads 0 dBFS, ±0.1 dB, in every
/// frame that lies wholly inside the signal, at every FFT size.
#[test]
fn full_scale_bin_centred_sine_reads_zero_dbfs() {
    for size in [256usize, 512, 1024, 2048, 4096, 8192] {
        let k = size / 8 + 3;
        let x = sine(8 * size, k as f64 * 48_000.0 / size as f64, 48_000, 1.0);
        let s = SpectrogramAnalyzer::new(SpectrogramParams { size, ..Default::default() })
            .unwrap()
            .analyze(&[&x[..]], 48_000);
        let inside = (x.len() - size) / s.hop + 1;
        for j in 0..inside {
            let v = s.frame(j)[k];
            assert!(v.abs() <= 0.1, "N={size} frame {j}: {v} dBFS");
            assert_eq!(peak(s.frame(j)), k);
        }
    }
}

/// scipy.signal.stft (Hann window, periodic, frames at multiples of the hop, no boundary padding, 'spectrum'
/// scaling, i.e. divided by Σw; one-sided bins doubled): the same levels within 0.01 dB wherever above −100 dBFS (the
/// core's FFT runs in `f32`, whose rounding noise lies some 130 dB below the frame's level).
#[test]
fn frames_match_scipy_stft() {
    let mut rng = stairstep::rng::Pcg32::from_seed(5, 2);
    let x: Vec<f32> = (0..20_000)
        .map(|i| {
            let t = i as f64;
            (0.4 * (0.05 * t + 1e-6 * t * t).sin() + 0.2 * (2.1 * t).cos() + 0.01 * rng.uniform_centered()) as f32
        })
        .collect();
    for (size, hop) in [(256usize, 64usize), (1024, 1024), (2048, 300)] {
        let code = format!(
            "import sys, numpy as np, scipy.signal as ss\n\
             x = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4').astype(np.float64)\n\
             f, t, Z = ss.stft(x, fs=48000, window='hann', nperseg={size}, noverlap={size}-{hop}, boundary=None,\n\
                               padded=False, detrend=False, scaling='spectrum')\n\
             a = np.abs(Z); a[1:-1] *= 2\n\
             db = 20 * np.log10(np.maximum(a, 1e-300))\n\
             sys.stdout.buffer.write(db.T.astype('<f8').tobytes())"
        );
        let want = f64s(&common::run_python(&code, &f32_bytes(&x)));
        let s = SpectrogramAnalyzer::new(SpectrogramParams { size, hop, max_frames: 1 << 20 })
            .unwrap()
            .analyze(&[&x[..]], 48_000);
        let frames = want.len() / s.bins;
        assert_eq!(frames, (x.len() - size) / hop + 1, "scipy's frame count");
        assert!(s.frames >= frames);
        let mut worst = 0f64;
        for j in 0..frames {
            for k in 0..s.bins {
                let (g, w) = (s.frame(j)[k] as f64, want[j * s.bins + k]);
                if w > -100.0 {
                    worst = worst.max((g - w).abs());
                    assert!((g - w).abs() < 0.01, "N={size} hop={hop} frame {j} bin {k}: {g} vs scipy {w}");
                }
            }
        }
        eprintln!("spectrogram N={size} hop={hop}: {frames} frames, largest difference from scipy {worst:.2e} dB");
    }
}

/// Sampling theory (aliasing): a tone at f sampled at fs appears at |f − k·fs|, k the nearest integer to f/fs. A
/// linear chirp 100 Hz → 20 kHz at 48 kHz held at 11,025 Hz: in every frame of the held signal's spectrogram the
/// strongest component up to the new Nyquist frequency (5,512.5 Hz) sits at the chirp's folded frequency within one
/// bin, through all the chirp's sweep above 5,512.5 Hz (where it folds) and below. Above 5,512.5 Hz the held signal
/// also carries the hold's images (the chirp itself among them), which are imaging, not aliasing. Frames whose folded
/// frequency lies within three bins of 0 Hz or of 5,512.5 Hz are left out: there the alias meets its own mirror image
/// (or the first image's leakage), two components of about equal level.
#[test]
fn held_chirp_folds_as_sampling_theory_predicts() {
    let (fs, secs, f0, f1) = (48_000u32, 10.0, 100.0, 20_000.0);
    let n = (secs * fs as f64) as usize;
    let x: Vec<f32> = (0..n)
        .map(|i| {
            let t = i as f64 / fs as f64;
            (0.5 * (2.0 * PI * (f0 * t + (f1 - f0) * t * t / (2.0 * secs))).sin()) as f32
        })
        .collect();
    let p = preset(r#"{"kind":"rate","rate_hz":11025,"mode":"hold"}"#);
    let r = render::render(&p, &Clip::new(fs, vec![x]).unwrap()).unwrap();
    let s = SpectrogramAnalyzer::new(SpectrogramParams { size: 1024, hop: 512, max_frames: 1 << 20 })
        .unwrap()
        .analyze(&r.audition.channels, fs);
    let bin = s.bin_hz(1);
    let (mut checked, mut above) = (0, 0);
    for j in 0..s.frames {
        let t = s.frame_time_s(j);
        if t + s.size as f64 / 2.0 / fs as f64 > secs {
            break; // the last frames reach past the end
        }
        let f = f0 + (f1 - f0) * t / secs;
        let k = (f / 11_025.0).round();
        let folded = (f - k * 11_025.0).abs();
        if folded < 3.0 * bin || folded > 5_512.5 - 3.0 * bin {
            continue;
        }
        let nyquist_bin = (5_512.5 / bin) as usize;
        let got = s.bin_hz(peak(&s.frame(j)[..=nyquist_bin]));
        assert!((got - folded).abs() <= bin, "t={t:.3} s, chirp at {f:.0} Hz: peak {got:.0} Hz, expected {folded:.0}");
        checked += 1;
        above += (f > 5_512.5) as usize;
    }
    assert!(checked > 700 && above > 500, "{checked} frames checked, {above} with the chirp above 5,512.5 Hz");
}

// ---- codes --------------------------------------------------------------------------------------------------------

/// numpy.unique of the integer codes of the quantizer's output (y·2^(N−1) for N-bit PCM, audioop.lin2ulaw of the
/// 16-bit samples for μ-law) on the same render: the report's `codes_used` and the histogram's counts agree.
#[test]
fn codes_used_equal_numpy_unique() {
    let pad = stairstep::demo::demo("pad").unwrap();
    // A quantizer at the export rate (after a hold), followed by a gain stage, so that the chain's export is not the
    // quantizer's output and the tap is needed to see it.
    let p = preset(
        r#"{"kind":"gain","gain_db":-9},{"kind":"rate","rate_hz":16000,"mode":"hold"},
           {"kind":"quantize","bits":7},{"kind":"gain","gain_db":-1},{"kind":"g711"}"#,
    );
    let r = render::render(&p, &pad).unwrap();
    for (stage, script) in [
        (2usize, "codes = np.round(y.astype(np.float64) * 64).astype(np.int64)"),
        (
            4,
            "import warnings; warnings.simplefilter('ignore', DeprecationWarning); import audioop\n\
             pcm = np.round(y.astype(np.float64) * 32768).astype('<i2').tobytes()\n\
             codes = np.frombuffer(audioop.lin2ulaw(pcm, 2), dtype=np.uint8)",
        ),
    ] {
        let tap = render::render_tap(&p, &pad, stage).unwrap();
        assert_eq!(tap.at_stage_rate.sample_rate, 16_000);
        let y: Vec<f32> = tap.at_stage_rate.channels.concat();
        let code = format!(
            "import sys, numpy as np\n\
             y = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4')\n\
             {script}\n\
             u, c = np.unique(codes, return_counts=True)\n\
             print(len(u)); print(' '.join(map(str, sorted(c))))"
        );
        let out = String::from_utf8(common::run_python(&code, &f32_bytes(&y))).unwrap();
        let mut lines = out.lines();
        let unique: u64 = lines.next().unwrap().trim().parse().unwrap();
        let mut counts: Vec<u64> = lines.next().unwrap().split_whitespace().map(|v| v.parse().unwrap()).collect();
        assert_eq!(r.report.stages[stage].codes_used, Some(unique), "stage {stage}: report vs numpy.unique");
        let h = code_histogram(&p.stages[stage].stage, &tap.at_stage_rate.channels, 1 << 16).unwrap();
        assert_eq!(h.codes_used, unique, "stage {stage}: histogram vs numpy.unique");
        let mut ours: Vec<u64> = h.counts.iter().copied().filter(|&c| c > 0).collect();
        ours.sort_unstable();
        counts.sort_unstable();
        assert_eq!(ours, counts, "stage {stage}: counts per code");
        eprintln!("stage {stage}: {unique} of {} codes used, entropy {:.2} bits", h.code_space, h.entropy_bits);
    }
    assert_eq!(r.report.stages[2].code_space, Some(128));
    assert_eq!(r.report.stages[4].code_space, Some(256));
    assert_eq!(r.report.stages[0].codes_used, None);
}

// ---- transfer curve -----------------------------------------------------------------------------------------------

/// An N-bit word has 2^N codes: a mid-tread N-bit quantizer's curve over −1…+1 shows exactly 2^N output levels, and
/// it is numpy's textbook mid-tread rounding (ties away from zero, clipped to the two's-complement range) of the same
/// ramp.
#[test]
fn n_bit_mid_tread_curve_has_two_to_the_n_levels() {
    for bits in 1..=12u32 {
        let q = StageSpec::Quantize(QuantizeParams::bits(bits));
        let points = (1usize << (bits + 3)) + 1;
        let c = transfer_curve([(0, &q)], -1.0, 1.0, points).unwrap();
        assert_eq!(c.levels, 1 << bits, "{bits} bits");
        let code = format!(
            "import sys, numpy as np\n\
             x = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4').astype(np.float64)\n\
             s = 2.0 ** ({bits} - 1); v = x * s\n\
             k = np.clip(np.sign(v) * np.floor(np.abs(v) + 0.5), -s, s - 1)\n\
             sys.stdout.buffer.write((k / s).astype('<f8').tobytes())"
        );
        let want = f64s(&common::run_python(&code, &f32_bytes(&c.input)));
        for (i, (&g, &w)) in c.output.iter().zip(&want).enumerate() {
            assert_eq!(g as f64, w, "{bits} bits, input {}", c.input[i]);
        }
    }
    // Zoomed in on a few steps of a 12-bit word: the steps are 2^−11 wide.
    let q = StageSpec::Quantize(QuantizeParams::bits(12));
    let c = transfer_curve([(0, &q)], 0.1, 0.1 + 4.0 / 2048.0, 401).unwrap();
    assert!((4..=5).contains(&c.levels), "{}", c.levels);
}

/// ITU-T G.711, table 2a (μ-law): decision values in 14-bit units start at 1 and step by 2, 4, 8, …, 256 through the
/// eight segments, whose end points are 31, 95, 223, 479, 991, 2015, 4063 and 8159; the reconstructed value of each
/// interval is its midpoint (0 for the first), the largest 8031. The 16-bit codec sees these ×4. The curve of the
/// g711 stage over 0…1 at every 16-bit input must jump exactly at those decision values and sit at those
/// reconstruction values; and it equals audioop.ulaw2lin(audioop.lin2ulaw(x)) at every point.
#[test]
fn mu_law_curve_matches_g711_segment_end_points() {
    let g = StageSpec::G711(G711Params::default());
    let c = transfer_curve([(0, &g)], 0.0, 1.0, 32_769).unwrap();
    let x16: Vec<i64> = c.input.iter().map(|&x| (x as f64 * 32768.0) as i64).collect();
    assert!(x16.iter().enumerate().all(|(i, &v)| v == i as i64), "the ramp is every 16-bit value");
    let y16: Vec<i64> = c.output.iter().map(|&y| (y as f64 * 32768.0) as i64).collect();
    // The table: decision values (14-bit) and reconstruction values.
    let ends = [1i64, 31, 95, 223, 479, 991, 2015, 4063, 8159];
    let mut decisions = vec![1i64];
    for s in 0..8 {
        let step = 2i64 << s;
        let mut d = ends[s];
        while d + step <= ends[s + 1] {
            d += step;
            decisions.push(d);
        }
    }
    assert_eq!(decisions.len(), 1 + 15 + 16 * 7, "127 decision values and the overload point");
    let overload = decisions.pop().unwrap();
    assert_eq!(overload, 8159);
    // Where the curve jumps, in 14-bit units.
    let jumps: Vec<i64> = (1..y16.len()).filter(|&i| y16[i] != y16[i - 1]).map(|i| x16[i] / 4).collect();
    assert_eq!(jumps, decisions, "decision values");
    for &e in &ends[1..8] {
        assert!(jumps.contains(&e), "segment end {e}");
    }
    // Reconstruction values: 0 in the first interval, then interval midpoints; the last is 8031.
    let mut bounds = decisions.clone();
    bounds.push(overload);
    for (i, w) in bounds.windows(2).enumerate() {
        let at = (w[0] * 4) as usize;
        assert_eq!(y16[at], 4 * (w[0] + w[1]) / 2, "interval {i}: {}..{}", w[0], w[1]);
    }
    assert_eq!(y16[0], 0);
    assert_eq!(*y16.last().unwrap(), 4 * 8031);
    // audioop (CPython's G.711 from the Sun reference code) on the same 16-bit ramp, clamped to 32767 at the top.
    let pcm: Vec<u8> = x16.iter().flat_map(|&v| (v.min(32767) as i16).to_le_bytes()).collect();
    let code = "import sys, warnings\n\
                warnings.simplefilter('ignore', DeprecationWarning)\n\
                import audioop\n\
                sys.stdout.buffer.write(audioop.ulaw2lin(audioop.lin2ulaw(sys.stdin.buffer.read(), 2), 2))";
    let want: Vec<i64> =
        common::run_python(code, &pcm).chunks_exact(2).map(|b| i16::from_le_bytes([b[0], b[1]]) as i64).collect();
    assert_eq!(y16, want);
}

// ---- per-stage SQNR -----------------------------------------------------------------------------------------------

/// Bennett (1948): an N-bit uniform quantizer on a busy signal adds error of power Δ²/12, so a sine of amplitude A
/// (full scale 1) gets 6.02·N + 1.76 + 20·log10(A) dB. Behind a rate stage the quantizer's own figure must be that,
/// whatever the rate stage's error: a clean reduction (tiny error) and a hold (large imaging error) give the same
/// quantizer figure within 0.3 dB of the formula.
#[test]
fn quantizer_after_a_rate_stage_reports_bennett() {
    let fs = 48_000u32;
    for (bits, a) in [(6u32, 0.5), (8, 0.9), (10, 0.25), (12, 0.7)] {
        let x = sine(4 * fs as usize, 997.0, fs, a);
        let clip = Clip::new(fs, vec![x]).unwrap();
        let bennett = 6.02 * bits as f64 + 1.76 + 20.0 * a.log10();
        let mut rate_figures = Vec::new();
        for mode in ["clean", "hold"] {
            let p = preset(&format!(
                r#"{{"kind":"rate","rate_hz":16000,"mode":"{mode}"}},{{"kind":"quantize","bits":{bits}}}"#
            ));
            let r = render::render(&p, &clip).unwrap();
            let q = &r.report.stages[1];
            let got = q.sqnr_db.unwrap();
            assert_eq!(q.rate_hz, 16_000);
            assert!((got - bennett).abs() < 0.3, "{bits} bits, A={a}, {mode}: {got:.2} dB, Bennett {bennett:.2}");
            rate_figures.push(r.report.stages[0].sqnr_db.unwrap());
            eprintln!(
                "{bits} bits, A={a}, {mode}: quantizer {got:.2} dB (Bennett {bennett:.2}), rate stage {:.2} dB, \
                 chain {:.2} dB",
                r.report.stages[0].sqnr_db.unwrap(),
                r.report.sqnr_db
            );
        }
        // The two rate stages differ by far more than the quantizer figures do.
        assert!(rate_figures[0] - rate_figures[1] > 20.0, "{rate_figures:?}");
    }
}
