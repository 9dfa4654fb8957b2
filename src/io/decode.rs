//! Reading any supported sound file in the native CLI: WAV through the project's own reader ([`super::wav`]),
//! everything else — FLAC, AIFF and AIFF-C, Ogg Vorbis, MP3, CAF (PCM and ALAC) — through the `symphonia` crate.
//! Native only: `symphonia` in the wasm would cost over 100 kB gzipped (DEVELOPERS.md, "Reading files in the
//! page"), so the page reads WAV and AIFF/AIFF-C with the core's own readers ([`super::read`], the same samples as
//! here) and leaves the other formats to the browser, at the file's own rate.
//!
//! # Which reader
//! By content, not by name: a file that starts with `RIFF....WAVE` goes to [`super::wav::read_with_meta`], so WAV
//! samples, warnings and loops are exactly what the rest of the project reads (and the CLI can still stream it).
//! Anything else is probed by `symphonia` (the file name's extension is only a hint). [`Decoded::decoder`] names
//! the reader that was used, e.g. `stairstep WAV reader` or `symphonia flac/flac`.
//!
//! # Samples
//! Integer samples are scaled by 2^−(bits−1), as the WAV reader does (`symphonia` converts to f64 exactly, then
//! each sample is rounded once to f32), so a 16- or 24-bit file reads to exactly the floats libsndfile gives.
//! Lossy codecs (Vorbis, MP3) are decoded gaplessly: the encoder delay and padding that the stream signals (the
//! LAME/Xing header of an MP3, the granule positions of Ogg) are trimmed.
//!
//! # Damage
//! A file that cannot be probed, whose codec is not supported, whose packets fail to decode, or that ends before
//! the frame count its header declares is an error naming the problem and the frame at which it happened; a partial
//! sound is never returned as if it were whole. `symphonia` is memory-safe but may panic on some malformed inputs;
//! decoding runs under [`std::panic::catch_unwind`] (the native release profile unwinds; only the wasm profile
//! aborts), so such a file is an error like any other, and the panic message is kept off standard error.
//!
//! # Memory
//! Whole-file decode: the file's bytes plus the decoded samples as f32 (plus at most the same again while the
//! sample vectors grow). The decoded length is bounded by [`Limits::max_samples`] (default
//! [`MAX_DECODED_SAMPLES`], 1 GiB of f32), checked as packets arrive — a tiny file whose header or packets
//! claim hours of sound (FLAC constant subframes compress silence ~10,000:1) stops with an error at the limit
//! instead of exhausting memory. Header values are checked before any allocation that depends on them
//! (channels 1..=64, rate 1..=768,000 Hz, frames per packet ≤ 2^20).

use super::read::{add_aiff_loop, read_wav};
pub use super::read::{Decoded, Limits, MAX_DECODED_SAMPLES, WAV_READER};
use crate::audio::{Clip, MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::error::{Error, Result};
use std::borrow::Cow;
use std::cell::{Cell, RefCell};
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::Path;
use std::sync::Once;
use symphonia::core::codecs::audio::AudioDecoderOptions;
use symphonia::core::errors::Error as SymError;
use symphonia::core::formats::probe::Hint;
use symphonia::core::formats::{FormatOptions, TrackType};
use symphonia::core::io::MediaSourceStream;
use symphonia::core::meta::MetadataOptions;

/// Largest frames-per-packet a header may declare before the decoder allocates its buffer (FLAC allows 65,535;
/// ALAC's default is 4,096).
const MAX_FRAMES_PER_PACKET: u64 = 1 << 20;

/// Reads and decodes a file (see [`read_any`]); the extension is passed on as a hint.
pub fn read_any_file(path: &Path) -> Result<Decoded> {
    let bytes = std::fs::read(path)?;
    read_any(&bytes, path.extension().and_then(|e| e.to_str()), Limits::default())
}

/// Decodes a file held in memory. `extension` (without the dot) helps the probe; the content decides.
pub fn read_any(bytes: &[u8], extension: Option<&str>, limits: Limits) -> Result<Decoded> {
    if bytes.len() >= 12 && &bytes[0..4] == b"RIFF" && &bytes[8..12] == b"WAVE" {
        return read_wav(bytes, limits);
    }
    let mut decoded = guarded(|| decode_other(bytes, extension, limits))?;
    if decoded.decoder.starts_with("symphonia aiff/") {
        add_aiff_loop(bytes, &mut decoded);
    }
    Ok(decoded)
}

fn too_long(limits: Limits) -> Error {
    super::read::too_long(limits.max_samples)
}

thread_local! {
    static QUIET_PANICS: Cell<bool> = const { Cell::new(false) };
    /// Where the last quiet panic happened (file:line), for the error message.
    static PANIC_AT: RefCell<Option<String>> = const { RefCell::new(None) };
}

/// Runs `f`, turning a panic inside it into an error; the default panic message is suppressed on this thread
/// meanwhile (other threads' panics still print).
fn guarded<T>(f: impl FnOnce() -> Result<T>) -> Result<T> {
    static HOOK: Once = Once::new();
    HOOK.call_once(|| {
        let previous = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if QUIET_PANICS.with(Cell::get) {
                let at = info.location().map(|l| format!("{}:{}", l.file(), l.line()));
                PANIC_AT.with(|p| *p.borrow_mut() = at);
            } else {
                previous(info);
            }
        }));
    });
    QUIET_PANICS.with(|q| q.set(true));
    let r = catch_unwind(AssertUnwindSafe(f));
    QUIET_PANICS.with(|q| q.set(false));
    match r {
        Ok(r) => r,
        Err(p) => {
            let what = p
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| p.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "unknown".into());
            let at = PANIC_AT.with(|p| p.borrow_mut().take()).map(|a| format!(" at {a}")).unwrap_or_default();
            Err(Error::format(format!("malformed file: the decoder gave up ({what}{at})")))
        }
    }
}

