//! The WAV reader. See the [module docs](super) for what it accepts and its error/warning policy.

use super::fmt::parse_fmt;
pub use super::fmt::WavFormat;
use super::fmt::{plural, u32_at};
use super::*;
use crate::audio::Clip;
use crate::codec::g711::{alaw_to_linear, ulaw_to_linear};
use crate::codec::ima_adpcm as adpcm;
use crate::codec::{g721, gsm610, ms_adpcm};
use crate::error::{Error, Result};
use crate::io::{ExportMeta, SampleLoop};

/// A point from a `cue ` chunk.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct CuePoint {
    /// The cue point's identifier (loops and labels refer to it).
    pub id: u32,
    /// Play-order position (`dwPosition`).
    pub position: u32,
    /// The chunk the point refers to, normally `data`.
    pub chunk_id: [u8; 4],
    /// `dwChunkStart`.
    pub chunk_start: u32,
    /// `dwBlockStart`.
    pub block_start: u32,
    /// Frame of the point within the data (`dwSampleOffset`).
    pub sample_offset: u32,
}

/// Everything besides the samples that [`read_with_meta`] found.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct WavMeta {
    /// The `fmt ` chunk.
    pub format: WavFormat,
    /// The `fact` chunk's frame count, if there was one.
    pub fact_frames: Option<u32>,
    /// Valid sustain loops from the `smpl` chunk, in file order (invalid ones are dropped with a warning).
    pub loops: Vec<SampleLoop>,
    /// The `smpl` chunk's MIDI unity note.
    pub unity_note: Option<u32>,
    /// Points from the `cue ` chunk.
    pub cues: Vec<CuePoint>,
    /// Problems that did not stop reading, one sentence each.
    pub warnings: Vec<String>,
}

impl WavMeta {
    /// The loops and unity note, ready to write back with [`crate::io::ExportFormat::encode_with`].
    pub fn export_meta(&self) -> ExportMeta {
        ExportMeta {
            loops: self.loops.clone(),
            unity_note: self.unity_note.filter(|&n| n <= 127).map_or(60, |n| n as u8),
        }
    }
}

/// Decodes a WAV file; warnings are dropped (see [`read_with_meta`]).
pub fn read(bytes: &[u8]) -> Result<Clip> {
    read_with_meta(bytes).map(|(clip, _)| clip)
}

/// Decodes a WAV file and returns its metadata and warnings.
pub fn read_with_meta(bytes: &[u8]) -> Result<(Clip, WavMeta)> {
    let mut meta = WavMeta::default();
    let found = scan(bytes, &mut meta.warnings)?;
    let suffix = found.stop.as_ref().map_or(String::new(), |s| format!(" (reading stopped early: {s})"));
    let fmt = found.fmt.ok_or_else(|| Error::format(format!("no `fmt ` chunk{suffix}")))?;
    meta.format = parse_fmt(fmt, &mut meta.warnings)?;
    let data = found.data.ok_or_else(|| Error::format(format!("no `data` chunk{suffix}")))?;
    if let Some(f) = found.fact {
        if f.len() < 4 {
            meta.warnings.push(format!("`fact` chunk is {} bytes, shorter than 4: ignored", f.len()));
        } else {
            meta.fact_frames = Some(u32_at(f, 0));
        }
    }
    let f = &meta.format;
    let channels = f.channels as usize;
    let out = if f.sub_format == WAVE_FORMAT_IMA_ADPCM {
        decode_adpcm(data, f, meta.fact_frames, &mut meta.warnings)?
    } else if f.sub_format == WAVE_FORMAT_MS_ADPCM {
        decode_ms_adpcm(data, f, meta.fact_frames, &mut meta.warnings)?
    } else if f.sub_format == WAVE_FORMAT_G721_ADPCM {
        let max = meta.fact_frames.map_or(u64::MAX, |n| n as u64);
        let pcm = g721::decode_stream(data, g721::Arith::Libsndfile, max);
        if (pcm.len() as u64) < max && max != u64::MAX {
            meta.warnings.push(format!("`fact` chunk says {max} frames but the data holds {}", pcm.len()));
        }
        vec![pcm.into_iter().map(|s| s as f32 / 32768.0).collect()]
    } else if f.sub_format == WAVE_FORMAT_GSM610 {
        decode_gsm610(data, meta.fact_frames, &mut meta.warnings)
    } else {
        decode_frames(data, f, &mut meta.warnings)
    };
    debug_assert_eq!(out.len(), channels);
    let frames = out.first().map_or(0, |c| c.len());
    if let Some((i, declared)) = found.data_cut {
        let declared_frames = declared / (f.block_align.max(1) as usize) * f.samples_per_block.map_or(1, usize::from);
        let w = truncation(declared_frames as u64, frames as u64, &meta.warnings[i]);
        meta.warnings[i] = w;
    }
    if let Some(s) = found.smpl {
        parse_smpl(s, frames, &mut meta);
    }
    if let Some(c) = found.cue {
        parse_cue(c, &mut meta);
    }
    let clip = Clip::new(meta.format.sample_rate, out)?;
    Ok((clip, meta))
}

