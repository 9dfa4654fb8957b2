//! A whole clip through a preset: asset preparation, then the chain, then the export's loop points. The page, the
//! CLI (for inputs it cannot stream) and the tests render through [`render`]; streams go through
//! [`Chain::process_block`] directly and give the same samples.

use crate::analysis::levels::SqnrAcc;
use crate::audio::Clip;
use crate::chain::{Chain, Processed, RenderReport};
use crate::codec::{ima_adpcm, ms_adpcm};
use crate::error::{Error, Result};
use crate::io::{ExportFormat, ExportMeta, SampleLoop, WavEncoding};
use crate::prep::{self, PrepReport};
use crate::preset::Preset;
use crate::sample::sanitize;
use crate::stages;

/// The result of rendering a clip through a preset: asset preparation, then the chain.
#[derive(Debug, Clone)]
pub struct Render {
    /// The processed sound at the export rate: what an exporter writes.
    pub export: Clip,
    /// The processed sound at the source rate, aligned sample for sample with the chain's input.
    pub audition: Clip,
    /// The chain's input when the preset prepares the sound (trim, mono, fades, normalisation, loop crossfade), or
    /// `None` when it does not, in which case the chain's input is the clip given.
    pub prepared: Option<Clip>,
    /// What the preparation did, when the preset prepares the sound.
    pub prep: Option<PrepReport>,
    /// Loop points for the export, at the export rate (snapped to ADPCM blocks for an ADPCM export).
    pub export_meta: ExportMeta,
    /// Figures about the render.
    pub report: RenderReport,
}

impl Render {
    /// The chain's input: the prepared clip, or `original` when the preset prepares nothing.
    pub fn input<'a>(&'a self, original: &'a Clip) -> &'a Clip {
        self.prepared.as_ref().unwrap_or(original)
    }

    /// Error signal (audition − chain input) of channel `ch`, aligned; `original` is the clip given to the render.
    pub fn error(&self, original: &Clip, ch: usize) -> Vec<f32> {
        let input = self.input(original);
        self.audition.channels[ch].iter().zip(&input.channels[ch]).map(|(&o, &i)| o - sanitize(i)).collect()
    }

    /// The export encoded in `format`, with its loop points.
    pub fn encode(&self, format: &ExportFormat) -> Result<Vec<u8>> {
        format.encode_with(&self.export, &self.export_meta)
    }

    /// Exact size in bytes of [`encode`](Self::encode)'s output.
    pub fn encoded_size(&self, format: &ExportFormat) -> u64 {
        format.file_size_with(self.export.frames(), self.export.channel_count(), &self.export_meta)
    }
}

/// Renders `input` through `preset`: its asset preparation, then its chain.
pub fn render(preset: &Preset, input: &Clip) -> Result<Render> {
    render_with_loop(preset, input, None)
}

/// Like [`render`], with a loop found in the input file (e.g. its `smpl` chunk: input frames, end exclusive): the loop
/// of `"loop_region": "file"`, and the loop kept when the preset sets no loop region of its own
/// ([`prep::prepare_with_file_loop`]).
pub fn render_with_loop(preset: &Preset, input: &Clip, file_loop: Option<(u64, u64)>) -> Result<Render> {
    let prep = &preset.prep;
    let prepared = if prep.is_noop() && file_loop.is_none() {
        None
    } else {
        Some(prep::prepare_with_file_loop(prep, input, file_loop).map_err(|e| e.at("prep"))?)
    };
    let clip = prepared.as_ref().map_or(input, |p| &p.clip);
    let r = Chain::new(preset, clip.channel_count(), clip.sample_rate, clip.frames())?.process_clip(clip)?;
    let mut export_meta = ExportMeta::default();
    if let Some((start, end)) = prepared.as_ref().and_then(|p| p.report.loop_region) {
        export_meta.loops.push(export_loop(start, end, &r, &preset.export)?);
    }
    let (prepared, prep) = match prepared {
        Some(p) => (Some(p.clip), Some(p.report)),
        None => (None, None),
    };
    Ok(Render { export: r.export, audition: r.audition, prepared, prep, export_meta, report: r.report })
}

/// The signal after one stage of a chain, for audition and for that stage's meters ([`render_tap`]).
#[derive(Debug, Clone)]
pub struct Tap {
    /// Index of the stage in the preset's `stages` (from 0).
    pub stage: usize,
    /// The chain cut after the stage, brought back to the source rate as the audition is: the signal after the stage,
    /// aligned sample for sample with the chain's input (source rate, full-scale units).
    pub signal: Clip,
    /// The stage's output at its own rate (the source rate before the rate stage, the export rate from it on): the
    /// cut chain's export; what the stage's codes are counted on ([`crate::analysis::codes`]).
    pub at_stage_rate: Clip,
    /// The error this stage alone adds, at the source rate: `signal` − `g`·(the same signal for the chain cut before
    /// the stage), `g` being the stage's reference gain (1 but for the gain stage, whose gain is not an error; see
    /// [`crate::stages::Stage::reference_gain`]). All zeros for a bypassed stage. After the rate stage this is the
    /// stage's export-rate error brought back by the rate stage's expander (a linear filter, or a hold).
    pub error: Clip,
    /// SQNR of `signal` against `g`·(the stage's input), in dB, at the source rate; `None` when `error` is all zeros.
    /// For a stage before the rate stage this is the report's per-stage figure; after it, the report measures at the
    /// export rate, which can differ by the expander's imaging.
    pub sqnr_db: Option<f64>,
}

