//! The JavaScript boundary (compiled only for wasm32). Nothing else in the crate knows about JS.
//!
//! One opaque handle, [`Session`], owns the loaded sound, the preset and the latest render; JS receives typed arrays
//! and small JSON strings. Errors become JS exceptions carrying the crate's error message.

use crate::analysis::{envelope, SpectrumAnalyzer, Window};
use crate::prep::PrepParams;
use crate::render::{self, Render};
use crate::{demo, io, Clip, Error, Preset};
use crate::{sample, stages};
use std::borrow::Cow;
use wasm_bindgen::prelude::*;

/// Most frames a page spectrum averages per channel (spread over the sound), so long files stay quick to redraw.
const SPECTRUM_FRAMES: usize = 256;

fn js_err(e: Error) -> JsError {
    JsError::new(&e.to_string())
}

/// A loaded sound, its chain and its latest render.
#[wasm_bindgen]
pub struct Session {
    source: Clip,
    preset: Preset,
    render: Option<Render>,
    analyzer: Option<SpectrumAnalyzer>,
    /// The chain input's spectrum for (FFT size, window), and the latest [`Session::headroom`] answer for (bits, clip
    /// budget): every render asks for them, yet they change only with the chain's input, so they are kept until
    /// [`Session::input_changed`] drops them.
    input_spectrum: Option<(usize, Window, Vec<f32>)>,
    headroom_cache: Option<(u32, u32, String)>,
    /// The preparation the chain's input was made with (the default, a no-op, before any render: the input is then
    /// the loaded sound).
    rendered_prep: PrepParams,
}

impl Default for Session {
    fn default() -> Self {
        Self::new()
    }
}

#[wasm_bindgen]
impl Session {
    /// A session holding the default demo and an empty chain.
    #[wasm_bindgen(constructor)]
    pub fn new() -> Session {
        let source = demo::demo(demo::DEMOS[0]).expect("built-in demo");
        Session {
            source,
            preset: Preset::default(),
            render: None,
            analyzer: None,
            input_spectrum: None,
            headroom_cache: None,
            rendered_prep: PrepParams::default(),
        }
    }

    /// Names of the built-in demos, as a JSON array.
    #[wasm_bindgen(js_name = demoNames)]
    pub fn demo_names() -> String {
        serde_json::to_string(&demo::DEMOS).unwrap_or_default()
    }

    /// The built-in presets (the CLI's `stairstep presets`), as a JSON array.
    #[wasm_bindgen(js_name = builtinPresets)]
    pub fn builtin_presets() -> String {
        // Through the presets' own pretty JSON, so that the module holds one serializer for the preset types, not two.
        let items: Vec<String> = crate::preset::builtin().iter().map(Preset::to_json).collect();
        format!("[{}]", items.join(","))
    }

    /// Loads a built-in demo; returns its description as JSON.
    #[wasm_bindgen(js_name = loadDemo)]
    pub fn load_demo(&mut self, name: &str) -> Result<String, JsError> {
        self.set_source(demo::demo(name).map_err(js_err)?)
    }

    /// Loads a WAV file from its bytes; returns its description as JSON. On error the current sound stays.
    #[wasm_bindgen(js_name = loadWav)]
    pub fn load_wav(&mut self, bytes: &[u8]) -> Result<String, JsError> {
        self.set_source(io::wav::read(bytes).map_err(js_err)?)
    }

    /// Loads interleaved samples decoded by the browser.
    #[wasm_bindgen(js_name = loadSamples)]
    pub fn load_samples(&mut self, sample_rate: u32, channels: usize, interleaved: &[f32]) -> Result<String, JsError> {
        self.set_source(Clip::from_interleaved(sample_rate, channels, interleaved).map_err(js_err)?)
    }

    fn set_source(&mut self, clip: Clip) -> Result<String, JsError> {
        self.source = clip;
        self.render = None;
        self.rendered_prep = PrepParams::default();
        self.input_changed();
        Ok(self.describe())
    }

    /// Description of the loaded sound as JSON: `{ sampleRate, channels, frames }`.
    pub fn describe(&self) -> String {
        format!(
            r#"{{"sampleRate":{},"channels":{},"frames":{}}}"#,
            self.source.sample_rate,
            self.source.channel_count(),
            self.source.frames()
        )
    }

    /// Validates a preset and returns it in canonical form (every default filled in), as JSON.
    #[wasm_bindgen(js_name = normalizePreset)]
    pub fn normalize_preset(json: &str) -> Result<String, JsError> {
        Ok(Preset::from_json(json).map_err(js_err)?.to_json())
    }

    /// Sets the preset from JSON (validated; on error the previous preset stays).
    #[wasm_bindgen(js_name = setPreset)]
    pub fn set_preset(&mut self, json: &str) -> Result<(), JsError> {
        self.preset = Preset::from_json(json).map_err(js_err)?;
        Ok(())
    }

