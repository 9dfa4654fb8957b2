//! Unit tests of the preparation steps.

use super::super::testing::*;
use super::*;
use crate::analysis::headroom::{headroom, suggest_pre_gain, MAX_PRE_GAIN_DB};
use crate::analysis::loudness::integrated_loudness;
use crate::analysis::Levels;
use crate::rng::Pcg32;

// ---- channels

fn mono(law: DownmixLaw) -> PrepParams {
    PrepParams { channels: ChannelMode::Mono(law), ..Default::default() }
}

/// Downmix levels, common practice for pan/downmix laws (e.g. the "−3 dB" and "−6 dB" sum laws of mixing
/// consoles): summing a correlated pair at −3 dB gives +3.01 dB over one side, at −6 dB 0 dB, averaging 0 dB;
/// a one-sided signal comes out at −3.01, −6.02 and −6.02 dB.
#[test]
fn downmix_laws_give_the_textbook_levels() {
    let s = sine(4800, 0.01, 0.25); // 48 whole periods
    let one_side = rms_dbfs(&s);
    let correlated = clip(48_000, vec![s.clone(), s.clone()]);
    let one_sided = clip(48_000, vec![s.clone(), vec![0.0; s.len()]]);
    for (law, corr_db, one_db) in [
        (DownmixLaw::Sum3db, 3.0103, -3.0103),
        (DownmixLaw::Sum6db, 0.0, -6.0206),
        (DownmixLaw::Average, 0.0, -6.0206),
        (DownmixLaw::Left, 0.0, 0.0),
    ] {
        let a = run(&mono(law), &correlated);
        let b = run(&mono(law), &one_sided);
        assert_eq!(a.clip.channel_count(), 1);
        let da = rms_dbfs(&a.clip.channels[0]) - one_side;
        let db = rms_dbfs(&b.clip.channels[0]) - one_side;
        eprintln!("{law:?}: correlated pair {da:+.4} dB, one-sided {db:+.4} dB");
        assert!((da - corr_db).abs() < 1e-4, "{law:?} correlated {da}");
        assert!((db - one_db).abs() < 1e-4, "{law:?} one-sided {db}");
    }
    // Right picks the second channel: silence for a left-only signal.
    let r = run(&mono(DownmixLaw::Right), &one_sided);
    assert!(r.clip.channels[0].iter().all(|&v| v == 0.0));
    // Average of three channels divides by three; sum laws add all three.
    let three = clip(48_000, vec![vec![0.3; 4], vec![0.3; 4], vec![0.3; 4]]);
    assert!((run(&mono(DownmixLaw::Average), &three).clip.channels[0][0] - 0.3).abs() < 1e-7);
    assert!((run(&mono(DownmixLaw::Sum6db), &three).clip.channels[0][0] - 0.45).abs() < 1e-7);
}

#[test]
fn mono_input_passes_through_and_duplicate_makes_stereo() {
    let m = clip(8000, vec![vec![0.5, -0.25, 1.0]]);
    for law in [DownmixLaw::Sum3db, DownmixLaw::Right] {
        let out = run(&mono(law), &m);
        assert_eq!(out.clip, m);
        assert!(!out.report.notes.is_empty());
    }
    let d = run(&PrepParams { channels: ChannelMode::Duplicate, ..Default::default() }, &m);
    assert_eq!(d.clip.channels, vec![m.channels[0].clone(), m.channels[0].clone()]);
    assert_eq!((d.report.channels_in, d.report.channels_out), (1, 2));
    let st = clip(8000, vec![vec![0.1, 0.2], vec![0.3, 0.4], vec![0.5, 0.6]]);
    let d = run(&PrepParams { channels: ChannelMode::Duplicate, ..Default::default() }, &st);
    assert_eq!(d.clip.channels, vec![vec![0.1, 0.2], vec![0.1, 0.2]]);
    // A correlated full-scale pair summed at −3 dB exceeds full scale: noted.
    let loud = clip(8000, vec![vec![1.0; 4], vec![1.0; 4]]);
    let out = run(&mono(DownmixLaw::Sum3db), &loud);
    assert!(out.report.notes.iter().any(|n| n.contains("+3.01 dBFS")), "{:?}", out.report.notes);
}

