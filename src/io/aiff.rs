//! AIFF and AIFF-C export, and the loop markers of AIFF files.
//!
//! Layout written (all integers big-endian, as the format requires):
//!
//! - `FORM` `AIFF` for integer PCM (`pcm-s8`, `pcm-s16`, `pcm-s24`: signed two's complement — 8-bit AIFF is signed,
//!   unlike 8-bit WAV); `FORM` `AIFC` for `float32`, with an `FVER` chunk (version 0xA2805140, AIFF-C's only
//!   version) and compression type `fl32`.
//! - `COMM`: channels, frames, sample size, and the sample rate as an 80-bit IEEE 754 extended float, written exactly
//!   (every integer rate up to 2^32 − 1 has an exact extended form: explicit integer bit, 63-bit fraction).
//! - With loops: `MARK` (two markers per loop: its start, and the position after its last frame — AIFF markers
//!   sit *between* frames, position 0 before the first) and `INST`, whose sustain loop refers to the first loop's
//!   markers and whose release loop to the second's (AIFF has room for two; further loops are not written).
//!   `INST` also holds the unity note as its base note, the full key (0–127) and velocity (1–127) range, gain 0.
//!   A forward loop (`loop_type` 0) is play mode 1 (forward); alternating (1) is mode 2 (forward/backward); AIFF
//!   has no backward mode, so other loop types are written as forward. `play_count` has no AIFF field.
//! - `SSND`: offset 0, block size 0, the interleaved samples, and a pad byte when its size is odd.
//!
//! Samples are converted as for WAV (see [`crate::io`]): NaN → 0, ±Inf → ±1, then [`pcm_code`].

use crate::audio::Clip;
use crate::error::{Error, Result};
use crate::io::{check_clip, ExportMeta, SampleLoop};
use crate::sample::pcm_code;
use crate::sample::sanitize;
use serde::{Deserialize, Serialize};

/// Sample encodings an AIFF export can use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum AiffEncoding {
    /// 8-bit signed PCM.
    PcmS8,
    /// 16-bit signed PCM (the default).
    #[default]
    PcmS16,
    /// 24-bit signed PCM.
    PcmS24,
    /// 32-bit IEEE float, in an AIFF-C file (compression type `fl32`).
    Float32,
}

impl AiffEncoding {
    /// Every encoding, in declaration order.
    pub const ALL: [AiffEncoding; 4] =
        [AiffEncoding::PcmS8, AiffEncoding::PcmS16, AiffEncoding::PcmS24, AiffEncoding::Float32];

    /// The name used in presets, e.g. `pcm-s16`.
    pub fn name(self) -> &'static str {
        match self {
            AiffEncoding::PcmS8 => "pcm-s8",
            AiffEncoding::PcmS16 => "pcm-s16",
            AiffEncoding::PcmS24 => "pcm-s24",
            AiffEncoding::Float32 => "float32",
        }
    }

    fn bytes_per_sample(self) -> u64 {
        match self {
            AiffEncoding::PcmS8 => 1,
            AiffEncoding::PcmS16 => 2,
            AiffEncoding::PcmS24 => 3,
            AiffEncoding::Float32 => 4,
        }
    }

    fn is_aifc(self) -> bool {
        self == AiffEncoding::Float32
    }
}

/// AIFF-C's version timestamp (the only one defined).
const AIFC_VERSION: u32 = 0xA280_5140;
/// The `fl32` compression name, a Pascal string (count byte + text, padded to an even length).
const FL32_NAME: &[u8] = b"32-bit float";

/// Bytes a Pascal string takes: count byte, text, pad to an even total.
fn pstring_len(n: usize) -> u64 {
    let l = 1 + n as u64;
    l + (l & 1)
}

fn put_pstring(out: &mut Vec<u8>, s: &[u8]) {
    out.push(s.len() as u8);
    out.extend_from_slice(s);
    if (1 + s.len()) % 2 == 1 {
        out.push(0);
    }
}

/// Marker names: `loop N start` / `loop N end`.
fn marker_name(i: usize, end: bool) -> String {
    format!("loop {} {}", i + 1, if end { "end" } else { "start" })
}

/// Loops written to `MARK`/`INST` (AIFF has room for a sustain and a release loop).
fn written_loops(meta: &ExportMeta) -> &[SampleLoop] {
    &meta.loops[..meta.loops.len().min(2)]
}

fn comm_len(enc: AiffEncoding) -> u64 {
    if enc.is_aifc() {
        18 + 4 + pstring_len(FL32_NAME.len())
    } else {
        18
    }
}

fn mark_len(meta: &ExportMeta) -> u64 {
    let loops = written_loops(meta);
    if loops.is_empty() {
        return 0;
    }
    let markers: u64 =
        (0..loops.len()).flat_map(|i| [false, true].map(|e| 6 + pstring_len(marker_name(i, e).len()))).sum();
    8 + 2 + markers
}

fn data_len(enc: AiffEncoding, frames: usize, channels: usize) -> u64 {
    (frames as u64).saturating_mul(channels as u64).saturating_mul(enc.bytes_per_sample())
}

