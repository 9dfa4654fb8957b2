//! Microsoft ADPCM: 4 bits per sample, WAV format tag 0x0002, as described in Microsoft's *Multimedia Standards
//! Update* (1994, "ADPCM" wave type) and read by every Windows ACM, libsndfile and ffmpeg.
//!
//! # The codec
//! Each channel predicts from its last two reconstructed samples with one of seven fixed coefficient pairs
//! ([`COEF1`], [`COEF2`], in 1/256): `predict = (s1·c1 + s2·c2) >> 8`. A 4-bit code is a signed error in units of the
//! channel's current step `delta`: `sample = clamp(predict + code·delta)`, code −8…7. Then
//! `delta = max(16, ADAPTATION[code & 15]·delta >> 8)`.
//!
//! # The WAV block layout
//! A file is a sequence of blocks of `block_align` bytes. Each block starts with a header per channel field by
//! field (all channels' predictor indices (u8, 0–6), then all initial deltas (i16), then all `sample1` (i16), then all
//! `sample0` (i16)): 7 bytes per channel. `sample0` and `sample1` are the block's first two samples, verbatim. Then
//! come the codes, high nibble first; with two channels each byte holds one code for the left (high nibble) and one
//! for the right (low nibble) channel. Hence
//!
//! `samples_per_block = 2 + (block_align − 7·channels)·2 / channels`
//!
//! (what libsndfile and the ACM codec compute). Only 1 and 2 channels exist in this format.
//!
//! # The encoder (ours, not a copy of any other)
//! The format fixes only the decoder; every encoder chooses the predictor index and the initial delta of each block
//! and the codes. Ours is causal, so the round-trip stage can play exactly the export sample by sample:
//! - the predictor of a block is the pair that predicted the *previous* block's decoded samples best (least sum of
//!   absolute open-loop prediction errors); the first block uses pair 0;
//! - the initial delta is the delta the previous block ended with (16 for the first block);
//! - each code is the one whose reconstruction is nearest the input (libsndfile truncates the quotient instead,
//!   which costs a few dB), among the codes that keep `delta` within 16 bits.
//!
//! Every choice depends only on what a decoder plays (the decoded samples and the decoder's state), never on the
//! input itself, so the encoder is *idempotent*: encoding its own decoded output gives the same bytes again. That is
//! what makes the round-trip stage equal to the export: the export encodes the chain's output, which is the stage's
//! decoded signal when the stage is last. (An earlier version chose the predictor from the previous block's *input*;
//! re-encoding the decoded signal then picked another pair now and then, and the export drifted from the stage by a
//! few LSB after some tens of blocks.)
//!
//! # Quirk: the 16-bit delta
//! The format's description computes `delta` in plain integers; libsndfile keeps it in a 16-bit integer, so a delta
//! above 32,767 (only from a hostile or broken encoder: a run of the largest codes from a big delta) wraps there.
//! This decoder wraps as libsndfile does: it then agrees with libsndfile on every file, and a hostile file cannot
//! make the step grow without bound (it would overflow after about twenty codes otherwise). Our encoder never lets
//! delta leave 16 bits, so on every file we write the description and libsndfile agree anyway.
//!
//! # The last block
//! A partial last block is completed with silence (0) and written whole; the `fact` chunk holds the true frame count.

use crate::error::{Error, Result};

/// Step adaptation factors, in 1/256, indexed by the 4-bit code.
pub const ADAPTATION: [i32; 16] = [230, 230, 230, 230, 307, 409, 512, 614, 768, 614, 512, 409, 307, 230, 230, 230];
/// First predictor coefficient of the seven standard pairs, in 1/256.
pub const COEF1: [i32; 7] = [256, 512, 0, 192, 240, 460, 392];
/// Second predictor coefficient of the seven standard pairs, in 1/256.
pub const COEF2: [i32; 7] = [0, -256, 0, 64, 0, -208, -232];
/// Smallest step.
pub const MIN_DELTA: i32 = 16;
/// Default block size per channel in bytes: 500 samples per block for one or two channels.
pub const DEFAULT_BLOCK_BYTES_PER_CHANNEL: usize = 256;

/// Samples per channel in a block of `block_align` bytes, checking the layout rules.
pub fn samples_per_block(block_align: usize, channels: usize) -> Result<usize> {
    if !(1..=2).contains(&channels) {
        return Err(Error::param("channels", channels, "1 or 2 (Microsoft ADPCM has no layout for more)"));
    }
    let header = 7 * channels;
    let max = max_block_align(channels);
    if block_align < header + channels || block_align > max {
        return Err(Error::param(
            "block_align",
            block_align,
            format!(
                "{} to {max} bytes for {channels} channel(s) (a {header}-byte header and codes)",
                header + channels
            ),
        ));
    }
    Ok(2 + (block_align - header) * 2 / channels)
}