    /// Renders the loaded sound through the preset; returns the [`crate::chain::RenderReport`] as JSON.
    pub fn render(&mut self) -> Result<String, JsError> {
        let r = render::render(&self.preset, &self.source).map_err(js_err)?;
        let mut v = serde_json::to_value(&r.report).map_err(|e| JsError::new(&e.to_string()))?;
        // The asset budget: the exact size of the file the export would write, and its data rate.
        let fmt = &self.preset.export;
        let ch = r.export.channel_count();
        let per_second =
            fmt.file_size(r.export.sample_rate as usize * 10, ch).saturating_sub(fmt.file_size(0, ch)) / 10;
        v["export_bytes"] = r.encoded_size(fmt).into();
        v["export_bytes_per_second"] = per_second.into();
        v["prep"] = serde_json::to_value(&r.prep).unwrap_or_default();
        v["export_loop"] = serde_json::to_value(r.export_meta.loops.first()).unwrap_or_default();
        self.render = Some(r);
        if self.rendered_prep != self.preset.prep {
            self.rendered_prep = self.preset.prep.clone();
            self.input_changed();
        }
        Ok(v.to_string())
    }

    /// Channels of what `which` refers to: the source before a render, the chain's channels after one (asset
    /// preparation can make a stereo source mono).
    fn channels_of(&self, which: &str) -> usize {
        match (which, &self.render) {
            ("source", _) | (_, None) => self.source.channel_count(),
            (_, Some(r)) => r.audition.channel_count(),
        }
    }

    /// One channel of `which`, borrowed where it is stored (source, input, output) and computed for the error.
    fn signal(&self, which: &str, ch: usize) -> Result<Cow<'_, [f32]>, JsError> {
        fn pick(c: &Clip, ch: usize) -> Cow<'_, [f32]> {
            Cow::Borrowed(&c.channels[ch.min(c.channel_count() - 1)])
        }
        match (which, &self.render) {
            ("source", _) | ("input", None) => Ok(pick(&self.source, ch)),
            ("input", Some(r)) => Ok(pick(r.input(&self.source), ch)),
            ("output", Some(r)) => Ok(pick(&r.audition, ch)),
            ("error", Some(r)) => Ok(Cow::Owned(r.error(&self.source, ch.min(r.audition.channel_count() - 1)))),
            ("output" | "error", None) => Err(JsError::new("nothing rendered yet")),
            _ => Err(JsError::new(&format!("unknown signal {which:?}: source, input, output or error"))),
        }
    }

    /// Samples of one channel of `source` (as loaded), `input` (what the chain sees: the prepared sound), `output`
    /// (at the source rate) or `error` (output − input).
    pub fn samples(&self, which: &str, channel: usize) -> Result<Vec<f32>, JsError> {
        self.signal(which, channel).map(Cow::into_owned)
    }

    /// Welch spectrum in dBFS of all channels of `which` (at most [`SPECTRUM_FRAMES`] frames per channel, spread over
    /// the sound); `fft_size/2 + 1` bins, bin k at k·rate/fft_size Hz.
    pub fn spectrum(&mut self, which: &str, fft_size: usize, window: &str) -> Result<Vec<f32>, JsError> {
        let window: Window =
            serde_json::from_value(window.into()).map_err(|_| JsError::new(&format!("unknown window {window:?}")))?;
        if which == "input" {
            if let Some((size, w, s)) = &self.input_spectrum {
                if *size == fft_size && *w == window {
                    return Ok(s.clone());
                }
            }
        }
        let mut a = match self.analyzer.take() {
            Some(a) if a.size() == fft_size && a.window() == window => a,
            _ => SpectrumAnalyzer::new(fft_size, window).map_err(js_err)?.with_max_frames(SPECTRUM_FRAMES),
        };
        let chans: Vec<Cow<'_, [f32]>> =
            (0..self.channels_of(which)).map(|c| self.signal(which, c)).collect::<Result<_, _>>()?;
        let out = a.analyze(&chans);
        drop(chans);
        self.analyzer = Some(a);
        if which == "input" {
            self.input_spectrum = Some((fft_size, window, out.clone()));
        }
        Ok(out)
    }

    /// Min/max pairs of one channel of `which` over frames `start..end` in `columns` columns.
    pub fn envelope(
        &self,
        which: &str,
        channel: usize,
        start: usize,
        end: usize,
        columns: usize,
    ) -> Result<Vec<f32>, JsError> {
        Ok(envelope(&self.signal(which, channel)?, start, end, columns))
    }

    /// SQNR against word length (1 to 24 bits, PCM rounding, no dither) of the first `max_seconds` of the loaded
    /// sound, as a JSON array of [`crate::analysis::SweepPoint`].
    pub fn sweep(&self, max_seconds: f64) -> Result<String, JsError> {
        let n = ((max_seconds.max(0.0) * self.source.sample_rate as f64) as usize).min(self.source.frames());
        let head: Vec<&[f32]> = self.source.channels.iter().map(|c| &c[..n]).collect();
        let pts = crate::analysis::sqnr_sweep(&head, &crate::stages::quantize::QuantizeParams::default(), 1..=24)
            .map_err(js_err)?;
        serde_json::to_string(&pts).map_err(|e| JsError::new(&e.to_string()))
    }

    /// Gain staging before a `bits`-bit quantizer, for the chain's input (the prepared sound once rendered): peak,
    /// headroom in dB and in LSB, bits used, and the pre-gain in dB that maximises the SQNR while clipping at most
    /// `max_clipped` samples. JSON: [`crate::analysis::headroom::Headroom`] plus `suggested_gain_db`.
    pub fn headroom(&mut self, bits: u32, max_clipped: u32) -> Result<String, JsError> {
        crate::error::check_range_u("bits", bits as u64, 1, 24).map_err(js_err)?;
        if let Some((b, m, s)) = &self.headroom_cache {
            if (*b, *m) == (bits, max_clipped) {
                return Ok(s.clone());
            }
        }
        let clip = self.render.as_ref().map_or(&self.source, |r| r.input(&self.source));
        let mut v = serde_json::to_value(crate::analysis::headroom::headroom(clip, bits))
            .map_err(|e| JsError::new(&e.to_string()))?;
        v["suggested_gain_db"] = crate::analysis::headroom::suggest_pre_gain(clip, bits, max_clipped as u64).into();
        let s = v.to_string();
        self.headroom_cache = Some((bits, max_clipped, s.clone()));
        Ok(s)
    }

    /// Integrated loudness in LUFS (ITU-R BS.1770, [`crate::analysis::loudness::integrated_loudness`]) of `source`
    /// (as loaded), `input` (the chain's input) or `output` (the latest render at the source rate: what the monitor
    /// plays). `undefined` when it cannot be measured (silence, under 400 ms, a rate below 3,364 Hz).
    pub fn loudness(&self, which: &str) -> Result<Option<f64>, JsError> {
        let clip = match (which, &self.render) {
            ("source", _) | ("input", None) => &self.source,
            ("input", Some(r)) => r.input(&self.source),
            ("output", Some(r)) => &r.audition,
            ("output", None) => return Err(JsError::new("nothing rendered yet")),
            _ => return Err(JsError::new(&format!("unknown signal {which:?}: source, input or output"))),
        };
        Ok(crate::analysis::loudness::integrated_loudness(clip))
    }

    /// The usual file extension of the preset's export format (no dot).
    #[wasm_bindgen(js_name = exportExtension)]
    pub fn export_extension(&self) -> String {
        self.preset.export.extension().to_string()
    }

    /// The current render encoded in the preset's export format.
    #[wasm_bindgen(js_name = exportFile)]
    pub fn export_file(&self) -> Result<Vec<u8>, JsError> {
        let r = self.render.as_ref().ok_or_else(|| JsError::new("nothing rendered yet"))?;
        r.encode(&self.preset.export).map_err(js_err)
    }
}

