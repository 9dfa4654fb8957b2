//! Frequency weighting A (IEC 61672-1), for A-weighted signal-to-noise figures.
//!
//! The weighting is applied in the frequency domain, with the standard's analytic magnitude response: one real FFT
//! of the whole signal (zero-padded by at least 100 ms, so the tail of the weighting's impulse response does not
//! wrap around onto the start), each bin's power multiplied by `|A(f)|²` at the bin's frequency, summed (Parseval).
//! There is no bilinear-transform warping, so the response is the analytic one right up to the Nyquist frequency at
//! every sample rate; the filter is zero-phase, which changes nothing for a power figure. Memory and time are those
//! of one FFT of the signal's length (fine for sound assets; an hour of audio would need a block-wise variant).

use realfft::RealFftPlanner;

/// The pole frequencies of IEC 61672-1 Annex E (E.2 to E.4), in Hz: f1, f2, f3, f4.
const F1: f64 = 20.598_997;
const F2: f64 = 107.652_65;
const F3: f64 = 737.862_23;
const F4: f64 = 12_194.217;
/// A1000: the normalisation constant of IEC 61672-1 Annex E (E.6), so that the response is 0 dB at 1 kHz.
const A1000_DB: f64 = -2.000;

/// Squared magnitude of the A-weighting at `f` Hz (a power ratio; 1.0 at 1 kHz), from IEC 61672-1 Annex E,
/// equation E.6. `f ≤ 0` gives 0.
pub fn a_weighting_power(f: f64) -> f64 {
    if f <= 0.0 {
        return 0.0;
    }
    let f2 = f * f;
    let r = (F4 * F4 * f2 * f2) / ((f2 + F1 * F1) * ((f2 + F2 * F2) * (f2 + F3 * F3)).sqrt() * (f2 + F4 * F4));
    r * r * 10f64.powf(-A1000_DB / 10.0)
}

/// The A-weighting at `f` Hz in dB (0 dB at 1 kHz).
pub fn a_weighting_db(f: f64) -> f64 {
    crate::db::power_db(a_weighting_power(f))
}

/// The smallest `2^a·3^b·5^c` at or above `n`: sizes rustfft handles fastest.
fn smooth_size(n: usize) -> usize {
    let mut best = n.next_power_of_two();
    let mut p5 = 1usize;
    while p5 < best {
        let mut p35 = p5;
        while p35 < best {
            let mut m = p35;
            while m < n {
                m *= 2;
            }
            best = best.min(m);
            p35 *= 3;
        }
        p5 *= 5;
    }
    best
}

/// Sum of squares of `x` after A-weighting at `sample_rate` Hz (the weighted signal's energy, in squared full-scale
/// units). Divide by `x.len()` for the mean square. Empty or silent input gives 0.
pub fn a_weighted_energy(x: &[f32], sample_rate: u32) -> f64 {
    if x.is_empty() || sample_rate == 0 {
        return 0.0;
    }
    let n = smooth_size(x.len() + (sample_rate as usize / 10).max(1));
    // Single precision, as every other spectrum in the core (one FFT library build in the page, not two: a second,
    // double-precision one would add ~80 kB gzipped to the wasm); the bin powers are weighted and summed in f64. The
    // transform's rounding is relative to the signal's own norm (~1e-6 here), far below a dB figure's last digit.
    let mut planner = RealFftPlanner::<f32>::new();
    let fft = planner.plan_fft_forward(n);
    let mut input = fft.make_input_vec();
    for (d, &s) in input.iter_mut().zip(x) {
        *d = if s.is_finite() { s } else { 0.0 };
    }
    let mut spectrum = fft.make_output_vec();
    if fft.process(&mut input, &mut spectrum).is_err() {
        return 0.0;
    }
    let bin_hz = sample_rate as f64 / n as f64;
    let energy: f64 = spectrum
        .iter()
        .enumerate()
        .map(|(k, c)| {
            // One-sided spectrum: every bin but DC and (for even n) Nyquist stands for two.
            let twice = if k == 0 || (n.is_multiple_of(2) && k == n / 2) { 1.0 } else { 2.0 };
            twice * (c.re as f64 * c.re as f64 + c.im as f64 * c.im as f64) * a_weighting_power(k as f64 * bin_hz)
        })
        .sum();
    energy / n as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn smooth_sizes() {
        assert_eq!(smooth_size(1), 1);
        assert_eq!(smooth_size(7), 8);
        assert_eq!(smooth_size(1000), 1000);
        assert_eq!(smooth_size(1001), 1024);
        assert_eq!(smooth_size(4801), 4860);
    }

    #[test]
    fn parseval_without_weighting_at_1khz() {
        // A 1 kHz sine has A = 0 dB, so its weighted energy is its energy (an integer number of cycles: no leakage
        // onto the neighbouring bins, where the weighting is not exactly 0 dB).
        let x: Vec<f32> =
            (0..48_000).map(|i| (2.0 * std::f64::consts::PI * 1000.0 * i as f64 / 48_000.0).sin() as f32).collect();
        let plain: f64 = x.iter().map(|&s| s as f64 * s as f64).sum();
        let ratio = a_weighted_energy(&x, 48_000) / plain;
        assert!((10.0 * ratio.log10()).abs() < 0.01, "{ratio}");
    }
}
