//! The codec round-trip stage: encode with one of the 4-bit codecs of [`crate::codec`] and decode again, so that
//! what you hear is exactly what a decoder of the matching export plays (sample for sample, when this stage is the
//! last of the chain and the export uses the same codec and block size).
//!
//! | `codec` | export | rate |
//! |---|---|---|
//! | `ima-adpcm` | `{"type": "wav", "encoding": "ima-adpcm"}` | any |
//! | `ms-adpcm` | `{"type": "wav", "encoding": "ms-adpcm"}` | any |
//! | `g721` | `{"type": "wav", "encoding": "g721"}` | 8000 Hz only |
//! | `vox-adpcm` | `{"type": "vox"}` | any (6–8 kHz typical) |
//! | `gsm610` | `{"type": "wav", "encoding": "gsm610"}` | 8000 Hz only |
//!
//! `gsm610` is frame-based: a 160-sample frame can be coded only once its last sample has arrived, and a stage
//! cannot look ahead, so this stage plays the decoded signal **one frame (160 samples, 20 ms) late** (silence for
//! the first frame; the last partial frame of a stream is not heard). Its output, moved 160 samples earlier, is
//! exactly what a decoder plays from the `gsm610` export of the stage's input (checked against libsndfile). Re-coding
//! decoded GSM is not transparent, so export the signal *before* this stage (a chain without it) to get the file it
//! lets you hear; the stage is for auditioning the codec's sound. The chain compensates no stage's delay, so the
//! chain's SQNR, its error signal and this stage's own figure compare its output with the input one frame earlier.
//!
//! `ima-adpcm` is the older `{"kind": "adpcm"}` stage under a new name and gives the same bytes. Each sample is
//! converted to 16 bits with [`pcm_code`] first (as the exports do) and the decoded value scaled back by 1/32768.

use crate::codec::g721::G721;
use crate::codec::gsm610::FrameRoundTrip;
use crate::codec::ms_adpcm::MsEncoder;
use crate::codec::vox::VoxState;
use crate::error::{Error, Range, Result};
use crate::sample::{pcm_code, sanitize};
use crate::stages::adpcm::{AdpcmParams, AdpcmRoundTrip};
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Allowed samples per block for `ms-adpcm` (even: a mono block holds two samples per byte).
pub const MS_SAMPLES_PER_BLOCK: Range = Range::new(4.0, 32_768.0);

/// The codecs, by their preset names.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum CodecName {
    /// IMA ADPCM (4-bit), WAV format 0x0011.
    #[default]
    ImaAdpcm,
    /// Microsoft ADPCM (4-bit), WAV format 0x0002.
    MsAdpcm,
    /// ITU-T G.721 32 kbit/s ADPCM, WAV format 0x0040; 8000 Hz only.
    G721,
    /// Dialogic 4-bit ADPCM, raw `.vox`.
    VoxAdpcm,
    /// GSM 06.10 full-rate (13 kbit/s), WAV format 0x0031; 8000 Hz only; one frame (160 samples) late.
    Gsm610,
}

impl CodecName {
    /// The name a preset uses.
    pub fn name(self) -> &'static str {
        match self {
            CodecName::ImaAdpcm => "ima-adpcm",
            CodecName::MsAdpcm => "ms-adpcm",
            CodecName::G721 => "g721",
            CodecName::VoxAdpcm => "vox-adpcm",
            CodecName::Gsm610 => "gsm610",
        }
    }

    /// The only sample rate the codec is defined at, if it has one.
    pub fn required_rate(self) -> Option<u32> {
        match self {
            CodecName::G721 | CodecName::Gsm610 => Some(8000),
            _ => None,
        }
    }

    /// Checks a sample rate against [`required_rate`](Self::required_rate); the error says which rate stage to add.
    pub fn check_rate(self, rate: u32) -> Result<()> {
        match self.required_rate() {
            Some(r) if r != rate => Err(Error::param(
                "codec",
                format!("{} at {rate} Hz", self.name()),
                format!("{r} Hz only: {} needs {r} Hz; add a rate stage with rate_hz {r} before it", self.name()),
            )),
            _ => Ok(()),
        }
    }
}

