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
use crate::analysis::Levels;
use crate::audio::Clip;
use crate::error::{Error, Result};
use crate::preset::Preset;
use crate::sample::sanitize;
use crate::stages::rate::{clean_block_len, reduced_len, RateExpander, RateReducer, CLEAN_MAX_CHAIN_BLOCKS};
use crate::stages::{self, Stage, StageSpec, BLOCK};
use serde::Serialize;
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

/// Drops the first `skip` samples of a stream and stops after `limit`.
#[derive(Debug, Clone)]
struct Aligner {
    skip: usize,
    emitted: usize,
    limit: usize,
}

impl Aligner {
    fn new(skip: usize, limit: usize) -> Self {
        Aligner { skip, emitted: 0, limit }
    }

    /// The part of `x` that belongs to the aligned stream.
    fn take<'a>(&mut self, x: &'a [f32]) -> &'a [f32] {
        let s = self.skip.min(x.len());
        self.skip -= s;
        let x = &x[s..];
        if self.limit == UNBOUNDED {
            return x;
        }
        let n = x.len().min(self.limit - self.emitted);
        self.emitted += n;
        &x[..n]
    }

    fn missing(&self) -> usize {
        self.limit - self.emitted
    }
}

/// One stage's running figures, shared by every channel (channels push in turn, so the sums are fixed by the block
/// order, like the chain's own SQNR).
struct StageStats {
    kind: String,
    active: bool,
    after_rate: bool,
    /// The stage's SQNR sums (a rate-keeping stage: in place, block by block; the rate stage: as its samples pair
    /// up through the queues of [`RateTap`]).
    error: ErrorSums,
    code_space: Option<u64>,
    /// The codes seen; `None` when the stage's codes are not counted.
    used: Option<CodeSet>,
}

/// Sums of input² and (output − input)² for a stage's SQNR, block by block: each block in eight `f32`
/// lanes ([`sum_sq_diff`], loops the compiler vectorizes; the chain runs them on every stage's every block), added to
/// `f64` totals at the end of the block. A block is at most a few thousand samples, so the `f32` partial sums lose nothing a dB
/// figure shows (relative error below 10⁻⁴). Fixed by the sequence of blocks, so the same on every target.
#[derive(Debug, Clone, Copy, Default)]
struct ErrorSums {
    signal: f64,
    error: f64,
}

impl ErrorSums {
    fn push(&mut self, reference: &[f32], output: &[f32]) {
        let n = reference.len().min(output.len());
        self.signal += sum_sq_diff(&reference[..n], None);
        self.error += sum_sq_diff(&reference[..n], Some(&output[..n]));
    }

    /// The SQNR in dB, or `None` when nothing differed (or a sum is not finite).
    fn db(&self) -> Option<f64> {
        (self.error > 0.0 && self.error.is_finite() && self.signal.is_finite())
            .then(|| crate::db::power_db(self.signal / self.error))
    }
}

/// `Σ (y − x)²` (or `Σ x²` without `y`) in eight `f32` lanes, as two groups of four (the form the compiler turns into
/// two SIMD accumulators), plus a scalar tail; the partial sums are added in `f64`.
#[inline]
fn sum_sq_diff(x: &[f32], y: Option<&[f32]>) -> f64 {
    let (mut s0, mut s1) = ([0f32; 4], [0f32; 4]);
    let mut tail = 0f32;
    let mut xc = x.chunks_exact(8);
    match y {
        None => {
            for a in &mut xc {
                let (a0, a1) = a.split_at(4);
                for i in 0..4 {
                    s0[i] += a0[i] * a0[i];
                }
                for i in 0..4 {
                    s1[i] += a1[i] * a1[i];
                }
            }
            for &a in xc.remainder() {
                tail += a * a;
            }
        }
        Some(y) => {
            let mut yc = y.chunks_exact(8);
            for (a, b) in (&mut xc).zip(&mut yc) {
                let ((a0, a1), (b0, b1)) = (a.split_at(4), b.split_at(4));
                for i in 0..4 {
                    let d = b0[i] - a0[i];
                    s0[i] += d * d;
                }
                for i in 0..4 {
                    let d = b1[i] - a1[i];
                    s1[i] += d * d;
                }
            }
            for (&a, &b) in xc.remainder().iter().zip(yc.remainder()) {
                tail += (b - a) * (b - a);
            }
        }
    }
    s0.iter().chain(&s1).map(|&v| v as f64).sum::<f64>() + tail as f64
}

