//! The filter stage: a biquad (or a cascade of identical biquads for steeper slopes) designed from the published
//! Audio EQ Cookbook formulas (R. Bristow-Johnson). Before a hold it band-limits on purpose; after it, it tames the
//! hold's images.
//!
//! # Design (Audio EQ Cookbook)
//! With `w0 = 2π·freq_hz/fs`, `α = sin(w0)/(2Q)` and, for the shelves and the peak, `A = 10^(gain_db/40)`:
//! - `lowpass`: `b = [(1−cos w0)/2, 1−cos w0, (1−cos w0)/2]`, `a = [1+α, −2cos w0, 1−α]`;
//! - `highpass`: `b = [(1+cos w0)/2, −(1+cos w0), (1+cos w0)/2]`, same `a`;
//! - `bandpass` (constant 0 dB peak gain): `b = [α, 0, −α]`, same `a`;
//! - `peaking`: `b = [1+αA, −2cos w0, 1−αA]`, `a = [1+α/A, −2cos w0, 1−α/A]`;
//! - `lowshelf` / `highshelf`: the cookbook's shelf formulas with `2√A·α` (shelf slope given through Q).
//!
//! Every coefficient is divided by `a0`. The sample rate is the one where the stage sits: the source rate before the
//! rate stage, the export rate after it. `freq_hz` must lie below that rate's Nyquist frequency; with the allowed Q
//! (0.1 to 40) every design has both poles strictly inside the unit circle, so the filter is stable at every allowed
//! setting.
//!
//! # Processing
//! Transposed direct form II in `f64` (state and arithmetic), one instance per channel; the output is rounded to
//! `f32`. Coefficients use `libm`'s `sin`, `cos` and `pow`, so native and wasm builds give the same bytes. Non-finite
//! input goes through [`crate::sample::sanitize`] first. A filter never clips; its output may exceed ±1.0 (the
//! stages after it, or the export, decide what happens there).

use crate::error::{Error, Range, Result};
use crate::sample::sanitize;
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Allowed corner or centre frequency in Hz (and below the Nyquist frequency where the stage runs).
pub const FREQ_HZ: Range = Range::new(1.0, 384_000.0);
/// Allowed quality factor.
pub const Q: Range = Range::new(0.1, 40.0);
/// Allowed gain of the shelves and the peak, in dB.
pub const GAIN_DB: Range = Range::new(-48.0, 48.0);
/// Allowed number of identical biquads in cascade (each adds 12 dB/octave to a low- or high-pass slope).
pub const SECTIONS: Range = Range::new(1.0, 8.0);

/// The filter's response shape.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Shape {
    /// Passes below `freq_hz`: `lowpass`.
    #[default]
    Lowpass,
    /// Passes above `freq_hz`: `highpass`.
    Highpass,
    /// Passes a band around `freq_hz` (0 dB at the centre): `bandpass`.
    Bandpass,
    /// Boosts or cuts below `freq_hz` by `gain_db`: `lowshelf`.
    Lowshelf,
    /// Boosts or cuts above `freq_hz` by `gain_db`: `highshelf`.
    Highshelf,
    /// Boosts or cuts a band around `freq_hz` by `gain_db`: `peaking`.
    Peaking,
}

/// Parameters of the filter stage.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct FilterParams {
    /// Response shape; default `lowpass`.
    pub shape: Shape,
    /// Corner (pass, shelf) or centre (band, peak) frequency in Hz, 1 to 384,000 and below the Nyquist frequency of
    /// the rate where the stage runs. Default 4,000 Hz: after an 11,025 Hz hold it leaves the band and cuts the first
    /// images.
    pub freq_hz: f64,
    /// Quality factor, 0.1 to 40. Default 0.7071 (1/√2: a Butterworth low- or high-pass, no peak). Higher values
    /// resonate; for the shelves, 0.7071 is the steepest slope without overshoot.
    pub q: f64,
    /// Gain of the shelves and the peak in dB, −48 to +48 (ignored by the pass filters). Default 0.
    pub gain_db: f64,
    /// Identical biquads in cascade, 1 to 8 (default 1). Two give 24 dB/octave low- and high-pass slopes.
    pub sections: u32,
}

