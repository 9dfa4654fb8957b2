//! 1-bit delta modulation: each sample is one bit saying whether the decoder's integrator steps up or down by a fixed
//! `step`; a `leak` below 1 makes the integrator forget (`y = leak·y_prev ± step`), so a bit error fades instead of
//! offsetting the rest of the signal.
//!
//! The two textbook impairments: **slope overload** when the input changes faster than `step` per sample (a sine of
//! amplitude A and frequency f overloads when `2π·f·A > step·fs`), and **granular noise** on a still input, where the
//! output keeps alternating up and down around it (a square ripple of peak-to-peak `step`).
//!
//! The integrator is limited to ±1.0 (full scale). The encoder picks the bit whose next integrator value is nearer the
//! input (ties step up), which for an unclipped integrator is the classic comparison `x ≥ leak·y_prev`. Encoding the
//! decoder's own output again gives back the same bits, because each output value *is* the nearer of the two
//! candidates; the 1-bit export relies on this to write the stage's bit stream from the stage's output.
//!
//! Arithmetic is in `f64` with one multiplication and one addition per sample (IEEE-exact, so native and wasm agree).

/// The state of a delta modulator (encoder and decoder alike).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DeltaMod {
    step: f64,
    leak: f64,
    y: f64,
}

impl DeltaMod {
    /// A modulator starting at 0. `step` in full-scale units (> 0), `leak` in (0, 1].
    pub fn new(step: f64, leak: f64) -> Self {
        DeltaMod { step, leak, y: 0.0 }
    }

    /// The two values the integrator can take next: (down, up).
    #[inline]
    fn candidates(&self) -> (f64, f64) {
        let base = self.leak * self.y;
        ((base - self.step).max(-1.0), (base + self.step).min(1.0))
    }

    /// Encodes one sample: returns the bit (true = up) and the decoder's new output.
    #[inline]
    pub fn encode(&mut self, x: f64) -> (bool, f64) {
        let (down, up) = self.candidates();
        let bit = (x - up).abs() <= (x - down).abs();
        self.y = if bit { up } else { down };
        (bit, self.y)
    }

    /// Decodes one bit.
    #[inline]
    pub fn decode(&mut self, bit: bool) -> f64 {
        let (down, up) = self.candidates();
        self.y = if bit { up } else { down };
        self.y
    }

    /// Back to 0.
    pub fn reset(&mut self) {
        self.y = 0.0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A still input gives granular noise (alternating bits around it); a steep ramp overloads (all ones, the output
    /// rising by exactly `step` per sample and falling behind); re-encoding the output gives the same bits.
    #[test]
    fn granular_noise_slope_overload_and_idempotence() {
        let mut m = DeltaMod::new(0.01, 1.0);
        let out: Vec<(bool, f64)> = (0..200).map(|_| m.encode(0.3)).collect();
        for w in out[100..].windows(2) {
            assert_ne!(w[0].0, w[1].0, "granular noise alternates");
            assert!((w[0].1 - 0.3).abs() <= 0.01 + 1e-12);
        }
        let mut m = DeltaMod::new(0.01, 1.0);
        let ys: Vec<f64> = (0..50).map(|i| m.encode(i as f64 * 0.02).1).collect();
        for (i, y) in ys.iter().enumerate() {
            assert!((y - 0.01 * (i + 1) as f64).abs() < 1e-12);
        }
        let mut enc = DeltaMod::new(0.03, 0.98);
        let mut again = DeltaMod::new(0.03, 0.98);
        for i in 0..5000 {
            let x = (i as f64 * 0.05).sin() * 1.2;
            let (b, y) = enc.encode(x);
            let (b2, y2) = again.encode(y as f32 as f64);
            assert_eq!((b, y), (b2, y2), "{i}");
        }
    }
}
