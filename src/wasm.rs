//! The JavaScript boundary (compiled only for wasm32). Nothing else in the crate knows about JS.
//!
//! One opaque handle, [`Session`], owns the loaded sound, the preset and the latest render; JS receives typed arrays
//! and small JSON strings. Errors become JS exceptions carrying the crate's error message.

use crate::analysis::{envelope, SpectrumAnalyzer, Window};
use crate::chain::{self, Render};
use crate::{demo, io, Clip, Error, Preset};
use wasm_bindgen::prelude::*;

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
        Session { source, preset: Preset::default(), render: None, analyzer: None }
    }

    /// Names of the built-in demos, as a JSON array.
    #[wasm_bindgen(js_name = demoNames)]
    pub fn demo_names() -> String {
        serde_json::to_string(&demo::DEMOS).unwrap_or_default()
    }

    /// The built-in presets (the CLI's `stairstep presets`), as a JSON array.
    #[wasm_bindgen(js_name = builtinPresets)]
    pub fn builtin_presets() -> String {
        serde_json::to_string(&crate::preset::builtin()).unwrap_or_default()
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
        let r = chain::render(&self.preset, &self.source).map_err(js_err)?;
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

    fn signal(&self, which: &str, ch: usize) -> Result<Vec<f32>, JsError> {
        let pick = |c: &Clip| c.channels[ch.min(c.channel_count() - 1)].clone();
        match (which, &self.render) {
            ("source", _) | ("input", None) => Ok(pick(&self.source)),
            ("input", Some(r)) => Ok(pick(r.input(&self.source))),
            ("output", Some(r)) => Ok(pick(&r.audition)),
            ("error", Some(r)) => Ok(r.error(&self.source, ch.min(r.audition.channel_count() - 1))),
            ("output" | "error", None) => Err(JsError::new("nothing rendered yet")),
            _ => Err(JsError::new(&format!("unknown signal {which:?}: source, input, output or error"))),
        }
    }

    /// Samples of one channel of `source` (as loaded), `input` (what the chain sees: the prepared sound), `output`
    /// (at the source rate) or `error` (output − input).
    pub fn samples(&self, which: &str, channel: usize) -> Result<Vec<f32>, JsError> {
        self.signal(which, channel)
    }

    /// Welch spectrum in dBFS of all channels of `which`; `fft_size/2 + 1` bins, bin k at k·rate/fft_size Hz.
    pub fn spectrum(&mut self, which: &str, fft_size: usize, window: &str) -> Result<Vec<f32>, JsError> {
        let window: Window =
            serde_json::from_value(window.into()).map_err(|_| JsError::new(&format!("unknown window {window:?}")))?;
        let mut a = match self.analyzer.take() {
            Some(a) if a.size() == fft_size && a.window() == window => a,
            _ => SpectrumAnalyzer::new(fft_size, window).map_err(js_err)?,
        };
        let chans: Vec<Vec<f32>> =
            (0..self.channels_of(which)).map(|c| self.signal(which, c)).collect::<Result<_, _>>()?;
        let out = a.analyze(&chans);
        self.analyzer = Some(a);
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
        let pts =
            crate::analysis::sqnr_sweep(&head, &crate::quantize::QuantizeParams::default(), 1..=24).map_err(js_err)?;
        serde_json::to_string(&pts).map_err(|e| JsError::new(&e.to_string()))
    }

    /// Gain staging before a `bits`-bit quantizer, for the chain's input (the prepared sound once rendered): peak,
    /// headroom in dB and in LSB, bits used, and the pre-gain in dB that maximises the SQNR while clipping at most
    /// `max_clipped` samples. JSON: [`crate::prep::Headroom`] plus `suggested_gain_db`.
    pub fn headroom(&self, bits: u32, max_clipped: u32) -> Result<String, JsError> {
        crate::error::check_range_u("bits", bits as u64, 1, 24).map_err(js_err)?;
        let clip = self.render.as_ref().map_or(&self.source, |r| r.input(&self.source));
        let mut v =
            serde_json::to_value(crate::prep::headroom(clip, bits)).map_err(|e| JsError::new(&e.to_string()))?;
        v["suggested_gain_db"] = crate::prep::suggest_pre_gain(clip, bits, max_clipped as u64).into();
        Ok(v.to_string())
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
