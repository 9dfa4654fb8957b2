//! [`LiveChain`]: the AudioWorklet's handle (www/worklet.js) on the core's [`crate::live::LiveChain`], plus the input
//! and output buffers JS views. Signal path, latency, parameters and crossfades: see [`crate::live`].

use super::js_err;
use crate::live;
use crate::stages::BLOCK;
use crate::Preset;
use wasm_bindgen::prelude::*;

/// Real-time processing for the AudioWorklet: a chain fed block by block (128 frames in a worklet, any size up to
/// `maxFrames`) with no allocation per block.
///
/// # I/O
/// JS writes each channel's input into wasm memory at [`LiveChain::input_ptr`] (`maxFrames` floats per channel), calls
/// [`LiveChain::process`]`(frames)` and reads the output at [`LiveChain::output_ptr`]. Make the `Float32Array` views
/// (`new Float32Array(LiveChain.memory().buffer, ptr, frames)`) after construction and re-make them whenever
/// `memory().buffer` is a different object (memory grew: only construction, `setPreset`, `reset` and the `process`
/// call that starts a rebuild for changed live parameters allocate; see [`crate::live`]).
#[wasm_bindgen]
pub struct LiveChain {
    core: live::LiveChain,
    /// Input and output, one buffer of `maxFrames` floats per channel. Never resized (JS holds views).
    input: Vec<Vec<f32>>,
    output: Vec<Vec<f32>>,
}

#[wasm_bindgen]
impl LiveChain {
    /// Builds the chain of `preset_json` for `channels` channels at `sample_rate` Hz. Throws with the core's message
    /// on a bad preset, channel count or rate.
    #[wasm_bindgen(constructor)]
    pub fn new(preset_json: &str, channels: usize, sample_rate: u32) -> Result<LiveChain, JsError> {
        crate::audio::check_sample_rate(sample_rate).map_err(js_err)?;
        crate::audio::check_channels(channels).map_err(js_err)?;
        let preset = Preset::from_json(preset_json).map_err(js_err)?;
        let core = live::LiveChain::new(&preset, channels, sample_rate).map_err(js_err)?;
        let buffers = || vec![vec![0.0f32; BLOCK]; channels];
        Ok(LiveChain { core, input: buffers(), output: buffers() })
    }

    /// The wasm module's memory (a `WebAssembly.Memory`), for views onto the input and output buffers.
    pub fn memory() -> JsValue {
        wasm_bindgen::memory()
    }

    /// Number of channels.
    #[wasm_bindgen(getter)]
    pub fn channels(&self) -> usize {
        self.core.channels()
    }

    /// Sample rate in Hz.
    #[wasm_bindgen(getter, js_name = sampleRate)]
    pub fn sample_rate(&self) -> u32 {
        self.core.sample_rate()
    }

    /// Most frames per [`process`](Self::process) call (the length of each channel's buffer).
    #[wasm_bindgen(getter, js_name = maxFrames)]
    pub fn max_frames(&self) -> usize {
        BLOCK
    }

    /// Frames by which the output lags the input; changes only when a rebuilt chain with another latency has taken
    /// over.
    #[wasm_bindgen(getter, js_name = latencyFrames)]
    pub fn latency_frames(&self) -> usize {
        self.core.latency_frames()
    }

    /// The rate of the chain's export signal in Hz (the reduced rate, if there is a rate stage).
    #[wasm_bindgen(getter, js_name = exportRate)]
    pub fn export_rate(&self) -> u32 {
        self.core.export_rate()
    }

    /// Output frames that the FIFO could not supply (0 unless the latency bound is wrong).
    #[wasm_bindgen(getter)]
    pub fn underruns(&self) -> f64 {
        self.core.stats().underrun_frames as f64
    }

    /// Blocks processed since construction.
    #[wasm_bindgen(getter)]
    pub fn blocks(&self) -> f64 {
        self.core.stats().blocks as f64
    }

