//! The compander stage: continuous μ-law / A-law curves with an N-bit quantizer.
//!
//! Compress with the continuous curve, quantize uniformly to `bits` bits, expand:
//! - μ-law: `F(x) = sgn(x)·ln(1 + μ|x|)/ln(1 + μ)`, inverse `sgn(y)·((1 + μ)^|y| − 1)/μ`.
//! - A-law: `F(x) = sgn(x)·A|x|/(1 + ln A)` for `|x| < 1/A`, `sgn(x)·(1 + ln(A|x|))/(1 + ln A)` above
//!   (A = 1 is the identity).
//!
//! The compressed value `y ∈ [−1, 1]` is quantized mid-tread and symmetric like a sign-magnitude word: with
//! `K = 2^(bits−1) − 1`, the code is `k = round(y·K)` (ties away from zero), `k ∈ −K…K`, and the level is `k/K`.
//! That gives `2^bits − 1` levels (G.711's two zero codes merged into one): zero is a level, so silence stays exactly
//! silent, and ±1.0 are levels, so full scale survives the round trip. Inputs beyond ±1.0 are clipped (and counted).
//!
//! Non-finite input: samples first go through [`crate::sample::sanitize`] (NaN → 0, ±Inf → ±1.0).
//!
//! All transcendental functions come from `libm`, so native and WebAssembly builds give identical output.

use crate::error::{Range, Result};
use crate::sample::sanitize;
use crate::stages::g711::Law;
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Allowed μ of the μ-law curve.
pub const MU: Range = Range::new(1.0, 100_000.0);
/// Allowed A of the A-law curve.
pub const A: Range = Range::new(1.0, 1000.0);
/// Allowed word length of the compressed value, in bits.
pub const BITS: Range = Range::new(2.0, 24.0);

/// Parameters of the [`Compander`] stage (continuous curve + uniform quantizer).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CompandParams {
    /// Which curve; default μ-law.
    pub law: Law,
    /// μ of the μ-law curve (dimensionless), 1 to 100,000; used when `law` is `mulaw`. Default and G.711's value:
    /// 255. Larger μ gives more detail to quiet passages at the expense of loud ones.
    pub mu: f64,
    /// A of the A-law curve (dimensionless), 1 (no companding) to 1,000; used when `law` is `alaw`. Default and
    /// G.711's value: 87.6.
    pub a: f64,
    /// Word length of the compressed value in bits, 2 to 24 (`2^bits − 1` levels). Default and G.711's: 8.
    pub bits: u32,
}

impl Default for CompandParams {
    fn default() -> Self {
        CompandParams { law: Law::Mulaw, mu: 255.0, a: 87.6, bits: 8 }
    }
}

// ---------------------------------------------------------------------------------------------------------------------

/// A continuous companding curve with its constants precomputed. Both directions are odd, monotonic, map
/// [−1, 1] onto [−1, 1], treat NaN as 0 and clamp their input to [−1, 1].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Curve {
    /// `sgn(x)·ln(1 + μ|x|)/ln(1 + μ)`.
    Mu {
        /// μ.
        mu: f64,
        /// `ln(1 + μ)`.
        ln1p_mu: f64,
    },
    /// `sgn(x)·A|x|/(1 + ln A)` below `1/A`, `sgn(x)·(1 + ln(A|x|))/(1 + ln A)` above.
    A {
        /// A.
        a: f64,
        /// `1 + ln A`.
        k: f64,
    },
}

#[inline]
fn clamp_unit(x: f64) -> f64 {
    if x.is_nan() {
        0.0
    } else {
        x.clamp(-1.0, 1.0)
    }
}

impl Curve {
    /// The μ-law curve; `mu` must be 1 to 100,000 (parameter `mu`).
    pub fn mu_law(mu: f64) -> Result<Self> {
        MU.check_f("mu", mu, "")?;
        Ok(Curve::Mu { mu, ln1p_mu: libm::log1p(mu) })
    }

    /// The A-law curve; `a` must be 1 to 1,000 (parameter `a`).
    pub fn a_law(a: f64) -> Result<Self> {
        A.check_f("a", a, "")?;
        Ok(Curve::A { a, k: 1.0 + libm::log(a) })
    }

