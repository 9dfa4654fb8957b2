//! The uniform quantizer, dither and noise shaping against published results and reference libraries.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use proptest::prelude::*;
use stairstep::stages::dither::{DitherKind, Shaping};
use stairstep::stages::quantize::{Grid, QuantizeParams, Quantizer, Rounding};

fn quantize(p: &QuantizeParams, x: &[f32]) -> Vec<f32> {
    let mut q = Quantizer::new(p, 11, 0).unwrap();
    let mut y = x.to_vec();
    q.process(&mut y);
    y
}

fn sine(n: usize, f: f64, a: f64) -> Vec<f32> {
    (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64).sin()) as f32).collect()
}

fn mean_var(e: &[f64]) -> (f64, f64) {
    let m = e.iter().sum::<f64>() / e.len() as f64;
    (m, e.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / e.len() as f64)
}

fn error_lsb(p: &QuantizeParams, x: &[f32]) -> Vec<f64> {
    let step = Quantizer::new(p, 0, 0).unwrap().step();
    quantize(p, x).iter().zip(x).map(|(&y, &x)| (y as f64 - x as f64) / step).collect()
}

/// Lipshitz, Wannamaker & Vanderkooy, "Quantization and Dither: A Theoretical Survey", JAES 40(5), 1992: with TPDF
/// dither of ±1 LSB the total error has mean 0 and variance Δ²/4 (three times the undithered Δ²/12, i.e. 4.77 dB more)
/// whatever the signal; RPDF of ±½ LSB makes only the mean independent of the signal.
#[test]
fn tpdf_dither_error_power_is_three_times_and_independent_of_the_signal() {
    let tpdf = QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(8) };
    let rpdf = QuantizeParams { dither: DitherKind::Rpdf, ..QuantizeParams::bits(8) };
    let plain = QuantizeParams::bits(8);
    // A busy signal: total error power relative to Δ²/12.
    let x = sine(1 << 18, 0.001_234_5, 0.7);
    let (_, v_plain) = mean_var(&error_lsb(&plain, &x));
    let (m_tpdf, v_tpdf) = mean_var(&error_lsb(&tpdf, &x));
    let db = 10.0 * (v_tpdf / (1.0 / 12.0)).log10();
    eprintln!(
        "TPDF: error power +{db:.3} dB over Δ²/12 (published 4.77 dB); undithered {:.3} dB",
        10.0 * (v_plain * 12.0).log10()
    );
    assert!((db - 4.77).abs() < 0.3, "TPDF raises the error power by {db:.2} dB, published 4.77 dB");
    assert!((10.0 * (v_plain * 12.0).log10()).abs() < 0.3, "undithered error power is Δ²/12");
    assert!(m_tpdf.abs() < 0.01);
    // Constant inputs at fractions of a step: TPDF moments do not move; RPDF variance does.
    let mut tpdf_vars = vec![];
    let mut rpdf_vars = vec![];
    for frac in [0.0, 0.1, 0.25, 0.5, 0.77] {
        let x = vec![((10.0 + frac) / 128.0) as f32; 100_000];
        let (m, v) = mean_var(&error_lsb(&tpdf, &x));
        assert!(m.abs() < 0.01, "TPDF error mean {m} at {frac} LSB");
        tpdf_vars.push(v);
        rpdf_vars.push(mean_var(&error_lsb(&rpdf, &x)).1);
    }
    for v in &tpdf_vars {
        assert!((v / 0.25 - 1.0).abs() < 0.03, "TPDF error variance {v} LSB², published 1/4");
    }
    let spread =
        rpdf_vars.iter().cloned().fold(f64::MIN, f64::max) - rpdf_vars.iter().cloned().fold(f64::MAX, f64::min);
    assert!(spread > 0.1, "RPDF variance should depend on the signal: {rpdf_vars:?}");
}

