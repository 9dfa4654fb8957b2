//! Unit tests of the rate stage: exact hold indices, block-size independence, delays, edge cases.

use super::*;
use crate::rng::Pcg32;

fn noise(n: usize, seed: u64) -> Vec<f32> {
    let mut g = Pcg32::from_seed(seed, 7);
    (0..n).map(|_| (1.8 * g.uniform_centered()) as f32).collect()
}

fn sine(n: usize, f: f64, fs: u32, a: f64) -> Vec<f32> {
    (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64 / fs as f64).sin()) as f32).collect()
}

/// Block sizes from 0 to `max` (zero-length blocks included), seeded.
fn blocks(seed: u64, max: u32) -> impl FnMut() -> usize {
    let mut g = Pcg32::from_seed(seed, 3);
    move || (g.next_u32() % (max + 1)) as usize
}

/// Streams `x` through `process` (in blocks from `next`) and `flush`, with outputs sized by `max_output`.
fn stream(
    x: &[f32],
    mut next: impl FnMut() -> usize,
    mut process: impl FnMut(&[f32], &mut [f32]) -> usize,
    mut flush: impl FnMut(&mut [f32]) -> usize,
    max_output: impl Fn(usize) -> usize,
) -> Vec<f32> {
    let mut out = Vec::new();
    let mut buf = vec![f32::NAN; max_output(x.len())];
    let mut i = 0;
    while i < x.len() {
        let n = next().min(x.len() - i);
        // Exactly the advertised size: anything more would be dropped and show up as a difference.
        let w = process(&x[i..i + n], &mut buf[..max_output(n)]);
        out.extend_from_slice(&buf[..w]);
        i += n;
    }
    let w = flush(&mut buf[..max_output(0)]);
    out.extend_from_slice(&buf[..w]);
    out
}

fn stream_reduce(r: &mut RateReducer, x: &[f32], next: impl FnMut() -> usize) -> Vec<f32> {
    let r = std::cell::RefCell::new(r);
    stream(x, next, |i, o| r.borrow_mut().process(i, o), |o| r.borrow_mut().flush(o), |n| r.borrow().max_output(n))
}

fn stream_expand(e: &mut RateExpander, x: &[f32], next: impl FnMut() -> usize) -> Vec<f32> {
    let e = std::cell::RefCell::new(e);
    stream(x, next, |i, o| e.borrow_mut().process(i, o), |o| e.borrow_mut().flush(o), |n| e.borrow().max_output(n))
}

/// `⌈a/b⌉` in plain u128, straight from the definition (the naive reference for the stepped indices).
#[allow(clippy::manual_div_ceil)] // spelled out on purpose: the reference does not share the code under test
fn ceil_naive(a: u128, b: u128) -> u128 {
    (a + b - 1) / b
}

// Spec of the task (and of any 4:1 decimator): 44,100 → 11,025 Hz by zero-order hold is exactly every 4th sample.
#[test]
fn hold_44100_to_11025_is_every_fourth_sample() {
    let x = noise(10_001, 1);
    let y = reduce(&RateParams::hold(11_025), 44_100, &x).unwrap();
    let every_fourth: Vec<f32> = x.iter().copied().step_by(4).collect();
    assert_eq!(y, every_fourth);
    let rt = round_trip(&RateParams::hold(11_025), 44_100, &x).unwrap();
    assert_eq!(rt.len(), x.len());
    for (j, &v) in rt.iter().enumerate() {
        assert_eq!(v, x[j / 4 * 4], "sample {j}");
    }
}

