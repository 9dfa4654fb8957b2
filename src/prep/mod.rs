//! Asset preparation: channel layout, silence trim, fades, normalisation and loop points, applied to a whole
//! [`Clip`] before the crush chain; plus the loop-point helpers the exporters use and headroom analysis.
//!
//! # Order of operations
//! [`prepare`] runs, in this order, only the steps that are switched on:
//! 1. **sanitize**: NaN becomes 0 and ±Inf becomes ±1.0, exactly as [`crate::sample::sanitize`] does;
//! 2. **channels** ([`ChannelMode`]): keep, fold down to mono, or duplicate to stereo;
//! 3. **trim** ([`TrimParams`]): leading and trailing quiet frames are cut, keeping a margin;
//! 4. **loop crossfade** ([`LoopSetting`]): the loop points — given in *source* frames (they move with the trim),
//!    relative to the trimmed sound (seconds from its start or end, a fraction of its length), or the input file's
//!    own loop — become frames of the trimmed sound; with a crossfade the end of the loop is blended with the audio
//!    before its start (see [`LoopRegion`]);
//! 5. **fades** ([`FadeParams`]): fade-in at the new start, fade-out at the new end;
//! 6. **normalise** ([`Normalize`]): one gain for the whole clip, to a peak level or to an integrated loudness.
//!
//! Every step works on all channels alike. Processing is `f64` arithmetic on `f32` samples with transcendental
//! functions from `libm`, so native and wasm builds give the same bytes (for loudness normalisation see
//! [`Normalize::Loudness`]). Default parameters do nothing: the clip comes back bit for bit (after sanitizing).
//!
//! # JSON
//! ```json
//! {
//!   "channels": { "mono": "sum-3db" },
//!   "trim": { "threshold_dbfs": -60, "margin_ms": 10 },
//!   "fade_in": { "ms": 2, "curve": "equal-power" },
//!   "fade_out": { "ms": 150, "curve": "exponential" },
//!   "normalize": { "kind": "loudness", "target_lufs": -16 },
//!   "loop_region": { "start": 4410, "end": 48510, "crossfade_ms": 20 }
//! }
//! ```
//! `channels` is `"keep"`, `"duplicate"` or `{ "mono": law }`; `normalize` is
//! `{ "kind": "peak", "target_dbfs": -1 }` or `{ "kind": "loudness", "target_lufs": -16 }`. `loop_region` also takes
//! `{ "start": { "seconds": 0.25 }, "end": { "seconds_from_end": 0.1 } }`, `{ "fraction": 0.9 }` points, and
//! `"file"` (the input file's own loop): see [`region`](LoopSetting) for every form and the rounding rule. Leave a
//! field out to skip its step; unknown fields are errors.

use crate::audio::Clip;
use crate::error::{check_range_f, Error, Result};
use serde::{Deserialize, Serialize};
use std::f64::consts::FRAC_PI_2;

mod loops;
mod region;
mod steps;

pub use loops::{rescale_loop, snap_to_block};
pub use region::{
    FileLoop, IfMissing, LoopPoint, LoopRegion, LoopSetting, LoopSource, CROSSFADE_MS, LOOP_FRACTION, LOOP_SECONDS,
};
pub use steps::{prepare, prepare_with_file_loop};

// ---------------------------------------------------------------------------------------------------------------------
// Parameters
// ---------------------------------------------------------------------------------------------------------------------

/// How a multichannel sound becomes one channel.
///
/// Levels for two test inputs, relative to the level of one input channel:
///
/// | law        | gain                      | correlated pair (same signal L and R) | one-sided (signal in L only) |
/// |------------|---------------------------|---------------------------------------|------------------------------|
/// | `sum-3db`  | (L + R) · 1/√2            | +3.01 dB                              | −3.01 dB                     |
/// | `sum-6db`  | (L + R) · ½               | 0 dB                                  | −6.02 dB                     |
/// | `average`  | (L + R + …) / channels    | 0 dB                                  | −6.02 dB                     |
/// | `left`     | first channel             | 0 dB                                  | 0 dB                         |
/// | `right`    | second channel            | 0 dB                                  | silence                      |
///
/// "−3 dB" is the equal-power factor 1/√2 = −3.0103 dB (not 10^(−3/20) = 0.70795, which is 0.01 dB off): a
/// one-sided or a decorrelated stereo signal keeps its power, a correlated pair gains 3.01 dB and may exceed full
/// scale. `sum-6db` never exceeds the louder side for two channels. For two channels `average` equals `sum-6db`; with
/// more channels the sum laws add every channel and `average` divides by the count. A one-channel input passes
/// through unchanged whatever the law.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum DownmixLaw {
    /// Sum of all channels times 1/√2 (−3.01 dB): the equal-power law. Default; a good choice for stereo music.
    #[default]
    #[serde(rename = "sum-3db")]
    Sum3db,
    /// Sum of all channels times ½ (−6.02 dB): never louder than the louder side of a stereo pair.
    #[serde(rename = "sum-6db")]
    Sum6db,
    /// Mean of all channels (sum divided by the channel count).
    #[serde(rename = "average")]
    Average,
    /// The first channel only.
    #[serde(rename = "left")]
    Left,
    /// The second channel only (a mono input keeps its one channel).
    #[serde(rename = "right")]
    Right,
}

