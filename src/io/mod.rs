//! Reading and writing sound files: WAV (RIFF/WAVE), AIFF/AIFF-C, raw headerless samples, C source arrays.
//!
//! - [`wav`]: the WAV reader ([`wav::read`], [`wav::read_with_meta`]) and writer.
//! - [`aiff`]: the AIFF/AIFF-C writer and its loop markers.
//! - `decode` (native only): reads any supported file — WAV through [`wav`], FLAC, AIFF, Ogg Vorbis, MP3 and CAF
//!   through `symphonia`.
//! - [`read`] (every platform, the page's readers): WAV through [`wav`], AIFF/AIFF-C through [`aiff_read`], which
//!   gives the same floats as `symphonia` does for AIFF.
//! - [`ExportFormat`]: what a preset's `export` field says, with an exact [`file_size`](ExportFormat::file_size).
//! - [`raw`], [`c_array`]: the headerless and C source writers.
//!
//! Every integer encoding converts floats with [`crate::sample::pcm_code`] (round half away from zero, clamp), after
//! replacing NaN by 0 and ±Inf by ±1.0. So the output of an N-bit mid-tread quantizer is written without any further
//! rounding.

pub mod aiff;
pub mod aiff_read;
pub mod c_array;
mod codecs;
#[cfg(not(target_arch = "wasm32"))]
pub mod decode;
pub mod raw;
pub mod read;
pub mod wav;

use crate::audio::{Clip, MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::error::{Error, Result};
pub use aiff::AiffEncoding;
use serde::{Deserialize, Serialize};

/// Sample encodings a WAV export can use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum WavEncoding {
    /// 8-bit unsigned PCM (offset binary, 128 = silence).
    PcmU8,
    /// 16-bit signed PCM (the default).
    #[default]
    PcmS16,
    /// 24-bit signed PCM.
    PcmS24,
    /// 32-bit signed PCM.
    PcmS32,
    /// 32-bit IEEE float (format tag 3, with a `fact` chunk).
    Float32,
    /// G.711 μ-law, 8 bits (format tag 7, with a `fact` chunk). The 16-bit code of each sample is companded as
    /// `audioop.lin2ulaw` does.
    Mulaw,
    /// G.711 A-law, 8 bits (format tag 6, with a `fact` chunk), as `audioop.lin2alaw`.
    Alaw,
    /// IMA ADPCM, 4 bits (format tag 0x11), see [`crate::codec::ima_adpcm`].
    ImaAdpcm,
    /// Microsoft ADPCM, 4 bits (format tag 0x0002; 1 or 2 channels), see [`crate::codec::ms_adpcm`].
    MsAdpcm,
    /// ITU-T G.721 32 kbit/s ADPCM (format tag 0x0040; one channel at 8000 Hz), see [`crate::codec::g721`].
    G721,
    /// GSM 06.10 full-rate (format tag 0x0031, Microsoft's "WAV49" packing: two 260-bit frames in 65 bytes; one
    /// channel at 8000 Hz), see [`crate::codec::gsm610`].
    Gsm610,
}

impl WavEncoding {
    /// Every encoding, in declaration order.
    pub const ALL: [WavEncoding; 11] = [
        WavEncoding::PcmU8,
        WavEncoding::PcmS16,
        WavEncoding::PcmS24,
        WavEncoding::PcmS32,
        WavEncoding::Float32,
        WavEncoding::Mulaw,
        WavEncoding::Alaw,
        WavEncoding::ImaAdpcm,
        WavEncoding::MsAdpcm,
        WavEncoding::G721,
        WavEncoding::Gsm610,
    ];

