//! The static transfer curve of a chain: a ramp of input values through the stages whose output depends only on the
//! input sample (gain, the uniform quantizer, G.711, the compander, the minifloat), drawn as input → output.
//!
//! # What is drawn
//! The ramp is `points` values evenly spaced from `lo` to `hi` inclusive (full-scale units, within −1…+1), sample `i`
//! being `lo + (hi − lo)·i/(points − 1)` computed in `f64` and rounded to `f32`. A narrow range with many points
//! zooms in down to single steps of any quantizer (a 24-bit step is 1.2·10⁻⁷, still 2 `f32` values near full scale).
//! Each stage is applied as in the chain, except:
//! - a uniform quantizer with dither or noise shaping is drawn without them (the curve they blur), with a note;
//! - the rate stage passes the ramp through unchanged (a sample-rate change has no static curve), with a note;
//! - any other stage that has memory (IMA ADPCM; any stage not named above) is skipped, with a note.
//!
//! The output arrays are meant for drawing: one `f32` per point, in full-scale units, and the number of distinct
//! output levels the range shows.

use crate::error::{Error, Result};
use crate::stages::{self, StageSpec};
use serde::Serialize;

/// Most points a curve may have.
pub const MAX_POINTS: usize = 1 << 22;

/// A chain's static input → output curve over a range.
#[derive(Debug, Clone, Serialize)]
pub struct TransferCurve {
    /// Input values (full-scale units), evenly spaced from the range's low to its high end.
    pub input: Vec<f32>,
    /// Output value for each input (full-scale units).
    pub output: Vec<f32>,
    /// How many distinct output values the range shows (steps of the staircase + 1).
    pub levels: usize,
    /// Indices (as given) of the stages applied.
    pub applied: Vec<usize>,
    /// What was not drawn as in the chain, one sentence per stage (e.g. `"stage 3 (rate): …"`; stages numbered from
    /// 1 as the page shows them).
    pub notes: Vec<String>,
}

/// The transfer curve of `stages` (each with its index in the preset, used in notes; pass the active ones) over
/// `lo … hi` (−1 ≤ lo < hi ≤ 1) with `points` values (2 to [`MAX_POINTS`]).
pub fn transfer_curve<'a>(
    stages: impl IntoIterator<Item = (usize, &'a StageSpec)>,
    lo: f64,
    hi: f64,
    points: usize,
) -> Result<TransferCurve> {
    if !(lo.is_finite() && hi.is_finite() && -1.0 <= lo && lo < hi && hi <= 1.0) {
        return Err(Error::param("range", format!("{lo}…{hi}"), "−1 ≤ low < high ≤ 1"));
    }
    if !(2..=MAX_POINTS).contains(&points) {
        return Err(Error::param("points", points, format!("2..={MAX_POINTS}")));
    }
    let input: Vec<f32> = (0..points).map(|i| (lo + (hi - lo) * i as f64 / (points - 1) as f64) as f32).collect();
    let mut output = input.clone();
    let mut applied = Vec::new();
    let mut notes = Vec::new();
    for (i, spec) in stages {
        let what = match spec {
            StageSpec::Gain(_) | StageSpec::G711(_) | StageSpec::Compand(_) | StageSpec::Minifloat(_) => spec.clone(),
            StageSpec::Quantize(p) => {
                if p.dither != stages::dither::DitherKind::None || p.shaping != stages::dither::Shaping::None {
                    notes.push(format!(
                        "stage {} (quantize): drawn without its dither and noise shaping, which blur this staircase",
                        i + 1
                    ));
                }
                StageSpec::Quantize(stages::quantize::QuantizeParams {
                    dither: stages::dither::DitherKind::None,
                    shaping: stages::dither::Shaping::None,
                    ..p.clone()
                })
            }
            StageSpec::Rate(_) => {
                notes.push(format!("stage {} (rate): a sample-rate change has no static curve; passed through", i + 1));
                continue;
            }
            _ => {
                notes.push(format!("stage {} ({}): has memory, so no static curve; skipped", i + 1, kind(spec)));
                continue;
            }
        };
        let Some(mut stage) =
            stages::build(&what, crate::audio::MAX_SAMPLE_RATE, 0, 0).map_err(|e| e.at(&format!("stages[{i}]")))?
        else {
            continue;
        };
        stage.process(&mut output);
        applied.push(i);
    }
    Ok(TransferCurve { levels: distinct(&output), input, output, applied, notes })
}

/// The preset's name for a stage's kind.
fn kind(spec: &StageSpec) -> String {
    serde_json::to_value(spec)
        .ok()
        .and_then(|v| v.get("kind").and_then(|k| k.as_str()).map(str::to_string))
        .unwrap_or_default()
}

/// Number of distinct values (by bit pattern, with −0.0 and +0.0 as one).
fn distinct(x: &[f32]) -> usize {
    let mut v: Vec<u32> = x.iter().map(|&s| (s + 0.0).to_bits()).collect();
    v.sort_unstable();
    v.dedup();
    v.len()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stages::gain::{GainParams, Overflow};
    use crate::stages::quantize::QuantizeParams;
    use crate::stages::rate::RateParams;

    #[test]
    fn gain_then_clip_is_a_line_with_shoulders() {
        let g = StageSpec::Gain(GainParams { gain_db: 20.0 * 2f64.log10(), overflow: Overflow::Clip });
        let c = transfer_curve([(0, &g)], -1.0, 1.0, 101).unwrap();
        assert_eq!(c.input[50], 0.0);
        assert!((c.output[60] - 0.4).abs() < 1e-6, "{}", c.output[60]);
        assert_eq!(c.output[100], 1.0);
        assert_eq!(c.output[0], -1.0);
        assert!(c.notes.is_empty());
    }

    #[test]
    fn notes_for_what_is_not_static_and_errors_for_bad_ranges() {
        let q =
            StageSpec::Quantize(QuantizeParams { dither: stages::dither::DitherKind::Tpdf, ..QuantizeParams::bits(3) });
        let r = StageSpec::Rate(RateParams::hold(8000));
        let c = transfer_curve([(0, &r), (1, &q)], -1.0, 1.0, 1001).unwrap();
        assert_eq!(c.levels, 8);
        assert_eq!(c.applied, vec![1]);
        assert_eq!(c.notes.len(), 2, "{:?}", c.notes);
        assert!(c.notes[0].starts_with("stage 1 (rate)"));
        assert!(transfer_curve([(0, &q)], -1.5, 1.0, 10).is_err());
        assert!(transfer_curve([(0, &q)], 0.5, 0.5, 10).is_err());
        assert!(transfer_curve([(0, &q)], 0.0, 1.0, 1).is_err());
        assert!(transfer_curve([(0, &q)], f64::NAN, 1.0, 10).is_err());
    }
}