impl DownmixLaw {
    /// The factor applied to the sum of `channels` channels (`None` for `left` and `right`, which pick a channel).
    pub fn sum_factor(self, channels: usize) -> Option<f64> {
        match self {
            DownmixLaw::Sum3db => Some(std::f64::consts::FRAC_1_SQRT_2),
            DownmixLaw::Sum6db => Some(0.5),
            DownmixLaw::Average => Some(1.0 / channels.max(1) as f64),
            DownmixLaw::Left | DownmixLaw::Right => None,
        }
    }
}

/// What happens to the channel layout. JSON: `"keep"`, `"duplicate"` or `{ "mono": "sum-3db" }`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ChannelMode {
    /// Leave the channels as they are (default).
    #[default]
    Keep,
    /// Fold down to one channel with the given [`DownmixLaw`].
    Mono(DownmixLaw),
    /// Mono to stereo: the one channel twice. A multichannel input keeps its first channel, twice.
    Duplicate,
}

/// Silence trim at both ends.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct TrimParams {
    /// A frame is quiet when its peak over all channels is below this level, in dBFS, −120 to 0. Default and a good
    /// starting point: −60 dBFS (well below audible in a game mix, above the noise floor of most recordings).
    pub threshold_dbfs: f64,
    /// Quiet frames kept before the first and after the last loud frame, in milliseconds, 0 to 1,000. Default 10 ms:
    /// keeps the onset's soft start and the tail's last ripples. Limited by the ends of the sound.
    pub margin_ms: f64,
}

impl Default for TrimParams {
    fn default() -> Self {
        TrimParams { threshold_dbfs: -60.0, margin_ms: 10.0 }
    }
}

/// Shape of a fade. `t` runs from 0 (silence, at the cut) to 1 (unity gain); the gain is `g(t)`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum FadeCurve {
    /// `g = t`. Default; a good de-click fade of a few milliseconds.
    #[default]
    Linear,
    /// `g = sin(t·π/2)`, the quarter-wave of an equal-power crossfade (a fade-out is the cosine half). Sounds
    /// even; rises fastest at the cut.
    EqualPower,
    /// Exponential over [`EXP_FADE_RANGE_DB`] (60 dB): `g = (10^(60·(t−1)/20) − 10^(−3)) / (1 − 10^(−3))`, a straight
    /// line in dB from −60 dB to 0 dB, shifted by 0.001 so that it starts at exactly 0. Natural for fade-outs of
    /// decaying sounds; rises fastest near unity.
    Exponential,
}

/// Range of the exponential fade in dB: it is a straight line in dB from −60 dB to 0 dB.
pub const EXP_FADE_RANGE_DB: f64 = 60.0;

impl FadeCurve {
    /// The gain at position `t` in `[0, 1]` (clamped): exactly 0 at `t = 0` and exactly 1 at `t = 1`.
    pub fn gain(self, t: f64) -> f64 {
        let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
        if t >= 1.0 {
            return 1.0;
        }
        match self {
            FadeCurve::Linear => t,
            FadeCurve::EqualPower => libm::sin(t * FRAC_PI_2),
            FadeCurve::Exponential => {
                let floor = libm::pow(10.0, -EXP_FADE_RANGE_DB / 20.0);
                let g = libm::pow(10.0, EXP_FADE_RANGE_DB * (t - 1.0) / 20.0);
                ((g - floor) / (1.0 - floor)).max(0.0)
            }
        }
    }

    /// The largest slope `|dg/dt|` of the curve; the step between consecutive gains of an `n`-frame fade never
    /// exceeds `max_slope() / n`. Linear 1; equal-power π/2 (at the cut); exponential
    /// `(60·ln 10/20) / (1 − 10^(−3)) ≈ 6.915` (at unity).
    pub fn max_slope(self) -> f64 {
        match self {
            FadeCurve::Linear => 1.0,
            FadeCurve::EqualPower => FRAC_PI_2,
            FadeCurve::Exponential => {
                let floor = libm::pow(10.0, -EXP_FADE_RANGE_DB / 20.0);
                EXP_FADE_RANGE_DB * std::f64::consts::LN_10 / 20.0 / (1.0 - floor)
            }
        }
    }
}