// The documented rule (module docs): reduced k ← source ⌈k·fs_in/fs_out⌉ (last sample past the end), expansion
// holds k over [⌈k·fs_in/fs_out⌉, ⌈(k+1)·fs_in/fs_out⌉), computed naively with the unreduced rates.
#[test]
fn hold_48000_to_7300_indices_match_the_formula() {
    let (fi, fo) = (48_000u128, 7_300u128);
    let n = 48_017usize;
    let x: Vec<f32> = (0..n).map(|i| i as f32).collect(); // exact: i < 2^24
    let y = reduce(&RateParams::hold(7_300), 48_000, &x).unwrap();
    assert_eq!(y.len(), ceil_naive(n as u128 * fo, fi) as usize);
    for (k, &v) in y.iter().enumerate() {
        let idx = ceil_naive(k as u128 * fi, fo).min(n as u128 - 1);
        assert_eq!(v, idx as f32, "reduced sample {k}");
    }
    // Steps of 6 or 7 source samples (48000/7300 = 6.575…).
    assert!(y.windows(2).all(|w| w[1] - w[0] == 6.0 || w[1] - w[0] == 7.0 || w[1] == (n - 1) as f32));
    let e = expand(&RateParams::hold(7_300), 48_000, &y, n).unwrap();
    for (j, &v) in e.iter().enumerate() {
        let k = (j as u128 * fo / fi) as usize;
        assert!(ceil_naive(k as u128 * fi, fo) <= j as u128 && (j as u128) < ceil_naive((k as u128 + 1) * fi, fo));
        assert_eq!(v, y[k], "expanded sample {j}");
    }
}

// Spec of the task: state carries across blocks, so any block sizes give the output of one big block.
#[test]
fn output_does_not_depend_on_block_sizes() {
    let cases = [(44_100, 11_025), (48_000, 7_300), (48_000, 8_000), (44_100, 44_100), (8_000, 3), (22_050, 22_049)];
    for mode in [RateMode::Hold, RateMode::Clean] {
        for (seed, &(fi, fo)) in cases.iter().enumerate() {
            let p = RateParams { rate_hz: fo, mode };
            let x = noise(30_000, seed as u64);
            let mut r = RateReducer::new(&p, fi, 4096).unwrap();
            let whole = stream_reduce(&mut r, &x, || usize::MAX);
            assert_eq!(whole.len(), r.delay() + reduced_len(fi, fo, x.len()), "{p:?} {fi}");
            for s in 0..3 {
                r.reset();
                let pieces = stream_reduce(&mut r, &x, blocks(s, [1, 700, 5000][s as usize]));
                assert!(whole == pieces, "{p:?} at {fi} Hz, block pattern {s}: reducer output differs");
            }
            let red = reduce(&p, fi, &x).unwrap();
            let mut e = RateExpander::new(&p, fi, 4096).unwrap();
            let whole = stream_expand(&mut e, &red, || usize::MAX);
            assert_eq!(whole.len() as u128, e.delay() as u128 + ceil_naive(red.len() as u128 * fi as u128, fo as u128));
            for s in 0..3 {
                e.reset();
                let pieces = stream_expand(&mut e, &red, blocks(s + 10, [1, 300, 3000][s as usize]));
                assert!(whole == pieces, "{p:?} at {fi} Hz, block pattern {s}: expander output differs");
            }
        }
    }
}

// Spec of the task: at equal rates everything is an exact identity, in both modes.
#[test]
fn equal_rates_are_an_exact_identity() {
    let x = noise(9_999, 5);
    for p in [RateParams::hold(44_100), RateParams::clean(44_100)] {
        assert_eq!(reduce(&p, 44_100, &x).unwrap(), x);
        assert_eq!(expand(&p, 44_100, &x, x.len()).unwrap(), x);
        assert_eq!(round_trip(&p, 44_100, &x).unwrap(), x);
        let mut r = RateReducer::new(&p, 44_100, 512).unwrap();
        let mut e = RateExpander::new(&p, 44_100, 512).unwrap();
        assert_eq!((r.delay(), e.delay(), r.cutoff_hz()), (0, 0, None));
        assert_eq!(stream_reduce(&mut r, &x, blocks(1, 512)), x);
        assert_eq!(stream_expand(&mut e, &x, blocks(2, 512)), x);
    }
}

