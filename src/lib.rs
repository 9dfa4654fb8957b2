//! # Stairstep
//!
//! The DSP core of a bit-crush and quantization sandbox. The same code runs natively (the `stairstep` command-line
//! tool) and as WebAssembly (the offline page).
//!
//! - [`quantize`], [`dither`]: stages, each a plain struct with a validating constructor, an allocation-free
//!   `process` and `reset`.
//! - [`chain`], [`preset`]: the ordered, bypassable list of stages and its versioned JSON form.
//! - [`analysis`]: levels in dBFS, SQNR, Welch spectra, drawing envelopes.
//! - [`io`]: WAV reading and writing.
//! - [`demo`]: built-in synthesised demo sounds.
//!
//! Samples are `f32` with full scale ±1.0. See each module for units and conventions.

#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod adpcm;
pub mod analysis;
pub mod audio;
pub mod chain;
pub mod clip;
pub mod companding;
pub mod demo;
pub mod dither;
pub mod error;
pub mod io;
pub mod minifloat;
pub mod prep;
pub mod preset;
pub mod quantize;
pub mod rate;
pub mod rng;

#[cfg(target_arch = "wasm32")]
mod wasm;

pub use audio::Clip;
pub use error::{Error, Result};
pub use preset::Preset;
