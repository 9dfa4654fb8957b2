//! Reading AIFF and AIFF-C samples, on every platform: the page's wasm reads AIFF with this (the CLI reads AIFF
//! through `symphonia`, in `decode`, which would add over 100 kB gzipped to the wasm — see DEVELOPERS.md). It gives
//! exactly the floats `symphonia` gives for the same file (checked in `tests/formats_reference.rs`), so a preset
//! renders to the same bytes in the page and in the CLI.
//!
//! Layout read (big-endian throughout): `FORM` + size + `AIFF` or `AIFC`, then chunks (id, u32 size, body, a pad
//! byte after an odd-sized body):
//! - `COMM`: channels (u16), frames (u32), sample size in bits (u16), the rate as an 80-bit extended float (its
//!   integer part is the rate, as `symphonia` reads it); AIFF-C adds a compression type and its Pascal-string name.
//! - `SSND`: offset (u32, bytes to skip), block size (u32, must be 0), then the interleaved frames.
//!
//! Encodings: integer PCM in 1–4 byte containers (AIFF, AIFF-C `NONE`/`twos`/`in24`/`in32`: big-endian signed;
//! `sowt`/`23ni`: little-endian; `raw `: 8-bit unsigned), `fl32`/`fl64` (IEEE float), `ulaw`/`alaw` (G.711).
//! An integer sample is its container's value over 2^(8·bytes − 1), so the low bits of a left-justified 12- or
//! 20-bit sample come along as they are (zero in a well-formed file); a 64-bit float is rounded once to f32.
//!
//! Damage: a missing `COMM` or `SSND`, an unknown compression type, sizes that do not fit, or fewer frames than
//! `COMM` declares are errors naming the problem; nothing partial is returned. Allocation is bounded by the bytes
//! actually present (and by the caller's sample limit, checked before allocating).

use crate::audio::{Clip, MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::codec::g711::{alaw_to_linear, ulaw_to_linear};
use crate::error::{Error, Result};

/// How the samples of a file are stored.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Coding {
    /// Signed integers of 1–4 bytes; `true` = little-endian.
    Int {
        bytes: usize,
        little: bool,
    },
    /// 8-bit unsigned (offset 128).
    U8,
    F32,
    F64,
    Ulaw,
    Alaw,
}

impl Coding {
    fn bytes(self) -> usize {
        match self {
            Coding::Int { bytes, .. } => bytes,
            Coding::U8 | Coding::Ulaw | Coding::Alaw => 1,
            Coding::F32 => 4,
            Coding::F64 => 8,
        }
    }
}

/// What [`read`] found besides the samples.
#[derive(Debug, Clone, PartialEq)]
pub struct AiffInfo {
    /// For people, e.g. `AIFF, 16-bit PCM` or `AIFF-C fl32, 32-bit float`.
    pub format: String,
}

fn bad(what: impl AsRef<str>) -> Error {
    Error::format(format!("AIFF: {}", what.as_ref()))
}

fn be16(b: &[u8], at: usize) -> Option<u16> {
    Some(u16::from_be_bytes(b.get(at..at + 2)?.try_into().ok()?))
}

fn be32(b: &[u8], at: usize) -> Option<u32> {
    Some(u32::from_be_bytes(b.get(at..at + 4)?.try_into().ok()?))
}

/// The integer part of an 80-bit IEEE 754 extended float (sign, 15-bit exponent, 64-bit significand with an
/// explicit integer bit); `None` for a negative value, infinity or NaN.
fn extended_to_u64(b: &[u8]) -> Option<u64> {
    let se = be16(b, 0)?;
    let mant = u64::from_be_bytes(b.get(2..10)?.try_into().ok()?);
    let exp = (se & 0x7fff) as i32;
    if se & 0x8000 != 0 && mant != 0 || exp == 0x7fff {
        return None;
    }
    // value = mant × 2^(exp − 16383 − 63)
    let shift = exp - 16383 - 63;
    Some(match shift {
        s if s >= 0 => mant.checked_shl(s as u32).filter(|v| v >> s == mant)?,
        s if s > -64 => mant >> (-s),
        _ => 0,
    })
}

