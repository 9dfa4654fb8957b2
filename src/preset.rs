//! Presets: a chain, export settings and a seed, as versioned JSON shared by the page and the CLI.
//!
//! ```json
//! {
//!   "format": "stairstep-preset",
//!   "version": 1,
//!   "name": "8-bit, TPDF",
//!   "seed": 1,
//!   "stages": [ { "kind": "quantize", "bits": 8, "dither": "tpdf" } ],
//!   "export": { "type": "wav", "encoding": "pcm-u8" }
//! }
//! ```
//! Every stage object has `kind` and an optional `bypass` (default false); its other fields are the stage's
//! parameters, each with a default. Unknown fields are errors, so a typo never passes silently.

use crate::error::{Error, Range, Result};
use crate::io::ExportFormat;
use crate::prep::PrepParams;
use crate::stages::quantize::QuantizeParams;
use crate::stages::{self, StageSpec};
use serde::{Deserialize, Serialize};

/// Value of the `format` field.
pub const PRESET_FORMAT: &str = "stairstep-preset";
/// Newest preset version this build reads and the one it writes.
pub const PRESET_VERSION: u32 = 1;

/// A stage in a preset, with its bypass flag.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StageSlot {
    /// When true the stage is kept in the chain but not applied.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub bypass: bool,
    /// Blend of the stage's output with its own input, 0 (input only) to 1 (output only, the default): equal-gain,
    /// `mix·wet + (1 − mix)·dry`, sample for sample (a stage that keeps the rate has no latency to align). Not
    /// allowed on the rate stage (its input and output run at different rates): use the chain's `mix`.
    #[serde(default = "full_mix", skip_serializing_if = "is_full_mix")]
    pub mix: f64,
    /// The stage.
    #[serde(flatten)]
    pub stage: StageSpec,
}

impl From<StageSpec> for StageSlot {
    fn from(stage: StageSpec) -> Self {
        StageSlot { bypass: false, mix: 1.0, stage }
    }
}

/// A complete preset.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Preset {
    /// Always [`PRESET_FORMAT`].
    pub format: String,
    /// Schema version, 1 to [`PRESET_VERSION`].
    pub version: u32,
    /// A name for people.
    #[serde(default)]
    pub name: String,
    /// What the preset is for, in a sentence.
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub description: String,
    /// Seed of every random generator in the chain (dither). Same preset and seed, same bytes.
    #[serde(default = "default_seed")]
    pub seed: u64,
    /// Asset preparation applied before the chain: channels, trim, fades, normalisation, loop region.
    #[serde(default, skip_serializing_if = "PrepParams::is_noop")]
    pub prep: PrepParams,
    /// The chain, in processing order.
    #[serde(default)]
    pub stages: Vec<StageSlot>,
    /// Blend of the chain's output with its input, 0 (input only) to 1 (processed only, the default): equal-gain,
    /// `mix·wet + (1 − mix)·dry`. Equal gain rather than equal power because the two signals are strongly correlated
    /// (the crushed sound is the dry sound plus an error), so a linear crossfade keeps the level. With a rate stage
    /// the dry signal is the input through that rate stage alone, so the export keeps one rate and the blend is of
    /// everything but the rate change; the rate stage's latency applies to both alike, so they stay aligned.
    #[serde(default = "full_mix", skip_serializing_if = "is_full_mix")]
    pub mix: f64,
    /// How to write the result.
    #[serde(default)]
    pub export: ExportFormat,
}

fn default_seed() -> u64 {
    1
}

fn full_mix() -> f64 {
    1.0
}

fn is_full_mix(mix: &f64) -> bool {
    *mix == 1.0
}

/// Allowed values of a `mix`.
pub const MIX: Range = Range::new(0.0, 1.0);

impl Default for Preset {
    fn default() -> Self {
        Preset {
            format: PRESET_FORMAT.into(),
            version: PRESET_VERSION,
            name: String::new(),
            description: String::new(),
            seed: default_seed(),
            prep: PrepParams::default(),
            stages: Vec::new(),
            mix: 1.0,
            export: ExportFormat::default(),
        }
    }
}

impl Preset {
    /// The stages that are not bypassed, in chain order.
    pub fn active_stages(&self) -> impl Iterator<Item = &StageSpec> {
        self.stages.iter().filter(|s| !s.bypass).map(|s| &s.stage)
    }

    /// A preset with these stages and default everything else.
    pub fn with_stages(name: &str, stages: Vec<StageSpec>) -> Self {
        Preset { name: name.into(), stages: stages.into_iter().map(Into::into).collect(), ..Default::default() }
    }

    /// Parses and validates a preset.
    pub fn from_json(text: &str) -> Result<Self> {
        let p: Preset = serde_json::from_str(text).map_err(|e| Error::Preset(e.to_string()))?;
        p.validate()?;
        Ok(p)
    }

    /// Pretty JSON.
    pub fn to_json(&self) -> String {
        serde_json::to_string_pretty(self).expect("a preset always serialises")
    }

