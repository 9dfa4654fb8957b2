//! The 1-bit delta modulation stage: hear a delta modulator's decoder output (see [`crate::codec::delta`] for the
//! codec, its slope overload and granular noise). Its bit stream is what the export `{"type": "delta-bits"}` with
//! the same `step` and `leak` writes, when this stage is the last of the chain.

use crate::codec::delta::DeltaMod;
use crate::error::{Range, Result};
use crate::sample::sanitize;
use crate::stages::Stage;
use serde::{Deserialize, Serialize};

/// Allowed step, in full-scale units.
pub const STEP: Range = Range::new(0.0001, 0.5);
/// Allowed leak per sample.
pub const LEAK: Range = Range::new(0.5, 1.0);

/// Parameters of [`DeltaModulator`].
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct DeltaParams {
    /// Integrator step per sample, in full-scale units, 0.0001 to 0.5. Default 0.02 (at 48 kHz a full-scale sine
    /// overloads above about 150 Hz: `2π·f·A > step·fs`; smaller steps give less granular noise and more overload).
    pub step: f64,
    /// Integrator leak per sample, 0.5 to 1.0 (1.0 = a pure integrator). Default 1.0; 0.99 or so lets bit errors and
    /// offsets fade.
    pub leak: f64,
}

impl Default for DeltaParams {
    fn default() -> Self {
        DeltaParams { step: 0.02, leak: 1.0 }
    }
}

impl DeltaParams {
    /// Checks the parameters; errors name `step` or `leak`.
    pub fn validate(&self) -> Result<()> {
        STEP.check_f("step", self.step, "")?;
        LEAK.check_f("leak", self.leak, "")
    }
}

/// Delta modulation encode and decode for one channel.
#[derive(Debug, Clone)]
pub struct DeltaModulator {
    m: DeltaMod,
}

impl DeltaModulator {
    /// Validates `params` and builds the stage.
    pub fn new(params: &DeltaParams) -> Result<Self> {
        params.validate()?;
        Ok(DeltaModulator { m: DeltaMod::new(params.step, params.leak) })
    }
}

impl Stage for DeltaModulator {
    fn process(&mut self, buf: &mut [f32]) {
        for s in buf.iter_mut() {
            *s = self.m.encode(sanitize(*s) as f64).1 as f32;
        }
    }

    fn reset(&mut self) {
        self.m.reset();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn validates_and_resets() {
        for (step, leak, field) in
            [(0.0, 1.0, "step"), (0.6, 1.0, "step"), (0.1, 1.01, "leak"), (0.1, f64::NAN, "leak")]
        {
            let e = DeltaModulator::new(&DeltaParams { step, leak }).unwrap_err();
            assert!(e.to_string().contains(field), "{e}");
        }
        let mut st = DeltaModulator::new(&DeltaParams::default()).unwrap();
        let mut a: Vec<f32> = (0..300).map(|i| (i as f32 * 0.05).sin()).collect();
        let mut b = a.clone();
        st.process(&mut a);
        st.reset();
        st.process(&mut b);
        assert_eq!(a, b);
        // The first samples climb by exactly one step each (slope overload from 0 towards a big input).
        assert_eq!(a[0], 0.02f32);
    }
}
