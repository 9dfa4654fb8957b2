//! The shared core checks as WebAssembly in headless Chromium (wasm-bindgen-test with Debian's chromedriver).
//! Run by scripts/test.sh; see DEVELOPERS.md.
#![cfg(target_arch = "wasm32")]

mod checks;

use wasm_bindgen_test::*;
wasm_bindgen_test_configure!(run_in_browser);

#[wasm_bindgen_test]
fn sqnr_follows_six_db_per_bit() {
    checks::sqnr_follows_six_db_per_bit();
}

#[wasm_bindgen_test]
fn spectrum_peak_in_the_right_bin() {
    checks::spectrum_peak_in_the_right_bin();
}

#[wasm_bindgen_test]
fn dithered_render_is_bit_identical_across_platforms() {
    checks::dithered_render_is_bit_identical_across_platforms();
}

#[wasm_bindgen_test]
fn bad_parameters_are_errors() {
    checks::bad_parameters_are_errors();
}

#[wasm_bindgen_test]
fn every_stage_renders_bit_identically() {
    checks::every_stage_renders_bit_identically();
}