// rubato's own test (check_output in rubato's lib.rs): a ramp in gives the same ramp out, shifted by
// output_delay(). A linear-phase filter with unit DC gain passes a ramp unchanged, so this checks the reported
// delay to well under a sample.
#[test]
fn clean_ramp_comes_out_shifted_by_the_reported_delay() {
    for (fi, fo) in [(48_000u32, 8_000u32), (44_100, 11_025), (48_000, 7_300), (44_100, 8_000), (48_000, 44_100)] {
        let p = RateParams::clean(fo);
        let n = 40_000usize;
        let slope = 0.9 / n as f64; // per source sample
        let x: Vec<f32> = (0..n).map(|i| (i as f64 * slope) as f32).collect();
        let mut r = RateReducer::new(&p, fi, 1000).unwrap();
        let d = r.delay();
        let y = stream_reduce(&mut r, &x, || 1000);
        let ratio = fi as f64 / fo as f64;
        let mut worst = 0.0f64;
        // Away from the kink at the start and the cut at the end (one filter length, 2·d, each side).
        for (m, &v) in y.iter().enumerate().skip(3 * d).take(y.len().saturating_sub(6 * d)) {
            let want = (m - d) as f64 * ratio * slope;
            worst = worst.max((v as f64 - want).abs());
        }
        assert!(worst < 2e-5, "{fi}->{fo}: reducer ramp off by {worst} (delay {d})");
        // The expander: a ramp at the low rate comes back as the ramp at the source rate.
        let slope = 0.9 / 8_000.0; // per reduced sample
        let x: Vec<f32> = (0..8_000).map(|i| (i as f64 * slope) as f32).collect();
        let mut e = RateExpander::new(&p, fi, 1000).unwrap();
        let d = e.delay();
        let y = stream_expand(&mut e, &x, || 777);
        let mut worst = 0.0f64;
        for (j, &v) in y.iter().enumerate().skip(3 * d).take(y.len().saturating_sub(6 * d)) {
            let want = (j - d) as f64 / ratio * slope;
            worst = worst.max((v as f64 - want).abs());
        }
        assert!(worst < 2e-5, "{fi}->{fo}: expander ramp off by {worst} (delay {d})");
    }
}

// Delays at common ratios, as documented in the module's latency table.
#[test]
fn delays_match_the_documented_table() {
    for (fi, fo, dr, de) in [
        (44_100, 22_050, 256, 512),
        (44_100, 11_025, 256, 1_024),
        (48_000, 8_000, 256, 1_536),
        (48_000, 7_300, 292, 1_920),
        (44_100, 8_000, 320, 1_764),
    ] {
        let p = RateParams::clean(fo);
        assert_eq!(RateReducer::new(&p, fi, 64).unwrap().delay(), dr, "{fi}->{fo}");
        assert_eq!(RateExpander::new(&p, fi, 64).unwrap().delay(), de, "{fi}->{fo}");
        assert_eq!(RateReducer::new(&RateParams::hold(fo), fi, 64).unwrap().delay(), 0);
    }
    let c = RateReducer::new(&RateParams::clean(8_000), 48_000, 64).unwrap().cutoff_hz().unwrap();
    assert!((c - 3_893.5).abs() < 1.0, "{c}");
}

