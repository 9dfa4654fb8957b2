//! The one trait every rate-keeping stage implements, and the block size the chain feeds them.

/// Most frames per block.
pub const BLOCK: usize = 4096;

/// A stage that keeps the sample rate: processes a block in place, never allocates.
pub trait Stage: Send {
    /// Processes `buf` in place.
    fn process(&mut self, buf: &mut [f32]);
    /// Returns to the freshly built state (seeded generators restart).
    fn reset(&mut self);
    /// Samples clipped by this stage so far.
    fn clipped(&self) -> u64 {
        0
    }
    /// The SQNR in dB a formula predicts for this stage on a busy, unclipped input of mean square `input_ms`, where
    /// a simple formula exists (see each stage's docs for its conditions).
    fn theory_sqnr_db(&self, input_ms: f64) -> Option<f64> {
        let _ = input_ms;
        None
    }
    /// The gain of the ideal stage this one's error is measured against: its output is compared with its input times
    /// this factor, rounded to `f32` as the stage rounds (1.0 for every stage but gain, whose gain is intended and
    /// whose error is only what its overflow rule does).
    fn reference_gain(&self) -> f64 {
        1.0
    }
    /// For stages whose every output sample is one code of a fixed word (the quantizers): the number of codes of
    /// that word, `2^B` for a `B`-bit word (a uniform quantizer with `levels` set: that many). `None` for the others.
    fn code_space(&self) -> Option<u64> {
        None
    }
    /// Writes to `codes[i]` the code of `out[i]`, an output sample of this stage, as an index `0 .. code_space`
    /// (see each stage for its numbering). Only called on stages with a [`code_space`](Self::code_space), with
    /// slices of equal length; a sample no code of this stage produces gets some index below `code_space`.
    fn code_indices(&self, out: &[f32], codes: &mut [u32]) {
        codes[..out.len()].fill(0);
    }
}
