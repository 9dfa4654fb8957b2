//! WAV (RIFF/WAVE) reading and writing.
//!
//! Written by hand: one strict parser for every format tag the project supports, whose errors say exactly what is
//! wrong and which never allocates more than the file's real size suggests.

use super::WavEncoding;
use crate::audio::{Clip, MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::error::{Error, Result};
use crate::quantize::pcm_code;

const WAVE_FORMAT_PCM: u16 = 1;
const WAVE_FORMAT_IEEE_FLOAT: u16 = 3;

fn bytes_per_sample(enc: WavEncoding) -> usize {
    match enc {
        WavEncoding::PcmU8 => 1,
        WavEncoding::PcmS16 => 2,
        WavEncoding::PcmS24 => 3,
        WavEncoding::PcmS32 | WavEncoding::Float32 => 4,
    }
}

/// Exact size in bytes of [`write`]'s output.
pub fn file_size(enc: WavEncoding, frames: usize, channels: usize) -> u64 {
    let data = (frames * channels * bytes_per_sample(enc)) as u64;
    12 + 8 + 16 + 8 + data + (data & 1)
}

/// Encodes a clip as a canonical WAV file (RIFF header, `fmt ` chunk of 16 bytes, `data` chunk).
pub fn write(clip: &Clip, enc: WavEncoding) -> Result<Vec<u8>> {
    let ch = clip.channel_count();
    let bps = bytes_per_sample(enc);
    let size = file_size(enc, clip.frames(), ch);
    if size > u32::MAX as u64 {
        return Err(Error::param("length", clip.frames(), "a WAV file of at most 4 GiB"));
    }
    let data_len = (clip.frames() * ch * bps) as u32;
    let mut out = Vec::with_capacity(size as usize);
    out.extend_from_slice(b"RIFF");
    out.extend_from_slice(&((size - 8) as u32).to_le_bytes());
    out.extend_from_slice(b"WAVE");
    out.extend_from_slice(b"fmt ");
    out.extend_from_slice(&16u32.to_le_bytes());
    let tag = if enc == WavEncoding::Float32 { WAVE_FORMAT_IEEE_FLOAT } else { WAVE_FORMAT_PCM };
    out.extend_from_slice(&tag.to_le_bytes());
    out.extend_from_slice(&(ch as u16).to_le_bytes());
    out.extend_from_slice(&clip.sample_rate.to_le_bytes());
    out.extend_from_slice(&(clip.sample_rate * (ch * bps) as u32).to_le_bytes());
    out.extend_from_slice(&((ch * bps) as u16).to_le_bytes());
    out.extend_from_slice(&((bps * 8) as u16).to_le_bytes());
    out.extend_from_slice(b"data");
    out.extend_from_slice(&data_len.to_le_bytes());
    for i in 0..clip.frames() {
        for c in &clip.channels {
            let x = crate::chain::sanitize(c[i]);
            match enc {
                // 8-bit WAV samples are unsigned: code + 128.
                WavEncoding::PcmU8 => out.push((pcm_code(x, 8) + 128) as u8),
                WavEncoding::PcmS16 => out.extend_from_slice(&(pcm_code(x, 16) as i16).to_le_bytes()),
                WavEncoding::PcmS24 => out.extend_from_slice(&pcm_code(x, 24).to_le_bytes()[..3]),
                WavEncoding::PcmS32 => out.extend_from_slice(&pcm_code(x, 32).to_le_bytes()),
                WavEncoding::Float32 => out.extend_from_slice(&x.to_le_bytes()),
            }
        }
    }
    if data_len & 1 == 1 {
        out.push(0);
    }
    Ok(out)
}

fn u16_at(b: &[u8], i: usize) -> u16 {
    u16::from_le_bytes([b[i], b[i + 1]])
}

fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]])
}

