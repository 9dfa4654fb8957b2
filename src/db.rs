//! Shared words about decibels: power and amplitude ratios in dB (floored, so silence is a finite number) and gains.
//!
//! std's `log10` is used for reported figures (measurement only); `db_to_gain`, which shapes samples, uses `libm` so
//! that native and wasm builds give the same bytes.

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

/// Linear gain factor of `db` decibels: `10^(db/20)` (+6.0206 dB doubles).
pub fn db_to_gain(db: f64) -> f64 {
    libm::pow(10.0, db / 20.0)
}

/// `20·log10(a)` of an amplitude ratio, floored at [`FLOOR_DB`], computed with `libm` so that it gives the same
/// digits natively and in wasm (for figures that decide samples, such as a normalisation gain, and the notes that
/// quote them).
pub fn amp_db_portable(a: f64) -> f64 {
    if a > 0.0 && a.is_finite() {
        (20.0 * libm::log10(a)).max(FLOOR_DB)
    } else if a.is_infinite() {
        -FLOOR_DB
    } else {
        FLOOR_DB
    }
}