    /// The name used in presets, e.g. `pcm-s16`.
    pub fn name(self) -> &'static str {
        match self {
            WavEncoding::PcmU8 => "pcm-u8",
            WavEncoding::PcmS16 => "pcm-s16",
            WavEncoding::PcmS24 => "pcm-s24",
            WavEncoding::PcmS32 => "pcm-s32",
            WavEncoding::Float32 => "float32",
            WavEncoding::Mulaw => "mulaw",
            WavEncoding::Alaw => "alaw",
            WavEncoding::ImaAdpcm => "ima-adpcm",
            WavEncoding::MsAdpcm => "ms-adpcm",
            WavEncoding::G721 => "g721",
            WavEncoding::Gsm610 => "gsm610",
        }
    }

    /// Whether samples map to whole bytes (PCM, float, G.711): what the streaming writer and reader handle.
    pub fn is_byte_aligned(self) -> bool {
        !matches!(self, WavEncoding::ImaAdpcm | WavEncoding::MsAdpcm | WavEncoding::G721 | WavEncoding::Gsm610)
    }
}

/// Byte order of 16-bit raw samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Endian {
    /// Least significant byte first (default).
    #[default]
    Little,
    /// Most significant byte first.
    Big,
}

/// Where the first of several sub-byte samples goes within a byte.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum BitOrder {
    /// The first sample takes the most significant bits (default; e.g. 4-bit: first sample in bits 7–4).
    #[default]
    MsbFirst,
    /// The first sample takes the least significant bits (e.g. 4-bit: first sample in bits 3–0).
    LsbFirst,
}

/// Element type of a C array export.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CElement {
    /// `int8_t`, −128 to 127 (default).
    #[default]
    Int8,
    /// `uint8_t`, 0 to 255, 128 = silence (offset binary).
    Uint8,
    /// `int16_t`, −32,768 to 32,767.
    Int16,
}

/// How an export is written. JSON forms:
///
/// - `{"type": "wav", "encoding": "pcm-s16"}`; `encoding` is one of `pcm-u8 pcm-s16 pcm-s24 pcm-s32 float32 mulaw
///   alaw ima-adpcm ms-adpcm g721 gsm610`; `ima-adpcm` and `ms-adpcm` also take `"block_align": 512` (bytes per block, all
///   channels; default 256 per channel).
/// - `{"type": "vox"}`: Dialogic 4-bit ADPCM, raw and headerless, one channel; see [`crate::codec::vox`].
/// - `{"type": "delta-bits", "step": 0.02, "leak": 1.0, "bit_order": "msb-first"}`: the packed bit stream of a 1-bit
///   delta modulator with that step and leak (one bit per sample, frames interleaved); see [`crate::codec::delta`].
///   The bits of a chain that ends with a `delta` stage of the same step and leak are exactly that stage's.
/// - `{"type": "aiff", "encoding": "pcm-s16"}`; `encoding` is one of `pcm-s8 pcm-s16 pcm-s24 float32` (AIFF-C);
///   see [`aiff`].
/// - `{"type": "raw", "bits": 4, "signed": false, "endian": "little", "bit_order": "msb-first"}`; see [`raw`].
/// - `{"type": "c-array", "element": "uint8", "name": "coin"}`; see [`c_array`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "type", rename_all = "kebab-case", deny_unknown_fields)]
pub enum ExportFormat {
    /// A RIFF/WAVE file.
    Wav {
        /// Sample encoding.
        #[serde(default)]
        encoding: WavEncoding,
        /// IMA and Microsoft ADPCM only: bytes per block including the per-channel headers (IMA: a multiple of
        /// 4 × channels). `None`: 256 × channels (505 samples per block for IMA, 500 for Microsoft ADPCM).
        #[serde(default, skip_serializing_if = "Option::is_none")]
        block_align: Option<u32>,
    },
    /// An AIFF file (AIFF-C for float), loops in `MARK` + `INST`.
    Aiff {
        /// Sample encoding.
        #[serde(default)]
        encoding: AiffEncoding,
    },
    /// Headerless interleaved integer samples.
    Raw {
        /// Bits per sample: 1, 2, 4, 8 or 16.
        bits: u32,
        /// Two's complement (true, default) or offset binary (false: code + 2^(bits−1)).
        #[serde(default = "yes")]
        signed: bool,
        /// Byte order of 16-bit samples (ignored for other widths). Default little.
        #[serde(default)]
        endian: Endian,
        /// Packing of 1-, 2- and 4-bit samples within a byte (ignored for 8 and 16). Default msb-first.
        #[serde(default)]
        bit_order: BitOrder,
    },
    /// Dialogic 4-bit ADPCM, raw (`.vox`), one channel.
    Vox,
    /// The packed bit stream of a 1-bit delta modulator.
    DeltaBits {
        /// Integrator step in full-scale units (as the `delta` stage's `step`).
        step: f64,
        /// Integrator leak per sample (as the `delta` stage's `leak`). Default 1.0.
        #[serde(default = "one")]
        leak: f64,
        /// Which bit of a byte the first sample takes. Default msb-first.
        #[serde(default)]
        bit_order: BitOrder,
    },
    /// A C99 header holding the samples as an array, with length, rate and loop constants.
    CArray {
        /// Element type; default `int8`.
        #[serde(default)]
        element: CElement,
        /// Array name, a C identifier; the constants are named after it in capitals. Default `sound`.
        #[serde(default = "default_c_name")]
        name: String,
    },
}

