//! The processing chain: an ordered list of stages, each with a bypass flag, applied to every channel of a clip.
//!
//! A chain is built from a [`Preset`] for a channel count and a source rate: construction validates every stage
//! (errors name `stages[i].param`) and allocates everything. Then it is fed blocks of at most [`BLOCK`] frames
//! ([`Chain::process_block`], then [`Chain::finish`]), or a whole clip at once ([`Chain::process_clip`]); both give the same
//! samples.
//!
//! # Rates and alignment
//! Stages before the rate stage (at most one per chain) run at the source rate; the rate stage produces the signal at
//! the target rate, and the stages after it run there. That signal is the **export**. For audition and measurement
//! the export is brought back to the source rate by the rate stage's expander: the **audition** signal. Any latency
//! of the rate stage (clean mode) is removed, so the export starts at time 0 and has exactly
//! `⌈frames·export_rate/source_rate⌉` frames, and the audition lines up sample for sample with the input and has
//! exactly its length. The error signal is audition − input; the report's SQNR is measured on it.
//!
//! # Per-stage figures
//! Besides the whole chain's SQNR, the report says what each stage alone does ([`StageReport`]): its output against
//! its own input, so a stage's figure does not depend on what the stages before it did. A stage before the rate
//! stage is measured at the source rate, a stage after it at the export rate (in place, sample for sample). The rate
//! stage's own error is its output brought back to the source rate by a second expander (or, when no active stage
//! follows it, the audition signal itself) against its input. This accounting only reads the signal, so it never
//! changes a sample; [`Chain::without_stage_stats`] turns it off where nothing reads it (the live chain).

use crate::analysis::levels::{LevelsAcc, SqnrAcc};
use crate::audio::Clip;
use crate::error::{Error, Result};
use crate::preset::Preset;
use crate::sample::sanitize;
use crate::stages::rate::{clean_block_len, reduced_len, RateExpander, RateReducer, CLEAN_MAX_CHAIN_BLOCKS};
use crate::stages::{self, Stage, StageSpec, BLOCK};
use std::collections::VecDeque;

/// The `frames` of a stream without an end (live input): no length check, no cut at the end. On 32-bit targets
/// (wasm32) `usize::MAX` frames is only about a day at 48 kHz, so it is not treated as a length.
pub const UNBOUNDED: usize = usize::MAX;

/// A stage built for one channel.
enum Node {
    /// Keeps the rate; `mix` below 1 blends its output with its input (see [`crate::preset::StageSlot::mix`]).
    Plain { stage: Box<dyn Stage>, mix: f64 },
    /// Changes the rate: the reducer, and the expander that brings the final signal back for audition.
    Rate { reducer: RateReducer, expander: RateExpander },
}

mod lane;
mod report;
mod stats;

use lane::{Aligner, Lane, RateTap};
pub use report::{Processed, RenderReport, StageReport, MAX_TRACKED_CODES};
use stats::{CodeSet, ErrorSums, StageStats};

/// Where [`Chain::process_block`] puts its output; the caller clears it between blocks as it likes.
#[derive(Debug, Clone, Default)]
pub struct ChainOutput {
    /// Export-rate samples per channel, appended.
    pub export: Vec<Vec<f32>>,
    /// Source-rate (audition) samples per channel, appended.
    pub audition: Vec<Vec<f32>>,
}

impl ChainOutput {
    /// An empty output for `channels` channels.
    pub fn new(channels: usize) -> Self {
        ChainOutput { export: vec![Vec::new(); channels], audition: vec![Vec::new(); channels] }
    }

    /// Empties every channel (keeping the capacity).
    pub fn clear(&mut self) {
        self.export.iter_mut().chain(self.audition.iter_mut()).for_each(Vec::clear);
    }
}

/// A chain built for a channel count, a source rate and a stream length.
pub struct Chain {
    lanes: Vec<Lane>,
    source_rate: u32,
    export_rate: u32,
    frames: usize,
    latency: usize,
    fed: usize,
    non_finite: u64,
    input_levels: LevelsAcc,
    output_levels: LevelsAcc,
    sqnr: SqnrAcc,
    /// Per-stage figures, in preset order.
    stats: Vec<StageStats>,
    /// Whether the per-stage figures are accounted ([`Chain::without_stage_stats`] turns them off).
    stage_stats: bool,
    /// Whether [`ChainOutput::audition`] is filled ([`Chain::without_audition_output`] turns it off).
    audition_output: bool,
}

