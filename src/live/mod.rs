//! The chain for real-time audition: fed block by block (128 frames in an AudioWorklet; any size here), with
//! parameter ramps, live overrides of the resolution, rate and dither, crossfaded rebuilds, and counters.
//!
//! Native and tested natively (`tests/live.rs`); the wasm boundary (`src/wasm/live.rs`) only wraps a [`LiveChain`]
//! with the buffers JavaScript views.
//!
//! # Signal path, per channel
//! `input × gain` → chain (its latency made a fixed delay: see below) → `wet`;
//! `output = (dry·(1 − mix) + wet·mix) × output gain`, where `dry` is the input delayed by the same latency.
//!
//! # Latency
//! The chain's audition stream comes in bursts: a hold-mode rate stage emits whole hold spans at once (ahead of the
//! input), a clean-mode rate stage whole FFT blocks (behind it). Each channel's output therefore goes through a
//! fixed-capacity FIFO that starts with [`LiveChain::latency_frames`] zeros: 0 without a rate stage or in
//! hold mode; in clean mode 2.5 FFT blocks of the expander minus one frame (`5·delay − 1`: 7,679 frames, 160 ms, at
//! 48 → 8 kHz), the exact worst case for blocks of any size, so the FIFO never runs dry. The output is then exactly
//! the offline render's audition ([`crate::render::render`]) delayed by the latency. Underruns (which would mean that
//! bound is wrong) are counted, never hidden.
//!
//! # Parameters
//! - gain (pre-chain, dB), mix (0..1) and output gain (dB): ramped linearly over each block from the previous value
//!   to the new one (so automation is followed at block rate without steps).
//! - resolution (bits, continuous; ≤ 0 = the preset's), rate (Hz; ≤ 0 = the preset's) and dither (peak in LSB;
//!   < 0 = the preset's) rewrite the preset's first active `quantize` stage (`levels = round(2^bits)`, even for a
//!   mid-rise grid; `dither_peak_lsb`, rounded to 0.01 LSB, and TPDF when the stage had no dither) and its first
//!   active hold-mode `rate` stage (`rate_hz`, rounded, 1 to the sample rate; clean-mode rate stages keep their rate,
//!   since their latency depends on it). A change builds a second chain, which runs beside the
//!   first for its latency and then takes over through a 5 ms linear crossfade. One rebuild runs at a time;
//!   changes arriving meanwhile are merged into the next.
//! - [`LiveChain::set_preset`]: validated and built at once (an error leaves the old chain running), then the same
//!   crossfade. A preset with another latency is crossfaded in once its output is ready, a jump in time of the
//!   latency difference, smoothed by the crossfade.
//!
//! # Allocation
//! [`LiveChain::new`], [`LiveChain::set_preset`] and [`LiveChain::reset`] allocate (they build chains).
//! [`LiveChain::process`] allocates nothing, except in the one call that starts a rebuild for changed live settings
//! (the first call after `set_resolution`, `set_rate` or `set_dither` changed what the chain is built with, and no
//! crossfade running): it builds the new chain there (a failed build stores its message). Taking over a
//! chain built by `set_preset` allocates nothing; the end of a crossfade frees the old chain.

mod running;
mod settings;

use crate::error::{Error, Result};
use crate::preset::Preset;
use crate::sample::sanitize;
use crate::stages::BLOCK;
use running::{Counters, Crossfade, RunningChain};
use serde::Serialize;
use settings::{LiveControls, LiveSettings};

/// Length of the crossfade into a rebuilt chain, in seconds.
const CROSSFADE_SECONDS: f64 = 0.005;

/// A dB value as a linear factor for a ramp, clamped to −120..+60 dB; NaN gives None (the ramp keeps its target).
fn ramp_gain_from_db(db: f64) -> Option<f64> {
    (!db.is_nan()).then(|| crate::db::db_to_gain(db.clamp(-120.0, 60.0)))
}

/// A value ramped linearly across one block from where it was to its target.
#[derive(Debug, Clone)]
struct Ramp {
    current: f64,
    target: f64,
}

impl Ramp {
    fn new(v: f64) -> Self {
        Ramp { current: v, target: v }
    }

    fn set(&mut self, v: Option<f64>) {
        if let Some(v) = v {
            self.target = v;
        }
    }

    /// Goes to the target at once (no ramp).
    fn jump(&mut self) {
        self.current = self.target;
    }

    /// Writes this block's per-sample values (ending exactly at the target) and moves to the target.
    fn fill(&mut self, out: &mut [f32]) {
        if self.current == self.target {
            out.fill(self.current as f32);
        } else {
            let (a, d, n) = (self.current, self.target - self.current, out.len() as f64);
            for (i, o) in out.iter_mut().enumerate() {
                *o = (a + d * (i + 1) as f64 / n) as f32;
            }
        }
        self.current = self.target;
    }
}

