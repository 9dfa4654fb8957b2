//! Headroom and gain staging against an N-bit PCM grid.

use crate::audio::Clip;
use crate::db::amp_db_portable as amp_db;
use crate::sample::sanitize;
use serde::Serialize;

/// Headroom of a clip against an N-bit PCM grid (step `Δ = 2^(1−N)`, codes `−2^(N−1) … 2^(N−1)−1`, as
/// [`crate::stages::quantize`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Headroom {
    /// Word length used, 1 to 24.
    pub bits: u32,
    /// Step `Δ = 2^(1−N)` in full-scale units.
    pub step: f64,
    /// Largest |sample| over all channels, full-scale units.
    pub peak: f64,
    /// The peak in dBFS (−240 for silence).
    pub peak_dbfs: f64,
    /// `0 − peak_dbfs`: how far the peak may rise before it reaches full scale (negative when it is beyond).
    pub headroom_db: f64,
    /// `(1 − peak) / Δ`: N-bit steps between the peak and full scale (negative when beyond).
    pub headroom_lsb: f64,
    /// `log2(peak / Δ)`, at least 0: magnitude bits the peak reaches, the sign bit not counted, so a full-scale
    /// signal reads `N − 1` and every 6.02 dB of headroom is one bit unused. 0 when the peak is below one step.
    pub used_bits: f64,
    /// Samples that N-bit rounding would clip as they are: `x ≥ 1 − Δ/2` (they round past the top code) or
    /// `x ≤ −1 − Δ/2`.
    pub clipped: u64,
}

/// Headroom of `clip` for `bits`-bit PCM (clamped to 1..=24). Non-finite samples count as the chain treats them
/// (NaN as 0, ±Inf as ±1.0).
pub fn headroom(clip: &Clip, bits: u32) -> Headroom {
    let bits = bits.clamp(1, 24);
    let step = libm::ldexp(1.0, 1 - bits as i32);
    let (mut p, mut clipped) = (0f64, 0u64);
    for &s in clip.channels.iter().flatten() {
        let x = sanitize(s) as f64;
        p = p.max(x.abs());
        clipped += (x >= 1.0 - step / 2.0 || x <= -1.0 - step / 2.0) as u64;
    }
    let peak_dbfs = amp_db(p);
    Headroom {
        bits,
        step,
        peak: p,
        peak_dbfs,
        headroom_db: -peak_dbfs,
        headroom_lsb: (1.0 - p) / step,
        used_bits: if p > step { libm::log2(p / step) } else { 0.0 },
        clipped,
    }
}

/// Largest gain suggested by [`suggest_pre_gain`], in dB: the top of the gain stage's range.
pub const MAX_PRE_GAIN_DB: f64 = 60.0;

/// The gain in dB to apply before `bits`-bit rounding (clamped to 1..=24) that maximises the SQNR while at most
/// `max_clipped` samples (over all channels) clip.
///
/// # Reasoning
/// Rounding noise is `Δ²/12` whatever the signal, so the SQNR grows with the gain (6.02 dB per 6.02 dB) until samples
/// clip: the best gain is the largest one within the clipping budget. With the project's quantizer (round half away
/// from zero, codes `−2^(N−1) … 2^(N−1)−1`) a sample `y` clips exactly when `y ≥ 1 − Δ/2` (it would round past the
/// top code `1 − Δ`; below that it rounds to a code with the ordinary error ≤ Δ/2) or `y ≤ −1 − Δ/2` (the grid
/// reaches −1.0 on the negative side). So sample `x` clips under gain `g` when `g ≥ c(x)`, with `c(x) = (1 − Δ/2)/x`
/// for `x > 0` and `(1 + Δ/2)/|x|` for `x < 0`. Sorting the `c` ascending, the gain must stay below the
/// `(max_clipped + 1)`-th smallest: the result is that value, less one part per million (9·10⁻⁶ dB) so that the
/// rounding of `10^(dB/20)` and of the product to `f32` cannot tip the critical sample over. Applying 0.1 dB more clips
/// at least one more sample.
///
/// A hard clip at ±1.0 in front of the quantizer (the gain stage's `clip` rule) gives the same output: it only
/// moves samples between −1 − Δ/2 and −1 to −1.0, which is where rounding puts them anyway.
///
/// Non-finite samples count as the chain treats them (NaN as 0, ±Inf as ±1.0). When no gain can clip more than
/// `max_clipped` samples the result is [`MAX_PRE_GAIN_DB`], or 0 dB for silence; it is never above
/// [`MAX_PRE_GAIN_DB`].
pub fn suggest_pre_gain(clip: &Clip, bits: u32, max_clipped: u64) -> f64 {
    let bits = bits.clamp(1, 24);
    let half = libm::ldexp(1.0, -(bits as i32));
    let critical_gain = |x: f64| if x > 0.0 { (1.0 - half) / x } else { (1.0 + half) / -x };
    let samples = || clip.channels.iter().flatten().map(|&s| sanitize(s) as f64).filter(|&x| x != 0.0);
    let critical = if max_clipped < BOUNDED_SELECT {
        // The (m + 1) smallest critical gains in a bounded max-heap: one pass, no copy of the clip.
        let m = max_clipped as usize;
        let mut heap = std::collections::BinaryHeap::with_capacity(m + 1);
        for c in samples().map(critical_gain) {
            if heap.len() <= m {
                heap.push(TotalF64(c));
            } else if c < heap.peek().map_or(f64::INFINITY, |t| t.0) {
                heap.pop();
                heap.push(TotalF64(c));
            }
        }
        if heap.is_empty() {
            return 0.0;
        }
        if heap.len() <= m {
            return MAX_PRE_GAIN_DB;
        }
        heap.peek().map_or(0.0, |t| t.0)
    } else {
        let mut c: Vec<f64> = samples().map(critical_gain).collect();
        if c.is_empty() {
            return 0.0;
        }
        if (c.len() as u64) <= max_clipped {
            return MAX_PRE_GAIN_DB;
        }
        let (_, &mut critical, _) = c.select_nth_unstable_by(max_clipped as usize, f64::total_cmp);
        critical
    };
    (20.0 * libm::log10(critical * (1.0 - 1e-6))).min(MAX_PRE_GAIN_DB)
}

