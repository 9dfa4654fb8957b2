//! Asset preparation: channel layout, silence trim, fades, normalisation and loop points, applied to a whole
//! [`Clip`] before the crush chain; plus the loop-point helpers the exporters use and headroom analysis.
//!
//! # Order of operations
//! [`prepare`] runs, in this order, only the steps that are switched on:
//! 1. **sanitize**: NaN becomes 0 and ±Inf becomes ±1.0, exactly as [`crate::chain::sanitize`] does;
//! 2. **channels** ([`ChannelMode`]): keep, fold down to mono, or duplicate to stereo;
//! 3. **trim** ([`TrimParams`]): leading and trailing quiet frames are cut, keeping a margin;
//! 4. **loop crossfade** ([`LoopRegion`]): the loop points, given in *source* frames, move with the trim; with a
//!    crossfade the end of the loop is blended with the audio before its start;
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
//! `{ "kind": "peak", "target_dbfs": -1 }` or `{ "kind": "loudness", "target_lufs": -16 }`. Leave a field out to skip
//! its step; unknown fields are errors.

use crate::analysis::FLOOR_DB;
use crate::audio::{Clip, MAX_CHANNELS, MAX_SAMPLE_RATE};
use crate::chain::sanitize;
use crate::error::{check_range_f, Error, Result};
use serde::{Deserialize, Serialize};
use std::f64::consts::FRAC_PI_2;

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
    /// [`MIN_LOUDNESS_RATE`] (3,364 Hz: below it the K-weighting shelf at 1.68 kHz is above the Nyquist frequency);
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

/// Loop points in frames of the *source* clip (before the trim), `start` inclusive and `end` exclusive: playback
/// runs to frame `end − 1` and continues at `start`.
///
/// # Crossfade
/// With `crossfade_ms > 0`, `n = round(crossfade_ms · rate / 1000)` frames (at least 1) at the end of the loop are
/// blended with the `n` frames just before `start`, with equal-power weights:
/// `y[end − n + i] = cos θᵢ · x[end − n + i] + sin θᵢ · x[start − n + i]`, `θᵢ = (π/2)·(i + 1)/n`, `i` in `0..n`, the
/// last weight pair being exactly (0, 1). So the loop's last frame becomes a copy of frame `start − 1`, and the jump
/// from `end − 1` back to `start` is the sound's own step from `start − 1` to `start`: no seam. The first blended frame
/// already carries a little of the pre-start audio, so entering the crossfade is smooth too. Only frames inside the
/// loop change; the frames before `start` are read, not changed, and must exist after the trim (`n ≤ start`) and
/// `n` must not exceed the loop's length. Equal-power weights keep the level of uncorrelated material; on material
/// that is in phase at both places the middle of the crossfade is up to 3 dB louder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LoopRegion {
    /// First frame of the loop, in source frames (required).
    pub start: u64,
    /// Frame after the last frame of the loop, in source frames (required); `start < end ≤ frames`.
    pub end: u64,
    /// Crossfade length in milliseconds, 0 to 1,000; default 0 (none). 10 to 50 ms smooths most seams.
    #[serde(default)]
    pub crossfade_ms: f64,
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
    /// Loop points in source frames; default none.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub loop_region: Option<LoopRegion>,
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
            check_loop_order("loop_region", l.start, l.end)?;
            check_range_f("loop_region.crossfade_ms", l.crossfade_ms, 0.0, 1000.0, " ms")?;
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
    /// [`MIN_LOUDNESS_RATE`]).
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

// ---------------------------------------------------------------------------------------------------------------------
// prepare
// ---------------------------------------------------------------------------------------------------------------------

/// Runs the preparation steps of `params` on `clip` (see the [module docs](self) for the order).
///
/// # Errors
/// A parameter out of range; an invalid clip (rate, channel count, unequal lengths); a trim that would remove
/// everything; loop points outside the sound, inverted, empty, cut by the trim or too short for the crossfade;
/// normalising silence (or loudness of a clip shorter than 400 ms). Every message names the parameter and value.
pub fn prepare(params: &PrepParams, clip: &Clip) -> Result<Prepared> {
    params.validate()?;
    check_clip(clip)?;
    let rate = clip.sample_rate;
    let source_frames = clip.frames() as u64;
    let mut notes = Vec::new();
    if let Some(l) = &params.loop_region {
        if l.end > source_frames {
            return Err(Error::param(
                "loop_region.end",
                l.end,
                format!("at most {source_frames}, the sound's length in frames (end is exclusive)"),
            ));
        }
    }

    // 1–2. Sanitize and lay out the channels.
    let mut channels = apply_channels(params.channels, &clip.channels, &mut notes);
    let peak_after_channels = peak(&channels);
    if params.channels != ChannelMode::Keep && peak_after_channels > 1.0 {
        notes.push(format!("the downmix peaks at {:+.2} dBFS, beyond full scale", amp_db(peak_after_channels as f64)));
    }

    // 3. Trim.
    let (mut keep_start, mut keep_end) = (0u64, source_frames);
    if let Some(t) = &params.trim {
        (keep_start, keep_end) = trim_bounds(t, &channels, rate)?;
        for c in channels.iter_mut() {
            c.truncate(keep_end as usize);
            c.drain(..keep_start as usize);
        }
    }
    let frames = keep_end - keep_start;

    // 4. Loop points follow the trim; crossfade.
    let mut loop_out = None;
    if let Some(l) = &params.loop_region {
        if l.start < keep_start || l.end > keep_end {
            let t = params.trim.clone().unwrap_or_default();
            return Err(Error::param(
                "loop_region",
                format!("{}..{}", l.start, l.end),
                format!(
                    "a region inside the trimmed sound, source frames {keep_start}..{keep_end}: the trim \
                     (threshold {} dBFS, margin {} ms) would cut into the loop",
                    t.threshold_dbfs, t.margin_ms
                ),
            ));
        }
        let (s, e) = (l.start - keep_start, l.end - keep_start);
        if l.crossfade_ms > 0.0 {
            let n = ms_to_frames(l.crossfade_ms, rate).max(1);
            let room = s.min(e - s);
            if n > room {
                return Err(Error::param(
                    "loop_region.crossfade_ms",
                    l.crossfade_ms,
                    format!(
                        "at most {room} frames ({:.3} ms) here: {n} frames of crossfade need as many frames before \
                         the loop start (there are {s}) and inside the loop (there are {})",
                        room as f64 * 1000.0 / rate as f64,
                        e - s
                    ),
                ));
            }
            crossfade_loop(&mut channels, s as usize, e as usize, n as usize);
        }
        loop_out = Some((s, e));
    }

    // 5. Fades.
    let fade_in_frames = fade(&mut channels, params.fade_in.as_ref(), rate, true, &mut notes);
    let fade_out_frames = fade(&mut channels, params.fade_out.as_ref(), rate, false, &mut notes);
    if fade_in_frames + fade_out_frames > frames {
        notes.push("the fade-in and the fade-out overlap; both apply where they do".into());
    }
    if let Some((s, e)) = loop_out {
        if fade_in_frames > s {
            notes.push(format!("the fade-in ({fade_in_frames} frames) reaches into the loop, which starts at {s}"));
        }
        if fade_out_frames > frames - e {
            notes.push(format!(
                "the fade-out ({fade_out_frames} frames) reaches into the loop, which ends {} frames before the end",
                frames - e
            ));
        }
    }

    // 6. Normalise.
    let loudness_before = loudness_of(&channels, rate);
    let mut gain_db = 0.0;
    if let Some(n) = &params.normalize {
        let gain = match *n {
            Normalize::Peak { target_dbfs } => {
                let p = peak(&channels) as f64;
                if p == 0.0 {
                    return Err(Error::param(
                        "normalize.target_dbfs",
                        target_dbfs,
                        "a clip that is not silent: cannot normalise silence (every sample is 0)",
                    ));
                }
                gain_db = target_dbfs - 20.0 * libm::log10(p);
                libm::pow(10.0, target_dbfs / 20.0) / p
            }
            Normalize::Loudness { target_lufs } => {
                let before = match loudness_before {
                    Some(l) => l,
                    None => {
                        return Err(Error::param(
                            "normalize.target_lufs",
                            target_lufs,
                            format!("a clip with a measurable loudness: {}", unmeasurable_reason(&channels, rate)),
                        ))
                    }
                };
                gain_db = ((target_lufs - before) * 1e6).round() / 1e6;
                libm::pow(10.0, gain_db / 20.0)
            }
        };
        for c in channels.iter_mut() {
            for s in c.iter_mut() {
                *s = to_f32(*s as f64 * gain);
            }
        }
    }
    if channels.iter().flatten().any(|s| !s.is_finite()) {
        // Cannot happen with validated parameters (every gain is bounded by the data), but never return Inf.
        return Err(Error::format("preparation produced non-finite samples"));
    }
    let peak_out = peak(&channels);
    let peak_dbfs_after = amp_db(peak_out as f64);
    if params.normalize.is_some() && peak_out > 1.0 {
        let over = channels.iter().flatten().filter(|s| s.abs() > 1.0).count();
        notes.push(format!(
            "after normalisation the peak is {peak_dbfs_after:+.2} dBFS: {over} samples are beyond full scale and \
             will clip in the crush chain unless a gain stage lowers them"
        ));
    }
    let loudness_after = if params.normalize.is_some() { loudness_of(&channels, rate) } else { loudness_before };
    if channels.len() > 6 {
        notes.push(format!("the loudness meter does not count channels 7 to {}", channels.len()));
    }

    let report = PrepReport {
        gain_db,
        loudness_lufs_before: loudness_before,
        loudness_lufs_after: loudness_after,
        peak_dbfs_after,
        trimmed_start_frames: keep_start,
        trimmed_end_frames: source_frames - keep_end,
        loop_region: loop_out,
        channels_in: clip.channel_count(),
        channels_out: channels.len(),
        notes,
    };
    Ok(Prepared { clip: Clip { sample_rate: rate, channels }, report })
}

