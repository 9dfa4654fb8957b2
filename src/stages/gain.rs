//! Gain and overflow: a gain in dB, then one of four rules for what happens to samples beyond full scale.
//!
//! # Parameters
//! - `gain_db`: gain in decibels, −60 to +60 dB; 0 dB (the default) leaves in-range samples bit for bit unchanged.
//!   A good starting point for audible overflow effects: +12 dB.
//! - `overflow`: the [`Overflow`] rule; default `clip`.
//!
//! # Overflow rules (`x` is the sample after the gain)
//! - `clip`: ±1.0 beyond full scale; counts samples with `abs(x) > 1`.
//! - `wrap`: two's-complement wrap-around like an integer overflow, `((x + 1) mod 2) − 1`. Samples in `[−1, 1)` pass
//!   unchanged, +1.0 wraps to −1.0 and 1.25 to −0.75. Counts samples with `x ≥ 1` or `x < −1`.
//! - `fold`: reflection at ±1 (a triangle of period 4): 1.25 becomes 0.75, 2.0 becomes 0, 3.0 becomes −1.0. Counts
//!   samples with `abs(x) > 1`.
//! - `saturate`: a soft knee (below). Counts samples with `abs(x) > 1` before saturation, although none is cut.
//!
//! The saturation curve is linear up to the knee `k = ½` (−6.02 dBFS) and above it
//! `y = k + (1 − k)·tanh((|x| − k)/(1 − k))` with the sign of `x`: slope 1 at the knee (no corner), monotonic,
//! odd, never above 1 (it reaches exactly 1 only beyond about |x| = 10, where tanh rounds to 1 in f64); full scale in
//! gives `0.5 + 0.5·tanh(1) ≈ 0.881` (−1.10 dBFS).
//!
//! # Non-finite input
//! Samples first go through [`crate::sample::sanitize`]: NaN becomes 0 and ±Inf becomes ±1.0 (full scale), exactly
//! what the chain does before its first stage, so the stage gives the same output whether or not its input was
//! sanitized. The output is always finite and within [−1, 1].

use crate::db::db_to_gain;
use crate::error::{Range, Result};
use crate::sample::sanitize;
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// What happens to samples beyond full scale.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Overflow {
    /// Hard clip at ±1.0.
    #[default]
    Clip,
    /// Two's-complement wrap-around: `((x + 1) mod 2) − 1`, so +1.0 wraps to −1.0.
    Wrap,
    /// Fold-back: reflection at ±1.0 (1.25 becomes 0.75, 3.0 becomes −1.0).
    Fold,
    /// Soft saturation: linear to −6 dBFS, then a tanh knee towards ±1.0.
    Saturate,
}

/// Where the saturation curve leaves the straight line, in full-scale units (−6.02 dBFS).
pub const SATURATE_KNEE: f64 = 0.5;

impl Overflow {
    /// Applies the rule to a finite sample `x` of any magnitude; the result is in [−1, 1].
    #[inline]
    pub fn apply(self, x: f64) -> f64 {
        match self {
            Overflow::Clip => x.clamp(-1.0, 1.0),
            Overflow::Wrap => wrap(x),
            Overflow::Fold => fold(x),
            Overflow::Saturate => saturate(x),
        }
    }

    /// Whether `x` is beyond what the rule passes unchanged and so counts as clipped (see the module table).
    #[inline]
    pub fn overflows(self, x: f64) -> bool {
        match self {
            Overflow::Wrap => !(-1.0..1.0).contains(&x),
            _ => x.abs() > 1.0,
        }
    }
}

/// `((x + 1) mod 2) − 1`, with samples already in `[-1, 1)` returned untouched (adding and subtracting 1 would round
/// away the low bits of small samples).
fn wrap(x: f64) -> f64 {
    if (-1.0..1.0).contains(&x) {
        return x;
    }
    let mut r = (x + 1.0) % 2.0; // in (−2, 2), exact
    if r < 0.0 {
        r += 2.0;
    }
    if r >= 2.0 {
        r -= 2.0; // a tiny negative `r` plus 2 can round to 2
    }
    r - 1.0
}