impl Session {
    /// The chain's input changed (a new sound, or a render with other preparation settings): drops what was kept
    /// for it.
    fn input_changed(&mut self) {
        self.input_spectrum = None;
        self.headroom_cache = None;
    }
}

// ---------------------------------------------------------------------------------------------------------------------
// Live processing: `LiveChain`, the real-time handle behind the AudioWorklet (www/worklet.js).
// ---------------------------------------------------------------------------------------------------------------------

/// Real-time processing for the AudioWorklet: a chain fed block by block (128 frames in a worklet, any size up to
/// [`stages::BLOCK`]) with no allocation per block.
///
/// # I/O
/// JS writes each channel's input into wasm memory at [`LiveChain::input_ptr`] (`maxFrames` floats per channel), calls
/// [`LiveChain::process`]`(frames)` and reads the output at [`LiveChain::output_ptr`]. Make the `Float32Array` views
/// (`new Float32Array(LiveChain.memory().buffer, ptr, frames)`) after construction and re-make them whenever
/// `memory().buffer` is a different object (memory grew: only construction, `setPreset` and parameter rebuilds
/// allocate, never `process` itself).
///
/// # Signal path, per channel
/// `input × gain` → chain (latency removed, then re-added as a fixed delay: see below) → `wet`;
/// `output = (dry·(1 − mix) + wet·mix) × output gain`, where `dry` is the input delayed by the same latency.
///
/// # Latency
/// The chain's audition stream comes in bursts: a hold-mode rate stage emits whole hold spans at once (ahead of the
/// input), a clean-mode rate stage whole FFT blocks (behind it). Each channel's output therefore goes through a
/// fixed-capacity FIFO that starts with `latencyFrames` zeros: 0 without a rate stage or in hold mode; in clean mode
/// 2.5 FFT blocks of the expander minus one frame (`5·delay − 1`: 7,679 frames, 160 ms, at 48 → 8 kHz), the exact
/// worst case for blocks of any size, so the FIFO never runs dry. The output is then exactly the offline render's
/// audition delayed by `latencyFrames`. Underruns (which would mean that bound is wrong) are counted, never hidden.
///
/// # Parameters
/// - `gain` (pre-chain, dB), `mix` (0..1) and output gain (dB): ramped linearly over each block from the previous
///   value to the new one (so automation is followed at block rate without steps).
/// - `resolution` (bits, continuous; ≤ 0 = the preset's), `rate` (Hz; ≤ 0 = the preset's) and `dither` (peak in
///   LSB; < 0 = the preset's) rewrite the preset's first active `quantize` stage (`levels = round(2^bits)`, even
///   for a mid-rise grid; `dither_peak_lsb`, rounded to 0.01 LSB, and TPDF when the stage had no dither) and its first
///   active hold-mode `rate` stage (`rate_hz`, rounded, 1 to the sample rate; clean-mode rate stages keep their rate,
///   since their latency depends on it). A change builds a second chain, which runs beside the first for its latency
///   and then takes over through a 5 ms linear crossfade. One rebuild runs at a time; changes arriving meanwhile are
///   merged into the next.
/// - `setPreset`: validated at once (throws with the core's message, the old chain keeps running), then the same
///   crossfade. A preset with another latency is crossfaded in once its output is ready, a jump in time of the
///   latency difference, smoothed by the crossfade.
#[wasm_bindgen]
pub struct LiveChain {
    channels: usize,
    sample_rate: u32,
    /// The preset as given (before the live parameters).
    base: Preset,
    /// Raw live parameter values as last set.
    resolution: f64,
    rate: f64,
    dither: f64,
    current: live::Slot,
    /// A rebuilt chain warming up or fading in.
    next: Option<live::Transition>,
    /// A validated preset's chain waiting for the running transition to end.
    queued: Option<live::Slot>,
    /// Settings whose rebuild failed (not retried until they change).
    failed: Option<live::Key>,
    last_error: Option<String>,
    fade: usize,
    /// Input and output, `channels × BLOCK` floats, channel `c` at `c·BLOCK`. Never resized (JS holds views).
    input: Vec<f32>,
    output: Vec<f32>,
    /// Per-block scratch: the gained input per channel, the sanitised dry input, per-sample parameter curves.
    gained: Vec<Vec<f32>>,
    dry_in: Vec<Vec<f32>>,
    gain_curve: Vec<f32>,
    mix_curve: Vec<f32>,
    out_curve: Vec<f32>,
    gain: live::Ramp,
    mix: live::Ramp,
    out_gain: live::Ramp,
    stats: live::Stats,
}