/// The checks of [`Clip::new`], for clips built field by field.
fn check_clip(clip: &Clip) -> Result<()> {
    if clip.sample_rate == 0 || clip.sample_rate > MAX_SAMPLE_RATE {
        return Err(Error::param("sample_rate", clip.sample_rate, format!("1..={MAX_SAMPLE_RATE} Hz")));
    }
    if clip.channels.is_empty() || clip.channels.len() > MAX_CHANNELS {
        return Err(Error::param("channels", clip.channels.len(), format!("1..={MAX_CHANNELS}")));
    }
    let n = clip.channels[0].len();
    if clip.channels.iter().any(|c| c.len() != n) {
        return Err(Error::format("channels have different lengths"));
    }
    Ok(())
}

fn ms_to_frames(ms: f64, rate: u32) -> u64 {
    // Saturating float-to-int cast; `ms` is validated finite and non-negative.
    (ms * rate as f64 / 1000.0).round() as u64
}

/// `f64` to `f32`, saturating at ±`f32::MAX` instead of overflowing to ±Inf (a downmix or crossfade of samples near
/// `f32::MAX` would otherwise overflow).
fn to_f32(v: f64) -> f32 {
    v.clamp(-(f32::MAX as f64), f32::MAX as f64) as f32
}

fn peak(channels: &[Vec<f32>]) -> f32 {
    channels.iter().flatten().fold(0f32, |m, s| m.max(s.abs()))
}

/// `20·log10(a)` with libm, floored at [`FLOOR_DB`].
fn amp_db(a: f64) -> f64 {
    if a > 0.0 && a.is_finite() {
        (20.0 * libm::log10(a)).max(FLOOR_DB)
    } else if a.is_infinite() {
        -FLOOR_DB
    } else {
        FLOOR_DB
    }
}

fn apply_channels(mode: ChannelMode, input: &[Vec<f32>], notes: &mut Vec<String>) -> Vec<Vec<f32>> {
    let clean = |c: &Vec<f32>| c.iter().map(|&s| sanitize(s)).collect::<Vec<f32>>();
    match mode {
        ChannelMode::Keep => input.iter().map(clean).collect(),
        ChannelMode::Duplicate => {
            if input.len() > 1 {
                notes.push(format!("duplicate: kept the first of {} channels", input.len()));
            }
            let c = clean(&input[0]);
            vec![c.clone(), c]
        }
        ChannelMode::Mono(law) => {
            if input.len() == 1 {
                notes.push("the input is already mono: the downmix law does not apply".into());
                return vec![clean(&input[0])];
            }
            let out = match law.sum_factor(input.len()) {
                Some(k) => {
                    let n = input[0].len();
                    (0..n)
                        .map(|i| {
                            let sum: f64 = input.iter().map(|c| sanitize(c[i]) as f64).sum();
                            to_f32(sum * k)
                        })
                        .collect()
                }
                None => clean(&input[if law == DownmixLaw::Right { 1 } else { 0 }]),
            };
            vec![out]
        }
    }
}

/// Frames `[start, end)` of the source that the trim keeps.
fn trim_bounds(t: &TrimParams, channels: &[Vec<f32>], rate: u32) -> Result<(u64, u64)> {
    let thr = libm::pow(10.0, t.threshold_dbfs / 20.0);
    let n = channels.first().map_or(0, |c| c.len());
    let loud = |i: usize| channels.iter().any(|c| c[i].abs() as f64 >= thr);
    let first = (0..n).find(|&i| loud(i));
    let last = (0..n).rev().find(|&i| loud(i));
    let (Some(first), Some(last)) = (first, last) else {
        let p = peak(channels) as f64;
        let p = if p > 0.0 { format!("{:.1} dBFS", amp_db(p)) } else { "0 (silence)".to_string() };
        return Err(Error::param(
            "trim.threshold_dbfs",
            t.threshold_dbfs,
            format!(
                "a level at or below the clip's peak of {p} (everything is below {} dBFS: nothing would be left)",
                t.threshold_dbfs
            ),
        ));
    };
    let m = ms_to_frames(t.margin_ms, rate);
    let start = (first as u64).saturating_sub(m);
    let end = (last as u64).saturating_add(1).saturating_add(m).min(n as u64);
    Ok((start, end))
}

fn crossfade_loop(channels: &mut [Vec<f32>], start: usize, end: usize, n: usize) {
    for i in 0..n {
        let (a, b) = if i + 1 == n {
            (0.0, 1.0)
        } else {
            let th = FRAC_PI_2 * (i + 1) as f64 / n as f64;
            (libm::cos(th), libm::sin(th))
        };
        for c in channels.iter_mut() {
            let (dst, src) = (end - n + i, start - n + i);
            c[dst] = to_f32(a * c[dst] as f64 + b * c[src] as f64);
        }
    }
}

/// Applies a fade-in (`at_start`) or fade-out; returns its length in frames.
fn fade(channels: &mut [Vec<f32>], p: Option<&FadeParams>, rate: u32, at_start: bool, notes: &mut Vec<String>) -> u64 {
    let Some(p) = p else { return 0 };
    if p.ms <= 0.0 {
        return 0;
    }
    let frames = channels.first().map_or(0, |c| c.len());
    let want = ms_to_frames(p.ms, rate).max(1);
    let n = want.min(frames as u64) as usize;
    let which = if at_start { "fade-in" } else { "fade-out" };
    if (n as u64) < want {
        notes.push(format!("the {which} of {want} frames was shortened to the clip's {frames} frames"));
    }
    for i in 0..n {
        let g = p.curve.gain(i as f64 / n as f64);
        let idx = if at_start { i } else { frames - 1 - i };
        for c in channels.iter_mut() {
            c[idx] = (c[idx] as f64 * g) as f32;
        }
    }
    n as u64
}

// ---------------------------------------------------------------------------------------------------------------------
// Loudness
// ---------------------------------------------------------------------------------------------------------------------