/// Decodes a WAV file (PCM 8/16/24/32-bit and IEEE float 32/64).
pub fn read(bytes: &[u8]) -> Result<Clip> {
    if bytes.len() < 12 || &bytes[0..4] != b"RIFF" || &bytes[8..12] != b"WAVE" {
        return Err(Error::format("not a WAV file (no RIFF/WAVE header)"));
    }
    let mut pos = 12;
    let mut fmt: Option<(u16, usize, u32, usize)> = None;
    let mut data: Option<&[u8]> = None;
    while pos + 8 <= bytes.len() {
        let id = &bytes[pos..pos + 4];
        let len = u32_at(bytes, pos + 4) as usize;
        let body_start = pos + 8;
        let body_end = body_start.checked_add(len).filter(|&e| e <= bytes.len());
        match id {
            b"fmt " => {
                let end = body_end.ok_or_else(|| Error::format("`fmt ` chunk runs past the end of the file"))?;
                let b = &bytes[body_start..end];
                if b.len() < 16 {
                    return Err(Error::format("`fmt ` chunk shorter than 16 bytes"));
                }
                fmt = Some((u16_at(b, 0), u16_at(b, 2) as usize, u32_at(b, 4), u16_at(b, 14) as usize));
            }
            b"data" => {
                // A truncated data chunk is read as far as it goes.
                data = Some(&bytes[body_start..body_end.unwrap_or(bytes.len())]);
            }
            _ => {}
        }
        pos = match body_end {
            Some(e) => e + (len & 1),
            None => break,
        };
    }
    let (tag, channels, rate, bits) = fmt.ok_or_else(|| Error::format("no `fmt ` chunk"))?;
    let data = data.ok_or_else(|| Error::format("no `data` chunk"))?;
    if channels == 0 || channels > MAX_CHANNELS {
        return Err(Error::format(format!("{channels} channels (1 to {MAX_CHANNELS} supported)")));
    }
    if rate == 0 || rate > MAX_SAMPLE_RATE {
        return Err(Error::format(format!("sample rate {rate} Hz (1 to {MAX_SAMPLE_RATE} supported)")));
    }
    let decode: fn(&[u8]) -> f32 = match (tag, bits) {
        (WAVE_FORMAT_PCM, 8) => |b| (b[0] as f32 - 128.0) / 128.0,
        (WAVE_FORMAT_PCM, 16) => |b| i16::from_le_bytes([b[0], b[1]]) as f32 / 32768.0,
        (WAVE_FORMAT_PCM, 24) => |b| (i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8) as f32 / 8_388_608.0,
        (WAVE_FORMAT_PCM, 32) => |b| (i32::from_le_bytes([b[0], b[1], b[2], b[3]]) as f64 / 2_147_483_648.0) as f32,
        (WAVE_FORMAT_IEEE_FLOAT, 32) => |b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]),
        (WAVE_FORMAT_IEEE_FLOAT, 64) => |b| f64::from_le_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]) as f32,
        _ => return Err(Error::format(format!("unsupported format tag {tag:#06x} with {bits} bits per sample"))),
    };
    let frame_bytes = channels * bits / 8;
    let frames = data.len() / frame_bytes;
    let mut out = vec![Vec::with_capacity(frames); channels];
    for frame in data.chunks_exact(frame_bytes) {
        for (c, s) in out.iter_mut().zip(frame.chunks_exact(bits / 8)) {
            c.push(decode(s));
        }
    }
    Clip::new(rate, out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pcm_round_trips_exactly() {
        for enc in [WavEncoding::PcmU8, WavEncoding::PcmS16, WavEncoding::PcmS24, WavEncoding::Float32] {
            let bits = bytes_per_sample(enc) as u32 * 8;
            let scale = (1u64 << (bits - 1)) as f32;
            let samples: Vec<f32> = [-1.0, -0.5, 0.0, 0.25, (scale - 1.0) / scale].to_vec();
            let clip = Clip::new(11_025, vec![samples.clone(), samples.iter().map(|s| -s).collect()]).unwrap();
            let bytes = write(&clip, enc).unwrap();
            assert_eq!(bytes.len() as u64, file_size(enc, 5, 2));
            let back = read(&bytes).unwrap();
            assert_eq!(back.sample_rate, 11_025);
            assert_eq!(back.channels[0], samples, "{enc:?}");
        }
    }
}