/// Exact size in bytes of [`write_with`]'s output.
pub fn file_size_with(enc: AiffEncoding, frames: usize, channels: usize, meta: &ExportMeta) -> u64 {
    let data = data_len(enc, frames, channels);
    let fver = if enc.is_aifc() { 12 } else { 0 };
    let inst = if written_loops(meta).is_empty() { 0 } else { 8 + 20 };
    12 + fver + 8 + comm_len(enc) + mark_len(meta) + inst + 8 + 8 + data + (data & 1)
}

/// The sample rate as an 80-bit IEEE 754 extended float (sign, 15-bit exponent biased by 16383, 64-bit significand
/// with an explicit integer bit). Exact for every integer rate.
pub fn extended_rate(rate: u32) -> [u8; 10] {
    let mut out = [0u8; 10];
    if rate == 0 {
        return out;
    }
    let e = 31 - rate.leading_zeros(); // floor(log2(rate))
    let exponent = (16383 + e) as u16;
    let mantissa = (rate as u64) << (63 - e);
    out[0..2].copy_from_slice(&exponent.to_be_bytes());
    out[2..10].copy_from_slice(&mantissa.to_be_bytes());
    out
}

fn chunk(out: &mut Vec<u8>, id: &[u8; 4], len: u64) {
    out.extend_from_slice(id);
    out.extend_from_slice(&(len as u32).to_be_bytes());
}

/// Encodes a clip as AIFF (AIFF-C for float); `meta.loops` become `MARK` + `INST`. See the module docs.
pub fn write_with(clip: &Clip, enc: AiffEncoding, meta: &ExportMeta) -> Result<Vec<u8>> {
    check_clip(clip)?;
    meta.validate(clip.frames())?;
    let (ch, frames) = (clip.channel_count(), clip.frames());
    let size = file_size_with(enc, frames, ch, meta);
    if size > u32::MAX as u64 {
        return Err(Error::param("length", frames, "an AIFF file of at most 4 GiB"));
    }
    let data = data_len(enc, frames, ch);
    let mut out = Vec::with_capacity(size as usize);
    chunk(&mut out, b"FORM", size - 8);
    out.extend_from_slice(if enc.is_aifc() { b"AIFC" } else { b"AIFF" });
    if enc.is_aifc() {
        chunk(&mut out, b"FVER", 4);
        out.extend_from_slice(&AIFC_VERSION.to_be_bytes());
    }
    chunk(&mut out, b"COMM", comm_len(enc));
    out.extend_from_slice(&(ch as u16).to_be_bytes());
    out.extend_from_slice(&(frames as u32).to_be_bytes());
    out.extend_from_slice(&((enc.bytes_per_sample() * 8) as u16).to_be_bytes());
    out.extend_from_slice(&extended_rate(clip.sample_rate));
    if enc.is_aifc() {
        out.extend_from_slice(b"fl32");
        put_pstring(&mut out, FL32_NAME);
    }
    let loops = written_loops(meta);
    if !loops.is_empty() {
        chunk(&mut out, b"MARK", mark_len(meta) - 8);
        out.extend_from_slice(&((loops.len() * 2) as u16).to_be_bytes());
        for (i, l) in loops.iter().enumerate() {
            for (end, pos) in [(false, l.start), (true, l.end + 1)] {
                let id = (2 * i + 1 + end as usize) as u16;
                out.extend_from_slice(&id.to_be_bytes());
                out.extend_from_slice(&pos.to_be_bytes());
                put_pstring(&mut out, marker_name(i, end).as_bytes());
            }
        }
        chunk(&mut out, b"INST", 20);
        out.extend_from_slice(&[meta.unity_note, 0, 0, 127, 1, 127]);
        out.extend_from_slice(&0i16.to_be_bytes()); // gain, dB
        for i in 0..2 {
            let (mode, begin, end) = match loops.get(i) {
                Some(l) => (if l.loop_type == 1 { 2u16 } else { 1 }, 2 * i as u16 + 1, 2 * i as u16 + 2),
                None => (0, 0, 0),
            };
            for v in [mode, begin, end] {
                out.extend_from_slice(&v.to_be_bytes());
            }
        }
    }
    chunk(&mut out, b"SSND", 8 + data);
    out.extend_from_slice(&[0; 8]); // offset, block size
    for i in 0..frames {
        for c in &clip.channels {
            let x = sanitize(c[i]);
            match enc {
                AiffEncoding::PcmS8 => out.push(pcm_code(x, 8) as i8 as u8),
                AiffEncoding::PcmS16 => out.extend_from_slice(&(pcm_code(x, 16) as i16).to_be_bytes()),
                AiffEncoding::PcmS24 => out.extend_from_slice(&pcm_code(x, 24).to_be_bytes()[1..]),
                AiffEncoding::Float32 => out.extend_from_slice(&x.to_be_bytes()),
            }
        }
    }
    if data & 1 == 1 {
        out.push(0);
    }
    debug_assert_eq!(out.len() as u64, size);
    Ok(out)
}

