//! # Stairstep
//!
//! The DSP core of a bit-crush and quantization sandbox. The same code runs natively (the `stairstep` command-line
//! tool) and as WebAssembly (the offline page and the live plug-in).
//!
//! The modules form layers; each imports only from the layers below it:
//!
//! 1. shared words: [`sample`] (sanitize, PCM codes), [`db`], [`audio`] (the [`Clip`]), [`error`], [`rng`];
//! 2. [`codec`]: G.711 and IMA ADPCM, integer samples in, codes out;
//! 3. [`stages`]: one file per stage, the [`stages::Stage`] trait, the [`stages::StageSpec`] that names them all, and
//!    the [`stages::schema()`] of their fields;
//! 4. [`analysis`]: levels, SQNR, spectra and spectrograms, loudness, headroom, the SQNR sweep, a chain's static
//!    transfer curve and the codes a quantizer emits;
//! 5. [`prep`]: asset preparation (channels, trim, fades, normalisation, loop points);
//! 6. [`io`]: WAV reading and writing, raw and C-array exports;
//! 7. [`preset`]: the versioned JSON preset and the built-in presets;
//! 8. [`chain`]: the block engine (stages before and after the one rate stage, alignment, report);
//! 9. [`render`] (a whole clip: preparation, chain, export loop points) and [`live`] (the chain for real-time
//!    audition: FIFO, ramps, crossfaded rebuilds), plus [`demo`] sounds;
//!    [`budget`] (every (rate, export) candidate rendered and measured, the best within a budget) sits on top of
//!    [`render`];
//! 10. the boundaries: `wasm` (wasm32 only, marshals for JS) and the `stairstep` binary's `cli`.
//!
//! Samples are `f32` with full scale ±1.0. See each module for units and conventions.

#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod analysis;
pub mod audio;
pub mod budget;
pub mod chain;
pub mod codec;
pub mod db;
pub mod demo;
pub mod error;
pub mod io;
pub mod live;
pub mod prep;
pub mod preset;
pub mod render;
pub mod rng;
pub mod sample;
pub mod stages;

#[cfg(target_arch = "wasm32")]
mod wasm;

pub use audio::Clip;
pub use error::{Error, Result};
pub use preset::Preset;