// Edge values (project style notes: empty and one-sample buffers always tested).
#[test]
fn empty_and_one_sample_inputs() {
    for p in [RateParams::hold(8_000), RateParams::clean(8_000), RateParams::hold(7_300), RateParams::clean(7_300)] {
        assert!(reduce(&p, 48_000, &[]).unwrap().is_empty());
        assert!(expand(&p, 48_000, &[], 0).unwrap().is_empty());
        assert_eq!(expand(&p, 48_000, &[], 3).unwrap(), [0.0; 3]);
        assert!(round_trip(&p, 48_000, &[]).unwrap().is_empty());
        let one = reduce(&p, 48_000, &[0.25]).unwrap();
        assert_eq!(one.len(), 1);
        assert!(one[0].is_finite());
        let rt = round_trip(&p, 48_000, &[0.25]).unwrap();
        assert_eq!(rt.len(), 1);
        assert!(rt[0].is_finite());
        if p.mode == RateMode::Hold {
            assert_eq!((one[0], rt[0]), (0.25, 0.25));
            assert_eq!(expand(&p, 48_000, &[0.5], 9).unwrap(), [0.5; 9]);
        }
        let mut r = RateReducer::new(&p, 48_000, 1).unwrap();
        let mut out = vec![0.0; r.max_output(1)];
        assert_eq!(r.process(&[], &mut out), 0);
        // An empty stream flushes exactly the delay's worth (silence) in clean mode, nothing in hold mode.
        assert_eq!(r.flush(&mut out), r.delay());
        assert!(out[..r.delay()].iter().all(|&v| v == 0.0));
        let mut e = RateExpander::new(&p, 48_000, 1).unwrap();
        let mut out = vec![0.0; e.max_output(1)];
        assert_eq!(e.process(&[], &mut out), 0);
        // Output too small: samples are dropped, nothing panics.
        assert_eq!(e.process(&[0.5, 0.5], &mut []), 0);
        assert_eq!(r.process(&[0.5; 100], &mut []), 0);
    }
}

// Project convention (error.rs): errors name the parameter and the allowed range.
#[test]
fn bad_parameters_name_themselves() {
    fn name_of(e: Error) -> String {
        match e {
            Error::Param { name, .. } => name,
            other => panic!("not a parameter error: {other}"),
        }
    }
    for (p, fs, name) in [
        (RateParams::hold(0), 48_000, "rate_hz"),
        (RateParams::clean(0), 48_000, "rate_hz"),
        (RateParams::hold(48_001), 48_000, "rate_hz"),
        (RateParams::clean(96_000), 48_000, "rate_hz"),
        (RateParams::clean(191_999), 192_000, "rate_hz"),
        (RateParams::hold(8_000), 0, "source_rate"),
        (RateParams::hold(8_000), 800_000, "source_rate"),
    ] {
        assert_eq!(name_of(RateReducer::new(&p, fs, 64).unwrap_err()), name, "{p:?} at {fs}");
        assert_eq!(name_of(RateExpander::new(&p, fs, 64).unwrap_err()), name, "{p:?} at {fs}");
        assert_eq!(name_of(reduce(&p, fs, &[0.0]).unwrap_err()), name);
        assert_eq!(name_of(expand(&p, fs, &[0.0], 1).unwrap_err()), name);
        assert_eq!(name_of(round_trip(&p, fs, &[0.0]).unwrap_err()), name);
        assert_eq!(name_of(p.validate(fs).unwrap_err()), name);
    }
    let e = RateReducer::new(&RateParams::hold(48_001), 48_000, 64).unwrap_err();
    assert!(e.to_string().contains("rate_hz") && e.to_string().contains("1..=48000"), "{e}");
    assert_eq!(name_of(RateReducer::new(&RateParams::hold(8_000), 48_000, 0).unwrap_err()), "max_block");
    assert_eq!(name_of(RateExpander::new(&RateParams::hold(8_000), 48_000, 0).unwrap_err()), "max_block");
    // The gcd rule of clean mode: 192,000 → 191,998 shares a factor 2 and is accepted.
    assert!(RateReducer::new(&RateParams::clean(191_998), 192_000, 64).is_ok());
    assert!(RateReducer::new(&RateParams::hold(191_999), 192_000, 64).is_ok());
}

// Hold mode at a fractional ratio: the round trip is an exact sample-and-hold of the source.
#[test]
fn hold_round_trip_is_an_exact_sample_and_hold() {
    let x = noise(20_000, 9);
    let rt = round_trip(&RateParams::hold(7_300), 48_000, &x).unwrap();
    for (j, &v) in rt.iter().enumerate() {
        let k = j as u128 * 73 / 480;
        assert_eq!(v, x[ceil_naive(k * 480, 73) as usize], "sample {j}");
    }
}