fn sym(e: SymError) -> Error {
    Error::format(sym_message(e))
}

fn sym_message(e: SymError) -> String {
    match e {
        SymError::Unsupported(what) => {
            format!("not a sound file this program reads (WAV, FLAC, AIFF/AIFF-C, Ogg Vorbis, MP3, CAF): {what}")
        }
        SymError::IoError(e) if e.kind() == std::io::ErrorKind::UnexpectedEof => {
            "the file ends in the middle of its header or a packet (truncated?)".into()
        }
        e => format!("malformed file: {e}"),
    }
}

fn decode_other(bytes: &[u8], extension: Option<&str>, limits: Limits) -> Result<Decoded> {
    let bytes: Cow<'_, [u8]> = match caf_fixups(bytes) {
        Some(fixed) => Cow::Owned(fixed),
        None => Cow::Borrowed(bytes),
    };
    let mss = MediaSourceStream::new(Box::new(std::io::Cursor::new(bytes)), Default::default());
    let mut hint = Hint::new();
    if let Some(e) = extension {
        hint.with_extension(e);
    }
    let mut reader = symphonia::default::get_probe()
        .probe(&hint, mss, FormatOptions::default(), MetadataOptions::default())
        .map_err(sym)?;
    let track = reader.default_track(TrackType::Audio).ok_or_else(|| Error::format("no audio track"))?;
    let track_id = track.id;
    let declared_frames = track.num_frames;
    let params = track
        .codec_params
        .as_ref()
        .and_then(|p| p.audio())
        .ok_or_else(|| Error::format("the audio track has no codec parameters"))?
        .clone();
    // Checked before the decoder allocates anything that depends on them.
    let channels = params.channels.as_ref().map_or(0, |c| c.count());
    if channels == 0 || channels > MAX_CHANNELS {
        return Err(Error::param("channels", channels, format!("1..={MAX_CHANNELS}")));
    }
    let rate = params.sample_rate.unwrap_or(0);
    if rate == 0 || rate > MAX_SAMPLE_RATE {
        return Err(Error::param("sample_rate", rate, format!("1..={MAX_SAMPLE_RATE} Hz")));
    }
    if params.max_frames_per_packet.is_some_and(|n| n > MAX_FRAMES_PER_PACKET) {
        return Err(Error::format(format!(
            "the header declares {} frames per packet (at most {MAX_FRAMES_PER_PACKET} are accepted)",
            params.max_frames_per_packet.unwrap_or(0)
        )));
    }
    let mut decoder =
        symphonia::default::get_codecs().make_audio_decoder(&params, &AudioDecoderOptions::default()).map_err(|e| {
            let what = match e {
                SymError::Unsupported(w) | SymError::DecodeError(w) => w.to_string(),
                e => e.to_string(),
            };
            Error::format(format!(
                "the decoder cannot start: {what} (a truncated header, or a codec variant this program does not read)"
            ))
        })?;
    let format_name = reader.format_info().short_name;
    let codec = decoder.codec_info();
    let decoder_name = format!("symphonia {}/{}", format_name, codec.short_name);
    let format = match params.bits_per_sample.filter(|&b| b > 0) {
        Some(b) => format!("{}, {}-bit", codec.long_name, b),
        None => codec.long_name.to_string(),
    };

    let mut out: Vec<Vec<f32>> = vec![Vec::new(); channels];
    let mut planes: Vec<Vec<f64>> = Vec::new();
    let mut samples = 0u64;
    let warnings = Vec::new();
    loop {
        let packet = match reader.next_packet() {
            Ok(Some(p)) => p,
            Ok(None) => break,
            Err(SymError::IoError(e)) if e.kind() == std::io::ErrorKind::UnexpectedEof => {
                return Err(Error::format(format!(
                    "the file ends in the middle of a packet after {} frames (truncated?)",
                    out[0].len()
                )));
            }
            Err(SymError::ResetRequired) => {
                return Err(Error::format(format!(
                    "the stream changes its parameters after {} frames (chained streams are not supported)",
                    out[0].len()
                )))
            }
            Err(e) => return Err(at_frame(e, out[0].len())),
        };
        if packet.track_id != track_id {
            continue;
        }
        let buf = decoder.decode(&packet).map_err(|e| at_frame(e, out[0].len()))?;
        if buf.spec().channels().count() != channels {
            return Err(Error::format(format!(
                "the channel count changes from {channels} to {} after {} frames",
                buf.spec().channels().count(),
                out[0].len()
            )));
        }
        samples += buf.frames() as u64 * channels as u64;
        if samples > limits.max_samples {
            return Err(too_long(limits));
        }
        buf.copy_to_vecs_planar::<f64>(&mut planes);
        for (o, p) in out.iter_mut().zip(&planes) {
            // Exact: symphonia's integer-to-f64 conversion is a division by a power of two; one rounding here.
            o.extend(p.iter().map(|&x| x as f32));
        }
    }
    let frames = out[0].len() as u64;
    if let Some(n) = declared_frames {
        if frames < n {
            return Err(Error::format(format!(
                "the header declares {n} frames but only {frames} could be decoded (truncated?)"
            )));
        }
    }
    let clip = Clip::new(rate, out)?;
    Ok(Decoded { clip, decoder: decoder_name, format, file_loop: None, warnings })
}