impl Chain {
    /// Builds the chain of `preset` for `channels` channels at `sample_rate` Hz and a stream of `frames` frames
    /// ([`UNBOUNDED`] for a live stream).
    pub fn new(preset: &Preset, channels: usize, sample_rate: u32, frames: usize) -> Result<Self> {
        crate::audio::check_channels(channels)?;
        let active_rates: Vec<usize> = preset
            .stages
            .iter()
            .enumerate()
            .filter(|(_, s)| !s.bypass && matches!(s.stage, StageSpec::Rate(_)))
            .map(|(i, _)| i)
            .collect();
        if active_rates.len() > 1 {
            return Err(Error::param(
                format!("stages[{}].kind", active_rates[1]),
                "a second active rate stage",
                "at most one active rate stage per chain",
            ));
        }
        // The clean filter's memory grows with its block times the channels: bounded, so that a small file declaring
        // many channels cannot make a chain take gigabytes.
        if let Some(&i) = active_rates.first() {
            if let StageSpec::Rate(p) = &preset.stages[i].stage {
                let block = clean_block_len(p, sample_rate).map_err(|e| e.at(&format!("stages[{i}]")))?;
                if let Some(block) = block.filter(|b| b * channels as u64 > CLEAN_MAX_CHAIN_BLOCKS) {
                    return Err(Error::param(
                        format!("stages[{i}].rate_hz"),
                        p.rate_hz,
                        format!(
                            "a rate whose clean-mode filter block ({block} samples at {sample_rate} Hz) times the \
                             {channels} channels stays within {CLEAN_MAX_CHAIN_BLOCKS} samples; use hold mode, fewer \
                             channels or a rate closer to the source rate"
                        ),
                    ));
                }
            }
        }
        let mut export_rate = sample_rate;
        let mut lanes = Vec::with_capacity(channels);
        let rate_index = active_rates.first().copied();
        for ch in 0..channels {
            let mut nodes = Vec::with_capacity(preset.stages.len());
            let mut rate_at = None;
            let mut rate_here = sample_rate;
            for (i, slot) in preset.stages.iter().enumerate() {
                let at = |e: Error| e.at(&format!("stages[{i}]"));
                if slot.bypass {
                    stages::validate(&slot.stage).map_err(at)?;
                    nodes.push(None);
                    continue;
                }
                let node = match &slot.stage {
                    StageSpec::Rate(p) => {
                        let reducer = RateReducer::new(p, sample_rate, BLOCK).map_err(at)?;
                        let expander = RateExpander::new(p, sample_rate, BLOCK).map_err(at)?;
                        export_rate = reducer.target_rate();
                        rate_here = export_rate;
                        rate_at = Some(i);
                        Node::Rate { reducer, expander }
                    }
                    // Each stage is built for the rate where it runs (reset for every channel).
                    spec => Node::Plain {
                        stage: stages::check_rate(spec, rate_here)
                            .and_then(|_| stages::build(spec, rate_here, preset.seed, (i * 64 + ch) as u64))
                            .map_err(at)?
                            .expect("a rate-keeping stage"),
                        mix: slot.mix,
                    },
                };
                nodes.push(Some(node));
            }
            // Scratch sizes: enough for a block and for a flush (max_output covers both).
            let (export_delay, audition_delay, max_reduced, max_expanded) =
                match rate_at.and_then(|i| nodes[i].as_ref()) {
                    Some(Node::Rate { reducer, expander }) => {
                        let r = reducer.max_output(BLOCK);
                        (reducer.delay(), expander.delay(), r, expander.max_output(r))
                    }
                    _ => (0, 0, 0, 0),
                };
            let export_frames = reduced_len(sample_rate, export_rate, frames);
            // The chain's dry signal through the rate stage alone: the same reducer, aligned the same way.
            let dry_rate = match rate_at.map(|i| &preset.stages[i].stage) {
                Some(StageSpec::Rate(p)) if preset.mix != 1.0 => {
                    Some((RateReducer::new(p, sample_rate, BLOCK)?, Aligner::new(export_delay, export_frames)))
                }
                _ => None,
            };
            let stage_mixes = preset.stages.iter().any(|s| !s.bypass && s.mix != 1.0);
            let queue = 2 * (BLOCK + max_expanded) + audition_delay;
            // The rate stage's own figure: a second expander only when an active stage follows the rate stage.
            let rate_tap = match rate_at.and_then(|i| preset.stages.get(i)) {
                Some(slot) => {
                    let followed = preset.stages[rate_at.unwrap_or(0) + 1..].iter().any(|s| !s.bypass);
                    let expander = match (&slot.stage, followed) {
                        (StageSpec::Rate(p), true) => Some(RateExpander::new(p, sample_rate, BLOCK)?),
                        _ => None,
                    };
                    Some(RateTap {
                        expander,
                        align: Aligner::new(audition_delay, frames),
                        expanded: vec![0.0; if followed { max_expanded } else { 0 }],
                        input: VecDeque::with_capacity(queue),
                        output: VecDeque::with_capacity(queue),
                    })
                }
                None => None,
            };
            let tracks_codes = nodes.iter().flatten().any(|n| match n {
                Node::Plain { stage: s, .. } => s.code_space().is_some_and(|c| c <= MAX_TRACKED_CODES),
                Node::Rate { .. } => false,
            });
            let scratch = max_reduced.max(BLOCK);
            lanes.push(Lane {
                nodes,
                rate_at,
                work: Vec::with_capacity(BLOCK),
                reduced: vec![0.0; max_reduced],
                expanded: vec![0.0; max_expanded],
                export_buf: Vec::with_capacity(max_reduced.max(BLOCK)),
                audition_buf: Vec::with_capacity(max_expanded.max(BLOCK)),
                export_align: Aligner::new(export_delay, export_frames),
                audition_align: Aligner::new(audition_delay, frames),
                mix: preset.mix,
                dry: Vec::with_capacity(if preset.mix != 1.0 { BLOCK } else { 0 }),
                dry_reduced: vec![0.0; if dry_rate.is_some() { max_reduced } else { 0 }],
                dry_export: Vec::with_capacity(if dry_rate.is_some() { scratch } else { 0 }),
                dry_rate,
                stage_dry: Vec::with_capacity(if stage_mixes { scratch } else { 0 }),
                // Enough for the rate stage's largest lead or lag (a hold span; clean mode's FFT blocks), so a
                // stream never grows them.
                pending_input: VecDeque::with_capacity(queue),
                pending_audition: VecDeque::with_capacity(queue),
                before: Vec::with_capacity(scratch),
                codes: vec![0; if tracks_codes { scratch } else { 0 }],
                rate_tap,
            });
        }
        let stats = preset
            .stages
            .iter()
            .enumerate()
            .map(|(i, slot)| {
                let code_space = match &lanes[0].nodes[i] {
                    Some(Node::Plain { stage: s, .. }) => s.code_space(),
                    _ => None,
                };
                let tracked = code_space.filter(|&c| c <= MAX_TRACKED_CODES);
                StageStats {
                    // The preset's own name for the kind (its serde tag), so a new stage kind needs nothing here.
                    kind: serde_json::to_value(&slot.stage)
                        .ok()
                        .and_then(|v| v.get("kind").and_then(|k| k.as_str()).map(str::to_string))
                        .unwrap_or_default(),
                    active: !slot.bypass,
                    after_rate: rate_index.is_some_and(|r| i >= r),
                    error: ErrorSums::default(),
                    code_space,
                    used: tracked.map(CodeSet::new),
                }
            })
            .collect();
        let latency = match lanes[0].rate_at.and_then(|i| lanes[0].nodes[i].as_ref()) {
            Some(Node::Rate { expander, .. }) => expander.delay(),
            _ => 0,
        };
        Ok(Chain {
            lanes,
            source_rate: sample_rate,
            export_rate,
            frames,
            latency,
            fed: 0,
            non_finite: 0,
            input_levels: LevelsAcc::default(),
            output_levels: LevelsAcc::default(),
            sqnr: SqnrAcc::default(),
            stats,
            stage_stats: true,
            audition_output: true,
        })
    }