impl Default for FilterParams {
    fn default() -> Self {
        FilterParams {
            shape: Shape::Lowpass,
            freq_hz: 4_000.0,
            q: std::f64::consts::FRAC_1_SQRT_2,
            gain_db: 0.0,
            sections: 1,
        }
    }
}

impl FilterParams {
    /// Checks the parameters that need no sample rate.
    pub fn validate(&self) -> Result<()> {
        FREQ_HZ.check_f("freq_hz", self.freq_hz, " Hz")?;
        Q.check_f("q", self.q, "")?;
        GAIN_DB.check_f("gain_db", self.gain_db, " dB")?;
        SECTIONS.check_u("sections", self.sections as u64)
    }
}

/// Normalised biquad coefficients: `y = b0·x + b1·x₋₁ + b2·x₋₂ − a1·y₋₁ − a2·y₋₂`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Coefficients {
    /// Feed-forward coefficients (b0, b1, b2), divided by a0.
    pub b: [f64; 3],
    /// Feedback coefficients (a1, a2), divided by a0.
    pub a: [f64; 2],
}

impl Coefficients {
    /// The cookbook design of `params` at `sample_rate` Hz (see the module docs).
    pub fn design(params: &FilterParams, sample_rate: u32) -> Result<Self> {
        params.validate()?;
        let nyquist = sample_rate as f64 / 2.0;
        if params.freq_hz >= nyquist {
            return Err(Error::param(
                "freq_hz",
                params.freq_hz,
                format!("below {nyquist} Hz, the Nyquist frequency where the stage runs ({sample_rate} Hz)"),
            ));
        }
        let w0 = 2.0 * std::f64::consts::PI * params.freq_hz / sample_rate as f64;
        let (sin, cos) = (libm::sin(w0), libm::cos(w0));
        let alpha = sin / (2.0 * params.q);
        let a_gain = libm::pow(10.0, params.gain_db / 40.0);
        let (b, a) = match params.shape {
            Shape::Lowpass => {
                ([(1.0 - cos) / 2.0, 1.0 - cos, (1.0 - cos) / 2.0], [1.0 + alpha, -2.0 * cos, 1.0 - alpha])
            }
            Shape::Highpass => {
                ([(1.0 + cos) / 2.0, -(1.0 + cos), (1.0 + cos) / 2.0], [1.0 + alpha, -2.0 * cos, 1.0 - alpha])
            }
            Shape::Bandpass => ([alpha, 0.0, -alpha], [1.0 + alpha, -2.0 * cos, 1.0 - alpha]),
            Shape::Peaking => (
                [1.0 + alpha * a_gain, -2.0 * cos, 1.0 - alpha * a_gain],
                [1.0 + alpha / a_gain, -2.0 * cos, 1.0 - alpha / a_gain],
            ),
            Shape::Lowshelf | Shape::Highshelf => {
                let (ap, am) = (a_gain + 1.0, a_gain - 1.0);
                let k = 2.0 * a_gain.sqrt() * alpha;
                // The high shelf is the low shelf with the signs of the (A − 1) terms turned.
                let s = if params.shape == Shape::Lowshelf { 1.0 } else { -1.0 };
                (
                    [
                        a_gain * (ap - s * am * cos + k),
                        s * 2.0 * a_gain * (am - s * ap * cos),
                        a_gain * (ap - s * am * cos - k),
                    ],
                    [ap + s * am * cos + k, -s * 2.0 * (am + s * ap * cos), ap + s * am * cos - k],
                )
            }
        };
        Ok(Coefficients { b: [b[0] / a[0], b[1] / a[0], b[2] / a[0]], a: [a[1] / a[0], a[2] / a[0]] })
    }
}