/// Reads an AIFF or AIFF-C file's samples. `max_samples` bounds channels × frames (checked before allocating).
pub fn read(bytes: &[u8], max_samples: u64) -> Result<(Clip, AiffInfo)> {
    if bytes.len() < 12 || &bytes[0..4] != b"FORM" {
        return Err(bad("not an AIFF file (no `FORM` header)"));
    }
    let aifc = match &bytes[8..12] {
        b"AIFF" => false,
        b"AIFC" => true,
        _ => return Err(bad("the `FORM` is neither `AIFF` nor `AIFC`")),
    };
    let mut comm: Option<(usize, u32, u64, Coding, String)> = None;
    let mut ssnd: Option<&[u8]> = None;
    let mut pos = 12usize;
    while pos + 8 <= bytes.len() {
        let id = &bytes[pos..pos + 4];
        let len = be32(bytes, pos + 4).unwrap_or(0) as usize;
        let start = pos + 8;
        let end = start.saturating_add(len);
        match id {
            b"COMM" => {
                let body =
                    bytes.get(start..end).ok_or_else(|| bad("the `COMM` chunk runs past the end of the file"))?;
                if body.len() < 18 || aifc && body.len() < 22 {
                    return Err(bad("the `COMM` chunk is too short"));
                }
                let channels = be16(body, 0).unwrap_or(0) as usize;
                let frames = be32(body, 2).unwrap_or(0);
                let bits = be16(body, 6).unwrap_or(0);
                let rate = extended_to_u64(&body[8..18]).ok_or_else(|| bad("the sample rate is not a number"))?;
                let (coding, name) = coding(aifc.then(|| &body[18..22]), bits)?;
                comm = Some((channels, frames, rate, coding, name));
            }
            b"SSND" => {
                let body = bytes.get(start..end.min(bytes.len())).unwrap_or(&[]);
                if len < 8 || body.len() < 8 {
                    return Err(bad("the `SSND` chunk is too short"));
                }
                let offset = be32(body, 0).unwrap_or(0) as usize;
                if be32(body, 4) != Some(0) {
                    return Err(bad("block-aligned sound data (a non-zero `SSND` block size) is not supported"));
                }
                if offset > len - 8 {
                    return Err(bad("the `SSND` offset points past its chunk"));
                }
                ssnd = Some(body.get(8 + offset..).unwrap_or(&[]));
            }
            _ => {}
        }
        pos = end.saturating_add(len & 1);
    }
    let (channels, frames, rate, coding, name) = comm.ok_or_else(|| bad("no `COMM` chunk"))?;
    if channels == 0 || channels > MAX_CHANNELS {
        return Err(Error::param("channels", channels, format!("1..={MAX_CHANNELS}")));
    }
    if rate == 0 || rate > MAX_SAMPLE_RATE as u64 {
        return Err(Error::param("sample_rate", rate, format!("1..={MAX_SAMPLE_RATE} Hz")));
    }
    let data = ssnd.ok_or_else(|| bad("no `SSND` chunk"))?;
    let frame_bytes = channels * coding.bytes();
    let present = (data.len() / frame_bytes) as u64;
    if present < frames as u64 {
        return Err(Error::format(format!(
            "the header declares {frames} frames but only {present} could be decoded (truncated?)"
        )));
    }
    let frames = frames as usize;
    if frames as u64 * channels as u64 > max_samples {
        return Err(super::read::too_long(max_samples));
    }
    let mut out = vec![Vec::with_capacity(frames); channels];
    for frame in data[..frames * frame_bytes].chunks_exact(frame_bytes) {
        for (c, s) in frame.chunks_exact(coding.bytes()).enumerate() {
            out[c].push(sample(coding, s));
        }
    }
    let clip = Clip::new(rate as u32, out)?;
    let container = if aifc { "AIFF-C" } else { "AIFF" };
    Ok((clip, AiffInfo { format: format!("{container}, {name}") }))
}

