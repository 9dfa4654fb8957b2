//! Minifloat quantizer: rounds every sample to a small binary floating-point format (sign, `e` exponent bits, `m`
//! mantissa bits), such as the 8-bit E4M3 and E5M2 formats or IEEE 754 binary16.
//!
//! # The format
//! With bias `b`, the values are `±2^(E−b)·(1 + f/2^m)` for exponent codes `E = 1 … 2^e − 2` (normal numbers) and
//! `±2^(1−b)·f/2^m` for `E = 0` (zero and the subnormals), `f = 0 … 2^m − 1`: the IEEE 754 layout. The all-ones
//! exponent (IEEE's Inf and NaN) is not used, because this stage never produces them: results that would round
//! beyond the largest finite value saturate there instead (and count as clipped), and NaN input becomes 0.
//!
//! # Scaling: where full scale sits
//! Every format value is multiplied by the fixed power of two [`scale`](Minifloat::scale) `= 2^−(b₀+1)`, where
//! `b₀ = 2^(e−1) − 1` is the IEEE bias. With the default bias (`b = b₀`) the largest finite value `2^b₀·(2 − 2^−m)`
//! lands just under full scale, at `1 − 2^−(m+1)`: E4M3 gives 240/256 = 0.9375 (−0.56 dBFS), binary16
//! 65504/65536. Because the factor is a power of two the grid is exactly the format's grid: binary16 here is
//! numpy's `float16` divided by 65536 (tested).
//!
//! The bias is then a level control in octaves: each unit above `b₀` moves the whole grid down by a factor of 2
//! (−6.02 dB), giving more detail near silence while loud passages saturate 6 dB earlier; each unit below `b₀` moves
//! it up, so the top octaves lie above full scale and go unused, because the output is limited to ±1.0 (which is then
//! itself a format value).
//!
//! # What it sounds like
//! Each octave (6.02 dB) holds `2^m` equal steps and the step doubles from one octave to the next, so the error
//! follows the signal's level: about `6.02·m + 14.1` dB SQNR whatever the level
//! ([`theory_sqnr_db`](Minifloat::theory_sqnr_db)). `e` sets how many octaves have that resolution: `2^e − 2` octaves
//! of normal numbers, then below the smallest normal value the step stays fixed (subnormals) down to zero, or, with
//! `subnormals` off, everything below it becomes 0 — a hard gate. With one exponent bit there are no normal numbers:
//! the grid is the subnormal ramp alone (uniform, `2^m − 1` steps each side of zero), so it needs `subnormals` on and
//! `m ≥ 1`.
//!
//! # Rounding
//! Round to nearest, ties to even: to the value that is an even multiple of the step at the tie point (for `m ≥ 1`
//! this is IEEE's even mantissa; with `m = 0` a tie between two powers of two goes to the larger). The sign is kept,
//! so small negative samples become −0.0. Non-finite input first goes through [`crate::sample::sanitize`]: NaN → 0,
//! ±Inf → ±1.0, which with the default bias saturates to ± the largest value.
//!
//! The arithmetic is exact power-of-two scaling and one `round_ties_even` in `f64`; no transcendental functions, so
//! native and WebAssembly builds agree bit for bit.

use crate::error::{Error, Range, Result};
use crate::sample::sanitize;
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Parameters of the minifloat quantizer. The sign bit is always present.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct MinifloatParams {
    /// Exponent field width in bits, 1 to 8: the number of octaves with full resolution (`2^e − 2`). Default 4.
    pub exponent_bits: u32,
    /// Mantissa (fraction) field width in bits, 0 to 23: `2^m` steps per octave. Default 3 (E4M3, audibly grainy);
    /// 1 or 2 for a harsh effect, 10 is IEEE half precision.
    pub mantissa_bits: u32,
    /// Exponent bias, 0 to `2^e − 1`. `None` (default): the IEEE bias `2^(e−1) − 1`, which puts the largest value
    /// just under full scale. One more moves the grid down 6.02 dB; see the [module docs](self).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub bias: Option<i32>,
    /// Keep the subnormal numbers below the smallest normal value (default true); false flushes them to zero.
    pub subnormals: bool,
}

