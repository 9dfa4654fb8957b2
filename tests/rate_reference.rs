//! Clean-mode rate reduction against SciPy's polyphase resampler, `scipy.signal.resample_poly` (SciPy 1.15, pinned in
//! tests/python/requirements.txt).
//!
//! For each ratio, one-second tones of amplitude ½ go through [`stairstep::stages::rate::reduce`] (rubato's FFT resampler)
//! here and through `resample_poly` in Python, in two set-ups: SciPy's default filter (Kaiser window, β = 5, 10 taps
//! per phase) and a Kaiser FIR designed with `scipy.signal.kaiserord`/`firwin` for 100 dB rejection with the passband
//! ending at 0.875 of the new Nyquist frequency. Levels are the mean power of the middle 80 % of each output,
//! relative to the input tone, so a stopband figure includes every alias and artefact, not just one bin.

mod common;

use serde_json::{json, Value};
use stairstep::stages::rate::{reduce, RateParams};

/// (source rate, target rate, passband tones, stopband tones): passband up to 0.875 of the new Nyquist frequency;
/// stopband from 1.45 of it, where SciPy's default filter is out of its transition band, plus one tone just above
/// the new Nyquist frequency that only the designed filter and rubato are asked to reject.
const CASES: [(u32, u32, [f64; 3], [f64; 3]); 3] = [
    (48_000, 8_000, [500.0, 2_000.0, 3_500.0], [4_500.0, 6_000.0, 10_000.0]),
    (48_000, 7_300, [500.0, 2_000.0, 3_000.0], [4_500.0, 6_000.0, 10_000.0]),
    (44_100, 11_025, [500.0, 3_000.0, 4_800.0], [6_000.0, 8_000.0, 15_000.0]),
];

const PYTHON: &str = r#"
import json, sys
from math import gcd
import numpy as np
from scipy import signal

def level_db(y, a=0.5):
    e = len(y) // 10
    m = np.asarray(y[e:len(y) - e], dtype=np.float64)
    p = np.mean(m * m)
    return float(10 * np.log10(max(p, 1e-30) / (a * a / 2)))

out = []
for case in json.load(sys.stdin):
    fi, fo, f = case["fs_in"], case["fs_out"], case["f"]
    g = gcd(fi, fo)
    up, down = fo // g, fi // g
    nyq, fs_up = fo / 2, fi * up
    # Same tone as the Rust side: amplitude 0.5, one second, rounded to float32 like the Rust input.
    x = (0.5 * np.sin(2 * np.pi * f * np.arange(fi) / fi)).astype(np.float32).astype(np.float64)
    y_default = signal.resample_poly(x, up, down)
    numtaps, beta = signal.kaiserord(100.0, (nyq - 0.875 * nyq) / (fs_up / 2))
    h = signal.firwin(numtaps | 1, 0.9375 * nyq, window=("kaiser", beta), fs=fs_up)
    y_kaiser = signal.resample_poly(x, up, down, window=h)
    out.append({
        "fs_in": fi, "fs_out": fo, "f": f,
        "rust_db": level_db(case["y"]),
        "scipy_default_db": level_db(y_default),
        "scipy_kaiser100_db": level_db(y_kaiser),
        "len_scipy": len(y_default), "len_rust": len(case["y"]),
    })
print(json.dumps(out))
"#;

fn tone(fs: u32, f: f64) -> Vec<f32> {
    (0..fs as usize).map(|i| (0.5 * (2.0 * std::f64::consts::PI * f * i as f64 / fs as f64).sin()) as f32).collect()
}

#[test]
fn clean_mode_magnitude_response_agrees_with_scipy_resample_poly() {
    let mut cases = Vec::new();
    for (fi, fo, pass, stop) in CASES {
        for f in pass.into_iter().chain(stop) {
            let y = reduce(&RateParams::clean(fo), fi, &tone(fi, f)).unwrap();
            cases.push(json!({"fs_in": fi, "fs_out": fo, "f": f, "y": y}));
        }
    }
    let stdin = serde_json::to_vec(&cases).unwrap();
    let results: Vec<Value> = serde_json::from_slice(&common::run_python(PYTHON, &stdin)).unwrap();

    eprintln!("fs_in -> fs_out    tone Hz   stairstep dB   scipy default dB   scipy kaiser-100 dB");
    for r in &results {
        let (fi, fo, f) = (r["fs_in"].as_u64().unwrap(), r["fs_out"].as_u64().unwrap(), r["f"].as_f64().unwrap());
        let rust = r["rust_db"].as_f64().unwrap();
        let sp_default = r["scipy_default_db"].as_f64().unwrap();
        let sp_kaiser = r["scipy_kaiser100_db"].as_f64().unwrap();
        eprintln!("{fi:>6} -> {fo:<6} {f:>9.0} {rust:>14.3} {sp_default:>18.3} {sp_kaiser:>21.3}");
        // Same length convention as resample_poly: ceil(n·up/down) samples.
        assert_eq!(r["len_rust"], r["len_scipy"], "{fi}->{fo}");
        let nyq = fo as f64 / 2.0;
        if f < nyq {
            // Passband: all three within 1 dB of unity gain, and of each other.
            for (who, v) in [("stairstep", rust), ("scipy default", sp_default), ("scipy kaiser-100", sp_kaiser)] {
                assert!(v.abs() < 1.0, "{fi}->{fo}, {f} Hz: {who} passes at {v:.3} dB");
            }
            assert!((rust - sp_kaiser).abs() < 1.0 && (rust - sp_default).abs() < 1.0);
        } else {
            // Stopband: at least 60 dB down. SciPy's default filter is only asked to do so outside its transition
            // band (≥ 1.45 × the new Nyquist frequency); stairstep and the designed filter everywhere listed.
            assert!(rust < -60.0, "{fi}->{fo}, {f} Hz: stairstep leaks at {rust:.1} dB");
            assert!(sp_kaiser < -60.0, "{fi}->{fo}, {f} Hz: designed scipy filter leaks at {sp_kaiser:.1} dB");
            if f >= 1.45 * nyq {
                assert!(sp_default < -60.0, "{fi}->{fo}, {f} Hz: scipy default leaks at {sp_default:.1} dB");
            }
        }
    }
    assert_eq!(results.len(), CASES.len() * 6);
}
