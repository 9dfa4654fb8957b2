//! The shared core checks, natively. The same bodies run as wasm in tests/wasm.rs.
#![cfg(not(target_arch = "wasm32"))]

mod checks;

#[test]
fn sqnr_follows_six_db_per_bit() {
    checks::sqnr_follows_six_db_per_bit();
}

#[test]
fn spectrum_peak_in_the_right_bin() {
    checks::spectrum_peak_in_the_right_bin();
}

#[test]
fn dithered_render_is_bit_identical_across_platforms() {
    checks::dithered_render_is_bit_identical_across_platforms();
}

#[test]
fn bad_parameters_are_errors() {
    checks::bad_parameters_are_errors();
}

#[test]
fn every_stage_renders_bit_identically() {
    checks::every_stage_renders_bit_identically();
}
