//! WAV (RIFF/WAVE) reading and writing.
//!
//! Written by hand: one strict parser for every format tag the project supports, whose errors say exactly what is
//! wrong and which never allocates more than the file's real size suggests.
//!
//! # Reading ([`read`], [`read_with_meta`])
//! Format tags: PCM (1) with 8-bit unsigned, 16-, 24- and 32-bit signed samples (other widths up to 32 bits in the
//! next whole-byte container, left-justified, as the format requires); IEEE float (3), 32 and 64 bits; A-law (6);
//! μ-law (7); IMA ADPCM (0x11); Microsoft ADPCM (0x0002, 1 or 2 channels); G.721 ADPCM (0x0040, one channel, decoded
//! in libsndfile's arithmetic: see [`crate::codec::g721`]); GSM 6.10 (0x0031, one channel, 65-byte WAV49 blocks: see
//! [`crate::codec::gsm610`]); `WAVE_FORMAT_EXTENSIBLE` (0xFFFE) whose subformat GUID is PCM, float, A-law or μ-law.
//! 1 to 64 channels, 1 to 768,000 Hz. Integer samples are scaled by 2^−(bits−1) (full scale −1.0 … 1 − 2^−(bits−1)).
//!
//! Chunks: `fmt ` and `data` are required; `fact` gives the true length of IMA ADPCM; `smpl` loops and `cue ` points
//! go into [`WavMeta`]; everything else is skipped. Odd-sized chunks are followed by a pad byte; a writer that forgot
//! the pad byte is recognised and tolerated (with a warning).
//!
//! # What is an error and what is a warning
//! Anything that makes the samples ambiguous is an error whose message names the problem: no RIFF/WAVE header,
//! missing, duplicated or short `fmt ` chunk, impossible channel count, rate, bit depth or block align, an unknown
//! format tag or subformat, no `data` chunk.
//!
//! Damage after which the samples present are still unambiguous is a warning in [`WavMeta::warnings`] and reading goes
//! on: a **truncated `data` chunk** (its size runs past the end of the file) is read as far as whole frames (or, for
//! ADPCM, whole 8-sample groups) go — a cut-off file still yields its beginning, and the warning says how much is
//! missing; a RIFF size that disagrees with the file; bytes after the last whole frame; a malformed `smpl` or `cue `
//! chunk (ignored in part or whole); loops that fall outside the sound (dropped); ADPCM block headers with a step
//! index above 88 (clamped, as libsndfile does) or a non-zero reserved byte. [`read`] drops the warnings.
//!
//! # Writing ([`write()`], [`write_with`])
//! - PCM: `fmt ` of 16 bytes, then `data`: the canonical 44-byte header.
//! - float32, μ-law, A-law: `fmt ` of 18 bytes (cbSize 0), `fact` (frames), `data`.
//! - IMA ADPCM: `fmt ` of 20 bytes (cbSize 2, samplesPerBlock), `fact` (true frame count), `data` of whole blocks
//!   (see [`crate::codec::ima_adpcm`] for the layout, default block size and padding of the last block).
//! - Microsoft ADPCM: `fmt ` of 50 bytes (cbSize 32: samplesPerBlock, 7 and the seven standard coefficient pairs, as
//!   the format requires), `fact`, `data` of whole blocks ([`crate::codec::ms_adpcm`]).
//! - G.721: `fmt ` of 20 bytes (cbSize 2, auxiliary block size 0), `fact`, `data` of whole 60-byte blocks of 120
//!   samples, the last completed with coded silence ([`crate::codec::g721`]). One channel at 8000 Hz only.
//! - GSM 6.10: `fmt ` of 20 bytes (0 bits per sample, cbSize 2, samplesPerBlock 320), `fact`, `data` of whole
//!   65-byte blocks of 320 samples (two 160-sample frames), the last completed with silence before coding
//!   ([`crate::codec::gsm610`]). One channel at 8000 Hz only.
//! - With loops, a `smpl` chunk follows `data` (so readers that assume a 44-byte PCM header still work).
//!
//! Plain PCM tags are used even for 24/32 bits and more than two channels (no `WAVE_FORMAT_EXTENSIBLE`): every
//! reader accepts them, game engines included.

mod fmt;
mod read;
pub mod stream;
mod write;

pub use read::{read, read_with_meta, CuePoint, WavFormat, WavMeta};
pub use write::{file_size, file_size_with, write, write_with};

pub(crate) const WAVE_FORMAT_PCM: u16 = 1;
pub(crate) const WAVE_FORMAT_IEEE_FLOAT: u16 = 3;
pub(crate) const WAVE_FORMAT_ALAW: u16 = 6;
pub(crate) const WAVE_FORMAT_MULAW: u16 = 7;
pub(crate) const WAVE_FORMAT_IMA_ADPCM: u16 = 0x11;
pub(crate) const WAVE_FORMAT_MS_ADPCM: u16 = 0x0002;
pub(crate) const WAVE_FORMAT_G721_ADPCM: u16 = 0x0040;
pub(crate) const WAVE_FORMAT_GSM610: u16 = 0x0031;
pub(crate) const WAVE_FORMAT_EXTENSIBLE: u16 = 0xFFFE;

/// Bytes 2..16 of every `KSDATAFORMAT_SUBTYPE_*` GUID derived from a format tag
/// (`xxxxxxxx-0000-0010-8000-00aa00389b71`, the tag in the first two bytes).
pub(crate) const GUID_TAIL: [u8; 14] = [0, 0, 0, 0, 0x10, 0, 0x80, 0, 0, 0xAA, 0, 0x38, 0x9B, 0x71];