/// Parameters of [`CodecRoundTrip`].
#[derive(Debug, Clone, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CodecParams {
    /// Which codec (default `ima-adpcm`).
    pub codec: CodecName,
    /// `ima-adpcm` and `ms-adpcm` only: samples per channel in one block, where the coder restarts. Left out: the
    /// export's default (505 for IMA ADPCM, 500 for Microsoft ADPCM: 256 bytes per channel). IMA ADPCM: `8k + 1`,
    /// 9 to 65,529. Microsoft ADPCM: even, 4 to 32,768. Match the export's `block_align` (see each codec's
    /// `samples_per_block`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub samples_per_block: Option<u32>,
}

impl CodecParams {
    /// Checks the parameters (not the rate: see [`CodecName::check_rate`]).
    pub fn validate(&self) -> Result<()> {
        match (self.codec, self.samples_per_block) {
            (_, None) => Ok(()),
            (CodecName::ImaAdpcm, Some(s)) => AdpcmParams { samples_per_block: s }.validate(),
            (CodecName::MsAdpcm, Some(s)) => {
                if !s.is_multiple_of(2)
                    || (s as f64) < MS_SAMPLES_PER_BLOCK.min
                    || (s as f64) > MS_SAMPLES_PER_BLOCK.max
                {
                    Err(Error::param("samples_per_block", s, "even, 4 to 32768 (e.g. 500 or 2036)"))
                } else {
                    Ok(())
                }
            }
            (c, Some(s)) => Err(Error::param(
                "samples_per_block",
                s,
                format!("only with codec ima-adpcm or ms-adpcm ({} has no blocks)", c.name()),
            )),
        }
    }
}

#[derive(Debug, Clone)]
enum Coder {
    Ima(AdpcmRoundTrip),
    Ms(MsEncoder, usize),
    G721(Box<G721>),
    Vox(VoxState),
    Gsm(Box<FrameRoundTrip>),
}

/// The codec round trip for one channel.
#[derive(Debug, Clone)]
pub struct CodecRoundTrip {
    coder: Coder,
    clipped: u64,
}

impl CodecRoundTrip {
    /// Validates `params` and builds the stage.
    pub fn new(params: &CodecParams) -> Result<Self> {
        params.validate()?;
        let coder = match params.codec {
            CodecName::ImaAdpcm => Coder::Ima(AdpcmRoundTrip::new(&AdpcmParams {
                samples_per_block: params.samples_per_block.unwrap_or(AdpcmParams::default().samples_per_block),
            })?),
            CodecName::MsAdpcm => {
                let spb = params.samples_per_block.map_or(500, |s| s as usize);
                Coder::Ms(MsEncoder::new(spb), spb)
            }
            CodecName::G721 => Coder::G721(Box::default()),
            CodecName::VoxAdpcm => Coder::Vox(VoxState::default()),
            CodecName::Gsm610 => Coder::Gsm(Box::default()),
        };
        Ok(CodecRoundTrip { coder, clipped: 0 })
    }
}

impl Stage for CodecRoundTrip {
    fn process(&mut self, buf: &mut [f32]) {
        if let Coder::Ima(st) = &mut self.coder {
            return st.process(buf);
        }
        for s in buf.iter_mut() {
            let x = sanitize(*s);
            let v = (x as f64 * 32768.0).round();
            self.clipped += !(-32768.0..=32767.0).contains(&v) as u64;
            let code = pcm_code(x, 16) as i16;
            let y = match &mut self.coder {
                Coder::Ms(e, _) => e.push(code).1,
                Coder::G721(g) => g.round_trip(code).1,
                Coder::Vox(v) => {
                    v.encode(code);
                    v.last as i16
                }
                Coder::Gsm(g) => g.push(code),
                Coder::Ima(_) => unreachable!(),
            };
            *s = y as f32 / 32768.0;
        }
    }

