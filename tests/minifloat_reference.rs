//! The minifloat quantizer against the outside world: with 5 exponent and 10 mantissa bits (IEEE 754 binary16) it
//! must round exactly like numpy's float32 → float16 conversion (`astype(np.float16)`, round to nearest even,
//! subnormals included), with the stage's scaling of 1/65536 and saturation where numpy gives ±inf.
mod common;

use stairstep::rng::Pcg32;
use stairstep::stages::minifloat::{Minifloat, MinifloatParams};

/// Seeded inputs: uniform around full scale, log-uniform magnitudes down to 2^−40, and arbitrary finite bit patterns.
fn random_inputs() -> Vec<f32> {
    let mut rng = Pcg32::from_seed(2024, 0);
    let mut xs = Vec::new();
    for _ in 0..100_000 {
        xs.push((2.2 * rng.uniform_centered()) as f32);
    }
    for _ in 0..100_000 {
        let m = (-41.0 * (rng.uniform_centered() + 0.5) + 1.0).exp2();
        xs.push(if rng.next_u32() & 1 == 0 { m } else { -m } as f32);
    }
    while xs.len() < 250_000 {
        let x = f32::from_bits(rng.next_u32());
        if x.is_finite() {
            xs.push(x);
        }
    }
    xs
}

// Source: numpy `ndarray.astype(np.float16)` (numpy's float32 → binary16 conversion, round half to even).
// The Python side appends its own edge inputs: every finite binary16 value, every midpoint between neighbours (the
// ties), the float32 neighbours of each midpoint, and values around the overflow threshold 65520, all ÷ 65536.
const NUMPY: &str = r#"
import sys
import numpy as np
x = np.frombuffer(sys.stdin.buffer.read(), dtype='<f4')
h = np.arange(0, 0x7C00, dtype=np.uint16).view(np.float16).astype(np.float32)
mid = (h[:-1] + h[1:]) / np.float32(2)
top = np.array([65504, 65519.99, 65520, 65536, 1e6], dtype=np.float32)
e = np.concatenate([h, mid, np.nextafter(mid, np.float32(0)), np.nextafter(mid, np.float32(np.inf)), top])
e = np.concatenate([e, -e]) / np.float32(65536)
x = np.concatenate([x, e]).astype('<f4')
with np.errstate(over='ignore'):
    y = (x * np.float32(65536)).astype(np.float16).astype('<f4')
sys.stdout.buffer.write(x.tobytes() + y.tobytes())
"#;

#[test]
fn binary16_matches_numpy_float16() {
    let sent = random_inputs();
    let bytes: Vec<u8> = sent.iter().flat_map(|x| x.to_le_bytes()).collect();
    let out = common::run_python(NUMPY, &bytes);
    let floats: Vec<f32> = out.chunks_exact(4).map(|b| f32::from_le_bytes([b[0], b[1], b[2], b[3]])).collect();
    let (xs, ys) = floats.split_at(floats.len() / 2);
    assert!(xs.len() > sent.len() + 100_000, "numpy added its edge inputs");
    assert!(xs[..sent.len()].iter().zip(&sent).all(|(a, b)| a.to_bits() == b.to_bits()), "inputs echoed intact");

    let q =
        Minifloat::new(&MinifloatParams { exponent_bits: 5, mantissa_bits: 10, bias: None, subnormals: true }).unwrap();
    let max = (65504.0 / 65536.0) as f32;
    let mut equal = 0usize;
    let mut first_difference = None;
    for (&x, &h) in xs.iter().zip(ys) {
        let expected = if h.is_infinite() { max.copysign(h) } else { h / 65536.0 };
        let mut ours = [x];
        let mut stage = q.clone();
        stage.process(&mut ours);
        let saturated = stage.clipped() == 1;
        if ours[0].to_bits() == expected.to_bits() && saturated == h.is_infinite() {
            equal += 1;
        } else if first_difference.is_none() {
            first_difference = Some((x, ours[0], expected, saturated));
        }
    }
    println!("{equal}/{} binary16 results equal numpy float16 (scaled by 1/65536, inf -> saturation)", xs.len());
    assert_eq!(equal, xs.len(), "first difference (input, ours, numpy, saturated): {first_difference:?}");
}
