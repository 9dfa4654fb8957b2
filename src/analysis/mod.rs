//! Measurements: levels, error and SQNR, spectra, drawing envelopes.
//!
//! # Conventions
//! - **dBFS**: a sine whose peaks touch full scale (±1.0) reads 0 dBFS, both as peak and as RMS (the RMS value is
//!   scaled by √2, the convention of AES17). A full-scale square wave therefore reads +3.01 dBFS RMS.
//! - **Silence** reads [`FLOOR_DB`] rather than −∞, so every number is finite and serialisable.

pub mod levels;
pub mod spectrum;
pub mod sweep;

pub use levels::{envelope, sqnr_db, Levels};
pub use spectrum::{SpectrumAnalyzer, Window};
pub use sweep::{sqnr_sweep, SweepPoint};

/// Level reported for silence, in dB.
pub const FLOOR_DB: f64 = -240.0;

/// `10·log10(p)` of a power ratio, floored at [`FLOOR_DB`].
pub fn power_db(p: f64) -> f64 {
    if p > 0.0 && p.is_finite() {
        (10.0 * p.log10()).max(FLOOR_DB)
    } else if p.is_infinite() {
        -FLOOR_DB
    } else {
        FLOOR_DB
    }
}

/// `20·log10(a)` of an amplitude ratio, floored at [`FLOOR_DB`].
pub fn amp_db(a: f64) -> f64 {
    power_db(a * a)
}
