//! The filter stage against SciPy (pinned in tests/python/requirements.txt).
//!
//! 1. Our coefficients equal the Audio EQ Cookbook design (R. Bristow-Johnson's published formulas, written out again
//!    in Python below) and, for the Butterworth case (Q = 1/√2), `scipy.signal.butter`'s bilinear design.
//! 2. The measured magnitude response of the stage (white noise in, Welch cross-spectrum ratio out, from
//!    `scipy.signal.welch`/`csd`) equals `scipy.signal.freqz` of the cookbook design within 0.1 dB up to 0.45·fs
//!    (where the response is above −30 dB and from the fourth bin up, where the Welch estimate is not dominated by
//!    window leakage or variance).

mod common;

use serde_json::{json, Value};
use stairstep::rng::Pcg32;
use stairstep::stages::filter::{Coefficients, Filter, FilterParams, Shape};
use stairstep::stages::Stage;

const PYTHON: &str = r#"
import json, sys
import numpy as np
from scipy import signal

def cookbook(shape, f0, q, gain_db, fs):
    # Audio EQ Cookbook (R. Bristow-Johnson), the published formulas.
    A = 10 ** (gain_db / 40)
    w0 = 2 * np.pi * f0 / fs
    c, s = np.cos(w0), np.sin(w0)
    al = s / (2 * q)
    if shape == "lowpass":
        b = [(1 - c) / 2, 1 - c, (1 - c) / 2]; a = [1 + al, -2 * c, 1 - al]
    elif shape == "highpass":
        b = [(1 + c) / 2, -(1 + c), (1 + c) / 2]; a = [1 + al, -2 * c, 1 - al]
    elif shape == "bandpass":
        b = [al, 0, -al]; a = [1 + al, -2 * c, 1 - al]
    elif shape == "peaking":
        b = [1 + al * A, -2 * c, 1 - al * A]; a = [1 + al / A, -2 * c, 1 - al / A]
    elif shape == "lowshelf":
        k = 2 * np.sqrt(A) * al
        b = [A * ((A + 1) - (A - 1) * c + k), 2 * A * ((A - 1) - (A + 1) * c), A * ((A + 1) - (A - 1) * c - k)]
        a = [(A + 1) + (A - 1) * c + k, -2 * ((A - 1) + (A + 1) * c), (A + 1) + (A - 1) * c - k]
    else:  # highshelf
        k = 2 * np.sqrt(A) * al
        b = [A * ((A + 1) + (A - 1) * c + k), -2 * A * ((A - 1) + (A + 1) * c), A * ((A + 1) + (A - 1) * c - k)]
        a = [(A + 1) - (A - 1) * c + k, 2 * ((A - 1) - (A + 1) * c), (A + 1) - (A - 1) * c - k]
    b, a = np.array(b) / a[0], np.array(a) / a[0]
    return b, a

out = []
for case in json.load(sys.stdin):
    fs = case["fs"]
    b, a = cookbook(case["shape"], case["f0"], case["q"], case["gain_db"], fs)
    bs, as_ = np.array([1.0]), np.array([1.0])
    for _ in range(case["sections"]):
        bs, as_ = np.convolve(bs, b), np.convolve(as_, a)
    x = np.array(case["x"], dtype=np.float64)
    y = np.array(case["y"], dtype=np.float64)
    f, pxx = signal.welch(x, fs=fs, nperseg=8192)
    _, pxy = signal.csd(x, y, fs=fs, nperseg=8192)
    measured = 20 * np.log10(np.abs(pxy / pxx))
    _, h = signal.freqz(bs, as_, worN=f, fs=fs)
    design = 20 * np.log10(np.abs(h))
    keep = (f >= 4 * f[1]) & (f <= 0.45 * fs) & (design > -30)
    worst = float(np.max(np.abs(measured[keep] - design[keep])))
    rec = {"coef_err": float(max(np.max(np.abs(np.array(case["b"]) - b)), np.max(np.abs(np.array(case["a"]) - a[1:])))),
           "worst_db": worst, "bins": int(keep.sum())}
    if case["shape"] in ("lowpass", "highpass") and abs(case["q"] - 2 ** -0.5) < 1e-12:
        bb, ab = signal.butter(2, case["f0"], btype=("low" if case["shape"] == "lowpass" else "high"), fs=fs)
        rec["butter_err"] = float(max(np.max(np.abs(bb - b)), np.max(np.abs(ab - a))))
    out.append(rec)
