//! The WAV reader. See the [module docs](super) for what it accepts and its error/warning policy.

use super::*;
use crate::audio::{Clip, MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::codec::g711::{alaw_to_linear, ulaw_to_linear};
use crate::codec::ima_adpcm as adpcm;
use crate::codec::{g721, gsm610, ms_adpcm};
use crate::error::{Error, Result};
use crate::io::{ExportMeta, SampleLoop, WavEncoding};

/// What a file's `fmt ` chunk says.
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct WavFormat {
    /// Format tag as stored (0xFFFE for `WAVE_FORMAT_EXTENSIBLE`).
    pub format_tag: u16,
    /// The format in effect: the tag, or for an extensible file the tag its subformat GUID stands for.
    pub sub_format: u16,
    /// Channels, 1 to 64.
    pub channels: u16,
    /// Frames per second, 1 to 768,000.
    pub sample_rate: u32,
    /// The stored average bytes per second (informative only; not checked).
    pub avg_bytes_per_sec: u32,
    /// Bytes per frame, or per block for IMA ADPCM.
    pub block_align: u16,
    /// Bits per sample as stored: the container width for PCM, 4 for IMA ADPCM.
    pub bits_per_sample: u16,
    /// Significant bits per sample: extensible's `wValidBitsPerSample`, otherwise `bits_per_sample`.
    pub valid_bits: u16,
    /// Extensible's speaker position mask.
    pub channel_mask: Option<u32>,
    /// IMA ADPCM samples per channel in one block.
    pub samples_per_block: Option<u16>,
}

impl WavFormat {
    /// The export encoding that writes this format back unchanged, if there is one (e.g. 8-bit PCM: `pcm-u8`;
    /// 64-bit float has none).
    pub fn encoding(&self) -> Option<WavEncoding> {
        match (self.sub_format, self.bits_per_sample) {
            (WAVE_FORMAT_PCM, 8) => Some(WavEncoding::PcmU8),
            (WAVE_FORMAT_PCM, 16) => Some(WavEncoding::PcmS16),
            (WAVE_FORMAT_PCM, 24) => Some(WavEncoding::PcmS24),
            (WAVE_FORMAT_PCM, 32) => Some(WavEncoding::PcmS32),
            (WAVE_FORMAT_IEEE_FLOAT, 32) => Some(WavEncoding::Float32),
            (WAVE_FORMAT_MULAW, _) => Some(WavEncoding::Mulaw),
            (WAVE_FORMAT_ALAW, _) => Some(WavEncoding::Alaw),
            (WAVE_FORMAT_IMA_ADPCM, _) => Some(WavEncoding::ImaAdpcm),
            (WAVE_FORMAT_MS_ADPCM, _) => Some(WavEncoding::MsAdpcm),
            (WAVE_FORMAT_G721_ADPCM, _) => Some(WavEncoding::G721),
            (WAVE_FORMAT_GSM610, _) => Some(WavEncoding::Gsm610),
            _ => None,
        }
    }

    /// A short description, e.g. `16-bit PCM`, `24-bit PCM in 32-bit containers (extensible)`, `IMA ADPCM`.
    pub fn describe(&self) -> String {
        let base = match self.sub_format {
            WAVE_FORMAT_PCM if self.valid_bits != self.bits_per_sample => {
                format!("{}-bit PCM in {}-bit containers", self.valid_bits, self.bits_per_sample)
            }
            WAVE_FORMAT_PCM => format!("{}-bit PCM", self.bits_per_sample),
            WAVE_FORMAT_IEEE_FLOAT => format!("{}-bit float", self.bits_per_sample),
            WAVE_FORMAT_MULAW => "G.711 mu-law".into(),
            WAVE_FORMAT_ALAW => "G.711 A-law".into(),
            WAVE_FORMAT_IMA_ADPCM => "IMA ADPCM".into(),
            WAVE_FORMAT_MS_ADPCM => "Microsoft ADPCM".into(),
            WAVE_FORMAT_G721_ADPCM => "G.721 ADPCM".into(),
            WAVE_FORMAT_GSM610 => "GSM 6.10".into(),
            t => format!("format {t:#06x}"),
        };
        if self.format_tag == WAVE_FORMAT_EXTENSIBLE {
            format!("{base} (extensible)")
        } else {
            base
        }
    }
}

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

fn u16_at(b: &[u8], i: usize) -> u16 {
    u16::from_le_bytes([b[i], b[i + 1]])
}

fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]])
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