/// Reflection at ±1: a triangle wave of period 4 through the identity on [−1, 1].
fn fold(x: f64) -> f64 {
    if x.abs() <= 1.0 {
        return x;
    }
    let mut r = (x + 1.0) % 4.0; // in (−4, 4), exact
    if r < 0.0 {
        r += 4.0;
    }
    if r >= 4.0 {
        r -= 4.0;
    }
    if r <= 2.0 {
        r - 1.0
    } else {
        3.0 - r
    }
}

/// Linear up to [`SATURATE_KNEE`], then `k + (1 − k)·tanh((|x| − k)/(1 − k))`.
fn saturate(x: f64) -> f64 {
    let a = x.abs();
    if a <= SATURATE_KNEE {
        return x;
    }
    let span = 1.0 - SATURATE_KNEE;
    (SATURATE_KNEE + span * libm::tanh((a - SATURATE_KNEE) / span)).copysign(x)
}

/// Allowed `gain_db`, in dB.
pub const GAIN_DB: Range = Range::new(-60.0, 60.0);

/// Parameters of the gain-and-overflow stage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct GainParams {
    /// Gain in dB, −60 to +60. Default 0 (unity). A good starting point to hear the overflow rule: +12.
    pub gain_db: f64,
    /// What happens beyond full scale; default `clip`.
    pub overflow: Overflow,
}

impl Default for GainParams {
    fn default() -> Self {
        GainParams { gain_db: 0.0, overflow: Overflow::Clip }
    }
}

/// The gain-and-overflow stage (stateless apart from its clip counter): `gain_db` in dB, −60 to +60, start at 0 dB
/// (unity) or +12 dB to hear the overflow rule; see the [module docs](self) for the rules.
#[derive(Debug, Clone)]
pub struct Gain {
    params: GainParams,
    gain: f64,
    clipped: u64,
}