fn yes() -> bool {
    true
}

fn one() -> f64 {
    1.0
}

fn default_c_name() -> String {
    "sound".into()
}

impl Default for ExportFormat {
    fn default() -> Self {
        ExportFormat::wav(WavEncoding::PcmS16)
    }
}

/// A sustain loop, in frames, as a WAV `smpl` chunk stores it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct SampleLoop {
    /// First frame of the loop.
    pub start: u32,
    /// Last frame played in the loop (inclusive, as in `smpl`): a loop over the whole of an n-frame clip is
    /// `0..=n−1`.
    pub end: u32,
    /// `smpl` loop type: 0 forward (default), 1 alternating, 2 backward; other values are passed through.
    #[serde(default)]
    pub loop_type: u32,
    /// Times to play the loop; 0 = forever (default).
    #[serde(default)]
    pub play_count: u32,
}

impl SampleLoop {
    /// A forward loop played forever over frames `start..=end`.
    pub fn forward(start: u32, end: u32) -> Self {
        SampleLoop { start, end, loop_type: 0, play_count: 0 }
    }
}

/// Per-clip metadata written with an export (see [`ExportFormat::encode_with`]).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default)]
pub struct ExportMeta {
    /// Sustain loops. WAV writes them into a `smpl` chunk after the `data` chunk (so a plain PCM file keeps its
    /// 44-byte header); a C array gets `NAME_LOOP_START` / `NAME_LOOP_END` constants; raw output has nowhere to put
    /// them and ignores them.
    pub loops: Vec<SampleLoop>,
    /// MIDI note at which the sample plays at its recorded pitch (`smpl` field), 0 to 127. Default 60 (middle C).
    pub unity_note: u8,
}

impl Default for ExportMeta {
    fn default() -> Self {
        ExportMeta { loops: Vec::new(), unity_note: 60 }
    }
}

impl ExportMeta {
    /// Checks loops against a clip of `frames` frames; errors name `loops[i].start` / `loops[i].end`.
    pub fn validate(&self, frames: usize) -> Result<()> {
        if self.unity_note > 127 {
            return Err(Error::param("unity_note", self.unity_note, "0..=127"));
        }
        for (i, l) in self.loops.iter().enumerate() {
            if l.end as u64 >= frames as u64 {
                let allowed = if frames == 0 {
                    "none: the clip has no frames".to_string()
                } else {
                    format!("{}..={} (the last frame; `end` is inclusive)", l.start, frames - 1)
                };
                return Err(Error::param(format!("loops[{i}].end"), l.end, allowed));
            }
            if l.start > l.end {
                return Err(Error::param(
                    format!("loops[{i}].start"),
                    l.start,
                    format!("0..={} (the loop's end)", l.end),
                ));
            }
        }
        Ok(())
    }
}

