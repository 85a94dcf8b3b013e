//! Logarithm with a floor: `10·log10(max(E, floor))` or `ln(max(E, floor))`.

use crate::config::LogKind;

/// The linear energy floor for a floor in dB (`10^(floor_db / 10)`).
pub fn floor_energy(floor_db: f32) -> f32 {
    libm::powf(10.0, floor_db / 10.0)
}

/// Replaces each energy by its floored log.
#[inline]
pub fn log_f32(kind: LogKind, floor: f32, values: &mut [f32]) {
    match kind {
        LogKind::Decibel => {
            for v in values.iter_mut() {
                *v = 10.0 * libm::log10f(v.max(floor));
            }
        }
        LogKind::Natural => {
            for v in values.iter_mut() {
                *v = libm::logf(v.max(floor));
            }
        }
    }
}