    /// The curve `params` select.
    pub fn from_params(params: &CompandParams) -> Result<Self> {
        match params.law {
            Law::Mulaw => Curve::mu_law(params.mu),
            Law::Alaw => Curve::a_law(params.a),
        }
    }

    /// Compresses `x` (full-scale units) to `y ∈ [−1, 1]`.
    #[inline]
    pub fn compress(&self, x: f64) -> f64 {
        let x = clamp_unit(x);
        let m = x.abs();
        let y = match *self {
            Curve::Mu { mu, ln1p_mu } => libm::log1p(mu * m) / ln1p_mu,
            Curve::A { a, k } => {
                // Branch on A·|x| itself so the two pieces meet without a rounding step backwards.
                let ax = a * m;
                if ax < 1.0 {
                    ax / k
                } else {
                    (1.0 + libm::log(ax)) / k
                }
            }
        };
        y.min(1.0).copysign(x)
    }

    /// Expands `y ∈ [−1, 1]` back to full-scale units: the inverse of [`compress`](Self::compress).
    #[inline]
    pub fn expand(&self, y: f64) -> f64 {
        let y = clamp_unit(y);
        let m = y.abs();
        let x = match *self {
            Curve::Mu { mu, ln1p_mu } => libm::expm1(m * ln1p_mu) / mu,
            Curve::A { a, k } => {
                let yk = m * k;
                if yk < 1.0 {
                    yk / a
                } else {
                    libm::exp(yk - 1.0) / a
                }
            }
        };
        x.min(1.0).copysign(y)
    }

    /// The denominator of the logarithmic part: `ln(1 + μ)` or `1 + ln A`.
    pub fn log_span(&self) -> f64 {
        match *self {
            Curve::Mu { ln1p_mu, .. } => ln1p_mu,
            Curve::A { k, .. } => k,
        }
    }
}

// ---------------------------------------------------------------------------------------------------------------------
// The continuous compander stage
// ---------------------------------------------------------------------------------------------------------------------

/// Continuous companding: compress with the μ-law or A-law curve, quantize to `bits` bits (sign-magnitude, mid-tread,
/// `2^bits − 1` levels), expand. Parameters: `mu` 1 to 100,000 (start at 255), `a` 1 to 1,000 (start at 87.6),
/// `bits` 2 to 24 (start at 8, G.711's word length; 4 or 5 bits for an obvious lo-fi effect).
#[derive(Debug, Clone)]
pub struct Compander {
    params: CompandParams,
    curve: Curve,
    k: f64,
    clipped: u64,
}

