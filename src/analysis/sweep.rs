//! SQNR against word length: what each bit buys for a given sound.

use super::levels::sqnr_db;
use crate::db::power_db;
use crate::error::Result;
use crate::stages::dither::{DitherKind, Shaping};
use crate::stages::quantize::{full_scale_sine_sqnr_db, QuantizeParams, Quantizer};
use serde::Serialize;

/// One point of a sweep.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SweepPoint {
    /// Word length in bits.
    pub bits: u32,
    /// Measured SQNR in dB of this input quantized to `bits` bits.
    pub measured_db: f64,
    /// Theory for this input: its mean square over Δ²/12 (valid while the error is busy and nothing clips).
    pub theory_db: f64,
    /// The handbook line for a full-scale sine, 6.02·N + 1.76 dB.
    pub sine_formula_db: f64,
    /// Samples clipped at this word length.
    pub clipped: u64,
}

/// Quantizes `channels` at every word length in `bits` with `base`'s grid and rounding (no dither, no shaping) and
/// measures the SQNR.
pub fn sqnr_sweep<C: AsRef<[f32]>>(
    channels: &[C],
    base: &QuantizeParams,
    bits: impl IntoIterator<Item = u32>,
) -> Result<Vec<SweepPoint>> {
    let (mut sum2, mut n) = (0f64, 0u64);
    for c in channels {
        for &s in c.as_ref() {
            if s.is_finite() {
                sum2 += s as f64 * s as f64;
                n += 1;
            }
        }
    }
    let ms = if n > 0 { sum2 / n as f64 } else { 0.0 };
    let mut out = Vec::new();
    let mut buf: Vec<f32> = Vec::new();
    for b in bits {
        let p = QuantizeParams {
            bits: b,
            levels: None,
            dither: DitherKind::None,
            dither_peak_lsb: None,
            shaping: Shaping::None,
            ..base.clone()
        };
        let mut q = Quantizer::new(&p, 0, 0)?;
        let mut outs = Vec::with_capacity(channels.len());
        for c in channels {
            buf.clear();
            buf.extend_from_slice(c.as_ref());
            q.process(&mut buf);
            outs.push(buf.clone());
        }
        let step = q.step();
        out.push(SweepPoint {
            bits: b,
            measured_db: sqnr_db(channels, &outs),
            theory_db: power_db(ms / (step * step / 12.0)),
            sine_formula_db: full_scale_sine_sqnr_db(b),
            clipped: q.clipped(),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sweep_of_a_busy_sine_tracks_its_theory_line() {
        let x: Vec<f32> = (0..1 << 15).map(|i| (0.5 * (0.0123 * i as f64).sin()) as f32).collect();
        let pts = sqnr_sweep(&[&x[..]], &QuantizeParams::default(), 1..=24).unwrap();
        assert_eq!(pts.len(), 24);
        for p in &pts[7..] {
            assert!((p.measured_db - p.theory_db).abs() < 0.5, "{p:?}");
        }
        // Each bit is worth about 6.02 dB.
        let slope = (pts[19].measured_db - pts[9].measured_db) / 10.0;
        assert!((slope - 6.02).abs() < 0.05, "{slope}");
    }
}
