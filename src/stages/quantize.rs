//! Uniform quantizer: N bits (1 to 24) or any number of levels, with optional dither and noise shaping.
//!
//! # Scaling and the +1.0 convention
//! Samples are floats where full scale is ±1.0. With `L` levels the step is `Δ = 2/L`. For `N` bits (`L = 2^N`) the
//! mid-tread output is exactly `code · Δ` for the integer codes `−2^(N−1) … 2^(N−1)−1` of N-bit two's-complement PCM,
//! so an exporter recovers the codes with [`crate::sample::pcm_code`] without any further rounding. The grid is asymmetric like PCM:
//! −1.0 is a level, +1.0 is not; +1.0 becomes the top code `2^(N−1)−1` (that is `1 − Δ`) and counts as clipped.
//!
//! # Grids
//! - `mid-tread` (default): zero is a level; the PCM grid above. Odd level counts are symmetric,
//!   codes `−(L−1)/2 … (L−1)/2`.
//! - `mid-rise`: levels at `(k + ½)·Δ`, symmetric, no zero level (a one-bit mid-rise quantizer is a sign detector).
//!   Needs an even level count.
//!
//! # Rounding
//! `nearest` rounds half away from zero; `truncate` floors (drops low bits, like discarding the low bits of a
//! two's-complement word), which biases the error by −Δ/2.
//!
//! # Dither and noise shaping
//! See [`crate::stages::dither`]. Dither is added in LSB units before rounding; the error-feedback loop subtracts filtered past
//! errors before the dither is added.

use crate::db::power_db;
use crate::error::{Error, Range, Result};
use crate::stages::dither::{Dither, DitherKind, NoiseShaper, Shaping};
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Grid type of a uniform quantizer.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Grid {
    /// Zero is a level (PCM).
    #[default]
    MidTread,
    /// Zero is a decision threshold.
    MidRise,
}

/// Rounding rule.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Rounding {
    /// To the nearest level (ties away from zero).
    #[default]
    Nearest,
    /// Down to the level below (floor).
    Truncate,
}

/// Allowed word length, in bits.
pub const BITS: Range = Range::new(1.0, 24.0);
/// Allowed number of levels (2 to 2^24).
pub const LEVELS: Range = Range::new(2.0, 16_777_216.0);

/// Parameters of the uniform quantizer. Give either `bits` or `levels`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct QuantizeParams {
    /// Word length in bits, 1 to 24. A good starting point for a lo-fi texture: 8. Ignored when `levels` is set.
    pub bits: u32,
    /// Number of levels, 2 to 16,777,216, for grids that are not a power of two (e.g. 12 or 100). `None`: `2^bits`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub levels: Option<u32>,
    /// Grid type; default mid-tread (PCM).
    pub grid: Grid,
    /// Rounding rule; default nearest.
    pub rounding: Rounding,
    /// Dither added before rounding; default none. TPDF is the usual choice for clean results.
    pub dither: DitherKind,
    /// Dither peak amplitude in LSB, 0 to 16; `None` (default) = the kind's standard (RPDF ±0.5, TPDF ±1).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub dither_peak_lsb: Option<f64>,
    /// Error-feedback noise shaping; default none.
    pub shaping: Shaping,
}

impl Default for QuantizeParams {
    fn default() -> Self {
        QuantizeParams {
            bits: 8,
            levels: None,
            grid: Grid::MidTread,
            rounding: Rounding::Nearest,
            dither: DitherKind::None,
            dither_peak_lsb: None,
            shaping: Shaping::None,
        }
    }
}

impl QuantizeParams {
    /// `bits`-bit PCM rounding, no dither.
    pub fn bits(bits: u32) -> Self {
        QuantizeParams { bits, ..Default::default() }
    }

    /// The number of levels these parameters describe, after validation.
    pub fn level_count(&self) -> Result<u32> {
        match self.levels {
            Some(l) => {
                LEVELS.check_u("levels", l as u64)?;
                Ok(l)
            }
            None => {
                BITS.check_u("bits", self.bits as u64)?;
                Ok(1u32 << self.bits)
            }
        }
    }
}

/// The uniform quantizer stage for one channel.
#[derive(Debug, Clone)]
pub struct Quantizer {
    params: QuantizeParams,
    step: f64,
    inv_step: f64,
    offset: f64,
    kmin: f64,
    kmax: f64,
    truncate: bool,
    dither: Dither,
    shaper: NoiseShaper,
    clipped: u64,
    /// Dither values (zeros without dither) for the chunk being processed (allocated once, here, never in `process`).
    scratch: Vec<f64>,
}

