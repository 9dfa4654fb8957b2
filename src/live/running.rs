//! The parts of a running live chain: its FIFOs, one built chain with its scratch, and the crossfade into a rebuilt
//! one.

use super::settings::LiveSettings;
use crate::chain::{Chain, ChainOutput, UNBOUNDED};
use crate::error::Result;
use crate::preset::Preset;
use crate::stages::rate::{RateExpander, RateReducer};
use crate::stages::{StageSpec, BLOCK};

/// A fixed-capacity FIFO of samples: copies in, copies out, never grows.
#[derive(Debug, Clone)]
pub(super) struct SampleFifo {
    buf: Vec<f32>,
    head: usize,
    len: usize,
}

impl SampleFifo {
    /// A FIFO holding up to `capacity` samples (at least 1), starting with `zeros` zeros (at most `capacity`).
    pub fn new(capacity: usize, zeros: usize) -> Self {
        let capacity = capacity.max(1);
        SampleFifo { buf: vec![0.0; capacity], head: 0, len: zeros.min(capacity) }
    }

    /// Appends `x`; returns how many samples did not fit (dropped from the end of `x`).
    pub fn push(&mut self, x: &[f32]) -> usize {
        let cap = self.buf.len();
        let n = x.len().min(cap - self.len);
        let tail = (self.head + self.len) % cap;
        let first = n.min(cap - tail);
        self.buf[tail..tail + first].copy_from_slice(&x[..first]);
        self.buf[..n - first].copy_from_slice(&x[first..n]);
        self.len += n;
        x.len() - n
    }

    /// Fills `out` from the front; returns how many samples were missing (written as zeros at the end of `out`).
    pub fn pop(&mut self, out: &mut [f32]) -> usize {
        let cap = self.buf.len();
        let n = out.len().min(self.len);
        let first = n.min(cap - self.head);
        out[..first].copy_from_slice(&self.buf[self.head..self.head + first]);
        out[first..n].copy_from_slice(&self.buf[..n - first]);
        out[n..].fill(0.0);
        self.head = (self.head + n) % cap;
        self.len -= n;
        out.len() - n
    }
}

/// Counters since construction (see [`super::LiveStats`]).
#[derive(Debug, Clone, Default)]
pub(super) struct Counters {
    pub blocks: u64,
    pub frames: u64,
    pub underrun_frames: u64,
    pub underrun_blocks: u64,
    pub overrun_frames: u64,
    pub rebuilds: u64,
    pub failed_rebuilds: u64,
}

/// One built chain with its FIFOs and scratch: everything it needs while streaming.
pub(super) struct RunningChain {
    pub chain: Chain,
    /// The preset it was built from, live settings applied.
    pub preset: Preset,
    pub settings: LiveSettings,
    pub latency: usize,
    out: ChainOutput,
    wet: Vec<SampleFifo>,
    dry: Vec<SampleFifo>,
    wet_block: Vec<f32>,
    dry_block: Vec<f32>,
    /// This block's mixed output per channel (`dry·(1 − mix) + wet·mix`).
    pub mixed: Vec<Vec<f32>>,
}

impl RunningChain {
    /// Builds the chain of `base` with `settings`, for `channels` channels at `sample_rate` Hz.
    pub fn build(base: &Preset, settings: LiveSettings, channels: usize, sample_rate: u32) -> Result<RunningChain> {
        let preset = settings.apply(base);
        let chain = Chain::new(&preset, channels, sample_rate, UNBOUNDED)?.without_stage_stats();
        // The most one block can produce, and the latency (see the docs of [`super`]), from the rate stage.
        let rate_stage = preset.active_stages().find_map(|s| match s {
            StageSpec::Rate(r) => Some(r),
            _ => None,
        });
        let (most_export, most_audition, latency) = match rate_stage {
            Some(r) => {
                let reducer = RateReducer::new(r, sample_rate, BLOCK)?;
                let expander = RateExpander::new(r, sample_rate, BLOCK)?;
                let e = reducer.max_output(BLOCK);
                let d = expander.delay();
                (e.max(BLOCK), expander.max_output(e).max(BLOCK), (5 * d).saturating_sub(1))
            }
            None => (BLOCK, BLOCK, 0),
        };
        let mut out = ChainOutput::new(channels);
        out.export.iter_mut().for_each(|v| v.reserve_exact(most_export));
        out.audition.iter_mut().for_each(|v| v.reserve_exact(most_audition));
        Ok(RunningChain {
            chain,
            preset,
            settings,
            latency,
            out,
            wet: (0..channels).map(|_| SampleFifo::new(latency + most_audition + 2 * BLOCK, latency)).collect(),
            dry: (0..channels).map(|_| SampleFifo::new(latency + BLOCK, latency)).collect(),
            wet_block: vec![0.0; BLOCK],
            dry_block: vec![0.0; BLOCK],
            mixed: vec![vec![0.0; BLOCK]; channels],
        })
    }

    /// Feeds one block (`gained[ch]`, all of length n = `mix.len()`) and leaves n mixed frames per channel in `mixed`.
    pub fn run(&mut self, gained: &[Vec<f32>], dry_in: &[Vec<f32>], mix: &[f32], counters: &mut Counters) {
        let n = mix.len();
        self.out.clear();
        self.chain.process_block(gained, &mut self.out);
        let mut short = 0;
        let lanes = self.wet.iter_mut().zip(&mut self.dry).zip(&mut self.mixed);
        for (((wet, dry), mixed), (audition, dry_in)) in lanes.zip(self.out.audition.iter().zip(dry_in)) {
            counters.overrun_frames += wet.push(audition) as u64;
            dry.push(dry_in);
            short += wet.pop(&mut self.wet_block[..n]);
            dry.pop(&mut self.dry_block[..n]);
            let (w, d) = (&self.wet_block[..n], &self.dry_block[..n]);
            for (((y, &w), &d), &m) in mixed[..n].iter_mut().zip(w).zip(d).zip(mix) {
                *y = d * (1.0 - m) + w * m;
            }
        }
        counters.underrun_frames += short as u64;
        counters.underrun_blocks += (short > 0) as u64;
    }
}

/// A rebuilt chain taking over: it runs beside the current one for `warm_frames_left` frames (its latency: until then
/// its output is the FIFO's initial silence), then a linear crossfade of the fade length.
pub(super) struct Crossfade {
    pub incoming: RunningChain,
    pub warm_frames_left: usize,
    pub faded_frames: usize,
}

impl Crossfade {
    /// Blends this block's output of the incoming chain into `current` (the running chain's mixed output, in place);
    /// returns true once the incoming chain has fully taken over.
    pub fn blend(&mut self, current: &mut [Vec<f32>], n: usize, fade: usize) -> bool {
        let (warm, faded) = (self.warm_frames_left, self.faded_frames);
        for (a, b) in current.iter_mut().zip(&self.incoming.mixed) {
            let (mut w, mut f) = (warm, faded);
            for (y, &b) in a[..n].iter_mut().zip(&b[..n]) {
                if w > 0 {
                    w -= 1;
                } else if f < fade {
                    f += 1;
                    let t = f as f32 / fade as f32;
                    *y = *y * (1.0 - t) + b * t;
                } else {
                    *y = b;
                }
            }
            (self.warm_frames_left, self.faded_frames) = (w, f);
        }
        self.warm_frames_left == 0 && self.faded_frames >= fade
    }
}