/// Integrated loudness in LUFS (ITU-R BS.1770-4 with its gates, EBU R 128 mode I) measured by the `ebur128` crate at
/// the clip's own rate, with the channel map described at [`Normalize::Loudness`].
///
/// `None` when it cannot be measured: an invalid clip, a rate below [`MIN_LOUDNESS_RATE`] (3,364 Hz), less than
/// 400 ms of sound, every block below the −70 LUFS absolute gate (silence), or non-finite samples.
pub fn integrated_loudness(clip: &Clip) -> Option<f64> {
    check_clip(clip).ok()?;
    if clip.sample_rate < MIN_LOUDNESS_RATE {
        return None;
    }
    loudness_of(&clip.channels, clip.sample_rate)
}

fn loudness_of(channels: &[Vec<f32>], rate: u32) -> Option<f64> {
    if rate < MIN_LOUDNESS_RATE {
        return None;
    }
    loudness_raw(channels, rate).filter(|l| l.is_finite())
}

/// The meter's value as it comes: −∞ when no block passes the gates (silence, or shorter than one block), NaN or +∞
/// when the filter is unstable (rates below about 3.4 kHz) or the samples are enormous.
fn loudness_raw(channels: &[Vec<f32>], rate: u32) -> Option<f64> {
    let mut meter = ebur128::EbuR128::new(channels.len() as u32, rate, ebur128::Mode::I).ok()?;
    let planes: Vec<&[f32]> = channels.iter().map(|c| c.as_slice()).collect();
    meter.add_frames_planar_f32(&planes).ok()?;
    meter.loudness_global().ok()
}

fn unmeasurable_reason(channels: &[Vec<f32>], rate: u32) -> String {
    let frames = channels.first().map_or(0, |c| c.len());
    if rate < MIN_LOUDNESS_RATE {
        format!(
            "K-weighting is not defined at {rate} Hz (its 1.68 kHz shelf must lie below the Nyquist frequency:              {MIN_LOUDNESS_RATE} Hz or more)"
        )
    } else if (frames as f64) < 0.4 * rate as f64 {
        format!(
            "the clip is {:.3} s long; integrated loudness needs at least 0.4 s (one gating block)",
            frames as f64 / rate as f64
        )
    } else if loudness_raw(channels, rate) == Some(f64::NEG_INFINITY) {
        if channels.len() > 6 {
            "cannot normalise silence: every block of the counted channels is below the −70 LUFS absolute gate".into()
        } else {
            "cannot normalise silence: every block is below the −70 LUFS absolute gate".into()
        }
    } else {
        "the meter gave no finite value (samples far beyond full scale?)".into()
    }
}

/// Lowest rate at which the loudness meter gives a value, in Hz: the K-weighting shelf at 1,681.97 Hz must lie
/// below the Nyquist frequency. Below it [`integrated_loudness`] is `None`.
pub const MIN_LOUDNESS_RATE: u32 = 3364;

// ---------------------------------------------------------------------------------------------------------------------
// Loop-point helpers for the exporters
// ---------------------------------------------------------------------------------------------------------------------

/// Loop points `[start, end)` at `from_rate` mapped to a clip reduced to `to_rate` by a zero-order-hold reducer
/// that gives reduced sample `k` the value of source sample `ceil(k · from / to)`.
///
/// Each point maps to the first reduced sample whose value comes from at or after it, so the reduced loop plays
/// exactly the reduced samples whose source samples lie inside the source loop:
/// `p ↦ 0` for `p = 0`, else `floor((p − 1) · to / from) + 1`; that is `{k : start ≤ ceil(k·from/to) < end}` =
/// `[rescaled start, rescaled end)`. A loop ending at the source's end (`end = frames`) ends at the reduced clip's
/// end, whose length is `floor((frames − 1) · to / from) + 1` by the same rule.
///
/// When `from / to` is an integer (44,100 → 11,025, 48,000 → 8,000) this equals `ceil(p · to / from)`, the first
/// reduced sample *in time* at or after the point; for other ratios the two differ by one sample when
/// `0 < (p · to) mod from < to`, and the rule here is the one that agrees with the reducer's output (e.g.
/// 3 → 2 Hz: reduced sample 1 holds source sample 2, so a loop starting at source frame 2 starts at reduced sample
/// 1, while `ceil(2 · 2/3) = 2` would skip it).
///
/// Exact integer arithmetic (`u128` intermediates, saturating at `u64::MAX`). A rate of 0 returns the points
/// unchanged.
pub fn rescale_loop(start: u64, end: u64, from_rate: u32, to_rate: u32) -> (u64, u64) {
    if from_rate == 0 || to_rate == 0 {
        return (start, end);
    }
    let map = |p: u64| -> u64 {
        if p == 0 {
            return 0;
        }
        let k = (p as u128 - 1) * to_rate as u128 / from_rate as u128 + 1;
        k.min(u64::MAX as u128) as u64
    };
    (map(start), map(end))
}

/// Moves loop points to the nearest multiple of `samples_per_block` (halves round up) for block-based codecs such
/// as IMA ADPCM.
///
/// An IMA ADPCM block starts with a header holding the predictor's sample value and step index; every later 4-bit
/// code in the block is a difference relative to the decoder state left by the code before it. A decoder can
/// therefore only (re)start decoding at a block header: a loop start inside a block would begin from an unknown
/// predictor state and play a burst of wrong samples, and a loop end inside a block would cut a block that players
/// decode whole. So both points go to block boundaries. Rounding both to the *nearest* boundary (rather than start
/// down and end up) moves each point by at most half a block and keeps the loop length within one block of the
/// original, without systematically lengthening it.
///
/// A loop of at least one block keeps `end > start` after snapping (it spans at least one whole block). The snapped
/// end may lie up to half a block beyond the given end; the exporter clamps it to the data it writes. For 256-byte
/// mono IMA ADPCM blocks (WAV `block_align` 256) `samples_per_block` is 505.
///
/// # Errors
/// `samples_per_block` of 0; an empty or inverted loop; a loop shorter than one block ("loop of 300 samples is
/// shorter than one ADPCM block (505 samples)"); an end whose nearest boundary does not fit in a `u64`.
pub fn snap_to_block(start: u64, end: u64, samples_per_block: u64) -> Result<(u64, u64)> {
    if samples_per_block == 0 {
        return Err(Error::param("samples_per_block", 0, "1 or more"));
    }
    check_loop_order("loop_region", start, end)?;
    let len = end - start;
    if len < samples_per_block {
        return Err(Error::param(
            "loop_region",
            format!("{start}..{end}"),
            format!(
                "at least one block long: loop of {len} samples is shorter than one ADPCM block \
                 ({samples_per_block} samples)"
            ),
        ));
    }
    let b = samples_per_block as u128;
    let snap = |p: u64| (p as u128 + b / 2) / b * b;
    let (s, e) = (snap(start), snap(end));
    if e > u64::MAX as u128 {
        return Err(Error::param(
            "loop_region.end",
            end,
            format!("a value whose nearest block boundary ({e}) fits in 64 bits"),
        ));
    }
    Ok((s as u64, e as u64))
}

// ---------------------------------------------------------------------------------------------------------------------
// Headroom and gain staging
// ---------------------------------------------------------------------------------------------------------------------

/// Headroom of a clip against an N-bit PCM grid (step `Δ = 2^(1−N)`, codes `−2^(N−1) … 2^(N−1)−1`, as
/// [`crate::quantize`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Headroom {
    /// Word length used, 1 to 24.
    pub bits: u32,
    /// Step `Δ = 2^(1−N)` in full-scale units.
    pub step: f64,
    /// Largest |sample| over all channels, full-scale units.
    pub peak: f64,
    /// The peak in dBFS (−240 for silence).
    pub peak_dbfs: f64,
    /// `0 − peak_dbfs`: how far the peak may rise before it reaches full scale (negative when it is beyond).
    pub headroom_db: f64,
    /// `(1 − peak) / Δ`: N-bit steps between the peak and full scale (negative when beyond).
    pub headroom_lsb: f64,
    /// `log2(peak / Δ)`, at least 0: magnitude bits the peak reaches, the sign bit not counted, so a full-scale
    /// signal reads `N − 1` and every 6.02 dB of headroom is one bit unused. 0 when the peak is below one step.
    pub used_bits: f64,
    /// Samples that N-bit rounding would clip as they are: `x ≥ 1 − Δ/2` (they round past the top code) or
    /// `x ≤ −1 − Δ/2`.
    pub clipped: u64,
}

