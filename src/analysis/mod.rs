//! Measurements: levels, error and SQNR, spectra and spectrograms, drawing envelopes, frequency weighting A, a chain's
//! static transfer curve and the codes a quantizer emits.
//!
//! # Conventions
//! - **dBFS**: a sine whose peaks touch full scale (±1.0) reads 0 dBFS, both as peak and as RMS (the RMS value is
//!   scaled by √2, the convention of AES17). A full-scale square wave therefore reads +3.01 dBFS RMS.
//! - **Silence** reads [`crate::db::FLOOR_DB`] rather than −∞, so every number is finite and serialisable.

pub mod codes;
pub mod headroom;
pub mod levels;
pub mod loudness;
pub mod spectrogram;
pub mod spectrum;
pub mod sweep;
pub mod transfer;
pub mod weighting;

pub use levels::{envelope, sqnr_db, Levels};
pub use spectrum::{SpectrumAnalyzer, Window};
pub use sweep::{sqnr_sweep, SweepPoint};
