//! Dither generators and error-feedback noise shaping, used by the uniform quantizer.
//!
//! All amounts are in LSB (one quantizer step). The generators draw from the seeded [`Pcg32`], so the same seed gives
//! the same noise on every platform.
//!
//! | kind | distribution | standard peak amplitude | error variance added |
//! |---|---|---|---|
//! | `rpdf` | uniform | ±0.5 LSB | (2A)²/12 |
//! | `tpdf` | triangular (sum of two uniforms) | ±1 LSB | A²/6 |
//! | `highpass-tpdf` | triangular, first difference of one uniform stream (spectrum tilted up, 6 dB/oct) | ±1 LSB | A²/6 |
//!
//! TPDF at ±1 LSB makes the mean and the variance of the total error independent of the signal (Lipshitz,
//! Wannamaker & Vanderkooy, "Quantization and Dither: A Theoretical Survey", JAES 40(5), 1992); the price is total
//! error power 3·Δ²/12, 4.77 dB above undithered rounding.

use crate::error::{Range, Result};
use crate::rng::Pcg32;
use serde::{Deserialize, Serialize};

/// Which dither to add before rounding.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum DitherKind {
    /// No dither: plain rounding, error correlated with the signal (audible as distortion on quiet tones).
    #[default]
    None,
    /// Rectangular (uniform) PDF.
    Rpdf,
    /// Triangular PDF: the usual choice.
    Tpdf,
    /// Triangular PDF with a high-pass spectrum: less audible noise for the same power.
    HighpassTpdf,
}

impl DitherKind {
    /// The standard peak amplitude in LSB for this kind (used when no amplitude is given).
    pub fn standard_peak_lsb(self) -> f64 {
        match self {
            DitherKind::None => 0.0,
            DitherKind::Rpdf => 0.5,
            DitherKind::Tpdf | DitherKind::HighpassTpdf => 1.0,
        }
    }

    /// Variance in LSB² of the dither with peak amplitude `peak`.
    pub fn variance_lsb2(self, peak: f64) -> f64 {
        match self {
            DitherKind::None => 0.0,
            DitherKind::Rpdf => (2.0 * peak) * (2.0 * peak) / 12.0,
            DitherKind::Tpdf | DitherKind::HighpassTpdf => peak * peak / 6.0,
        }
    }
}

/// A dither source for one channel.
#[derive(Debug, Clone)]
pub struct Dither {
    kind: DitherKind,
    peak: f64,
    seed: u64,
    stream: u64,
    rng: Pcg32,
    prev: f64,
}

/// Allowed dither peak amplitude, in LSB.
pub const PEAK_LSB: Range = Range::new(0.0, 16.0);

impl Dither {
    /// New source. `peak_lsb`: peak amplitude in LSB, 0 to 16 (`None` = the kind's standard amplitude).
    pub fn new(kind: DitherKind, peak_lsb: Option<f64>, seed: u64, stream: u64) -> Result<Self> {
        let peak = peak_lsb.unwrap_or(kind.standard_peak_lsb());
        PEAK_LSB.check_f("dither_peak_lsb", peak, " LSB")?;
        let rng = Pcg32::from_seed(seed, stream);
        let mut d = Dither { kind, peak, seed, stream, rng, prev: 0.0 };
        d.reset();
        Ok(d)
    }

    /// Peak amplitude in LSB.
    pub fn peak_lsb(&self) -> f64 {
        self.peak
    }

    /// Kind of dither.
    pub fn kind(&self) -> DitherKind {
        self.kind
    }

    /// Next dither value in LSB.
    #[inline]
    pub fn sample(&mut self) -> f64 {
        match self.kind {
            DitherKind::None => 0.0,
            DitherKind::Rpdf => 2.0 * self.peak * self.rng.uniform_centered(),
            DitherKind::Tpdf => {
                let (a, b) = self.rng.uniform_centered_pair();
                self.peak * (a + b)
            }
            DitherKind::HighpassTpdf => {
                let u = self.rng.uniform_centered();
                let d = self.peak * (u - self.prev);
                self.prev = u;
                d
            }
        }
    }