/// The signal after stage `stage` (an index into `preset.stages`) and the error that stage alone adds: for hearing
/// and seeing any point of the chain. Runs the preset's preparation once and two cut chains (up to the stage, and up to
/// the one before it); the seeds of every stage are those of the whole chain, so `signal` is exactly what the full
/// chain computes after that stage. Per-stage figures of the cut chains are not computed.
pub fn render_tap(preset: &Preset, input: &Clip, stage: usize) -> Result<Tap> {
    render_tap_with_loop(preset, input, None, stage)
}

/// Like [`render_tap`], for a sound whose file holds a loop of its own (as [`render_with_loop`]): the preparation
/// is the render's, `"loop_region": "file"` and its crossfade included.
pub fn render_tap_with_loop(preset: &Preset, input: &Clip, file_loop: Option<(u64, u64)>, stage: usize) -> Result<Tap> {
    let n = preset.stages.len();
    if stage >= n {
        return Err(Error::param("stage", stage, format!("a stage index from 0 to {}", n as i64 - 1)));
    }
    let prepared = if preset.prep.is_noop() && file_loop.is_none() {
        None
    } else {
        Some(prep::prepare_with_file_loop(&preset.prep, input, file_loop).map_err(|e| e.at("prep"))?)
    };
    let clip = prepared.as_ref().map_or(input, |p| &p.clip);
    let run = |len: usize| -> Result<Processed> {
        let mut cut = preset.clone();
        cut.stages.truncate(len);
        Chain::new(&cut, clip.channel_count(), clip.sample_rate, clip.frames())?
            .without_stage_stats()
            .process_clip(clip)
    };
    let after = run(stage + 1)?;
    let before = run(stage)?;
    let slot = &preset.stages[stage];
    let g = if slot.bypass {
        1.0
    } else {
        // The reference gain of this stage (rate stages have none: 1).
        stages::build(&slot.stage, crate::audio::MAX_SAMPLE_RATE, preset.seed, 0)
            .ok()
            .flatten()
            .map_or(1.0, |s| s.reference_gain())
    };
    let mut acc = SqnrAcc::default();
    let mut error = Vec::with_capacity(clip.channel_count());
    for (y, x) in after.audition.channels.iter().zip(&before.audition.channels) {
        let reference: Vec<f32> = if g == 1.0 { x.clone() } else { x.iter().map(|&v| (v as f64 * g) as f32).collect() };
        acc.push_slices(&reference, y);
        error.push(y.iter().zip(&reference).map(|(&o, &r)| o - r).collect());
    }
    Ok(Tap {
        stage,
        signal: after.audition,
        at_stage_rate: after.export,
        error: Clip { sample_rate: clip.sample_rate, channels: error },
        sqnr_db: acc.db_if_error(),
    })
}

/// A loop in chain-input frames (end exclusive) as the export's `smpl` loop: rescaled exactly to the export rate
/// ([`prep::rescale_loop`]: the export samples that come from inside the loop), snapped to whole blocks for IMA and
/// Microsoft ADPCM (a decoder can only restart at a block header; [`prep::snap_to_block`]), end made inclusive as
/// `smpl` wants.
fn export_loop(start: u64, end: u64, r: &Processed, format: &ExportFormat) -> Result<SampleLoop> {
    let (mut s, mut e) = prep::rescale_loop(start, end, r.report.source_rate, r.report.export_rate);
    let ch = r.export.channel_count();
    let spb = match format {
        ExportFormat::Wav { encoding: WavEncoding::ImaAdpcm, block_align } => Some(ima_adpcm::samples_per_block(
            block_align.map_or_else(|| ima_adpcm::default_block_align(ch), |b| b as usize),
            ch,
        )?),
        ExportFormat::Wav { encoding: WavEncoding::MsAdpcm, block_align } => Some(ms_adpcm::samples_per_block(
            block_align.map_or_else(|| ms_adpcm::default_block_align(ch), |b| b as usize),
            ch,
        )?),
        _ => None,
    };
    if let Some(spb) = spb {
        (s, e) = prep::snap_to_block(s, e, spb as u64).map_err(|e| e.at("prep"))?;
    }
    let frames = r.export.frames() as u64;
    let e = e.min(frames);
    if e <= s {
        return Err(Error::param(
            "prep.loop_region",
            format!("{start}..{end}"),
            "a loop of at least one sample at the export rate",
        ));
    }
    let to_u32 = |v: u64| u32::try_from(v).map_err(|_| Error::param("prep.loop_region", v, "at most 2^32 − 1"));
    Ok(SampleLoop::forward(to_u32(s)?, to_u32(e - 1)?))
}
