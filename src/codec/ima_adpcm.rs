//! IMA ADPCM: 4 bits per sample, as specified by the IMA Digital Audio Focus and Technical Working Groups'
//! *Recommended Practices for Enhancing Digital Audio Compatibility in Multimedia Systems* (1992), in the block layout
//! of Microsoft's `WAVE_FORMAT_IMA_ADPCM` (format tag 0x0011).
//!
//! # The codec
//! Each channel keeps a predictor (the last reconstructed 16-bit sample) and an index into the 89-entry
//! [`STEP_TABLE`]. A 4-bit code is a sign bit (8) and three magnitude bits (4, 2, 1) that quantize the difference
//! between the new sample and the prediction in units of the current step; the decoder adds back
//! `step/8 + (4: step) + (2: step/2) + (1: step/4)` (each term an integer shift, exactly as the reference), clamps
//! to 16 bits and moves the index by [`INDEX_TABLE`]. The encoder reconstructs with the same arithmetic, so encoder
//! and decoder never drift apart.
//!
//! # The WAV block layout
//! A file is a sequence of blocks of `block_align` bytes. Each block starts with one 4-byte header per channel:
//! predictor (i16, little-endian), step index (u8, 0–88), a reserved zero byte. The header's predictor *is* the
//! block's first sample. Then come 4-byte groups, one per channel in turn, each holding 8 consecutive samples of that
//! channel, low nibble first. Hence
//!
//! `samples_per_block = (block_align − 4·channels) · 8 / (4·channels) + 1`,
//!
//! and `block_align − 4·channels` must be a positive multiple of `4·channels`.
//!
//! At every block boundary the encoder restarts its predictor from the true sample written in the header; the step
//! index carries over from the previous block (it starts at 0 in the first block). This is what libsndfile and the
//! Microsoft codec do.
//!
//! # Block size
//! The default is 256 bytes per channel ([`DEFAULT_BLOCK_BYTES_PER_CHANNEL`]), 505 samples per block for any channel
//! count: Microsoft's choice at 8 and 11.025 kHz. It is the same at every sample rate so that a file's size follows
//! from frames and channels alone, and it keeps the padding of the last block small (short game sounds). Players that
//! expect larger blocks at 44.1 kHz (Microsoft used 1024 bytes per mono channel there) read any valid size.
//!
//! # The last block
//! A partial last block is written whole: the missing samples are encoded as silence (0) continuing from the real
//! ones, as libsndfile does. The `fact` chunk holds the true frame count, and readers that honour it (this one,
//! libsndfile) drop the padding.

use crate::error::{Error, Result};

/// Quantizer step sizes, indexed 0 to 88.
pub const STEP_TABLE: [i32; 89] = [
    7, 8, 9, 10, 11, 12, 13, 14, 16, 17, 19, 21, 23, 25, 28, 31, 34, 37, 41, 45, 50, 55, 60, 66, 73, 80, 88, 97, 107,
    118, 130, 143, 157, 173, 190, 209, 230, 253, 279, 307, 337, 371, 408, 449, 494, 544, 598, 658, 724, 796, 876, 963,
    1060, 1166, 1282, 1411, 1552, 1707, 1878, 2066, 2272, 2499, 2749, 3024, 3327, 3660, 4026, 4428, 4871, 5358, 5894,
    6484, 7132, 7845, 8630, 9493, 10442, 11487, 12635, 13899, 15289, 16818, 18500, 20350, 22385, 24623, 27086, 29794,
    32767,
];

/// Step-index change for each 4-bit code (the sign bit does not matter).
pub const INDEX_TABLE: [i32; 16] = [-1, -1, -1, -1, 2, 4, 6, 8, -1, -1, -1, -1, 2, 4, 6, 8];

/// Highest valid step index.
pub const MAX_STEP_INDEX: u8 = 88;

/// Default block size per channel in bytes (see the module docs).
pub const DEFAULT_BLOCK_BYTES_PER_CHANNEL: usize = 256;

/// The coder state of one channel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct ImaState {
    /// Last reconstructed sample.
    pub predictor: i16,
    /// Index into [`STEP_TABLE`], 0 to 88.
    pub index: u8,
}