/// The largest block size whose sample count fits the 16-bit `samplesPerBlock` field.
pub fn max_block_align(channels: usize) -> usize {
    if channels == 2 {
        65_535 // 2 + (ba − 14) ≤ 65,535 holds for every ba ≤ 65,535
    } else {
        (65_535 - 2) / 2 + 7 // 2 + 2·(ba − 7) ≤ 65,535
    }
}

/// The default block size: 256 bytes per channel.
pub fn default_block_align(channels: usize) -> usize {
    DEFAULT_BLOCK_BYTES_PER_CHANNEL * channels
}

/// The block size in bytes that holds `samples_per_block` samples per channel, if one exists.
pub fn block_align_for(spb: usize, channels: usize) -> Option<usize> {
    let body = (spb.checked_sub(2)? * channels).div_ceil(2);
    let ba = 7 * channels + body;
    (samples_per_block(ba, channels).ok()? == spb).then_some(ba)
}

/// The decoder state of one channel.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MsState {
    /// Predictor index, 0 to 6.
    pub pred: usize,
    /// Current step.
    pub delta: i32,
    /// Last reconstructed sample.
    pub s1: i16,
    /// The one before.
    pub s2: i16,
}

impl MsState {
    /// The prediction of the next sample.
    #[inline]
    pub fn predict(&self) -> i32 {
        (self.s1 as i32 * COEF1[self.pred] + self.s2 as i32 * COEF2[self.pred]) >> 8
    }

    /// The sample code `code` (4 bits, two's complement) would give, without changing the state.
    #[inline]
    fn reconstruct(&self, predict: i32, code: u8) -> i16 {
        let e = ((code as i32) << 28) >> 28;
        (predict + e * self.delta).clamp(i16::MIN as i32, i16::MAX as i32) as i16
    }

    /// The step after `code`, kept in 16 bits as libsndfile keeps it (see the module docs).
    #[inline]
    fn next_delta(&self, code: u8) -> i32 {
        let d = ((ADAPTATION[(code & 15) as usize] * self.delta) >> 8) as i16 as i32;
        d.max(MIN_DELTA)
    }

    /// The step after `code` without the 16-bit limit (what the encoder must keep below 32,768).
    #[inline]
    fn next_delta_wide(&self, code: u8) -> i32 {
        (ADAPTATION[(code & 15) as usize] * self.delta) >> 8
    }

    /// Decodes one code and returns the sample.
    #[inline]
    pub fn decode(&mut self, code: u8) -> i16 {
        let s = self.reconstruct(self.predict(), code & 15);
        self.delta = self.next_delta(code & 15);
        self.s2 = self.s1;
        self.s1 = s;
        s
    }

    /// Encodes one sample: the code whose reconstruction is nearest `x` among those that keep delta in 16 bits.
    /// Afterwards the state equals the decoder's after decoding that code.
    #[inline]
    pub fn encode(&mut self, x: i16) -> u8 {
        let p = self.predict();
        let mut best = (u32::MAX, 0u8);
        for code in 0..16u8 {
            if self.next_delta_wide(code) > i16::MAX as i32 {
                continue;
            }
            let err = (x as i32 - self.reconstruct(p, code) as i32).unsigned_abs();
            if err < best.0 {
                best = (err, code);
            }
        }
        self.decode(best.1);
        best.1
    }
}

/// The causal encoder of one channel (see the module docs): block headers and codes, one sample at a time.
#[derive(Debug, Clone)]
pub struct MsEncoder {
    samples_per_block: usize,
    pos: usize,
    state: MsState,
    /// Open-loop prediction error of each pair over the current block's decoded samples.
    score: [u64; 7],
    /// The last two decoded samples (what a decoder plays).
    y1: i16,
    y2: i16,
}

/// What [`MsEncoder::push`] made of a sample.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MsOut {
    /// The first sample of a block: stored verbatim in the header with the block's predictor index and delta.
    Header {
        /// Predictor index.
        pred: u8,
        /// Initial delta.
        delta: i16,
    },
    /// The second sample, also verbatim.
    Verbatim,
    /// A coded sample.
    Code(u8),
}

impl MsEncoder {
    /// An encoder restarting every `samples_per_block` samples (at least 2).
    pub fn new(samples_per_block: usize) -> Self {
        MsEncoder {
            samples_per_block: samples_per_block.max(2),
            pos: 0,
            state: MsState { pred: 0, delta: MIN_DELTA, s1: 0, s2: 0 },
            score: [0; 7],
            y1: 0,
            y2: 0,
        }
    }