#[test]
fn non_finite_input_is_sanitized() {
    let c = clip(8000, vec![vec![f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.5]]);
    let out = run(&PrepParams::default(), &c);
    assert_eq!(out.clip.channels[0], vec![0.0, 1.0, -1.0, 0.5]);
}

// ---- trim

fn trim(threshold_dbfs: f64, margin_ms: f64) -> PrepParams {
    PrepParams { trim: Some(TrimParams { threshold_dbfs, margin_ms }), ..Default::default() }
}

#[test]
fn trim_keeps_the_margin_exactly() {
    // 1000 Hz: 1 ms = 1 frame. Loud frames 300..=699 (one channel is enough), quiet noise elsewhere.
    let mut l = vec![1e-4f32; 1000]; // −80 dBFS
    let mut r = vec![0.0f32; 1000];
    l[300] = 0.5;
    r[699] = -0.01; // −40 dBFS, in the other channel
    for v in &mut l[400..600] {
        *v = 0.2;
    }
    let c = clip(1000, vec![l.clone(), r.clone()]);
    let out = run(&trim(-60.0, 25.0), &c);
    assert_eq!((out.report.trimmed_start_frames, out.report.trimmed_end_frames), (275, 1000 - 725));
    assert_eq!(out.clip.frames(), 450);
    assert_eq!(out.clip.channels[0][25], 0.5, "first loud frame after exactly 25 frames of margin");
    assert_eq!(out.clip.channels[0][..25], l[275..300]);
    assert_eq!(out.clip.channels[1][450 - 26], -0.01, "last loud frame followed by exactly 25 frames");
    // No margin: starts and ends on the loud frames.
    let out = run(&trim(-60.0, 0.0), &c);
    assert_eq!((out.clip.channels[0][0], *out.clip.channels[1].last().unwrap()), (0.5, -0.01));
    // A margin larger than what is there stops at the ends.
    let out = run(&trim(-60.0, 1000.0), &c);
    assert_eq!(out.clip.frames(), 1000);
    // Exactly at the threshold counts as loud (0 dBFS is exactly 1.0); just below is quiet.
    let out = run(&trim(0.0, 0.0), &clip(1000, vec![vec![0.999_999_94, 1.0, -1.0, 0.999_999_94]]));
    assert_eq!(out.clip.channels[0], vec![1.0, -1.0]);
    let out = run(&trim(-40.0, 0.0), &clip(1000, vec![vec![0.0099, 0.0101, 0.0099]]));
    assert_eq!(out.clip.channels[0], vec![0.0101]);
}

#[test]
fn trimming_everything_is_an_error_naming_the_threshold() {
    for c in [clip(1000, vec![vec![1e-4; 100]]), clip(1000, vec![vec![0.0; 100]]), clip(1000, vec![vec![]])] {
        let e = err(&trim(-60.0, 10.0), &c);
        assert!(e.contains("trim.threshold_dbfs") && e.contains("-60"), "{e}");
        assert!(e.contains("everything is below -60 dBFS: nothing would be left"), "{e}");
    }
}

// ---- fades

fn faded(p: PrepParams, n: usize) -> Vec<f32> {
    run(&p, &clip(1000, vec![vec![1.0; n]])).clip.channels[0].clone()
}