impl ImaState {
    /// A state with this predictor and step index (the index is clamped to 0–88).
    pub fn new(predictor: i16, index: u8) -> Self {
        ImaState { predictor, index: index.min(MAX_STEP_INDEX) }
    }

    #[inline]
    fn apply(&mut self, code: u8, step: i32) {
        let mut diff = step >> 3;
        if code & 4 != 0 {
            diff += step;
        }
        if code & 2 != 0 {
            diff += step >> 1;
        }
        if code & 1 != 0 {
            diff += step >> 2;
        }
        let p = self.predictor as i32;
        let p = if code & 8 != 0 { p - diff } else { p + diff };
        self.predictor = p.clamp(i16::MIN as i32, i16::MAX as i32) as i16;
        self.index = (self.index as i32 + INDEX_TABLE[code as usize & 15]).clamp(0, MAX_STEP_INDEX as i32) as u8;
    }

    /// Decodes one 4-bit code (the high bits of `code` are ignored) and returns the new sample.
    #[inline]
    pub fn decode(&mut self, code: u8) -> i16 {
        let step = STEP_TABLE[self.index.min(MAX_STEP_INDEX) as usize];
        self.apply(code & 15, step);
        self.predictor
    }

    /// Encodes one sample into a 4-bit code: the reference "predict, quantize the difference in 3 bits plus sign".
    /// Afterwards the state equals the decoder's after decoding that code.
    #[inline]
    pub fn encode(&mut self, sample: i16) -> u8 {
        let step = STEP_TABLE[self.index.min(MAX_STEP_INDEX) as usize];
        let mut diff = sample as i32 - self.predictor as i32;
        let mut code = 0u8;
        if diff < 0 {
            code = 8;
            diff = -diff;
        }
        let mut s = step;
        if diff >= s {
            code |= 4;
            diff -= s;
        }
        s >>= 1;
        if diff >= s {
            code |= 2;
            diff -= s;
        }
        s >>= 1;
        if diff >= s {
            code |= 1;
        }
        self.apply(code, step);
        code
    }
}

/// Samples per channel in one block of `block_align` bytes, checking the layout rules.
///
/// Errors name `block_align` when it is not `4·channels·(k + 1)` for some k ≥ 1, or when the count does not fit the
/// 16-bit `samplesPerBlock` field.
pub fn samples_per_block(block_align: usize, channels: usize) -> Result<usize> {
    if channels == 0 || channels > crate::audio::MAX_CHANNELS {
        return Err(Error::param("channels", channels, format!("1..={}", crate::audio::MAX_CHANNELS)));
    }
    let header = 4 * channels;
    if block_align <= header || !block_align.is_multiple_of(header) {
        return Err(Error::param(
            "block_align",
            block_align,
            format!(
                "a multiple of 4 × channels = {header} bytes, at least {} (one header and one 8-sample group per channel)",
                2 * header
            ),
        ));
    }
    let spb = (block_align - header) * 8 / header + 1;
    if spb > u16::MAX as usize || block_align > u16::MAX as usize {
        return Err(Error::param(
            "block_align",
            block_align,
            format!("at most {} for {channels} channel(s) (65,535 samples per block)", max_block_align(channels)),
        ));
    }
    Ok(spb)
}

/// The largest valid block size for `channels` channels.
pub fn max_block_align(channels: usize) -> usize {
    let header = 4 * channels.max(1);
    // samples_per_block = 2 * (ba - header) / channels + 1 <= 65535 and ba <= 65535.
    let by_spb = (65_534 / 2 * channels.max(1) + header) / header * header;
    by_spb.min(65_535 / header * header)
}

/// The default block size for `channels` channels: 256 bytes per channel.
pub fn default_block_align(channels: usize) -> usize {
    DEFAULT_BLOCK_BYTES_PER_CHANNEL * channels
}

/// Number of blocks needed for `frames` frames.
pub fn block_count(frames: u64, samples_per_block: usize) -> u64 {
    frames.div_ceil(samples_per_block as u64)
}