#[wasm_bindgen]
impl LiveChain {
    /// Builds the chain of `preset_json` for `channels` channels at `sample_rate` Hz. Throws with the core's message
    /// on a bad preset, channel count or rate.
    #[wasm_bindgen(constructor)]
    pub fn new(preset_json: &str, channels: usize, sample_rate: u32) -> Result<LiveChain, JsError> {
        crate::error::check_range_u("sample_rate", sample_rate as u64, 1, crate::audio::MAX_SAMPLE_RATE as u64)
            .map_err(js_err)?;
        crate::error::check_range_u("channels", channels as u64, 1, crate::audio::MAX_CHANNELS as u64)
            .map_err(js_err)?;
        let base = Preset::from_json(preset_json).map_err(js_err)?;
        let key = live::Key::of(&base, sample_rate, -1.0, -1.0, -1.0);
        let current = live::Slot::build(&base, key, channels, sample_rate).map_err(js_err)?;
        let block = || vec![0.0f32; stages::BLOCK];
        Ok(LiveChain {
            channels,
            sample_rate,
            base,
            resolution: -1.0,
            rate: -1.0,
            dither: -1.0,
            current,
            next: None,
            queued: None,
            failed: None,
            last_error: None,
            fade: ((sample_rate as f64 * 0.005).round() as usize).max(1),
            input: vec![0.0; channels * stages::BLOCK],
            output: vec![0.0; channels * stages::BLOCK],
            gained: (0..channels).map(|_| Vec::with_capacity(stages::BLOCK)).collect(),
            dry_in: (0..channels).map(|_| Vec::with_capacity(stages::BLOCK)).collect(),
            gain_curve: block(),
            mix_curve: block(),
            out_curve: block(),
            gain: live::Ramp::new(1.0),
            mix: live::Ramp::new(1.0),
            out_gain: live::Ramp::new(1.0),
            stats: live::Stats::default(),
        })
    }

    /// The wasm module's memory (a `WebAssembly.Memory`), for views onto the input and output buffers.
    pub fn memory() -> JsValue {
        wasm_bindgen::memory()
    }

    /// Number of channels.
    #[wasm_bindgen(getter)]
    pub fn channels(&self) -> usize {
        self.channels
    }

    /// Sample rate in Hz.
    #[wasm_bindgen(getter, js_name = sampleRate)]
    pub fn sample_rate(&self) -> u32 {
        self.sample_rate
    }

    /// Most frames per [`process`](Self::process) call (the length of each channel's buffer).
    #[wasm_bindgen(getter, js_name = maxFrames)]
    pub fn max_frames(&self) -> usize {
        stages::BLOCK
    }

