//! Integrated loudness (ITU-R BS.1770 through the `ebur128` crate), and why a clip cannot be measured.

use crate::audio::Clip;

/// Integrated loudness in LUFS (ITU-R BS.1770-4 with its gates, EBU R 128 mode I) measured by the `ebur128` crate at
/// the clip's own rate, with the channel map described at [`crate::prep::Normalize::Loudness`].
///
/// `None` when it cannot be measured: an invalid clip, a rate below [`MIN_LOUDNESS_RATE`] (3,364 Hz), less than
/// 400 ms of sound, every block below the −70 LUFS absolute gate (silence), or non-finite samples.
pub fn integrated_loudness(clip: &Clip) -> Option<f64> {
    clip.check().ok()?;
    if clip.sample_rate < MIN_LOUDNESS_RATE {
        return None;
    }
    loudness_of(&clip.channels, clip.sample_rate)
}

pub(crate) fn loudness_of(channels: &[Vec<f32>], rate: u32) -> Option<f64> {
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

pub(crate) fn unmeasurable_reason(channels: &[Vec<f32>], rate: u32) -> String {
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