/// Error-feedback noise shaping: the error spectrum is white noise times |NTF|² (textbook error-feedback identity).
/// Power spectral density measured by scipy.signal.welch on the error signal, compared band by band with
/// (Δ²/12 + σ²_dither) · |NTF(f)|².
#[test]
fn noise_shaping_follows_its_transfer_function_measured_by_scipy() {
    let n = 1 << 18;
    // A busy input: a sine plus a second one, well inside full scale so nothing clips.
    let x: Vec<f32> = sine(n, 0.013_1, 0.4).iter().zip(sine(n, 0.071_7, 0.2)).map(|(a, b)| a + b).collect();
    for shaping in [Shaping::FirstOrder, Shaping::SecondOrder, Shaping::Ewt5, Shaping::Ewt9] {
        let p = QuantizeParams { dither: DitherKind::Tpdf, shaping, ..QuantizeParams::bits(12) };
        let e: Vec<f32> = error_lsb(&p, &x).iter().map(|&v| v as f32).collect();
        let bytes: Vec<u8> = e.iter().flat_map(|v| v.to_le_bytes()).collect();
        // Band-averaged one-sided PSD (fs = 1), 16 bands between 0.02 and 0.48 cycles per sample.
        let out = common::run_python(
            "import sys, numpy as np, scipy.signal as ss\n\
             e = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4').astype(np.float64)\n\
             f, p = ss.welch(e, fs=1.0, nperseg=4096)\n\
             for a in np.linspace(0.02, 0.46, 12):\n\
             \x20   m = (f >= a) & (f < a + 0.02)\n\
             \x20   print(a + 0.01, p[m].mean())",
            &bytes,
        );
        let sigma2 = 1.0 / 12.0 + DitherKind::Tpdf.variance_lsb2(1.0);
        for line in String::from_utf8(out).unwrap().lines() {
            let v: Vec<f64> = line.split_whitespace().map(|s| s.parse().unwrap()).collect();
            // Band average of the theory over the same band.
            let theory = (0..20).map(|i| shaping.ntf_power(v[0] - 0.01 + 0.001 * (i as f64 + 0.5))).sum::<f64>() / 20.0;
            let want = 2.0 * sigma2 * theory; // one-sided density at fs = 1
            let diff = 10.0 * (v[1] / want).log10();
            assert!(
                diff.abs() < 1.0,
                "{shaping:?} at f = {:.3}: measured {:.3e}, theory {want:.3e} ({diff:+.2} dB)",
                v[0],
                v[1]
            );
        }
    }
}

/// numpy as the reference quantizer: round half away from zero (np.sign · floor(|x| + ½)), clip to the PCM codes.
#[test]
fn matches_numpy_rounding_at_every_bit_depth() {
    let mut rng = stairstep::rng::Pcg32::from_seed(5, 5);
    let x: Vec<f32> = (0..20_000).map(|_| (rng.uniform_centered() * 2.3) as f32).collect();
    let bytes: Vec<u8> = x.iter().flat_map(|v| v.to_le_bytes()).collect();
    let out = common::run_python(
        "import sys, numpy as np\n\
         x = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4').astype(np.float64)\n\
         for n in range(1, 25):\n\
         \x20   s = 2.0 ** (n - 1)\n\
         \x20   c = np.clip(np.sign(x * s) * np.floor(np.abs(x * s) + 0.5), -s, s - 1)\n\
         \x20   sys.stdout.buffer.write((c / s).astype('<f4').tobytes())",
        &bytes,
    );
    for (i, chunk) in out.chunks_exact(x.len() * 4).enumerate() {
        let want: Vec<f32> = chunk.chunks_exact(4).map(|b| f32::from_le_bytes(b.try_into().unwrap())).collect();
        assert_eq!(quantize(&QuantizeParams::bits(i as u32 + 1), &x), want, "{} bits", i + 1);
    }
}

/// The f32 block path against the f64 per-sample path over a spread of every f32 bit pattern (one in 65,521: all
/// exponents, signs, NaN, ±Inf, subnormals), at every width, both roundings and both grids.
#[test]
fn block_paths_equal_per_sample_path_over_all_exponents() {
    let xs: Vec<f32> = (0..=u32::MAX / 65_521).map(|i| f32::from_bits(i.wrapping_mul(65_521))).collect();
    for bits in 1..=24 {
        for rounding in [Rounding::Nearest, Rounding::Truncate] {
            for grid in [Grid::MidTread, Grid::MidRise] {
                let p = QuantizeParams { bits, rounding, grid, ..Default::default() };
                let (mut fast, mut slow) = (Quantizer::new(&p, 0, 0).unwrap(), Quantizer::new(&p, 0, 0).unwrap());
                let mut a = xs.clone();
                fast.process(&mut a);
                for (&x, &y) in xs.iter().zip(&a) {
                    let want = slow.quantize_sample(x);
                    assert_eq!(
                        y.to_bits(),
                        want.to_bits(),
                        "{bits} bits {rounding:?} {grid:?}: x {x:e} -> {y} vs {want}"
                    );
                }
                assert_eq!(fast.clipped(), slow.clipped());
            }
        }
    }
}