    /// The same chain leaving [`ChainOutput::audition`] empty: for callers that write the export and read only the
    /// report (the CLI's streaming render), which then skip one copy of every sample. The report (levels, SQNR) and
    /// the export are the same either way.
    pub fn without_audition_output(mut self) -> Self {
        self.audition_output = false;
        self
    }

    /// The same chain without per-stage figures (the report's `stages` then has no SQNR and no codes): for callers
    /// that never read them, such as the live chain, which then does only the work that makes its output. The output
    /// samples are the same either way.
    pub fn without_stage_stats(mut self) -> Self {
        self.stage_stats = false;
        for lane in &mut self.lanes {
            lane.rate_tap = None;
            lane.codes = Vec::new();
            lane.before = Vec::new();
        }
        self
    }

    /// Sample rate of the export.
    pub fn export_rate(&self) -> u32 {
        self.export_rate
    }

    /// Frames the export will have.
    pub fn export_frames(&self) -> usize {
        self.lanes[0].export_align.limit
    }

    /// Feeds one block: `input[ch]` are the next frames of channel `ch` (at most [`BLOCK`], all the same length).
    /// Appends to `out` whatever export and audition samples are ready.
    ///
    /// # Panics
    /// If the channel count or lengths disagree with the chain, or more frames are fed than it was built for.
    pub fn process_block<C: AsRef<[f32]>>(&mut self, input: &[C], out: &mut ChainOutput) {
        assert_eq!(input.len(), self.lanes.len(), "one input slice per channel");
        let n = input[0].as_ref().len();
        assert!(n <= BLOCK, "blocks hold at most BLOCK frames");
        assert!(self.frames == UNBOUNDED || self.fed + n <= self.frames, "more frames than the chain was built for");
        self.fed = self.fed.saturating_add(n);
        for (ch, (lane, x)) in self.lanes.iter_mut().zip(input).enumerate() {
            let x = x.as_ref();
            assert_eq!(x.len(), n, "all channels of a block have the same length");
            lane.work.clear();
            self.non_finite += x.iter().filter(|s| !s.is_finite()).count() as u64;
            lane.work.extend(x.iter().map(|&s| sanitize(s)));
            self.input_levels.push(&lane.work);
            lane.pending_input.extend(&lane.work);
            lane.run(false, self.stage_stats.then_some(&mut self.stats[..]));
            lane.emit(
                ch,
                out,
                &mut self.output_levels,
                &mut self.sqnr,
                self.stage_stats.then_some(&mut self.stats[..]),
                self.audition_output,
            );
        }
    }