/// The set of codes a stage emitted: a byte per code for small words (a plain store per sample, no dependency
/// between samples), a bit per code for large ones (2 MiB at 2^24).
enum CodeSet {
    Bytes(Vec<u8>),
    Bits(Vec<u64>),
}

/// Largest code space counted with a byte per code.
const BYTE_CODES: u64 = 1 << 16;

impl CodeSet {
    fn new(space: u64) -> Self {
        if space <= BYTE_CODES {
            CodeSet::Bytes(vec![0; space as usize])
        } else {
            CodeSet::Bits(vec![0; space.div_ceil(64) as usize])
        }
    }

    fn mark(&mut self, codes: &[u32]) {
        match self {
            CodeSet::Bytes(seen) => {
                for &c in codes {
                    if let Some(s) = seen.get_mut(c as usize) {
                        *s = 1;
                    }
                }
            }
            CodeSet::Bits(words) => {
                for &c in codes {
                    if let Some(w) = words.get_mut((c >> 6) as usize) {
                        *w |= 1u64 << (c & 63);
                    }
                }
            }
        }
    }

    fn count(&self) -> u64 {
        match self {
            CodeSet::Bytes(seen) => seen.iter().map(|&s| s as u64).sum(),
            CodeSet::Bits(words) => words.iter().map(|w| w.count_ones() as u64).sum(),
        }
    }
}

/// Per-channel state for the rate stage's own figure: its input, and its output brought back to the source rate.
struct RateTap {
    /// A second expander for the rate stage's output before the stages after it; `None` when no active stage
    /// follows the rate stage, and the audition signal is that output.
    expander: Option<RateExpander>,
    align: Aligner,
    expanded: Vec<f32>,
    input: VecDeque<f32>,
    output: VecDeque<f32>,
}