/// The warning for a `data` chunk cut short: it starts `truncated: header says N frames, M present` (for scripts to
/// match), then gives the detail.
pub(super) fn truncation(declared_frames: u64, present_frames: u64, detail: &str) -> String {
    format!("truncated: header says {declared_frames} frames, {present_frames} present ({detail})")
}

/// A chunk or form id for messages: `` `fmt ` ``, with unprintable bytes as `\xNN`.
fn show_id(id: &[u8]) -> String {
    let mut s = String::from("`");
    for &b in id {
        if (0x20..0x7F).contains(&b) {
            s.push(b as char);
        } else {
            s.push_str(&format!("\\x{b:02X}"));
        }
    }
    s.push('`');
    s
}

fn looks_like_id(b: &[u8]) -> bool {
    b.len() >= 4 && b[..4].iter().all(|c| (0x20..0x7F).contains(c))
}

/// The chunks the reader uses, as found.
#[derive(Default)]
struct Found<'a> {
    fmt: Option<&'a [u8]>,
    data: Option<&'a [u8]>,
    fact: Option<&'a [u8]>,
    smpl: Option<&'a [u8]>,
    cue: Option<&'a [u8]>,
    /// Why the chunk walk ended before the end of the file, if it did.
    stop: Option<String>,
    /// A `data` chunk cut short: the index of its warning and the size its header declares.
    data_cut: Option<(usize, usize)>,
}

