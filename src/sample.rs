//! Shared words about samples: how non-finite values are made safe, and how a float becomes an N-bit integer code.
//!
//! Samples are `f32` with full scale ±1.0 (floats are assumed in −1.0 ≤ x < 1.0 for integer conversion, so +1.0
//! maps to the largest code, one step short of it).

/// Replaces NaN by 0 and ±Inf by ±1.0. The chain applies it before its first stage, and every stage applies it to
/// its own input, so a stage gives the same output whether or not its input was sanitized.
#[inline]
pub fn sanitize(x: f32) -> f32 {
    if x.is_nan() {
        0.0
    } else if x.is_infinite() {
        x.signum()
    } else {
        x
    }
}

/// The N-bit PCM code for a float sample: `round(x · 2^(N−1))` (half away from zero), clamped to
/// `−2^(N−1) … 2^(N−1)−1`, NaN → 0. For the output of an N-bit mid-tread quantizer this is exact.
#[inline]
pub fn pcm_code(x: f32, bits: u32) -> i32 {
    let scale = (1u64 << (bits - 1)) as f64;
    let x = if x.is_nan() { 0.0 } else { x as f64 };
    (x * scale).round().clamp(-scale, scale - 1.0) as i32
}