#[test]
fn fades_start_and_end_at_exactly_zero_with_bounded_steps() {
    for curve in [FadeCurve::Linear, FadeCurve::EqualPower, FadeCurve::Exponential] {
        assert_eq!(curve.gain(0.0), 0.0);
        assert_eq!(curve.gain(1.0), 1.0);
        for fade_frames in [1usize, 2, 7, 100, 480] {
            let f = Some(FadeParams { ms: fade_frames as f64, curve }); // 1 frame per ms at 1 kHz
            let total = 1000;
            let x = faded(PrepParams { fade_in: f.clone(), fade_out: f, ..Default::default() }, total);
            assert_eq!(x[0], 0.0, "{curve:?} {fade_frames}: first sample of the fade-in");
            assert_eq!(x[total - 1], 0.0, "{curve:?} {fade_frames}: last sample of the fade-out");
            assert_eq!(x[fade_frames], 1.0, "{curve:?}: unity right after the fade-in");
            assert_eq!(x[total - 1 - fade_frames], 1.0, "{curve:?}: unity right before the fade-out");
            let allowed = curve.max_slope() / fade_frames as f64 + 1e-6;
            let max_step = x.windows(2).map(|w| (w[1] as f64 - w[0] as f64).abs()).fold(0.0, f64::max);
            assert!(max_step <= allowed, "{curve:?} {fade_frames}: step {max_step} > {allowed}");
            // The step bound is tight (within the sampling of the curve) for longer fades.
            if fade_frames >= 100 {
                assert!(max_step > 0.9 * allowed, "{curve:?} {fade_frames}: {max_step} vs {allowed}");
            }
            // Monotonic.
            assert!(x[..=fade_frames].windows(2).all(|w| w[1] >= w[0]), "{curve:?}");
        }
    }
    // Exponential: a straight line in dB (60 dB over the fade) but for the shift to reach 0.
    let g = FadeCurve::Exponential;
    let floor = 1e-3;
    let db = |t: f64| 20.0 * (g.gain(t) * (1.0 - floor) + floor).log10();
    assert!((db(0.5) + 30.0).abs() < 1e-9 && (db(0.25) + 45.0).abs() < 1e-9, "{} {}", db(0.5), db(0.25));
    // Equal-power: sin² + cos² = 1 for a fade-in and the matching fade-out.
    let e = FadeCurve::EqualPower;
    assert!((e.gain(0.3).powi(2) + e.gain(0.7).powi(2) - 1.0).abs() < 1e-12);
}

#[test]
fn fades_longer_than_the_clip_are_shortened() {
    let x =
        faded(PrepParams { fade_in: Some(FadeParams { ms: 5000.0, ..Default::default() }), ..Default::default() }, 10);
    assert_eq!(x, (0..10).map(|i| i as f32 / 10.0).collect::<Vec<_>>());
    let out = run(
        &PrepParams { fade_out: Some(FadeParams { ms: 5000.0, ..Default::default() }), ..Default::default() },
        &clip(1000, vec![vec![1.0; 10]]),
    );
    assert!(out.report.notes.iter().any(|n| n.contains("shortened")), "{:?}", out.report.notes);
    // Zero length is no fade; a fade on an empty clip does nothing.
    let x = faded(PrepParams { fade_in: Some(FadeParams { ms: 0.0, ..Default::default() }), ..Default::default() }, 3);
    assert_eq!(x, vec![1.0; 3]);
    assert!(faded(PrepParams { fade_in: Some(FadeParams::default()), ..Default::default() }, 0).is_empty());
}

// ---- normalisation

#[test]
fn peak_normalisation_hits_the_target() {
    let c = clip(48_000, vec![sine(4800, 0.01, 0.2), sine(4800, 0.013, -0.35)]);
    let out = run(&PrepParams { normalize: Some(Normalize::Peak { target_dbfs: -1.0 }), ..Default::default() }, &c);
    let p = Levels::measure(&out.clip.channels).peak_dbfs;
    assert!((p + 1.0).abs() < 1e-5, "{p}");
    let expected_gain = -1.0 - 20.0 * (0.35f64).log10();
    assert!((out.report.gain_db - expected_gain).abs() < 1e-3, "{}", out.report.gain_db);
    assert!((out.report.peak_dbfs_after + 1.0).abs() < 1e-5);
}

