//! The preparation steps, in the order the [parent module](super) documents.

use super::*;
use crate::analysis::loudness::{loudness_of, unmeasurable_reason};
use crate::db::amp_db_portable as amp_db;
use crate::sample::sanitize;
use std::f64::consts::FRAC_PI_2;

/// Runs the preparation steps of `params` on `clip` (see the [module docs](super) for the order), for a sound without
/// a loop of its own: [`prepare_with_file_loop`] with `None`.
///
/// # Errors
/// A parameter out of range; an invalid clip (rate, channel count, unequal lengths); a trim that would remove
/// everything; loop points outside the sound, inverted, empty, cut by the trim or too short for the crossfade;
/// normalising silence (or loudness of a clip shorter than 400 ms). Every message names the parameter and value.
pub fn prepare(params: &PrepParams, clip: &Clip) -> Result<Prepared> {
    prepare_with_file_loop(params, clip, None)
}

/// Like [`prepare`], for a sound whose file holds a loop of its own, `file_loop` (source frames, end exclusive): the
/// loop of `"loop_region": "file"`, and the loop kept (without crossfade) when the preset sets no `loop_region`.
///
/// # Errors
/// Those of [`prepare`]; and, for `"file"`, a file without a loop (unless `"if_missing": "warn"`, which notes it).
pub fn prepare_with_file_loop(params: &PrepParams, clip: &Clip, file_loop: Option<(u64, u64)>) -> Result<Prepared> {
    params.validate()?;
    clip.check()?;
    let rate = clip.sample_rate;
    let source_frames = clip.frames() as u64;
    let mut notes = Vec::new();
    // The loop this sound gets: the preset's region, the file's own loop, or none.
    let region: Option<LoopRegion> = match (&params.loop_region, file_loop) {
        (Some(LoopSetting::Region(r)), _) => Some(r.clone()),
        (Some(LoopSetting::File(f)), Some((start, end))) => Some(LoopRegion::frames(start, end, f.crossfade_ms)),
        (Some(LoopSetting::File(f)), None) => match f.if_missing {
            IfMissing::Error => {
                return Err(Error::param(
                    "loop_region",
                    "\"file\"",
                    "a file with a loop of its own (a WAV `smpl` loop, an AIFF sustain loop): this one has none \
                     (give the loop in the preset, or add \"if_missing\": \"warn\" to render such files without one)",
                ))
            }
            IfMissing::Warn => {
                notes.push("the file has no loop of its own: rendered without a loop".into());
                None
            }
        },
        (None, l) => l.map(|(start, end)| LoopRegion::frames(start, end, 0.0)),
    };
    if let Some(LoopRegion { start: LoopPoint::Frame(s), end: LoopPoint::Frame(e), .. }) = &region {
        check_loop_order("loop_region", *s, *e)?; // a file's loop (a preset's was checked by `validate`)
    }
    for (name, p) in region.iter().flat_map(|l| [("loop_region.start", l.start), ("loop_region.end", l.end)]) {
        // Frames are checked against the source before anything runs (relative points after the trim).
        match p {
            LoopPoint::Frame(f) if f > source_frames => {
                return Err(Error::param(
                    name,
                    f,
                    format!("at most {source_frames}, the sound's length in frames (end is exclusive)"),
                ))
            }
            _ => {}
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

    // 4. Loop points follow the trim (relative ones are placed on the trimmed sound); crossfade.
    let mut loop_out = None;
    if let Some(l) = &region {
        let keep = (keep_start, keep_end);
        let trimmed = params.trim.is_some();
        let start = l.start.resolve("loop_region.start", rate, keep, trimmed)?;
        let end = l.end.resolve("loop_region.end", rate, keep, trimmed)?;
        if start < keep_start || end > keep_end {
            let t = params.trim.clone().unwrap_or_default();
            return Err(Error::param(
                "loop_region",
                format!("{start}..{end}"),
                format!(
                    "a region inside the trimmed sound, source frames {keep_start}..{keep_end}: the trim \
                     (threshold {} dBFS, margin {} ms) would cut into the loop",
                    t.threshold_dbfs, t.margin_ms
                ),
            ));
        }
        let relative = !matches!((l.start, l.end), (LoopPoint::Frame(_), LoopPoint::Frame(_)));
        if relative && start >= end {
            return Err(Error::param(
                "loop_region",
                format!("{}..{}", l.start, l.end),
                format!(
                    "start < end: here start is frame {} and end frame {} of the {}sound's {frames} frames \
                     ({:.3} s at {rate} Hz)",
                    start - keep_start,
                    end - keep_start,
                    if trimmed { "trimmed " } else { "" },
                    frames as f64 / rate as f64
                ),
            ));
        }
        let (s, e) = (start - keep_start, end - keep_start);
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

#[cfg(test)]
mod tests;
