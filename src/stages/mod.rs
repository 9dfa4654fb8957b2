//! The stages of a chain: one file per stage, each a plain struct with a validating `new(&params, …)`, an
//! allocation-free `process` and `reset`, seen by the chain through the [`Stage`] trait (or, for the one stage that
//! changes the rate, as [`rate::RateReducer`] and [`rate::RateExpander`]).
//!
//! This module knows every stage: [`StageSpec`] is a stage's kind and parameters as a preset writes them,
//! [`build`] makes the stage for one channel, [`validate`] checks parameters without a source rate, and [`schema()`]
//! describes every kind's fields (units, ranges, defaults) for the page's forms and the CLI's help.
//!
//! To add a stage: a file here with its params struct and `impl Stage`, a variant in [`StageSpec`], an arm in
//! [`build`], and its fields in [`mod@schema`].

pub mod adpcm;
pub mod codec;
pub mod compand;
pub mod delta;
pub mod dither;
pub mod filter;
pub mod g711;
pub mod gain;
pub mod minifloat;
pub mod quantize;
pub mod rate;
pub mod schema;
mod stage;

pub use schema::schema;
pub use stage::{Stage, BLOCK};

use crate::error::Result;
use serde::{Deserialize, Serialize};

/// One stage of the chain and its parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum StageSpec {
    /// Gain in dB, then what happens beyond full scale (clip, wrap, fold, saturate).
    Gain(gain::GainParams),
    /// Sample-rate reduction (zero-order hold or band-limited); at most one active per chain.
    Rate(rate::RateParams),
    /// Uniform quantizer (with dither and noise shaping).
    Quantize(quantize::QuantizeParams),
    /// ITU-T G.711 μ-law or A-law, 8-bit, bit-exact encode and decode.
    G711(g711::G711Params),
    /// Continuous μ-law or A-law curve with adjustable μ or A and any bit count.
    Compand(compand::CompandParams),
    /// Minifloat with chosen exponent and mantissa bits.
    Minifloat(minifloat::MinifloatParams),
    /// IMA ADPCM (4-bit) encode then decode: hear what an ADPCM export will contain. Kept for version-1 presets;
    /// the same as `{"kind": "codec", "codec": "ima-adpcm"}`.
    Adpcm(adpcm::AdpcmParams),
    /// A 4-bit codec (IMA or Microsoft ADPCM, G.721, Dialogic VOX) encoded then decoded: hear what its export will
    /// contain.
    Codec(codec::CodecParams),
    /// 1-bit delta modulation (step, leak).
    Delta(delta::DeltaParams),
    /// A biquad filter (or a cascade) from the Audio EQ Cookbook: band-limit before a hold, tame images after it.
    Filter(filter::FilterParams),
}

/// Builds a rate-keeping stage for one channel; `None` for the rate stage (the chain builds that itself, against the
/// source rate). `sample_rate` is the rate where the stage runs (the source rate before the rate stage, the export
/// rate after it); `seed` is the preset's; `stream` distinguishes channels and stages for seeded generators.
pub fn build(spec: &StageSpec, sample_rate: u32, seed: u64, stream: u64) -> Result<Option<Box<dyn Stage>>> {
    Ok(Some(match spec {
        StageSpec::Gain(p) => Box::new(gain::Gain::new(p)?),
        StageSpec::Quantize(p) => Box::new(quantize::Quantizer::new(p, seed, stream)?),
        StageSpec::G711(p) => Box::new(g711::G711::new(p)?),
        StageSpec::Compand(p) => Box::new(compand::Compander::new(p)?),
        StageSpec::Minifloat(p) => Box::new(minifloat::Minifloat::new(p)?),
        StageSpec::Adpcm(p) => Box::new(adpcm::AdpcmRoundTrip::new(p)?),
        StageSpec::Codec(p) => Box::new(codec::CodecRoundTrip::new(p)?),
        StageSpec::Delta(p) => Box::new(delta::DeltaModulator::new(p)?),
        StageSpec::Filter(p) => Box::new(filter::Filter::new(p, sample_rate)?),
        StageSpec::Rate(_) => return Ok(None),
    }))
}

/// Checks what a stage needs of the signal it gets: a codec defined at one rate (G.721: 8000 Hz) refuses any other,
/// with an error that names the rate stage to add. `rate` is the sample rate at the stage's place in the chain.
pub fn check_rate(spec: &StageSpec, rate: u32) -> Result<()> {
    match spec {
        StageSpec::Codec(p) => p.codec.check_rate(rate),
        _ => Ok(()),
    }
}

/// Validates one stage's parameters (those that need no source rate; the rate stage is checked against the source
/// when a chain is built).
pub fn validate(spec: &StageSpec) -> Result<()> {
    match spec {
        StageSpec::Rate(p) => rate::RATE_HZ.check_u("rate_hz", p.rate_hz as u64),
        StageSpec::Filter(p) => p.validate(),
        other => build(other, crate::audio::MAX_SAMPLE_RATE, 0, 0).map(|_| ()),
    }
}