fn at_frame(e: SymError, frame: usize) -> Error {
    Error::format(format!("{} (at frame {frame})", sym_message(e)))
}

/// Two CAF quirks between libsndfile (the writer) and symphonia 0.6 (the reader), which each make symphonia lose
/// its place and report a truncated file:
/// - libsndfile pads the packet table (`pakt`) of an ALAC file to an even size, and symphonia reads the next chunk
///   header straight after the last table entry instead of at the chunk's declared end;
/// - libsndfile writes a pad byte after an odd-sized final `data` chunk (CAF has no pad bytes), and symphonia reads
///   it as the start of another chunk header.
///
/// When either is present, this returns a copy of the file with the `pakt` chunk exactly as long as its entries
/// and fewer-than-a-chunk-header trailing bytes dropped (samples and everything else unchanged). `None`: not CAF,
/// nothing to fix, or anything unexpected — the file is then read as it is and the reader reports any damage.
fn caf_fixups(bytes: &[u8]) -> Option<Vec<u8>> {
    if bytes.len() < 8 || &bytes[0..4] != b"caff" {
        return None;
    }
    let be32 = |at: usize| Some(u32::from_be_bytes(bytes.get(at..at + 4)?.try_into().ok()?));
    let be64 = |at: usize| Some(i64::from_be_bytes(bytes.get(at..at + 8)?.try_into().ok()?));
    let mut pos = 8usize;
    let mut entries_per_packet = None;
    // (chunk start, end of the table's entries, chunk end) of a padded `pakt`.
    let mut pakt_fix = None;
    while pos + 12 <= bytes.len() {
        let id = &bytes[pos..pos + 4];
        // A size of −1 (only allowed for a final `data` chunk) means "to the end of the file".
        let size = be64(pos + 4)?;
        let body = pos + 12;
        let end = if size == -1 { bytes.len() } else { body.checked_add(usize::try_from(size).ok()?)? };
        match id {
            // `desc`: f64 rate, format id, flags, bytes per packet, frames per packet, ...; a table entry holds a
            // variable-length integer for each of the two that is 0 (variable).
            b"desc" => {
                let (bpp, fpp) = (be32(body + 16)?, be32(body + 20)?);
                entries_per_packet = Some((bpp == 0) as u64 + (fpp == 0) as u64);
            }
            b"pakt" => {
                let packets = u64::try_from(be64(body)?).ok()?;
                let ints = packets.checked_mul(entries_per_packet?)?;
                let mut at = body + 24;
                for _ in 0..ints {
                    // A big-endian base-128 integer: bytes with the top bit set continue it.
                    while *bytes.get(at)? & 0x80 != 0 {
                        at += 1;
                    }
                    at += 1;
                }
                if at > end || end > bytes.len() {
                    return None;
                }
                if at < end {
                    pakt_fix = Some((pos, at, end));
                }
            }
            _ => {}
        }
        pos = end;
    }
    let trailing = bytes.len().saturating_sub(pos);
    if pakt_fix.is_none() && !(1..12).contains(&trailing) {
        return None;
    }
    let keep = if (1..12).contains(&trailing) { pos } else { bytes.len() };
    let mut fixed = Vec::with_capacity(keep);
    match pakt_fix {
        Some((start, at, end)) => {
            fixed.extend_from_slice(&bytes[..start + 4]);
            fixed.extend_from_slice(&((at - start - 12) as i64).to_be_bytes());
            fixed.extend_from_slice(&bytes[start + 12..at]);
            fixed.extend_from_slice(&bytes[end..keep]);
        }
        None => fixed.extend_from_slice(&bytes[..keep]),
    }
    Some(fixed)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_inside_the_decoder_is_an_error() {
        let r: Result<()> = guarded(|| panic!("index out of bounds"));
        let e = r.unwrap_err().to_string();
        assert!(e.contains("decoder gave up") && e.contains("index out of bounds"), "{e}");
        // The hook only silences panics inside `guarded`; later calls still work.
        assert_eq!(guarded(|| Ok(5)).unwrap(), 5);
    }

    #[test]
    fn the_decoded_length_is_bounded() {
        let clip = Clip::new(8_000, vec![vec![0.0; 1_000]; 2]).unwrap();
        let wav = crate::io::ExportFormat::default().encode(&clip).unwrap();
        assert!(read_any(&wav, None, Limits { max_samples: 2_000 }).is_ok());
        let e = read_any(&wav, None, Limits { max_samples: 1_999 }).unwrap_err().to_string();
        assert!(e.contains("in-memory limit"), "{e}");
        let aiff = crate::io::ExportFormat::Aiff { encoding: crate::io::AiffEncoding::PcmS16 }.encode(&clip).unwrap();
        let d = read_any(&aiff, Some("aif"), Limits { max_samples: 2_000 }).unwrap();
        assert_eq!((d.clip.frames(), d.clip.channel_count(), d.clip.sample_rate), (1_000, 2, 8_000));
        let e = read_any(&aiff, None, Limits { max_samples: 1_999 }).unwrap_err().to_string();
        assert!(e.contains("in-memory limit"), "{e}");
    }

    #[test]
    fn a_caf_header_that_overflows_inside_symphonia_is_an_error() {
        // Found by the decode_any fuzz target: symphonia-format-caf 0.6.1 computes bytes_per_packet × 8 in u32
        // (demuxer.rs, read_audio_description_chunk), which overflows — a panic where overflow checks are on (debug
        // builds, fuzzing), a wrapped value in release. Either way the file is refused, not a crash.
        let mut b = b"caff\x00\x01\x00\x00desc".to_vec();
        b.extend_from_slice(&32i64.to_be_bytes());
        b.extend_from_slice(&8_000f64.to_be_bytes());
        b.extend_from_slice(b"alac");
        for v in [0u32, 0xC536_C69B, 4096, 1, 16] {
            b.extend_from_slice(&v.to_be_bytes()); // flags, bytes/packet, frames/packet, channels, bits
        }
        b.extend_from_slice(b"data");
        b.extend_from_slice(&(-1i64).to_be_bytes());
        b.extend_from_slice(&[0x5A; 64]);
        let e = read_any(&b, None, Limits::default()).unwrap_err().to_string();
        if cfg!(debug_assertions) {
            // Overflow checks are on: the panic was caught, and the message says where it happened.
            assert!(e.contains("decoder gave up") && e.contains("symphonia-format-caf"), "{e}");
        }
    }

    #[test]
    fn nothing_recognisable_is_a_clear_error() {
        for bytes in [&b""[..], b"RIFF", b"FORM\0\0\0\x04AIFF", &[0x55; 3000]] {
            let e = read_any(bytes, Some("flac"), Limits::default()).unwrap_err().to_string();
            assert!(!e.is_empty());
        }
    }
}