/// Which live parameters the preset has a stage for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct LiveApplies {
    /// A quantize stage (for the dither).
    pub dither: bool,
    /// A hold-mode rate stage (for the rate).
    pub rate: bool,
    /// A quantize stage (for the resolution).
    pub resolution: bool,
}

/// Counters and the running settings. Serialised (camelCase keys, in alphabetical order) it is the JSON the page's
/// worklet reports as `core`.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(rename_all = "camelCase")]
pub struct LiveStats {
    /// Which live parameters this preset has a stage for.
    pub applies: LiveApplies,
    /// Blocks processed since construction (a [`LiveChain::process`] call longer than [`BLOCK`] frames counts as
    /// several).
    pub blocks: u64,
    /// The dither override in force in LSB (None: the preset's).
    pub dither_lsb: Option<f64>,
    /// The running chain's export rate in Hz.
    pub export_rate: u32,
    /// Rebuilds for live settings that failed (the running chain stays).
    pub failed_rebuilds: u64,
    /// Frames processed since construction.
    pub frames: u64,
    /// The message of the last failed rebuild.
    pub last_error: Option<String>,
    /// The running chain's latency in frames.
    pub latency_frames: usize,
    /// The levels override in force (None: the preset's).
    pub levels: Option<u32>,
    /// Chain output frames that did not fit in the FIFO (0 unless its capacity is wrong).
    pub overrun_frames: u64,
    /// The rate override in force in Hz (None: the preset's).
    pub rate_hz: Option<u32>,
    /// Rebuilds started (crossfades into a new chain).
    pub rebuilds: u64,
    /// A rebuild in progress (warming up, fading in, or queued).
    pub transition: bool,
    /// Blocks in which the FIFO ran short.
    pub underrun_blocks: u64,
    /// Output frames the FIFO could not supply (0 unless the latency bound is wrong).
    pub underrun_frames: u64,
}

/// The real-time chain: see the module docs.
pub struct LiveChain {
    channels: usize,
    sample_rate: u32,
    /// The preset as given (before the live settings).
    base: Preset,
    controls: LiveControls,
    running: RunningChain,
    /// A rebuilt chain warming up or fading in.
    incoming: Option<Crossfade>,
    /// A chain built by `set_preset`, waiting for the running crossfade to end.
    queued: Option<RunningChain>,
    /// Settings whose rebuild failed (not retried until they change).
    failed: Option<LiveSettings>,
    last_error: Option<String>,
    fade_frames: usize,
    /// Per-block scratch: the gained input per channel, the sanitised dry input, per-sample parameter curves.
    gained: Vec<Vec<f32>>,
    dry_in: Vec<Vec<f32>>,
    gain_curve: Vec<f32>,
    mix_curve: Vec<f32>,
    output_gain_curve: Vec<f32>,
    gain: Ramp,
    mix: Ramp,
    output_gain: Ramp,
    counters: Counters,
}

impl std::fmt::Debug for LiveChain {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("LiveChain")
            .field("channels", &self.channels)
            .field("sample_rate", &self.sample_rate)
            .field("preset", &self.running.preset.name)
            .field("stats", &self.stats())
            .finish_non_exhaustive()
    }
}

impl LiveChain {
    /// Builds the chain of `preset` for `channels` channels at `sample_rate` Hz.
    pub fn new(preset: &Preset, channels: usize, sample_rate: u32) -> Result<LiveChain> {
        crate::audio::check_sample_rate(sample_rate)?;
        crate::audio::check_channels(channels)?;
        let controls = LiveControls::PRESET;
        let settings = LiveSettings::of(preset, sample_rate, controls);
        let running = RunningChain::build(preset, settings, channels, sample_rate)?;
        let block = || vec![0.0f32; BLOCK];
        Ok(LiveChain {
            channels,
            sample_rate,
            base: preset.clone(),
            controls,
            running,
            incoming: None,
            queued: None,
            failed: None,
            last_error: None,
            fade_frames: ((sample_rate as f64 * CROSSFADE_SECONDS).round() as usize).max(1),
            gained: (0..channels).map(|_| Vec::with_capacity(BLOCK)).collect(),
            dry_in: (0..channels).map(|_| Vec::with_capacity(BLOCK)).collect(),
            gain_curve: block(),
            mix_curve: block(),
            output_gain_curve: block(),
            gain: Ramp::new(1.0),
            mix: Ramp::new(1.0),
            output_gain: Ramp::new(1.0),
            counters: Counters::default(),
        })
    }

    /// Number of channels.
    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Sample rate in Hz.
    pub fn sample_rate(&self) -> u32 {
        self.sample_rate
    }