/// Clip budgets below this select with a bounded heap in one pass; larger ones copy and partially sort.
const BOUNDED_SELECT: u64 = 4096;

/// An `f64` ordered by [`f64::total_cmp`] (the critical gains are finite and positive).
#[derive(Debug, Clone, Copy, PartialEq)]
struct TotalF64(f64);
impl Eq for TotalF64 {}
impl PartialOrd for TotalF64 {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for TotalF64 {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.0.total_cmp(&other.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::db::FLOOR_DB;
    use crate::rng::Pcg32;
    use crate::stages::quantize::{QuantizeParams, Quantizer};

    fn sine(n: usize, f: f64, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64).sin()) as f32).collect()
    }

    fn clip(rate: u32, channels: Vec<Vec<f32>>) -> Clip {
        Clip::new(rate, channels).unwrap()
    }

    // ---- headroom

    /// Textbook PCM arithmetic: an N-bit step is 2^(1−N) of full scale and each 6.02 dB (a factor of 2) is one bit.
    #[test]
    fn headroom_figures() {
        let c = clip(48_000, vec![vec![0.5, -0.25], vec![0.1, 0.0]]);
        let h = headroom(&c, 16);
        assert_eq!(h.step, 1.0 / 32768.0);
        assert!((h.peak_dbfs + 6.0206).abs() < 1e-4 && (h.headroom_db - 6.0206).abs() < 1e-4);
        assert_eq!(h.headroom_lsb, 16384.0);
        assert_eq!(h.used_bits, 14.0, "half scale at 16 bits: 14 magnitude bits");
        assert_eq!(h.clipped, 0);
        let full = headroom(&clip(48_000, vec![vec![-1.0]]), 8);
        assert_eq!((full.used_bits, full.headroom_lsb, full.clipped), (7.0, 0.0, 0));
        // +1.0 and the samples from 1 − Δ/2 up clip; −1 − Δ/2 clips, −1.0 does not.
        let d = 1.0f32 / 128.0;
        let h = headroom(&clip(48_000, vec![vec![1.0, 1.0 - d / 2.0, 1.0 - d, -1.0, -1.0 - d / 2.0]]), 8);
        assert_eq!(h.clipped, 3);
        let s = headroom(&clip(48_000, vec![vec![0.0; 4]]), 16);
        assert_eq!((s.peak_dbfs, s.used_bits), (FLOOR_DB, 0.0));
        assert_eq!(headroom(&clip(48_000, vec![vec![0.5]]), 99).bits, 24);
    }

    fn quantize_clipped(x: &[f32], gain_db: f64, bits: u32) -> u64 {
        let g = libm::pow(10.0, gain_db / 20.0);
        let mut y: Vec<f32> = x.iter().map(|&v| (v as f64 * g) as f32).collect();
        let mut q = Quantizer::new(&QuantizeParams::bits(bits), 0, 0).unwrap();
        q.process(&mut y);
        q.clipped()
    }

    /// Checked against the project's quantizer (`crate::stages::quantize::Quantizer` and its clip counter), the stage the
    /// suggestion is for.
    #[test]
    fn suggested_pre_gain_respects_the_clip_budget() {
        let mut rng = Pcg32::from_seed(3, 1);
        let noise: Vec<f32> = (0..20_000).map(|_| (rng.uniform_centered() * 0.3) as f32).collect();
        let neg_peak: Vec<f32> = sine(5000, 0.0123, 0.2).iter().map(|&v| if v < 0.0 { v * 2.0 } else { v }).collect();
        for x in [noise, neg_peak] {
            let c = clip(48_000, vec![x.clone()]);
            for bits in [4, 8, 16, 24] {
                for max_clipped in [0u64, 1, 5, 100, BOUNDED_SELECT - 1, BOUNDED_SELECT, 4500] {
                    let g = suggest_pre_gain(&c, bits, max_clipped);
                    let at = quantize_clipped(&x, g, bits);
                    let more = quantize_clipped(&x, g + 0.1, bits);
                    assert!(at <= max_clipped, "{bits} bits, budget {max_clipped}: {at} clipped at {g:.4} dB");
                    assert!(more > max_clipped, "{bits} bits, budget {max_clipped}: +0.1 dB clips only {more}");
                }
            }
        }
        assert_eq!(suggest_pre_gain(&clip(48_000, vec![vec![0.0; 10]]), 16, 0), 0.0);
        assert_eq!(suggest_pre_gain(&clip(48_000, vec![vec![0.5, 0.0]]), 16, 1), MAX_PRE_GAIN_DB);
        assert_eq!(suggest_pre_gain(&clip(48_000, vec![vec![1e-9]]), 16, 0), MAX_PRE_GAIN_DB);
        // Full scale at 16 bits: the gain brings +1.0 just under 1 − 2^−16.
        let g = suggest_pre_gain(&clip(48_000, vec![vec![1.0]]), 16, 0);
        assert!(g < 0.0 && g > -0.0002, "{g}");
    }
}
