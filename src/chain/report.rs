//! What a render reports: the whole chain's figures and each stage's own ([`StageReport`]).

use super::stats::CodeSet;
use super::{Chain, Node};
use crate::analysis::Levels;
use crate::audio::Clip;
use serde::Serialize;

/// What one stage of the preset did, in a [`RenderReport`]. The units: dB, sample counts (all channels), Hz.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StageReport {
    /// The stage's `kind`, as in the preset (`"quantize"`, `"rate"`, …).
    pub kind: String,
    /// False when the stage is bypassed (then every figure below is empty or 0).
    pub active: bool,
    /// The rate this stage's output runs at, in Hz: the source rate before the rate stage, the export rate from it
    /// on. The stage's figures are measured at this rate, except the rate stage's own SQNR (at the source rate).
    pub rate_hz: u32,
    /// This stage's SQNR in dB: the power of its input over the power of (its output − its input), all channels
    /// (the gain stage: against its input times its gain, so only the overflow rule counts as error; the rate
    /// stage: its output brought back to the source rate against its input). `None` when the stage changed no
    /// sample (bypassed, or exact on this input) or when the chain was built without per-stage figures.
    pub sqnr_db: Option<f64>,
    /// Samples this stage clipped (as in `clipped_per_stage`).
    pub clipped: u64,
    /// For quantizers (uniform, G.711, compand, minifloat): how many distinct codes of their word the output used,
    /// all channels together (see each stage's `code_indices` for what a code is). `None` for other stages, or when
    /// the word has more than [`MAX_TRACKED_CODES`] codes.
    pub codes_used: Option<u64>,
    /// For quantizers: the number of codes of the word, `2^B` for a `B`-bit word (a uniform quantizer with `levels`
    /// set: that many levels).
    pub code_space: Option<u64>,
}

/// Largest code space whose codes a chain counts (a bit per code: 2 MiB at 2^24, a 24-bit quantizer's word).
pub const MAX_TRACKED_CODES: u64 = 1 << 24;

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
    /// Latency of the rate stage that was removed, in source-rate frames (0 without a clean-mode rate stage).
    pub latency_frames: usize,
    /// NaN and ±Inf input samples (replaced by 0 and ±1.0 before the first stage; they never reach an export).
    pub non_finite_inputs: u64,
    /// Clipped samples per stage (all channels), in chain order; bypassed stages read 0.
    pub clipped_per_stage: Vec<u64>,
    /// Sum of `clipped_per_stage`.
    pub clipped: u64,
    /// Levels of the input.
    pub input: Levels,
    /// Levels of the output (the audition signal).
    pub output: Levels,
    /// Measured SQNR in dB: input power over the power of (audition − input), all channels.
    pub sqnr_db: f64,
    /// The SQNR theory predicts for this input, where a simple formula applies: the chain has one active stage that
    /// has a formula, and nothing clipped. Uniform quantizer: input power over Δ²/12 plus the dither's variance, times
    /// the noise-shaping gain. Compander and minifloat: their level-independent formulas (see their docs).
    pub theory_sqnr_db: Option<f64>,
    /// Why there is no theory figure, when there is none.
    pub theory_note: Option<String>,
    /// What each stage did on its own, in chain order (bypassed stages included, marked inactive).
    pub stages: Vec<StageReport>,
}

/// A whole clip run through a chain ([`Chain::process_clip`]).
#[derive(Debug, Clone)]
pub struct Processed {
    /// The processed sound at the export rate.
    pub export: Clip,
    /// The processed sound at the source rate, aligned sample for sample with the input.
    pub audition: Clip,
    /// Figures about the run.
    pub report: RenderReport,
}

impl Chain {
    pub(super) fn report(&self) -> RenderReport {
        let stages = self.lanes[0].nodes.len();
        let clipped_per_stage: Vec<u64> = (0..stages)
            .map(|i| {
                self.lanes
                    .iter()
                    .map(|l| match &l.nodes[i] {
                        Some(Node::Plain { stage, .. }) => stage.clipped(),
                        _ => 0,
                    })
                    .sum()
            })
            .collect();
        let clipped = clipped_per_stage.iter().sum();
        let input = self.input_levels.finish();
        let stage_reports = (0..stages)
            .map(|i| {
                let s = &self.stats[i];
                // The figures, when they were accounted.
                let st = (self.stage_stats && s.active).then_some(s);
                StageReport {
                    kind: s.kind.clone(),
                    active: s.active,
                    rate_hz: if s.after_rate { self.export_rate } else { self.source_rate },
                    sqnr_db: st.and_then(|s| s.error.db()),
                    clipped: clipped_per_stage[i],
                    codes_used: st.and_then(|s| s.used.as_ref()).map(CodeSet::count),
                    code_space: s.code_space,
                }
            })
            .collect();
        let (theory_sqnr_db, theory_note) = self.theory(&input, clipped);
        RenderReport {
            source_rate: self.source_rate,
            export_rate: self.export_rate,
            frames: self.frames,
            export_frames: self.export_frames(),
            channels: self.lanes.len(),
            latency_frames: self.latency,
            non_finite_inputs: self.non_finite,
            clipped_per_stage,
            clipped,
            input,
            output: self.output_levels.finish(),
            sqnr_db: self.sqnr.db(),
            theory_sqnr_db,
            theory_note,
            stages: stage_reports,
        }
    }

    fn theory(&self, input: &Levels, clipped: u64) -> (Option<f64>, Option<String>) {
        let note = |s: &str| (None, Some(s.to_string()));
        let active: Vec<&Node> = self.lanes[0].nodes.iter().flatten().collect();
        match active.as_slice() {
            [] => note("no active stage: the output equals the input"),
            [Node::Plain { stage: only, .. }] => {
                // Mean square of the input, from its sine-referenced RMS (rms_dbfs is 10·log10(2·ms)).
                let ms = 10f64.powf(input.rms_dbfs / 10.0) / 2.0;
                match only.theory_sqnr_db(ms) {
                    None => note("no simple formula for this stage: measured only"),
                    Some(_) if clipped > 0 => note("the stage clipped: the formula assumes no overload"),
                    Some(t) => (Some(t), None),
                }
            }
            [Node::Rate { .. }] => {
                note("rate reduction alone: the loss depends on the input's spectrum, measured only")
            }
            _ => note("several active stages: no simple formula, measured only"),
        }
    }
}
