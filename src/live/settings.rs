//! The live parameters: the raw values as set ([`LiveControls`]) and the discrete settings a chain is built with
//! ([`LiveSettings`]), applied to a preset's first active quantize and hold-mode rate stages.

use crate::preset::Preset;
use crate::stages::dither::DitherKind;
use crate::stages::quantize::{Grid, QuantizeParams};
use crate::stages::rate::{RateMode, RateParams};
use crate::stages::StageSpec;

/// The raw live parameter values as last set (see the module docs for their ranges and "the preset's" values).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct LiveControls {
    pub resolution_bits: f64,
    pub rate_hz: f64,
    pub dither_lsb: f64,
}

impl LiveControls {
    /// Every control at "the preset's own".
    pub const PRESET: LiveControls = LiveControls { resolution_bits: -1.0, rate_hz: -1.0, dither_lsb: -1.0 };
}

/// The live overrides in force, as the discrete settings a chain is built with (`None`: the preset's own, or no
/// stage for it to act on).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(super) struct LiveSettings {
    /// Quantizer levels (`round(2^bits)`, even for a mid-rise grid).
    pub levels: Option<u32>,
    /// Rate of the first hold-mode rate stage, in Hz.
    pub rate_hz: Option<u32>,
    /// Dither peak in hundredths of an LSB.
    pub dither_centi_lsb: Option<u32>,
}

fn first_quantize(p: &Preset) -> Option<&QuantizeParams> {
    p.active_stages().find_map(|s| match s {
        StageSpec::Quantize(q) => Some(q),
        _ => None,
    })
}

fn first_hold_rate(p: &Preset) -> Option<&RateParams> {
    p.active_stages().find_map(|s| match s {
        StageSpec::Rate(r) if r.mode == RateMode::Hold => Some(r),
        _ => None,
    })
}

impl LiveSettings {
    /// The settings the raw control values give for `preset` at `sample_rate`.
    pub fn of(preset: &Preset, sample_rate: u32, c: LiveControls) -> LiveSettings {
        let q = first_quantize(preset);
        let levels = match q {
            Some(q) if c.resolution_bits > 0.0 => {
                let l = libm::exp2(c.resolution_bits.clamp(1.0, 24.0));
                // A mid-rise grid needs an even count.
                let l = if q.grid == Grid::MidRise { 2.0 * (l / 2.0).round() } else { l.round() };
                Some((l as u32).clamp(2, 1 << 24))
            }
            _ => None,
        };
        let rate_hz = match first_hold_rate(preset) {
            Some(_) if c.rate_hz > 0.0 => Some((c.rate_hz.round().clamp(1.0, sample_rate as f64)) as u32),
            _ => None,
        };
        let dither_centi_lsb = match q {
            Some(_) if c.dither_lsb >= 0.0 => Some((c.dither_lsb.min(16.0) * 100.0).round() as u32),
            _ => None,
        };
        LiveSettings { levels, rate_hz, dither_centi_lsb }
    }

    /// `preset` with these overrides applied to its first active quantize and hold-mode rate stages.
    pub fn apply(&self, preset: &Preset) -> Preset {
        let mut p = preset.clone();
        let mut quantize_done = false;
        let mut rate_done = false;
        for slot in p.stages.iter_mut().filter(|s| !s.bypass) {
            match &mut slot.stage {
                StageSpec::Quantize(q) if !quantize_done => {
                    quantize_done = true;
                    if let Some(l) = self.levels {
                        q.levels = Some(l);
                    }
                    if let Some(c) = self.dither_centi_lsb {
                        q.dither_peak_lsb = Some(c as f64 / 100.0);
                        if q.dither == DitherKind::None && c > 0 {
                            q.dither = DitherKind::Tpdf;
                        }
                    }
                }
                StageSpec::Rate(r) if !rate_done && r.mode == RateMode::Hold => {
                    rate_done = true;
                    if let Some(hz) = self.rate_hz {
                        r.rate_hz = hz;
                    }
                }
                _ => {}
            }
        }
        p
    }
}