/// Checks the RIFF header and walks the chunks.
fn scan<'a>(bytes: &'a [u8], warnings: &mut Vec<String>) -> Result<Found<'a>> {
    if bytes.is_empty() {
        return Err(Error::format("not a WAV file: the file is empty"));
    }
    if bytes.len() >= 4 {
        match &bytes[0..4] {
            b"RIFF" => {}
            b"RIFX" => return Err(Error::format("big-endian RIFX files are not supported")),
            b"RF64" | b"BW64" => return Err(Error::format("RF64/BW64 files (WAV beyond 4 GiB) are not supported")),
            other => {
                return Err(Error::format(format!(
                    "not a WAV file: it starts with {} instead of `RIFF`",
                    show_id(other)
                )))
            }
        }
    }
    if bytes.len() < 12 {
        return Err(Error::format(format!(
            "not a WAV file: {} bytes are too few for a RIFF/WAVE header (12)",
            bytes.len()
        )));
    }
    if &bytes[8..12] != b"WAVE" {
        return Err(Error::format(format!("a RIFF file of form {}, not `WAVE`", show_id(&bytes[8..12]))));
    }
    let len = bytes.len();
    let riff_size = u32_at(bytes, 4);
    let declared_end = 8 + riff_size as u64;
    let mut end = len;
    let mut extended = false;
    if riff_size < 4 || riff_size == u32::MAX {
        warnings.push(format!("RIFF size is {riff_size} (a placeholder?): read to the end of the file"));
    } else if declared_end > len as u64 {
        warnings.push(format!("RIFF size says the file has {declared_end} bytes but it has {len}: it is truncated"));
    } else if declared_end < len as u64 {
        end = declared_end as usize;
    }
    let mut found = Found::default();
    let mut pos = 12usize;
    loop {
        if pos >= end {
            // The RIFF size may be too small (some writers get it wrong): look further if something is missing.
            if end < len && !extended {
                if found.fmt.is_none() || found.data.is_none() {
                    warnings.push(format!(
                        "RIFF size says the file has {declared_end} bytes but chunks continue to byte {len}: read them"
                    ));
                    end = len;
                    extended = true;
                    continue;
                }
                let extra = len - pos.max(end);
                if extra > 0 {
                    warnings.push(format!("{extra} bytes after the end of the RIFF chunk ignored"));
                }
            }
            break;
        }
        let left = end - pos;
        if left < 8 {
            if !(left == 1 && bytes[pos] == 0) {
                warnings.push(format!("{left} stray bytes after the last chunk ignored"));
            }
            break;
        }
        let id: [u8; 4] = [bytes[pos], bytes[pos + 1], bytes[pos + 2], bytes[pos + 3]];
        let size = u32_at(bytes, pos + 4) as usize;
        let start = pos + 8;
        // Chunk bodies are bounded by the file; the RIFF size only says where to stop looking for new chunks.
        let avail = len - start;
        let truncated = size > avail;
        let body = &bytes[start..start + size.min(avail)];
        let past_end = |what: &str| {
            format!("{} chunk size {size} runs past the end of the file ({avail} bytes left){what}", show_id(&id))
        };
        match &id {
            b"fmt " => {
                if found.fmt.is_some() {
                    return Err(Error::format("more than one `fmt ` chunk"));
                }
                if truncated {
                    return Err(Error::format(past_end("")));
                }
                found.fmt = Some(body);
            }
            b"data" => {
                if found.data.is_some() {
                    return Err(Error::format("more than one `data` chunk"));
                }
                if truncated {
                    found.data_cut = Some((warnings.len(), size));
                    warnings.push(past_end(&format!(": read the {avail} bytes present")));
                }
                found.data = Some(body);
            }
            b"fact" | b"smpl" | b"cue " => {
                let slot = match &id {
                    b"fact" => &mut found.fact,
                    b"smpl" => &mut found.smpl,
                    _ => &mut found.cue,
                };
                if truncated {
                    warnings.push(past_end(": ignored"));
                } else if slot.is_some() {
                    warnings.push(format!("second {} chunk ignored", show_id(&id)));
                } else {
                    *slot = Some(body);
                }
            }
            _ => {
                if truncated {
                    let msg = past_end("");
                    warnings.push(format!("{msg}: stopped reading there"));
                    found.stop = Some(msg);
                }
            }
        }
        if truncated {
            break;
        }
        let mut next = start + size;
        if size % 2 == 1 && next < len {
            // RIFF pads odd chunks to an even size; some writers forget the pad byte.
            if !looks_like_id(&bytes[next + 1..]) && looks_like_id(&bytes[next..]) {
                warnings.push(format!("{} chunk has an odd size ({size}) but no pad byte", show_id(&id)));
            } else {
                next += 1;
            }
        }
        pos = next;
    }
    Ok(found)
}

/// Decodes byte-aligned frames (PCM, float, G.711).
pub(super) fn decode_frames(data: &[u8], f: &WavFormat, warnings: &mut Vec<String>) -> Vec<Vec<f32>> {
    let ch = f.channels as usize;
    let frame = f.block_align as usize;
    let frames = data.len() / frame;
    let rest = data.len() % frame;
    if rest != 0 {
        warnings.push(format!("`data` chunk ends with {rest} bytes that do not make a whole frame: ignored"));
    }
    let mut out: Vec<Vec<f32>> = (0..ch).map(|_| Vec::with_capacity(frames)).collect();
    let width = frame / ch;
    let data = &data[..frames * frame];
    // One pass per channel, with the conversion known at compile time (no call through a pointer per sample).
    fn each<const W: usize>(data: &[u8], frame: usize, out: &mut [Vec<f32>], f: impl Fn([u8; W]) -> f32) {
        for (c, o) in out.iter_mut().enumerate() {
            let at = c * W;
            o.extend(data.chunks_exact(frame).map(|fr| f(fr[at..at + W].try_into().expect("W bytes"))));
        }
    }
    match (f.sub_format, width) {
        (WAVE_FORMAT_MULAW | WAVE_FORMAT_ALAW, 1) => {
            let law: fn(u8) -> i16 = if f.sub_format == WAVE_FORMAT_MULAW { ulaw_to_linear } else { alaw_to_linear };
            let table: Vec<f32> = (0..=255u8).map(|c| law(c) as f32 / 32768.0).collect();
            each::<1>(data, frame, &mut out, |[b]| table[b as usize]);
        }
        (WAVE_FORMAT_IEEE_FLOAT, 4) => each::<4>(data, frame, &mut out, f32::from_le_bytes),
        (WAVE_FORMAT_IEEE_FLOAT, _) => each::<8>(data, frame, &mut out, |b| f64::from_le_bytes(b) as f32),
        // 8-bit WAV samples are unsigned: 128 is silence.
        (_, 1) => each::<1>(data, frame, &mut out, |[b]| (b as f32 - 128.0) / 128.0),
        (_, 2) => each::<2>(data, frame, &mut out, |b| i16::from_le_bytes(b) as f32 / 32768.0),
        (_, 3) => {
            each::<3>(data, frame, &mut out, |[a, b, c]| (i32::from_le_bytes([0, a, b, c]) >> 8) as f32 / 8_388_608.0)
        }
        _ => each::<4>(data, frame, &mut out, |b| (i32::from_le_bytes(b) as f64 / 2_147_483_648.0) as f32),
    }
    out
}