#[test]
fn normalising_silence_is_an_error() {
    let silent = clip(48_000, vec![vec![0.0; 48_000]]);
    let e = err(&PrepParams { normalize: Some(Normalize::Peak { target_dbfs: -1.0 }), ..Default::default() }, &silent);
    assert!(e.contains("normalize.target_dbfs") && e.contains("cannot normalise silence"), "{e}");
    let e =
        err(&PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -16.0 }), ..Default::default() }, &silent);
    assert!(e.contains("normalize.target_lufs") && e.contains("-16") && e.contains("cannot normalise silence"), "{e}");
    let short = clip(48_000, vec![sine(4800, 0.01, 0.5)]);
    let e =
        err(&PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -16.0 }), ..Default::default() }, &short);
    assert!(e.contains("0.100 s") && e.contains("0.4 s"), "{e}");
    assert_eq!(integrated_loudness(&short), None);
}

#[test]
fn loudness_normalisation_reports_its_gain() {
    let c = clip(48_000, vec![sine(48_000, 997.0 / 48_000.0, 0.1)]);
    let out =
        run(&PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -20.0 }), ..Default::default() }, &c);
    let r = &out.report;
    let (before, after) = (r.loudness_lufs_before.unwrap(), r.loudness_lufs_after.unwrap());
    assert!((after + 20.0).abs() < 1e-3, "{after}");
    assert!((before + r.gain_db - after).abs() < 1e-3, "{before} + {} vs {after}", r.gain_db);
    assert_eq!(r.gain_db, (r.gain_db * 1e6).round() / 1e6, "gain on a 1e-6 dB grid");
    // A loud target pushes the peak beyond full scale: noted, not limited.
    let out = run(&PrepParams { normalize: Some(Normalize::Loudness { target_lufs: 0.0 }), ..Default::default() }, &c);
    assert!(out.report.peak_dbfs_after > 0.0);
    assert!(out.report.notes.iter().any(|n| n.contains("beyond full scale")), "{:?}", out.report.notes);
}

// ---- loops

fn looped(start: u64, end: u64, crossfade_ms: f64) -> PrepParams {
    PrepParams { loop_region: Some(LoopRegion::frames(start, end, crossfade_ms).into()), ..Default::default() }
}

#[test]
fn loop_validation_names_the_values() {
    let c = clip(1000, vec![vec![0.5; 1000]]);
    let e = err(&looped(10, 1001, 0.0), &c);
    assert!(e.contains("loop_region.end") && e.contains("1001") && e.contains("at most 1000"), "{e}");
    let e = err(&looped(500, 400, 0.0), &c);
    assert!(e.contains("500..400") && e.contains("inverted"), "{e}");
    let e = err(&looped(400, 400, 0.0), &c);
    assert!(e.contains("400..400") && e.contains("empty"), "{e}");
    // Crossfade longer than the room before the start or inside the loop.
    let e = err(&looped(50, 900, 60.0), &c);
    assert!(e.contains("loop_region.crossfade_ms") && e.contains("60") && e.contains("there are 50"), "{e}");
    let e = err(&looped(500, 520, 30.0), &c);
    assert!(e.contains("loop_region.crossfade_ms") && e.contains("inside the loop (there are 20)"), "{e}");
    assert!(prepare(&looped(50, 900, 50.0), &c).is_ok());
    assert!(prepare(&looped(0, 1000, 0.0), &c).is_ok());
}

#[test]
fn loop_points_move_with_the_trim() {
    let mut x = vec![0.0f32; 1000];
    for v in &mut x[200..800] {
        *v = 0.5;
    }
    let c = clip(1000, vec![x]);
    let p = PrepParams { loop_region: Some(LoopRegion::frames(300, 700, 0.0).into()), ..trim(-60.0, 10.0) };
    let out = run(&p, &c);
    assert_eq!(out.report.trimmed_start_frames, 190);
    assert_eq!(out.report.loop_region, Some((110, 510)));
    // A trim that cuts into the loop is an error naming the values.
    let p = PrepParams { loop_region: Some(LoopRegion::frames(100, 700, 0.0).into()), ..trim(-60.0, 10.0) };
    let e = err(&p, &c);
    assert!(e.contains("100..700") && e.contains("190..810") && e.contains("cut into the loop"), "{e}");
    let p = PrepParams { loop_region: Some(LoopRegion::frames(300, 900, 0.0).into()), ..trim(-60.0, 10.0) };
    assert!(err(&p, &c).contains("300..900"));
}