#[test]
fn non_finite_input_never_poisons_clean_mode() {
    let mut x = sine(20_000, 440.0, 48_000, 0.5);
    x[102] = f32::NAN;
    x[5_000] = f32::INFINITY;
    x[9_000] = f32::NEG_INFINITY;
    let y = reduce(&RateParams::clean(8_000), 48_000, &x).unwrap();
    assert!(y.iter().all(|v| v.is_finite()));
    let rt = round_trip(&RateParams::clean(8_000), 48_000, &x).unwrap();
    assert!(rt.iter().all(|v| v.is_finite()));
    // Hold mode copies samples verbatim, NaN included.
    let y = reduce(&RateParams::hold(8_000), 48_000, &x).unwrap();
    assert_eq!(y.len(), reduced_len(48_000, 8_000, x.len()));
    assert!(y[17].is_nan() && y[1_500] == f32::NEG_INFINITY, "{} {}", y[17], y[1_500]);
    assert_eq!(y.iter().filter(|v| !v.is_finite()).count(), 2);
}

#[test]
fn reset_restarts_the_stream() {
    for p in [RateParams::hold(7_300), RateParams::clean(7_300)] {
        let x = noise(12_345, 4);
        let mut r = RateReducer::new(&p, 48_000, 4096).unwrap();
        let first = stream_reduce(&mut r, &x, || 4096);
        stream_reduce(&mut r, &noise(999, 8), || 100);
        r.reset();
        assert!(first == stream_reduce(&mut r, &x, || 4096), "{p:?}");
        let mut e = RateExpander::new(&p, 48_000, 4096).unwrap();
        let first = stream_expand(&mut e, &x, || 4096);
        stream_expand(&mut e, &noise(999, 8), || 100);
        e.reset();
        assert!(first == stream_expand(&mut e, &x, || 4096), "{p:?}");
    }
}

// Extreme ratios stay bounded in memory and produce the right lengths.
#[test]
fn extreme_ratios() {
    for p in [RateParams::hold(1), RateParams::clean(1), RateParams::clean(10), RateParams::clean(47_999)] {
        let x = sine(48_000 + 5, 3.0, 48_000, 0.5);
        let y = reduce(&p, 48_000, &x).unwrap();
        assert_eq!(y.len(), reduced_len(48_000, p.rate_hz, x.len()));
        assert!(y.iter().all(|v| v.is_finite()));
        let rt = round_trip(&p, 48_000, &x).unwrap();
        assert_eq!(rt.len(), x.len());
    }
    let y = reduce(&RateParams::hold(1), 768_000, &[0.5; 10]).unwrap();
    assert_eq!(y, [0.5]);
    assert_eq!(reduced_len(768_000, 1, usize::MAX), usize::MAX.div_ceil(768_000));
    assert_eq!(reduced_len(0, 1, 10), 0);
}

#[test]
fn stages_can_move_between_threads() {
    fn send<T: Send>() {}
    send::<RateReducer>();
    send::<RateExpander>();
}

#[test]
fn params_serialise_in_kebab_case() {
    let p: RateParams = serde_json::from_str(r#"{"rate_hz": 8000, "mode": "clean"}"#).unwrap();
    assert_eq!(p, RateParams::clean(8_000));
    assert_eq!(serde_json::to_string(&RateParams::default()).unwrap(), r#"{"rate_hz":11025,"mode":"hold"}"#);
    let d: RateParams = serde_json::from_str("{}").unwrap();
    assert_eq!(d, RateParams { rate_hz: 11_025, mode: RateMode::Hold });
    assert!(serde_json::from_str::<RateParams>(r#"{"rate": 8000}"#).is_err());
    assert!(serde_json::from_str::<RateParams>(r#"{"mode": "Clean"}"#).is_err());
}