    /// Encodes one sample; returns what goes into the file and the sample a decoder will play.
    #[inline]
    pub fn push(&mut self, x: i16) -> (MsOut, i16) {
        let out = match self.pos {
            0 => {
                if self.score.iter().any(|&s| s > 0) {
                    let mut best = 0;
                    for k in 1..7 {
                        if self.score[k] < self.score[best] {
                            best = k;
                        }
                    }
                    self.state.pred = best;
                }
                self.score = [0; 7];
                self.state.s2 = x;
                (MsOut::Header { pred: self.state.pred as u8, delta: self.state.delta as i16 }, x)
            }
            1 => {
                self.state.s1 = x;
                (MsOut::Verbatim, x)
            }
            _ => {
                let code = self.state.encode(x);
                let y = self.state.s1;
                for (k, s) in self.score.iter_mut().enumerate() {
                    let p = (self.y1 as i32 * COEF1[k] + self.y2 as i32 * COEF2[k]) >> 8;
                    *s += (y as i32 - p).unsigned_abs() as u64;
                }
                (MsOut::Code(code), y)
            }
        };
        self.y2 = self.y1;
        self.y1 = out.1;
        self.pos += 1;
        if self.pos == self.samples_per_block {
            self.pos = 0;
        }
        out
    }
}

/// Number of blocks needed for `frames` frames.
pub fn block_count(frames: u64, samples_per_block: usize) -> u64 {
    frames.div_ceil(samples_per_block as u64)
}

/// Encodes planar 16-bit channels (1 or 2, of equal length) into whole blocks of `block_align` bytes, appending to
/// `out`. The last block is completed with silence. Zero frames give no blocks.
pub fn encode_blocks(channels: &[Vec<i16>], block_align: usize, out: &mut Vec<u8>) -> Result<()> {
    let ch = channels.len();
    let spb = samples_per_block(block_align, ch)?;
    let frames = channels.first().map_or(0, |c| c.len());
    if channels.iter().any(|c| c.len() != frames) {
        return Err(Error::format("channels have different lengths"));
    }
    let mut enc: Vec<MsEncoder> = (0..ch).map(|_| MsEncoder::new(spb)).collect();
    let mut start = 0;
    let mut header = vec![0u8; 7 * ch];
    let mut codes: Vec<u8> = Vec::with_capacity(spb * ch);
    while start < frames {
        codes.clear();
        for i in 0..spb {
            for (c, e) in enc.iter_mut().enumerate() {
                let x = channels[c].get(start + i).copied().unwrap_or(0);
                match e.push(x).0 {
                    MsOut::Header { pred, delta } => {
                        header[c] = pred;
                        header[ch + 2 * c..ch + 2 * c + 2].copy_from_slice(&delta.to_le_bytes());
                        header[5 * ch + 2 * c..5 * ch + 2 * c + 2].copy_from_slice(&x.to_le_bytes());
                    }
                    MsOut::Verbatim => header[3 * ch + 2 * c..3 * ch + 2 * c + 2].copy_from_slice(&x.to_le_bytes()),
                    MsOut::Code(k) => codes.push(k),
                }
            }
        }
        out.extend_from_slice(&header);
        let body = block_align - 7 * ch;
        let mut bytes = codes.chunks(2).map(|p| (p[0] << 4) | p.get(1).copied().unwrap_or(0));
        for _ in 0..body {
            out.push(bytes.next().unwrap_or(0));
        }
        start += spb;
    }
    Ok(())
}

/// What [`decode_blocks`] noticed about damaged data; decoding goes on regardless.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct DecodeNotes {
    /// Block headers with a predictor index above 6 (taken as 0, as libsndfile does).
    pub bad_predictor: usize,
    /// Bytes at the end that did not make a whole block header (ignored).
    pub leftover_bytes: usize,
}

