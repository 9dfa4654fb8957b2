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
mod tests;
