//! Peak, RMS, DC, crest factor, clipped and non-finite counts; error signals and SQNR; min/max envelopes.

use crate::db::{amp_db, power_db};
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

/// Independent partial sums the accumulators keep. Sample `i` of everything pushed (counted across pushes) goes to
/// lane `i % LANES`, so the figures depend only on the sequence of samples, never on how it was split into pushes,
/// and the per-lane loops are straight-line code the compiler vectorizes (a single running `f64` sum is a chain of
/// dependent additions, one per sample, and its order is fixed by IEEE rules). The lanes are added in index order
/// at the end: the same figures on every target.
const LANES: usize = 4;

/// Splits `n` samples starting at stream position `pos` into a scalar head (up to the next lane boundary), whole
/// chunks of [`LANES`] and a scalar tail.
#[inline]
fn split_at_lanes(pos: u64, n: usize) -> usize {
    (((LANES as u64 - pos % LANES as u64) % LANES as u64) as usize).min(n)
}

/// Accumulates [`Levels`] block by block (for streams).
#[derive(Debug, Clone, Default)]
pub struct LevelsAcc {
    peak: [f64; LANES],
    sum: [f64; LANES],
    sum2: [f64; LANES],
    at_fs: [u64; LANES],
    non_finite: [u64; LANES],
    /// Samples pushed, finite or not (the stream position).
    pos: u64,
}

impl LevelsAcc {
    /// Adds one sample to lane `i`; a non-finite sample is counted and otherwise adds nothing.
    #[inline(always)]
    fn add(&mut self, i: usize, s: f32) {
        let finite = s.is_finite();
        let v = if finite { s as f64 } else { 0.0 };
        let a = v.abs();
        self.peak[i] = if a > self.peak[i] { a } else { self.peak[i] };
        self.sum[i] += v;
        self.sum2[i] += v * v;
        self.at_fs[i] += (a >= 1.0) as u64;
        self.non_finite[i] += !finite as u64;
    }

    /// Adds samples.
    pub fn push(&mut self, x: &[f32]) {
        let head = split_at_lanes(self.pos, x.len());
        let lane0 = (self.pos % LANES as u64) as usize;
        for (j, &s) in x[..head].iter().enumerate() {
            self.add(lane0 + j, s);
        }
        let mut chunks = x[head..].chunks_exact(LANES);
        for c in &mut chunks {
            for (i, &s) in c.iter().enumerate() {
                self.add(i, s);
            }
        }
        for (i, &s) in chunks.remainder().iter().enumerate() {
            self.add(i, s);
        }
        self.pos += x.len() as u64;
    }

    /// The levels of everything pushed so far.
    pub fn finish(&self) -> Levels {
        let non_finite: u64 = self.non_finite.iter().sum();
        let n = self.pos - non_finite;
        let sum: f64 = self.sum.iter().sum();
        let sum2: f64 = self.sum2.iter().sum();
        let peak = self.peak.iter().fold(0.0f64, |m, &p| if p > m { p } else { m });
        let ms = if n > 0 { sum2 / n as f64 } else { 0.0 };
        let peak_dbfs = amp_db(peak);
        Levels {
            peak_dbfs,
            rms_dbfs: power_db(2.0 * ms),
            dc: if n > 0 { sum / n as f64 } else { 0.0 },
            crest_db: if ms > 0.0 { peak_dbfs - power_db(ms) } else { 0.0 },
            at_full_scale: self.at_fs.iter().sum(),
            non_finite,
            samples: n,
        }
    }
}

/// Accumulates an SQNR from (reference, output) sample pairs (for streams), in `LANES` (4) partial sums like
/// [`LevelsAcc`].
#[derive(Debug, Clone, Default)]
pub struct SqnrAcc {
    signal: [f64; LANES],
    error: [f64; LANES],
    /// Pairs pushed (the stream position).
    pos: u64,
}

impl SqnrAcc {
    #[inline(always)]
    fn add(&mut self, i: usize, reference: f32, output: f32) {
        let ok = reference.is_finite() && output.is_finite();
        let (r, o) = if ok { (reference as f64, output as f64) } else { (0.0, 0.0) };
        self.signal[i] += r * r;
        self.error[i] += (o - r) * (o - r);
    }

    /// Adds one pair; a pair with a non-finite sample adds nothing.
    #[inline]
    pub fn push(&mut self, reference: f32, output: f32) {
        self.add((self.pos % LANES as u64) as usize, reference, output);
        self.pos += 1;
    }

    /// Adds the pairs `(reference[i], output[i])`, exactly as pushing them one by one would.
    pub fn push_slices(&mut self, reference: &[f32], output: &[f32]) {
        let n = reference.len().min(output.len());
        let (reference, output) = (&reference[..n], &output[..n]);
        let head = split_at_lanes(self.pos, n);
        let lane0 = (self.pos % LANES as u64) as usize;
        for j in 0..head {
            self.add(lane0 + j, reference[j], output[j]);
        }
        let mut rc = reference[head..].chunks_exact(LANES);
        let mut oc = output[head..].chunks_exact(LANES);
        for (r, o) in (&mut rc).zip(&mut oc) {
            for i in 0..LANES {
                self.add(i, r[i], o[i]);
            }
        }
        for (i, (&r, &o)) in rc.remainder().iter().zip(oc.remainder()).enumerate() {
            self.add(i, r, o);
        }
        self.pos += n as u64;
    }