    /// Frames by which the output lags the input (see the module docs); changes only when a rebuilt chain with
    /// another latency has taken over.
    pub fn latency_frames(&self) -> usize {
        self.running.latency
    }

    /// The rate of the running chain's export signal in Hz (the reduced rate, if there is a rate stage).
    pub fn export_rate(&self) -> u32 {
        self.running.chain.export_rate()
    }

    /// The preset the running chain was built from, with the live settings applied.
    pub fn effective_preset(&self) -> &Preset {
        &self.running.preset
    }

    /// Pre-chain gain in dB (−120 to +60; NaN is ignored), reached by a linear ramp over the next block.
    pub fn set_gain_db(&mut self, db: f64) {
        self.gain.set(ramp_gain_from_db(db));
    }

    /// Dry/wet mix, 0 (input only) to 1 (processed only; NaN is ignored), ramped over the next block.
    pub fn set_mix(&mut self, mix: f64) {
        if !mix.is_nan() {
            self.mix.set(Some(mix.clamp(0.0, 1.0)));
        }
    }

    /// Output gain in dB (−120 to +60; NaN is ignored), ramped over the next block.
    pub fn set_output_db(&mut self, db: f64) {
        self.output_gain.set(ramp_gain_from_db(db));
    }

    /// Resolution in bits (continuous, clamped to 1..24; `levels = round(2^bits)`), or ≤ 0 for the preset's own.
    /// Applied by a rebuild at the next [`process`](Self::process).
    pub fn set_resolution(&mut self, bits: f64) {
        self.controls.resolution_bits = bits;
    }

    /// Target rate in Hz of a hold-mode rate stage (rounded, clamped to 1..sample rate), or ≤ 0 for the preset's.
    /// Applied by a rebuild at the next [`process`](Self::process).
    pub fn set_rate(&mut self, hz: f64) {
        self.controls.rate_hz = hz;
    }

    /// Dither peak in LSB (0 to 16, rounded to 0.01), or < 0 for the preset's own. Applied by a rebuild at the next
    /// [`process`](Self::process).
    pub fn set_dither(&mut self, lsb: f64) {
        self.controls.dither_lsb = lsb;
    }

    /// Replaces the preset: built now with the live settings in force (on error the old preset keeps running), taken
    /// over through the crossfade from the next [`process`](Self::process) on (at once if nothing has been processed
    /// yet). Returns the new chain's latency in frames ([`latency_frames`](Self::latency_frames) becomes that once it
    /// has taken over).
    pub fn set_preset(&mut self, preset: &Preset) -> Result<usize> {
        let settings = self.settings_for(preset);
        let chain = RunningChain::build(preset, settings, self.channels, self.sample_rate)?;
        let latency = chain.latency;
        self.base = preset.clone();
        self.queued = Some(chain);
        self.failed = None;
        Ok(latency)
    }

    /// Back to the freshly built state: filters, hold phase, dither streams and FIFOs restart (the output is silent
    /// for the latency); ramps jump to their targets; a pending rebuild is applied at once. May click. Should the
    /// rebuild fail, the running chain stays as it is.
    pub fn reset(&mut self) {
        let settings = self.settings_for(&self.base);
        if let Ok(chain) = RunningChain::build(&self.base, settings, self.channels, self.sample_rate) {
            self.running = chain;
        }
        self.incoming = None;
        self.queued = None;
        for r in [&mut self.gain, &mut self.mix, &mut self.output_gain] {
            r.jump();
        }
    }

    /// Counters and the running settings.
    pub fn stats(&self) -> LiveStats {
        let c = &self.counters;
        let s = &self.running.settings;
        let applies = LiveSettings::of(
            &self.base,
            self.sample_rate,
            LiveControls { resolution_bits: 1.0, rate_hz: 1.0, dither_lsb: 0.0 },
        );
        LiveStats {
            applies: LiveApplies {
                dither: applies.dither_centi_lsb.is_some(),
                rate: applies.rate_hz.is_some(),
                resolution: applies.levels.is_some(),
            },
            blocks: c.blocks,
            dither_lsb: s.dither_centi_lsb.map(|c| c as f64 / 100.0),
            export_rate: self.export_rate(),
            failed_rebuilds: c.failed_rebuilds,
            frames: c.frames,
            last_error: self.last_error.clone(),
            latency_frames: self.running.latency,
            levels: s.levels,
            overrun_frames: c.overrun_frames,
            rate_hz: s.rate_hz,
            rebuilds: c.rebuilds,
            transition: self.incoming.is_some() || self.queued.is_some(),
            underrun_blocks: c.underrun_blocks,
            underrun_frames: c.underrun_frames,
        }
    }