/// Samples the `f64` block path handles at a time (the size of [`Quantizer`]'s dither buffer).
const DITHER_CHUNK: usize = 1024;

impl Quantizer {
    /// Validates `params` and builds the stage. `seed` and `stream` select the dither sequence.
    pub fn new(params: &QuantizeParams, seed: u64, stream: u64) -> Result<Self> {
        let levels = params.level_count()?;
        if params.grid == Grid::MidRise && levels % 2 == 1 {
            return Err(Error::param("levels", levels, "an even number for the mid-rise grid"));
        }
        let l = levels as f64;
        let step = 2.0 / l;
        let (kmin, kmax, offset) = match (params.grid, levels % 2) {
            (Grid::MidTread, 0) => (-l / 2.0, l / 2.0 - 1.0, 0.0),
            (Grid::MidTread, _) => (-(l - 1.0) / 2.0, (l - 1.0) / 2.0, 0.0),
            (Grid::MidRise, _) => (-l / 2.0, l / 2.0 - 1.0, 0.5),
        };
        let dither = Dither::new(params.dither, params.dither_peak_lsb, seed, stream)?;
        let shaper = NoiseShaper::new(params.shaping, 1.0 + dither.peak_lsb());
        Ok(Quantizer {
            params: params.clone(),
            step,
            inv_step: 1.0 / step,
            offset,
            kmin,
            kmax,
            truncate: params.rounding == Rounding::Truncate,
            dither,
            shaper,
            clipped: 0,
            scratch: vec![0.0; DITHER_CHUNK],
        })
    }