/// Checks what the writers assume of a clip (its fields are public, so it may have been built by hand).
pub(crate) fn check_clip(clip: &Clip) -> Result<()> {
    let ch = clip.channel_count();
    if ch == 0 || ch > MAX_CHANNELS {
        return Err(Error::param("channels", ch, format!("1..={MAX_CHANNELS}")));
    }
    if clip.sample_rate == 0 || clip.sample_rate > MAX_SAMPLE_RATE {
        return Err(Error::param("sample_rate", clip.sample_rate, format!("1..={MAX_SAMPLE_RATE} Hz")));
    }
    if clip.channels.iter().any(|c| c.len() != clip.frames()) {
        return Err(Error::format("channels have different lengths"));
    }
    Ok(())
}

impl ExportFormat {
    /// A WAV export with this encoding and the default ADPCM block size.
    pub fn wav(encoding: WavEncoding) -> Self {
        ExportFormat::Wav { encoding, block_align: None }
    }

    /// Checks the settings that do not depend on the clip; errors name the field (`bits`, `name`, `block_align`).
    /// Settings that depend on the channel count (an ADPCM `block_align`) are checked again by
    /// [`encode`](Self::encode).
    pub fn validate(&self) -> Result<()> {
        match self {
            ExportFormat::Wav { encoding, block_align } => match (encoding, block_align) {
                (_, None) => Ok(()),
                (WavEncoding::MsAdpcm, Some(b)) => {
                    if !(8..=65_535).contains(b) {
                        Err(Error::param("block_align", b, "8 to 65535 bytes (7 header bytes per channel and codes)"))
                    } else {
                        Ok(())
                    }
                }
                (WavEncoding::ImaAdpcm, Some(b)) => {
                    if *b < 8 || b % 4 != 0 || *b > 65_532 {
                        Err(Error::param("block_align", b, "a multiple of 4 × channels, 8 to 65532 bytes"))
                    } else {
                        Ok(())
                    }
                }
                (e, Some(b)) => Err(Error::param(
                    "block_align",
                    b,
                    format!("only with encoding \"ima-adpcm\" or \"ms-adpcm\" (encoding is {:?})", e.name()),
                )),
            },
            ExportFormat::Aiff { .. } => Ok(()),
            ExportFormat::Raw { bits, .. } => raw::check_bits(*bits),
            ExportFormat::CArray { name, .. } => c_array::check_name(name),
            ExportFormat::Vox => Ok(()),
            ExportFormat::DeltaBits { step, leak, .. } => {
                crate::stages::delta::DeltaParams { step: *step, leak: *leak }.validate()
            }
        }
    }