/// Decodes IMA ADPCM blocks, trimmed to the `fact` length.
fn decode_adpcm(data: &[u8], f: &WavFormat, fact: Option<u32>, warnings: &mut Vec<String>) -> Result<Vec<Vec<f32>>> {
    let ch = f.channels as usize;
    let ba = f.block_align as usize;
    let spb = f.samples_per_block.map_or(1, |s| s as u64);
    let whole_blocks = data.len() as u64 / ba as u64;
    let mut fact = fact;
    let mut fact_distrusted = false;
    // libsndfile (1.2 and earlier) writes `fact` = samplesPerBlock × blocks / channels: right for mono, half the
    // frames for stereo. Trusting it would throw away real sound, so that exact value is not trusted unless what
    // follows it is exactly the encoding of silence (as when this project wrote that many frames).
    if let Some(n) = fact {
        if ch > 1
            && whole_blocks > 0
            && n as u64 == spb * whole_blocks / ch as u64
            && data.len().is_multiple_of(ba)
            && !adpcm::is_silent_padding(data, ch, ba, n as u64)
        {
            warnings.push(format!(
                "`fact` chunk says {n} frames, the data's {} divided by {ch} channels (a known libsndfile bug): \
                 all {} frames kept",
                spb * whole_blocks,
                spb * whole_blocks
            ));
            fact = None;
            fact_distrusted = true;
        }
    }
    let (pcm, notes) = adpcm::decode_blocks(data, ch, ba, fact.map_or(u64::MAX, |n| n as u64))?;
    let frames = pcm.first().map_or(0, |c| c.len());
    if notes.bad_step_index > 0 {
        warnings.push(format!(
            "{} with a step index above 88 (clamped to 88)",
            plural(notes.bad_step_index, "IMA ADPCM block header")
        ));
    }
    if notes.bad_reserved > 0 {
        warnings
            .push(format!("{} with a non-zero reserved byte", plural(notes.bad_reserved, "IMA ADPCM block header")));
    }
    if notes.leftover_bytes > 0 {
        warnings.push(format!(
            "the last IMA ADPCM block ends with {} that do not make a whole group: ignored",
            plural(notes.leftover_bytes, "byte")
        ));
    }
    match fact {
        None if fact_distrusted => {}
        None => warnings
            .push(format!("IMA ADPCM file without a `fact` chunk: all {frames} decoded frames kept, padding included")),
        Some(n) if (n as usize) > frames => {
            warnings.push(format!("`fact` chunk says {n} frames but the data holds {frames}"))
        }
        _ => {}
    }
    Ok(pcm.into_iter().map(|c| c.into_iter().map(|s| s as f32 / 32768.0).collect()).collect())
}