/// A sine looped at a point that is not a whole number of periods jumps at the seam; the crossfade makes the
/// last loop sample a copy of the sample before the start, so the seam step equals the sine's own step.
#[test]
fn crossfade_makes_the_seam_continuous() {
    let rate = 48_000;
    let f = 440.0 / rate as f64;
    let x = sine(rate as usize, f, 0.8);
    let c = clip(rate, vec![x.clone()]);
    let (s, e) = (10_000u64, 30_000 + 37); // 30037 − 10000 frames is not a multiple of the period (109.09)
    let plain = run(&looped(s, e, 0.0), &c).clip.channels[0].clone();
    let smooth = run(&looped(s, e, 20.0), &c).clip.channels[0].clone();
    let seam = |y: &[f32]| (y[e as usize - 1] - y[s as usize]).abs();
    let natural = (x[s as usize] - x[s as usize - 1]).abs();
    eprintln!("seam jump without crossfade {:.4}, with {:.4}, natural step {natural:.4}", seam(&plain), seam(&smooth));
    assert!(seam(&plain) > 0.2, "the test loop should click without a crossfade");
    assert_eq!(seam(&smooth), natural);
    assert_eq!(smooth[e as usize - 1], x[s as usize - 1]);
    // Only the last n = 960 frames of the loop changed, and no step inside the crossfade is a click.
    let n = 960;
    assert_eq!(smooth[..e as usize - n], x[..e as usize - n]);
    assert_eq!(smooth[e as usize..], x[e as usize..]);
    assert_ne!(smooth[e as usize - n], x[e as usize - n]);
    let max_natural = x.windows(2).map(|w| (w[1] - w[0]).abs()).fold(0.0, f32::max);
    let max_step = smooth[e as usize - n - 1..e as usize].windows(2).map(|w| (w[1] - w[0]).abs()).fold(0.0, f32::max);
    assert!(max_step < 1.5 * max_natural, "{max_step} vs {max_natural}");
}

#[cfg(not(target_arch = "wasm32"))]
mod props {
    use super::*;
    use proptest::prelude::*;

    fn special() -> impl Strategy<Value = f32> {
        prop_oneof![
            4 => proptest::num::f32::ANY,
            1 => prop_oneof![Just(f32::NAN), Just(f32::INFINITY), Just(f32::MIN), Just(1e-40f32), Just(1e30f32)],
        ]
    }

    /// Seeded noise at a random level, with silent lead-in and tail (so the trim has work) and a few extreme or
    /// non-finite samples dropped in.
    fn clips() -> impl Strategy<Value = Clip> {
        let rate = prop_oneof![Just(1u32), Just(15), Just(1000), Just(8000), Just(16_000)];
        let specials = proptest::collection::vec((any::<usize>(), special()), 0..4);
        (1usize..=3, 0usize..8000, rate, any::<u64>(), -130.0f64..10.0, 0.0f64..0.5, 0.0f64..0.5, specials).prop_map(
            |(ch, n, rate, seed, level_db, lead, tail, specials)| {
                let mut rng = Pcg32::from_seed(seed, 0);
                let amp = 10f64.powf(level_db / 20.0);
                let (a, b) = ((n as f64 * lead) as usize, n - (n as f64 * tail) as usize);
                let mut channels: Vec<Vec<f32>> = (0..ch)
                    .map(|_| {
                        (0..n)
                            .map(|i| if i >= a && i < b { (rng.uniform_centered() * 2.0 * amp) as f32 } else { 0.0 })
                            .collect()
                    })
                    .collect();
                for (at, v) in specials {
                    if n > 0 {
                        channels[at % ch][at / ch % n] = v;
                    }
                }
                Clip { sample_rate: rate, channels }
            },
        )
    }

    fn ms() -> impl Strategy<Value = f64> {
        prop_oneof![24 => 0.0f64..200.0, 1 => Just(-1.0), 1 => Just(f64::NAN), 1 => Just(60_000.0)]
    }

