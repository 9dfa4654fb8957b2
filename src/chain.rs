//! The processing chain: an ordered list of stages, each with a bypass flag, applied to every channel of a clip.
//!
//! A chain is built from a [`Preset`]: construction validates every stage (errors name `stages[i].param`) and
//! allocates everything; rendering then only runs `process` on fixed-size blocks.

use crate::analysis::{sqnr_db, Levels};
use crate::audio::Clip;
use crate::clip::Gain;
use crate::companding::{Compander, G711};
use crate::error::{Error, Result};
use crate::minifloat::Minifloat;
use crate::preset::{Preset, StageSpec};
use crate::quantize::Quantizer;
use serde::Serialize;

/// Samples per block when rendering.
pub const BLOCK: usize = 4096;

/// A stage that keeps the sample rate: processes a block in place, never allocates.
pub trait Stage: Send {
    /// Processes `buf` in place.
    fn process(&mut self, buf: &mut [f32]);
    /// Returns to the freshly built state (seeded generators restart).
    fn reset(&mut self);
    /// Samples clipped by this stage so far.
    fn clipped(&self) -> u64 {
        0
    }
    /// The SQNR in dB a formula predicts for this stage on a busy, unclipped input of mean square `input_ms`, where
    /// a simple formula exists (see each stage's docs for its conditions).
    fn theory_sqnr_db(&self, input_ms: f64) -> Option<f64> {
        let _ = input_ms;
        None
    }
}

impl Stage for Quantizer {
    fn process(&mut self, buf: &mut [f32]) {
        Quantizer::process(self, buf)
    }
    fn reset(&mut self) {
        Quantizer::reset(self)
    }
    fn clipped(&self) -> u64 {
        Quantizer::clipped(self)
    }
    fn theory_sqnr_db(&self, input_ms: f64) -> Option<f64> {
        Some(crate::analysis::power_db(input_ms / Quantizer::theory_error_power(self)))
    }
}

/// Builds the run-time stage for one channel. `stream` distinguishes channels for seeded generators.
fn build_stage(spec: &StageSpec, seed: u64, stream: u64) -> Result<Box<dyn Stage>> {
    Ok(match spec {
        StageSpec::Gain(p) => Box::new(Gain::new(p)?),
        StageSpec::Quantize(p) => Box::new(Quantizer::new(p, seed, stream)?),
        StageSpec::G711(p) => Box::new(G711::new(p)?),
        StageSpec::Compand(p) => Box::new(Compander::new(p)?),
        StageSpec::Minifloat(p) => Box::new(Minifloat::new(p)?),
    })
}

/// Validates one stage's parameters.
pub fn validate_stage(spec: &StageSpec) -> Result<()> {
    build_stage(spec, 0, 0).map(|_| ())
}

/// What a render reports besides the samples.
#[derive(Debug, Clone, Serialize)]
pub struct RenderReport {
    /// Source sample rate in Hz.
    pub source_rate: u32,
    /// Sample rate of the export in Hz.
    pub export_rate: u32,
    /// Frames of the source.
    pub frames: usize,
    /// Frames of the export (at `export_rate`).
    pub export_frames: usize,
    /// Number of channels.
    pub channels: usize,
    /// NaN and ±Inf input samples (replaced by 0 and ±1.0 before the first stage; they never reach an export).
    pub non_finite_inputs: u64,
    /// Clipped samples per stage (all channels), in chain order; bypassed stages read 0.
    pub clipped_per_stage: Vec<u64>,
    /// Sum of `clipped_per_stage`.
    pub clipped: u64,
    /// Levels of the input.
    pub input: Levels,
    /// Levels of the output.
    pub output: Levels,
    /// Measured SQNR in dB: input power over the power of (output − input), all channels.
    pub sqnr_db: f64,
    /// The SQNR theory predicts for this input, where a simple formula applies: the chain has one active stage that
    /// has a formula, and nothing clipped. Uniform quantizer: input power over Δ²/12 plus the dither's variance, times
    /// the noise-shaping gain. Compander and minifloat: their level-independent formulas (see their docs).
    pub theory_sqnr_db: Option<f64>,
    /// Why there is no theory figure, when there is none.
    pub theory_note: Option<String>,
}

/// The result of rendering a clip through a chain.
#[derive(Debug, Clone)]
pub struct Render {
    /// The processed sound at the export rate: what an exporter writes.
    pub export: Clip,
    /// The processed sound at the source rate, aligned sample for sample with the input (for audition and for error
    /// signals).
    pub audition: Clip,
    /// Figures about the render.
    pub report: RenderReport,
}

impl Render {
    /// Error signal (audition − input) of channel `ch`, aligned.
    pub fn error(&self, input: &Clip, ch: usize) -> Vec<f32> {
        self.audition.channels[ch].iter().zip(&input.channels[ch]).map(|(&o, &i)| o - sanitize(i)).collect()
    }
}

