//! Welch-averaged magnitude spectra in dBFS, planned once with realfft (a real-input FFT on top of rustfft).
//!
//! # Normalisation
//! Each frame is windowed and transformed; bin powers are averaged over frames (50 % overlap) and over channels. A bin
//! reads `20·log10(2·|X[k]| / Σw)`, so a full-scale sine centred on bin `k` reads 0 dBFS there whatever the window
//! (DC and Nyquist use `|X[k]| / Σw`). Bin `k` is at `k · sample_rate / fft_size` Hz, for `k = 0 … fft_size/2`.
//! Broadband noise reads lower as the FFT grows (each bin holds less of its power): compare noise between spectra of
//! the same size and window only.

use crate::db::{power_db, FLOOR_DB};
use crate::error::{Error, Result};
use realfft::{num_complex::Complex, RealFftPlanner, RealToComplex};
use serde::{Deserialize, Serialize};
use std::sync::Arc;

/// Analysis window.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Window {
    /// Hann (raised cosine): a good general choice.
    #[default]
    Hann,
    /// 4-term Blackman–Harris: low leakage (−92 dB side lobes), for measuring quiet error floors next to loud tones.
    BlackmanHarris,
    /// No window: exact for bin-centred tones, heavy leakage otherwise.
    Rectangular,
}

impl Window {
    /// Window coefficient `i` of `n` (periodic form, as used for spectral analysis).
    pub fn coefficient(self, i: usize, n: usize) -> f64 {
        let x = 2.0 * std::f64::consts::PI * i as f64 / n as f64;
        match self {
            Window::Hann => 0.5 - 0.5 * x.cos(),
            Window::BlackmanHarris => {
                0.35875 - 0.48829 * x.cos() + 0.14128 * (2.0 * x).cos() - 0.01168 * (3.0 * x).cos()
            }
            Window::Rectangular => 1.0,
        }
    }
}

/// Smallest and largest FFT sizes accepted (powers of two).
pub const FFT_SIZES: std::ops::RangeInclusive<usize> = 64..=65536;

/// A planned Welch analyser for one FFT size and window. Reusable; allocates only at construction.
pub struct SpectrumAnalyzer {
    size: usize,
    window: Window,
    coeffs: Vec<f32>,
    norm: f64,
    fft: Arc<dyn RealToComplex<f32>>,
    max_frames: usize,
    frame: Vec<f32>,
    bins: Vec<Complex<f32>>,
    scratch: Vec<Complex<f32>>,
    acc: Vec<f64>,
}

impl std::fmt::Debug for SpectrumAnalyzer {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SpectrumAnalyzer").field("size", &self.size).field("window", &self.window).finish()
    }
}

impl SpectrumAnalyzer {
    /// Plans an analyser. `size`: a power of two from 64 to 65,536 (4096 is a good default at 44.1/48 kHz).
    pub fn new(size: usize, window: Window) -> Result<Self> {
        if !size.is_power_of_two() || !FFT_SIZES.contains(&size) {
            return Err(Error::param("fft_size", size, "a power of two from 64 to 65536"));
        }
        let coeffs: Vec<f32> = (0..size).map(|i| window.coefficient(i, size) as f32).collect();
        let sum: f64 = coeffs.iter().map(|&w| w as f64).sum();
        // A real-input FFT (realfft: a half-length complex FFT plus a twiddle pass), half the work of a complex one.
        let fft = RealFftPlanner::<f32>::new().plan_fft_forward(size);
        let (frame, bins, scratch) = (fft.make_input_vec(), fft.make_output_vec(), fft.make_scratch_vec());
        Ok(SpectrumAnalyzer {
            size,
            window,
            coeffs,
            norm: 1.0 / sum,
            fft,
            max_frames: usize::MAX,
            frame,
            bins,
            scratch,
            acc: vec![0.0; size / 2 + 1],
        })
    }

    /// Averages at most `n` frames per channel (at least 1): a longer signal is represented by `n` frames spread
    /// evenly over it instead of every frame, which bounds the cost of a spectrum of a long sound (the page uses 256).
    pub fn with_max_frames(mut self, n: usize) -> Self {
        self.max_frames = n.max(1);
        self
    }

    /// FFT size.
    pub fn size(&self) -> usize {
        self.size
    }

    /// Window.
    pub fn window(&self) -> Window {
        self.window
    }

    /// Number of output bins, `size/2 + 1`.
    pub fn bins(&self) -> usize {
        self.size / 2 + 1
    }

    /// Frequency of bin `k` in Hz.
    pub fn bin_hz(&self, k: usize, sample_rate: u32) -> f64 {
        k as f64 * sample_rate as f64 / self.size as f64
    }