fn be16(b: &[u8], at: usize) -> Option<u16> {
    Some(u16::from_be_bytes(b.get(at..at + 2)?.try_into().ok()?))
}

fn be32(b: &[u8], at: usize) -> Option<u32> {
    Some(u32::from_be_bytes(b.get(at..at + 4)?.try_into().ok()?))
}

/// The sustain loop of an AIFF or AIFF-C file, frames `start..end` (end exclusive: the end marker's position), from
/// its `INST` chunk and the `MARK` markers it refers to. `Ok(None)`: no `INST`, no sustain loop (play mode 0), or
/// an empty loop. Errors describe a malformed `MARK`/`INST` chunk or a loop that refers to a missing marker.
pub fn read_loops(bytes: &[u8]) -> Result<Option<(u64, u64)>> {
    let bad = |what: &str| Error::format(format!("AIFF {what}"));
    if bytes.len() < 12 || &bytes[0..4] != b"FORM" || !(&bytes[8..12] == b"AIFF" || &bytes[8..12] == b"AIFC") {
        return Err(bad("header missing"));
    }
    let mut pos = 12usize;
    let mut markers: Vec<(u16, u32)> = Vec::new();
    let mut sustain: Option<(u16, u16, u16)> = None;
    while pos + 8 <= bytes.len() {
        let id = &bytes[pos..pos + 4];
        let len = be32(bytes, pos + 4).ok_or_else(|| bad("chunk header cut off"))? as usize;
        let body_start = pos + 8;
        let body = bytes.get(body_start..body_start.saturating_add(len));
        match id {
            b"MARK" => {
                let body = body.ok_or_else(|| bad("`MARK` chunk runs past the end of the file"))?;
                let n = be16(body, 0).ok_or_else(|| bad("`MARK` chunk too short"))?;
                let mut at = 2usize;
                for _ in 0..n {
                    let id = be16(body, at).ok_or_else(|| bad("`MARK` chunk too short for its markers"))?;
                    let p = be32(body, at + 2).ok_or_else(|| bad("`MARK` chunk too short for its markers"))?;
                    let name = *body.get(at + 6).ok_or_else(|| bad("`MARK` chunk too short for its markers"))?;
                    at += 6 + pstring_len(name as usize) as usize;
                    markers.push((id, p));
                }
            }
            b"INST" => {
                let body = body.ok_or_else(|| bad("`INST` chunk runs past the end of the file"))?;
                let f = |at| be16(body, at).ok_or_else(|| bad("`INST` chunk shorter than 20 bytes"));
                sustain = Some((f(8)?, f(10)?, f(12)?));
            }
            _ => {}
        }
        pos = body_start.saturating_add(len).saturating_add(len & 1);
    }
    let Some((mode, begin, end)) = sustain else { return Ok(None) };
    if mode == 0 {
        return Ok(None);
    }
    let find = |id: u16| {
        markers
            .iter()
            .find(|m| m.0 == id)
            .map(|m| m.1 as u64)
            .ok_or_else(|| bad(&format!("sustain loop refers to marker {id}, which `MARK` does not have")))
    };
    let (s, e) = (find(begin)?, find(end)?);
    Ok((s < e).then_some((s, e)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extended_rates() {
        // IEEE 754 double-extended (the AIFF specification's 80-bit sample rate): 44,100 = 0xAC44 = 1.xxx × 2^15,
        // so the exponent is 16383 + 15 = 0x400E and the significand 0xAC44 << 48 — the bytes 40 0E AC 44 found in
        // every 44.1 kHz AIFF. libsndfile reading our files' rates is checked in tests/formats_reference.rs.
        assert_eq!(extended_rate(44_100), [0x40, 0x0E, 0xAC, 0x44, 0, 0, 0, 0, 0, 0]);
        assert_eq!(extended_rate(8_000), [0x40, 0x0B, 0xFA, 0, 0, 0, 0, 0, 0, 0]);
        assert_eq!(extended_rate(48_000), [0x40, 0x0E, 0xBB, 0x80, 0, 0, 0, 0, 0, 0]);
        assert_eq!(extended_rate(1), [0x3F, 0xFF, 0x80, 0, 0, 0, 0, 0, 0, 0]);
    }

    #[test]
    fn sizes_are_exact_and_loops_read_back() {
        let clip = Clip::new(22_050, vec![vec![0.25; 101], vec![-0.5; 101]]).unwrap();
        for enc in AiffEncoding::ALL {
            for loops in [vec![], vec![SampleLoop::forward(10, 90)], vec![SampleLoop::forward(1, 2); 3]] {
                let meta = ExportMeta { loops, unity_note: 60 };
                let bytes = write_with(&clip, enc, &meta).unwrap();
                assert_eq!(bytes.len() as u64, file_size_with(enc, 101, 2, &meta), "{enc:?}");
                let want = meta.loops.first().map(|l| (l.start as u64, l.end as u64 + 1));
                assert_eq!(read_loops(&bytes).unwrap(), want);
            }
        }
    }
}