    /// Step size Δ in full-scale units.
    pub fn step(&self) -> f64 {
        self.step
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &QuantizeParams {
        &self.params
    }

    /// Samples clipped to the top or bottom level since construction or the last [`reset`](Self::reset).
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Quantizes one sample (NaN is treated as 0).
    #[inline]
    pub fn quantize_sample(&mut self, x: f32) -> f32 {
        let x = if x.is_nan() { 0.0 } else { x as f64 };
        let v = x * self.inv_step - self.offset - self.shaper.feedback();
        let t = v + self.dither.sample();
        let mut k = round_clamped(t, self.kmin - 1.0, self.kmax + 1.0, self.truncate);
        if k > self.kmax {
            k = self.kmax;
            self.clipped += 1;
        } else if k < self.kmin {
            k = self.kmin;
            self.clipped += 1;
        }
        if self.shaper.is_active() {
            self.shaper.push(k - v);
        }
        ((k + self.offset) * self.step) as f32
    }

    /// Quantizes `buf` in place. Never allocates.
    ///
    /// Every path computes exactly what [`quantize_sample`](Self::quantize_sample) does for each sample in turn (the
    /// property tests compare them); the fast ones only hoist the constant choices out of the loop.
    pub fn process(&mut self, buf: &mut [f32]) {
        if self.shaper.is_active() {
            for s in buf.iter_mut() {
                *s = self.quantize_sample(*s);
            }
            return;
        }
        let (inv, off, step, kmin, kmax) = (self.inv_step, self.offset, self.step, self.kmin, self.kmax);
        if self.dither.kind() == DitherKind::None {
            if let Some(scale) = self.exact_f32() {
                // One call per rounding rule, so that each is a straight-line loop the compiler vectorizes.
                self.clipped += if self.truncate {
                    quantize_pow2_f32(buf, scale, kmin as f32, kmax as f32, true)
                } else {
                    quantize_pow2_f32(buf, scale, kmin as f32, kmax as f32, false)
                };
                return;
            }
        }
        // Without noise shaping the dither generator is the only state: its values for a chunk first (a loop with
        // nothing but the generator's serial state in it; zeros without dither, which leave every level as it is),
        // then a straight-line loop the compiler vectorizes.
        let run = |buf: &mut [f32], d: &[f64], truncate: bool| {
            let mut clipped = 0u64;
            for (s, &d) in buf.iter_mut().zip(d) {
                let x = if s.is_nan() { 0.0 } else { *s as f64 };
                let t = (x * inv - off) + d;
                let k = round_clamped(t, kmin - 1.0, kmax + 1.0, truncate);
                clipped += (k > kmax || k < kmin) as u64;
                *s = ((k.clamp(kmin, kmax) + off) * step) as f32;
            }
            clipped
        };
        for chunk in buf.chunks_mut(DITHER_CHUNK) {
            let d = &mut self.scratch[..chunk.len()];
            self.dither.fill(d);
            self.clipped += if self.truncate { run(chunk, d, true) } else { run(chunk, d, false) };
        }
    }

    /// `Some(2^(N−1))` when this quantizer can run in `f32` with the very same results as in `f64`: a power-of-two
    /// step on the mid-tread grid (`x · 2^(N−1)` is then exact in `f32`, and so are the rounding and the output
    /// `k · 2^−(N−1)`), with codes below 2^22 so that the rounding trick of [`round_clamped_f32`] is exact.
    fn exact_f32(&self) -> Option<f32> {
        let inv = self.inv_step;
        let pow2 = inv >= 1.0 && inv.fract() == 0.0 && (inv as u64).is_power_of_two() && self.step * inv == 1.0;
        (pow2 && self.offset == 0.0 && self.kmax < (1u64 << 22) as f64 && -self.kmin <= (1u64 << 22) as f64)
            .then_some(inv as f32)
    }

    /// The integer level `k` of the lowest code (index 0 of [`code_indices`](Self::code_indices)): `−2^(N−1)` for
    /// N-bit PCM.
    pub fn lowest_code(&self) -> i64 {
        self.kmin as i64
    }

    /// Writes the code index `k − k_min` of each output sample (`k` its level: output `(k + offset)·Δ`) to `codes`.
    /// Exact for this stage's outputs (they lie within far less than Δ/2 of their level); other values get the
    /// nearest level's index, clamped to the grid.
    pub fn code_indices(&self, out: &[f32], codes: &mut [u32]) {
        if let Some(scale) = self.exact_f32() {
            // A power-of-two step: `y · 2^(N−1)` is the level itself, exactly, in `f32` (a loop the compiler
            // vectorizes; the chain runs this on every output block for its meters).
            // The index `k − k_min` is an integer below 2^23, so adding 2^23 puts it in the low mantissa bits: a bit
            // cast instead of a float-to-integer conversion (which does not vectorize on baseline x86-64).
            const TWO_23: f32 = 8_388_608.0;
            let (kmin, kmax) = (self.kmin as f32, self.kmax as f32);
            for (c, &y) in codes.iter_mut().zip(out) {
                let k = y * scale;
                let k = if k < kmin { kmin } else { k };
                let k = if k > kmax { kmax } else { k };
                *c = ((k - kmin) + TWO_23).to_bits().wrapping_sub(TWO_23.to_bits());
            }
            return;
        }
        let (inv, off, kmin, kmax) = (self.inv_step, self.offset, self.kmin, self.kmax);
        for (c, &y) in codes.iter_mut().zip(out) {
            let k = round_clamped(y as f64 * inv - off, kmin, kmax, false);
            *c = (k - kmin) as u32;
        }
    }

    /// Clears the error-feedback history, restarts the dither stream and the clip counter.
    pub fn reset(&mut self) {
        self.dither.reset();
        self.shaper.reset();
        self.clipped = 0;
    }

    /// Expected total error power (mean square, full-scale units) for a busy, unclipped signal: `Δ²/12` for rounding,
    /// plus the dither's variance, times the noise-shaping power gain. Truncation adds its bias `(Δ/2)²`.
    pub fn theory_error_power(&self) -> f64 {
        let d = self.params.dither;
        let var_lsb2 = 1.0 / 12.0 + d.variance_lsb2(self.dither.peak_lsb());
        let bias = if self.truncate && d == DitherKind::None { 0.25 } else { 0.0 };
        (var_lsb2 * self.params.shaping.power_gain() + bias) * self.step * self.step
    }
}

/// `t.round()` (ties away from zero) or, `truncate`, `t.floor()`, of `t` first clamped to `[lo, hi]`.
///
/// The callers clamp the result to `[lo + 1, hi − 1]` and count what lies outside, so clamping `t` first changes
/// neither the level nor the clip count, and it bounds `t` (the quantizer's bounds are within ±2^24). Written without
/// `f64::round`/`floor` because on x86-64 without SSE4.1 (the default target) and in wasm those are calls into
/// libm, one per sample, which also keep the quantizer's loops from being vectorized. Here the rounding is the
/// classic `(t + 1.5·2^52) − 1.5·2^52` (round to nearest, ties to even, exact for `|t| < 2^51`) with the ties moved
/// away from zero, all plain SIMD-friendly arithmetic and compares; the values are exactly those of `round` and
/// `floor` (−0.0 may come out as +0.0, which every caller turns into the same output).
#[inline(always)]
fn round_clamped(t: f64, lo: f64, hi: f64, truncate: bool) -> f64 {
    const MAGIC: f64 = 6_755_399_441_055_744.0; // 1.5 · 2^52
    let t = if t < lo { lo } else { t };
    let t = if t > hi { hi } else { t };
    let r = (t + MAGIC) - MAGIC; // nearest, ties to even
    if truncate {
        r - if r > t { 1.0 } else { 0.0 }
    } else {
        let d = t - r; // exact, in [−0.5, 0.5]
        r + if d == 0.5 && t > 0.0 { 1.0 } else { 0.0 } - if d == -0.5 && t < 0.0 { 1.0 } else { 0.0 }
    }
}

/// The undithered quantizer in `f32` for a power-of-two step (see [`Quantizer::exact_f32`]); returns the clip count.
/// Four samples per SSE2 or wasm SIMD instruction instead of two in `f64`.
#[inline(always)]
fn quantize_pow2_f32(buf: &mut [f32], scale: f32, kmin: f32, kmax: f32, truncate: bool) -> u64 {
    let step = 1.0 / scale; // exact: a power of two
    let mut clipped = 0u64;
    // Chunks keep the u32 counter (which stays in a vector register beside the samples) from overflowing.
    for chunk in buf.chunks_mut(1 << 16) {
        let mut c = 0u32;
        for s in chunk.iter_mut() {
            let x = if s.is_nan() { 0.0 } else { *s };
            let k = round_clamped_f32(x * scale, kmin - 1.0, kmax + 1.0, truncate);
            c += (k > kmax || k < kmin) as u32;
            *s = k.clamp(kmin, kmax) * step;
        }
        clipped += c as u64;
    }
    clipped
}

/// [`round_clamped`] in `f32`, exact for bounds within ±2^22 (`1.5·2^23` is the magic constant).
#[inline(always)]
fn round_clamped_f32(t: f32, lo: f32, hi: f32, truncate: bool) -> f32 {
    const MAGIC: f32 = 12_582_912.0; // 1.5 · 2^23
    let t = if t < lo { lo } else { t };
    let t = if t > hi { hi } else { t };
    let r = (t + MAGIC) - MAGIC;
    if truncate {
        r - if r > t { 1.0 } else { 0.0 }
    } else {
        let d = t - r;
        r + if d == 0.5 && t > 0.0 { 1.0 } else { 0.0 } - if d == -0.5 && t < 0.0 { 1.0 } else { 0.0 }
    }
}

impl Stage for Quantizer {
    fn process(&mut self, buf: &mut [f32]) {
        Quantizer::process(self, buf)
    }
    fn reset(&mut self) {
        Quantizer::reset(self)
    }
    fn clipped(&self) -> u64 {
        Quantizer::clipped(self)
    }
    fn theory_sqnr_db(&self, input_ms: f64) -> Option<f64> {
        Some(power_db(input_ms / Quantizer::theory_error_power(self)))
    }
    /// The number of levels `L` (`2^bits`).
    fn code_space(&self) -> Option<u64> {
        Some((self.kmax - self.kmin) as u64 + 1)
    }
    /// Index `k − k_min` of the level `k` (so for N-bit PCM the index is the two's-complement code plus
    /// `2^(N−1)`, the offset-binary code).
    fn code_indices(&self, out: &[f32], codes: &mut [u32]) {
        Quantizer::code_indices(self, out, codes)
    }
}

/// Theoretical SQNR in dB of an ideal `bits`-bit rounding quantizer for a full-scale sine: `6.02·N + 1.76`
/// (exactly `20·log10(2^N) + 10·log10(1.5)`).
pub fn full_scale_sine_sqnr_db(bits: u32) -> f64 {
    20.0 * (2f64).powi(bits as i32).log10() + 10.0 * 1.5f64.log10()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sample::pcm_code;

    fn q(bits: u32) -> Quantizer {
        Quantizer::new(&QuantizeParams::bits(bits), 0, 0).unwrap()
    }

    #[test]
    fn maps_onto_pcm_codes_at_every_width() {
        for bits in 1..=24 {
            let mut qz = q(bits);
            let scale = (1u64 << (bits - 1)) as f32;
            for &x in &[-1.0f32, -0.5, -1e-9, 0.0, 0.3, 0.999_999, 1.0] {
                let y = qz.quantize_sample(x);
                let code = y * scale;
                assert_eq!(code, code.round(), "bits {bits} x {x}: {y} is not on the grid");
                assert!(code >= -scale && code <= scale - 1.0, "bits {bits} x {x} code {code}");
                assert_eq!(pcm_code(y, bits) as f32, code);
            }
        }
    }

    #[test]
    fn plus_one_becomes_the_top_code_and_counts_as_clipped() {
        let mut qz = q(8);
        let mut b = [1.0f32, -1.0, 0.0];
        qz.process(&mut b);
        assert_eq!(b, [127.0 / 128.0, -1.0, 0.0]);
        assert_eq!(qz.clipped(), 1);
    }

    #[test]
    fn one_bit_has_two_levels() {
        let mut qz = q(1);
        let mut b = [-0.9f32, -0.2, 0.2, 0.9];
        qz.process(&mut b);
        assert_eq!(b, [-1.0, 0.0, 0.0, 0.0]);
        let mut mr = Quantizer::new(&QuantizeParams { grid: Grid::MidRise, ..QuantizeParams::bits(1) }, 0, 0).unwrap();
        let mut b = [-0.9f32, -0.2, 0.2, 0.9];
        mr.process(&mut b);
        assert_eq!(b, [-0.5, -0.5, 0.5, 0.5]);
    }

    #[test]
    fn odd_levels_are_symmetric_and_midrise_rejects_them() {
        let p = QuantizeParams { levels: Some(3), ..Default::default() };
        let mut qz = Quantizer::new(&p, 0, 0).unwrap();
        let mut b = [-1.0f32, -0.2, 0.0, 0.2, 1.0];
        qz.process(&mut b);
        let d = 2.0f32 / 3.0;
        assert_eq!(b, [-d, 0.0, 0.0, 0.0, d]);
        let e = Quantizer::new(&QuantizeParams { grid: Grid::MidRise, ..p }, 0, 0).unwrap_err();
        assert!(e.to_string().contains("levels"), "{e}");
    }

    #[test]
    fn truncation_floors() {
        let mut qz =
            Quantizer::new(&QuantizeParams { rounding: Rounding::Truncate, ..QuantizeParams::bits(3) }, 0, 0).unwrap();
        let mut b = [0.24f32, 0.26, -0.01];
        qz.process(&mut b);
        assert_eq!(b, [0.0, 0.25, -0.25]);
    }

    #[test]
    fn out_of_range_parameters_name_themselves() {
        for (p, name) in [
            (QuantizeParams::bits(0), "bits"),
            (QuantizeParams::bits(25), "bits"),
            (QuantizeParams { levels: Some(1), ..Default::default() }, "levels"),
            (
                QuantizeParams { dither: DitherKind::Tpdf, dither_peak_lsb: Some(99.0), ..Default::default() },
                "dither_peak_lsb",
            ),
        ] {
            let e = Quantizer::new(&p, 0, 0).unwrap_err();
            assert!(matches!(&e, Error::Param { name: n, .. } if n == name), "{e}");
        }
    }

    #[test]
    fn nan_becomes_zero() {
        let mut qz = q(16);
        let mut b = [f32::NAN];
        qz.process(&mut b);
        assert_eq!(b, [0.0]);
    }

    /// The libm-free rounding equals `f64::round` and `f64::floor` on ties, near-ties, signed zeros, the clamp
    /// bounds and seeded random values, at the widest grid.
    #[test]
    fn round_clamped_matches_std_rounding() {
        let (lo, hi) = (-((1u32 << 23) as f64) - 1.0, (1u32 << 23) as f64 + 1.0);
        let mut cases = vec![0.0, -0.0, 0.5, -0.5, 1.5, -1.5, 2.5, -2.5, lo, hi, lo + 0.5, hi - 0.5, 1e300, -1e300];
        cases.extend([0.5f64, 1.5, 2.5, 8388607.5].iter().flat_map(|&t| {
            let (up, down) = (f64::from_bits(t.to_bits() + 1), f64::from_bits(t.to_bits() - 1));
            [up, down, -up, -down]
        }));
        cases.extend([f64::INFINITY, f64::NEG_INFINITY]);
        let mut rng = crate::rng::Pcg32::from_seed(5, 0);
        for scale in [1.0, 3.0, 200.0, 9e6] {
            cases.extend((0..20_000).map(|_| rng.uniform_centered() * 2.0 * scale));
        }
        for &t in &cases {
            let c = t.clamp(lo, hi);
            assert_eq!(round_clamped(t, lo, hi, false), c.round(), "round {t:e}");
            assert_eq!(round_clamped(t, lo, hi, true), c.floor(), "floor {t:e}");
        }
    }

    /// Handbook formula: SQNR of an N-bit quantizer on a full-scale sine is 6.02 N + 1.76 dB.
    #[test]
    fn formula_value() {
        assert!((full_scale_sine_sqnr_db(16) - 98.09).abs() < 0.01);
        assert!((full_scale_sine_sqnr_db(8) - 49.93).abs() < 0.01);
    }
}