/// Headroom of `clip` for `bits`-bit PCM (clamped to 1..=24). Non-finite samples count as the chain treats them
/// (NaN as 0, ±Inf as ±1.0).
pub fn headroom(clip: &Clip, bits: u32) -> Headroom {
    let bits = bits.clamp(1, 24);
    let step = libm::ldexp(1.0, 1 - bits as i32);
    let (mut p, mut clipped) = (0f64, 0u64);
    for &s in clip.channels.iter().flatten() {
        let x = sanitize(s) as f64;
        p = p.max(x.abs());
        clipped += (x >= 1.0 - step / 2.0 || x <= -1.0 - step / 2.0) as u64;
    }
    let peak_dbfs = amp_db(p);
    Headroom {
        bits,
        step,
        peak: p,
        peak_dbfs,
        headroom_db: -peak_dbfs,
        headroom_lsb: (1.0 - p) / step,
        used_bits: if p > step { libm::log2(p / step) } else { 0.0 },
        clipped,
    }
}

/// Largest gain suggested by [`suggest_pre_gain`], in dB: the top of the gain stage's range.
pub const MAX_PRE_GAIN_DB: f64 = 60.0;

/// The gain in dB to apply before `bits`-bit rounding (clamped to 1..=24) that maximises the SQNR while at most
/// `max_clipped` samples (over all channels) clip.
///
/// # Reasoning
/// Rounding noise is `Δ²/12` whatever the signal, so the SQNR grows with the gain (6.02 dB per 6.02 dB) until samples
/// clip: the best gain is the largest one within the clipping budget. With the project's quantizer (round half away
/// from zero, codes `−2^(N−1) … 2^(N−1)−1`) a sample `y` clips exactly when `y ≥ 1 − Δ/2` (it would round past the
/// top code `1 − Δ`; below that it rounds to a code with the ordinary error ≤ Δ/2) or `y ≤ −1 − Δ/2` (the grid
/// reaches −1.0 on the negative side). So sample `x` clips under gain `g` when `g ≥ c(x)`, with `c(x) = (1 − Δ/2)/x`
/// for `x > 0` and `(1 + Δ/2)/|x|` for `x < 0`. Sorting the `c` ascending, the gain must stay below the
/// `(max_clipped + 1)`-th smallest: the result is that value, less one part per million (9·10⁻⁶ dB) so that the
/// rounding of `10^(dB/20)` and of the product to `f32` cannot tip the critical sample over. Applying 0.1 dB more clips
/// at least one more sample.
///
/// A hard clip at ±1.0 in front of the quantizer (the gain stage's `clip` rule) gives the same output: it only
/// moves samples between −1 − Δ/2 and −1 to −1.0, which is where rounding puts them anyway.
///
/// Non-finite samples count as the chain treats them (NaN as 0, ±Inf as ±1.0). When no gain can clip more than
/// `max_clipped` samples the result is [`MAX_PRE_GAIN_DB`], or 0 dB for silence; it is never above
/// [`MAX_PRE_GAIN_DB`].
pub fn suggest_pre_gain(clip: &Clip, bits: u32, max_clipped: u64) -> f64 {
    let bits = bits.clamp(1, 24);
    let half = libm::ldexp(1.0, -(bits as i32));
    let critical_gain = |x: f64| if x > 0.0 { (1.0 - half) / x } else { (1.0 + half) / -x };
    let samples = || clip.channels.iter().flatten().map(|&s| sanitize(s) as f64).filter(|&x| x != 0.0);
    let critical = if max_clipped < BOUNDED_SELECT {
        // The (m + 1) smallest critical gains in a bounded max-heap: one pass, no copy of the clip.
        let m = max_clipped as usize;
        let mut heap = std::collections::BinaryHeap::with_capacity(m + 1);
        for c in samples().map(critical_gain) {
            if heap.len() <= m {
                heap.push(TotalF64(c));
            } else if c < heap.peek().map_or(f64::INFINITY, |t| t.0) {
                heap.pop();
                heap.push(TotalF64(c));
            }
        }
        if heap.is_empty() {
            return 0.0;
        }
        if heap.len() <= m {
            return MAX_PRE_GAIN_DB;
        }
        heap.peek().map_or(0.0, |t| t.0)
    } else {
        let mut c: Vec<f64> = samples().map(critical_gain).collect();
        if c.is_empty() {
            return 0.0;
        }
        if (c.len() as u64) <= max_clipped {
            return MAX_PRE_GAIN_DB;
        }
        let (_, &mut critical, _) = c.select_nth_unstable_by(max_clipped as usize, f64::total_cmp);
        critical
    };
    (20.0 * libm::log10(critical * (1.0 - 1e-6))).min(MAX_PRE_GAIN_DB)
}

/// Clip budgets below this select with a bounded heap in one pass; larger ones copy and partially sort.
const BOUNDED_SELECT: u64 = 4096;

/// An `f64` ordered by [`f64::total_cmp`] (the critical gains are finite and positive).
#[derive(Debug, Clone, Copy, PartialEq)]
struct TotalF64(f64);
impl Eq for TotalF64 {}
impl PartialOrd for TotalF64 {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}
impl Ord for TotalF64 {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.0.total_cmp(&other.0)
    }
}