/// The filter stage for one channel.
#[derive(Debug, Clone)]
pub struct Filter {
    c: Coefficients,
    /// Transposed direct form II state per section: (s1, s2).
    state: Vec<[f64; 2]>,
}

impl Filter {
    /// Validates `params` against `sample_rate` (the rate where the stage runs) and builds the stage.
    pub fn new(params: &FilterParams, sample_rate: u32) -> Result<Self> {
        let c = Coefficients::design(params, sample_rate)?;
        Ok(Filter { c, state: vec![[0.0; 2]; params.sections as usize] })
    }

    /// The coefficients of each section.
    pub fn coefficients(&self) -> Coefficients {
        self.c
    }
}

impl Stage for Filter {
    fn process(&mut self, buf: &mut [f32]) {
        let Coefficients { b: [b0, b1, b2], a: [a1, a2] } = self.c;
        for s in buf.iter_mut() {
            let mut x = sanitize(*s) as f64;
            for [s1, s2] in self.state.iter_mut() {
                let y = b0 * x + *s1;
                *s1 = b1 * x - a1 * y + *s2;
                *s2 = b2 * x - a2 * y;
                x = y;
            }
            *s = x as f32;
        }
    }

    fn reset(&mut self) {
        self.state.iter_mut().for_each(|s| *s = [0.0; 2]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn params(shape: Shape, freq_hz: f64, q: f64, gain_db: f64) -> FilterParams {
        FilterParams { shape, freq_hz, q, gain_db, sections: 1 }
    }

    /// |H(e^{jw})| in dB of the coefficients, evaluated directly.
    fn mag_db(c: &Coefficients, f: f64, fs: f64) -> f64 {
        let w = 2.0 * std::f64::consts::PI * f / fs;
        let (re1, im1) = (w.cos(), -w.sin());
        let (re2, im2) = ((2.0 * w).cos(), -(2.0 * w).sin());
        let num = (c.b[0] + c.b[1] * re1 + c.b[2] * re2, c.b[1] * im1 + c.b[2] * im2);
        let den = (1.0 + c.a[0] * re1 + c.a[1] * re2, c.a[0] * im1 + c.a[1] * im2);
        10.0 * ((num.0 * num.0 + num.1 * num.1) / (den.0 * den.0 + den.1 * den.1)).log10()
    }

    // Handbook properties of the cookbook designs: a Butterworth (Q = 1/√2) low-pass is −3.01 dB at its corner and
    // 0 dB at DC; the shelves reach their gain at the far end and half of it (in dB) at the corner; the peak reaches
    // its gain at the centre; the band-pass is 0 dB at its centre.
    #[test]
    fn cookbook_designs_have_their_textbook_points() {
        let fs = 48_000.0;
        let c = Coefficients::design(&params(Shape::Lowpass, 1000.0, std::f64::consts::FRAC_1_SQRT_2, 0.0), 48_000)
            .unwrap();
        assert!((mag_db(&c, 1000.0, fs) + 3.0103).abs() < 1e-3);
        assert!(mag_db(&c, 0.0, fs).abs() < 1e-9);
        let c = Coefficients::design(&params(Shape::Highpass, 1000.0, std::f64::consts::FRAC_1_SQRT_2, 0.0), 48_000)
            .unwrap();
        assert!((mag_db(&c, 1000.0, fs) + 3.0103).abs() < 1e-3);
        assert!(mag_db(&c, 23_999.0, fs).abs() < 1e-3);
        let c = Coefficients::design(&params(Shape::Peaking, 2000.0, 2.0, 9.0), 48_000).unwrap();
        assert!((mag_db(&c, 2000.0, fs) - 9.0).abs() < 1e-9);
        let c = Coefficients::design(&params(Shape::Lowshelf, 300.0, std::f64::consts::FRAC_1_SQRT_2, -12.0), 48_000)
            .unwrap();
        assert!((mag_db(&c, 0.0, fs) + 12.0).abs() < 1e-9);
        assert!((mag_db(&c, 300.0, fs) + 6.0).abs() < 1e-6);
        let c = Coefficients::design(&params(Shape::Highshelf, 5000.0, std::f64::consts::FRAC_1_SQRT_2, 6.0), 48_000)
            .unwrap();
        assert!((mag_db(&c, 24_000.0, fs) - 6.0).abs() < 1e-9);
        assert!((mag_db(&c, 5000.0, fs) - 3.0).abs() < 1e-6);
        let c = Coefficients::design(&params(Shape::Bandpass, 1000.0, 5.0, 0.0), 48_000).unwrap();
        assert!(mag_db(&c, 1000.0, fs).abs() < 1e-9);
    }

    /// Stability at every allowed setting: both poles strictly inside the unit circle (|a2| < 1 and |a1| < 1 + a2, the
    /// stability triangle of a second-order section).
    #[test]
    fn every_allowed_setting_is_stable() {
        for shape in
            [Shape::Lowpass, Shape::Highpass, Shape::Bandpass, Shape::Lowshelf, Shape::Highshelf, Shape::Peaking]
        {
            for fs in [8_000u32, 11_025, 48_000, 192_000] {
                for f in [1.0, 20.0, fs as f64 * 0.25, fs as f64 * 0.4999] {
                    for q in [Q.min, std::f64::consts::FRAC_1_SQRT_2, 5.0, Q.max] {
                        for g in [GAIN_DB.min, 0.0, GAIN_DB.max] {
                            let c = Coefficients::design(&params(shape, f, q, g), fs).unwrap();
                            let [a1, a2] = c.a;
                            assert!(a2.abs() < 1.0 && a1.abs() < 1.0 + a2, "{shape:?} {fs} {f} {q} {g}: {c:?}");
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn parameters_out_of_range_name_themselves() {
        let d = FilterParams::default();
        for (p, name) in [
            (FilterParams { freq_hz: 0.5, ..d.clone() }, "freq_hz"),
            (FilterParams { freq_hz: 30_000.0, ..d.clone() }, "freq_hz"),
            (FilterParams { q: 0.0, ..d.clone() }, "q"),
            (FilterParams { gain_db: f64::NAN, ..d.clone() }, "gain_db"),
            (FilterParams { sections: 9, ..d.clone() }, "sections"),
        ] {
            let e = Filter::new(&p, 48_000).unwrap_err();
            assert!(matches!(&e, Error::Param { name: n, .. } if n == name), "{e}");
        }
    }

    #[test]
    fn sections_cascade_and_reset_restarts() {
        let p = FilterParams { sections: 2, ..FilterParams::default() };
        let mut f = Filter::new(&p, 48_000).unwrap();
        let mut one = Filter::new(&FilterParams::default(), 48_000).unwrap();
        let x: Vec<f32> = (0..256).map(|i| ((i * 37 % 101) as f32 / 50.0) - 1.0).collect();
        let mut y = x.clone();
        f.process(&mut y);
        let mut z = x.clone();
        one.process(&mut z);
        let mut one2 = Filter::new(&FilterParams::default(), 48_000).unwrap();
        // Two sections are the single section applied twice (to f32 rounding of the intermediate signal).
        let mut z64: Vec<f32> = z.clone();
        one2.process(&mut z64);
        let err = y.iter().zip(&z64).map(|(a, b)| (a - b).abs()).fold(0.0, f32::max);
        assert!(err < 1e-5, "{err}");
        f.reset();
        let mut y2 = x.clone();
        f.process(&mut y2);
        assert_eq!(y, y2);
        let mut nan = [f32::NAN, f32::INFINITY];
        f.process(&mut nan);
        assert!(nan.iter().all(|v| v.is_finite()));
    }
}