impl Compander {
    /// Validates `params` (`mu`, `a` and `bits` are all checked, whichever law is selected) and builds the stage.
    pub fn new(params: &CompandParams) -> Result<Self> {
        Curve::mu_law(params.mu)?;
        Curve::a_law(params.a)?;
        BITS.check_u("bits", params.bits as u64)?;
        Ok(Compander {
            params: params.clone(),
            curve: Curve::from_params(params)?,
            k: ((1u32 << (params.bits - 1)) - 1) as f64,
            clipped: 0,
        })
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &CompandParams {
        &self.params
    }

    /// The curve in use.
    pub fn curve(&self) -> &Curve {
        &self.curve
    }

    /// Largest code magnitude `K = 2^(bits−1) − 1`; codes run from −K to K.
    pub fn max_code(&self) -> u32 {
        self.k as u32
    }

    /// Samples beyond ±1.0 since construction or the last [`reset`](Self::reset).
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// The code `k ∈ −K…K` for a sample (no counting).
    #[inline]
    pub fn encode(&self, x: f32) -> i32 {
        (self.curve.compress(sanitize(x) as f64) * self.k).round() as i32
    }

    /// The sample for a code (codes beyond ±K are clamped).
    #[inline]
    pub fn decode(&self, code: i32) -> f32 {
        self.curve.expand(code as f64 / self.k) as f32
    }

    /// Processes `buf` in place. Never allocates.
    pub fn process(&mut self, buf: &mut [f32]) {
        let mut clipped = 0u64;
        for s in buf.iter_mut() {
            let x = sanitize(*s);
            clipped += (x.abs() > 1.0) as u64;
            *s = self.decode(self.encode(x));
        }
        self.clipped += clipped;
    }

    /// Clears the clip counter.
    pub fn reset(&mut self) {
        self.clipped = 0;
    }

    /// Theoretical SQNR in dB for a busy, unclipped signal that lives in the logarithmic part of the curve
    /// (`|x| ≫ 1/μ`, or `|x| > 1/A`): there the error is proportional to the signal, so the SQNR does not depend on
    /// the level: `10·log10(12·K²) − 20·log10(L)` with `L` = `ln(1 + μ)` or `1 + ln A` (with `2^bits` levels this is
    /// the textbook `6.02·bits + 4.77 − 20·log10(L)`, 38 dB for G.711's μ = 255 and 8 bits). Measured on a signal
    /// spread over several octaves it holds within 0.1 dB; a steady sine can sit up to about 0.6 dB off at 8 bits,
    /// because it dwells near its peak.
    pub fn theory_sqnr_db(&self) -> f64 {
        10.0 * libm::log10(12.0 * self.k * self.k) - 20.0 * libm::log10(self.curve.log_span())
    }
}

impl Stage for Compander {
    fn process(&mut self, buf: &mut [f32]) {
        Compander::process(self, buf)
    }
    fn theory_sqnr_db(&self, _input_ms: f64) -> Option<f64> {
        Some(Compander::theory_sqnr_db(self))
    }
    fn reset(&mut self) {
        Compander::reset(self)
    }
    fn clipped(&self) -> u64 {
        Compander::clipped(self)
    }
    /// `2^bits` (the sign-magnitude word; `2^bits − 1` of its codes are distinct levels, zero having one code).
    fn code_space(&self) -> Option<u64> {
        Some(1u64 << self.params.bits)
    }
    /// Index `k + K` of the code `k ∈ −K…K` (so 0 … 2K).
    fn code_indices(&self, out: &[f32], codes: &mut [u32]) {
        let k = self.k as i32;
        for (c, &y) in codes.iter_mut().zip(out) {
            *c = (self.encode(y).clamp(-k, k) + k) as u32;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Error;
    use crate::stages::g711::G711Params;

    // -----------------------------------------------------------------------------------------------------------------
    // Continuous curves
    // -----------------------------------------------------------------------------------------------------------------

    fn compander(law: Law, bits: u32) -> Compander {
        Compander::new(&CompandParams { law, bits, ..Default::default() }).unwrap()
    }

    #[test]
    fn curves_match_their_formulas() {
        let mu = Curve::mu_law(255.0).unwrap();
        let a = Curve::a_law(87.6).unwrap();
        for &x in &[0.0f64, 1e-4, 0.005, 0.01, 0.1, 0.5, 0.9, 1.0] {
            let f = (1.0 + 255.0 * x).ln() / 256f64.ln();
            assert!((mu.compress(x) - f).abs() < 1e-15, "μ {x}");
            assert!((mu.compress(-x) + f).abs() < 1e-15, "μ odd {x}");
            let k = 1.0 + 87.6f64.ln();
            let g = if x < 1.0 / 87.6 { 87.6 * x / k } else { (1.0 + (87.6 * x).ln()) / k };
            assert!((a.compress(x) - g).abs() < 1e-15, "A {x}");
            assert!((mu.expand(mu.compress(x)) - x).abs() < 1e-14, "μ inverse {x}");
            assert!((a.expand(a.compress(x)) - x).abs() < 1e-14, "A inverse {x}");
        }
        // Boundary values: both curves fix 0 and ±1; A = 1 is the identity.
        for c in [mu, a] {
            assert_eq!(c.compress(0.0), 0.0);
            assert_eq!(c.compress(1.0), 1.0);
            assert_eq!(c.compress(-1.0), -1.0);
            assert_eq!(c.compress(f64::NAN), 0.0);
            assert_eq!(c.compress(7.0), 1.0);
        }
        let id = Curve::a_law(1.0).unwrap();
        for &x in &[-1.0, -0.3, 0.0, 0.3, 0.999, 1.0] {
            assert!((id.compress(x) - x).abs() < 1e-15 && (id.expand(x) - x).abs() < 1e-15, "{x}");
        }
    }

    #[test]
    fn round_trip_is_exact_at_zero_and_within_one_step_at_full_scale() {
        for law in [Law::Mulaw, Law::Alaw] {
            for bits in [2, 3, 8, 12, 16, 24] {
                let mut c = compander(law, bits);
                let mut b = [0.0f32, -0.0, 1.0, -1.0];
                c.process(&mut b);
                assert_eq!(b[0], 0.0);
                assert_eq!(b[1], 0.0);
                // One step below full scale, in the linear domain.
                let k = c.max_code() as f64;
                let step = 1.0 - c.curve().expand((k - 1.0) / k);
                assert!((1.0 - b[2] as f64).abs() <= step, "{law:?} {bits}: {}", b[2]);
                assert!((1.0 + b[3] as f64).abs() <= step, "{law:?} {bits}: {}", b[3]);
                assert_eq!(b[2], 1.0, "{law:?} {bits}: full scale is a level");
                assert_eq!(c.clipped(), 0);
            }
        }
    }

    #[test]
    fn levels_and_clipping() {
        let mut c = compander(Law::Mulaw, 2); // codes −1, 0, 1: levels −1, 0, +1
        let mut b = [-0.2f32, -0.01, 0.0, 0.01, 0.2, 1.5, f32::NAN, f32::NEG_INFINITY];
        c.process(&mut b);
        // F(x) ≥ 0.5 from x = (√256 − 1)/255 = 15/255.
        assert_eq!(b, [-1.0, 0.0, 0.0, 0.0, 1.0, 1.0, 0.0, -1.0]);
        assert_eq!(c.clipped(), 1);
        assert_eq!(c.encode(15.0 / 255.0 + 1e-6), 1);
        assert_eq!(c.encode(15.0 / 255.0 - 1e-6), 0);
        let c8 = compander(Law::Alaw, 8);
        assert_eq!(c8.max_code(), 127);
        assert_eq!(c8.encode(1.0), 127);
        assert_eq!(c8.encode(-1.0), -127);
        assert_eq!(c8.decode(500), 1.0, "codes beyond K are clamped");
    }

    /// 8-bit μ-law (μ = 255) and A-law (A = 87.6) give about 38 dB SQNR over a wide range of levels (the textbook
    /// figure); here the measured SQNR of a busy signal spread over the logarithmic region (magnitudes log-uniform over
    /// four octaves below full scale, random signs) is compared with `theory_sqnr_db`.
    #[test]
    fn sqnr_matches_theory_in_the_log_region() {
        let mut rng = crate::rng::Pcg32::from_seed(7, 0);
        let x: Vec<f32> = (0..100_000)
            .map(|_| {
                let m = (-4.0 * (rng.uniform_centered() + 0.5)).exp2();
                (if rng.next_u32() & 1 == 0 { m } else { -m }) as f32
            })
            .collect();
        for law in [Law::Mulaw, Law::Alaw] {
            for bits in [6, 8, 12, 16] {
                let mut c = compander(law, bits);
                let mut y = x.clone();
                c.process(&mut y);
                let s: f64 = x.iter().map(|&v| (v as f64).powi(2)).sum();
                let n: f64 = x.iter().zip(&y).map(|(&a, &b)| (a as f64 - b as f64).powi(2)).sum();
                let measured = 10.0 * (s / n).log10();
                let theory = c.theory_sqnr_db();
                println!("{law:?} {bits} bits: measured {measured:.2} dB, theory {theory:.2} dB");
                assert!((measured - theory).abs() < 0.2, "{law:?} {bits}: measured {measured:.2} theory {theory:.2}");
                assert_eq!(c.clipped(), 0);
            }
        }
        // With 2^bits levels the formula is 6.02·8 + 4.77 − 20·log10(ln 256) = 38.05 dB; ours has 255 levels.
        let t = compander(Law::Mulaw, 8).theory_sqnr_db();
        assert!((t - (10.0 * (12.0f64 * 127.0 * 127.0).log10() - 20.0 * 256f64.ln().log10())).abs() < 1e-9);
        assert!((37.9..38.1).contains(&t), "{t}");
    }

    #[test]
    fn out_of_range_parameters_name_themselves() {
        let d = CompandParams::default();
        for (p, name) in [
            (CompandParams { mu: 0.5, ..d.clone() }, "mu"),
            (CompandParams { mu: 100_001.0, ..d.clone() }, "mu"),
            (CompandParams { mu: f64::NAN, ..d.clone() }, "mu"),
            (CompandParams { a: 0.9, ..d.clone() }, "a"),
            (CompandParams { a: 1000.5, law: Law::Alaw, ..d.clone() }, "a"),
            (CompandParams { bits: 1, ..d.clone() }, "bits"),
            (CompandParams { bits: 25, ..d.clone() }, "bits"),
        ] {
            let e = Compander::new(&p).unwrap_err();
            assert!(matches!(&e, Error::Param { name: n, .. } if n == name), "{e}");
        }
        for p in [
            CompandParams { mu: 1.0, a: 1.0, bits: 2, ..d.clone() },
            CompandParams { mu: 100_000.0, a: 1000.0, bits: 24, ..d.clone() },
        ] {
            assert!(Compander::new(&p).is_ok());
        }
    }

    #[test]
    fn params_serde_names() {
        let p: CompandParams = serde_json::from_str(r#"{"law": "alaw", "a": 50, "bits": 6}"#).unwrap();
        assert_eq!(p, CompandParams { law: Law::Alaw, a: 50.0, bits: 6, ..Default::default() });
        assert_eq!(serde_json::to_string(&Law::Mulaw).unwrap(), "\"mulaw\"");
        assert_eq!(serde_json::from_str::<G711Params>(r#"{"law": "alaw"}"#).unwrap().law, Law::Alaw);
        assert_eq!(serde_json::from_str::<G711Params>("{}").unwrap(), G711Params::default());
        assert!(serde_json::from_str::<CompandParams>(r#"{"mew": 3}"#).is_err());
    }

    #[cfg(not(target_arch = "wasm32"))]
    mod props {
        use super::*;
        use proptest::prelude::*;

        fn curves() -> impl Strategy<Value = Curve> {
            prop_oneof![
                (1.0f64..=100_000.0).prop_map(|mu| Curve::mu_law(mu).unwrap()),
                (1.0f64..=1000.0).prop_map(|a| Curve::a_law(a).unwrap()),
            ]
        }

        proptest! {
            #[test]
            fn curves_are_monotonic(c in curves(), a in -1.2f64..1.2, b in -1.2f64..1.2) {
                let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
                prop_assert!(c.compress(lo) <= c.compress(hi), "{c:?} compress {lo} {hi}");
                prop_assert!(c.expand(lo) <= c.expand(hi), "{c:?} expand {lo} {hi}");
            }

            #[test]
            fn curves_are_monotonic_near_the_a_law_seam(a in 1.0f64..=1000.0, d in -1e-12f64..1e-12, e in 0.0f64..1e-12) {
                let c = Curve::a_law(a).unwrap();
                let x = 1.0 / a + d;
                prop_assert!(c.compress(x) <= c.compress(x + e));
                let y = 1.0 / c.log_span() + d;
                prop_assert!(c.expand(y) <= c.expand(y + e));
            }

            #[test]
            fn stage_is_monotonic_and_bounded(
                law in prop_oneof![Just(Law::Mulaw), Just(Law::Alaw)],
                bits in 2u32..=24,
                a in proptest::num::f32::ANY,
                b in proptest::num::f32::ANY,
            ) {
                let mut c = compander(law, bits);
                let mut buf = [a, b];
                c.process(&mut buf);
                prop_assert!(buf.iter().all(|v| v.is_finite() && v.abs() <= 1.0));
                let (sa, sb) = (sanitize(a), sanitize(b));
                if sa <= sb { prop_assert!(buf[0] <= buf[1]) } else { prop_assert!(buf[0] >= buf[1]) }
            }
        }
    }
}