    fn reset(&mut self) {
        self.coder = match &self.coder {
            Coder::Ima(st) => {
                let mut st = st.clone();
                st.reset();
                Coder::Ima(st)
            }
            Coder::Ms(_, spb) => Coder::Ms(MsEncoder::new(*spb), *spb),
            Coder::G721(_) => Coder::G721(Box::default()),
            Coder::Vox(_) => Coder::Vox(VoxState::default()),
            Coder::Gsm(_) => Coder::Gsm(Box::default()),
        };
        self.clipped = 0;
    }

    /// Samples at or beyond the 16-bit range that the conversion clamped.
    fn clipped(&self) -> u64 {
        match &self.coder {
            Coder::Ima(st) => st.clipped(),
            _ => self.clipped,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stages::StageSpec;

    fn run(spec: &str, input: &[f32]) -> Vec<f32> {
        let spec: StageSpec = serde_json::from_str(spec).unwrap();
        let mut st = crate::stages::build(&spec, 8_000, 0, 0).unwrap().unwrap();
        let mut buf = input.to_vec();
        for part in buf.chunks_mut(100) {
            st.process(part);
        }
        buf
    }

    /// `{"kind": "adpcm"}` and `{"kind": "codec", "codec": "ima-adpcm"}` give the same samples, block size included.
    #[test]
    fn ima_is_the_adpcm_stage() {
        let x: Vec<f32> = (0..3000).map(|i| (i as f32 * 0.013).sin() * 0.7).collect();
        assert_eq!(run(r#"{"kind":"adpcm"}"#, &x), run(r#"{"kind":"codec"}"#, &x));
        assert_eq!(
            run(r#"{"kind":"adpcm","samples_per_block":1017}"#, &x),
            run(r#"{"kind":"codec","codec":"ima-adpcm","samples_per_block":1017}"#, &x)
        );
    }

    #[test]
    fn params_are_checked_and_name_the_field() {
        for (codec, spb) in [
            (CodecName::ImaAdpcm, 10),
            (CodecName::MsAdpcm, 3),
            (CodecName::MsAdpcm, 501),
            (CodecName::MsAdpcm, 40_000),
            (CodecName::G721, 500),
            (CodecName::VoxAdpcm, 500),
            (CodecName::Gsm610, 320),
        ] {
            let e = CodecRoundTrip::new(&CodecParams { codec, samples_per_block: Some(spb) }).unwrap_err();
            assert!(e.to_string().contains("samples_per_block"), "{codec:?} {spb}: {e}");
        }
        let e = CodecName::G721.check_rate(44_100).unwrap_err().to_string();
        assert!(e.contains("add a rate stage with rate_hz 8000"), "{e}");
        assert!(CodecName::G721.check_rate(8000).is_ok());
        assert!(CodecName::MsAdpcm.check_rate(44_100).is_ok());
        let e = CodecName::Gsm610.check_rate(16_000).unwrap_err().to_string();
        assert!(e.contains("gsm610") && e.contains("add a rate stage with rate_hz 8000"), "{e}");
    }

    /// Every codec: reset restarts exactly; a full-scale sample is counted as clipped.
    #[test]
    fn reset_restarts_and_clips_are_counted() {
        for codec in [CodecName::ImaAdpcm, CodecName::MsAdpcm, CodecName::G721, CodecName::VoxAdpcm, CodecName::Gsm610]
        {
            let mut st = CodecRoundTrip::new(&CodecParams { codec, samples_per_block: None }).unwrap();
            let mut a: Vec<f32> = (0..1200).map(|i| (i as f32 * 0.05).sin() * 0.5).collect();
            a[7] = 1.0;
            let mut b = a.clone();
            st.process(&mut a);
            assert_eq!(st.clipped(), 1, "{codec:?}");
            st.reset();
            st.process(&mut b);
            assert_eq!(a, b, "{codec:?}");
        }
    }
}