    /// Processes the first `frames` frames of `input` (one slice per channel) into `output` (the same), in blocks of
    /// at most [`BLOCK`] frames (each a block for the ramps and the counters). Allocates nothing except when it
    /// starts a rebuild (see the module docs).
    ///
    /// # Errors
    /// When `input` or `output` has another channel count than the chain, or a buffer is shorter than `frames`
    /// (nothing is processed then).
    pub fn process<I: AsRef<[f32]>, O: AsMut<[f32]>>(
        &mut self,
        input: &[I],
        output: &mut [O],
        frames: usize,
    ) -> Result<()> {
        for (name, count) in [("input", input.len()), ("output", output.len())] {
            if count != self.channels {
                return Err(Error::param(name, format!("{count} channels"), format!("{} channels", self.channels)));
            }
        }
        let shortest = input.iter().map(|x| x.as_ref().len()).chain(output.iter_mut().map(|y| y.as_mut().len())).min();
        if let Some(shortest) = shortest.filter(|&s| s < frames) {
            return Err(Error::param("frames", frames, format!("at most {shortest} (the shortest buffer)")));
        }
        let mut at = 0;
        while at < frames {
            let n = (frames - at).min(BLOCK);
            self.process_block(input, output, at, n);
            at += n;
        }
        Ok(())
    }

    /// One block: frames `at..at + n` (n ≤ BLOCK) of every channel; the buffers are checked by the caller.
    fn process_block<I: AsRef<[f32]>, O: AsMut<[f32]>>(&mut self, input: &[I], output: &mut [O], at: usize, n: usize) {
        if n == 0 {
            return;
        }
        self.start_rebuild_if_due();
        if self.counters.blocks == 0 {
            // Initial values (e.g. a node's parameterData) apply from the first frame, without a ramp.
            for r in [&mut self.gain, &mut self.mix, &mut self.output_gain] {
                r.jump();
            }
        }
        self.gain.fill(&mut self.gain_curve[..n]);
        self.mix.fill(&mut self.mix_curve[..n]);
        self.output_gain.fill(&mut self.output_gain_curve[..n]);
        for ((x, g), d) in input.iter().zip(&mut self.gained).zip(&mut self.dry_in) {
            let x = &x.as_ref()[at..at + n];
            g.clear();
            d.clear();
            g.extend(x.iter().zip(&self.gain_curve[..n]).map(|(&s, &k)| sanitize(s) * k));
            d.extend(x.iter().map(|&s| sanitize(s)));
        }
        let mix = &self.mix_curve[..n];
        self.running.run(&self.gained, &self.dry_in, mix, &mut self.counters);
        if let Some(t) = &mut self.incoming {
            t.incoming.run(&self.gained, &self.dry_in, mix, &mut self.counters);
        }
        let done = match &mut self.incoming {
            Some(t) => t.blend(&mut self.running.mixed, n, self.fade_frames),
            None => false,
        };
        for (y, m) in output.iter_mut().zip(&self.running.mixed) {
            let y = &mut y.as_mut()[at..at + n];
            for ((o, &m), &k) in y.iter_mut().zip(&m[..n]).zip(&self.output_gain_curve[..n]) {
                *o = m * k;
            }
        }
        if done {
            if let Some(t) = self.incoming.take() {
                self.running = t.incoming;
            }
        }
        self.counters.blocks += 1;
        self.counters.frames += n as u64;
    }

    fn settings_for(&self, preset: &Preset) -> LiveSettings {
        LiveSettings::of(preset, self.sample_rate, self.controls)
    }

    /// Starts a queued preset, or a rebuild for changed live settings, unless a crossfade is running.
    fn start_rebuild_if_due(&mut self) {
        if self.incoming.is_some() {
            return;
        }
        let want = self.settings_for(&self.base);
        let chain = match self.queued.take() {
            Some(q) if q.settings == want => q,
            None if want == self.running.settings || self.failed == Some(want) => return,
            // A queued preset built for other live settings, or new live settings: build for what is wanted now.
            _ => match RunningChain::build(&self.base, want, self.channels, self.sample_rate) {
                Ok(c) => c,
                Err(e) => return self.rebuild_failed(want, e),
            },
        };
        if self.counters.blocks == 0 {
            // Nothing has been output yet (e.g. a node created with initial parameter values): no crossfade.
            self.running = chain;
            return;
        }
        self.counters.rebuilds += 1;
        self.incoming = Some(Crossfade { warm_frames_left: chain.latency, faded_frames: 0, incoming: chain });
    }

    fn rebuild_failed(&mut self, settings: LiveSettings, e: Error) {
        self.counters.failed_rebuilds += 1;
        self.failed = Some(settings);
        self.last_error = Some(e.to_string());
    }
}
