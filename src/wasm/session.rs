//! [`Session`]: the page's handle on a loaded sound, its preset and the latest render (the page's worker holds one).

use super::js_err;
use crate::analysis::{envelope, SpectrumAnalyzer, Window};
use crate::budget::{self, Budget, Candidate, InputFigures, Limit, Score};
use crate::prep::PrepParams;
use crate::render::{self, Render, Tap};
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
    /// The signal after one stage of the latest render's chain ([`Session::tap`]); dropped by every render and load.
    tap: Option<Tap>,
    /// The loaded file's own loop (a WAV `smpl` or AIFF `INST` sustain loop), used as the CLI uses it.
    file_loop: Option<(u64, u64)>,
    /// The budget's figures of the chain input for the preset (JSON) they were measured under: the page measures a
    /// preset's candidates one call at a time, and the preparation and input FFT need run only once for all of them.
    budget_input: Option<(String, InputFigures)>,
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
            tap: None,
            file_loop: None,
            budget_input: None,
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
        self.tap = None;
        self.budget_input = None;
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
        self.tap = None;
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
            ("tap", Some(_)) | ("tap-error", Some(_)) => {
                let t = self.tap.as_ref().ok_or_else(|| JsError::new("no stage tapped"))?;
                Ok(pick(if which == "tap" { &t.signal } else { &t.error }, ch))
            }
            ("output" | "error" | "tap" | "tap-error", None) => Err(JsError::new("nothing rendered yet")),
            _ => {
                Err(JsError::new(&format!("unknown signal {which:?}: source, input, output, error, tap or tap-error")))
            }
        }
    }

    /// Samples of one channel of `source` (as loaded), `input` (what the chain sees: the prepared sound), `output`
    /// (at the source rate), `error` (output − input), `tap` or `tap-error` (after [`Session::tap`]: the signal after
    /// the tapped stage, and the error that stage alone adds, both at the source rate).
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

    /// Taps the latest render's chain after stage `stage` (an index into the preset's stages): the signal after it and
    /// the error it alone adds ([`render::render_tap`]), kept for `tap` and `tap-error` until the next render or
    /// load. Returns `{"stage": i, "sqnr_db": x | null}` (the tap's SQNR at the source rate).
    pub fn tap(&mut self, stage: usize) -> Result<String, JsError> {
        if self.render.is_none() {
            return Err(JsError::new("nothing rendered yet"));
        }
        let t = render::render_tap_with_loop(&self.preset, &self.source, self.file_loop, stage).map_err(js_err)?;
        let v = serde_json::json!({ "stage": t.stage, "sqnr_db": t.sqnr_db });
        self.tap = Some(t);
        Ok(v.to_string())
    }

    /// The spectrogram of all channels of `which` (as [`Session::samples`] names them) over frames `start..end`, for
    /// a view `columns` × `rows` pixels: [`crate::analysis::spectrogram::view_spectrogram`] with FFT size `size`,
    /// resampled to `rows` rows from `lo_hz` (row 0) to `hi_hz` on a log (`log`) or linear axis. Levels in dBFS,
    /// `frames × rows`, frame-major (frames: at most `columns`, tiling the range evenly).
    #[allow(clippy::too_many_arguments)]
    pub fn spectrogram(
        &self,
        which: &str,
        start: usize,
        end: usize,
        size: usize,
        columns: usize,
        rows: usize,
        log: bool,
        lo_hz: f64,
        hi_hz: f64,
    ) -> Result<Vec<f32>, JsError> {
        use crate::analysis::spectrogram::{view_spectrogram, FrequencyScale};
        let chans: Vec<Cow<'_, [f32]>> =
            (0..self.channels_of(which)).map(|c| self.signal(which, c)).collect::<Result<_, _>>()?;
        let rate = self.render.as_ref().map_or(self.source.sample_rate, |r| r.audition.sample_rate);
        let s = view_spectrogram(&chans, rate, start, end, size, columns).map_err(js_err)?;
        let scale = if log { FrequencyScale::Log } else { FrequencyScale::Linear };
        Ok(s.rows(rows, scale, lo_hz, hi_hz))
    }

    /// The static input → output curve ([`crate::analysis::transfer::transfer_curve`]) of the preset's active stages
    /// up to stage `upto` (an index; past the end: all of them) over `lo … hi` with `points` points, as JSON: the
    /// curve's `output` (its `input` is evenly spaced from `lo` to `hi`), `levels`, `applied` and `notes`.
    pub fn transfer(&self, upto: usize, lo: f64, hi: f64, points: usize) -> Result<String, JsError> {
        let active = self.preset.stages.iter().enumerate().take(upto.saturating_add(1)).filter(|(_, s)| !s.bypass);
        let c = crate::analysis::transfer::transfer_curve(active.map(|(i, s)| (i, &s.stage)), lo, hi, points)
            .map_err(js_err)?;
        let v = serde_json::json!({ "output": c.output, "levels": c.levels, "applied": c.applied, "notes": c.notes });
        Ok(v.to_string())
    }

    /// The histogram of the codes that quantizing stage `stage` (an index) emitted in the latest render, in at most
    /// `bins` bins: [`crate::analysis::codes::CodeHistogram`] as JSON. Counted on the stage's output at its own rate:
    /// the tap's when that stage is tapped, else a tap computed for the purpose (not kept).
    pub fn codes(&self, stage: usize, bins: usize) -> Result<String, JsError> {
        if self.render.is_none() {
            return Err(JsError::new("nothing rendered yet"));
        }
        let slot = self.preset.stages.get(stage).ok_or_else(|| JsError::new(&format!("no stage {stage}")))?;
        let owned;
        let tap = match &self.tap {
            Some(t) if t.stage == stage => t,
            _ => {
                owned =
                    render::render_tap_with_loop(&self.preset, &self.source, self.file_loop, stage).map_err(js_err)?;
                &owned
            }
        };
        let h =
            crate::analysis::codes::code_histogram(&slot.stage, &tap.at_stage_rate.channels, bins).map_err(js_err)?;
        serde_json::to_string(&h).map_err(|e| JsError::new(&e.to_string()))
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

    /// The format budget's candidates ([`crate::budget`]) for the loaded sound under `preset` (JSON) and the file's own loop, as the CLI takes it, not yet
    /// measured: JSON `{ source_rate, duration_s, candidates }`, each candidate a [`budget::CandidateSpec`] in the
    /// order the CLI lists them. The page measures them one call at a time with [`Session::budget_measure`], so that
    /// its worker can report progress and stop between two.
    #[wasm_bindgen(js_name = budgetCandidates)]
    pub fn budget_candidates(&mut self, preset: &str) -> Result<String, JsError> {
        let (parsed, figures) = self.budget_input(preset)?;
        let b = Budget::with_input(&parsed, &self.source, self.file_loop, figures).map_err(js_err)?;
        let v = serde_json::json!({
            "source_rate": b.source_rate(),
            "duration_s": b.duration_s(),
            "candidates": b.candidates().map_err(js_err)?,
        });
        Ok(v.to_string())
    }

    /// Renders and measures candidate `index` of [`Session::budget_candidates`] for the same preset: a
    /// [`budget::Candidate`] as JSON. Throws, with the reason, for a candidate the sound cannot use (the CLI lists
    /// those as `skipped`).
    #[wasm_bindgen(js_name = budgetMeasure)]
    pub fn budget_measure(&mut self, preset: &str, index: usize) -> Result<String, JsError> {
        let (parsed, figures) = self.budget_input(preset)?;
        let b = Budget::with_input(&parsed, &self.source, self.file_loop, figures).map_err(js_err)?;
        let specs = b.candidates().map_err(js_err)?;
        let spec = specs.get(index).ok_or_else(|| JsError::new(&format!("no candidate {index}")))?;
        serde_json::to_string(&b.measure(spec).map_err(js_err)?).map_err(|e| JsError::new(&e.to_string()))
    }

    /// The Pareto front and the pick of measured candidates (a JSON array of [`budget::Candidate`], as
    /// [`Session::budget_measure`] gave them, in list order) by `score` (`a_weighted_snr_db` or `sqnr_db`) within
    /// `limit` (JSON as the CLI's `--json` writes it: `{"kind":"max-bytes","value":8192}`, `{"kind":"max-kbps",
    /// "value":64}` or `{"kind":"none"}`): JSON `{ pareto: [bool per candidate], pick: index or null }`.
    #[wasm_bindgen(js_name = budgetPick)]
    pub fn budget_pick(candidates: &str, score: &str, limit: &str) -> Result<String, JsError> {
        let bad = |what: &str, e: serde_json::Error| JsError::new(&format!("{what}: {e}"));
        let mut candidates: Vec<Candidate> = serde_json::from_str(candidates).map_err(|e| bad("candidates", e))?;
        let score: Score = serde_json::from_value(score.into()).map_err(|e| bad("score", e))?;
        let limit: Limit = serde_json::from_str(limit).map_err(|e| bad("limit", e))?;
        budget::mark_pareto(&mut candidates, score);
        let pick = budget::pick(&candidates, score, limit);
        let pareto: Vec<bool> = candidates.iter().map(|c| c.pareto).collect();
        Ok(serde_json::json!({ "pareto": pareto, "pick": pick }).to_string())
    }
}

impl Session {
    /// `preset` parsed, and the budget's input figures for it: measured by a [`Budget::new`] the first time, then
    /// kept until another preset or sound comes.
    fn budget_input(&mut self, preset: &str) -> Result<(Preset, InputFigures), JsError> {
        let parsed = Preset::from_json(preset).map_err(js_err)?;
        if let Some((key, figures)) = &self.budget_input {
            if key == preset {
                return Ok((parsed, *figures));
            }
        }
        let figures = Budget::new(&parsed, &self.source, self.file_loop).map_err(js_err)?.input_figures();
        self.budget_input = Some((preset.to_string(), figures));
        Ok((parsed, figures))
    }

    /// The chain's input changed (a new sound, or a render with other preparation settings): drops what was kept
    /// for it.
    fn input_changed(&mut self) {
        self.input_spectrum = None;
        self.headroom_cache = None;
    }
}