    /// Ends the stream: flushes the rate stage's filters and pads (with zeros, should a filter give back fewer
    /// samples than its latency) so that the export and the audition have their exact lengths. Returns the report.
    pub fn finish(&mut self, out: &mut ChainOutput) -> RenderReport {
        for (ch, lane) in self.lanes.iter_mut().enumerate() {
            lane.work.clear();
            lane.run(true, self.stage_stats.then_some(&mut self.stats[..]));
            let (e, a) = (lane.export_align.missing(), lane.audition_align.missing());
            lane.export_buf.extend(std::iter::repeat_n(0.0, e));
            lane.export_align.emitted += e;
            lane.audition_buf.extend(std::iter::repeat_n(0.0, a));
            lane.audition_align.emitted += a;
            if let Some(tap) = lane.rate_tap.as_mut().filter(|t| t.expander.is_some()) {
                // Padded like the audition, so the rate stage's figure covers the same samples.
                let m = tap.align.missing();
                tap.output.extend(std::iter::repeat_n(0.0, m));
                tap.align.emitted += m;
            }
            lane.emit(
                ch,
                out,
                &mut self.output_levels,
                &mut self.sqnr,
                self.stage_stats.then_some(&mut self.stats[..]),
                self.audition_output,
            );
        }
        self.report()
    }

    /// Runs a whole clip through the chain (which must have been built for its channel count, rate and length):
    /// every block, then [`finish`](Self::finish).
    pub fn process_clip(mut self, input: &Clip) -> Result<Processed> {
        if input.channel_count() != self.lanes.len()
            || input.sample_rate != self.source_rate
            || input.frames() != self.frames
        {
            return Err(Error::format(format!(
                "the chain was built for {} channels at {} Hz, {} frames; the clip has {}, {} Hz, {}",
                self.lanes.len(),
                self.source_rate,
                self.frames,
                input.channel_count(),
                input.sample_rate,
                input.frames()
            )));
        }
        let mut out = ChainOutput::new(self.lanes.len());
        for c in out.export.iter_mut() {
            c.reserve_exact(self.export_frames());
        }
        for c in out.audition.iter_mut() {
            c.reserve_exact(self.frames);
        }
        let mut start = 0;
        while start < self.frames {
            let end = (start + BLOCK).min(self.frames);
            let block: Vec<&[f32]> = input.channels.iter().map(|c| &c[start..end]).collect();
            self.process_block(&block, &mut out);
            start = end;
        }
        let report = self.finish(&mut out);
        Ok(Processed {
            export: Clip { sample_rate: self.export_rate, channels: out.export },
            audition: Clip { sample_rate: self.source_rate, channels: out.audition },
            report,
        })
    }
}