/// A fade at one end of the (trimmed) sound.
///
/// An `n`-frame fade-in (`n = round(ms · rate / 1000)`, at least 1 when `ms > 0`, at most the clip's length) gives
/// frame `i` the gain `g(i/n)` for `i` in `0..n`: the first frame is exactly 0.0 and frame `n` is the first at unity.
/// A fade-out is the mirror image: the last frame is exactly 0.0. Between consecutive frames the gain never moves by
/// more than [`FadeCurve::max_slope`]` / n`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct FadeParams {
    /// Length in milliseconds, 0 to 60,000; 0 is no fade. Default 10 ms; 2 to 5 ms removes a click at a cut, 100 ms
    /// and more is an audible fade.
    pub ms: f64,
    /// Shape; default linear. Exponential suits fade-outs, equal-power sounds even.
    pub curve: FadeCurve,
}

impl Default for FadeParams {
    fn default() -> Self {
        FadeParams { ms: 10.0, curve: FadeCurve::Linear }
    }
}

/// Normalisation: one gain for the whole clip. JSON: `{ "kind": "peak", "target_dbfs": -1 }` or
/// `{ "kind": "loudness", "target_lufs": -16 }`.
///
/// A silent clip cannot be normalised: that is an error rather than a silent pass-through, because a batch that
/// expects levelled assets should stop on a file that is empty or was cut to nothing, not ship it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case", deny_unknown_fields)]
pub enum Normalize {
    /// Scale so that the largest |sample| over all channels reads `target_dbfs`.
    Peak {
        /// Peak level in dBFS, −60 to 0. Default −1 dBFS (a little room for inter-sample peaks and later stages).
        #[serde(default = "default_peak_dbfs")]
        target_dbfs: f64,
    },
    /// Scale so that the integrated loudness (ITU-R BS.1770-4, gated, as EBU R 128 mode I) reads `target_lufs`.
    ///
    /// Measured by the `ebur128` crate at the clip's own rate with its default channel map: one channel counts once;
    /// two are L and R; 3: L R C; 4: L R Ls Rs; 5: L R C Ls Rs; 6: L R C LFE Ls Rs with the LFE not counted; channels
    /// after the sixth are not counted. Needs at least 400 ms of sound (one gating block) and a rate of at least
    /// [`crate::analysis::loudness::MIN_LOUDNESS_RATE`] (3,364 Hz: below it the K-weighting shelf at 1.68 kHz is above the Nyquist frequency);
    /// a clip whose every block is below the −70 LUFS absolute gate counts as silent. No limiter follows: a loud
    /// target can push peaks beyond full scale (the report says so in its notes and in `peak_dbfs_after`).
    ///
    /// The gain in dB is rounded to a multiple of 10⁻⁶ dB before it is applied: `ebur128` computes its filter with
    /// the platform's `tan`, so the measurement may differ in its last bits between native and wasm; the rounding
    /// makes the applied gain, and so the output, the same bytes on both (but for a 10⁻⁹ chance of a measurement
    /// landing on a rounding boundary).
    Loudness {
        /// Integrated loudness in LUFS, −70 to 0. Default −16 LUFS, a common target for streamed and mobile audio;
        /// EBU R 128 broadcast uses −23.
        #[serde(default = "default_lufs")]
        target_lufs: f64,
    },
}

fn default_peak_dbfs() -> f64 {
    -1.0
}

fn default_lufs() -> f64 {
    -16.0
}

/// All preparation steps; the default does nothing. See the [module docs](self) for the order and the JSON form.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct PrepParams {
    /// Channel layout; default keep.
    pub channels: ChannelMode,
    /// Silence trim; default none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub trim: Option<TrimParams>,
    /// Fade-in at the (trimmed) start; default none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fade_in: Option<FadeParams>,
    /// Fade-out at the (trimmed) end; default none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fade_out: Option<FadeParams>,
    /// Normalisation; default none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub normalize: Option<Normalize>,
    /// Loop points (source frames, or relative to the sound) or the file's own loop; default none (a file's own
    /// loop is kept, without crossfade). See [`LoopSetting`].
    #[serde(skip_serializing_if = "Option::is_none")]
    pub loop_region: Option<LoopSetting>,
}

impl PrepParams {
    /// Whether these parameters leave a clip as it is.
    pub fn is_noop(&self) -> bool {
        *self == PrepParams::default()
    }

