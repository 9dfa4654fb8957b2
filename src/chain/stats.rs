//! Per-stage accounting: each stage's SQNR sums against its own input and the codes its output used. It only
//! reads the signal, so it never changes a sample.

/// One stage's running figures, shared by every channel (channels push in turn, so the sums are fixed by the block
/// order, like the chain's own SQNR).
pub(super) struct StageStats {
    pub(super) kind: String,
    pub(super) active: bool,
    pub(super) after_rate: bool,
    /// The stage's SQNR sums (a rate-keeping stage: in place, block by block; the rate stage: as its samples pair
    /// up through the queues of `RateTap` (in `lane.rs`)).
    pub(super) error: ErrorSums,
    pub(super) code_space: Option<u64>,
    /// The codes seen; `None` when the stage's codes are not counted.
    pub(super) used: Option<CodeSet>,
}

/// Sums of input² and (output − input)² for a stage's SQNR, block by block: each block in eight `f32`
/// lanes ([`sum_sq_diff`], loops the compiler vectorizes; the chain runs them on every stage's every block), added to
/// `f64` totals at the end of the block. A block is at most a few thousand samples, so the `f32` partial sums lose nothing a dB
/// figure shows (relative error below 10⁻⁴). Fixed by the sequence of blocks, so the same on every target.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct ErrorSums {
    pub(super) signal: f64,
    pub(super) error: f64,
}

impl ErrorSums {
    pub(super) fn push(&mut self, reference: &[f32], output: &[f32]) {
        let n = reference.len().min(output.len());
        self.signal += sum_sq_diff(&reference[..n], None);
        self.error += sum_sq_diff(&reference[..n], Some(&output[..n]));
    }

    /// The SQNR in dB, or `None` when nothing differed (or a sum is not finite).
    pub(super) fn db(&self) -> Option<f64> {
        (self.error > 0.0 && self.error.is_finite() && self.signal.is_finite())
            .then(|| crate::db::power_db(self.signal / self.error))
    }
}

/// `Σ (y − x)²` (or `Σ x²` without `y`) in eight `f32` lanes, as two groups of four (the form the compiler turns into
/// two SIMD accumulators), plus a scalar tail; the partial sums are added in `f64`.
#[inline]
pub(super) fn sum_sq_diff(x: &[f32], y: Option<&[f32]>) -> f64 {
    let (mut s0, mut s1) = ([0f32; 4], [0f32; 4]);
    let mut tail = 0f32;
    let mut xc = x.chunks_exact(8);
    match y {
        None => {
            for a in &mut xc {
                let (a0, a1) = a.split_at(4);
                for i in 0..4 {
                    s0[i] += a0[i] * a0[i];
                }
                for i in 0..4 {
                    s1[i] += a1[i] * a1[i];
                }
            }
            for &a in xc.remainder() {
                tail += a * a;
            }
        }
        Some(y) => {
            let mut yc = y.chunks_exact(8);
            for (a, b) in (&mut xc).zip(&mut yc) {
                let ((a0, a1), (b0, b1)) = (a.split_at(4), b.split_at(4));
                for i in 0..4 {
                    let d = b0[i] - a0[i];
                    s0[i] += d * d;
                }
                for i in 0..4 {
                    let d = b1[i] - a1[i];
                    s1[i] += d * d;
                }
            }
            for (&a, &b) in xc.remainder().iter().zip(yc.remainder()) {
                tail += (b - a) * (b - a);
            }
        }
    }
    s0.iter().chain(&s1).map(|&v| v as f64).sum::<f64>() + tail as f64
}

/// The set of codes a stage emitted: a byte per code for small words (a plain store per sample, no dependency
/// between samples), a bit per code for large ones (2 MiB at 2^24).
pub(super) enum CodeSet {
    Bytes(Vec<u8>),
    Bits(Vec<u64>),
}

/// Largest code space counted with a byte per code.
pub(super) const BYTE_CODES: u64 = 1 << 16;

impl CodeSet {
    pub(super) fn new(space: u64) -> Self {
        if space <= BYTE_CODES {
            CodeSet::Bytes(vec![0; space as usize])
        } else {
            CodeSet::Bits(vec![0; space.div_ceil(64) as usize])
        }
    }

    pub(super) fn mark(&mut self, codes: &[u32]) {
        match self {
            CodeSet::Bytes(seen) => {
                for &c in codes {
                    if let Some(s) = seen.get_mut(c as usize) {
                        *s = 1;
                    }
                }
            }
            CodeSet::Bits(words) => {
                for &c in codes {
                    if let Some(w) = words.get_mut((c >> 6) as usize) {
                        *w |= 1u64 << (c & 63);
                    }
                }
            }
        }
    }

    pub(super) fn count(&self) -> u64 {
        match self {
            CodeSet::Bytes(seen) => seen.iter().map(|&s| s as u64).sum(),
            CodeSet::Bits(words) => words.iter().map(|w| w.count_ones() as u64).sum(),
        }
    }
}