    /// Frames by which the output lags the input (see the type's docs); changes only when a rebuilt chain with
    /// another latency has taken over.
    #[wasm_bindgen(getter, js_name = latencyFrames)]
    pub fn latency_frames(&self) -> usize {
        self.current.latency
    }

    /// The rate of the chain's export signal in Hz (the reduced rate, if there is a rate stage).
    #[wasm_bindgen(getter, js_name = exportRate)]
    pub fn export_rate(&self) -> u32 {
        self.current.chain.export_rate()
    }

    /// Output frames that the FIFO could not supply (0 unless the latency bound is wrong).
    #[wasm_bindgen(getter)]
    pub fn underruns(&self) -> f64 {
        self.stats.underrun_frames as f64
    }

    /// Blocks processed since construction.
    #[wasm_bindgen(getter)]
    pub fn blocks(&self) -> f64 {
        self.stats.blocks as f64
    }

    /// Byte address in wasm memory of channel `channel`'s input buffer (`maxFrames` floats; clamped to the last
    /// channel).
    #[wasm_bindgen(js_name = inputPtr)]
    pub fn input_ptr(&self, channel: usize) -> usize {
        self.input[channel.min(self.channels - 1) * stages::BLOCK..].as_ptr() as usize
    }

    /// Byte address in wasm memory of channel `channel`'s output buffer (`maxFrames` floats).
    #[wasm_bindgen(js_name = outputPtr)]
    pub fn output_ptr(&self, channel: usize) -> usize {
        self.output[channel.min(self.channels - 1) * stages::BLOCK..].as_ptr() as usize
    }

    /// Pre-chain gain in dB (−120 to +60; NaN is ignored), reached by a linear ramp over the next block.
    #[wasm_bindgen(js_name = setGainDb)]
    pub fn set_gain_db(&mut self, db: f64) {
        self.gain.set(live::db_gain(db));
    }

    /// Dry/wet mix, 0 (input only) to 1 (processed only), ramped over the next block.
    #[wasm_bindgen(js_name = setMix)]
    pub fn set_mix(&mut self, mix: f64) {
        if !mix.is_nan() {
            self.mix.set(mix.clamp(0.0, 1.0));
        }
    }

    /// Output gain in dB (−120 to +60), ramped over the next block.
    #[wasm_bindgen(js_name = setOutputDb)]
    pub fn set_output_db(&mut self, db: f64) {
        self.out_gain.set(live::db_gain(db));
    }

    /// Resolution in bits (continuous, clamped to 1..24; `levels = round(2^bits)`), or ≤ 0 for the preset's own.
    #[wasm_bindgen(js_name = setResolution)]
    pub fn set_resolution(&mut self, bits: f64) {
        self.resolution = bits;
    }

    /// Target rate in Hz of a hold-mode rate stage (rounded, clamped to 1..sample rate), or ≤ 0 for the preset's.
    #[wasm_bindgen(js_name = setRate)]
    pub fn set_rate(&mut self, hz: f64) {
        self.rate = hz;
    }

    /// Dither peak in LSB (0 to 16, rounded to 0.01), or < 0 for the preset's own.
    #[wasm_bindgen(js_name = setDither)]
    pub fn set_dither(&mut self, lsb: f64) {
        self.dither = lsb;
    }

    /// Replaces the preset (validated and built now; throws with the core's message and keeps the old one on error).
    /// The new chain takes over through the crossfade; returns its latency in frames (`latencyFrames` becomes that
    /// once it has taken over).
    #[wasm_bindgen(js_name = setPreset)]
    pub fn set_preset(&mut self, json: &str) -> Result<usize, JsError> {
        let base = Preset::from_json(json).map_err(js_err)?;
        let key = self.key_for(&base);
        let slot = live::Slot::build(&base, key, self.channels, self.sample_rate).map_err(js_err)?;
        let latency = slot.latency;
        self.base = base;
        self.queued = Some(slot);
        self.failed = None;
        Ok(latency)
    }

    /// The preset the running chain was built from (with the live parameters applied), as JSON.
    #[wasm_bindgen(js_name = effectivePreset)]
    pub fn effective_preset(&self) -> String {
        self.current.preset.to_json()
    }

    /// Back to the freshly built state: filters, hold phase, dither streams and FIFOs restart (the output is silent
    /// for `latencyFrames`); ramps jump to their targets; a pending rebuild is applied at once. May click.
    pub fn reset(&mut self) {
        let key = self.key_for(&self.base);
        if let Ok(slot) = live::Slot::build(&self.base, key, self.channels, self.sample_rate) {
            self.current = slot;
        }
        self.next = None;
        self.queued = None;
        for r in [&mut self.gain, &mut self.mix, &mut self.out_gain] {
            r.cur = r.target;
        }
    }