fn tag_name(tag: u16) -> &'static str {
    match tag {
        0x0000 => " (unknown)",
        0x0002 => " (Microsoft ADPCM)",
        0x0010 => " (OKI ADPCM)",
        0x0022 => " (TrueSpeech)",
        0x0031 => " (GSM 6.10)",
        0x0040 => " (G.721 ADPCM)",
        0x0050 => " (MPEG)",
        0x0055 => " (MPEG Layer 3)",
        0x0064 => " (G.726 ADPCM)",
        0x00FF => " (AAC)",
        0x0161..=0x0163 => " (Windows Media Audio)",
        0xF1AC => " (FLAC)",
        _ => "",
    }
}

fn format_guid(g: &[u8]) -> String {
    format!(
        "{:08x}-{:04x}-{:04x}-{:02x}{:02x}-{:02x}{:02x}{:02x}{:02x}{:02x}{:02x}",
        u32_at(g, 0),
        u16_at(g, 4),
        u16_at(g, 6),
        g[8],
        g[9],
        g[10],
        g[11],
        g[12],
        g[13],
        g[14],
        g[15]
    )
}

fn plural(n: usize, one: &str) -> String {
    if n == 1 {
        format!("{n} {one}")
    } else {
        format!("{n} {one}s")
    }
}

