//! Built-in demo sounds, synthesised here (no recordings), all at 48 kHz.
//!
//! The scenario: the sounds of a small fictional puzzle game, "Tidepool", that has to ship on a tiny handheld. Each
//! demo exercises something different in a crusher:
//!
//! | name | what it is | why it is useful |
//! |---|---|---|
//! | `chime-loop` | a 4 s two-bar bell arpeggio over a soft bass, stereo, loopable | melodic content, decays into quiet tails where low bit depths fall apart |
//! | `drum-hit` | a 0.8 s kick with a pitch drop and a noisy click, mono | transients and crest factor; clipping and overflow |
//! | `pad` | a 4 s detuned chord with a slow swell, stereo | dense harmonics: aliasing when the rate drops |
//! | `sweep` | a 6 s exponential sine sweep 20 Hz → 20 kHz at −6 dBFS, mono | shows aliasing and filter responses directly |
//! | `tone` | 2 s of 997 Hz at −6 dBFS, mono | a known tone: bit depth against SQNR, spectra |
//!
//! Synthesis uses `libm` so that the samples are bit-identical on every platform (native and WebAssembly).

use crate::audio::Clip;
use crate::error::{Error, Result};
use crate::rng::Pcg32;
use libm::{exp, pow, sin};
use std::f64::consts::PI;

/// Sample rate of every demo, in Hz.
pub const DEMO_RATE: u32 = 48_000;

/// Names of the demos, in display order.
pub const DEMOS: [&str; 5] = ["chime-loop", "drum-hit", "pad", "sweep", "tone"];

/// Frequency of the `tone` demo, in Hz.
pub const TONE_HZ: f64 = 997.0;

/// Synthesises the demo called `name`.
pub fn demo(name: &str) -> Result<Clip> {
    let channels = match name {
        "chime-loop" => chime_loop(),
        "drum-hit" => vec![drum_hit()],
        "pad" => pad(),
        "sweep" => vec![sweep()],
        "tone" => vec![tone()],
        _ => return Err(Error::param("demo", name, DEMOS.join(", "))),
    };
    Clip::new(DEMO_RATE, channels)
}

fn seconds(s: f64) -> usize {
    (s * DEMO_RATE as f64).round() as usize
}

fn t(i: usize) -> f64 {
    i as f64 / DEMO_RATE as f64
}

fn midi_hz(note: f64) -> f64 {
    440.0 * pow(2.0, (note - 69.0) / 12.0)
}

fn tone() -> Vec<f32> {
    (0..seconds(2.0)).map(|i| (0.5 * sin(2.0 * PI * TONE_HZ * t(i))) as f32).collect()
}

fn sweep() -> Vec<f32> {
    let (f0, f1, dur) = (20.0f64, 20_000.0f64, 6.0f64);
    let k = libm::log(f1 / f0);
    let n = seconds(dur);
    (0..n)
        .map(|i| {
            let phase = 2.0 * PI * f0 * dur / k * (exp(t(i) / dur * k) - 1.0);
            let fade = (t(i) / 0.01).min((dur - t(i)) / 0.01).min(1.0);
            (0.5 * fade * sin(phase)) as f32
        })
        .collect()
}

fn drum_hit() -> Vec<f32> {
    let mut rng = Pcg32::from_seed(2024, 1);
    (0..seconds(0.8))
        .map(|i| {
            let t = t(i);
            // Pitch falls from about 160 Hz to 45 Hz; phase is the integral of the frequency.
            let phase = 2.0 * PI * (45.0 * t + (160.0 - 45.0) * 0.03 * (1.0 - exp(-t / 0.03)));
            let body = sin(phase) * exp(-t / 0.18);
            let click = rng.uniform_centered() * 2.0 * exp(-t / 0.004);
            (0.8 * (0.85 * body + 0.3 * click)).clamp(-0.99, 0.99) as f32
        })
        .collect()
}

/// A bell: two-operator FM with a decaying index, ratio 3.5 for an inharmonic shimmer.
fn bell(out: &mut [f64], start: usize, hz: f64, amp: f64) {
    for (j, o) in out[start..].iter_mut().enumerate().take(seconds(1.6)) {
        let tt = t(j);
        let env = exp(-tt / 0.45) * (tt / 0.002).min(1.0);
        let index = 2.2 * exp(-tt / 0.25);
        *o += amp * env * sin(2.0 * PI * hz * tt + index * sin(2.0 * PI * 3.5 * hz * tt));
    }
}

