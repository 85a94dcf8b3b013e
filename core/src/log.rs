//! Logarithm with a floor: `10·log10(max(E, floor))` or `ln(max(E, floor))`.
//!
//! The natural log is computed from the float's exponent and the series
//! `ln m = 2·atanh((m − 1)/(m + 1)) = 2(s + s³/3 + s⁵/5 + …)` for the mantissa
//! `m` reduced to `[√½, √2)`, where `|s| < 0.172`; five terms leave a
//! truncation below 2e-9, under f32's own rounding (a textbook identity,
//! common practice). It costs one division and a handful of multiply-adds,
//! about a fifth of a general-purpose `log10f`, and every target computes it
//! with the same IEEE-754 operations in the same order.
//!
//! ```
//! use stapes_core::log::ln_f32;
//! for x in [1e-10f32, 0.5, 1.0, 3.0, 1e6] {
//!     assert!((ln_f32(x) as f64 - (x as f64).ln()).abs() < 2e-6 * (x as f64).ln().abs().max(1.0));
//! }
//! ```

use crate::config::LogKind;

/// The linear energy floor for a floor in dB (`10^(floor_db / 10)`).
pub fn floor_energy(floor_db: f32) -> f32 {
    libm::powf(10.0, floor_db / 10.0)
}

/// `ln x` for a positive, normal, finite `x` (the front ends only pass
/// values at or above their floor, which validation keeps ≥ 1e-30).
#[inline]
pub fn ln_f32(x: f32) -> f32 {
    const LN_2: f32 = core::f32::consts::LN_2;
    const SQRT_2: f32 = core::f32::consts::SQRT_2;
    let bits = x.to_bits();
    let mut exponent = ((bits >> 23) & 0xFF) as i32 - 127;
    let mut m = f32::from_bits((bits & 0x007F_FFFF) | 0x3F80_0000); // [1, 2)
    if m > SQRT_2 {
        m *= 0.5;
        exponent += 1;
    }
    let s = (m - 1.0) / (m + 1.0);
    let z = s * s;
    let series = 1.0 + z * (1.0 / 3.0 + z * (1.0 / 5.0 + z * (1.0 / 7.0 + z * (1.0 / 9.0))));
    exponent as f32 * LN_2 + 2.0 * s * series
}

/// Replaces each energy by its floored log.
#[inline]
pub fn log_f32(kind: LogKind, floor: f32, values: &mut [f32]) {
    // 10·log10(x) = (10 / ln 10)·ln(x).
    let scale = match kind {
        LogKind::Decibel => 10.0 / core::f32::consts::LN_10,
        LogKind::Natural => 1.0,
    };
    for v in values.iter_mut() {
        // A plain comparison: `f32::max` handles NaN through a library call on
        // cores without a max instruction, and energies are never NaN here.
        let e = if *v > floor { *v } else { floor };
        *v = scale * ln_f32(e);
    }
}