/// Decodes blocks of `block_align` bytes into planar 16-bit channels. A short last block yields its header's two
/// samples and each code present. At most `max_frames` frames are returned.
pub fn decode_blocks(
    data: &[u8],
    channels: usize,
    block_align: usize,
    max_frames: u64,
) -> Result<(Vec<Vec<i16>>, DecodeNotes)> {
    let spb = samples_per_block(block_align, channels)?;
    let header = 7 * channels;
    let mut notes = DecodeNotes::default();
    let whole = (data.len() / block_align) as u64 * spb as u64;
    let cap = (whole + spb as u64).min(max_frames) as usize;
    let mut out: Vec<Vec<i16>> = (0..channels).map(|_| Vec::with_capacity(cap)).collect();
    let i16_at = |b: &[u8], i: usize| i16::from_le_bytes([b[i], b[i + 1]]);
    for block in data.chunks(block_align) {
        if out[0].len() as u64 >= max_frames {
            break;
        }
        if block.len() < header {
            notes.leftover_bytes += block.len();
            break;
        }
        let mut st: Vec<MsState> = (0..channels)
            .map(|c| {
                let mut pred = block[c] as usize;
                if pred > 6 {
                    notes.bad_predictor += 1;
                    pred = 0;
                }
                MsState {
                    pred,
                    delta: i16_at(block, channels + 2 * c) as i32,
                    s1: i16_at(block, 3 * channels + 2 * c),
                    s2: i16_at(block, 5 * channels + 2 * c),
                }
            })
            .collect();
        for (c, s) in st.iter().enumerate() {
            out[c].push(s.s2);
            out[c].push(s.s1);
        }
        let mut n = 2 * channels;
        'codes: for &byte in &block[header..] {
            for nib in [byte >> 4, byte & 15] {
                if n >= spb * channels {
                    break 'codes;
                }
                let c = n % channels;
                out[c].push(st[c].decode(nib));
                n += 1;
            }
        }
        // A short block may end between the channels of a frame: keep whole frames only.
        let frames = out.iter().map(|c| c.len()).min().unwrap_or(0);
        for c in &mut out {
            c.truncate(frames);
        }
    }
    for c in &mut out {
        c.truncate(cap);
    }
    Ok((out, notes))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Pcg32 as Rng;

    #[test]
    fn layout_follows_the_formula() {
        assert_eq!(samples_per_block(256, 1).unwrap(), 500);
        assert_eq!(samples_per_block(512, 2).unwrap(), 500);
        assert_eq!(samples_per_block(2048, 2).unwrap(), 2036);
        assert_eq!(samples_per_block(1024, 1).unwrap(), 2036);
        for ch in 1..=2 {
            assert!(samples_per_block(max_block_align(ch), ch).unwrap() <= 65_535);
            assert!(samples_per_block(max_block_align(ch) + 1, ch).is_err());
            assert!(samples_per_block(8 * ch - 1, ch).is_err());
            for spb in [4usize, 500, 2036] {
                let ba = block_align_for(spb, ch).unwrap();
                assert_eq!(samples_per_block(ba, ch).unwrap(), spb);
            }
        }
        assert_eq!(block_align_for(501, 1), None);
        assert!(samples_per_block(512, 3).unwrap_err().to_string().contains("channels"));
    }

    /// A hostile block (the largest code over and over from the largest delta) decodes without overflow.
    #[test]
    fn hostile_codes_do_not_overflow() {
        let mut block = vec![0u8, 0xFF, 0x7F, 0, 0, 0, 0];
        block.extend(std::iter::repeat_n(0x88u8, 500));
        let (out, _) = decode_blocks(&block, 1, block.len(), u64::MAX).unwrap();
        assert_eq!(out[0].len(), 2 + 1000);
    }

    /// Encoder and decoder stay in step, blocks round-trip, and the encoder tracks a sine closely.
    #[test]
    fn blocks_round_trip() {
        let mut rng = Rng::new(5, 2);
        for (ch, ba) in [(1, 256), (2, 512), (1, 9), (2, 37)] {
            let spb = samples_per_block(ba, ch).unwrap();
            for frames in [1usize, 2, 3, spb, spb + 1, 3 * spb + 5] {
                let input: Vec<Vec<i16>> = (0..ch)
                    .map(|c| {
                        (0..frames)
                            .map(|i| {
                                let s = 9000.0 * ((i as f64) * 0.03 + c as f64).sin();
                                (s + (rng.next_u32() >> 24) as f64) as i16
                            })
                            .collect()
                    })
                    .collect();
                let mut bytes = Vec::new();
                encode_blocks(&input, ba, &mut bytes).unwrap();
                assert_eq!(bytes.len() as u64, block_count(frames as u64, spb) * ba as u64);
                let (out, notes) = decode_blocks(&bytes, ch, ba, frames as u64).unwrap();
                assert_eq!(notes, DecodeNotes::default());
                for c in 0..ch {
                    assert_eq!(out[c].len(), frames);
                    let mut e = MsEncoder::new(spb);
                    let direct: Vec<i16> = input[c].iter().map(|&x| e.push(x).1).collect();
                    assert_eq!(direct, out[c], "ch {ch} ba {ba} frames {frames}");
                    if frames > 200 {
                        let err = input[c][100..].iter().zip(&out[c][100..]).map(|(a, b)| (a - b).abs()).max();
                        assert!(err.unwrap() < 1500, "{err:?}");
                    }
                }
            }
        }
    }
}
