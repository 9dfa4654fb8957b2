//! The WAV writer.

use super::*;
use crate::audio::Clip;
use crate::codec::g711::{linear_to_alaw, linear_to_ulaw};
use crate::codec::ima_adpcm as adpcm;
use crate::codec::{g721, gsm610, ms_adpcm};
use crate::error::{Error, Result};
use crate::io::{check_clip, ExportMeta, WavEncoding};
use crate::sample::pcm_code;
use crate::sample::sanitize;

/// Bytes per sample of the byte-aligned encodings (ADPCM: 0).
fn bytes_per_sample(enc: WavEncoding) -> usize {
    match enc {
        WavEncoding::PcmU8 | WavEncoding::Mulaw | WavEncoding::Alaw => 1,
        WavEncoding::PcmS16 => 2,
        WavEncoding::PcmS24 => 3,
        WavEncoding::PcmS32 | WavEncoding::Float32 => 4,
        WavEncoding::ImaAdpcm | WavEncoding::MsAdpcm | WavEncoding::G721 | WavEncoding::Gsm610 => 0,
    }
}

/// Body size of the `fmt ` chunk and whether a `fact` chunk is written.
fn fmt_layout(enc: WavEncoding) -> (u32, bool) {
    match enc {
        WavEncoding::PcmU8 | WavEncoding::PcmS16 | WavEncoding::PcmS24 | WavEncoding::PcmS32 => (16, false),
        WavEncoding::Float32 | WavEncoding::Mulaw | WavEncoding::Alaw => (18, true),
        WavEncoding::ImaAdpcm | WavEncoding::G721 | WavEncoding::Gsm610 => (20, true),
        // cbSize 32: samplesPerBlock, the coefficient count and the seven standard pairs.
        WavEncoding::MsAdpcm => (50, true),
    }
}

fn smpl_size(meta: &ExportMeta) -> u64 {
    if meta.loops.is_empty() {
        0
    } else {
        8 + 36 + 24 * meta.loops.len() as u64
    }
}

/// The ADPCM block align to use, checked against the channel count.
fn adpcm_block_align(block_align: Option<usize>, channels: usize) -> Result<(usize, usize)> {
    let ba = block_align.unwrap_or_else(|| adpcm::default_block_align(channels));
    Ok((ba, adpcm::samples_per_block(ba, channels)?))
}

/// The Microsoft ADPCM block align to use, checked against the channel count.
fn ms_block_align(block_align: Option<usize>, channels: usize) -> Result<(usize, usize)> {
    let ba = block_align.unwrap_or_else(|| ms_adpcm::default_block_align(channels));
    Ok((ba, ms_adpcm::samples_per_block(ba, channels)?))
}

/// G.721 holds one channel (as libsndfile, the usual reader of format 0x0040, requires).
fn g721_channels(channels: usize) -> Result<()> {
    if channels != 1 {
        return Err(Error::param(
            "channels",
            channels,
            "1: a G.721 WAV holds one channel (set prep \"channels\": {\"mono\": \"sum-3db\"})",
        ));
    }
    Ok(())
}

/// GSM 06.10 holds one channel (the WAV49 layout has no other).
fn gsm_channels(channels: usize) -> Result<()> {
    if channels != 1 {
        return Err(Error::param(
            "channels",
            channels,
            "1: a GSM 6.10 WAV holds one channel (set prep \"channels\": {\"mono\": \"sum-3db\"})",
        ));
    }
    Ok(())
}

/// Size of the `data` chunk's body.
fn data_size(enc: WavEncoding, block_align: Option<usize>, frames: usize, channels: usize) -> Result<u64> {
    if enc == WavEncoding::ImaAdpcm {
        let (ba, spb) = adpcm_block_align(block_align, channels)?;
        Ok(adpcm::block_count(frames as u64, spb) * ba as u64)
    } else if enc == WavEncoding::MsAdpcm {
        let (ba, spb) = ms_block_align(block_align, channels)?;
        Ok(ms_adpcm::block_count(frames as u64, spb) * ba as u64)
    } else if block_align.is_some() {
        Err(Error::param("block_align", block_align.unwrap_or(0), "only with encoding \"ima-adpcm\" or \"ms-adpcm\""))
    } else if enc == WavEncoding::G721 {
        g721_channels(channels)?;
        Ok((frames as u64).div_ceil(g721::SAMPLES_PER_BLOCK as u64) * g721::BYTES_PER_BLOCK as u64)
    } else if enc == WavEncoding::Gsm610 {
        gsm_channels(channels)?;
        Ok(gsm610::block_count(frames as u64) * gsm610::BLOCK_BYTES as u64)
    } else {
        Ok((frames as u64).saturating_mul(channels as u64).saturating_mul(bytes_per_sample(enc) as u64))
    }
}

