//! One channel of a chain: its stages and buffers, and the block loop that runs them, aligns the export and the
//! audition, and feeds the per-stage figures.

use super::stats::StageStats;
use super::{ChainOutput, Node, UNBOUNDED};
use crate::analysis::levels::{LevelsAcc, SqnrAcc};
use crate::stages::rate::{RateExpander, RateReducer};
use crate::stages::Stage;
use std::collections::VecDeque;

/// Drops the first `skip` samples of a stream and stops after `limit`.
#[derive(Debug, Clone)]
pub(super) struct Aligner {
    pub(super) skip: usize,
    pub(super) emitted: usize,
    pub(super) limit: usize,
}

impl Aligner {
    pub(super) fn new(skip: usize, limit: usize) -> Self {
        Aligner { skip, emitted: 0, limit }
    }

    /// The part of `x` that belongs to the aligned stream.
    pub(super) fn take<'a>(&mut self, x: &'a [f32]) -> &'a [f32] {
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

    pub(super) fn missing(&self) -> usize {
        self.limit - self.emitted
    }
}

/// Per-channel state for the rate stage's own figure: its input, and its output brought back to the source rate.
pub(super) struct RateTap {
    /// A second expander for the rate stage's output before the stages after it; `None` when no active stage
    /// follows the rate stage, and the audition signal is that output.
    pub(super) expander: Option<RateExpander>,
    pub(super) align: Aligner,
    pub(super) expanded: Vec<f32>,
    pub(super) input: VecDeque<f32>,
    pub(super) output: VecDeque<f32>,
}

/// One channel's stages and buffers.
pub(super) struct Lane {
    pub(super) nodes: Vec<Option<Node>>,
    /// Index of the rate node, if one is active.
    pub(super) rate_at: Option<usize>,
    /// The block being processed (source rate).
    pub(super) work: Vec<f32>,
    /// Scratch for the reducer's and the expander's raw output.
    pub(super) reduced: Vec<f32>,
    pub(super) expanded: Vec<f32>,
    /// This call's aligned export samples and audition samples.
    pub(super) export_buf: Vec<f32>,
    pub(super) audition_buf: Vec<f32>,
    pub(super) export_align: Aligner,
    pub(super) audition_align: Aligner,
    /// The chain's mix (see [`Preset::mix`]) and what it needs below 1: the dry block at the source rate, and with
    /// a rate stage its own reducer, aligned exactly as the wet one (same parameters, same blocks, same latency).
    pub(super) mix: f64,
    pub(super) dry: Vec<f32>,
    pub(super) dry_rate: Option<(RateReducer, Aligner)>,
    pub(super) dry_reduced: Vec<f32>,
    pub(super) dry_export: Vec<f32>,
    /// A stage's input, kept for its own mix.
    pub(super) stage_dry: Vec<f32>,
    /// Input and audition samples waiting for their partner (the hold expander can run ahead of the input by part
    /// of a span, a filter behind it), paired in order for the SQNR.
    pub(super) pending_input: VecDeque<f32>,
    pub(super) pending_audition: VecDeque<f32>,
    /// Scratch for per-stage figures: a stage's input (times its reference gain) and its output's code indices.
    pub(super) before: Vec<f32>,
    pub(super) codes: Vec<u32>,
    /// The rate stage's figure, when per-stage figures are on and a rate stage is active.
    pub(super) rate_tap: Option<RateTap>,
}

impl Lane {
    /// Runs the block in `work` through the stages (or, `flushing`, empties the rate stage's filters), leaving this
    /// call's aligned export samples in `export_buf` and audition samples in `audition_buf`.
    ///
    /// With `stats`, each stage's figures are accounted on the way (see [`run_stage`]).
    pub(super) fn run(&mut self, flushing: bool, mut stats: Option<&mut [StageStats]>) {
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
    pub(super) fn emit(
        &mut self,
        ch: usize,
        out: &mut ChainOutput,
        levels: &mut LevelsAcc,
        sqnr: &mut SqnrAcc,
        stats: Option<&mut [StageStats]>,
        audition_output: bool,
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
        if audition_output {
            out.audition[ch].extend_from_slice(&self.audition_buf);
        }
    }
}

/// Runs one rate-keeping stage on `buf`; with `stats`, accounts its figures: its SQNR against a copy of its input
/// (times its [`Stage::reference_gain`], rounded to `f32` as the stage rounds), and the code indices of its output.
/// Only reads the output, so the samples are the same with or without `stats`.
pub(super) fn run_stage(
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
pub(super) fn run_node(
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
pub(super) fn blend(wet: &mut [f32], dry: &[f32], mix: f64) {
    for (w, &d) in wet.iter_mut().zip(dry) {
        *w = (mix * *w as f64 + (1.0 - mix) * d as f64) as f32;
    }
}
