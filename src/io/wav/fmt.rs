//! The `fmt ` chunk: what it says ([`WavFormat`]) and its checks ([`parse_fmt`]).

use super::*;
use crate::audio::{MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::codec::ima_adpcm as adpcm;
use crate::codec::{gsm610, ms_adpcm};
use crate::error::{Error, Result};
use crate::io::WavEncoding;

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

pub(super) fn u16_at(b: &[u8], i: usize) -> u16 {
    u16::from_le_bytes([b[i], b[i + 1]])
}

pub(super) fn u32_at(b: &[u8], i: usize) -> u32 {
    u32::from_le_bytes([b[i], b[i + 1], b[i + 2], b[i + 3]])
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

pub(super) fn plural(n: usize, one: &str) -> String {
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