    /// Byte address in wasm memory of channel `channel`'s input buffer (`maxFrames` floats; clamped to the last
    /// channel).
    #[wasm_bindgen(js_name = inputPtr)]
    pub fn input_ptr(&self, channel: usize) -> usize {
        self.input[channel.min(self.input.len() - 1)].as_ptr() as usize
    }

    /// Byte address in wasm memory of channel `channel`'s output buffer (`maxFrames` floats).
    #[wasm_bindgen(js_name = outputPtr)]
    pub fn output_ptr(&self, channel: usize) -> usize {
        self.output[channel.min(self.output.len() - 1)].as_ptr() as usize
    }

    /// Pre-chain gain in dB (−120 to +60; NaN is ignored), reached by a linear ramp over the next block.
    #[wasm_bindgen(js_name = setGainDb)]
    pub fn set_gain_db(&mut self, db: f64) {
        self.core.set_gain_db(db);
    }

    /// Dry/wet mix, 0 (input only) to 1 (processed only), ramped over the next block.
    #[wasm_bindgen(js_name = setMix)]
    pub fn set_mix(&mut self, mix: f64) {
        self.core.set_mix(mix);
    }

    /// Output gain in dB (−120 to +60), ramped over the next block.
    #[wasm_bindgen(js_name = setOutputDb)]
    pub fn set_output_db(&mut self, db: f64) {
        self.core.set_output_db(db);
    }

    /// Resolution in bits (continuous, clamped to 1..24; `levels = round(2^bits)`), or ≤ 0 for the preset's own.
    #[wasm_bindgen(js_name = setResolution)]
    pub fn set_resolution(&mut self, bits: f64) {
        self.core.set_resolution(bits);
    }

    /// Target rate in Hz of a hold-mode rate stage (rounded, clamped to 1..sample rate), or ≤ 0 for the preset's.
    #[wasm_bindgen(js_name = setRate)]
    pub fn set_rate(&mut self, hz: f64) {
        self.core.set_rate(hz);
    }

    /// Dither peak in LSB (0 to 16, rounded to 0.01), or < 0 for the preset's own.
    #[wasm_bindgen(js_name = setDither)]
    pub fn set_dither(&mut self, lsb: f64) {
        self.core.set_dither(lsb);
    }

    /// Replaces the preset (validated and built now; throws with the core's message and keeps the old one on error).
    /// The new chain takes over through the crossfade; returns its latency in frames (`latencyFrames` becomes that
    /// once it has taken over).
    #[wasm_bindgen(js_name = setPreset)]
    pub fn set_preset(&mut self, json: &str) -> Result<usize, JsError> {
        let preset = Preset::from_json(json).map_err(js_err)?;
        self.core.set_preset(&preset).map_err(js_err)
    }

    /// The preset the running chain was built from (with the live parameters applied), as JSON.
    #[wasm_bindgen(js_name = effectivePreset)]
    pub fn effective_preset(&self) -> String {
        self.core.effective_preset().to_json()
    }

    /// Back to the freshly built state: filters, hold phase, dither streams and FIFOs restart (the output is silent
    /// for `latencyFrames`); ramps jump to their targets; a pending rebuild is applied at once. May click.
    pub fn reset(&mut self) {
        self.core.reset();
    }

    /// Counters and the running settings as JSON ([`crate::live::LiveStats`]): `applies`, `blocks`, `ditherLsb`,
    /// `exportRate`, `failedRebuilds`, `frames`, `lastError`, `latencyFrames`, `levels`, `overrunFrames`, `rateHz`,
    /// `rebuilds`, `transition`, `underrunBlocks`, `underrunFrames`.
    pub fn stats(&self) -> String {
        // Plain fields, numbers and strings: serialising cannot fail.
        serde_json::to_string(&self.core.stats()).unwrap_or_default()
    }

    /// Processes `frames` frames (clamped to `maxFrames`) from the input buffers into the output buffers.
    pub fn process(&mut self, frames: usize) -> Result<(), JsError> {
        self.core.process(&self.input, &mut self.output, frames.min(BLOCK)).map_err(js_err)
    }
}
