//! A whole clip through a preset: asset preparation, then the chain, then the export's loop points. The page, the
//! CLI (for inputs it cannot stream) and the tests render through [`render`]; streams go through
//! [`Chain::process_block`] directly and give the same samples.

use crate::audio::Clip;
use crate::chain::{Chain, Processed, RenderReport};
use crate::codec::{ima_adpcm, ms_adpcm};
use crate::error::{Error, Result};
use crate::io::{ExportFormat, ExportMeta, SampleLoop, WavEncoding};
use crate::prep::{self, LoopRegion, PrepReport};
use crate::preset::Preset;
use crate::sample::sanitize;

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

/// Like [`render`], with a loop found in the input file (e.g. its `smpl` chunk: input frames, end exclusive), used
/// when the preset sets no loop region of its own.
pub fn render_with_loop(preset: &Preset, input: &Clip, file_loop: Option<(u64, u64)>) -> Result<Render> {
    let mut prep = preset.prep.clone();
    if prep.loop_region.is_none() {
        prep.loop_region = file_loop.map(|(start, end)| LoopRegion { start, end, crossfade_ms: 0.0 });
    }
    let prepared = if prep.is_noop() { None } else { Some(prep::prepare(&prep, input).map_err(|e| e.at("prep"))?) };
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