/// Exact size in bytes of [`write()`]'s output.
pub fn file_size(enc: WavEncoding, frames: usize, channels: usize) -> u64 {
    file_size_with(enc, None, frames, channels, &ExportMeta::default()).unwrap_or(0)
}

/// Exact size in bytes of [`write_with`]'s output; errors as `write_with` for a bad `block_align`.
pub fn file_size_with(
    enc: WavEncoding,
    block_align: Option<usize>,
    frames: usize,
    channels: usize,
    meta: &ExportMeta,
) -> Result<u64> {
    let data = data_size(enc, block_align, frames, channels)?;
    let (fmt, fact) = fmt_layout(enc);
    Ok(12 + 8 + fmt as u64 + if fact { 12 } else { 0 } + 8 + data + (data & 1) + smpl_size(meta))
}

/// Encodes a clip as a WAV file with no metadata and the default ADPCM block size.
pub fn write(clip: &Clip, enc: WavEncoding) -> Result<Vec<u8>> {
    write_with(clip, enc, None, &ExportMeta::default())
}

fn chunk_header(out: &mut Vec<u8>, id: &[u8; 4], len: u32) {
    out.extend_from_slice(id);
    out.extend_from_slice(&len.to_le_bytes());
}

fn u16le(out: &mut Vec<u8>, v: u16) {
    out.extend_from_slice(&v.to_le_bytes());
}

fn u32le(out: &mut Vec<u8>, v: u32) {
    out.extend_from_slice(&v.to_le_bytes());
}