    /// Fills `out` with the next `out.len()` dither values, exactly as that many [`sample`](Self::sample) calls
    /// would: one tight loop per kind, with nothing but the generator in it.
    pub fn fill(&mut self, out: &mut [f64]) {
        let peak = self.peak;
        match self.kind {
            DitherKind::None => out.fill(0.0),
            DitherKind::Rpdf => out.iter_mut().for_each(|d| *d = 2.0 * peak * self.rng.uniform_centered()),
            DitherKind::Tpdf => out.iter_mut().for_each(|d| {
                let (a, b) = self.rng.uniform_centered_pair();
                *d = peak * (a + b);
            }),
            DitherKind::HighpassTpdf => {
                let mut prev = self.prev;
                for d in out.iter_mut() {
                    let u = self.rng.uniform_centered();
                    *d = peak * (u - prev);
                    prev = u;
                }
                self.prev = prev;
            }
        }
    }

    /// Restarts the stream from the seed.
    pub fn reset(&mut self) {
        self.rng = Pcg32::from_seed(self.seed, self.stream);
        self.prev = if self.kind == DitherKind::HighpassTpdf { self.rng.uniform_centered() } else { 0.0 };
    }
}

/// Error-feedback noise-shaping curves.
///
/// The quantizer subtracts `Σ h[k]·e[n−k]` from its input, where `e` is its own past error; the total error then has
/// the spectrum of white noise times `|1 − Σ h[k] z^−k|²` (the noise transfer function).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Shaping {
    /// No shaping: flat error spectrum.
    #[default]
    None,
    /// First order, `h = [1]`: NTF = 1 − z⁻¹, +6 dB/octave, zero at DC (textbook error feedback).
    FirstOrder,
    /// Second order, `h = [2, −1]`: NTF = (1 − z⁻¹)², +12 dB/octave.
    SecondOrder,
    /// Five-tap E-weighted curve for 44.1 kHz from Lipshitz, Vanderkooy & Wannamaker, "Minimally Audible Noise
    /// Shaping", JAES 39(11), 1991 (coefficients as commonly reproduced from that paper; recalled from memory).
    Ewt5,
    /// Nine-tap E-weighted curve from the same paper (coefficients recalled from memory).
    Ewt9,
}

impl Shaping {
    /// The feedback coefficients `h[1..]`.
    pub fn coefficients(self) -> &'static [f64] {
        match self {
            Shaping::None => &[],
            Shaping::FirstOrder => &[1.0],
            Shaping::SecondOrder => &[2.0, -1.0],
            Shaping::Ewt5 => &[2.033, -2.165, 1.959, -1.590, 0.6149],
            Shaping::Ewt9 => &[2.412, -3.370, 3.937, -4.174, 3.353, -2.205, 1.281, -0.569, 0.0847],
        }
    }

    /// Power gain of the noise transfer function for white input error, `1 + Σ h[k]²`.
    pub fn power_gain(self) -> f64 {
        1.0 + self.coefficients().iter().map(|h| h * h).sum::<f64>()
    }

    /// `|NTF(e^{jω})|²` at normalised frequency `f` (cycles per sample, 0 to 0.5).
    pub fn ntf_power(self, f: f64) -> f64 {
        let w = 2.0 * std::f64::consts::PI * f;
        let (mut re, mut im) = (1.0, 0.0);
        for (k, h) in self.coefficients().iter().enumerate() {
            let a = w * (k + 1) as f64;
            re -= h * a.cos();
            im += h * a.sin();
        }
        re * re + im * im
    }
}

/// State of an error-feedback loop (one channel). Holds at most nine past errors; never allocates.
#[derive(Debug, Clone)]
pub struct NoiseShaper {
    coeffs: &'static [f64],
    hist: [f64; 9],
    /// Largest error magnitude fed back, in LSB; keeps the loop stable when the quantizer overloads.
    limit: f64,
}