    /// Counters and the running settings as JSON: `blocks`, `frames`, `underrunFrames`, `underrunBlocks`,
    /// `overrunFrames`, `rebuilds`, `failedRebuilds`, `lastError`, `latencyFrames`, `exportRate`, `transition`
    /// (a rebuild in progress), `levels`, `rateHz`, `ditherLsb` (the live overrides in force, null = the preset's),
    /// `applies` (which live parameters this preset has a stage for).
    pub fn stats(&self) -> String {
        let s = &self.stats;
        let k = &self.current.key;
        let applies = live::Key::of(&self.base, self.sample_rate, 1.0, 1.0, 0.0);
        serde_json::json!({
            "blocks": s.blocks,
            "frames": s.frames,
            "underrunFrames": s.underrun_frames,
            "underrunBlocks": s.underrun_blocks,
            "overrunFrames": s.overrun_frames,
            "rebuilds": s.rebuilds,
            "failedRebuilds": s.failed_rebuilds,
            "lastError": self.last_error,
            "latencyFrames": self.current.latency,
            "exportRate": self.current.chain.export_rate(),
            "transition": self.next.is_some() || self.queued.is_some(),
            "levels": k.levels,
            "rateHz": k.rate_hz,
            "ditherLsb": k.dither_centi.map(|c| c as f64 / 100.0),
            "applies": {
                "resolution": applies.levels.is_some(),
                "rate": applies.rate_hz.is_some(),
                "dither": applies.dither_centi.is_some(),
            },
        })
        .to_string()
    }

    /// Processes `frames` frames (clamped to `maxFrames`) from the input buffers into the output buffers.
    pub fn process(&mut self, frames: usize) {
        let n = frames.min(stages::BLOCK);
        if n == 0 {
            return;
        }
        self.start_rebuild_if_due();
        if self.stats.blocks == 0 {
            // Initial values (e.g. a node's parameterData) apply from the first frame, without a ramp.
            for r in [&mut self.gain, &mut self.mix, &mut self.out_gain] {
                r.cur = r.target;
            }
        }
        self.gain.fill(&mut self.gain_curve[..n]);
        self.mix.fill(&mut self.mix_curve[..n]);
        self.out_gain.fill(&mut self.out_curve[..n]);
        for ch in 0..self.channels {
            let x = &self.input[ch * stages::BLOCK..ch * stages::BLOCK + n];
            let (g, d) = (&mut self.gained[ch], &mut self.dry_in[ch]);
            g.clear();
            d.clear();
            g.extend(x.iter().zip(&self.gain_curve[..n]).map(|(&s, &k)| sample::sanitize(s) * k));
            d.extend(x.iter().map(|&s| sample::sanitize(s)));
        }
        let mix = &self.mix_curve[..n];
        self.current.run(&self.gained, &self.dry_in, mix, &mut self.stats);
        if let Some(t) = &mut self.next {
            t.slot.run(&self.gained, &self.dry_in, mix, &mut self.stats);
        }
        let done = match &mut self.next {
            Some(t) => t.blend(&mut self.current.mixed, n, self.fade),
            None => false,
        };
        for ch in 0..self.channels {
            let y = &mut self.output[ch * stages::BLOCK..ch * stages::BLOCK + n];
            for ((o, &m), &k) in y.iter_mut().zip(&self.current.mixed[ch][..n]).zip(&self.out_curve[..n]) {
                *o = m * k;
            }
        }
        if done {
            if let Some(t) = self.next.take() {
                self.current = t.slot;
            }
        }
        self.stats.blocks += 1;
        self.stats.frames += n as u64;
    }
}

impl LiveChain {
    fn key_for(&self, preset: &Preset) -> live::Key {
        live::Key::of(preset, self.sample_rate, self.resolution, self.rate, self.dither)
    }

    /// Starts a queued preset, or a rebuild for changed live parameters, unless a transition is running.
    fn start_rebuild_if_due(&mut self) {
        if self.next.is_some() {
            return;
        }
        let want = self.key_for(&self.base);
        let slot = match self.queued.take() {
            Some(q) if q.key == want => q,
            None if want == self.current.key || self.failed == Some(want) => return,
            // A queued preset built for other live settings, or new live settings: build for what is wanted now.
            _ => match live::Slot::build(&self.base, want, self.channels, self.sample_rate) {
                Ok(s) => s,
                Err(e) => return self.rebuild_failed(want, e),
            },
        };
        if self.stats.blocks == 0 {
            // Nothing has been output yet (e.g. a node created with initial parameter values): no crossfade.
            self.current = slot;
            return;
        }
        self.stats.rebuilds += 1;
        self.next = Some(live::Transition { warm: slot.latency, faded: 0, slot });
    }

    fn rebuild_failed(&mut self, key: live::Key, e: Error) {
        self.stats.failed_rebuilds += 1;
        self.failed = Some(key);
        self.last_error = Some(e.to_string());
    }
}

/// The parts of [`LiveChain`] that need no JS.
mod live {
    use crate::chain::{Chain, ChainOutput, UNBOUNDED};
    use crate::preset::Preset;
    use crate::stages::dither::DitherKind;
    use crate::stages::quantize::Grid;
    use crate::stages::rate::{RateExpander, RateMode, RateReducer};
    use crate::stages::StageSpec;
    use crate::stages::BLOCK;
    use crate::Result;