fn chime_loop() -> Vec<Vec<f32>> {
    let n = seconds(4.0);
    let (mut l, mut r) = (vec![0.0f64; n], vec![0.0f64; n]);
    // Sixteen eighth notes at 120 BPM over two bars; a pentatonic figure of our own.
    let notes = [72, 76, 79, 84, 81, 79, 76, 74, 72, 74, 76, 79, 76, 74, 69, 67];
    for (k, &note) in notes.iter().enumerate() {
        let start = seconds(k as f64 * 0.25);
        let pan = 0.5 + 0.35 * sin(k as f64 * 1.3);
        let (mut bl, mut br) = (vec![0.0f64; n], vec![0.0f64; n]);
        bell(&mut bl, start, midi_hz(note as f64), 0.32 * (1.0 - pan));
        bell(&mut br, start, midi_hz(note as f64), 0.32 * pan);
        // Wrap the tail of late notes round to the start so the loop is seamless.
        for i in 0..n {
            l[i] += bl[i];
            r[i] += br[i];
        }
        let tail_len = (start + seconds(1.6)).saturating_sub(n);
        if tail_len > 0 {
            let mut tail = vec![0.0f64; seconds(1.6)];
            bell(&mut tail, 0, midi_hz(note as f64), 0.32);
            let offset = n - start;
            for i in 0..tail_len {
                l[i] += tail[offset + i] * (1.0 - pan);
                r[i] += tail[offset + i] * pan;
            }
        }
    }
    // A soft bass: two notes of a bar each, a sine with its octave.
    for (bar, note) in [(0usize, 48.0), (1, 43.0)] {
        let hz = midi_hz(note);
        for i in seconds(bar as f64 * 2.0)..seconds(bar as f64 * 2.0 + 2.0) {
            let tt = t(i) - bar as f64 * 2.0;
            let env = (tt / 0.02).min(1.0).min((2.0 - tt) / 0.02);
            let v = 0.22 * env * (sin(2.0 * PI * hz * t(i)) + 0.3 * sin(4.0 * PI * hz * t(i)));
            l[i] += v;
            r[i] += v;
        }
    }
    vec![l.iter().map(|&v| v as f32).collect(), r.iter().map(|&v| v as f32).collect()]
}

fn pad() -> Vec<Vec<f32>> {
    let n = seconds(4.0);
    let chord = [57.0, 60.0, 64.0, 67.0];
    let mut out = vec![vec![0f32; n]; 2];
    for (c, ch) in out.iter_mut().enumerate() {
        let detune = if c == 0 { -0.07 } else { 0.07 };
        for (i, o) in ch.iter_mut().enumerate() {
            let tt = t(i);
            let env = (tt / 1.5).min(1.0) * ((4.0 - tt) / 0.5).min(1.0);
            let mut v = 0.0;
            for &note in &chord {
                let hz = midi_hz(note + detune);
                // Band-limited sawtooth: harmonics below 20 kHz with 1/k amplitudes, sin(kθ) by the Chebyshev
                // recurrence sin(kθ) = 2·cos θ·sin((k−1)θ) − sin((k−2)θ).
                let theta = 2.0 * PI * hz * tt;
                let (c2, mut s1, mut s0) = (2.0 * libm::cos(theta), sin(theta), 0.0);
                let mut k = 1.0;
                while k * hz < 20_000.0 {
                    v += s1 / k;
                    let next = c2 * s1 - s0;
                    s0 = s1;
                    s1 = next;
                    k += 1.0;
                }
            }
            *o = (0.09 * env * v) as f32;
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::analysis::Levels;

    #[test]
    fn every_demo_is_finite_and_within_full_scale() {
        for name in DEMOS {
            let c = demo(name).unwrap();
            assert!(c.frames() > DEMO_RATE as usize / 2, "{name}");
            let l = Levels::measure(&c.channels);
            assert_eq!(l.non_finite, 0, "{name}");
            assert!(l.peak_dbfs < 0.0 && l.peak_dbfs > -12.0, "{name}: peak {}", l.peak_dbfs);
        }
        assert!(demo("nope").unwrap_err().to_string().contains("chime-loop"));
    }
}
