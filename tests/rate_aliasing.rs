//! Rate reduction seen in the spectrum: what sampling theory predicts for aliasing (hold mode) and what a
//! band-limited converter must remove (clean mode). Moved from the rate stage's unit tests so the stage does not depend
//! on the analysis layer above it.

use stairstep::analysis::spectrum::peak_bin;
use stairstep::analysis::{SpectrumAnalyzer, Window};
use stairstep::db::power_db;
use stairstep::stages::rate::{reduce, round_trip, RateParams};

fn sine(n: usize, f: f64, fs: u32, a: f64) -> Vec<f32> {
    (0..n).map(|i| (a * (2.0 * std::f64::consts::PI * f * i as f64 / fs as f64).sin()) as f32).collect()
}

/// Mean power of `x` in dB relative to a sine of amplitude `a` (so a sine of amplitude `a` reads 0 dB).
fn level_re(x: &[f32], a: f64) -> f64 {
    let p = x.iter().map(|&v| (v as f64) * (v as f64)).sum::<f64>() / x.len() as f64;
    power_db(p / (a * a / 2.0))
}

// Handbook (sampling theorem, aliasing): a tone at f above the new Nyquist frequency folds to |f − k·fs|; 5 kHz
// sampled at 8 kHz appears at |5 − 8| = 3 kHz.
#[test]
fn held_5_khz_tone_folds_to_3_khz() {
    let x = sine(96_000, 5_000.0, 48_000, 0.5);
    let y = reduce(&RateParams::hold(8_000), 48_000, &x).unwrap();
    let mut a = SpectrumAnalyzer::new(4096, Window::BlackmanHarris).unwrap();
    let s = a.analyze(&[&y]);
    let (k, v) = peak_bin(&s);
    assert_eq!(a.bin_hz(k, 8_000), 3_000.0);
    // Held samples are exact samples of the tone: the alias keeps the full level (−6.02 dBFS for amplitude ½).
    assert!((v as f64 - power_db(0.25)).abs() < 0.05, "{v}");
    // The same seen at 48 kHz after the sample-and-hold: below 4 kHz the strongest component is at 3 kHz.
    let rt = round_trip(&RateParams::hold(8_000), 48_000, &x).unwrap();
    let mut a = SpectrumAnalyzer::new(8192, Window::BlackmanHarris).unwrap();
    let s = a.analyze(&[&rt]);
    let below_4k = (4_000 * 8192 / 48_000) as usize;
    let (k, _) = peak_bin(&s[..below_4k]);
    assert_eq!(a.bin_hz(k, 48_000), 3_000.0);
}

// Handbook (sampling theorem): a band-limited reduction must remove what lies above the new Nyquist frequency
// before sampling, so the 5 kHz tone must not come out (as its 3 kHz alias or anything else), while a 1 kHz tone
// passes. Thresholds from the task: alias ≥ 60 dB down, passband within 0.5 dB.
#[test]
fn clean_mode_rejects_the_alias_and_passes_the_passband() {
    let p = RateParams::clean(8_000);
    let edge = 1024; // reduced samples at each end: the onset and end of the tone are not steady state
    let mut a = SpectrumAnalyzer::new(4096, Window::BlackmanHarris).unwrap();
    let input_db = power_db(0.25); // a sine of amplitude ½ reads −6.02 dBFS
    let x = sine(96_000, 5_000.0, 48_000, 0.5);
    let y = reduce(&p, 48_000, &x).unwrap();
    let mid = &y[edge..y.len() - edge];
    let s = a.analyze(&[mid]);
    let worst = s.iter().fold(f32::MIN, |m, &v| m.max(v)) as f64 - input_db;
    assert!(worst < -60.0, "strongest component {worst:.1} dB re input");
    let at_3k = s[1536] as f64 - input_db;
    assert!(at_3k < -60.0, "alias at 3 kHz {at_3k:.1} dB");
    assert!(level_re(mid, 0.5) < -60.0);
    let x = sine(96_000, 1_000.0, 48_000, 0.5);
    let y = reduce(&p, 48_000, &x).unwrap();
    let s = a.analyze(&[&y[edge..y.len() - edge]]);
    let (k, v) = peak_bin(&s);
    assert_eq!(a.bin_hz(k, 8_000), 1_000.0);
    assert!((v as f64 - input_db).abs() < 0.5, "1 kHz at {v} dBFS");
    // And the round trip at 48 kHz: 1 kHz comes back at the same level.
    let rt = round_trip(&p, 48_000, &x).unwrap();
    let g = level_re(&rt[6_000..rt.len() - 6_000], 0.5);
    assert!(g.abs() < 0.01, "round-trip gain {g} dB");
}

// The same two properties at several ratios, measured as total power (the output of a stopband tone is all
// alias and error): passband up to 0.85 × the new Nyquist frequency within 0.1 dB, tones from 1.1 × it up
// rejected by at least 60 dB.
#[test]
fn clean_mode_passband_and_stopband_at_several_ratios() {
    for (fi, fo) in [(48_000u32, 8_000u32), (44_100, 11_025), (48_000, 7_300), (44_100, 22_050), (48_000, 44_100)] {
        let p = RateParams::clean(fo);
        let nyq = fo as f64 / 2.0;
        let n = fi as usize; // one second
        let edge = fo as usize / 10;
        for rel in [0.1, 0.5, 0.85] {
            let y = reduce(&p, fi, &sine(n, rel * nyq, fi, 0.5)).unwrap();
            let g = level_re(&y[edge..y.len() - edge], 0.5);
            assert!(g.abs() < 0.1, "{fi}->{fo}: {} Hz passes at {g:.3} dB", rel * nyq);
        }
        for rel in [1.1, 1.5, 2.5] {
            let f = rel * nyq;
            if f >= fi as f64 / 2.0 {
                continue;
            }
            let y = reduce(&p, fi, &sine(n, f, fi, 0.5)).unwrap();
            let g = level_re(&y[edge..y.len() - edge], 0.5);
            assert!(g < -60.0, "{fi}->{fo}: {f} Hz leaks at {g:.1} dB");
        }
    }
}