/// The header of a WAV file of `frames` frames: RIFF, `fmt `, `fact` where the encoding has one, and the `data`
/// chunk's header. [`write_with`] and the streaming writer share it.
pub(super) fn header(
    enc: WavEncoding,
    block_align: Option<usize>,
    frames: usize,
    ch: usize,
    rate: u32,
    meta: &ExportMeta,
) -> Result<Vec<u8>> {
    let size = file_size_with(enc, block_align, frames, ch, meta)?;
    if size > u32::MAX as u64 {
        return Err(Error::param("length", frames, "a WAV file of at most 4 GiB"));
    }
    let fact_frames = u32::try_from(frames).map_err(|_| Error::param("length", frames, "at most 2^32 − 1 frames"))?;
    let data_len = data_size(enc, block_align, frames, ch)? as u32;
    let (fmt_len, fact) = fmt_layout(enc);
    let mut out = Vec::with_capacity(64);
    out.extend_from_slice(b"RIFF");
    u32le(&mut out, (size - 8) as u32);
    out.extend_from_slice(b"WAVE");
    chunk_header(&mut out, b"fmt ", fmt_len);
    let tag = match enc {
        WavEncoding::Float32 => WAVE_FORMAT_IEEE_FLOAT,
        WavEncoding::Mulaw => WAVE_FORMAT_MULAW,
        WavEncoding::Alaw => WAVE_FORMAT_ALAW,
        WavEncoding::ImaAdpcm => WAVE_FORMAT_IMA_ADPCM,
        WavEncoding::MsAdpcm => WAVE_FORMAT_MS_ADPCM,
        WavEncoding::G721 => WAVE_FORMAT_G721_ADPCM,
        WavEncoding::Gsm610 => WAVE_FORMAT_GSM610,
        _ => WAVE_FORMAT_PCM,
    };
    u16le(&mut out, tag);
    u16le(&mut out, ch as u16);
    u32le(&mut out, rate);
    if enc == WavEncoding::ImaAdpcm {
        let (ba, spb) = adpcm_block_align(block_align, ch)?;
        // Average bytes per second, as libsndfile and the Microsoft codec compute it.
        u32le(&mut out, (rate as u64 * ba as u64 / spb as u64) as u32);
        u16le(&mut out, ba as u16);
        u16le(&mut out, 4);
        u16le(&mut out, 2);
        u16le(&mut out, spb as u16);
    } else if enc == WavEncoding::MsAdpcm {
        let (ba, spb) = ms_block_align(block_align, ch)?;
        u32le(&mut out, (rate as u64 * ba as u64 / spb as u64) as u32);
        u16le(&mut out, ba as u16);
        u16le(&mut out, 4);
        u16le(&mut out, 32);
        u16le(&mut out, spb as u16);
        u16le(&mut out, 7);
        for k in 0..7 {
            u16le(&mut out, ms_adpcm::COEF1[k] as i16 as u16);
            u16le(&mut out, ms_adpcm::COEF2[k] as i16 as u16);
        }
    } else if enc == WavEncoding::G721 {
        // 4 bits per sample; the block is the 60-byte (120-sample) unit the data is padded to; cbSize 2 and an
        // auxiliary block size of 0, as libsndfile writes.
        u32le(&mut out, rate / 2);
        u16le(&mut out, g721::BYTES_PER_BLOCK as u16);
        u16le(&mut out, 4);
        u16le(&mut out, 2);
        u16le(&mut out, 0);
    } else if enc == WavEncoding::Gsm610 {
        // As libsndfile and the Microsoft codec write it: 65-byte blocks of 320 samples, 0 bits per sample, cbSize 2
        // and samplesPerBlock.
        u32le(&mut out, (rate as u64 * gsm610::BLOCK_BYTES as u64 / gsm610::SAMPLES_PER_BLOCK as u64) as u32);
        u16le(&mut out, gsm610::BLOCK_BYTES as u16);
        u16le(&mut out, 0);
        u16le(&mut out, 2);
        u16le(&mut out, gsm610::SAMPLES_PER_BLOCK as u16);
    } else {
        let bps = bytes_per_sample(enc);
        u32le(&mut out, rate * (ch * bps) as u32);
        u16le(&mut out, (ch * bps) as u16);
        u16le(&mut out, (bps * 8) as u16);
        if fmt_len == 18 {
            u16le(&mut out, 0);
        }
    }
    if fact {
        chunk_header(&mut out, b"fact", 4);
        u32le(&mut out, fact_frames);
    }
    chunk_header(&mut out, b"data", data_len);
    Ok(out)
}

/// Appends the sample bytes of a block of frames (one slice per channel) in a byte-aligned encoding.
pub(super) fn body_append<C: AsRef<[f32]>>(enc: WavEncoding, block: &[C], out: &mut Vec<u8>) {
    let frames = block.first().map_or(0, |c| c.as_ref().len());
    let ch = block.len();
    // One pass per channel into the interleaved bytes, with the encoding chosen once (not per sample).
    fn each<C: AsRef<[f32]>, const W: usize>(
        block: &[C],
        frames: usize,
        out: &mut Vec<u8>,
        f: impl Fn(f32) -> [u8; W],
    ) {
        let start = out.len();
        let ch = block.len();
        out.resize(start + frames * ch * W, 0);
        let body = &mut out[start..];
        for (c, x) in block.iter().enumerate() {
            let at = c * W;
            for (fr, &x) in body.chunks_exact_mut(ch * W).zip(&x.as_ref()[..frames]) {
                fr[at..at + W].copy_from_slice(&f(sanitize(x)));
            }
        }
    }
    if ch == 0 {
        return;
    }
    match enc {
        // 8-bit WAV samples are unsigned: code + 128.
        WavEncoding::PcmU8 => each(block, frames, out, |x| [(pcm_code(x, 8) + 128) as u8]),
        WavEncoding::PcmS16 => each(block, frames, out, |x| (pcm_code(x, 16) as i16).to_le_bytes()),
        WavEncoding::PcmS24 => each(block, frames, out, |x| {
            let [a, b, c, _] = pcm_code(x, 24).to_le_bytes();
            [a, b, c]
        }),
        WavEncoding::PcmS32 => each(block, frames, out, |x| pcm_code(x, 32).to_le_bytes()),
        WavEncoding::Float32 => each(block, frames, out, f32::to_le_bytes),
        WavEncoding::Mulaw => each(block, frames, out, |x| [linear_to_ulaw(pcm_code(x, 16) as i16)]),
        WavEncoding::Alaw => each(block, frames, out, |x| [linear_to_alaw(pcm_code(x, 16) as i16)]),
        WavEncoding::ImaAdpcm | WavEncoding::MsAdpcm | WavEncoding::G721 | WavEncoding::Gsm610 => {}
    }
}