/// Decodes Microsoft ADPCM blocks, trimmed to the `fact` length.
fn decode_ms_adpcm(data: &[u8], f: &WavFormat, fact: Option<u32>, warnings: &mut Vec<String>) -> Result<Vec<Vec<f32>>> {
    let ch = f.channels as usize;
    let (pcm, notes) = ms_adpcm::decode_blocks(data, ch, f.block_align as usize, fact.map_or(u64::MAX, |n| n as u64))?;
    let frames = pcm.first().map_or(0, |c| c.len());
    if notes.bad_predictor > 0 {
        warnings.push(format!(
            "{} with a predictor index above 6 (taken as 0)",
            plural(notes.bad_predictor, "Microsoft ADPCM block header")
        ));
    }
    if notes.leftover_bytes > 0 {
        warnings.push(format!(
            "the Microsoft ADPCM data ends with {} that do not make a block header: ignored",
            plural(notes.leftover_bytes, "byte")
        ));
    }
    match fact {
        None => warnings.push(format!(
            "Microsoft ADPCM file without a `fact` chunk: all {frames} decoded frames kept, padding included"
        )),
        Some(n) if (n as usize) > frames => {
            warnings.push(format!("`fact` chunk says {n} frames but the data holds {frames}"))
        }
        _ => {}
    }
    Ok(pcm.into_iter().map(|c| c.into_iter().map(|s| s as f32 / 32768.0).collect()).collect())
}

fn parse_smpl(b: &[u8], frames: usize, meta: &mut WavMeta) {
    let w = &mut meta.warnings;
    if b.len() < 36 {
        w.push(format!("`smpl` chunk is {} bytes, shorter than its 36-byte header: ignored", b.len()));
        return;
    }
    meta.unity_note = Some(u32_at(b, 12));
    let declared = u32_at(b, 28) as usize;
    let room = (b.len() - 36) / 24;
    if declared > room {
        w.push(format!("`smpl` chunk declares {declared} loops but has room for {room}: read {room}"));
    }
    for i in 0..declared.min(room) {
        let l = &b[36 + 24 * i..36 + 24 * (i + 1)];
        let (loop_type, start, mut end, play_count) = (u32_at(l, 4), u32_at(l, 8), u32_at(l, 12), u32_at(l, 20));
        if frames > 0 && end as u64 == frames as u64 && start < end {
            w.push(format!("`smpl` loop {i} ends at frame {end}, one past the last: taken as exclusive"));
            end -= 1;
        }
        if start > end {
            w.push(format!("`smpl` loop {i} starts at frame {start}, after its end {end}: dropped"));
        } else if end as u64 >= frames as u64 {
            w.push(format!("`smpl` loop {i} ends at frame {end} but the sound has {frames} frames: dropped"));
        } else {
            meta.loops.push(SampleLoop { start, end, loop_type, play_count });
        }
    }
}

fn parse_cue(b: &[u8], meta: &mut WavMeta) {
    if b.len() < 4 {
        meta.warnings.push(format!("`cue ` chunk is {} bytes, shorter than 4: ignored", b.len()));
        return;
    }
    let declared = u32_at(b, 0) as usize;
    let room = (b.len() - 4) / 24;
    if declared > room {
        meta.warnings.push(format!("`cue ` chunk declares {declared} points but has room for {room}: read {room}"));
    }
    for i in 0..declared.min(room) {
        let p = &b[4 + 24 * i..4 + 24 * (i + 1)];
        meta.cues.push(CuePoint {
            id: u32_at(p, 0),
            position: u32_at(p, 4),
            chunk_id: [p[8], p[9], p[10], p[11]],
            chunk_start: u32_at(p, 12),
            block_start: u32_at(p, 16),
            sample_offset: u32_at(p, 20),
        });
    }
}

/// GSM 6.10 blocks; the `fact` chunk, when present, gives the true length.
fn decode_gsm610(data: &[u8], fact: Option<u32>, warnings: &mut Vec<String>) -> Vec<Vec<f32>> {
    let max = fact.map_or(u64::MAX, u64::from);
    let (pcm, rest) = gsm610::decode_blocks(data, max);
    if rest > 0 {
        warnings.push(format!("{rest} bytes after the last whole 65-byte GSM 6.10 block: ignored"));
    }
    if (pcm.len() as u64) < max && max != u64::MAX {
        warnings.push(format!("`fact` chunk says {max} frames but the data holds {}", pcm.len()));
    }
    vec![pcm.into_iter().map(|s| s as f32 / 32768.0).collect()]
}
