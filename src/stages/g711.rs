//! The G.711 stage: float → 16-bit PCM code ([`crate::sample::pcm_code`], round to nearest, clamp) → G.711 code →
//! 16-bit → float (÷ 32768), through the bit-exact codec in [`crate::codec::g711`]. Samples whose 16-bit code would lie
//! outside −32768…32767 (from +32767.5/32768 up) are counted as clipped. There is no simple closed form for its error,
//! so G.711 is measured only: about 38.1 dB (μ-law) and 38.2 dB (A-law) SQNR for a busy signal spread over the top
//! 24 dB, falling slowly below that.
//!
//! Non-finite input: samples first go through [`crate::sample::sanitize`] (NaN → 0, ±Inf → ±1.0).

use crate::codec::g711::{alaw_to_linear, linear_to_alaw, linear_to_ulaw, ulaw_to_linear};
use crate::error::Result;
use crate::sample::{pcm_code, sanitize};
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Companding law.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Law {
    /// μ-law (North America, Japan): `mulaw`.
    #[default]
    Mulaw,
    /// A-law (Europe and most of the world): `alaw`.
    Alaw,
}

/// Parameters of the [`G711`] stage.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct G711Params {
    /// Which G.711 law; default μ-law.
    pub law: Law,
}

// ---------------------------------------------------------------------------------------------------------------------

/// The G.711 stage: 16-bit PCM through an 8-bit μ-law or A-law code and back. No parameters to tune but the law;
/// start with μ-law. Output levels are the codec's 255 (μ-law) or 256 (A-law) decoded values ÷ 32768.
#[derive(Debug, Clone)]
pub struct G711 {
    params: G711Params,
    clipped: u64,
}

impl G711 {
    /// Builds the stage (every law is valid; the `Result` keeps all stage constructors alike).
    pub fn new(params: &G711Params) -> Result<Self> {
        Ok(G711 { params: params.clone(), clipped: 0 })
    }

    /// The parameters this stage was built from.
    pub fn params(&self) -> &G711Params {
        &self.params
    }

    /// Samples beyond the 16-bit range since construction or the last [`reset`](Self::reset).
    pub fn clipped(&self) -> u64 {
        self.clipped
    }

    /// Encodes and decodes one 16-bit sample with this stage's law.
    #[inline]
    pub fn round_trip_i16(&self, x: i16) -> i16 {
        match self.params.law {
            Law::Mulaw => ulaw_to_linear(linear_to_ulaw(x)),
            Law::Alaw => alaw_to_linear(linear_to_alaw(x)),
        }
    }

    /// Processes `buf` in place. Never allocates.
    pub fn process(&mut self, buf: &mut [f32]) {
        let mut clipped = 0u64;
        for s in buf.iter_mut() {
            let x = sanitize(*s);
            let r = (x as f64 * 32768.0).round();
            clipped += !(-32768.0..=32767.0).contains(&r) as u64;
            *s = self.round_trip_i16(pcm_code(x, 16) as i16) as f32 / 32768.0;
        }
        self.clipped += clipped;
    }

    /// Clears the clip counter.
    pub fn reset(&mut self) {
        self.clipped = 0;
    }
}

impl Stage for G711 {
    fn process(&mut self, buf: &mut [f32]) {
        G711::process(self, buf)
    }
    fn reset(&mut self) {
        G711::reset(self)
    }
    fn clipped(&self) -> u64 {
        G711::clipped(self)
    }
    /// The 256 codes of the 8-bit word.
    fn code_space(&self) -> Option<u64> {
        Some(256)
    }
    /// The 8-bit G.711 code (as transmitted, after the codec's bit inversions) that decodes to the sample. μ-law has
    /// two codes for zero (0x7F and 0xFF); zero is counted as 0xFF, so μ-law output uses at most 255 codes.
    fn code_indices(&self, out: &[f32], codes: &mut [u32]) {
        for (c, &y) in codes.iter_mut().zip(out) {
            // Output samples are 16-bit values ÷ 32768, so this product is exact.
            let x = (y as f64 * 32768.0).clamp(-32768.0, 32767.0) as i16;
            *c = match self.params.law {
                Law::Mulaw => linear_to_ulaw(x),
                Law::Alaw => linear_to_alaw(x),
            } as u32;
        }
    }
}

// ---------------------------------------------------------------------------------------------------------------------
// Continuous curves

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn codec_round_trip_is_monotonic() {
        for law in [Law::Mulaw, Law::Alaw] {
            let g = G711::new(&G711Params { law }).unwrap();
            let mut prev = i16::MIN;
            for x in i16::MIN..=i16::MAX {
                let y = g.round_trip_i16(x);
                assert!(y >= prev, "{law:?}: {x} -> {y} after {prev}");
                prev = y;
            }
        }
    }

    #[test]
    fn g711_stage_scales_counts_and_sanitizes() {
        let mut g = G711::new(&G711Params { law: Law::Mulaw }).unwrap();
        let mut b = [0.0f32, 1.0, -1.0, 0.9999, f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 1000.0 / 32768.0];
        g.process(&mut b);
        let top = 32124.0 / 32768.0;
        assert_eq!(&b[..7], &[0.0, top, -top, top, 0.0, top, -top]);
        assert_eq!(b[7], ulaw_to_linear(linear_to_ulaw(1000)) as f32 / 32768.0);
        assert_eq!(g.clipped(), 2, "+1.0 and +Inf are beyond 32767; −1.0 and −Inf are −32768");
        g.reset();
        assert_eq!(g.clipped(), 0);
        let mut a = G711::new(&G711Params { law: Law::Alaw }).unwrap();
        let mut b = [0.0f32, -1.0];
        a.process(&mut b);
        assert_eq!(b, [8.0 / 32768.0, -32256.0 / 32768.0]);
    }

    /// G.711 has no simple closed form; this measures it on the same kind of busy signal (magnitudes log-uniform
    /// over the top 24 dB). The continuous 8-bit curves predict 38.0 dB (μ-law) and 38.1 dB (A-law); G.711's
    /// segmented approximations of them land close.
    #[test]
    fn g711_sqnr_is_measured_near_38_db() {
        let mut rng = crate::rng::Pcg32::from_seed(8, 0);
        let x: Vec<f32> = (0..100_000)
            .map(|_| {
                let m = (-4.0 * (rng.uniform_centered() + 0.5)).exp2();
                (if rng.next_u32() & 1 == 0 { m } else { -m }) as f32
            })
            .collect();
        for law in [Law::Mulaw, Law::Alaw] {
            let mut g = G711::new(&G711Params { law }).unwrap();
            let mut y = x.clone();
            g.process(&mut y);
            let s: f64 = x.iter().map(|&v| (v as f64).powi(2)).sum();
            let n: f64 = x.iter().zip(&y).map(|(&a, &b)| (a as f64 - b as f64).powi(2)).sum();
            let measured = 10.0 * (s / n).log10();
            println!("G.711 {law:?}: {measured:.2} dB SQNR");
            assert!((37.8..38.6).contains(&measured), "{law:?}: {measured:.2} dB");
        }
    }
}
