//! [`Session`]: the page's handle on a loaded sound, its preset and the latest render (the page's worker holds one).

use super::js_err;
use crate::analysis::{envelope, SpectrumAnalyzer, Window};
use crate::prep::PrepParams;
use crate::render::{self, Render};
use crate::{demo, io, Clip, Preset};
use std::borrow::Cow;
use wasm_bindgen::prelude::*;

/// Most frames a page spectrum averages per channel (spread over the sound), so long files stay quick to redraw.
const SPECTRUM_FRAMES: usize = 256;

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
    /// The loaded file's own loop (a WAV `smpl` or AIFF `INST` sustain loop), used as the CLI uses it.
    file_loop: Option<(u64, u64)>,
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
            file_loop: None,
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

    /// Every stage kind's fields (label, type, unit, range, default, slider span, when it applies), as JSON: the
    /// [`crate::stages::schema`] the page builds its chain editor from.
    #[wasm_bindgen(js_name = stageSchema)]
    pub fn stage_schema() -> String {
        crate::stages::schema::schema_json()
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

    /// Loads a WAV or AIFF/AIFF-C file from its bytes with the core's own readers ([`io::read::read_own`], as the
    /// CLI reads them: the same samples, and the file's own loop), at most `max_samples` samples. Returns its
    /// description as JSON with `decoder`, `format`, `warnings` and `fileLoop` added. On error the current sound
    /// stays.
    #[wasm_bindgen(js_name = loadFile)]
    pub fn load_file(&mut self, bytes: &[u8], max_samples: f64) -> Result<String, JsError> {
        let limits = io::read::Limits { max_samples: max_samples.max(0.0) as u64 };
        let d = io::read::read_own(bytes, limits).map_err(js_err)?;
        let info = self.set_source(d.clip)?;
        self.file_loop = d.file_loop;
        let mut v: serde_json::Value = serde_json::from_str(&info).map_err(|e| JsError::new(&e.to_string()))?;
        v["decoder"] = d.decoder.into();
        v["format"] = d.format.into();
        v["warnings"] = d.warnings.into();
        v["fileLoop"] = serde_json::to_value(d.file_loop).unwrap_or_default();
        Ok(v.to_string())
    }

    /// Loads interleaved samples decoded by the browser.
    #[wasm_bindgen(js_name = loadSamples)]
    pub fn load_samples(&mut self, sample_rate: u32, channels: usize, interleaved: &[f32]) -> Result<String, JsError> {
        self.set_source(Clip::from_interleaved(sample_rate, channels, interleaved).map_err(js_err)?)
    }

    fn set_source(&mut self, clip: Clip) -> Result<String, JsError> {
        self.source = clip;
        self.file_loop = None;
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
        let r = render::render_with_loop(&self.preset, &self.source, self.file_loop).map_err(js_err)?;
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

    /// The audition error signal of one channel (clamped to the last): the latest render's output minus the chain's
    /// input, aligned, as [`Render::error`] computes it (the input sanitised as the chain saw it: NaN as 0, ±Inf as
    /// ±1). Throws before the first render. The same as `samples("error", channel)`.
    #[wasm_bindgen(js_name = errorSignal)]
    pub fn error_signal(&self, channel: usize) -> Result<Vec<f32>, JsError> {
        self.samples("error", channel)
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