    /// Checks the header and every stage; errors name the field, e.g. `stages[1].bits`.
    pub fn validate(&self) -> Result<()> {
        if self.format != PRESET_FORMAT {
            return Err(Error::param("format", format!("{:?}", self.format), format!("{PRESET_FORMAT:?}")));
        }
        if self.version == 0 || self.version > PRESET_VERSION {
            return Err(Error::param("version", self.version, format!("1..={PRESET_VERSION}")));
        }
        self.prep.validate().map_err(|e| e.at("prep"))?;
        MIX.check_f("mix", self.mix, "")?;
        for (i, slot) in self.stages.iter().enumerate() {
            let at = |e: Error| e.at(&format!("stages[{i}]"));
            stages::validate(&slot.stage).map_err(at)?;
            MIX.check_f("mix", slot.mix, "").map_err(at)?;
            if slot.mix != 1.0 && matches!(slot.stage, StageSpec::Rate(_)) {
                return Err(at(Error::param(
                    "mix",
                    slot.mix,
                    "1 on a rate stage (its input and output run at different rates; use the chain's mix)",
                )));
            }
        }
        self.export.validate().map_err(|e| e.at("export"))
    }
}

/// The built-in presets, shared by the page and the CLI (`stairstep presets`).
pub fn builtin() -> Vec<Preset> {
    use crate::io::WavEncoding;
    use crate::stages::dither::DitherKind;
    use crate::stages::g711::{G711Params, Law};
    use crate::stages::gain::{GainParams, Overflow};
    use crate::stages::minifloat::MinifloatParams;
    use crate::stages::rate::{RateMode, RateParams};
    let q = |p: QuantizeParams| StageSpec::Quantize(p);
    let wav = |encoding| ExportFormat::Wav { encoding, block_align: None };
    let make = |name: &str, description: &str, stages: Vec<StageSpec>, export: ExportFormat| Preset {
        description: description.into(),
        export,
        ..Preset::with_stages(name, stages)
    };
    vec![
        make(
            "handheld",
            "11,025 Hz zero-order hold and 8-bit TPDF dither into 8-bit unsigned WAV: a small console's sample channel",
            vec![
                StageSpec::Rate(RateParams::hold(11_025)),
                q(QuantizeParams { dither: DitherKind::Tpdf, ..QuantizeParams::bits(8) }),
            ],
            wav(WavEncoding::PcmU8),
        ),
        make(
            "phone-line",
            "8 kHz band-limited, then G.711 μ-law into a μ-law WAV: a telephone call",
            vec![
                StageSpec::Rate(RateParams { rate_hz: 8_000, mode: RateMode::Clean }),
                StageSpec::G711(G711Params { law: Law::Mulaw }),
            ],
            wav(WavEncoding::Mulaw),
        ),
        make(
            "sampler-4",
            "16 kHz hold, 4-bit rounding, no dither: the grit of an early 4-bit sampler",
            vec![StageSpec::Rate(RateParams::hold(16_000)), q(QuantizeParams::bits(4))],
            wav(WavEncoding::PcmS16),
        ),
        make(
            "clean-8",
            "8-bit with TPDF dither and first-order noise shaping at the source rate: the quietest honest 8-bit",
            vec![q(QuantizeParams {
                dither: DitherKind::Tpdf,
                shaping: crate::stages::dither::Shaping::FirstOrder,
                ..QuantizeParams::bits(8)
            })],
            wav(WavEncoding::PcmS16),
        ),
        make(
            "overflow-wrap",
            "+12 dB into two's-complement wrap-around, then 6 bits: the crackle of an integer overflow",
            vec![StageSpec::Gain(GainParams { gain_db: 12.0, overflow: Overflow::Wrap }), q(QuantizeParams::bits(6))],
            wav(WavEncoding::PcmS16),
        ),
        make(
            "tiny-float",
            "A 1-4-3 minifloat: fine near silence, coarse near full scale",
            vec![StageSpec::Minifloat(MinifloatParams::default())],
            wav(WavEncoding::Float32),
        ),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trips_through_json() {
        let p = Preset::with_stages("t", vec![StageSpec::Quantize(QuantizeParams::bits(5))]);
        assert_eq!(Preset::from_json(&p.to_json()).unwrap(), p);
    }

    #[test]
    fn errors_name_the_field() {
        let e = Preset::from_json(r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"quantize","bits":8},{"kind":"quantize","bits":40}]}"#)
            .unwrap_err();
        assert_eq!(e.to_string(), "parameter `stages[1].bits` is 40, allowed: 1..=24");
        let e = Preset::from_json(r#"{"format":"stairstep-preset","version":9}"#).unwrap_err();
        assert!(e.to_string().contains("version"), "{e}");
        let e = Preset::from_json(r#"{"format":"x","version":1}"#).unwrap_err();
        assert!(e.to_string().contains("format"), "{e}");
    }

    #[test]
    fn unknown_fields_and_kinds_are_rejected() {
        let e =
            Preset::from_json(r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"quantize","bitz":8}]}"#);
        assert!(e.unwrap_err().to_string().contains("bitz"));
        let e = Preset::from_json(r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"flanger"}]}"#);
        assert!(e.unwrap_err().to_string().contains("flanger"));
    }

    #[test]
    fn builtin_presets_are_valid_and_uniquely_named() {
        let all = builtin();
        let mut names: Vec<&str> = all.iter().map(|p| p.name.as_str()).collect();
        names.dedup();
        assert_eq!(names.len(), all.len());
        for p in &all {
            Preset::from_json(&p.to_json()).unwrap();
        }
    }

    #[test]
    fn bypass_defaults_to_false() {
        let p = Preset::from_json(r#"{"format":"stairstep-preset","version":1,"stages":[{"kind":"quantize"},{"kind":"quantize","bypass":true}]}"#).unwrap();
        assert!(!p.stages[0].bypass);
        assert!(p.stages[1].bypass);
    }
}