    /// Checks every range that does not depend on the clip. [`prepare`] calls it first.
    pub fn validate(&self) -> Result<()> {
        if let Some(t) = &self.trim {
            check_range_f("trim.threshold_dbfs", t.threshold_dbfs, -120.0, 0.0, " dBFS")?;
            check_range_f("trim.margin_ms", t.margin_ms, 0.0, 1000.0, " ms")?;
        }
        if let Some(f) = &self.fade_in {
            check_range_f("fade_in.ms", f.ms, 0.0, 60_000.0, " ms")?;
        }
        if let Some(f) = &self.fade_out {
            check_range_f("fade_out.ms", f.ms, 0.0, 60_000.0, " ms")?;
        }
        match &self.normalize {
            Some(Normalize::Peak { target_dbfs }) => {
                check_range_f("normalize.target_dbfs", *target_dbfs, -60.0, 0.0, " dBFS")?
            }
            Some(Normalize::Loudness { target_lufs }) => {
                check_range_f("normalize.target_lufs", *target_lufs, -70.0, 0.0, " LUFS")?
            }
            None => {}
        }
        if let Some(l) = &self.loop_region {
            l.validate()?;
        }
        Ok(())
    }
}

fn check_loop_order(name: &str, start: u64, end: u64) -> Result<()> {
    if start == end {
        Err(Error::param(name, format!("{start}..{end}"), "start < end (this region is empty)"))
    } else if start > end {
        Err(Error::param(
            name,
            format!("{start}..{end}"),
            format!("start < end (inverted: start {start} is after end {end})"),
        ))
    } else {
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------------------------------------
// Result
// ---------------------------------------------------------------------------------------------------------------------

/// What [`prepare`] did.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PrepReport {
    /// Normalisation gain in dB (0 without normalisation).
    pub gain_db: f64,
    /// Integrated loudness in LUFS of the sound entering the normalisation step (after channels, trim, loop crossfade
    /// and fades), `None` when it cannot be measured (shorter than 400 ms, silent, or a rate below
    /// [`crate::analysis::loudness::MIN_LOUDNESS_RATE`]).
    pub loudness_lufs_before: Option<f64>,
    /// Integrated loudness in LUFS of the result, `None` when it cannot be measured.
    pub loudness_lufs_after: Option<f64>,
    /// Peak of the result over all channels in dBFS (−240 for silence); above 0 means samples beyond full scale.
    pub peak_dbfs_after: f64,
    /// Frames removed at the start by the trim.
    pub trimmed_start_frames: u64,
    /// Frames removed at the end by the trim.
    pub trimmed_end_frames: u64,
    /// Loop points in frames of the result (shifted by the trim), `start` inclusive, `end` exclusive.
    pub loop_region: Option<(u64, u64)>,
    /// Channels of the input.
    pub channels_in: usize,
    /// Channels of the result.
    pub channels_out: usize,
    /// Things worth knowing: clamped fades, peaks beyond full scale, pass-throughs.
    pub notes: Vec<String>,
}

/// The prepared clip and the report.
#[derive(Debug, Clone, PartialEq)]
pub struct Prepared {
    /// The result, at the input's sample rate.
    pub clip: Clip,
    /// What was done.
    pub report: PrepReport,
}

#[cfg(test)]
mod testing {
    //! Helpers shared by the preparation's tests.
    use super::*;
    use crate::analysis::Levels;

    pub fn sine(n: usize, f: f64, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64).sin()) as f32).collect()
    }

    pub fn clip(rate: u32, channels: Vec<Vec<f32>>) -> Clip {
        Clip::new(rate, channels).unwrap()
    }

    pub fn run(p: &PrepParams, c: &Clip) -> Prepared {
        prepare(p, c).unwrap()
    }

    pub fn err(p: &PrepParams, c: &Clip) -> String {
        prepare(p, c).unwrap_err().to_string()
    }

    pub fn rms_dbfs(x: &[f32]) -> f64 {
        Levels::measure(&[x]).rms_dbfs
    }
}

#[cfg(test)]
mod tests {
    use super::testing::*;
    use super::*;

    #[test]
    fn default_does_nothing() {
        let c = clip(48_000, vec![sine(1000, 0.01, 0.5), sine(1000, 0.02, -0.25)]);
        let out = run(&PrepParams::default(), &c);
        assert_eq!(out.clip, c);
        let r = &out.report;
        assert_eq!((r.gain_db, r.trimmed_start_frames, r.trimmed_end_frames), (0.0, 0, 0));
        assert_eq!((r.channels_in, r.channels_out, r.loop_region), (2, 2, None));
        assert!(r.notes.is_empty(), "{:?}", r.notes);
    }