// ---------------------------------------------------------------------------------------------------------------------
// Tests
// ---------------------------------------------------------------------------------------------------------------------

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::Levels;
    use crate::quantize::{QuantizeParams, Quantizer};
    use crate::rng::Pcg32;

    fn sine(n: usize, f: f64, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64).sin()) as f32).collect()
    }

    fn clip(rate: u32, channels: Vec<Vec<f32>>) -> Clip {
        Clip::new(rate, channels).unwrap()
    }

    fn run(p: &PrepParams, c: &Clip) -> Prepared {
        prepare(p, c).unwrap()
    }

    fn err(p: &PrepParams, c: &Clip) -> String {
        prepare(p, c).unwrap_err().to_string()
    }

    fn rms_dbfs(x: &[f32]) -> f64 {
        Levels::measure(&[x]).rms_dbfs
    }

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
        assert_eq!(p.loop_region, Some(LoopRegion { start: 4410, end: 48510, crossfade_ms: 20.0 }));
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
                PrepParams {
                    loop_region: Some(LoopRegion { start: 0, end: 10, crossfade_ms: 1001.0 }),
                    ..Default::default()
                },
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

    // ---- channels

    fn mono(law: DownmixLaw) -> PrepParams {
        PrepParams { channels: ChannelMode::Mono(law), ..Default::default() }
    }

    /// Downmix levels, common practice for pan/downmix laws (e.g. the "−3 dB" and "−6 dB" sum laws of mixing
    /// consoles): summing a correlated pair at −3 dB gives +3.01 dB over one side, at −6 dB 0 dB, averaging 0 dB;
    /// a one-sided signal comes out at −3.01, −6.02 and −6.02 dB.
    #[test]
    fn downmix_laws_give_the_textbook_levels() {
        let s = sine(4800, 0.01, 0.25); // 48 whole periods
        let one_side = rms_dbfs(&s);
        let correlated = clip(48_000, vec![s.clone(), s.clone()]);
        let one_sided = clip(48_000, vec![s.clone(), vec![0.0; s.len()]]);
        for (law, corr_db, one_db) in [
            (DownmixLaw::Sum3db, 3.0103, -3.0103),
            (DownmixLaw::Sum6db, 0.0, -6.0206),
            (DownmixLaw::Average, 0.0, -6.0206),
            (DownmixLaw::Left, 0.0, 0.0),
        ] {
            let a = run(&mono(law), &correlated);
            let b = run(&mono(law), &one_sided);
            assert_eq!(a.clip.channel_count(), 1);
            let da = rms_dbfs(&a.clip.channels[0]) - one_side;
            let db = rms_dbfs(&b.clip.channels[0]) - one_side;
            eprintln!("{law:?}: correlated pair {da:+.4} dB, one-sided {db:+.4} dB");
            assert!((da - corr_db).abs() < 1e-4, "{law:?} correlated {da}");
            assert!((db - one_db).abs() < 1e-4, "{law:?} one-sided {db}");
        }
        // Right picks the second channel: silence for a left-only signal.
        let r = run(&mono(DownmixLaw::Right), &one_sided);
        assert!(r.clip.channels[0].iter().all(|&v| v == 0.0));
        // Average of three channels divides by three; sum laws add all three.
        let three = clip(48_000, vec![vec![0.3; 4], vec![0.3; 4], vec![0.3; 4]]);
        assert!((run(&mono(DownmixLaw::Average), &three).clip.channels[0][0] - 0.3).abs() < 1e-7);
        assert!((run(&mono(DownmixLaw::Sum6db), &three).clip.channels[0][0] - 0.45).abs() < 1e-7);
    }

    #[test]
    fn mono_input_passes_through_and_duplicate_makes_stereo() {
        let m = clip(8000, vec![vec![0.5, -0.25, 1.0]]);
        for law in [DownmixLaw::Sum3db, DownmixLaw::Right] {
            let out = run(&mono(law), &m);
            assert_eq!(out.clip, m);
            assert!(!out.report.notes.is_empty());
        }
        let d = run(&PrepParams { channels: ChannelMode::Duplicate, ..Default::default() }, &m);
        assert_eq!(d.clip.channels, vec![m.channels[0].clone(), m.channels[0].clone()]);
        assert_eq!((d.report.channels_in, d.report.channels_out), (1, 2));
        let st = clip(8000, vec![vec![0.1, 0.2], vec![0.3, 0.4], vec![0.5, 0.6]]);
        let d = run(&PrepParams { channels: ChannelMode::Duplicate, ..Default::default() }, &st);
        assert_eq!(d.clip.channels, vec![vec![0.1, 0.2], vec![0.1, 0.2]]);
        // A correlated full-scale pair summed at −3 dB exceeds full scale: noted.
        let loud = clip(8000, vec![vec![1.0; 4], vec![1.0; 4]]);
        let out = run(&mono(DownmixLaw::Sum3db), &loud);
        assert!(out.report.notes.iter().any(|n| n.contains("+3.01 dBFS")), "{:?}", out.report.notes);
    }

    #[test]
    fn non_finite_input_is_sanitized() {
        let c = clip(8000, vec![vec![f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 0.5]]);
        let out = run(&PrepParams::default(), &c);
        assert_eq!(out.clip.channels[0], vec![0.0, 1.0, -1.0, 0.5]);
    }

    // ---- trim

    fn trim(threshold_dbfs: f64, margin_ms: f64) -> PrepParams {
        PrepParams { trim: Some(TrimParams { threshold_dbfs, margin_ms }), ..Default::default() }
    }

    #[test]
    fn trim_keeps_the_margin_exactly() {
        // 1000 Hz: 1 ms = 1 frame. Loud frames 300..=699 (one channel is enough), quiet noise elsewhere.
        let mut l = vec![1e-4f32; 1000]; // −80 dBFS
        let mut r = vec![0.0f32; 1000];
        l[300] = 0.5;
        r[699] = -0.01; // −40 dBFS, in the other channel
        for v in &mut l[400..600] {
            *v = 0.2;
        }
        let c = clip(1000, vec![l.clone(), r.clone()]);
        let out = run(&trim(-60.0, 25.0), &c);
        assert_eq!((out.report.trimmed_start_frames, out.report.trimmed_end_frames), (275, 1000 - 725));
        assert_eq!(out.clip.frames(), 450);
        assert_eq!(out.clip.channels[0][25], 0.5, "first loud frame after exactly 25 frames of margin");
        assert_eq!(out.clip.channels[0][..25], l[275..300]);
        assert_eq!(out.clip.channels[1][450 - 26], -0.01, "last loud frame followed by exactly 25 frames");
        // No margin: starts and ends on the loud frames.
        let out = run(&trim(-60.0, 0.0), &c);
        assert_eq!((out.clip.channels[0][0], *out.clip.channels[1].last().unwrap()), (0.5, -0.01));
        // A margin larger than what is there stops at the ends.
        let out = run(&trim(-60.0, 1000.0), &c);
        assert_eq!(out.clip.frames(), 1000);
        // Exactly at the threshold counts as loud (0 dBFS is exactly 1.0); just below is quiet.
        let out = run(&trim(0.0, 0.0), &clip(1000, vec![vec![0.999_999_94, 1.0, -1.0, 0.999_999_94]]));
        assert_eq!(out.clip.channels[0], vec![1.0, -1.0]);
        let out = run(&trim(-40.0, 0.0), &clip(1000, vec![vec![0.0099, 0.0101, 0.0099]]));
        assert_eq!(out.clip.channels[0], vec![0.0101]);
    }

    #[test]
    fn trimming_everything_is_an_error_naming_the_threshold() {
        for c in [clip(1000, vec![vec![1e-4; 100]]), clip(1000, vec![vec![0.0; 100]]), clip(1000, vec![vec![]])] {
            let e = err(&trim(-60.0, 10.0), &c);
            assert!(e.contains("trim.threshold_dbfs") && e.contains("-60"), "{e}");
            assert!(e.contains("everything is below -60 dBFS: nothing would be left"), "{e}");
        }
    }

    // ---- fades

    fn faded(p: PrepParams, n: usize) -> Vec<f32> {
        run(&p, &clip(1000, vec![vec![1.0; n]])).clip.channels[0].clone()
    }

    #[test]
    fn fades_start_and_end_at_exactly_zero_with_bounded_steps() {
        for curve in [FadeCurve::Linear, FadeCurve::EqualPower, FadeCurve::Exponential] {
            assert_eq!(curve.gain(0.0), 0.0);
            assert_eq!(curve.gain(1.0), 1.0);
            for fade_frames in [1usize, 2, 7, 100, 480] {
                let f = Some(FadeParams { ms: fade_frames as f64, curve }); // 1 frame per ms at 1 kHz
                let total = 1000;
                let x = faded(PrepParams { fade_in: f.clone(), fade_out: f, ..Default::default() }, total);
                assert_eq!(x[0], 0.0, "{curve:?} {fade_frames}: first sample of the fade-in");
                assert_eq!(x[total - 1], 0.0, "{curve:?} {fade_frames}: last sample of the fade-out");
                assert_eq!(x[fade_frames], 1.0, "{curve:?}: unity right after the fade-in");
                assert_eq!(x[total - 1 - fade_frames], 1.0, "{curve:?}: unity right before the fade-out");
                let allowed = curve.max_slope() / fade_frames as f64 + 1e-6;
                let max_step = x.windows(2).map(|w| (w[1] as f64 - w[0] as f64).abs()).fold(0.0, f64::max);
                assert!(max_step <= allowed, "{curve:?} {fade_frames}: step {max_step} > {allowed}");
                // The step bound is tight (within the sampling of the curve) for longer fades.
                if fade_frames >= 100 {
                    assert!(max_step > 0.9 * allowed, "{curve:?} {fade_frames}: {max_step} vs {allowed}");
                }
                // Monotonic.
                assert!(x[..=fade_frames].windows(2).all(|w| w[1] >= w[0]), "{curve:?}");
            }
        }
        // Exponential: a straight line in dB (60 dB over the fade) but for the shift to reach 0.
        let g = FadeCurve::Exponential;
        let floor = 1e-3;
        let db = |t: f64| 20.0 * (g.gain(t) * (1.0 - floor) + floor).log10();
        assert!((db(0.5) + 30.0).abs() < 1e-9 && (db(0.25) + 45.0).abs() < 1e-9, "{} {}", db(0.5), db(0.25));
        // Equal-power: sin² + cos² = 1 for a fade-in and the matching fade-out.
        let e = FadeCurve::EqualPower;
        assert!((e.gain(0.3).powi(2) + e.gain(0.7).powi(2) - 1.0).abs() < 1e-12);
    }

    #[test]
    fn fades_longer_than_the_clip_are_shortened() {
        let x = faded(
            PrepParams { fade_in: Some(FadeParams { ms: 5000.0, ..Default::default() }), ..Default::default() },
            10,
        );
        assert_eq!(x, (0..10).map(|i| i as f32 / 10.0).collect::<Vec<_>>());
        let out = run(
            &PrepParams { fade_out: Some(FadeParams { ms: 5000.0, ..Default::default() }), ..Default::default() },
            &clip(1000, vec![vec![1.0; 10]]),
        );
        assert!(out.report.notes.iter().any(|n| n.contains("shortened")), "{:?}", out.report.notes);
        // Zero length is no fade; a fade on an empty clip does nothing.
        let x =
            faded(PrepParams { fade_in: Some(FadeParams { ms: 0.0, ..Default::default() }), ..Default::default() }, 3);
        assert_eq!(x, vec![1.0; 3]);
        assert!(faded(PrepParams { fade_in: Some(FadeParams::default()), ..Default::default() }, 0).is_empty());
    }

    // ---- normalisation

    #[test]
    fn peak_normalisation_hits_the_target() {
        let c = clip(48_000, vec![sine(4800, 0.01, 0.2), sine(4800, 0.013, -0.35)]);
        let out = run(&PrepParams { normalize: Some(Normalize::Peak { target_dbfs: -1.0 }), ..Default::default() }, &c);
        let p = Levels::measure(&out.clip.channels).peak_dbfs;
        assert!((p + 1.0).abs() < 1e-5, "{p}");
        let expected_gain = -1.0 - 20.0 * (0.35f64).log10();
        assert!((out.report.gain_db - expected_gain).abs() < 1e-3, "{}", out.report.gain_db);
        assert!((out.report.peak_dbfs_after + 1.0).abs() < 1e-5);
    }

    #[test]
    fn normalising_silence_is_an_error() {
        let silent = clip(48_000, vec![vec![0.0; 48_000]]);
        let e =
            err(&PrepParams { normalize: Some(Normalize::Peak { target_dbfs: -1.0 }), ..Default::default() }, &silent);
        assert!(e.contains("normalize.target_dbfs") && e.contains("cannot normalise silence"), "{e}");
        let e = err(
            &PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -16.0 }), ..Default::default() },
            &silent,
        );
        assert!(
            e.contains("normalize.target_lufs") && e.contains("-16") && e.contains("cannot normalise silence"),
            "{e}"
        );
        let short = clip(48_000, vec![sine(4800, 0.01, 0.5)]);
        let e = err(
            &PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -16.0 }), ..Default::default() },
            &short,
        );
        assert!(e.contains("0.100 s") && e.contains("0.4 s"), "{e}");
        assert_eq!(integrated_loudness(&short), None);
    }

    #[test]
    fn loudness_normalisation_reports_its_gain() {
        let c = clip(48_000, vec![sine(48_000, 997.0 / 48_000.0, 0.1)]);
        let out =
            run(&PrepParams { normalize: Some(Normalize::Loudness { target_lufs: -20.0 }), ..Default::default() }, &c);
        let r = &out.report;
        let (before, after) = (r.loudness_lufs_before.unwrap(), r.loudness_lufs_after.unwrap());
        assert!((after + 20.0).abs() < 1e-3, "{after}");
        assert!((before + r.gain_db - after).abs() < 1e-3, "{before} + {} vs {after}", r.gain_db);
        assert_eq!(r.gain_db, (r.gain_db * 1e6).round() / 1e6, "gain on a 1e-6 dB grid");
        // A loud target pushes the peak beyond full scale: noted, not limited.
        let out =
            run(&PrepParams { normalize: Some(Normalize::Loudness { target_lufs: 0.0 }), ..Default::default() }, &c);
        assert!(out.report.peak_dbfs_after > 0.0);
        assert!(out.report.notes.iter().any(|n| n.contains("beyond full scale")), "{:?}", out.report.notes);
    }

    // ---- loops

    fn looped(start: u64, end: u64, crossfade_ms: f64) -> PrepParams {
        PrepParams { loop_region: Some(LoopRegion { start, end, crossfade_ms }), ..Default::default() }
    }

    #[test]
    fn loop_validation_names_the_values() {
        let c = clip(1000, vec![vec![0.5; 1000]]);
        let e = err(&looped(10, 1001, 0.0), &c);
        assert!(e.contains("loop_region.end") && e.contains("1001") && e.contains("at most 1000"), "{e}");
        let e = err(&looped(500, 400, 0.0), &c);
        assert!(e.contains("500..400") && e.contains("inverted"), "{e}");
        let e = err(&looped(400, 400, 0.0), &c);
        assert!(e.contains("400..400") && e.contains("empty"), "{e}");
        // Crossfade longer than the room before the start or inside the loop.
        let e = err(&looped(50, 900, 60.0), &c);
        assert!(e.contains("loop_region.crossfade_ms") && e.contains("60") && e.contains("there are 50"), "{e}");
        let e = err(&looped(500, 520, 30.0), &c);
        assert!(e.contains("loop_region.crossfade_ms") && e.contains("inside the loop (there are 20)"), "{e}");
        assert!(prepare(&looped(50, 900, 50.0), &c).is_ok());
        assert!(prepare(&looped(0, 1000, 0.0), &c).is_ok());
    }

    #[test]
    fn loop_points_move_with_the_trim() {
        let mut x = vec![0.0f32; 1000];
        for v in &mut x[200..800] {
            *v = 0.5;
        }
        let c = clip(1000, vec![x]);
        let p = PrepParams {
            loop_region: Some(LoopRegion { start: 300, end: 700, crossfade_ms: 0.0 }),
            ..trim(-60.0, 10.0)
        };
        let out = run(&p, &c);
        assert_eq!(out.report.trimmed_start_frames, 190);
        assert_eq!(out.report.loop_region, Some((110, 510)));
        // A trim that cuts into the loop is an error naming the values.
        let p = PrepParams {
            loop_region: Some(LoopRegion { start: 100, end: 700, crossfade_ms: 0.0 }),
            ..trim(-60.0, 10.0)
        };
        let e = err(&p, &c);
        assert!(e.contains("100..700") && e.contains("190..810") && e.contains("cut into the loop"), "{e}");
        let p = PrepParams {
            loop_region: Some(LoopRegion { start: 300, end: 900, crossfade_ms: 0.0 }),
            ..trim(-60.0, 10.0)
        };
        assert!(err(&p, &c).contains("300..900"));
    }

    /// A sine looped at a point that is not a whole number of periods jumps at the seam; the crossfade makes the
    /// last loop sample a copy of the sample before the start, so the seam step equals the sine's own step.
    #[test]
    fn crossfade_makes_the_seam_continuous() {
        let rate = 48_000;
        let f = 440.0 / rate as f64;
        let x = sine(rate as usize, f, 0.8);
        let c = clip(rate, vec![x.clone()]);
        let (s, e) = (10_000u64, 30_000 + 37); // 30037 − 10000 frames is not a multiple of the period (109.09)
        let plain = run(&looped(s, e, 0.0), &c).clip.channels[0].clone();
        let smooth = run(&looped(s, e, 20.0), &c).clip.channels[0].clone();
        let seam = |y: &[f32]| (y[e as usize - 1] - y[s as usize]).abs();
        let natural = (x[s as usize] - x[s as usize - 1]).abs();
        eprintln!(
            "seam jump without crossfade {:.4}, with {:.4}, natural step {natural:.4}",
            seam(&plain),
            seam(&smooth)
        );
        assert!(seam(&plain) > 0.2, "the test loop should click without a crossfade");
        assert_eq!(seam(&smooth), natural);
        assert_eq!(smooth[e as usize - 1], x[s as usize - 1]);
        // Only the last n = 960 frames of the loop changed, and no step inside the crossfade is a click.
        let n = 960;
        assert_eq!(smooth[..e as usize - n], x[..e as usize - n]);
        assert_eq!(smooth[e as usize..], x[e as usize..]);
        assert_ne!(smooth[e as usize - n], x[e as usize - n]);
        let max_natural = x.windows(2).map(|w| (w[1] - w[0]).abs()).fold(0.0, f32::max);
        let max_step =
            smooth[e as usize - n - 1..e as usize].windows(2).map(|w| (w[1] - w[0]).abs()).fold(0.0, f32::max);
        assert!(max_step < 1.5 * max_natural, "{max_step} vs {max_natural}");
    }

    /// 44,100 / 11,025 = 4 exactly (and 48,000 / 8,000 = 6): every point maps to ceil(p / 4) (ceil(p / 6)).
    #[test]
    fn rescale_44100_to_11025_is_exact() {
        // Integer ratio 4: every point maps to ceil(p / 4).
        assert_eq!(rescale_loop(44_100, 88_200, 44_100, 11_025), (11_025, 22_050));
        assert_eq!(rescale_loop(0, 4, 44_100, 11_025), (0, 1));
        assert_eq!(rescale_loop(1, 5, 44_100, 11_025), (1, 2));
        assert_eq!(rescale_loop(3, 8, 44_100, 11_025), (1, 2));
        for p in 0..10_000u64 {
            let (a, _) = rescale_loop(p, p + 1, 44_100, 11_025);
            assert_eq!(a, p.div_ceil(4), "{p}");
            let (a, _) = rescale_loop(p, p + 1, 48_000, 8_000);
            assert_eq!(a, p.div_ceil(6), "{p}");
        }
        // Same rate: unchanged; zero rate: unchanged, no panic; huge values saturate.
        assert_eq!(rescale_loop(123, 456, 22_050, 22_050), (123, 456));
        assert_eq!(rescale_loop(123, 456, 0, 22_050), (123, 456));
        assert_eq!(rescale_loop(u64::MAX - 1, u64::MAX, 1, 768_000), (u64::MAX, u64::MAX));
    }

    /// The zero-order-hold reducer: reduced sample k takes source sample ceil(k·from/to).
    fn zoh_source(k: u64, from: u32, to: u32) -> u64 {
        (k * from as u64).div_ceil(to as u64)
    }

    /// Brute force against the reducer's definition, for integer and fractional ratios.
    #[test]
    fn rescaled_loop_is_exactly_the_reduced_samples_from_inside_the_source_loop() {
        let mut rng = Pcg32::from_seed(7, 0);
        for (from, to) in
            [(44_100, 11_025), (44_100, 8_000), (48_000, 44_100), (44_100, 32_000), (22_050, 44_100), (3, 2)]
        {
            for _ in 0..300 {
                let s = (rng.next_u32() % 5000) as u64;
                let e = s + 1 + (rng.next_u32() % 5000) as u64;
                let (a, b) = rescale_loop(s, e, from, to);
                let inside: Vec<u64> = (0..(e * to as u64 / from as u64 + 3))
                    .filter(|&k| (s..e).contains(&zoh_source(k, from, to)))
                    .collect();
                let expect = (inside.first().copied().unwrap_or(a), inside.last().map_or(a, |&k| k + 1));
                assert_eq!((a, b), expect, "{from}→{to}: {s}..{e}");
            }
        }
        // Where the rule differs from ceil(p·to/from): 3 → 2 Hz, reduced sample 1 holds source sample 2.
        assert_eq!(zoh_source(1, 3, 2), 2);
        assert_eq!(rescale_loop(2, 5, 3, 2), (1, 3));
        // A loop to the very end ends at the end of the reduced clip (length floor((N−1)·to/from) + 1).
        let n = 44_101u64;
        let reduced_len = (n - 1) * 8_000 / 44_100 + 1;
        assert!(zoh_source(reduced_len - 1, 44_100, 8_000) < n);
        assert!(zoh_source(reduced_len, 44_100, 8_000) >= n);
        assert_eq!(rescale_loop(0, n, 44_100, 8_000).1, reduced_len);
    }

    /// 505 samples per block: IMA ADPCM in WAV (Microsoft/IMA "DVI ADPCM" WAVE format) with `block_align` 256, mono:
    /// a 4-byte header holding the first sample, then (256 − 4)·2 = 504 four-bit codes.
    #[test]
    fn snapping_to_adpcm_blocks() {
        assert_eq!(snap_to_block(1000, 5000, 505).unwrap(), (1010, 5050));
        assert_eq!(snap_to_block(252, 757, 505).unwrap(), (0, 505), "below half a block rounds down");
        assert_eq!(snap_to_block(253, 758, 505).unwrap(), (505, 1010), "half a block and more rounds up");
        assert_eq!(snap_to_block(0, 505, 505).unwrap(), (0, 505));
        // A loop of exactly one block that straddles boundaries still spans one block.
        let (a, b) = snap_to_block(250, 755, 505).unwrap();
        assert!(b > a && b - a == 505, "{a}..{b}");
        let e = snap_to_block(1000, 1300, 505).unwrap_err().to_string();
        assert!(e.contains("loop of 300 samples is shorter than one ADPCM block (505 samples)"), "{e}");
        assert!(e.contains("1000..1300"), "{e}");
        assert!(snap_to_block(10, 10, 505).unwrap_err().to_string().contains("empty"));
        assert!(snap_to_block(20, 10, 505).unwrap_err().to_string().contains("inverted"));
        assert!(snap_to_block(0, 10, 0).unwrap_err().to_string().contains("samples_per_block"));
        let (a, b) = snap_to_block(u64::MAX - 1200, u64::MAX - 600, 505).unwrap();
        assert!(b > a && b % 505 == 0);
        assert!(snap_to_block(0, u64::MAX, 1 << 63).unwrap_err().to_string().contains("loop_region.end"));
    }

    // ---- headroom

    /// Textbook PCM arithmetic: an N-bit step is 2^(1−N) of full scale and each 6.02 dB (a factor of 2) is one bit.
    #[test]
    fn headroom_figures() {
        let c = clip(48_000, vec![vec![0.5, -0.25], vec![0.1, 0.0]]);
        let h = headroom(&c, 16);
        assert_eq!(h.step, 1.0 / 32768.0);
        assert!((h.peak_dbfs + 6.0206).abs() < 1e-4 && (h.headroom_db - 6.0206).abs() < 1e-4);
        assert_eq!(h.headroom_lsb, 16384.0);
        assert_eq!(h.used_bits, 14.0, "half scale at 16 bits: 14 magnitude bits");
        assert_eq!(h.clipped, 0);
        let full = headroom(&clip(48_000, vec![vec![-1.0]]), 8);
        assert_eq!((full.used_bits, full.headroom_lsb, full.clipped), (7.0, 0.0, 0));
        // +1.0 and the samples from 1 − Δ/2 up clip; −1 − Δ/2 clips, −1.0 does not.
        let d = 1.0f32 / 128.0;
        let h = headroom(&clip(48_000, vec![vec![1.0, 1.0 - d / 2.0, 1.0 - d, -1.0, -1.0 - d / 2.0]]), 8);
        assert_eq!(h.clipped, 3);
        let s = headroom(&clip(48_000, vec![vec![0.0; 4]]), 16);
        assert_eq!((s.peak_dbfs, s.used_bits), (FLOOR_DB, 0.0));
        assert_eq!(headroom(&clip(48_000, vec![vec![0.5]]), 99).bits, 24);
    }

    fn quantize_clipped(x: &[f32], gain_db: f64, bits: u32) -> u64 {
        let g = libm::pow(10.0, gain_db / 20.0);
        let mut y: Vec<f32> = x.iter().map(|&v| (v as f64 * g) as f32).collect();
        let mut q = Quantizer::new(&QuantizeParams::bits(bits), 0, 0).unwrap();
        q.process(&mut y);
        q.clipped()
    }

    /// Checked against the project's quantizer (`crate::quantize::Quantizer` and its clip counter), the stage the
    /// suggestion is for.
    #[test]
    fn suggested_pre_gain_respects_the_clip_budget() {
        let mut rng = Pcg32::from_seed(3, 1);
        let noise: Vec<f32> = (0..20_000).map(|_| (rng.uniform_centered() * 0.3) as f32).collect();
        let neg_peak: Vec<f32> = sine(5000, 0.0123, 0.2).iter().map(|&v| if v < 0.0 { v * 2.0 } else { v }).collect();
        for x in [noise, neg_peak] {
            let c = clip(48_000, vec![x.clone()]);
            for bits in [4, 8, 16, 24] {
                for max_clipped in [0u64, 1, 5, 100, BOUNDED_SELECT - 1, BOUNDED_SELECT, 4500] {
                    let g = suggest_pre_gain(&c, bits, max_clipped);
                    let at = quantize_clipped(&x, g, bits);
                    let more = quantize_clipped(&x, g + 0.1, bits);
                    assert!(at <= max_clipped, "{bits} bits, budget {max_clipped}: {at} clipped at {g:.4} dB");
                    assert!(more > max_clipped, "{bits} bits, budget {max_clipped}: +0.1 dB clips only {more}");
                }
            }
        }
        assert_eq!(suggest_pre_gain(&clip(48_000, vec![vec![0.0; 10]]), 16, 0), 0.0);
        assert_eq!(suggest_pre_gain(&clip(48_000, vec![vec![0.5, 0.0]]), 16, 1), MAX_PRE_GAIN_DB);
        assert_eq!(suggest_pre_gain(&clip(48_000, vec![vec![1e-9]]), 16, 0), MAX_PRE_GAIN_DB);
        // Full scale at 16 bits: the gain brings +1.0 just under 1 − 2^−16.
        let g = suggest_pre_gain(&clip(48_000, vec![vec![1.0]]), 16, 0);
        assert!(g < 0.0 && g > -0.0002, "{g}");
    }

    #[cfg(not(target_arch = "wasm32"))]
    mod props {
        use super::*;
        use proptest::prelude::*;

        fn special() -> impl Strategy<Value = f32> {
            prop_oneof![
                4 => proptest::num::f32::ANY,
                1 => prop_oneof![Just(f32::NAN), Just(f32::INFINITY), Just(f32::MIN), Just(1e-40f32), Just(1e30f32)],
            ]
        }

        /// Seeded noise at a random level, with silent lead-in and tail (so the trim has work) and a few extreme or
        /// non-finite samples dropped in.
        fn clips() -> impl Strategy<Value = Clip> {
            let rate = prop_oneof![Just(1u32), Just(15), Just(1000), Just(8000), Just(16_000)];
            let specials = proptest::collection::vec((any::<usize>(), special()), 0..4);
            (1usize..=3, 0usize..8000, rate, any::<u64>(), -130.0f64..10.0, 0.0f64..0.5, 0.0f64..0.5, specials)
                .prop_map(|(ch, n, rate, seed, level_db, lead, tail, specials)| {
                    let mut rng = Pcg32::from_seed(seed, 0);
                    let amp = 10f64.powf(level_db / 20.0);
                    let (a, b) = ((n as f64 * lead) as usize, n - (n as f64 * tail) as usize);
                    let mut channels: Vec<Vec<f32>> = (0..ch)
                        .map(|_| {
                            (0..n)
                                .map(
                                    |i| if i >= a && i < b { (rng.uniform_centered() * 2.0 * amp) as f32 } else { 0.0 },
                                )
                                .collect()
                        })
                        .collect();
                    for (at, v) in specials {
                        if n > 0 {
                            channels[at % ch][at / ch % n] = v;
                        }
                    }
                    Clip { sample_rate: rate, channels }
                })
        }

        fn ms() -> impl Strategy<Value = f64> {
            prop_oneof![24 => 0.0f64..200.0, 1 => Just(-1.0), 1 => Just(f64::NAN), 1 => Just(60_000.0)]
        }

        fn fade() -> impl Strategy<Value = Option<FadeParams>> {
            let curve = prop_oneof![Just(FadeCurve::Linear), Just(FadeCurve::EqualPower), Just(FadeCurve::Exponential)];
            proptest::option::of((ms(), curve).prop_map(|(ms, curve)| FadeParams { ms, curve }))
        }

        fn params() -> impl Strategy<Value = PrepParams> {
            let law = prop_oneof![
                Just(DownmixLaw::Sum3db),
                Just(DownmixLaw::Sum6db),
                Just(DownmixLaw::Average),
                Just(DownmixLaw::Left),
                Just(DownmixLaw::Right)
            ];
            let channels =
                prop_oneof![Just(ChannelMode::Keep), Just(ChannelMode::Duplicate), law.prop_map(ChannelMode::Mono)];
            let trim = proptest::option::of(
                (-125.0f64..2.0, ms()).prop_map(|(threshold_dbfs, margin_ms)| TrimParams { threshold_dbfs, margin_ms }),
            );
            let normalize = proptest::option::of(prop_oneof![
                (-62.0f64..2.0).prop_map(|target_dbfs| Normalize::Peak { target_dbfs }),
                (-72.0f64..2.0).prop_map(|target_lufs| Normalize::Loudness { target_lufs }),
            ]);
            let loop_region = proptest::option::of((0u64..8500, 0u64..8500, any::<bool>(), ms()).prop_map(
                |(a, b, ordered, crossfade_ms)| {
                    let (start, end) = if ordered { (a.min(b), a.max(b)) } else { (a, b) };
                    LoopRegion { start, end, crossfade_ms }
                },
            ));
            (channels, trim, fade(), fade(), normalize, loop_region).prop_map(
                |(channels, trim, fade_in, fade_out, normalize, loop_region)| PrepParams {
                    channels,
                    trim,
                    fade_in,
                    fade_out,
                    normalize,
                    loop_region,
                },
            )
        }

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(1000))]
            #[test]
            fn prepare_never_panics_and_output_is_finite(c in clips(), p in params()) {
                match prepare(&p, &c) {
                    Ok(out) => {
                        prop_assert!(out.clip.channels.iter().flatten().all(|s| s.is_finite()));
                        prop_assert_eq!(out.clip.channel_count(), out.report.channels_out);
                        prop_assert!(out.clip.channels.iter().all(|ch| ch.len() == out.clip.frames()));
                        let r = &out.report;
                        prop_assert!(r.gain_db.is_finite() && r.peak_dbfs_after.is_finite());
                        prop_assert!(r.loudness_lufs_before.is_none_or(f64::is_finite));
                        prop_assert!(r.loudness_lufs_after.is_none_or(f64::is_finite));
                        if let Some((s, e)) = r.loop_region {
                            prop_assert!(s < e && e <= out.clip.frames() as u64);
                        }
                        prop_assert_eq!(
                            r.trimmed_start_frames + r.trimmed_end_frames + out.clip.frames() as u64,
                            c.frames() as u64
                        );
                        serde_json::to_string(r).unwrap();
                    }
                    Err(e) => prop_assert!(!e.to_string().is_empty()),
                }
            }

            #[test]
            fn helpers_never_panic(s in any::<u64>(), e in any::<u64>(), from in any::<u32>(), to in any::<u32>(), b in any::<u64>()) {
                let (a, z) = rescale_loop(s.min(e), s.max(e), from, to);
                prop_assert!(a <= z);
                if let Ok((a, z)) = snap_to_block(s, e, b) {
                    prop_assert!(a < z && a % b == 0 && z % b == 0);
                }
            }

            #[test]
            fn headroom_and_pre_gain_are_finite(c in clips(), bits in 0u32..40, m in 0u64..50) {
                let h = headroom(&c, bits);
                prop_assert!(h.peak_dbfs.is_finite() && h.headroom_lsb.is_finite() && h.used_bits.is_finite());
                let g = suggest_pre_gain(&c, bits, m);
                prop_assert!(g.is_finite() && g <= MAX_PRE_GAIN_DB);
            }
        }
    }
}