impl Default for MinifloatParams {
    fn default() -> Self {
        MinifloatParams { exponent_bits: 4, mantissa_bits: 3, bias: None, subnormals: true }
    }
}

/// `2^n` for the exponents this module uses (far inside the normal `f64` range).
#[inline]
fn pow2(n: i32) -> f64 {
    debug_assert!((-1022..=1023).contains(&n));
    f64::from_bits(((n + 1023) as u64) << 52)
}

/// `floor(log2(t))` for a positive normal `f64`.
#[inline]
fn exponent_of(t: f64) -> i32 {
    ((t.to_bits() >> 52) & 0x7FF) as i32 - 1023
}

/// The minifloat quantizer stage: `exponent_bits` 1 to 8 (start at 4), `mantissa_bits` 0 to 23 (start at 3), `bias`
/// 0 to `2^e − 1` (start with the IEEE default), optional subnormals. Full scale is the format's `2^(b₀+1)`; see the
/// [module docs](self).
#[derive(Debug, Clone)]
pub struct Minifloat {
    params: MinifloatParams,
    bias: i32,
    m: i32,
    /// Exponent of the smallest normal octave, `1 − bias` (also the subnormals' exponent).
    emin: i32,
    /// Full scale in format units, `2^(b₀+1)`.
    full: f64,
    /// Largest output magnitude in format units: the largest finite value, or full scale if that is lower.
    sat: f64,
    /// Smallest normal value in format units, `2^emin`.
    min_normal: f64,
    clipped: u64,
}

/// Allowed exponent bits.
pub const EXPONENT_BITS: Range = Range::new(1.0, 8.0);
/// Allowed exponent bias at the widest exponent (at `e` exponent bits: 0 to `2^e − 1`).
pub const BIAS: Range = Range::new(0.0, 255.0);
/// Allowed mantissa bits.
pub const MANTISSA_BITS: Range = Range::new(0.0, 23.0);

