//! Companding: ITU-T G.711 μ-law and A-law codecs, and continuous μ-law / A-law curves with an N-bit quantizer.
//!
//! # G.711 codec functions
//! [`linear_to_ulaw`], [`ulaw_to_linear`], [`linear_to_alaw`] and [`alaw_to_linear`] convert between 16-bit linear
//! PCM and 8-bit G.711 codes, bit-exact to Python's `audioop.lin2ulaw`/`ulaw2lin`/`lin2alaw`/`alaw2lin` with
//! `width=2` (which follow the Sun Microsystems reference code). G.711 itself works on 14-bit (μ-law) or 13-bit
//! (A-law) linear samples: the encoders drop the low 2 or 3 bits by an arithmetic shift, which floors, so −1
//! encodes like −4 (μ-law) or −8 (A-law). Codes are as transmitted: μ-law codes are bit-inverted (0 → `0xFF`),
//! A-law codes have their even bits inverted (XOR `0x55`; 0 → `0xD5`).
//!
//! # The [`G711`] stage
//! float → 16-bit PCM code ([`crate::quantize::pcm_code`], round to nearest, clamp) → G.711 code → 16-bit → float
//! (÷ 32768). Samples whose 16-bit code would lie outside −32768…32767 (from +32767.5/32768 up) are counted as
//! clipped. There is no simple closed form for its error, so G.711 is measured only: about 38.1 dB (μ-law) and
//! 38.2 dB (A-law) SQNR for a busy signal spread over the top 24 dB, falling slowly below that.
//!
//! # The [`Compander`] stage (continuous curves)
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
//! Non-finite input: samples first go through [`crate::chain::sanitize`] (NaN → 0, ±Inf → ±1.0) in both stages.
//!
//! All transcendental functions come from `libm`, so native and WebAssembly builds give identical output.

use crate::chain::{sanitize, Stage};
use crate::error::{check_range_f, check_range_u, Result};
use crate::quantize::pcm_code;
use serde::{Deserialize, Serialize};

// ---------------------------------------------------------------------------------------------------------------------
// G.711 codec (fast path: bit arithmetic; the table-search reference is in the tests)
// ---------------------------------------------------------------------------------------------------------------------

/// μ-law bias in the 14-bit domain (0x84 = 132 in the 16-bit domain, ÷ 4).
const ULAW_BIAS: i32 = 33;

/// Encodes a 16-bit linear sample as a G.711 μ-law code, exactly like `audioop.lin2ulaw(…, 2)`.
#[inline]
pub fn linear_to_ulaw(x: i16) -> u8 {
    let v = (x >> 2) as i32; // 14-bit sample, −8192…8191
    let (mag, mask) = if v < 0 { (-v, 0x7F) } else { (v, 0xFF) };
    let biased = mag + ULAW_BIAS; // 33…8225
                                  // Segment s holds biased magnitudes in [32·2^s, 64·2^s): bit length minus 6.
    let seg = (32 - (biased as u32).leading_zeros()).saturating_sub(6);
    if seg >= 8 {
        return 0x7F ^ mask; // beyond the last segment: the largest magnitude
    }
    let code = (seg << 4) | ((biased as u32 >> (seg + 1)) & 0x0F);
    code as u8 ^ mask
}

/// Decodes a G.711 μ-law code to 16-bit linear, exactly like `audioop.ulaw2lin(…, 2)` (range ±32124).
#[inline]
pub fn ulaw_to_linear(code: u8) -> i16 {
    let u = !code;
    let t = ((((u & 0x0F) as i32) << 3) + 0x84) << ((u & 0x70) >> 4);
    (if u & 0x80 != 0 { 0x84 - t } else { t - 0x84 }) as i16
}

