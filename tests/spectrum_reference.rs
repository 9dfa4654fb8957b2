//! Welch spectra against numpy's FFT on the same windowed frames.
#![cfg(not(target_arch = "wasm32"))]

mod common;

use stairstep::analysis::{SpectrumAnalyzer, Window};

/// numpy.fft.rfft of the same frames (hop N/2), windows from scipy.signal.get_window (periodic), powers averaged,
/// scaled so a bin-centred full-scale sine reads 0 dB: must agree with the core within 0.01 dB wherever the level is
/// above −200 dBFS.
#[test]
fn welch_spectrum_matches_numpy() {
    let mut rng = stairstep::rng::Pcg32::from_seed(3, 1);
    let n = 10_000;
    let x: Vec<f32> = (0..n)
        .map(|i| {
            let t = i as f64;
            (0.5 * (0.031 * t).sin() + 0.25 * (1.7 * t).cos() + 0.01 * rng.uniform_centered()) as f32
        })
        .collect();
    let bytes: Vec<u8> = x.iter().flat_map(|v| v.to_le_bytes()).collect();
    for (window, name) in
        [(Window::Hann, "hann"), (Window::BlackmanHarris, "blackmanharris"), (Window::Rectangular, "boxcar")]
    {
        for size in [256usize, 1024, 4096] {
            let code = format!(
                "import sys, numpy as np, scipy.signal as ss\n\
                 x = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4').astype(np.float64)\n\
                 N = {size}; w = ss.get_window('{name}', N)\n\
                 starts = range(0, len(x) - N + 1, N // 2)\n\
                 p = np.mean([np.abs(np.fft.rfft(x[s:s+N] * w)) ** 2 for s in starts], axis=0)\n\
                 scale = np.full(N // 2 + 1, 2.0 / w.sum()); scale[0] = scale[-1] = 1.0 / w.sum()\n\
                 db = 10 * np.log10(np.maximum(p * scale ** 2, 1e-300))\n\
                 sys.stdout.buffer.write(db.astype('<f8').tobytes())"
            );
            let want: Vec<f64> = common::run_python(&code, &bytes)
                .chunks_exact(8)
                .map(|b| f64::from_le_bytes(b.try_into().unwrap()))
                .collect();
            let got = SpectrumAnalyzer::new(size, window).unwrap().analyze(&[&x[..]]);
            assert_eq!(got.len(), want.len());
            let mut worst = 0f64;
            for (k, (&g, &w)) in got.iter().zip(&want).enumerate() {
                if w > -200.0 {
                    let d = (g as f64 - w).abs();
                    worst = worst.max(d);
                    assert!(d < 0.01, "{name} N={size} bin {k}: core {g} dB, numpy {w} dB");
                }
            }
            eprintln!("spectrum {name} N={size}: largest difference from numpy {worst:.2e} dB");
        }
    }
}