    /// Frame start positions for a signal of `len` samples: hop `size/2`; a signal shorter than one frame is one
    /// zero-padded frame.
    fn frame_starts(&self, len: usize) -> impl Iterator<Item = usize> {
        let hop = self.size / 2;
        let count = if len <= self.size { 1 } else { (len - self.size) / hop + 1 };
        let take = count.min(self.max_frames);
        // Every frame, or `max_frames` of them spread evenly (frame indices k·count/take).
        (0..take).map(move |k| (k * count / take) * hop)
    }

    /// Welch spectrum of several channels (powers averaged over frames and channels), in dBFS, written to `out`
    /// (length [`bins`](Self::bins)). Non-finite samples count as 0.
    ///
    /// # Panics
    /// If `out.len() != self.bins()`.
    pub fn analyze_into<C: AsRef<[f32]>>(&mut self, channels: &[C], out: &mut [f32]) {
        assert_eq!(out.len(), self.bins(), "output length must be fft_size/2 + 1");
        self.acc.iter_mut().for_each(|a| *a = 0.0);
        let mut frames = 0usize;
        for ch in channels {
            let x = ch.as_ref();
            for start in self.frame_starts(x.len()) {
                // The frame, zero-padded past the end of the signal.
                let avail = &x[start.min(x.len())..(start + self.size).min(x.len())];
                for ((f, &s), &w) in self.frame.iter_mut().zip(avail).zip(&self.coeffs) {
                    *f = if s.is_finite() { s } else { 0.0 } * w;
                }
                self.frame[avail.len()..].fill(0.0);
                // The buffers come from the plan itself, so their lengths always match (the only error it reports).
                self.fft.process_with_scratch(&mut self.frame, &mut self.bins, &mut self.scratch).ok();
                for (a, b) in self.acc.iter_mut().zip(&self.bins) {
                    *a += b.norm_sqr() as f64;
                }
                frames += 1;
            }
        }
        let last = self.bins() - 1;
        for (k, (o, &a)) in out.iter_mut().zip(&self.acc).enumerate() {
            let scale = if k == 0 || k == last { self.norm } else { 2.0 * self.norm };
            let p = if frames > 0 { a / frames as f64 } else { 0.0 };
            *o = power_db(p * scale * scale).max(FLOOR_DB) as f32;
        }
    }

    /// Allocating form of [`analyze_into`](Self::analyze_into).
    pub fn analyze<C: AsRef<[f32]>>(&mut self, channels: &[C]) -> Vec<f32> {
        let mut out = vec![0.0; self.bins()];
        self.analyze_into(channels, &mut out);
        out
    }
}

/// Index and level of the strongest bin.
pub fn peak_bin(spectrum: &[f32]) -> (usize, f32) {
    spectrum.iter().copied().enumerate().fold((0, f32::MIN), |b, (i, v)| if v > b.1 { (i, v) } else { b })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tone(n: usize, cycles_per_sample: f64, a: f64) -> Vec<f32> {
        (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * cycles_per_sample * i as f64).cos()) as f32).collect()
    }

    #[test]
    fn bin_centred_full_scale_sine_reads_zero_dbfs_in_every_window() {
        for w in [Window::Hann, Window::BlackmanHarris, Window::Rectangular] {
            let mut a = SpectrumAnalyzer::new(1024, w).unwrap();
            let s = a.analyze(&[tone(8192, 100.0 / 1024.0, 1.0)]);
            let (k, v) = peak_bin(&s);
            assert_eq!(k, 100, "{w:?}");
            assert!(v.abs() < 0.01, "{w:?}: {v}");
        }
    }

    #[test]
    fn minus_twenty_db_sine_reads_minus_twenty() {
        let mut a = SpectrumAnalyzer::new(4096, Window::Hann).unwrap();
        let s = a.analyze(&[tone(48_000, 512.0 / 4096.0, 0.1)]);
        assert!((s[512] + 20.0).abs() < 0.01, "{}", s[512]);
    }

    #[test]
    fn a_frame_limit_keeps_the_level_of_a_steady_tone() {
        let x = tone(200_000, 100.0 / 1024.0, 0.5);
        let all = SpectrumAnalyzer::new(1024, Window::Hann).unwrap().analyze(&[&x[..]]);
        let some = SpectrumAnalyzer::new(1024, Window::Hann).unwrap().with_max_frames(16).analyze(&[&x[..]]);
        assert!((all[100] - some[100]).abs() < 0.01);
    }

    #[test]
    fn rejects_bad_sizes_and_handles_short_input() {
        assert!(SpectrumAnalyzer::new(1000, Window::Hann).is_err());
        assert!(SpectrumAnalyzer::new(32, Window::Hann).is_err());
        let mut a = SpectrumAnalyzer::new(64, Window::Hann).unwrap();
        let s = a.analyze(&[vec![0.5f32]]);
        assert!(s.iter().all(|v| v.is_finite()));
        let s = a.analyze::<Vec<f32>>(&[vec![]]);
        assert!(s.iter().all(|&v| v == FLOOR_DB as f32));
    }
}
