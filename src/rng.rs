//! A small seeded generator, identical on every platform.
//!
//! PCG32 (XSH-RR, 64-bit state) as published by M. E. O'Neill, "PCG: A Family of Simple Fast Space-Efficient
//! Statistically Good Algorithms for Random Number Generation" (2014). It is written here (twenty lines) rather than
//! taken from a crate so that the exact stream is part of this project's contract: the same preset and seed give the
//! same dither, and therefore the same bytes, natively and in WebAssembly, whatever crate versions move.

/// PCG32 generator.
#[derive(Debug, Clone)]
pub struct Pcg32 {
    state: u64,
    inc: u64,
}

const MULT: u64 = 6364136223846793005;

impl Pcg32 {
    /// Seeds the generator like the reference `pcg32_srandom_r(initstate, initseq)`.
    pub fn new(initstate: u64, initseq: u64) -> Self {
        let mut g = Pcg32 { state: 0, inc: (initseq << 1) | 1 };
        g.next_u32();
        g.state = g.state.wrapping_add(initstate);
        g.next_u32();
        g
    }

    /// Generator for a seed and a stream number (e.g. a channel index).
    pub fn from_seed(seed: u64, stream: u64) -> Self {
        Self::new(seed, 0x5851_f42d_4c95_7f2d ^ stream)
    }

    /// Next 32 random bits.
    #[inline]
    pub fn next_u32(&mut self) -> u32 {
        let old = self.state;
        self.state = old.wrapping_mul(MULT).wrapping_add(self.inc);
        let xorshifted = (((old >> 18) ^ old) >> 27) as u32;
        let rot = (old >> 59) as u32;
        xorshifted.rotate_right(rot)
    }

    /// Uniform in `[-0.5, 0.5)`, with 32 bits of resolution.
    #[inline]
    pub fn uniform_centered(&mut self) -> f64 {
        self.next_u32() as f64 * (1.0 / 4_294_967_296.0) - 0.5
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The reference implementation's demo (`pcg32-demo`, seeded with 42 and sequence 54) prints these first six
    /// outputs. Values recalled from the published pcg-c-basic demo output (from memory; the property that matters
    /// for the project, determinism across platforms, is tested separately in the wasm tests).
    #[test]
    fn matches_reference_demo_stream() {
        let mut g = Pcg32::new(42, 54);
        let got: Vec<u32> = (0..6).map(|_| g.next_u32()).collect();
        assert_eq!(got, [0xa15c02b7, 0x7b47f409, 0xba1d3330, 0x83d2f293, 0xbfa4784b, 0xcbed606e]);
    }

    #[test]
    fn uniform_range() {
        let mut g = Pcg32::from_seed(1, 0);
        for _ in 0..10_000 {
            let u = g.uniform_centered();
            assert!((-0.5..0.5).contains(&u));
        }
    }
}