impl NoiseShaper {
    /// New loop for `shaping`; `limit_lsb` bounds the error fed back.
    pub fn new(shaping: Shaping, limit_lsb: f64) -> Self {
        NoiseShaper { coeffs: shaping.coefficients(), hist: [0.0; 9], limit: limit_lsb }
    }

    /// `Σ h[k]·e[n−k]`, the amount to subtract from the next input.
    #[inline]
    pub fn feedback(&self) -> f64 {
        let mut acc = 0.0;
        for (h, e) in self.coeffs.iter().zip(self.hist.iter()) {
            acc += h * e;
        }
        acc
    }

    /// Records the newest error `e[n] = q[n] − v[n]`.
    #[inline]
    pub fn push(&mut self, e: f64) {
        if self.coeffs.is_empty() {
            return;
        }
        let e = e.clamp(-self.limit, self.limit);
        self.hist.copy_within(0..8, 1);
        self.hist[0] = e;
    }

    /// Whether this loop does anything.
    pub fn is_active(&self) -> bool {
        !self.coeffs.is_empty()
    }

    /// Clears the error history.
    pub fn reset(&mut self) {
        self.hist = [0.0; 9];
    }
}

/// Validates a dither kind/amplitude pair without building a source.
pub fn validate(kind: DitherKind, peak_lsb: Option<f64>) -> Result<()> {
    Dither::new(kind, peak_lsb, 0, 0).map(|_| ())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn stats(kind: DitherKind) -> (f64, f64, f64, f64) {
        let mut d = Dither::new(kind, None, 7, 0).unwrap();
        let n = 400_000;
        let (mut s, mut s2, mut lo, mut hi) = (0.0, 0.0, f64::MAX, f64::MIN);
        for _ in 0..n {
            let v = d.sample();
            s += v;
            s2 += v * v;
            lo = lo.min(v);
            hi = hi.max(v);
        }
        let mean = s / n as f64;
        (mean, s2 / n as f64 - mean * mean, lo, hi)
    }

    /// Variances of uniform and triangular densities (handbook formulas: uniform of width w has variance w²/12).
    #[test]
    fn dither_moments_match_their_densities() {
        for kind in [DitherKind::Rpdf, DitherKind::Tpdf, DitherKind::HighpassTpdf] {
            let (mean, var, lo, hi) = stats(kind);
            let peak = kind.standard_peak_lsb();
            let want = kind.variance_lsb2(peak);
            assert!(mean.abs() < 0.003, "{kind:?} mean {mean}");
            assert!((var / want - 1.0).abs() < 0.01, "{kind:?} var {var} want {want}");
            assert!(lo >= -peak && hi <= peak, "{kind:?} range {lo}..{hi}");
            assert!(lo < -0.95 * peak && hi > 0.95 * peak, "{kind:?} does not reach its peak");
        }
    }

    #[test]
    fn reset_replays_the_same_stream() {
        let mut d = Dither::new(DitherKind::HighpassTpdf, Some(0.7), 99, 3).unwrap();
        let a: Vec<f64> = (0..100).map(|_| d.sample()).collect();
        d.reset();
        let b: Vec<f64> = (0..100).map(|_| d.sample()).collect();
        assert_eq!(a, b);
    }

    #[test]
    fn bad_amplitude_is_an_error_naming_the_parameter() {
        let e = Dither::new(DitherKind::Tpdf, Some(-1.0), 0, 0).unwrap_err();
        assert!(e.to_string().contains("dither_peak_lsb"), "{e}");
        assert!(Dither::new(DitherKind::Tpdf, Some(f64::NAN), 0, 0).is_err());
    }

    #[test]
    fn first_order_ntf_has_a_zero_at_dc_and_gain_four_at_nyquist() {
        // |1 - e^{-jω}|² = 2 - 2cos ω: 0 at DC, 4 at Nyquist (handbook identity).
        assert!(Shaping::FirstOrder.ntf_power(0.0) < 1e-12);
        assert!((Shaping::FirstOrder.ntf_power(0.5) - 4.0).abs() < 1e-9);
        assert!((Shaping::None.ntf_power(0.3) - 1.0).abs() < 1e-12);
    }
}