    fn fade() -> impl Strategy<Value = Option<FadeParams>> {
        let curve = prop_oneof![Just(FadeCurve::Linear), Just(FadeCurve::EqualPower), Just(FadeCurve::Exponential)];
        proptest::option::of((ms(), curve).prop_map(|(ms, curve)| FadeParams { ms, curve }))
    }

    fn params() -> impl Strategy<Value = PrepParams> {
        let law = prop_oneof![
            Just(DownmixLaw::Sum3db),
            Just(DownmixLaw::Sum6db),
            Just(DownmixLaw::Average),
            Just(DownmixLaw::Left),
            Just(DownmixLaw::Right)
        ];
        let channels =
            prop_oneof![Just(ChannelMode::Keep), Just(ChannelMode::Duplicate), law.prop_map(ChannelMode::Mono)];
        let trim = proptest::option::of(
            (-125.0f64..2.0, ms()).prop_map(|(threshold_dbfs, margin_ms)| TrimParams { threshold_dbfs, margin_ms }),
        );
        let normalize = proptest::option::of(prop_oneof![
            (-62.0f64..2.0).prop_map(|target_dbfs| Normalize::Peak { target_dbfs }),
            (-72.0f64..2.0).prop_map(|target_lufs| Normalize::Loudness { target_lufs }),
        ]);
        let loop_region = proptest::option::of((0u64..8500, 0u64..8500, any::<bool>(), ms()).prop_map(
            |(a, b, ordered, crossfade_ms)| {
                let (start, end) = if ordered { (a.min(b), a.max(b)) } else { (a, b) };
                LoopSetting::from(LoopRegion::frames(start, end, crossfade_ms))
            },
        ));
        (channels, trim, fade(), fade(), normalize, loop_region).prop_map(
            |(channels, trim, fade_in, fade_out, normalize, loop_region)| PrepParams {
                channels,
                trim,
                fade_in,
                fade_out,
                normalize,
                loop_region,
            },
        )
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(1000))]
        #[test]
        fn prepare_never_panics_and_output_is_finite(c in clips(), p in params()) {
            match prepare(&p, &c) {
                Ok(out) => {
                    prop_assert!(out.clip.channels.iter().flatten().all(|s| s.is_finite()));
                    prop_assert_eq!(out.clip.channel_count(), out.report.channels_out);
                    prop_assert!(out.clip.channels.iter().all(|ch| ch.len() == out.clip.frames()));
                    let r = &out.report;
                    prop_assert!(r.gain_db.is_finite() && r.peak_dbfs_after.is_finite());
                    prop_assert!(r.loudness_lufs_before.is_none_or(f64::is_finite));
                    prop_assert!(r.loudness_lufs_after.is_none_or(f64::is_finite));
                    if let Some((s, e)) = r.loop_region {
                        prop_assert!(s < e && e <= out.clip.frames() as u64);
                    }
                    prop_assert_eq!(
                        r.trimmed_start_frames + r.trimmed_end_frames + out.clip.frames() as u64,
                        c.frames() as u64
                    );
                    serde_json::to_string(r).unwrap();
                }
                Err(e) => prop_assert!(!e.to_string().is_empty()),
            }
        }

        #[test]
        fn helpers_never_panic(s in any::<u64>(), e in any::<u64>(), from in any::<u32>(), to in any::<u32>(), b in any::<u64>()) {
            let (a, z) = rescale_loop(s.min(e), s.max(e), from, to);
            prop_assert!(a <= z);
            if let Ok((a, z)) = snap_to_block(s, e, b) {
                prop_assert!(a < z && a % b == 0 && z % b == 0);
            }
        }

        #[test]
        fn headroom_and_pre_gain_are_finite(c in clips(), bits in 0u32..40, m in 0u64..50) {
            let h = headroom(&c, bits);
            prop_assert!(h.peak_dbfs.is_finite() && h.headroom_lsb.is_finite() && h.used_bits.is_finite());
            let g = suggest_pre_gain(&c, bits, m);
            prop_assert!(g.is_finite() && g <= MAX_PRE_GAIN_DB);
        }
    }
}