print(json.dumps(out))
"#;

#[test]
fn filter_matches_the_cookbook_and_scipy() {
    let mut rng = Pcg32::from_seed(17, 4);
    let x: Vec<f32> = (0..48_000 * 4).map(|_| (0.25 * rng.uniform_centered()) as f32).collect();
    let cases = [
        (Shape::Lowpass, 4_000.0, std::f64::consts::FRAC_1_SQRT_2, 0.0, 1, 48_000u32),
        (Shape::Lowpass, 2_500.0, std::f64::consts::FRAC_1_SQRT_2, 0.0, 2, 11_025),
        (Shape::Highpass, 600.0, std::f64::consts::FRAC_1_SQRT_2, 0.0, 1, 44_100),
        (Shape::Lowpass, 1_000.0, 4.0, 0.0, 1, 48_000),
        (Shape::Bandpass, 1_500.0, 2.0, 0.0, 1, 48_000),
        (Shape::Peaking, 3_000.0, 1.5, 9.0, 1, 48_000),
        (Shape::Lowshelf, 250.0, std::f64::consts::FRAC_1_SQRT_2, -10.0, 1, 48_000),
        (Shape::Highshelf, 6_000.0, std::f64::consts::FRAC_1_SQRT_2, 6.0, 1, 48_000),
    ];
    let mut input = Vec::new();
    for &(shape, f0, q, gain_db, sections, fs) in &cases {
        let p = FilterParams { shape, freq_hz: f0, q, gain_db, sections };
        let mut stage = Filter::new(&p, fs).unwrap();
        let c: Coefficients = stage.coefficients();
        let mut y = x.clone();
        stage.process(&mut y);
        let shape_name = serde_json::to_value(shape).unwrap();
        input.push(json!({"shape": shape_name, "f0": f0, "q": q, "gain_db": gain_db, "sections": sections, "fs": fs,
            "b": c.b, "a": c.a, "x": x, "y": y}));
    }
    let out = common::run_python(PYTHON, serde_json::to_string(&input).unwrap().as_bytes());
    let results: Vec<Value> = serde_json::from_slice(&out).unwrap();
    for (case, r) in cases.iter().zip(&results) {
        println!("{case:?}: {r}");
        assert!(r["coef_err"].as_f64().unwrap() < 1e-12, "{case:?}: coefficients {r}");
        assert!(r["worst_db"].as_f64().unwrap() < 0.1, "{case:?}: response {r}");
        assert!(r["bins"].as_u64().unwrap() > 100, "{case:?}: {r}");
        if let Some(e) = r.get("butter_err") {
            assert!(e.as_f64().unwrap() < 1e-12, "{case:?}: butter {r}");
        }
    }
}

/// In a chain the filter is designed at the rate where it runs: after an 11,025 Hz hold its corner must lie below
/// 5,512.5 Hz (the error names the stage and the Nyquist frequency), and a corner below it tames the hold's images.
#[test]
fn filter_after_a_hold_runs_at_the_export_rate() {
    let preset = |freq: f64| {
        stairstep::Preset::from_json(
            &json!({"format": "stairstep-preset", "version": 1, "stages": [
                {"kind": "rate", "rate_hz": 11025, "mode": "hold"},
                {"kind": "filter", "shape": "lowpass", "freq_hz": freq, "sections": 2}]})
            .to_string(),
        )
        .unwrap()
    };
    let tone = stairstep::demo::demo("tone").unwrap();
    let e = stairstep::render::render(&preset(6_000.0), &tone).unwrap_err().to_string();
    assert!(e.contains("stages[1].freq_hz") && e.contains("5512.5"), "{e}");
    let r = stairstep::render::render(&preset(4_000.0), &tone).unwrap();
    assert_eq!(r.report.export_rate, 11_025);
}
