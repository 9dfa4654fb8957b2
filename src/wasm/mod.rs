//! The JavaScript boundary (compiled only for wasm32). Nothing else in the crate knows about JS.
//!
//! Two opaque handles: [`session::Session`] (the page: a loaded sound, its preset and the latest render) and
//! [`live::LiveChain`] (the AudioWorklet: the core's [`crate::live::LiveChain`] and the buffers JS views). They only
//! marshal: JS receives typed arrays, numbers and small JSON strings; errors become JS exceptions carrying the crate's
//! error message.

mod live;
mod session;

use crate::Error;
use wasm_bindgen::JsError;

/// A crate error as a JS exception with the same message.
fn js_err(e: Error) -> JsError {
    JsError::new(&e.to_string())
}