/// One channel's stages and buffers.
struct Lane {
    nodes: Vec<Option<Node>>,
    /// Index of the rate node, if one is active.
    rate_at: Option<usize>,
    /// The block being processed (source rate).
    work: Vec<f32>,
    /// Scratch for the reducer's and the expander's raw output.
    reduced: Vec<f32>,
    expanded: Vec<f32>,
    /// This call's aligned export samples and audition samples.
    export_buf: Vec<f32>,
    audition_buf: Vec<f32>,
    export_align: Aligner,
    audition_align: Aligner,
    /// The chain's mix (see [`Preset::mix`]) and what it needs below 1: the dry block at the source rate, and with
    /// a rate stage its own reducer, aligned exactly as the wet one (same parameters, same blocks, same latency).
    mix: f64,
    dry: Vec<f32>,
    dry_rate: Option<(RateReducer, Aligner)>,
    dry_reduced: Vec<f32>,
    dry_export: Vec<f32>,
    /// A stage's input, kept for its own mix.
    stage_dry: Vec<f32>,
    /// Input and audition samples waiting for their partner (the hold expander can run ahead of the input by part
    /// of a span, a filter behind it), paired in order for the SQNR.
    pending_input: VecDeque<f32>,
    pending_audition: VecDeque<f32>,
    /// Scratch for per-stage figures: a stage's input (times its reference gain) and its output's code indices.
    before: Vec<f32>,
    codes: Vec<u32>,
    /// The rate stage's figure, when per-stage figures are on and a rate stage is active.
    rate_tap: Option<RateTap>,
}

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
        })
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
            );
        }
        self.report()
    }

    fn report(&self) -> RenderReport {
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

impl Lane {
    /// Runs the block in `work` through the stages (or, `flushing`, empties the rate stage's filters), leaving this
    /// call's aligned export samples in `export_buf` and audition samples in `audition_buf`.
    ///
    /// With `stats`, each stage's figures are accounted on the way (see [`run_stage`]).
    fn run(&mut self, flushing: bool, mut stats: Option<&mut [StageStats]>) {
        self.export_buf.clear();
        self.audition_buf.clear();
        if self.mix != 1.0 {
            self.dry.clear();
            self.dry.extend_from_slice(&self.work);
        }
        let Some(r) = self.rate_at else {
            for (i, node) in self.nodes.iter_mut().enumerate() {
                if let Some(Node::Plain { stage, mix }) = node {
                    let st = stats.as_deref_mut().map(|st| &mut st[i]);
                    run_node(
                        stage.as_mut(),
                        *mix,
                        &mut self.work,
                        st,
                        &mut self.before,
                        &mut self.codes,
                        &mut self.stage_dry,
                    );
                }
            }
            if self.mix != 1.0 {
                blend(&mut self.work, &self.dry, self.mix);
            }
            self.export_buf.extend_from_slice(self.export_align.take(&self.work));
            self.audition_buf.extend_from_slice(self.audition_align.take(&self.work));
            return;
        };
        let (before, rest) = self.nodes.split_at_mut(r);
        let (rate, after) = rest.split_first_mut().expect("the rate node is in range");
        let Some(Node::Rate { reducer, expander }) = rate else { unreachable!("rate_at points at the rate node") };
        for (i, node) in before.iter_mut().enumerate() {
            if let Some(Node::Plain { stage, mix }) = node {
                let st = stats.as_deref_mut().map(|st| &mut st[i]);
                run_node(
                    stage.as_mut(),
                    *mix,
                    &mut self.work,
                    st,
                    &mut self.before,
                    &mut self.codes,
                    &mut self.stage_dry,
                );
            }
        }
        if let Some(tap) = &mut self.rate_tap {
            tap.input.extend(&self.work);
        }
        let got =
            if flushing { reducer.flush(&mut self.reduced) } else { reducer.process(&self.work, &mut self.reduced) };
        // The export: the reduced stream without the reducer's latency, cut at the export length, then the stages
        // behind the rate stage, at the reduced rate.
        self.export_buf.extend_from_slice(self.export_align.take(&self.reduced[..got]));
        if let Some(RateTap { expander: Some(tap_expander), align, expanded, output, .. }) = &mut self.rate_tap {
            // The rate stage's output alone, brought back to the source rate as the audition is (stats only).
            let made = tap_expander.process(&self.export_buf, expanded);
            output.extend(align.take(&expanded[..made]));
            if flushing {
                let made = tap_expander.flush(expanded);
                output.extend(align.take(&expanded[..made]));
            }
        }
        for (j, node) in after.iter_mut().enumerate() {
            if let Some(Node::Plain { stage, mix }) = node {
                let st = stats.as_deref_mut().map(|st| &mut st[r + 1 + j]);
                run_node(
                    stage.as_mut(),
                    *mix,
                    &mut self.export_buf,
                    st,
                    &mut self.before,
                    &mut self.codes,
                    &mut self.stage_dry,
                );
            }
        }
        if let Some((dry_reducer, dry_align)) = &mut self.dry_rate {
            // The dry signal through the rate stage alone; same parameters, blocks and alignment as the wet one, so
            // the two line up sample for sample.
            let got = if flushing {
                dry_reducer.flush(&mut self.dry_reduced)
            } else {
                dry_reducer.process(&self.dry, &mut self.dry_reduced)
            };
            self.dry_export.clear();
            self.dry_export.extend_from_slice(dry_align.take(&self.dry_reduced[..got]));
            debug_assert_eq!(self.dry_export.len(), self.export_buf.len());
            blend(&mut self.export_buf, &self.dry_export, self.mix);
        }
        // The audition: the export brought back to the source rate, without the expander's latency.
        let made = expander.process(&self.export_buf, &mut self.expanded);
        self.audition_buf.extend_from_slice(self.audition_align.take(&self.expanded[..made]));
        if flushing {
            let made = expander.flush(&mut self.expanded);
            self.audition_buf.extend_from_slice(self.audition_align.take(&self.expanded[..made]));
        }
    }

    /// Appends this call's output to `out` and accounts it: output levels, and the SQNR against the input samples
    /// the audition samples line up with.
    /// With `stats`, also pairs the rate stage's input with its output for its own figure.
    fn emit(
        &mut self,
        ch: usize,
        out: &mut ChainOutput,
        levels: &mut LevelsAcc,
        sqnr: &mut SqnrAcc,
        stats: Option<&mut [StageStats]>,
    ) {
        if let (Some(tap), Some(stats), Some(r)) = (&mut self.rate_tap, stats, self.rate_at) {
            if tap.expander.is_none() {
                tap.output.extend(&self.audition_buf);
            }
            let n = tap.input.len().min(tap.output.len());
            let (xs, ys) = (tap.input.make_contiguous(), tap.output.make_contiguous());
            stats[r].error.push(&xs[..n], &ys[..n]);
            tap.input.drain(..n);
            tap.output.drain(..n);
        }
        levels.push(&self.audition_buf);
        self.pending_audition.extend(&self.audition_buf);
        let n = self.pending_input.len().min(self.pending_audition.len());
        // The same pairs in the same order as draining both queues, over plain slices (a tight loop).
        let (xs, ys) = (self.pending_input.make_contiguous(), self.pending_audition.make_contiguous());
        sqnr.push_slices(&xs[..n], &ys[..n]);
        self.pending_input.drain(..n);
        self.pending_audition.drain(..n);
        out.export[ch].extend_from_slice(&self.export_buf);
        out.audition[ch].extend_from_slice(&self.audition_buf);
    }
}

/// Runs one rate-keeping stage on `buf`; with `stats`, accounts its figures: its SQNR against a copy of its input
/// (times its [`Stage::reference_gain`], rounded to `f32` as the stage rounds), and the code indices of its output.
/// Only reads the output, so the samples are the same with or without `stats`.
fn run_stage(
    stage: &mut dyn Stage,
    buf: &mut [f32],
    stats: Option<&mut StageStats>,
    before: &mut Vec<f32>,
    codes: &mut [u32],
) {
    let Some(st) = stats else {
        stage.process(buf);
        return;
    };
    before.clear();
    before.extend_from_slice(buf);
    let g = stage.reference_gain();
    if g != 1.0 {
        before.iter_mut().for_each(|x| *x = (*x as f64 * g) as f32);
    }
    stage.process(buf);
    st.error.push(before, buf);
    if let (Some(used), false) = (&mut st.used, codes.is_empty()) {
        // Blocks are at most the scratch's length (BLOCK, or the reducer's largest output after the rate stage).
        for out in buf.chunks(codes.len()) {
            let codes = &mut codes[..out.len()];
            stage.code_indices(out, codes);
            used.mark(codes);
        }
    }
}

/// Runs one rate-keeping stage ([`run_stage`]); a stage with a mix below 1 is then blended with its own input (kept in
/// `dry`, whose capacity covers any block). The stage's own figures are of its output before the blend.
fn run_node(
    stage: &mut dyn Stage,
    mix: f64,
    buf: &mut [f32],
    stats: Option<&mut StageStats>,
    before: &mut Vec<f32>,
    codes: &mut [u32],
    dry: &mut Vec<f32>,
) {
    if mix == 1.0 {
        return run_stage(stage, buf, stats, before, codes);
    }
    dry.clear();
    dry.extend_from_slice(buf);
    run_stage(stage, buf, stats, before, codes);
    blend(buf, dry, mix);
}

/// `wet = mix·wet + (1 − mix)·dry`, in `f64`, rounded once to `f32`.
fn blend(wet: &mut [f32], dry: &[f32], mix: f64) {
    for (w, &d) in wet.iter_mut().zip(dry) {
        *w = (mix * *w as f64 + (1.0 - mix) * d as f64) as f32;
    }
}
