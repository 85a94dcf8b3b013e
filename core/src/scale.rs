//! Mel scales and band-edge placement, in `f64`.
//!
//! These functions run on the host (table generation, validation), never on
//! the per-frame path. They are `no_std` through `libm`.
//!
//! ```
//! use stapes_core::config::MelScale;
//! use stapes_core::scale::{hz_to_mel, mel_to_hz};
//!
//! let m = hz_to_mel(MelScale::OShaughnessy, 1000.0);
//! assert!((m - 1000.0).abs() < 0.1);
//! assert!((mel_to_hz(MelScale::OShaughnessy, m) - 1000.0).abs() < 1e-9);
//! ```

use crate::config::{FeatureConfig, MelScale};

/// Hz per mel on the linear part of [`MelScale::Slaney`].
const SLANEY_HZ_PER_MEL: f64 = 200.0 / 3.0;
/// Frequency where [`MelScale::Slaney`] turns logarithmic.
const SLANEY_BREAK_HZ: f64 = 1000.0;
/// Mel value at the break (1000 / (200/3) = 15).
const SLANEY_BREAK_MEL: f64 = SLANEY_BREAK_HZ / SLANEY_HZ_PER_MEL;

fn slaney_log_step() -> f64 {
    libm::log(6.4) / 27.0
}

/// Frequency in Hz to mels.
pub fn hz_to_mel(scale: MelScale, hz: f64) -> f64 {
    match scale {
        MelScale::OShaughnessy => 2595.0 * libm::log10(1.0 + hz / 700.0),
        MelScale::Slaney => {
            if hz < SLANEY_BREAK_HZ {
                hz / SLANEY_HZ_PER_MEL
            } else {
                SLANEY_BREAK_MEL + libm::log(hz / SLANEY_BREAK_HZ) / slaney_log_step()
            }
        }
    }
}

/// Mels to frequency in Hz (inverse of [`hz_to_mel`]).
pub fn mel_to_hz(scale: MelScale, mel: f64) -> f64 {
    match scale {
        MelScale::OShaughnessy => 700.0 * (libm::pow(10.0, mel / 2595.0) - 1.0),
        MelScale::Slaney => {
            if mel < SLANEY_BREAK_MEL {
                mel * SLANEY_HZ_PER_MEL
            } else {
                SLANEY_BREAK_HZ * libm::exp(slaney_log_step() * (mel - SLANEY_BREAK_MEL))
            }
        }
    }
}

/// Edge `i` (0 ..= bands + 1) of the mel-spaced layout in Hz: band `b` rises
/// from edge `b`, peaks at edge `b + 1` and falls to edge `b + 2`.
pub fn band_edge_hz(config: &FeatureConfig, i: u32) -> f64 {
    let s = config.mel_scale;
    let lo = hz_to_mel(s, config.low_edge_hz as f64);
    let hi = hz_to_mel(s, config.high_edge_hz as f64);
    if i == 0 {
        return config.low_edge_hz as f64;
    }
    if i == config.bands + 1 {
        return config.high_edge_hz as f64;
    }
    mel_to_hz(s, lo + (hi - lo) * i as f64 / (config.bands + 1) as f64)
}

/// Edge `i` (0 ..= bands + 1) rounded to the nearest FFT bin, as the
/// ES 201 108 construction places its filters.
pub fn rounded_centre_bin(config: &FeatureConfig, i: u32) -> u32 {
    let hz = band_edge_hz(config, i);
    libm::round(hz * config.fft_points as f64 / config.sample_rate_hz as f64) as u32
}