impl Minifloat {
    /// Validates `params` and builds the stage.
    pub fn new(params: &MinifloatParams) -> Result<Self> {
        EXPONENT_BITS.check_u("exponent_bits", params.exponent_bits as u64)?;
        MANTISSA_BITS.check_u("mantissa_bits", params.mantissa_bits as u64)?;
        let e = params.exponent_bits as i32;
        let m = params.mantissa_bits as i32;
        let ieee_bias = (1 << (e - 1)) - 1;
        let max_bias = (1 << e) - 1;
        let bias = params.bias.unwrap_or(ieee_bias);
        if !(0..=max_bias).contains(&bias) {
            return Err(Error::param("bias", bias, format!("0..={max_bias} for {e} exponent bits")));
        }
        if e == 1 && m == 0 {
            return Err(Error::param("mantissa_bits", 0, "1..=23 with 1 exponent bit (else the only value is 0)"));
        }
        if e == 1 && !params.subnormals {
            return Err(Error::param("subnormals", false, "true with 1 exponent bit (there are no normal numbers)"));
        }
        let emin = 1 - bias;
        let emax = (1 << e) - 2 - bias; // largest normal exponent; below emin when e = 1
        let max_finite = if e == 1 {
            pow2(emin) - pow2(emin - m) // largest subnormal
        } else {
            pow2(emax + 1) - pow2(emax - m)
        };
        let full = pow2(ieee_bias + 1);
        Ok(Minifloat {
            params: params.clone(),
            bias,
            m,
            emin,
            full,
            sat: max_finite.min(full),
            min_normal: pow2(emin),
            clipped: 0,
        })
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &MinifloatParams {
        &self.params
    }

    /// The bias in use (the IEEE bias `2^(e−1) − 1` unless the parameters give one).
    pub fn bias(&self) -> i32 {
        self.bias
    }

    /// Full-scale units per format unit, `2^−(b₀+1)`: the output is the format value times this.
    pub fn scale(&self) -> f64 {
        1.0 / self.full
    }

    /// The largest output magnitude (full-scale units): the largest finite format value, scaled, or 1.0 if the bias
    /// lifts the grid above full scale. Samples that would round beyond it saturate here.
    pub fn max_value(&self) -> f64 {
        self.sat / self.full
    }

    /// The smallest normal magnitude (full-scale units); `None` with one exponent bit (no normal numbers).
    pub fn min_normal(&self) -> Option<f64> {
        (self.params.exponent_bits > 1).then(|| self.min_normal / self.full)
    }

    /// The smallest nonzero magnitude (full-scale units): the smallest subnormal, or with subnormals off the smallest
    /// normal value.
    pub fn min_positive(&self) -> f64 {
        if self.params.subnormals {
            pow2(self.emin - self.m) / self.full
        } else {
            self.min_normal / self.full
        }
    }

    /// Samples that saturated at [`max_value`](Self::max_value) since construction or the last
    /// [`reset`](Self::reset).
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Rounds a magnitude `t ≥ 0` in format units; returns the result and whether it saturated.
    #[inline]
    fn round_magnitude(&self, t: f64) -> (f64, bool) {
        if t == 0.0 || (t < self.min_normal && !self.params.subnormals) {
            return (0.0, false);
        }
        // Step of t's octave (subnormals share the smallest normal octave's step).
        let e = exponent_of(t).max(self.emin);
        let q = (t * pow2(self.m - e)).round_ties_even() * pow2(e - self.m);
        if q > self.sat {
            (self.sat, true)
        } else {
            (q, false)
        }
    }

    /// Quantizes one sample; also says whether it saturated.
    #[inline]
    fn quantize_counted(&self, x: f32) -> (f32, bool) {
        let x = sanitize(x) as f64;
        let (q, clipped) = self.round_magnitude(x.abs() * self.full);
        ((q / self.full).copysign(x) as f32, clipped)
    }

    /// The bit pattern (sign, exponent, mantissa) of the format value nearest to an output sample `y`: exact for this
    /// stage's outputs, which are format values times [`scale`](Self::scale).
    pub fn code_of(&self, y: f32) -> u64 {
        let (e_bits, m) = (self.params.exponent_bits, self.m);
        let sign = (y.is_sign_negative() as u64) << (e_bits + m as u32);
        let t = (sanitize(y) as f64).abs() * self.full;
        if t == 0.0 {
            return sign;
        }
        let (field, frac) = if t < self.min_normal {
            (0u64, (t * pow2(m - self.emin)).round_ties_even())
        } else {
            let e = exponent_of(t);
            ((e - self.emin + 1) as u64, (t * pow2(m - e)).round_ties_even() - pow2(m))
        };
        // Rounding can carry a mantissa into the next exponent; the field arithmetic below absorbs that.
        let max = (1u64 << (e_bits + m as u32)) - 1;
        let code = (field << m) as i64 + frac as i64;
        sign | (code.clamp(0, max as i64) as u64)
    }

    /// Quantizes one sample (no counting).
    #[inline]
    pub fn quantize(&self, x: f32) -> f32 {
        self.quantize_counted(x).0
    }

    /// Quantizes `buf` in place. Never allocates.
    pub fn process(&mut self, buf: &mut [f32]) {
        let mut clipped = 0u64;
        for s in buf.iter_mut() {
            let (y, c) = self.quantize_counted(*s);
            clipped += c as u64;
            *s = y;
        }
        self.clipped += clipped;
    }

    /// Clears the clip counter.
    pub fn reset(&mut self) {
        self.clipped = 0;
    }

    /// Theoretical SQNR in dB for a busy signal spread evenly (in log terms) over the normal range without saturating:
    /// `10·log10(18/ln 2) + 6.02·m ≈ 14.1 + 6.02·m`. Derivation: within an octave `[2^E, 2^(E+1))` the rounding error
    /// is uniform with variance `step²/12`, `step = 2^(E−m)`; for a log-uniform signal the mean square over the octave
    /// is `4^E·3/(2 ln 2)`; the ratio does not depend on `E`.
    pub fn theory_sqnr_db(&self) -> f64 {
        10.0 * libm::log10(18.0 / core::f64::consts::LN_2) + 20.0 * libm::log10(2.0) * self.m as f64
    }
}

impl Stage for Minifloat {
    fn process(&mut self, buf: &mut [f32]) {
        Minifloat::process(self, buf)
    }
    fn theory_sqnr_db(&self, _input_ms: f64) -> Option<f64> {
        Some(Minifloat::theory_sqnr_db(self))
    }
    fn reset(&mut self) {
        Minifloat::reset(self)
    }
    fn clipped(&self) -> u64 {
        Minifloat::clipped(self)
    }
    /// `2^(1 + e + m)`: every bit pattern of the word (the unused all-ones exponent included).
    fn code_space(&self) -> Option<u64> {
        Some(1u64 << (1 + self.params.exponent_bits + self.params.mantissa_bits))
    }
    /// The word's bit pattern: sign, exponent field, mantissa field (`−0.0` has the sign bit set).
    fn code_indices(&self, out: &[f32], codes: &mut [u32]) {
        for (c, &y) in codes.iter_mut().zip(out) {
            *c = self.code_of(y) as u32;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Pcg32;

    fn mf(e: u32, m: u32, bias: Option<i32>, subnormals: bool) -> Minifloat {
        Minifloat::new(&MinifloatParams { exponent_bits: e, mantissa_bits: m, bias, subnormals }).unwrap()
    }

    // -----------------------------------------------------------------------------------------------------------------
    // Naive reference: enumerate every value of the format, pick the nearest.
    // -----------------------------------------------------------------------------------------------------------------

    /// Every nonnegative finite value of the format in format units, ascending, followed by `2^(emax+1)`: the value
    /// the next code would have, where IEEE rounding overflows to infinity.
    fn enumerate(p: &MinifloatParams) -> Vec<f64> {
        let (e, m) = (p.exponent_bits as i32, p.mantissa_bits as i32);
        let bias = p.bias.unwrap_or((1 << (e - 1)) - 1);
        let mut v = vec![0.0];
        for exp_code in 0..(1 << e) - 1 {
            for f in 0..1 << m {
                let frac = f as f64 / (1 << m) as f64;
                if exp_code == 0 {
                    if p.subnormals && f > 0 {
                        v.push(frac * 2f64.powi(1 - bias));
                    }
                } else {
                    v.push((1.0 + frac) * 2f64.powi(exp_code - bias));
                }
            }
        }
        v.push(2f64.powi((1 << e) - 1 - bias));
        v
    }

    /// Nearest value to `x` by enumeration; returns the output and whether it saturated.
    fn reference(p: &MinifloatParams, values: &[f64], x: f32) -> (f32, bool) {
        let (e, m) = (p.exponent_bits as i32, p.mantissa_bits as i32);
        let ieee_bias = (1 << (e - 1)) - 1;
        let emin = 1 - p.bias.unwrap_or(ieee_bias);
        let full = 2f64.powi(ieee_bias + 1);
        let max_finite = values[values.len() - 2];
        let sat = max_finite.min(full);
        let x = sanitize(x) as f64;
        let t = x.abs() * full;
        let q = if !p.subnormals && t < 2f64.powi(emin) {
            0.0
        } else {
            let above = values.partition_point(|&v| v < t);
            if above == values.len() {
                values[above - 1] // beyond the overflow value: saturates below
            } else if values[above] == t || above == 0 {
                values[above]
            } else {
                let (a, b) = (values[above - 1], values[above]);
                if t - a < b - t {
                    a
                } else if b - t < t - a {
                    b
                } else {
                    // Tie: the even multiple of the step at the tie point.
                    let mut octave = emin;
                    while 2f64.powi(octave + 1) <= t {
                        octave += 1;
                    }
                    let step = 2f64.powi(octave - m);
                    if (a / step) % 2.0 == 0.0 {
                        a
                    } else {
                        b
                    }
                }
            }
        };
        let (q, clipped) = if q > sat { (sat, true) } else { (q, false) };
        ((q / full).copysign(x) as f32, clipped)
    }

    fn next_up(x: f32) -> f32 {
        if x == 0.0 {
            f32::from_bits(1)
        } else if x > 0.0 {
            f32::from_bits(x.to_bits() + 1)
        } else {
            f32::from_bits(x.to_bits() - 1)
        }
    }

    fn next_down(x: f32) -> f32 {
        -next_up(-x)
    }

    /// Edge values, every value of the format, every midpoint (the ties) and their neighbours, and seeded random input.
    fn probe_inputs(p: &MinifloatParams, values: &[f64], rng: &mut Pcg32) -> Vec<f32> {
        let full = 2f64.powi(1 << (p.exponent_bits - 1));
        let mut xs = vec![0.0, -0.0, 1.0, -1.0, 0.5, 1.5, -7.0, f32::MAX, f32::MIN, f32::MIN_POSITIVE];
        xs.extend([f32::from_bits(1), f32::NAN, f32::INFINITY, f32::NEG_INFINITY]);
        for w in values.windows(2) {
            for v in [w[0], (w[0] + w[1]) / 2.0] {
                let x = (v / full) as f32;
                xs.extend([x, next_up(x), next_down(x), -x, -next_up(x)]);
            }
        }
        for _ in 0..2000 {
            let u = rng.uniform_centered();
            let x = if rng.next_u32() & 1 == 0 { 2.4 * u } else { (-60.0 * (u + 0.5)).exp2() * u.signum() };
            xs.push(x as f32);
        }
        xs
    }

    #[test]
    fn fast_path_equals_enumeration_reference() {
        let mut rng = Pcg32::from_seed(11, 0);
        let mut formats = 0;
        let mut checked = 0usize;
        for e in 1..=6u32 {
            for m in 0..=6u32 {
                let ieee = (1 << (e - 1)) - 1;
                let max_bias = (1 << e) - 1;
                for bias in [None, Some(0), Some(ieee - 1), Some(ieee + 1), Some(max_bias)] {
                    for subnormals in [true, false] {
                        let p = MinifloatParams { exponent_bits: e, mantissa_bits: m, bias, subnormals };
                        let Ok(q) = Minifloat::new(&p) else {
                            assert!((e == 1 && (m == 0 || !subnormals)) || bias == Some(-1), "{p:?}");
                            continue;
                        };
                        formats += 1;
                        let values = enumerate(&p);
                        for x in probe_inputs(&p, &values, &mut rng) {
                            let fast = q.quantize_counted(x);
                            let slow = reference(&p, &values, x);
                            assert_eq!(fast.0.to_bits(), slow.0.to_bits(), "{p:?} x = {x:e}: {} vs {}", fast.0, slow.0);
                            assert_eq!(fast.1, slow.1, "{p:?} x = {x:e}: clipped flag");
                            checked += 1;
                        }
                    }
                }
            }
        }
        println!("{checked} samples in {formats} formats: fast path equals the enumeration reference");
        assert!(formats > 350 && checked > 1_000_000, "{formats} formats, {checked} samples");
    }

    #[test]
    fn edge_values_e4m3() {
        let q = mf(4, 3, None, true);
        let s = q.scale();
        assert_eq!(s, 1.0 / 256.0);
        let max = 240.0 * s;
        let min_sub = 2f64.powi(-9) * s;
        assert_eq!(q.max_value(), max);
        assert_eq!(q.min_positive(), min_sub);
        assert_eq!(q.min_normal(), Some(2f64.powi(-6) * s));
        let cases: [(f32, f32); 12] = [
            (0.0, 0.0),
            (max as f32, max as f32),
            (-(max as f32), -(max as f32)),
            (min_sub as f32, min_sub as f32),
            ((min_sub * 0.5) as f32, 0.0), // tie between 0 and the smallest subnormal: 0 is even
            ((min_sub * 0.75) as f32, min_sub as f32), // nearer the subnormal
            ((min_sub * 1.5) as f32, (2.0 * min_sub) as f32), // tie between 1 and 2 steps: 2 is even
            (f32::NAN, 0.0),
            (f32::INFINITY, max as f32),
            (f32::NEG_INFINITY, -(max as f32)),
            (1.0, max as f32),
            ((1.0 + 1.0 / 16.0) / 256.0, 1.0 / 256.0), // 1.0625 in format units: tie between 1 and 1.125, 1 is even
        ];
        for (x, want) in cases {
            assert_eq!(q.quantize(x), want, "{x:e}");
        }
        // Signs of zero are kept; NaN gives +0.
        assert_eq!(q.quantize(-0.0).to_bits(), (-0.0f32).to_bits());
        assert_eq!(q.quantize(-1e-30).to_bits(), (-0.0f32).to_bits());
        assert_eq!(q.quantize(f32::NAN).to_bits(), 0);
        let mut q = q;
        let mut b = [1.0f32, 0.9, 248.0 / 256.0, 247.9 / 256.0, f32::INFINITY, -2.0];
        q.process(&mut b);
        assert_eq!(q.clipped(), 4, "1.0, 248 (ties to the overflow value), +Inf and −2 saturate; 0.9 and 247.9 do not");
        assert_eq!(b[1], 224.0 / 256.0);
        assert_eq!(b[3], max as f32);
        q.reset();
        assert_eq!(q.clipped(), 0);
    }

    /// Facts about published formats, in each format's own units (value ÷ `scale()`):
    /// IEEE 754-2008 binary16: largest 65504, smallest normal 2^−14, smallest subnormal 2^−24, integers exact up to
    /// 2048, overflow to infinity from 65520. OCP 8-bit floating point (v1.0) E5M2, which follows IEEE conventions:
    /// largest 57344, smallest normal 2^−14, smallest subnormal 2^−16. OCP E4M3: smallest normal 2^−6, smallest
    /// subnormal 2^−9, 1.125 is the value after 1 (OCP's largest, 448, differs: OCP reuses the all-ones exponent for
    /// numbers, the IEEE layout here stops at 240).
    #[test]
    fn published_format_facts() {
        let fmt = |q: &Minifloat, v: f64| (q.quantize((v * q.scale()) as f32) as f64) / q.scale();
        let h = mf(5, 10, None, true);
        assert_eq!(h.max_value() / h.scale(), 65504.0);
        assert_eq!(h.min_normal().unwrap() / h.scale(), 2f64.powi(-14));
        assert_eq!(h.min_positive() / h.scale(), 2f64.powi(-24));
        assert_eq!(fmt(&h, 2048.0), 2048.0);
        assert_eq!(fmt(&h, 2049.0), 2048.0, "tie, to even");
        assert_eq!(fmt(&h, 2051.0), 2052.0, "tie, to even");
        assert_eq!(fmt(&h, 65519.0), 65504.0);
        assert_eq!(fmt(&h, 65520.0), 65504.0, "would be infinity: saturates");
        assert_eq!(fmt(&h, 1.0 + 2f64.powi(-11)), 1.0);
        assert_eq!(fmt(&h, 1.0 + 3.0 * 2f64.powi(-11)), 1.0 + 2f64.powi(-9));
        assert_eq!(fmt(&h, 0.1), 0.0999755859375, "binary16 nearest to 0.1");
        let e5m2 = mf(5, 2, None, true);
        assert_eq!(e5m2.max_value() / e5m2.scale(), 57344.0);
        assert_eq!(e5m2.min_normal().unwrap() / e5m2.scale(), 2f64.powi(-14));
        assert_eq!(e5m2.min_positive() / e5m2.scale(), 2f64.powi(-16));
        let e4m3 = mf(4, 3, None, true);
        assert_eq!(e4m3.min_normal().unwrap() / e4m3.scale(), 2f64.powi(-6));
        assert_eq!(e4m3.min_positive() / e4m3.scale(), 2f64.powi(-9));
        assert_eq!(fmt(&e4m3, 1.1), 1.125);
        assert_eq!(fmt(&e4m3, 448.0), 240.0);
        // 15 usable exponent codes × 8 mantissas: 120 magnitudes (zero, 7 subnormals, 14 octaves of 8 normals).
        assert_eq!(enumerate(e4m3.params()).len() - 1, 120);
    }

    #[test]
    fn flush_to_zero_gates_below_the_smallest_normal() {
        let q = mf(4, 3, None, false);
        let min_normal = q.min_normal().unwrap() as f32;
        assert_eq!(q.min_positive(), min_normal as f64);
        assert_eq!(q.quantize(min_normal), min_normal);
        assert_eq!(q.quantize(next_down(min_normal)), 0.0);
        assert_eq!(q.quantize(-0.9 * min_normal).to_bits(), (-0.0f32).to_bits());
        assert_eq!(mf(4, 3, None, true).quantize(0.9 * min_normal), min_normal * 0.875);
    }

    #[test]
    fn bias_moves_the_grid_in_octaves() {
        let base = mf(4, 3, None, true);
        let down = mf(4, 3, Some(8), true);
        assert_eq!(down.max_value(), base.max_value() / 2.0);
        for &x in &[0.3f32, 0.01, 1e-4, -0.2] {
            assert_eq!(down.quantize(x / 2.0), base.quantize(x) / 2.0, "{x}");
        }
        // Below the IEEE bias the top octaves are above full scale: 1.0 is a value and the output stops there.
        let mut up = mf(4, 3, Some(5), true);
        assert_eq!(up.max_value(), 1.0);
        let mut b = [1.0f32, 0.99, 1.01, 3.0, f32::INFINITY];
        up.process(&mut b);
        assert_eq!(b, [1.0, 1.0, 1.0, 1.0, 1.0]);
        assert_eq!(up.clipped(), 1, "only 3.0 rounds beyond full scale; 1.01 rounds to 1.0, +Inf is sanitized to 1.0");
        assert_eq!(up.quantize(0.3), base.quantize(0.3));
    }

    #[test]
    fn one_exponent_bit_is_a_uniform_grid() {
        let q = mf(1, 3, None, true);
        // Subnormals only: k/8 for k = 0 … 7.
        for k in 0..8 {
            assert_eq!(q.quantize(k as f32 / 8.0), k as f32 / 8.0);
        }
        assert_eq!(q.quantize(0.99), 0.875);
        assert_eq!(q.max_value(), 0.875);
        assert_eq!(q.min_normal(), None);
    }

    #[test]
    fn out_of_range_parameters_name_themselves() {
        let d = MinifloatParams::default();
        for (p, name, allowed) in [
            (MinifloatParams { exponent_bits: 0, ..d.clone() }, "exponent_bits", "1..=8"),
            (MinifloatParams { exponent_bits: 9, ..d.clone() }, "exponent_bits", "1..=8"),
            (MinifloatParams { mantissa_bits: 24, ..d.clone() }, "mantissa_bits", "0..=23"),
            (MinifloatParams { bias: Some(-1), ..d.clone() }, "bias", "0..=15"),
            (MinifloatParams { bias: Some(16), ..d.clone() }, "bias", "0..=15"),
            (MinifloatParams { exponent_bits: 1, mantissa_bits: 0, ..d.clone() }, "mantissa_bits", "1..=23"),
            (MinifloatParams { exponent_bits: 1, subnormals: false, ..d.clone() }, "subnormals", "true"),
        ] {
            let e = Minifloat::new(&p).unwrap_err();
            assert!(matches!(&e, Error::Param { name: n, .. } if n == name), "{e}");
            assert!(e.to_string().contains(allowed), "{e}");
        }
        for (e, m) in [(1, 1), (8, 23), (8, 0), (2, 0)] {
            for bias in [None, Some(0), Some((1 << e) - 1)] {
                assert!(Minifloat::new(&MinifloatParams {
                    exponent_bits: e,
                    mantissa_bits: m,
                    bias,
                    subnormals: true
                })
                .is_ok());
            }
        }
    }

    #[test]
    fn params_serde_names() {
        let p: MinifloatParams = serde_json::from_str(r#"{"exponent_bits": 5, "mantissa_bits": 2}"#).unwrap();
        assert_eq!(p, MinifloatParams { exponent_bits: 5, mantissa_bits: 2, ..Default::default() });
        assert_eq!(
            serde_json::to_string(&MinifloatParams::default()).unwrap(),
            r#"{"exponent_bits":4,"mantissa_bits":3,"subnormals":true}"#
        );
        let b: MinifloatParams = serde_json::from_str(r#"{"bias": 9, "subnormals": false}"#).unwrap();
        assert_eq!((b.bias, b.subnormals), (Some(9), false));
        assert!(serde_json::from_str::<MinifloatParams>(r#"{"exponent": 5}"#).is_err());
    }

    /// The SQNR formula against a measurement: magnitudes log-uniform over four whole octaves inside the normal range.
    #[test]
    fn sqnr_matches_theory() {
        let mut rng = Pcg32::from_seed(3, 0);
        let x: Vec<f32> = (0..200_000)
            .map(|_| {
                let m = (-4.0 * (rng.uniform_centered() + 0.5) - 1.0).exp2(); // 2^−5 … 2^−1
                (if rng.next_u32() & 1 == 0 { m } else { -m }) as f32
            })
            .collect();
        for (e, m) in [(4, 3), (5, 2), (5, 10), (3, 1), (8, 7)] {
            let mut q = mf(e, m, None, true);
            let mut y = x.clone();
            q.process(&mut y);
            assert_eq!(q.clipped(), 0);
            let s: f64 = x.iter().map(|&v| (v as f64).powi(2)).sum();
            let n: f64 = x.iter().zip(&y).map(|(&a, &b)| (a as f64 - b as f64).powi(2)).sum();
            let measured = 10.0 * (s / n).log10();
            let theory = q.theory_sqnr_db();
            println!("E{e}M{m}: measured {measured:.2} dB, theory {theory:.2} dB");
            assert!((measured - theory).abs() < 0.3, "E{e}M{m}: measured {measured:.2} theory {theory:.2}");
        }
    }

    #[cfg(not(target_arch = "wasm32"))]
    mod props {
        use super::*;
        use proptest::prelude::*;

        /// Any valid format.
        fn formats() -> impl Strategy<Value = MinifloatParams> {
            (1u32..=8, 0u32..=23, any::<bool>(), any::<bool>(), any::<u32>()).prop_filter_map(
                "one exponent bit needs m ≥ 1 and subnormals",
                |(e, m, subnormals, default_bias, b)| {
                    let bias = (!default_bias).then(|| (b % (1 << e)) as i32);
                    let p = MinifloatParams { exponent_bits: e, mantissa_bits: m, bias, subnormals };
                    Minifloat::new(&p).is_ok().then_some(p)
                },
            )
        }

        /// Formats small enough to enumerate.
        fn small_formats() -> impl Strategy<Value = MinifloatParams> {
            formats().prop_filter("small", |p| p.exponent_bits + p.mantissa_bits <= 12)
        }

        proptest! {
            #[test]
            fn idempotent(p in formats(), x in proptest::num::f32::ANY) {
                let q = Minifloat::new(&p).unwrap();
                let y = q.quantize(x);
                prop_assert_eq!(q.quantize(y).to_bits(), y.to_bits(), "{:?} {:e}", p, x);
            }

            #[test]
            fn monotonic_and_bounded(p in formats(), a in proptest::num::f32::ANY, b in proptest::num::f32::ANY) {
                let q = Minifloat::new(&p).unwrap();
                let (sa, sb) = (sanitize(a), sanitize(b));
                let (ya, yb) = (q.quantize(a), q.quantize(b));
                if sa <= sb { prop_assert!(ya <= yb) } else { prop_assert!(ya >= yb) }
                // The bound itself rounded to f32: outputs are f32 roundings of values up to max_value.
                prop_assert!(ya.is_finite() && ya.abs() <= q.max_value() as f32);
            }

            #[test]
            fn output_is_a_format_value(p in small_formats(), x in proptest::num::f32::ANY) {
                let q = Minifloat::new(&p).unwrap();
                let values = enumerate(&p);
                let y = q.quantize(x).abs() as f64 / q.scale();
                prop_assert!(values[..values.len() - 1].contains(&y), "{:?} {:e} -> {}", p, x, y);
            }
        }
    }
}