    /// Usual file extension, without the dot: `wav`, `aif` (`aifc` for AIFF-C), `raw`, or `h` for a C array.
    pub fn extension(&self) -> &'static str {
        match self {
            ExportFormat::Wav { .. } => "wav",
            ExportFormat::Aiff { encoding: AiffEncoding::Float32 } => "aifc",
            ExportFormat::Aiff { .. } => "aif",
            ExportFormat::Raw { .. } | ExportFormat::DeltaBits { .. } => "raw",
            ExportFormat::Vox => "vox",
            ExportFormat::CArray { .. } => "h",
        }
    }

    /// Exact size in bytes of the file [`encode`](Self::encode) writes for `frames` frames of `channels` channels.
    /// Returns 0 for settings `encode` rejects (see [`validate`](Self::validate)).
    pub fn file_size(&self, frames: usize, channels: usize) -> u64 {
        self.file_size_with(frames, channels, &ExportMeta::default())
    }

    /// Exact size in bytes of the file [`encode_with`](Self::encode_with) writes (for loops that
    /// [`ExportMeta::validate`] accepts; 0 for settings `encode_with` rejects).
    pub fn file_size_with(&self, frames: usize, channels: usize, meta: &ExportMeta) -> u64 {
        if self.validate().is_err() {
            return 0;
        }
        match self {
            ExportFormat::Wav { encoding, block_align } => {
                wav::file_size_with(*encoding, block_align.map(|b| b as usize), frames, channels, meta).unwrap_or(0)
            }
            ExportFormat::Aiff { encoding } => aiff::file_size_with(*encoding, frames, channels, meta),
            ExportFormat::Raw { bits, .. } => raw::file_size(*bits, frames, channels),
            ExportFormat::CArray { element, name } => c_array::file_size(*element, name, frames, channels, meta),
            ExportFormat::Vox if channels == 1 => crate::codec::vox::byte_len(frames as u64),
            ExportFormat::Vox => 0,
            ExportFormat::DeltaBits { .. } => (frames as u64 * channels as u64).div_ceil(8),
        }
    }

    /// Encodes a clip in this format.
    pub fn encode(&self, clip: &Clip) -> Result<Vec<u8>> {
        self.encode_with(clip, &ExportMeta::default())
    }

    /// Encodes a clip with metadata (loops). Loops are checked against the clip (errors name `loops[i].end`).
    pub fn encode_with(&self, clip: &Clip, meta: &ExportMeta) -> Result<Vec<u8>> {
        self.validate()?;
        check_clip(clip)?;
        match self {
            ExportFormat::Wav { encoding, block_align } => {
                wav::write_with(clip, *encoding, block_align.map(|b| b as usize), meta)
            }
            ExportFormat::Aiff { encoding } => aiff::write_with(clip, *encoding, meta),
            ExportFormat::Raw { bits, signed, endian, bit_order } => raw::write(
                clip,
                &raw::RawLayout { bits: *bits, signed: *signed, endian: *endian, bit_order: *bit_order },
            ),
            ExportFormat::CArray { element, name } => c_array::write(clip, *element, name, meta),
            ExportFormat::Vox => codecs::write_vox(clip),
            ExportFormat::DeltaBits { step, leak, bit_order } => {
                codecs::write_delta_bits(clip, *step, *leak, *bit_order)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn serde_shapes() {
        let f: ExportFormat = serde_json::from_str(r#"{"type": "wav", "encoding": "pcm-s16"}"#).unwrap();
        assert_eq!(f, ExportFormat::default());
        assert_eq!(serde_json::to_string(&f).unwrap(), r#"{"type":"wav","encoding":"pcm-s16"}"#);
        for e in WavEncoding::ALL {
            let j = format!(r#"{{"type":"wav","encoding":"{}"}}"#, e.name());
            let f: ExportFormat = serde_json::from_str(&j).unwrap();
            assert_eq!(f, ExportFormat::Wav { encoding: e, block_align: None });
            assert_eq!(serde_json::to_string(&f).unwrap(), j);
        }
        let f: ExportFormat =
            serde_json::from_str(r#"{"type":"wav","encoding":"ima-adpcm","block_align":1024}"#).unwrap();
        assert_eq!(f, ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align: Some(1024) });
        let f: ExportFormat =
            serde_json::from_str(r#"{"type":"raw","bits":4,"signed":false,"endian":"little","bit_order":"msb-first"}"#)
                .unwrap();
        assert_eq!(
            f,
            ExportFormat::Raw { bits: 4, signed: false, endian: Endian::Little, bit_order: BitOrder::MsbFirst }
        );
        let f: ExportFormat = serde_json::from_str(r#"{"type":"raw","bits":16,"endian":"big"}"#).unwrap();
        assert_eq!(f, ExportFormat::Raw { bits: 16, signed: true, endian: Endian::Big, bit_order: BitOrder::MsbFirst });
        let f: ExportFormat = serde_json::from_str(r#"{"type":"c-array","element":"uint8","name":"coin"}"#).unwrap();
        assert_eq!(f, ExportFormat::CArray { element: CElement::Uint8, name: "coin".into() });
        assert_eq!(serde_json::to_string(&f).unwrap(), r#"{"type":"c-array","element":"uint8","name":"coin"}"#);
        for e in AiffEncoding::ALL {
            let j = format!(r#"{{"type":"aiff","encoding":"{}"}}"#, e.name());
            let f: ExportFormat = serde_json::from_str(&j).unwrap();
            assert_eq!(f, ExportFormat::Aiff { encoding: e });
            assert_eq!(serde_json::to_string(&f).unwrap(), j);
        }
        assert!(serde_json::from_str::<ExportFormat>(r#"{"type":"aiff","encoding":"pcm-u8"}"#).is_err());
        assert!(serde_json::from_str::<ExportFormat>(r#"{"type":"wav","encodin":"pcm-s16"}"#).is_err());
    }

    #[test]
    fn bad_combinations_name_the_field() {
        let cases = [
            (ExportFormat::Wav { encoding: WavEncoding::PcmS16, block_align: Some(512) }, "block_align"),
            (ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align: Some(6) }, "block_align"),
            (ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align: Some(70_000) }, "block_align"),
            (
                ExportFormat::Raw { bits: 3, signed: true, endian: Endian::Little, bit_order: BitOrder::MsbFirst },
                "bits",
            ),
            (
                ExportFormat::Raw { bits: 0, signed: true, endian: Endian::Little, bit_order: BitOrder::MsbFirst },
                "bits",
            ),
            (ExportFormat::CArray { element: CElement::Int8, name: "2coins".into() }, "name"),
            (ExportFormat::CArray { element: CElement::Int8, name: "int".into() }, "name"),
            (ExportFormat::CArray { element: CElement::Int8, name: "".into() }, "name"),
        ];
        for (f, field) in cases {
            let e = f.validate().unwrap_err();
            assert!(matches!(&e, Error::Param { name, .. } if name == field), "{f:?}: {e}");
            assert_eq!(f.file_size(10, 1), 0);
        }
        // Depends on the channel count: 260 is fine for mono, not for stereo.
        let f = ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align: Some(260) };
        let clip = Clip::new(8000, vec![vec![0.0; 10]; 2]).unwrap();
        assert!(f.encode(&clip).unwrap_err().to_string().contains("block_align"));
        assert_eq!(f.file_size(10, 2), 0);
        assert!(f.encode(&Clip::new(8000, vec![vec![0.0; 10]]).unwrap()).is_ok());
    }

    #[test]
    fn loops_are_checked_against_the_clip() {
        let clip = Clip::new(8000, vec![vec![0.0; 10]]).unwrap();
        let f = ExportFormat::default();
        let meta =
            |s, e| ExportMeta { loops: vec![SampleLoop::forward(0, 9), SampleLoop::forward(s, e)], unity_note: 60 };
        assert!(f.encode_with(&clip, &meta(2, 9)).is_ok());
        let e = f.encode_with(&clip, &meta(2, 10)).unwrap_err();
        assert!(e.to_string().contains("loops[1].end"), "{e}");
        let e = f.encode_with(&clip, &meta(5, 4)).unwrap_err();
        assert!(e.to_string().contains("loops[1].start"), "{e}");
    }

    #[test]
    fn hand_built_clips_are_rejected_not_panicked_on() {
        let f = ExportFormat::default();
        let bad = [
            Clip { sample_rate: 8000, channels: vec![] },
            Clip { sample_rate: 0, channels: vec![vec![0.0]] },
            Clip { sample_rate: 8000, channels: vec![vec![0.0], vec![]] },
        ];
        for c in &bad {
            assert!(f.encode(c).is_err());
        }
    }
}