/// Parses and checks the `fmt ` chunk.
pub(super) fn parse_fmt(b: &[u8], warnings: &mut Vec<String>) -> Result<WavFormat> {
    let err = |m: String| Err(Error::format(m));
    if b.len() < 16 {
        return err(format!("`fmt ` chunk is {} bytes, shorter than the 16 every format needs", b.len()));
    }
    let mut f = WavFormat {
        format_tag: u16_at(b, 0),
        sub_format: u16_at(b, 0),
        channels: u16_at(b, 2),
        sample_rate: u32_at(b, 4),
        avg_bytes_per_sec: u32_at(b, 8),
        block_align: u16_at(b, 12),
        bits_per_sample: u16_at(b, 14),
        valid_bits: u16_at(b, 14),
        channel_mask: None,
        samples_per_block: None,
    };
    let ch = f.channels as usize;
    let bits = f.bits_per_sample as usize;
    if ch == 0 {
        return err("`fmt ` chunk declares 0 channels".into());
    }
    if ch > MAX_CHANNELS {
        return err(format!("`fmt ` chunk declares {ch} channels (at most {MAX_CHANNELS} supported)"));
    }
    if f.sample_rate == 0 {
        return err("`fmt ` chunk declares a sample rate of 0 Hz".into());
    }
    if f.sample_rate > MAX_SAMPLE_RATE {
        return err(format!(
            "`fmt ` chunk declares a sample rate of {} Hz (at most {MAX_SAMPLE_RATE} supported)",
            f.sample_rate
        ));
    }
    // GSM 6.10 has no bits per sample: its writers put 0 there.
    if bits == 0 && f.format_tag != WAVE_FORMAT_GSM610 {
        return err("`fmt ` chunk declares 0 bits per sample".into());
    }
    let cb_size = (b.len() >= 18).then(|| u16_at(b, 16) as usize);
    if f.format_tag == WAVE_FORMAT_EXTENSIBLE {
        if b.len() < 40 || cb_size.unwrap_or(0) < 22 {
            return err(format!(
                "extensible `fmt ` chunk is {} bytes with cbSize {}; it needs 40 bytes with cbSize 22",
                b.len(),
                cb_size.unwrap_or(0)
            ));
        }
        let guid = &b[24..40];
        if guid[2..16] != GUID_TAIL {
            return err(format!("extensible `fmt ` chunk has an unknown subformat GUID {{{}}}", format_guid(guid)));
        }
        f.sub_format = u16_at(guid, 0);
        f.channel_mask = Some(u32_at(b, 20));
        if !matches!(f.sub_format, WAVE_FORMAT_PCM | WAVE_FORMAT_IEEE_FLOAT | WAVE_FORMAT_ALAW | WAVE_FORMAT_MULAW) {
            return err(format!(
                "extensible subformat {:#06x}{} is not supported",
                f.sub_format,
                tag_name(f.sub_format)
            ));
        }
        if !bits.is_multiple_of(8) {
            return err(format!("extensible `fmt ` chunk declares {bits}-bit containers (must be whole bytes)"));
        }
        let valid = u16_at(b, 18);
        if valid == 0 {
            warnings.push(format!("extensible `fmt ` chunk declares 0 valid bits: taken as {bits}"));
        } else if valid as usize > bits {
            return err(format!("extensible `fmt ` chunk declares {valid} valid bits in {bits}-bit containers"));
        } else {
            f.valid_bits = valid;
        }
    }
    let ba = f.block_align as usize;
    let container = match f.sub_format {
        WAVE_FORMAT_PCM => {
            if bits > 32 {
                return err(format!("{bits}-bit PCM is not supported (1 to 32 bits)"));
            }
            bits.div_ceil(8)
        }
        WAVE_FORMAT_IEEE_FLOAT => {
            if bits != 32 && bits != 64 {
                return err(format!("{bits}-bit float is not supported (32 or 64 bits)"));
            }
            bits / 8
        }
        WAVE_FORMAT_ALAW | WAVE_FORMAT_MULAW => {
            if bits != 8 {
                let name = if f.sub_format == WAVE_FORMAT_ALAW { "A-law" } else { "mu-law" };
                return err(format!("{name} with {bits} bits per sample (G.711 has 8)"));
            }
            1
        }
        WAVE_FORMAT_IMA_ADPCM => {
            if bits != 4 {
                return err(format!("IMA ADPCM with {bits} bits per sample is not supported (only 4)"));
            }
            let spb = adpcm::samples_per_block(ba, ch).map_err(|_| {
                Error::format(format!(
                    "IMA ADPCM block align {ba} does not fit {}: it must be a multiple of {} bytes, from {} to {}",
                    plural(ch, "channel"),
                    4 * ch,
                    8 * ch,
                    adpcm::max_block_align(ch)
                ))
            })?;
            if b.len() >= 20 && cb_size.unwrap_or(0) >= 2 {
                let declared = u16_at(b, 18) as usize;
                if declared != spb {
                    return err(format!(
                        "IMA ADPCM `fmt ` chunk says {declared} samples per block, but a block align of {ba} bytes \
                         for {} holds {spb}",
                        plural(ch, "channel")
                    ));
                }
            } else {
                warnings.push(format!("IMA ADPCM `fmt ` chunk lacks samplesPerBlock: taken as {spb}"));
            }
            f.samples_per_block = Some(spb as u16);
            return Ok(f);
        }
        WAVE_FORMAT_MS_ADPCM => {
            if bits != 4 {
                return err(format!("Microsoft ADPCM with {bits} bits per sample is not supported (only 4)"));
            }
            let spb = ms_adpcm::samples_per_block(ba, ch).map_err(|e| {
                Error::format(format!("Microsoft ADPCM block align {ba} with {}: {e}", plural(ch, "channel")))
            })?;
            if b.len() >= 22 && cb_size.unwrap_or(0) >= 4 {
                let declared = u16_at(b, 18) as usize;
                if declared != spb {
                    return err(format!(
                        "Microsoft ADPCM `fmt ` chunk says {declared} samples per block, but a block align of {ba} \
                         bytes for {} holds {spb}",
                        plural(ch, "channel")
                    ));
                }
                // The format stores its coefficient table; every decoder in use (Microsoft's, libsndfile) uses the
                // seven standard pairs regardless, and so does this one.
                let n = u16_at(b, 20) as usize;
                let standard = n >= 7
                    && b.len() >= 22 + 4 * 7
                    && (0..7).all(|k| {
                        u16_at(b, 22 + 4 * k) as i16 as i32 == ms_adpcm::COEF1[k]
                            && u16_at(b, 24 + 4 * k) as i16 as i32 == ms_adpcm::COEF2[k]
                    });
                if !standard {
                    warnings.push(
                        "Microsoft ADPCM coefficient table is not the standard one: decoded with the standard pairs"
                            .into(),
                    );
                }
            } else {
                warnings.push(format!("Microsoft ADPCM `fmt ` chunk lacks samplesPerBlock: taken as {spb}"));
            }
            f.samples_per_block = Some(spb as u16);
            return Ok(f);
        }
        WAVE_FORMAT_G721_ADPCM => {
            if bits != 4 {
                return err(format!("G.721 with {bits} bits per sample is not supported (32 kbit/s: 4)"));
            }
            if ch != 1 {
                return err(format!("G.721 with {} is not supported (one channel)", plural(ch, "channel")));
            }
            // A continuous stream: the block align only says how writers padded it.
            return Ok(f);
        }
        WAVE_FORMAT_GSM610 => {
            if ch != 1 || ba != gsm610::BLOCK_BYTES {
                return err(format!(
                    "GSM 6.10 with {} and block align {ba} is not supported (one channel, 65-byte blocks)",
                    plural(ch, "channel")
                ));
            }
            f.samples_per_block = Some(gsm610::SAMPLES_PER_BLOCK as u16);
            return Ok(f);
        }
        t => return err(format!("unsupported format tag {t:#06x}{}", tag_name(t))),
    };
    let expected = ch * container;
    if ba != expected {
        let what = if bits.is_multiple_of(8) {
            format!("{bits} bits")
        } else {
            format!("{bits} bits in {container}-byte containers")
        };
        return err(format!(
            "block align {ba} does not match {} × {what} (expected {expected})",
            plural(ch, "channel")
        ));
    }
    Ok(f)
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
    let table: Option<Vec<f32>> = match f.sub_format {
        WAVE_FORMAT_MULAW => Some((0..=255u8).map(|c| ulaw_to_linear(c) as f32 / 32768.0).collect()),
        WAVE_FORMAT_ALAW => Some((0..=255u8).map(|c| alaw_to_linear(c) as f32 / 32768.0).collect()),
        _ => None,
    };
    let decode: fn(&[u8]) -> f32 = match (f.sub_format, width) {
        (WAVE_FORMAT_IEEE_FLOAT, 4) => |b| f32::from_le_bytes([b[0], b[1], b[2], b[3]]),
        (WAVE_FORMAT_IEEE_FLOAT, _) => |b| f64::from_le_bytes([b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7]]) as f32,
        // 8-bit WAV samples are unsigned: 128 is silence.
        (_, 1) => |b| (b[0] as f32 - 128.0) / 128.0,
        (_, 2) => |b| i16::from_le_bytes([b[0], b[1]]) as f32 / 32768.0,
        (_, 3) => |b| (i32::from_le_bytes([0, b[0], b[1], b[2]]) >> 8) as f32 / 8_388_608.0,
        _ => |b| (i32::from_le_bytes([b[0], b[1], b[2], b[3]]) as f64 / 2_147_483_648.0) as f32,
    };
    for fr in data.chunks_exact(frame) {
        for (c, s) in out.iter_mut().zip(fr.chunks_exact(width)) {
            c.push(match &table {
                Some(t) => t[s[0] as usize],
                None => decode(s),
            });
        }
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
