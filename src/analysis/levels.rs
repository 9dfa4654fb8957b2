//! Peak, RMS, DC, crest factor, clipped and non-finite counts; error signals and SQNR; min/max envelopes.

use super::{amp_db, power_db};
use serde::Serialize;

/// Level statistics of one signal (all channels together).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Levels {
    /// Largest |sample| in dBFS.
    pub peak_dbfs: f64,
    /// RMS in dBFS, sine-referenced: a full-scale sine reads 0 dBFS (RMS·√2 relative to 1.0).
    pub rms_dbfs: f64,
    /// Mean value (DC offset), full-scale units.
    pub dc: f64,
    /// Peak to RMS ratio in dB (a sine: 3.01 dB).
    pub crest_db: f64,
    /// Samples with |x| ≥ 1.0 (at or beyond full scale).
    pub at_full_scale: u64,
    /// NaN and ±Inf samples (not included in the other figures).
    pub non_finite: u64,
    /// Finite samples measured.
    pub samples: u64,
}

impl Levels {
    /// Measures the given channels.
    pub fn measure<C: AsRef<[f32]>>(channels: &[C]) -> Levels {
        let mut acc = LevelsAcc::default();
        for ch in channels {
            acc.push(ch.as_ref());
        }
        acc.finish()
    }
}

/// Accumulates [`Levels`] block by block (for streams).
#[derive(Debug, Clone, Default)]
pub struct LevelsAcc {
    peak: f64,
    sum: f64,
    sum2: f64,
    at_fs: u64,
    non_finite: u64,
    n: u64,
}

impl LevelsAcc {
    /// Adds samples.
    pub fn push(&mut self, x: &[f32]) {
        for &s in x {
            if !s.is_finite() {
                self.non_finite += 1;
                continue;
            }
            let v = s as f64;
            self.peak = self.peak.max(v.abs());
            self.sum += v;
            self.sum2 += v * v;
            self.at_fs += (v.abs() >= 1.0) as u64;
            self.n += 1;
        }
    }

    /// The levels of everything pushed so far.
    pub fn finish(&self) -> Levels {
        let n = self.n;
        let ms = if n > 0 { self.sum2 / n as f64 } else { 0.0 };
        let peak_dbfs = amp_db(self.peak);
        Levels {
            peak_dbfs,
            rms_dbfs: power_db(2.0 * ms),
            dc: if n > 0 { self.sum / n as f64 } else { 0.0 },
            crest_db: if ms > 0.0 { peak_dbfs - power_db(ms) } else { 0.0 },
            at_full_scale: self.at_fs,
            non_finite: self.non_finite,
            samples: n,
        }
    }
}

/// Accumulates an SQNR from (reference, output) sample pairs (for streams).
#[derive(Debug, Clone, Default)]
pub struct SqnrAcc {
    signal: f64,
    error: f64,
}

impl SqnrAcc {
    /// Adds one pair; non-finite samples are skipped.
    #[inline]
    pub fn push(&mut self, reference: f32, output: f32) {
        if reference.is_finite() && output.is_finite() {
            let (r, o) = (reference as f64, output as f64);
            self.signal += r * r;
            self.error += (o - r) * (o - r);
        }
    }

    /// SQNR in dB so far (+240 dB for an exact match).
    pub fn db(&self) -> f64 {
        if self.error == 0.0 {
            -super::FLOOR_DB
        } else {
            power_db(self.signal / self.error)
        }
    }
}

/// Signal-to-quantization-noise ratio in dB: `10·log10(Σ ref² / Σ (out − ref)²)` over all channels.
/// An error of exactly zero reads `+240 dB`.
pub fn sqnr_db<A: AsRef<[f32]>, B: AsRef<[f32]>>(reference: &[A], output: &[B]) -> f64 {
    let mut acc = SqnrAcc::default();
    for (r, o) in reference.iter().zip(output) {
        for (&r, &o) in r.as_ref().iter().zip(o.as_ref()) {
            acc.push(r, o);
        }
    }
    acc.db()
}

/// Min/max pairs for drawing: `columns` columns over `x[start..end]`, returned as `[min0, max0, min1, max1, …]`.
/// Columns past the data read 0. Non-finite samples are skipped.
pub fn envelope(x: &[f32], start: usize, end: usize, columns: usize) -> Vec<f32> {
    let end = end.min(x.len());
    let start = start.min(end);
    let mut out = vec![0f32; columns * 2];
    if columns == 0 || end == start {
        return out;
    }
    let span = (end - start) as f64 / columns as f64;
    for c in 0..columns {
        let a = start + (c as f64 * span) as usize;
        let b = (start + ((c + 1) as f64 * span).ceil() as usize).min(end).max(a + 1).min(end);
        let (mut lo, mut hi) = (f32::INFINITY, f32::NEG_INFINITY);
        for &s in &x[a..b] {
            if s.is_finite() {
                lo = lo.min(s);
                hi = hi.max(s);
            }
        }
        if lo <= hi {
            out[2 * c] = lo;
            out[2 * c + 1] = hi;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sine(n: usize, f: f64, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64).sin()) as f32).collect()
    }

    #[test]
    fn full_scale_sine_reads_zero_dbfs_peak_and_rms() {
        // 1/64 cycles per sample: an integer number of periods, peaks land on samples.
        let l = Levels::measure(&[sine(64 * 100, 1.0 / 64.0, 1.0)]);
        assert!(l.peak_dbfs.abs() < 1e-6, "{l:?}");
        assert!(l.rms_dbfs.abs() < 1e-6, "{l:?}");
        assert!((l.crest_db - 3.0103).abs() < 1e-3, "{l:?}");
        assert!(l.dc.abs() < 1e-6);
    }

    #[test]
    fn counts_non_finite_and_full_scale() {
        let l = Levels::measure(&[vec![f32::NAN, f32::INFINITY, 1.0, -1.0, 0.5]]);
        assert_eq!(l.non_finite, 2);
        assert_eq!(l.at_full_scale, 2);
        assert_eq!(l.samples, 3);
    }

    #[test]
    fn empty_and_silent_inputs_are_finite() {
        let l = Levels::measure::<Vec<f32>>(&[vec![]]);
        assert_eq!(l.peak_dbfs, super::super::FLOOR_DB);
        let e = envelope(&[], 0, 0, 4);
        assert_eq!(e, vec![0.0; 8]);
        assert_eq!(sqnr_db(&[vec![0.5f32]], &[vec![0.5f32]]), 240.0);
    }

    #[test]
    fn envelope_covers_every_sample() {
        let x: Vec<f32> = (0..1000).map(|i| i as f32 / 1000.0).collect();
        let e = envelope(&x, 0, 1000, 7);
        assert_eq!(e[0], 0.0);
        assert_eq!(e[13], 0.999);
        for c in 0..6 {
            assert!(e[2 * c + 1] <= e[2 * c + 2] + 0.002, "column {c} gap");
        }
    }
}