impl Gain {
    /// Validates `params` (`gain_db` within −60 to +60 dB) and builds the stage.
    pub fn new(params: &GainParams) -> Result<Self> {
        GAIN_DB.check_f("gain_db", params.gain_db, " dB")?;
        Ok(Gain { params: params.clone(), gain: db_to_gain(params.gain_db), clipped: 0 })
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &GainParams {
        &self.params
    }

    /// The linear gain factor.
    pub fn gain(&self) -> f64 {
        self.gain
    }

    /// Samples beyond full scale (after the gain) since construction or the last [`reset`](Self::reset).
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Processes one sample without counting it.
    #[inline]
    pub fn apply(&self, x: f32) -> f32 {
        self.params.overflow.apply(sanitize(x) as f64 * self.gain) as f32
    }

    /// Applies gain and overflow rule to `buf` in place. Never allocates.
    pub fn process(&mut self, buf: &mut [f32]) {
        let g = self.gain;
        // One loop per rule (the rule is a constant in each), so that the clip loop is vectorized.
        let run = |buf: &mut [f32], rule: Overflow| {
            let mut clipped = 0u64;
            for s in buf.iter_mut() {
                let x = sanitize(*s) as f64 * g;
                clipped += rule.overflows(x) as u64;
                *s = rule.apply(x) as f32;
            }
            clipped
        };
        self.clipped += match self.params.overflow {
            Overflow::Clip => run(buf, Overflow::Clip),
            Overflow::Wrap => run(buf, Overflow::Wrap),
            Overflow::Fold => run(buf, Overflow::Fold),
            Overflow::Saturate => run(buf, Overflow::Saturate),
        };
    }

    /// Clears the clip counter.
    pub fn reset(&mut self) {
        self.clipped = 0;
    }
}

impl Stage for Gain {
    fn process(&mut self, buf: &mut [f32]) {
        Gain::process(self, buf)
    }
    fn reset(&mut self) {
        Gain::reset(self)
    }
    fn clipped(&self) -> u64 {
        Gain::clipped(self)
    }
    /// The gain is intended: only what the overflow rule does to `x·gain` counts as this stage's error.
    fn reference_gain(&self) -> f64 {
        self.gain
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Error;

    fn run(gain_db: f64, overflow: Overflow, input: &[f32]) -> (Vec<f32>, u64) {
        let mut g = Gain::new(&GainParams { gain_db, overflow }).unwrap();
        let mut b = input.to_vec();
        g.process(&mut b);
        (b, g.clipped())
    }

    #[test]
    fn clip_boundaries_are_exact() {
        let (y, c) = run(0.0, Overflow::Clip, &[-1.5, -1.0, -0.999_999_94, 0.0, 0.999_999_94, 1.0, 1.000_000_1, 7.0]);
        assert_eq!(y, [-1.0, -1.0, -0.999_999_94, 0.0, 0.999_999_94, 1.0, 1.0, 1.0]);
        assert_eq!(c, 3);
    }

    #[test]
    fn wrap_is_twos_complement_overflow() {
        let (y, c) = run(0.0, Overflow::Wrap, &[1.25, -1.25, 1.0, -1.0, 0.5, 3.0, 2.5, -3.5, 0.999_999_94]);
        assert_eq!(y, [-0.75, 0.75, -1.0, -1.0, 0.5, -1.0, 0.5, 0.5, 0.999_999_94]);
        assert_eq!(c, 6, "1.25, −1.25, 1.0, 3.0, 2.5 and −3.5 wrapped");
    }

    #[test]
    fn fold_reflects_at_full_scale() {
        let (y, c) = run(0.0, Overflow::Fold, &[1.25, -1.25, 1.0, -1.0, 2.0, 3.0, -3.0, 4.5, 0.3]);
        assert_eq!(y, [0.75, -0.75, 1.0, -1.0, 0.0, -1.0, 1.0, 0.5, 0.3]);
        assert_eq!(c, 6);
    }

    #[test]
    fn saturation_is_linear_below_the_knee_and_smooth_above() {
        let (y, c) = run(0.0, Overflow::Saturate, &[0.25, -0.5, 1.0, -1.0, 2.0, 1000.0]);
        assert_eq!(&y[..2], &[0.25, -0.5]);
        let fs = (0.5 + 0.5 * libm::tanh(1.0)) as f32;
        assert_eq!(y[2], fs);
        assert_eq!(y[3], -fs);
        assert!(y[4] > fs && y[4] < 1.0);
        assert_eq!(y[5], 1.0, "tanh has reached 1 in f64 and the sample is exactly full scale");
        assert_eq!(c, 2, "only 2.0 and 1000.0 exceed full scale before saturation");
        // Slope 1 at the knee: the curve just above it has the same slope as the line.
        let d = 1e-7;
        let slope = (saturate(SATURATE_KNEE + d) - saturate(SATURATE_KNEE)) / d;
        assert!((slope - 1.0).abs() < 1e-6, "{slope}");
    }

    #[test]
    fn gain_accuracy() {
        // 20·log10(2) = 6.0206 dB doubles the amplitude.
        let (y, c) = run(6.0206, Overflow::Clip, &[0.25, -0.125]);
        assert!((y[0] - 0.5).abs() < 1e-5 && (y[1] + 0.25).abs() < 1e-5, "{y:?}");
        assert_eq!(c, 0);
        assert!((db_to_gain(20.0 * 2f64.log10()) - 2.0).abs() < 1e-14);
        assert!((db_to_gain(-20.0) - 0.1).abs() < 1e-15);
        assert!((db_to_gain(60.0) - 1000.0).abs() < 1e-9);
        // 0 dB is exactly unity: every in-range sample passes bit for bit, in every mode but saturate.
        let xs = [0.123_456_79f32, -0.987_654_3, 1e-30, -1e-38, 0.5];
        for rule in [Overflow::Clip, Overflow::Wrap, Overflow::Fold] {
            assert_eq!(run(0.0, rule, &xs).0, xs);
        }
    }

    #[test]
    fn non_finite_inputs_are_sanitized_first() {
        for rule in [Overflow::Clip, Overflow::Wrap, Overflow::Fold, Overflow::Saturate] {
            let (y, _) = run(12.0, rule, &[f32::NAN, f32::INFINITY, f32::NEG_INFINITY]);
            assert_eq!(y[0], 0.0, "{rule:?}");
            assert!(y.iter().all(|v| v.is_finite() && v.abs() <= 1.0), "{rule:?}: {y:?}");
            // Same as feeding ±1.0.
            let (z, _) = run(12.0, rule, &[0.0, 1.0, -1.0]);
            assert_eq!(y, z, "{rule:?}");
        }
        let (y, c) = run(0.0, Overflow::Clip, &[f32::INFINITY, f32::NEG_INFINITY]);
        assert_eq!((y, c), (vec![1.0, -1.0], 0));
    }

    #[test]
    fn empty_buffer_and_reset() {
        let mut g = Gain::new(&GainParams { gain_db: 20.0, ..Default::default() }).unwrap();
        g.process(&mut []);
        g.process(&mut [0.5]);
        assert_eq!(g.clipped(), 1);
        g.reset();
        assert_eq!(g.clipped(), 0);
    }

    #[test]
    fn out_of_range_gain_names_itself() {
        for db in [-60.1, 60.1, f64::NAN, f64::INFINITY] {
            let e = Gain::new(&GainParams { gain_db: db, ..Default::default() }).unwrap_err();
            assert!(matches!(&e, Error::Param { name, .. } if name == "gain_db"), "{e}");
            assert!(e.to_string().contains("-60 to 60 dB"), "{e}");
        }
        assert!(Gain::new(&GainParams { gain_db: -60.0, ..Default::default() }).is_ok());
        assert!(Gain::new(&GainParams { gain_db: 60.0, ..Default::default() }).is_ok());
    }

    #[test]
    fn params_serde_names() {
        let p: GainParams = serde_json::from_str(r#"{"gain_db": 6, "overflow": "saturate"}"#).unwrap();
        assert_eq!(p, GainParams { gain_db: 6.0, overflow: Overflow::Saturate });
        for (rule, name) in [
            (Overflow::Clip, "clip"),
            (Overflow::Wrap, "wrap"),
            (Overflow::Fold, "fold"),
            (Overflow::Saturate, "saturate"),
        ] {
            assert_eq!(serde_json::to_string(&rule).unwrap(), format!("\"{name}\""));
        }
        assert_eq!(serde_json::from_str::<GainParams>("{}").unwrap(), GainParams::default());
        assert!(serde_json::from_str::<GainParams>(r#"{"gain": 6}"#).is_err());
    }

    #[cfg(not(target_arch = "wasm32"))]
    mod props {
        use super::*;
        use proptest::prelude::*;

        fn rules() -> impl Strategy<Value = Overflow> {
            prop_oneof![Just(Overflow::Clip), Just(Overflow::Wrap), Just(Overflow::Fold), Just(Overflow::Saturate)]
        }

        proptest! {
            #[test]
            fn output_always_in_full_scale(x in proptest::num::f32::ANY, db in -60.0f64..=60.0, rule in rules()) {
                let (y, _) = run(db, rule, &[x]);
                prop_assert!(y[0].is_finite() && (-1.0..=1.0).contains(&y[0]), "{x} {db} {rule:?} -> {}", y[0]);
            }

            #[test]
            fn wrap_and_fold_keep_their_period(x in -1000.0f64..1000.0) {
                // Wrap has period 2, fold period 4 (up to the rounding of x + period).
                prop_assert!((wrap(x + 2.0) - wrap(x)).abs() < 1e-9 || (wrap(x + 2.0) - wrap(x)).abs() > 2.0 - 1e-9);
                prop_assert!((fold(x + 4.0) - fold(x)).abs() < 1e-9);
            }

            #[test]
            fn clip_and_saturate_are_monotonic(a in -10.0f32..10.0, b in -10.0f32..10.0) {
                let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
                for rule in [Overflow::Clip, Overflow::Saturate] {
                    let (y, _) = run(0.0, rule, &[lo, hi]);
                    prop_assert!(y[0] <= y[1], "{rule:?}: {lo} -> {}, {hi} -> {}", y[0], y[1]);
                }
            }
        }
    }
}
