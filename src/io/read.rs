//! The core's own readers, the same code on every platform: WAV ([`super::wav`]) and AIFF/AIFF-C
//! ([`super::aiff_read`]). The page (wasm) opens WAV and AIFF files with [`read_own`]; the CLI's `decode::read_any`
//! reads WAV with [`read_wav`] and everything else through `symphonia` (which gives, for AIFF, the same floats as
//! [`read_aiff`]; `tests/formats_reference.rs` checks it).

use crate::audio::Clip;
use crate::error::{Error, Result};

/// Default bound on decoded samples (all channels): 2^28, 1 GiB as f32 — 46 minutes of 48 kHz stereo.
pub const MAX_DECODED_SAMPLES: u64 = 1 << 28;

/// The name [`Decoded::decoder`] gives for the project's own WAV reader.
pub const WAV_READER: &str = "stairstep WAV reader";

/// The name [`Decoded::decoder`] gives for the project's own AIFF/AIFF-C reader.
pub const AIFF_READER: &str = "stairstep AIFF reader";

/// Bounds on what a decode may produce.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Limits {
    /// Most samples (frames × channels) a file may decode to.
    pub max_samples: u64,
}

impl Default for Limits {
    fn default() -> Self {
        Limits { max_samples: MAX_DECODED_SAMPLES }
    }
}

/// A decoded file.
#[derive(Debug, Clone, PartialEq)]
pub struct Decoded {
    /// The samples, at the file's own rate.
    pub clip: Clip,
    /// Which reader decoded it: [`WAV_READER`], [`AIFF_READER`], or `symphonia FORMAT/CODEC` (e.g.
    /// `symphonia aiff/pcm_s24be`).
    pub decoder: String,
    /// What the file holds, for people, e.g. `16-bit PCM`, `FLAC, 24-bit`, `MPEG Layer 3`.
    pub format: String,
    /// The file's own sustain loop, frames `start..end` (end exclusive): a WAV `smpl` loop, or an AIFF `INST`
    /// sustain loop between two `MARK` markers.
    pub file_loop: Option<(u64, u64)>,
    /// What the reader noticed but could read past, one sentence each.
    pub warnings: Vec<String>,
}

/// The error for a file that decodes to more than `max_samples` samples.
pub(crate) fn too_long(max_samples: u64) -> Error {
    Error::format(format!(
        "decodes to more than {max_samples} samples, the in-memory limit (convert it to WAV, which the CLI streams)"
    ))
}

/// Reads a WAV file with the project's own reader (samples, warnings, the first `smpl` loop).
pub fn read_wav(bytes: &[u8], limits: Limits) -> Result<Decoded> {
    let (clip, meta) = super::wav::read_with_meta(bytes)?;
    let samples = clip.frames() as u64 * clip.channel_count() as u64;
    if samples > limits.max_samples {
        return Err(too_long(limits.max_samples));
    }
    Ok(Decoded {
        clip,
        decoder: WAV_READER.into(),
        format: meta.format.describe(),
        file_loop: meta.loops.first().map(|l| (l.start as u64, l.end as u64 + 1)),
        warnings: meta.warnings,
    })
}

/// Reads an AIFF or AIFF-C file with the project's own reader, its sustain loop included.
pub fn read_aiff(bytes: &[u8], limits: Limits) -> Result<Decoded> {
    let (clip, info) = super::aiff_read::read(bytes, limits.max_samples)?;
    let mut d = Decoded { clip, decoder: AIFF_READER.into(), format: info.format, file_loop: None, warnings: vec![] };
    add_aiff_loop(bytes, &mut d);
    Ok(d)
}

/// Sets `d.file_loop` from an AIFF file's `MARK` + `INST` sustain loop; a loop that cannot be used is a warning.
pub(crate) fn add_aiff_loop(bytes: &[u8], d: &mut Decoded) {
    match super::aiff::read_loops(bytes) {
        Ok(Some((s, e))) if e > d.clip.frames() as u64 => {
            d.warnings.push(format!("sustain loop {s}..{e} ends after the sound's {} frames: ignored", d.clip.frames()))
        }
        Ok(l) => d.file_loop = l,
        Err(e) => d.warnings.push(format!("loop markers ignored: {e}")),
    }
}

/// Reads a WAV or AIFF/AIFF-C file (by its content, not its name) with the project's own readers.
pub fn read_own(bytes: &[u8], limits: Limits) -> Result<Decoded> {
    match bytes.get(0..12) {
        Some(h) if &h[0..4] == b"RIFF" && &h[8..12] == b"WAVE" => read_wav(bytes, limits),
        Some(h) if &h[0..4] == b"FORM" && (&h[8..12] == b"AIFF" || &h[8..12] == b"AIFC") => read_aiff(bytes, limits),
        _ => Err(Error::format("not a WAV or AIFF file")),
    }
}