/// Size of the `data` chunk's body for a byte-aligned encoding.
pub(super) fn data_size_of(enc: WavEncoding, frames: usize, ch: usize) -> u64 {
    (frames * ch * bytes_per_sample(enc)) as u64
}

/// What follows the samples: the pad byte of an odd-sized `data` chunk, and the `smpl` chunk when there are loops.
pub(super) fn trailer(data_len: u64, meta: &ExportMeta, rate: u32) -> Vec<u8> {
    let mut out = Vec::new();
    if data_len & 1 == 1 {
        out.push(0);
    }
    if !meta.loops.is_empty() {
        chunk_header(&mut out, b"smpl", 36 + 24 * meta.loops.len() as u32);
        u32le(&mut out, 0); // manufacturer
        u32le(&mut out, 0); // product
        u32le(&mut out, 1_000_000_000 / rate); // sample period in nanoseconds
        u32le(&mut out, meta.unity_note as u32);
        u32le(&mut out, 0); // pitch fraction
        u32le(&mut out, 0); // SMPTE format
        u32le(&mut out, 0); // SMPTE offset
        u32le(&mut out, meta.loops.len() as u32);
        u32le(&mut out, 0); // sampler data bytes
        for (i, l) in meta.loops.iter().enumerate() {
            u32le(&mut out, i as u32); // cue point id
            u32le(&mut out, l.loop_type);
            u32le(&mut out, l.start);
            u32le(&mut out, l.end);
            u32le(&mut out, 0); // fraction
            u32le(&mut out, l.play_count);
        }
    }
    out
}

/// Encodes a clip: `block_align` is for IMA ADPCM only (`None`: 256 × channels); `meta.loops` become a `smpl`
/// chunk. See the [module docs](super) for the layout.
pub fn write_with(clip: &Clip, enc: WavEncoding, block_align: Option<usize>, meta: &ExportMeta) -> Result<Vec<u8>> {
    check_clip(clip)?;
    meta.validate(clip.frames())?;
    let (ch, frames) = (clip.channel_count(), clip.frames());
    let mut out = header(enc, block_align, frames, ch, clip.sample_rate, meta)?;
    let data_len = data_size(enc, block_align, frames, ch)?;
    out.reserve(data_len as usize + 128);
    if !enc.is_byte_aligned() {
        if enc == WavEncoding::G721 {
            crate::stages::codec::CodecName::G721.check_rate(clip.sample_rate)?;
        } else if enc == WavEncoding::Gsm610 {
            crate::stages::codec::CodecName::Gsm610.check_rate(clip.sample_rate)?;
        }
        let codes: Vec<Vec<i16>> =
            clip.channels.iter().map(|c| c.iter().map(|&x| pcm_code(sanitize(x), 16) as i16).collect()).collect();
        match enc {
            WavEncoding::MsAdpcm => {
                ms_adpcm::encode_blocks(&codes, ms_block_align(block_align, ch)?.0, &mut out)?;
            }
            WavEncoding::G721 => g721::encode_stream(&codes[0], &mut out),
            WavEncoding::Gsm610 => gsm610::encode_blocks(&codes[0], &mut out),
            _ => adpcm::encode_blocks(&codes, block_align.unwrap_or_else(|| adpcm::default_block_align(ch)), &mut out)?,
        }
    } else {
        body_append(enc, &clip.channels, &mut out);
    }
    out.extend_from_slice(&trailer(data_len, meta, clip.sample_rate));
    debug_assert_eq!(Ok(out.len() as u64), file_size_with(enc, block_align, frames, ch, meta));
    Ok(out)
}