/// Encodes a 16-bit linear sample as a G.711 A-law code, exactly like `audioop.lin2alaw(…, 2)`.
#[inline]
pub fn linear_to_alaw(x: i16) -> u8 {
    let v = (x >> 3) as i32; // 13-bit sample, −4096…4095
    let (mag, mask) = if v >= 0 { (v, 0xD5) } else { (-v - 1, 0x55) }; // one's-complement magnitude, 0…4095
                                                                       // Segment 0 holds 0…31, segment s ≥ 1 holds [16·2^s, 32·2^s): bit length minus 5.
    let seg = (32 - (mag as u32).leading_zeros()).saturating_sub(5);
    let shift = if seg < 2 { 1 } else { seg };
    let code = (seg << 4) | ((mag as u32 >> shift) & 0x0F);
    code as u8 ^ mask
}

/// Decodes a G.711 A-law code to 16-bit linear, exactly like `audioop.alaw2lin(…, 2)` (range ±32256).
#[inline]
pub fn alaw_to_linear(code: u8) -> i16 {
    let a = code ^ 0x55;
    let m = ((a & 0x0F) as i32) << 4;
    let t = match (a & 0x70) >> 4 {
        0 => m + 8,
        seg => (m + 0x108) << (seg - 1),
    };
    (if a & 0x80 != 0 { t } else { -t }) as i16
}

// ---------------------------------------------------------------------------------------------------------------------
// Parameters
// ---------------------------------------------------------------------------------------------------------------------

/// Companding law.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Law {
    /// μ-law (North America, Japan): `mulaw`.
    #[default]
    Mulaw,
    /// A-law (Europe and most of the world): `alaw`.
    Alaw,
}

/// Parameters of the [`G711`] stage.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct G711Params {
    /// Which G.711 law; default μ-law.
    pub law: Law,
}

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
// The G.711 stage
// ---------------------------------------------------------------------------------------------------------------------

/// The G.711 stage: 16-bit PCM through an 8-bit μ-law or A-law code and back. No parameters to tune but the law;
/// start with μ-law. Output levels are the codec's 255 (μ-law) or 256 (A-law) decoded values ÷ 32768.
#[derive(Debug, Clone)]
pub struct G711 {
    params: G711Params,
    clipped: u64,
}