    /// dB to a linear factor, clamped to −120..+60 dB; NaN keeps the factor at its old value (returns None).
    pub fn db_gain(db: f64) -> Option<f64> {
        (!db.is_nan()).then(|| crate::db::db_to_gain(db.clamp(-120.0, 60.0)))
    }

    /// A value ramped linearly across one block from where it was to its target.
    pub struct Ramp {
        pub cur: f64,
        pub target: f64,
    }

    impl Ramp {
        pub fn new(v: f64) -> Self {
            Ramp { cur: v, target: v }
        }

        pub fn set(&mut self, v: impl Into<Option<f64>>) {
            if let Some(v) = v.into() {
                self.target = v;
            }
        }

        /// Writes this block's per-sample values (ending exactly at the target) and moves to the target.
        pub fn fill(&mut self, out: &mut [f32]) {
            if self.cur == self.target {
                out.fill(self.cur as f32);
            } else {
                let (a, d, n) = (self.cur, self.target - self.cur, out.len() as f64);
                for (i, o) in out.iter_mut().enumerate() {
                    *o = (a + d * (i + 1) as f64 / n) as f32;
                }
            }
            self.cur = self.target;
        }
    }

    /// Counters reported by `stats()`.
    #[derive(Default)]
    pub struct Stats {
        pub blocks: u64,
        pub frames: u64,
        pub underrun_frames: u64,
        pub underrun_blocks: u64,
        pub overrun_frames: u64,
        pub rebuilds: u64,
        pub failed_rebuilds: u64,
    }

    /// The live overrides in force, as the discrete settings a chain is built with (`None`: the preset's own).
    #[derive(Debug, Clone, Copy, PartialEq, Eq)]
    pub struct Key {
        pub levels: Option<u32>,
        pub rate_hz: Option<u32>,
        /// Dither peak in hundredths of an LSB.
        pub dither_centi: Option<u32>,
    }

    fn first_quantize(p: &Preset) -> Option<&crate::stages::quantize::QuantizeParams> {
        p.active_stages().find_map(|s| match s {
            StageSpec::Quantize(q) => Some(q),
            _ => None,
        })
    }

    fn first_hold_rate(p: &Preset) -> Option<&crate::stages::rate::RateParams> {
        p.active_stages().find_map(|s| match s {
            StageSpec::Rate(r) if r.mode == RateMode::Hold => Some(r),
            _ => None,
        })
    }

    impl Key {
        /// The settings the raw parameter values give for `preset` (values that have no stage to act on are None).
        pub fn of(preset: &Preset, sample_rate: u32, resolution: f64, rate: f64, dither: f64) -> Key {
            let q = first_quantize(preset);
            let levels = match q {
                Some(q) if resolution > 0.0 => {
                    let l = libm::exp2(resolution.clamp(1.0, 24.0));
                    // A mid-rise grid needs an even count.
                    let l = if q.grid == Grid::MidRise { 2.0 * (l / 2.0).round() } else { l.round() };
                    Some((l as u32).clamp(2, 1 << 24))
                }
                _ => None,
            };
            let rate_hz = match first_hold_rate(preset) {
                Some(_) if rate > 0.0 => Some((rate.round().clamp(1.0, sample_rate as f64)) as u32),
                _ => None,
            };
            let dither_centi = match q {
                Some(_) if dither >= 0.0 => Some((dither.min(16.0) * 100.0).round() as u32),
                _ => None,
            };
            Key { levels, rate_hz, dither_centi }
        }

        /// `preset` with these overrides applied to its first active quantize and hold-mode rate stages.
        fn apply(&self, preset: &Preset) -> Preset {
            let mut p = preset.clone();
            let mut q_done = false;
            let mut r_done = false;
            for slot in p.stages.iter_mut().filter(|s| !s.bypass) {
                match &mut slot.stage {
                    StageSpec::Quantize(q) if !q_done => {
                        q_done = true;
                        if let Some(l) = self.levels {
                            q.levels = Some(l);
                        }
                        if let Some(c) = self.dither_centi {
                            q.dither_peak_lsb = Some(c as f64 / 100.0);
                            if q.dither == DitherKind::None && c > 0 {
                                q.dither = DitherKind::Tpdf;
                            }
                        }
                    }
                    StageSpec::Rate(r) if !r_done && r.mode == RateMode::Hold => {
                        r_done = true;
                        if let Some(hz) = self.rate_hz {
                            r.rate_hz = hz;
                        }
                    }
                    _ => {}
                }
            }
            p
        }
    }

    /// A fixed-capacity FIFO of samples; never grows.
    pub struct Ring {
        buf: Vec<f32>,
        head: usize,
        len: usize,
    }

    impl Ring {
        /// A FIFO holding up to `capacity` samples, starting with `zeros` zeros.
        fn new(capacity: usize, zeros: usize) -> Self {
            Ring { buf: vec![0.0; capacity.max(1)], head: 0, len: zeros.min(capacity) }
        }

