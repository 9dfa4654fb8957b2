//! The IMA ADPCM round-trip stage: hear exactly what an IMA ADPCM WAV export will contain (the codec itself,
//! its tables and its WAV block layout are in [`crate::codec::ima_adpcm`]).

use crate::codec::ima_adpcm::{samples_per_block, ImaState};
use crate::error::{Error, Range, Result};
use crate::sample::{pcm_code, sanitize};
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Allowed samples per block (and each must be `8k + 1`).
pub const SAMPLES_PER_BLOCK: Range = Range::new(9.0, 65_529.0);

/// Parameters of [`AdpcmRoundTrip`].
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct AdpcmParams {
    /// Samples per channel in one ADPCM block, where the coder restarts its predictor. Must be `8k + 1` for some
    /// `k ≥ 1`, at most 65,529. Default 505 (256 bytes per channel: what the WAV export writes unless told otherwise).
    /// Use [`AdpcmParams::for_block_align`] to match an export with a chosen `block_align`.
    pub samples_per_block: u32,
}

impl Default for AdpcmParams {
    fn default() -> Self {
        AdpcmParams { samples_per_block: 505 }
    }
}

impl AdpcmParams {
    /// The parameters that reproduce a WAV export with this `block_align` and channel count.
    pub fn for_block_align(block_align: usize, channels: usize) -> Result<Self> {
        Ok(AdpcmParams { samples_per_block: samples_per_block(block_align, channels)? as u32 })
    }

    /// Checks the parameters.
    pub fn validate(&self) -> Result<()> {
        let s = self.samples_per_block;
        if (s as f64) < SAMPLES_PER_BLOCK.min || !(s - 1).is_multiple_of(8) || s as f64 > SAMPLES_PER_BLOCK.max {
            return Err(Error::param("samples_per_block", s, "8k + 1 for k ≥ 1, 9 to 65529 (e.g. 505 or 1017)"));
        }
        Ok(())
    }
}

/// A chain stage that makes the sound exactly what an IMA ADPCM WAV export of it will contain: each sample is
/// converted to 16 bits with [`pcm_code`], encoded, decoded and scaled back by 1/32768. It restarts its predictor
/// every `samples_per_block` samples, counted from the first sample after construction or [`reset`](Stage::reset),
/// exactly as the WAV writer does for each channel. Use one instance per channel.
#[derive(Debug, Clone)]
pub struct AdpcmRoundTrip {
    samples_per_block: usize,
    state: ImaState,
    position: usize,
    clipped: u64,
}

impl AdpcmRoundTrip {
    /// Validates `params` and builds the stage.
    pub fn new(params: &AdpcmParams) -> Result<Self> {
        params.validate()?;
        Ok(AdpcmRoundTrip {
            samples_per_block: params.samples_per_block as usize,
            state: ImaState::default(),
            position: 0,
            clipped: 0,
        })
    }

    /// Processes one sample.
    #[inline]
    pub fn process_sample(&mut self, x: f32) -> f32 {
        let x = sanitize(x);
        let code = pcm_code(x, 16);
        let v = x as f64 * 32768.0;
        self.clipped += (v.round() > 32767.0 || v.round() < -32768.0) as u64;
        let y = if self.position == 0 {
            self.state.predictor = code as i16;
            code as i16
        } else {
            self.state.encode(code as i16);
            self.state.predictor
        };
        self.position += 1;
        if self.position == self.samples_per_block {
            self.position = 0;
        }
        y as f32 / 32768.0
    }
}

impl Stage for AdpcmRoundTrip {
    fn process(&mut self, buf: &mut [f32]) {
        for s in buf.iter_mut() {
            *s = self.process_sample(*s);
        }
    }

    fn reset(&mut self) {
        self.state = ImaState::default();
        self.position = 0;
        self.clipped = 0;
    }

    /// Samples at or beyond the 16-bit range (e.g. +1.0) that the conversion clamped.
    fn clipped(&self) -> u64 {
        self.clipped
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Pcg32 as Rng;

    use crate::codec::ima_adpcm::{block_count, decode_blocks, encode_blocks, DecodeNotes};

    #[test]
    fn blocks_round_trip_and_pad() {
        let mut rng = Rng::new(3, 1);
        for (ch, ba) in [(1, 256), (2, 512), (3, 36), (1, 8)] {
            let spb = samples_per_block(ba, ch).unwrap();
            for frames in [0, 1, 2, spb - 1, spb, spb + 1, 3 * spb + 7] {
                let input: Vec<Vec<i16>> =
                    (0..ch).map(|_| (0..frames).map(|_| (rng.next_u32() >> 20) as i16 - 2048).collect()).collect();
                let mut bytes = Vec::new();
                encode_blocks(&input, ba, &mut bytes).unwrap();
                assert_eq!(bytes.len() as u64, block_count(frames as u64, spb) * ba as u64);
                let (out, notes) = decode_blocks(&bytes, ch, ba, frames as u64).unwrap();
                assert_eq!(notes, DecodeNotes::default());
                assert_eq!(out.len(), ch);
                for (c, o) in out.iter().enumerate() {
                    assert_eq!(o.len(), frames);
                    // The stage reproduces the file's samples exactly.
                    let mut st = AdpcmRoundTrip::new(&AdpcmParams { samples_per_block: spb as u32 }).unwrap();
                    let mut buf: Vec<f32> = input[c].iter().map(|&s| s as f32 / 32768.0).collect();
                    for part in buf.chunks_mut(100) {
                        st.process(part);
                    }
                    let back: Vec<i16> = buf.iter().map(|&s| (s * 32768.0) as i16).collect();
                    assert_eq!(&back, o, "ch {ch} ba {ba} frames {frames}");
                    // Block starts are exact.
                    for b in (0..frames).step_by(spb) {
                        assert_eq!(o[b], input[c][b]);
                    }
                }
            }
        }
    }

    #[test]
    fn stage_params_are_validated_and_reset_restarts() {
        for bad in [0, 1, 8, 10, 65_537] {
            let e = AdpcmRoundTrip::new(&AdpcmParams { samples_per_block: bad }).unwrap_err();
            assert!(e.to_string().contains("samples_per_block"), "{e}");
        }
        let mut st = AdpcmRoundTrip::new(&AdpcmParams::default()).unwrap();
        let mut a = vec![0.3f32; 1000];
        a[0] = 1.0;
        st.process(&mut a);
        assert_eq!(st.clipped(), 1);
        st.reset();
        let mut b = vec![0.3f32; 1000];
        b[0] = 1.0;
        st.process(&mut b);
        assert_eq!(a, b);
        assert_eq!(a[0], 32767.0 / 32768.0);
    }
}