/// Encodes planar 16-bit channels (all of equal length) into whole blocks of `block_align` bytes, appending to `out`.
/// The last block is completed with silence (see the module docs). Zero frames give no blocks.
pub fn encode_blocks(channels: &[Vec<i16>], block_align: usize, out: &mut Vec<u8>) -> Result<()> {
    let ch = channels.len();
    let spb = samples_per_block(block_align, ch)?;
    let frames = channels.first().map_or(0, |c| c.len());
    if channels.iter().any(|c| c.len() != frames) {
        return Err(Error::format("channels have different lengths"));
    }
    let mut states = vec![ImaState::default(); ch];
    let groups = (spb - 1) / 8;
    let at = |c: usize, i: usize| channels[c].get(i).copied().unwrap_or(0);
    let mut start = 0;
    while start < frames {
        for (c, st) in states.iter_mut().enumerate() {
            let first = at(c, start);
            st.predictor = first;
            out.extend_from_slice(&first.to_le_bytes());
            out.push(st.index);
            out.push(0);
        }
        for g in 0..groups {
            for (c, st) in states.iter_mut().enumerate() {
                let base = start + 1 + 8 * g;
                for k in 0..4 {
                    let lo = st.encode(at(c, base + 2 * k));
                    let hi = st.encode(at(c, base + 2 * k + 1));
                    out.push(lo | (hi << 4));
                }
            }
        }
        start += spb;
    }
    Ok(())
}

/// What [`decode_blocks`] noticed about damaged data; decoding goes on regardless.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct DecodeNotes {
    /// Block headers whose step index was above 88 (clamped, as libsndfile does).
    pub bad_step_index: usize,
    /// Block headers whose reserved byte was not zero.
    pub bad_reserved: usize,
    /// Bytes at the end of the last block that did not form a whole group for every channel (ignored).
    pub leftover_bytes: usize,
}

/// Decodes blocks of `block_align` bytes into planar 16-bit channels. The last block may be short: its header and
/// each whole group (8 samples for every channel) present are decoded. At most `max_frames` frames are returned.
pub fn decode_blocks(
    data: &[u8],
    channels: usize,
    block_align: usize,
    max_frames: u64,
) -> Result<(Vec<Vec<i16>>, DecodeNotes)> {
    let spb = samples_per_block(block_align, channels)?;
    let header = 4 * channels;
    let mut notes = DecodeNotes::default();
    // Capacity bounded by what the bytes can hold.
    let whole = (data.len() / block_align) as u64 * spb as u64;
    let rest = data.len() % block_align;
    let partial = if rest >= header { 1 + (rest - header) / header * 8 } else { 0 };
    let cap = (whole + partial as u64).min(max_frames) as usize;
    let mut out: Vec<Vec<i16>> = (0..channels).map(|_| Vec::with_capacity(cap)).collect();
    let mut states = vec![ImaState::default(); channels];
    for block in data.chunks(block_align) {
        if out[0].len() as u64 >= max_frames {
            break;
        }
        if block.len() < header {
            notes.leftover_bytes += block.len();
            break;
        }
        for (c, st) in states.iter_mut().enumerate() {
            let h = &block[4 * c..4 * c + 4];
            if h[2] > MAX_STEP_INDEX {
                notes.bad_step_index += 1;
            }
            if h[3] != 0 {
                notes.bad_reserved += 1;
            }
            *st = ImaState::new(i16::from_le_bytes([h[0], h[1]]), h[2]);
            out[c].push(st.predictor);
        }
        let body = &block[header..];
        let mut groups = body.chunks_exact(header);
        for group in &mut groups {
            for (c, st) in states.iter_mut().enumerate() {
                for &byte in &group[4 * c..4 * c + 4] {
                    out[c].push(st.decode(byte & 15));
                    out[c].push(st.decode(byte >> 4));
                }
            }
        }
        notes.leftover_bytes += groups.remainder().len();
    }
    for c in &mut out {
        c.truncate(cap);
    }
    Ok((out, notes))
}