/// The coding of `COMM`'s compression type (AIFF-C) or plain big-endian PCM (AIFF), and its name for people.
fn coding(compression: Option<&[u8]>, bits: u16) -> Result<(Coding, String)> {
    let int = |bytes: usize, little: bool| Coding::Int { bytes, little };
    let pcm = |little: bool| -> Result<(Coding, String)> {
        match bits {
            1..=32 => Ok((int(bits.div_ceil(8) as usize, little), format!("{bits}-bit PCM"))),
            _ => Err(Error::param("sample size", bits, "1..=32 bits")),
        }
    };
    let exact = |want: u16, c: Coding, name: &str| -> Result<(Coding, String)> {
        if bits == want {
            Ok((c, name.to_string()))
        } else {
            Err(bad(format!("a sample size of {bits} bits does not fit compression type {name}")))
        }
    };
    let Some(tag) = compression else { return pcm(false) };
    let lower: Vec<u8> = tag.to_ascii_lowercase();
    match &lower[..] {
        b"none" => pcm(false),
        // The sample size must match for these (as symphonia requires) ...
        b"twos" => exact(16, int(2, false), "twos, 16-bit PCM"),
        b"sowt" => exact(16, int(2, true), "sowt, 16-bit PCM (little-endian)"),
        b"in24" => exact(24, int(3, false), "in24, 24-bit PCM"),
        b"in32" => exact(32, int(4, false), "in32, 32-bit PCM"),
        b"23ni" => exact(32, int(4, true), "23ni, 32-bit PCM (little-endian)"),
        b"raw " => exact(8, Coding::U8, "raw, 8-bit unsigned PCM"),
        // ... and is not read for these (libsndfile writes 8 for G.711, where others write 16).
        b"fl32" => Ok((Coding::F32, "fl32, 32-bit float".into())),
        b"fl64" => Ok((Coding::F64, "fl64, 64-bit float".into())),
        b"ulaw" => Ok((Coding::Ulaw, "ulaw, G.711 μ-law".into())),
        b"alaw" => Ok((Coding::Alaw, "alaw, G.711 A-law".into())),
        _ => Err(bad(format!("compression type {:?} is not supported", String::from_utf8_lossy(tag)))),
    }
}

fn sample(coding: Coding, s: &[u8]) -> f32 {
    match coding {
        Coding::Int { bytes, little } => {
            // The container's bits at the top of an i32, then scaled: exactly value / 2^(8·bytes − 1).
            let mut v = 0u32;
            for k in 0..bytes {
                let byte = if little { s[bytes - 1 - k] } else { s[k] };
                v |= (byte as u32) << (24 - 8 * k);
            }
            (v as i32) as f32 / 2_147_483_648.0
        }
        Coding::U8 => (s[0] as f32 - 128.0) / 128.0,
        Coding::F32 => f32::from_be_bytes([s[0], s[1], s[2], s[3]]),
        Coding::F64 => f64::from_be_bytes(s.try_into().unwrap_or([0; 8])) as f32,
        Coding::Ulaw => ulaw_to_linear(s[0]) as f32 / 32_768.0,
        Coding::Alaw => alaw_to_linear(s[0]) as f32 / 32_768.0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::{AiffEncoding, ExportFormat};

    #[test]
    fn reads_what_the_writer_writes() {
        let clip = Clip::new(44_100, vec![vec![0.5, -0.25, 0.0, -1.0], vec![0.125, 0.75, -0.5, 0.25]]).unwrap();
        for enc in AiffEncoding::ALL {
            let bytes = ExportFormat::Aiff { encoding: enc }.encode(&clip).unwrap();
            let (got, _) = read(&bytes, u64::MAX).unwrap();
            assert_eq!(got, clip, "{enc:?}");
        }
    }

    #[test]
    fn damage_is_an_error() {
        let clip = Clip::new(8_000, vec![vec![0.5; 100]]).unwrap();
        let bytes = ExportFormat::Aiff { encoding: AiffEncoding::PcmS16 }.encode(&clip).unwrap();
        let e = read(&bytes[..bytes.len() - 10], u64::MAX).unwrap_err().to_string();
        assert!(e.contains("truncated"), "{e}");
        assert!(read(&bytes, 99).unwrap_err().to_string().contains("limit"));
        for cut in [0, 11, 12, 20, 40] {
            assert!(read(&bytes[..cut], u64::MAX).is_err(), "cut at {cut}");
        }
    }

    #[test]
    fn extended_rates_read_back() {
        for r in [1u32, 8_000, 11_025, 44_100, 48_000, 96_000, 768_000] {
            assert_eq!(extended_to_u64(&crate::io::aiff::extended_rate(r)), Some(r as u64));
        }
    }
}