        /// Appends `x`; returns how many samples did not fit (dropped).
        fn push(&mut self, x: &[f32]) -> usize {
            let cap = self.buf.len();
            let n = x.len().min(cap - self.len);
            let tail = (self.head + self.len) % cap;
            let first = n.min(cap - tail);
            self.buf[tail..tail + first].copy_from_slice(&x[..first]);
            self.buf[..n - first].copy_from_slice(&x[first..n]);
            self.len += n;
            x.len() - n
        }

        /// Fills `out` from the front; returns how many samples were missing (written as zeros).
        fn pop(&mut self, out: &mut [f32]) -> usize {
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

    /// One built chain with its FIFOs and scratch.
    pub struct Slot {
        pub chain: Chain,
        pub preset: Preset,
        pub key: Key,
        pub latency: usize,
        out: ChainOutput,
        wet: Vec<Ring>,
        dry: Vec<Ring>,
        wet_buf: Vec<f32>,
        dry_buf: Vec<f32>,
        /// This block's mixed output per channel (`dry·(1 − mix) + wet·mix`).
        pub mixed: Vec<Vec<f32>>,
    }

    impl Slot {
        /// Builds the chain of `base` with the overrides `key`, and everything it will need while streaming.
        pub fn build(base: &Preset, key: Key, channels: usize, rate: u32) -> Result<Slot> {
            let preset = key.apply(base);
            let chain = Chain::new(&preset, channels, rate, UNBOUNDED)?;
            // The most one block can produce, and the latency (see LiveChain's docs), from the rate stage.
            let rate_stage = preset.active_stages().find_map(|s| match s {
                StageSpec::Rate(r) => Some(r),
                _ => None,
            });
            let (most_export, most_audition, latency) = match rate_stage {
                Some(r) => {
                    let reducer = RateReducer::new(r, rate, BLOCK)?;
                    let expander = RateExpander::new(r, rate, BLOCK)?;
                    let e = reducer.max_output(BLOCK);
                    let d = expander.delay();
                    (e.max(BLOCK), expander.max_output(e).max(BLOCK), (5 * d).saturating_sub(1))
                }
                None => (BLOCK, BLOCK, 0),
            };
            let mut out = ChainOutput::new(channels);
            out.export.iter_mut().for_each(|v| v.reserve_exact(most_export));
            out.audition.iter_mut().for_each(|v| v.reserve_exact(most_audition));
            Ok(Slot {
                chain,
                preset,
                key,
                latency,
                out,
                wet: (0..channels).map(|_| Ring::new(latency + most_audition + 2 * BLOCK, latency)).collect(),
                dry: (0..channels).map(|_| Ring::new(latency + BLOCK, latency)).collect(),
                wet_buf: vec![0.0; BLOCK],
                dry_buf: vec![0.0; BLOCK],
                mixed: vec![vec![0.0; BLOCK]; channels],
            })
        }

        /// Feeds one block (`gained[ch]`, all of length n) and leaves n mixed frames per channel in `mixed`.
        pub fn run(&mut self, gained: &[Vec<f32>], dry_in: &[Vec<f32>], mix: &[f32], stats: &mut Stats) {
            let n = mix.len();
            self.out.clear();
            self.chain.process_block(gained, &mut self.out);
            let mut short = 0;
            let lanes = self.wet.iter_mut().zip(&mut self.dry).zip(&mut self.mixed);
            for (((wet, dry), mixed), (audition, dry_in)) in lanes.zip(self.out.audition.iter().zip(dry_in)) {
                stats.overrun_frames += wet.push(audition) as u64;
                dry.push(dry_in);
                short += wet.pop(&mut self.wet_buf[..n]);
                dry.pop(&mut self.dry_buf[..n]);
                let (w, d) = (&self.wet_buf[..n], &self.dry_buf[..n]);
                for (((y, &w), &d), &m) in mixed[..n].iter_mut().zip(w).zip(d).zip(mix) {
                    *y = d * (1.0 - m) + w * m;
                }
            }
            stats.underrun_frames += short as u64;
            stats.underrun_blocks += (short > 0) as u64;
        }
    }

    /// A rebuilt chain taking over: it runs beside the current one for `warm` frames (its latency: until then its
    /// output is the FIFO's initial silence), then a linear crossfade of the fade length.
    pub struct Transition {
        pub slot: Slot,
        pub warm: usize,
        pub faded: usize,
    }

    impl Transition {
        /// Blends this block's output of the new chain into `current` (the old chain's mixed output, in place);
        /// returns true once the new chain has fully taken over.
        pub fn blend(&mut self, current: &mut [Vec<f32>], n: usize, fade: usize) -> bool {
            let (warm, faded) = (self.warm, self.faded);
            for (a, b) in current.iter_mut().zip(&self.slot.mixed) {
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
                (self.warm, self.faded) = (w, f);
            }
            self.warm == 0 && self.faded >= fade
        }
    }
}