/// Replaces NaN by 0 and ±Inf by ±1.0.
#[inline]
pub fn sanitize(x: f32) -> f32 {
    if x.is_nan() {
        0.0
    } else if x.is_infinite() {
        x.signum()
    } else {
        x
    }
}

/// A chain built for a given channel count and sample rate.
pub struct Chain {
    /// Per channel, per stage: the run-time stage, or `None` when bypassed.
    lanes: Vec<Vec<Option<Box<dyn Stage>>>>,
    source_rate: u32,
    export_rate: u32,
}

impl Chain {
    /// Builds the chain of `preset` for `channels` channels at `sample_rate` Hz.
    pub fn new(preset: &Preset, channels: usize, sample_rate: u32) -> Result<Self> {
        if channels == 0 {
            return Err(Error::param("channels", channels, "1 or more"));
        }
        let mut lanes = Vec::with_capacity(channels);
        for ch in 0..channels {
            let mut lane = Vec::with_capacity(preset.stages.len());
            for (i, slot) in preset.stages.iter().enumerate() {
                let stage = build_stage(&slot.stage, preset.seed, (i * 64 + ch) as u64)
                    .map_err(|e| e.at(&format!("stages[{i}]")))?;
                lane.push((!slot.bypass).then_some(stage));
            }
            lanes.push(lane);
        }
        Ok(Chain { lanes, source_rate: sample_rate, export_rate: sample_rate })
    }

    /// Resets every stage.
    pub fn reset(&mut self) {
        self.lanes.iter_mut().flatten().flatten().for_each(|s| s.reset());
    }

    /// Renders a whole clip.
    pub fn render(&mut self, input: &Clip) -> Result<Render> {
        if input.channel_count() != self.lanes.len() {
            return Err(Error::param("channels", input.channel_count(), format!("{} (as built)", self.lanes.len())));
        }
        if input.sample_rate != self.source_rate {
            return Err(Error::param("sample_rate", input.sample_rate, format!("{} Hz (as built)", self.source_rate)));
        }
        self.reset();
        let mut non_finite = 0u64;
        let mut out_channels = Vec::with_capacity(input.channel_count());
        for (lane, x) in self.lanes.iter_mut().zip(&input.channels) {
            let mut y: Vec<f32> = Vec::with_capacity(x.len());
            for block in x.chunks(BLOCK) {
                let start = y.len();
                y.extend(block.iter().map(|&s| {
                    non_finite += (!s.is_finite()) as u64;
                    sanitize(s)
                }));
                for stage in lane.iter_mut().flatten() {
                    stage.process(&mut y[start..]);
                }
            }
            out_channels.push(y);
        }
        let clipped_per_stage: Vec<u64> = (0..self.lanes.first().map_or(0, |l| l.len()))
            .map(|i| self.lanes.iter().map(|l| l[i].as_ref().map_or(0, |s| s.clipped())).sum())
            .collect();
        let audition = Clip { sample_rate: self.source_rate, channels: out_channels };
        let export = Clip { sample_rate: self.export_rate, channels: audition.channels.clone() };
        let input_levels = Levels::measure(&input.channels);
        let (theory_sqnr_db, theory_note) = self.theory(&input_levels, clipped_per_stage.iter().sum());
        let report = RenderReport {
            source_rate: self.source_rate,
            export_rate: self.export_rate,
            frames: input.frames(),
            export_frames: export.frames(),
            channels: input.channel_count(),
            sqnr_db: sqnr_db(&input.channels, &audition.channels),
            theory_sqnr_db,
            theory_note,
            non_finite_inputs: non_finite,
            clipped: clipped_per_stage.iter().sum(),
            clipped_per_stage,
            input: input_levels,
            output: Levels::measure(&audition.channels),
        };
        Ok(Render { export, audition, report })
    }

    fn theory(&self, input: &Levels, clipped: u64) -> (Option<f64>, Option<String>) {
        let Some(lane) = self.lanes.first() else { return (None, Some("no channels".into())) };
        let active: Vec<&dyn Stage> = lane.iter().flatten().map(|s| s.as_ref()).collect();
        let note = |s: &str| (None, Some(s.to_string()));
        match active.as_slice() {
            [] => note("no active stage: the output equals the input"),
            [only] => {
                // Mean square of the input, from its sine-referenced RMS (rms_dbfs is 10·log10(2·ms)).
                let ms = 10f64.powf(input.rms_dbfs / 10.0) / 2.0;
                match only.theory_sqnr_db(ms) {
                    None => note("no simple formula for this stage: measured only"),
                    Some(_) if clipped > 0 => note("the stage clipped: the formula assumes no overload"),
                    Some(t) => (Some(t), None),
                }
            }
            _ => note("several active stages: no simple formula, measured only"),
        }
    }
}

/// Convenience: builds the chain of `preset` for `input` and renders it.
pub fn render(preset: &Preset, input: &Clip) -> Result<Render> {
    Chain::new(preset, input.channel_count(), input.sample_rate)?.render(input)
}