    #[test]
    fn serde_shape() {
        let text = r#"{
            "channels": { "mono": "sum-3db" },
            "trim": { "threshold_dbfs": -50 },
            "fade_in": { "ms": 2, "curve": "equal-power" },
            "fade_out": { "ms": 150, "curve": "exponential" },
            "normalize": { "kind": "loudness", "target_lufs": -16 },
            "loop_region": { "start": 4410, "end": 48510, "crossfade_ms": 20 }
        }"#;
        let p: PrepParams = serde_json::from_str(text).unwrap();
        assert_eq!(p.channels, ChannelMode::Mono(DownmixLaw::Sum3db));
        assert_eq!(p.trim, Some(TrimParams { threshold_dbfs: -50.0, margin_ms: 10.0 }));
        assert_eq!(p.fade_out, Some(FadeParams { ms: 150.0, curve: FadeCurve::Exponential }));
        assert_eq!(p.normalize, Some(Normalize::Loudness { target_lufs: -16.0 }));
        assert_eq!(p.loop_region, Some(LoopRegion::frames(4410, 48510, 20.0).into()));
        let back: PrepParams = serde_json::from_str(&serde_json::to_string(&p).unwrap()).unwrap();
        assert_eq!(back, p);
        assert_eq!(serde_json::from_str::<PrepParams>("{}").unwrap(), PrepParams::default());
        assert_eq!(serde_json::to_string(&PrepParams::default()).unwrap(), r#"{"channels":"keep"}"#);
        for (law, name) in [
            (DownmixLaw::Sum3db, "sum-3db"),
            (DownmixLaw::Sum6db, "sum-6db"),
            (DownmixLaw::Average, "average"),
            (DownmixLaw::Left, "left"),
            (DownmixLaw::Right, "right"),
        ] {
            assert_eq!(serde_json::to_string(&ChannelMode::Mono(law)).unwrap(), format!(r#"{{"mono":"{name}"}}"#));
        }
        assert_eq!(serde_json::to_string(&ChannelMode::Duplicate).unwrap(), r#""duplicate""#);
        let n: Normalize = serde_json::from_str(r#"{"kind": "peak"}"#).unwrap();
        assert_eq!(n, Normalize::Peak { target_dbfs: -1.0 });
        for bad in [
            r#"{"trim": {"threshold": -60}}"#,
            r#"{"normalize": {"kind": "peak", "target_lufs": -1}}"#,
            r#"{"loop_region": {"start": 1}}"#,
            r#"{"fade": {}}"#,
        ] {
            assert!(serde_json::from_str::<PrepParams>(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn parameters_out_of_range_name_themselves() {
        let c = clip(48_000, vec![vec![0.5; 100]]);
        let cases = [
            (
                PrepParams {
                    trim: Some(TrimParams { threshold_dbfs: -121.0, ..Default::default() }),
                    ..Default::default()
                },
                "trim.threshold_dbfs",
            ),
            (
                PrepParams {
                    trim: Some(TrimParams { margin_ms: f64::NAN, ..Default::default() }),
                    ..Default::default()
                },
                "trim.margin_ms",
            ),
            (
                PrepParams { fade_in: Some(FadeParams { ms: -1.0, ..Default::default() }), ..Default::default() },
                "fade_in.ms",
            ),
            (
                PrepParams { fade_out: Some(FadeParams { ms: 60_001.0, ..Default::default() }), ..Default::default() },
                "fade_out.ms",
            ),
            (
                PrepParams { normalize: Some(Normalize::Peak { target_dbfs: 0.5 }), ..Default::default() },
                "normalize.target_dbfs",
            ),
            (
                PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -71.0 }), ..Default::default() },
                "normalize.target_lufs",
            ),
            (
                PrepParams { loop_region: Some(LoopRegion::frames(0, 10, 1001.0).into()), ..Default::default() },
                "loop_region.crossfade_ms",
            ),
        ];
        for (p, name) in cases {
            let e = prepare(&p, &c).unwrap_err();
            assert!(matches!(&e, Error::Param { name: n, .. } if n == name), "{name}: {e}");
        }
        let bad_clip = Clip { sample_rate: 48_000, channels: vec![vec![0.0; 3], vec![0.0; 2]] };
        assert!(prepare(&PrepParams::default(), &bad_clip).is_err());
        let no_channels = Clip { sample_rate: 48_000, channels: vec![] };
        assert!(prepare(&PrepParams::default(), &no_channels).is_err());
        let no_rate = Clip { sample_rate: 0, channels: vec![vec![]] };
        assert!(prepare(&PrepParams::default(), &no_rate).is_err());
    }
}