/// Long blocks (across the dither path's 1,024-sample chunks and the f32 path's 65,536-sample counter chunks, in
/// odd sizes) give exactly the per-sample results, for every dither kind, with and without power-of-two steps.
#[test]
fn long_blocks_equal_per_sample_path() {
    let mut rng = stairstep::rng::Pcg32::from_seed(5, 9);
    let xs: Vec<f32> = (0..140_001).map(|_| (rng.uniform_centered() * 2.4) as f32).collect();
    for dither in [DitherKind::None, DitherKind::Rpdf, DitherKind::Tpdf, DitherKind::HighpassTpdf] {
        for p in [
            QuantizeParams { bits: 8, dither, ..Default::default() },
            QuantizeParams { bits: 12, rounding: Rounding::Truncate, dither, ..Default::default() },
            QuantizeParams { levels: Some(37), dither, ..Default::default() },
        ] {
            let (mut fast, mut slow) = (Quantizer::new(&p, 3, 2).unwrap(), Quantizer::new(&p, 3, 2).unwrap());
            let mut a = xs.clone();
            let mut at = 0;
            for len in [1, 1023, 1025, 70_000, 67_952] {
                fast.process(&mut a[at..at + len]);
                at += len;
            }
            assert_eq!(at, xs.len());
            for (i, (&x, &y)) in xs.iter().zip(&a).enumerate() {
                assert_eq!(y.to_bits(), slow.quantize_sample(x).to_bits(), "{p:?}: sample {i}");
            }
            assert_eq!(fast.clipped(), slow.clipped(), "{p:?}");
            assert!(fast.clipped() > 0, "the input reaches beyond full scale");
        }
    }
}

fn any_params() -> impl Strategy<Value = QuantizeParams> {
    (
        1u32..=24,
        prop_oneof![Just(Grid::MidTread), Just(Grid::MidRise)],
        prop_oneof![Just(Rounding::Nearest), Just(Rounding::Truncate)],
    )
        .prop_map(|(bits, grid, rounding)| QuantizeParams { bits, grid, rounding, ..Default::default() })
}

proptest! {
    /// Without dither the error of an in-range sample never exceeds half a step (rounding) or one step (truncation).
    #[test]
    fn error_bounded_by_half_a_step(p in any_params(), x in -1.0f32..1.0) {
        let mut q = Quantizer::new(&p, 0, 0).unwrap();
        let y = q.quantize_sample(x);
        let step = q.step();
        let bound = if p.rounding == Rounding::Nearest { step / 2.0 } else { step };
        if q.clipped() == 0 {
            prop_assert!(((y as f64) - (x as f64)).abs() <= bound * (1.0 + 1e-9), "x {x} y {y} step {step}");
        }
        prop_assert!((-1.0..=1.0).contains(&y));
    }

    /// Quantizing twice equals quantizing once (rounding), and outputs stay in range for any input at all.
    #[test]
    fn idempotent_and_in_range(bits in 1u32..=24, grid in prop_oneof![Just(Grid::MidTread), Just(Grid::MidRise)], x in proptest::num::f32::ANY) {
        let p = QuantizeParams { bits, grid, ..Default::default() };
        let mut q = Quantizer::new(&p, 0, 0).unwrap();
        let once = q.quantize_sample(x);
        let twice = q.quantize_sample(once);
        prop_assert_eq!(once.to_bits(), twice.to_bits());
        prop_assert!(once.is_finite() && (-1.0..=1.0).contains(&once));
    }

    /// The block paths (f32 for power-of-two steps, f64 otherwise, dithered) and the per-sample path agree bit for
    /// bit, on any input at all, with the same clip count.
    #[test]
    fn fast_path_equals_general_path(
        p in any_params(),
        levels in prop_oneof![Just(None), (2u32..5000).prop_map(Some)],
        dither in prop_oneof![Just(DitherKind::None), Just(DitherKind::Rpdf), Just(DitherKind::Tpdf), Just(DitherKind::HighpassTpdf)],
        xs in proptest::collection::vec(prop_oneof![-1.5f32..1.5, proptest::num::f32::ANY], 1..200),
    ) {
        let grid = if levels.is_some_and(|l| l % 2 == 1) { Grid::MidTread } else { p.grid };
        let p = QuantizeParams { levels, grid, dither, ..p };
        let mut fast = Quantizer::new(&p, 7, 1).unwrap();
        let mut slow = Quantizer::new(&p, 7, 1).unwrap();
        let mut a = xs.clone();
        fast.process(&mut a);
        let b: Vec<f32> = xs.iter().map(|&x| slow.quantize_sample(x)).collect();
        prop_assert_eq!(a.iter().map(|v| v.to_bits()).collect::<Vec<_>>(), b.iter().map(|v| v.to_bits()).collect::<Vec<_>>());
        prop_assert_eq!(fast.clipped(), slow.clipped());
    }
}