impl G711 {
    /// Builds the stage (every law is valid; the `Result` keeps all stage constructors alike).
    pub fn new(params: &G711Params) -> Result<Self> {
        Ok(G711 { params: params.clone(), clipped: 0 })
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &G711Params {
        &self.params
    }

    /// Samples beyond the 16-bit range since construction or the last [`reset`](Self::reset).
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Encodes and decodes one 16-bit sample with this stage's law.
    #[inline]
    pub fn round_trip_i16(&self, x: i16) -> i16 {
        match self.params.law {
            Law::Mulaw => ulaw_to_linear(linear_to_ulaw(x)),
            Law::Alaw => alaw_to_linear(linear_to_alaw(x)),
        }
    }

    /// Processes `buf` in place. Never allocates.
    pub fn process(&mut self, buf: &mut [f32]) {
        let mut clipped = 0u64;
        for s in buf.iter_mut() {
            let x = sanitize(*s);
            let r = (x as f64 * 32768.0).round();
            clipped += !(-32768.0..=32767.0).contains(&r) as u64;
            *s = self.round_trip_i16(pcm_code(x, 16) as i16) as f32 / 32768.0;
        }
        self.clipped += clipped;
    }

    /// Clears the clip counter.
    pub fn reset(&mut self) {
        self.clipped = 0;
    }
}

impl Stage for G711 {
    fn process(&mut self, buf: &mut [f32]) {
        G711::process(self, buf)
    }
    fn reset(&mut self) {
        G711::reset(self)
    }
    fn clipped(&self) -> u64 {
        G711::clipped(self)
    }
}

// ---------------------------------------------------------------------------------------------------------------------
// Continuous curves
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
        check_range_f("mu", mu, 1.0, 100_000.0, "")?;
        Ok(Curve::Mu { mu, ln1p_mu: libm::log1p(mu) })
    }

    /// The A-law curve; `a` must be 1 to 1,000 (parameter `a`).
    pub fn a_law(a: f64) -> Result<Self> {
        check_range_f("a", a, 1.0, 1000.0, "")?;
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
        check_range_u("bits", params.bits as u64, 2, 24)?;
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
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Error;

    // -----------------------------------------------------------------------------------------------------------------
    // Naive G.711 references: the segment tables searched linearly, mantissas by division, decoders in closed form.
    // -----------------------------------------------------------------------------------------------------------------

    /// Upper ends of the μ-law segments, biased 14-bit magnitude.
    const SEG_UEND: [i32; 8] = [0x3F, 0x7F, 0xFF, 0x1FF, 0x3FF, 0x7FF, 0xFFF, 0x1FFF];
    /// Upper ends of the A-law segments, 13-bit magnitude.
    const SEG_AEND: [i32; 8] = [0x1F, 0x3F, 0x7F, 0xFF, 0x1FF, 0x3FF, 0x7FF, 0xFFF];

    fn ref_linear_to_ulaw(x: i16) -> u8 {
        let v = (x as i32).div_euclid(4); // floor division, like the arithmetic shift
        let negative = v < 0;
        let biased = v.abs() + 33;
        let Some(seg) = SEG_UEND.iter().position(|&end| biased <= end) else {
            return if negative { 0x00 } else { 0x80 };
        };
        let mantissa = biased / (2 << seg) - 16;
        // Transmitted inverted, except that the sign bit reads 1 for positive samples.
        let word = ((seg as i32) << 4 | mantissa) as u8;
        (!word & 0x7F) | if negative { 0 } else { 0x80 }
    }

    fn ref_ulaw_to_linear(code: u8) -> i16 {
        let u = !code;
        let (seg, mantissa) = (((u >> 4) & 7) as i32, (u & 0x0F) as i32);
        // Interval midpoint of the segment: 4·((2m + 33)·2^s − 33).
        let mag = 4 * ((2 * mantissa + 33) * (1 << seg) - 33);
        (if u & 0x80 != 0 { -mag } else { mag }) as i16
    }

    fn ref_linear_to_alaw(x: i16) -> u8 {
        let v = (x as i32).div_euclid(8);
        let (mag, sign) = if v >= 0 { (v, 0x80) } else { (-v - 1, 0) };
        let seg = SEG_AEND.iter().position(|&end| mag <= end).unwrap() as i32; // 13 bits always fit
        let mantissa = if seg == 0 { mag / 2 } else { mag / (1 << seg) - 16 };
        (sign | seg << 4 | mantissa) as u8 ^ 0x55
    }

    fn ref_alaw_to_linear(code: u8) -> i16 {
        let a = code ^ 0x55;
        let (seg, mantissa) = (((a >> 4) & 7) as i32, (a & 0x0F) as i32);
        let mag = if seg == 0 { 8 * (2 * mantissa + 1) } else { (2 * mantissa + 33) * (4 << seg) };
        (if a & 0x80 != 0 { mag } else { -mag }) as i16
    }

    #[test]
    fn fast_codec_equals_reference_on_every_input() {
        for x in i16::MIN..=i16::MAX {
            assert_eq!(linear_to_ulaw(x), ref_linear_to_ulaw(x), "μ-law encode {x}");
            assert_eq!(linear_to_alaw(x), ref_linear_to_alaw(x), "A-law encode {x}");
        }
        for c in 0..=255u8 {
            assert_eq!(ulaw_to_linear(c), ref_ulaw_to_linear(c), "μ-law decode {c:#04x}");
            assert_eq!(alaw_to_linear(c), ref_alaw_to_linear(c), "A-law decode {c:#04x}");
        }
    }

    /// Values recalled from the G.711 tables (from memory of the standard; the audioop integration test in
    /// `tests/g711_reference.rs` cross-checks every code).
    #[test]
    fn values_from_the_g711_tables() {
        // μ-law: zero is 0xFF; the largest positive input gives 0x80, the largest negative 0x00.
        assert_eq!(linear_to_ulaw(0), 0xFF);
        assert_eq!(linear_to_ulaw(i16::MAX), 0x80);
        assert_eq!(linear_to_ulaw(i16::MIN), 0x00);
        assert_eq!(ulaw_to_linear(0x80), 32124);
        assert_eq!(ulaw_to_linear(0x00), -32124);
        assert_eq!(ulaw_to_linear(0xFF), 0);
        assert_eq!(ulaw_to_linear(0x7F), 0);
        // A-law: zero is 0xD5, decoded as +8 (A-law has no zero level); the extremes are 0xAA and 0x2A.
        assert_eq!(linear_to_alaw(0), 0xD5);
        assert_eq!(alaw_to_linear(0xD5), 8);
        assert_eq!(alaw_to_linear(0x55), -8);
        assert_eq!(linear_to_alaw(i16::MAX), 0xAA);
        assert_eq!(linear_to_alaw(i16::MIN), 0x2A);
        assert_eq!(alaw_to_linear(0xAA), 32256);
        assert_eq!(alaw_to_linear(0x2A), -32256);
    }

    #[test]
    fn codes_survive_decode_then_encode() {
        for c in 0..=255u8 {
            // μ-law has two zeros (0xFF and 0x7F); zero encodes as 0xFF.
            let expect = if c == 0x7F { 0xFF } else { c };
            assert_eq!(linear_to_ulaw(ulaw_to_linear(c)), expect, "μ-law {c:#04x}");
            assert_eq!(linear_to_alaw(alaw_to_linear(c)), c, "A-law {c:#04x}");
        }
    }

    #[test]
    fn codec_round_trip_is_monotonic() {
        for law in [Law::Mulaw, Law::Alaw] {
            let g = G711::new(&G711Params { law }).unwrap();
            let mut prev = i16::MIN;
            for x in i16::MIN..=i16::MAX {
                let y = g.round_trip_i16(x);
                assert!(y >= prev, "{law:?}: {x} -> {y} after {prev}");
                prev = y;
            }
        }
    }

    #[test]
    fn g711_stage_scales_counts_and_sanitizes() {
        let mut g = G711::new(&G711Params { law: Law::Mulaw }).unwrap();
        let mut b = [0.0f32, 1.0, -1.0, 0.9999, f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 1000.0 / 32768.0];
        g.process(&mut b);
        let top = 32124.0 / 32768.0;
        assert_eq!(&b[..7], &[0.0, top, -top, top, 0.0, top, -top]);
        assert_eq!(b[7], ulaw_to_linear(linear_to_ulaw(1000)) as f32 / 32768.0);
        assert_eq!(g.clipped(), 2, "+1.0 and +Inf are beyond 32767; −1.0 and −Inf are −32768");
        g.reset();
        assert_eq!(g.clipped(), 0);
        let mut a = G711::new(&G711Params { law: Law::Alaw }).unwrap();
        let mut b = [0.0f32, -1.0];
        a.process(&mut b);
        assert_eq!(b, [8.0 / 32768.0, -32256.0 / 32768.0]);
    }

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

    /// G.711 has no simple closed form; this measures it on the same kind of busy signal (magnitudes log-uniform
    /// over the top 24 dB). The continuous 8-bit curves predict 38.0 dB (μ-law) and 38.1 dB (A-law); G.711's
    /// segmented approximations of them land close.
    #[test]
    fn g711_sqnr_is_measured_near_38_db() {
        let mut rng = crate::rng::Pcg32::from_seed(8, 0);
        let x: Vec<f32> = (0..100_000)
            .map(|_| {
                let m = (-4.0 * (rng.uniform_centered() + 0.5)).exp2();
                (if rng.next_u32() & 1 == 0 { m } else { -m }) as f32
            })
            .collect();
        for law in [Law::Mulaw, Law::Alaw] {
            let mut g = G711::new(&G711Params { law }).unwrap();
            let mut y = x.clone();
            g.process(&mut y);
            let s: f64 = x.iter().map(|&v| (v as f64).powi(2)).sum();
            let n: f64 = x.iter().zip(&y).map(|(&a, &b)| (a as f64 - b as f64).powi(2)).sum();
            let measured = 10.0 * (s / n).log10();
            println!("G.711 {law:?}: {measured:.2} dB SQNR");
            assert!((37.8..38.6).contains(&measured), "{law:?}: {measured:.2} dB");
        }
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