/// Whether every sample from frame `from` to the end of `data` (whole blocks only) is exactly what
/// [`encode_blocks`] writes as padding: the encoding of silence continuing from the decoder state at `from`.
/// Readers use it to tell a true `fact` count (followed by padding) from a wrong one (followed by sound).
pub fn is_silent_padding(data: &[u8], channels: usize, block_align: usize, from: u64) -> bool {
    let Ok(spb) = samples_per_block(block_align, channels) else { return false };
    if !data.len().is_multiple_of(block_align) {
        return false;
    }
    let header = 4 * channels;
    for c in 0..channels {
        let mut pos = 0u64;
        let mut shadow: Option<ImaState> = None;
        for block in data.chunks_exact(block_align) {
            let h = &block[4 * c..4 * c + 4];
            let mut st = ImaState::new(i16::from_le_bytes([h[0], h[1]]), h[2]);
            if let Some(sh) = shadow.as_mut() {
                // The writer restarts the predictor from the (silent) first sample and carries the index over.
                if st.predictor != 0 || st.index != sh.index {
                    return false;
                }
                sh.predictor = 0;
            } else if pos >= from {
                if st.predictor != 0 {
                    return false;
                }
                shadow = Some(st);
            }
            pos += 1;
            for g in 0..(spb - 1) / 8 {
                let off = header + g * header + 4 * c;
                for &byte in &block[off..off + 4] {
                    for nibble in [byte & 15, byte >> 4] {
                        if shadow.is_none() && pos >= from {
                            shadow = Some(st);
                        }
                        st.decode(nibble);
                        if let Some(sh) = shadow.as_mut() {
                            sh.encode(0);
                            if *sh != st {
                                return false;
                            }
                        }
                        pos += 1;
                    }
                }
            }
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::rng::Pcg32 as Rng;

    #[test]
    fn samples_per_block_follows_the_layout() {
        assert_eq!(samples_per_block(256, 1).unwrap(), 505);
        assert_eq!(samples_per_block(512, 2).unwrap(), 505);
        assert_eq!(samples_per_block(1024, 1).unwrap(), 2041);
        assert_eq!(samples_per_block(2048, 2).unwrap(), 2041);
        assert_eq!(samples_per_block(8, 1).unwrap(), 9);
        for (ba, ch) in [(4, 1), (6, 1), (0, 1), (12, 2), (260, 2), (32_768 + 4, 1)] {
            let e = samples_per_block(ba, ch).unwrap_err();
            assert!(e.to_string().contains("block_align"), "{ba} {ch}: {e}");
        }
        for ch in 1..=64 {
            let m = max_block_align(ch);
            assert!(samples_per_block(m, ch).is_ok(), "{ch}: {m}");
            assert!(samples_per_block(m + 4 * ch, ch).is_err(), "{ch}: {m}");
        }
    }

    /// Encoder and decoder agree, and the coder tracks a slow sine closely.
    #[test]
    fn encoder_state_matches_decoder_state() {
        let mut enc = ImaState::default();
        let mut dec = ImaState::default();
        let mut rng = Rng::new(7, 0);
        let mut err = 0f64;
        for i in 0..20_000 {
            let s = if i < 10_000 {
                (8000.0 * ((i as f64) * 0.01).sin()) as i16
            } else {
                (rng.next_u32() >> 16) as u16 as i16
            };
            let code = enc.encode(s);
            assert!(code < 16);
            assert_eq!(dec.decode(code), enc.predictor);
            assert_eq!(dec, enc);
            if i > 100 && i < 10_000 {
                err = err.max((s as f64 - dec.predictor as f64).abs());
            }
        }
        assert!(err < 200.0, "{err}");
    }

    #[test]
    fn padding_is_recognised() {
        let ch = 2;
        let input: Vec<Vec<i16>> =
            (0..ch).map(|c| (0..700).map(|i| ((i * 37 + c * 11) % 2000) as i16 - 1000).collect()).collect();
        for frames in [1usize, 252, 504, 505, 600, 700] {
            let cut: Vec<Vec<i16>> = input.iter().map(|c| c[..frames].to_vec()).collect();
            let mut bytes = Vec::new();
            encode_blocks(&cut, 512, &mut bytes).unwrap();
            assert!(is_silent_padding(&bytes, ch, 512, frames as u64), "{frames}");
            if frames > 1 && frames % 505 != 0 {
                assert!(!is_silent_padding(&bytes, ch, 512, frames as u64 - 1), "{frames}");
            }
        }
    }
}