    /// SQNR in dB so far, or `None` when no pair differed (nothing pushed, or an exact match).
    pub fn db_if_error(&self) -> Option<f64> {
        (self.error.iter().sum::<f64>() > 0.0).then(|| self.db())
    }

    /// SQNR in dB so far (+240 dB for an exact match).
    pub fn db(&self) -> f64 {
        let signal: f64 = self.signal.iter().sum();
        let error: f64 = self.error.iter().sum();
        if error == 0.0 {
            -crate::db::FLOOR_DB
        } else {
            power_db(signal / error)
        }
    }
}

/// Signal-to-quantization-noise ratio in dB: `10·log10(Σ ref² / Σ (out − ref)²)` over all channels.
/// An error of exactly zero reads `+240 dB`.
pub fn sqnr_db<A: AsRef<[f32]>, B: AsRef<[f32]>>(reference: &[A], output: &[B]) -> f64 {
    let mut acc = SqnrAcc::default();
    for (r, o) in reference.iter().zip(output) {
        acc.push_slices(r.as_ref(), o.as_ref());
    }
    acc.db()
}

/// Smallest and largest finite sample (`(+Inf, −Inf)` when there is none), in eight independent lanes with plain
/// compares: `f32::min`/`max` are calls into the runtime in wasm (their NaN rule is not wasm's), and one running
/// minimum is a serial chain the compiler cannot split.
fn finite_min_max(x: &[f32]) -> (f32, f32) {
    const L: usize = 8;
    let (mut lo, mut hi) = ([f32::INFINITY; L], [f32::NEG_INFINITY; L]);
    let mut chunks = x.chunks_exact(L);
    let step = |lo: &mut f32, hi: &mut f32, s: f32| {
        let f = s.is_finite();
        *lo = if f && s < *lo { s } else { *lo };
        *hi = if f && s > *hi { s } else { *hi };
    };
    for c in &mut chunks {
        for i in 0..L {
            step(&mut lo[i], &mut hi[i], c[i]);
        }
    }
    for &s in chunks.remainder() {
        step(&mut lo[0], &mut hi[0], s);
    }
    let lo = lo.iter().fold(f32::INFINITY, |m, &v| if v < m { v } else { m });
    let hi = hi.iter().fold(f32::NEG_INFINITY, |m, &v| if v > m { v } else { m });
    (lo, hi)
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
        let (lo, hi) = finite_min_max(&x[a..b]);
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
        assert_eq!(l.peak_dbfs, crate::db::FLOOR_DB);
        let e = envelope(&[], 0, 0, 4);
        assert_eq!(e, vec![0.0; 8]);
        assert_eq!(sqnr_db(&[vec![0.5f32]], &[vec![0.5f32]]), 240.0);
    }

    #[test]
    fn figures_do_not_depend_on_how_the_stream_is_split() {
        let x: Vec<f32> = (0..1003).map(|i| ((i * 7919 % 1000) as f32 / 500.0 - 1.0) * 1.1).collect();
        let mut y = x.clone();
        y[17] = f32::NAN;
        y[500] = f32::NEG_INFINITY;
        let whole = Levels::measure(&[&y]);
        let mut sq_whole = SqnrAcc::default();
        sq_whole.push_slices(&x, &y);
        for split in [1, 3, 7, 8, 9, 64, 333] {
            let mut acc = LevelsAcc::default();
            let mut sq = SqnrAcc::default();
            for (i, (a, b)) in x.chunks(split).zip(y.chunks(split)).enumerate() {
                acc.push(b);
                if i % 2 == 0 {
                    sq.push_slices(a, b);
                } else {
                    a.iter().zip(b).for_each(|(&r, &o)| sq.push(r, o));
                }
            }
            assert_eq!(acc.finish(), whole, "split {split}");
            assert_eq!(sq.db().to_bits(), sq_whole.db().to_bits(), "split {split}");
        }
        assert_eq!(whole.non_finite, 2);
        assert_eq!(whole.samples, 1001);
    }

    #[test]
    fn lane_sums_match_a_plain_sum() {
        // Straight f64 sums of the same samples, as a cross-check of the lane bookkeeping (not bit-exact: the
        // order of additions differs).
        let x: Vec<f32> = (0..10_001).map(|i| ((i as f32) * 0.37).sin() * 0.8).collect();
        let l = Levels::measure(&[&x]);
        let ms = x.iter().map(|&v| (v as f64).powi(2)).sum::<f64>() / x.len() as f64;
        let dc = x.iter().map(|&v| v as f64).sum::<f64>() / x.len() as f64;
        let peak = x.iter().fold(0f32, |m, v| m.max(v.abs())) as f64;
        assert!((l.rms_dbfs - 10.0 * (2.0 * ms).log10()).abs() < 1e-9, "{l:?}");
        assert!((l.dc - dc).abs() < 1e-12);
        assert_eq!(l.peak_dbfs, 20.0 * peak.log10());
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
