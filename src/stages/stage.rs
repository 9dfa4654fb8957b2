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
}
