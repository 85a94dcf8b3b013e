//! Error statistics between the core's frames and the reference's.
//!
//! Only bands within `range_db` of their frame's loudest reference band count:
//! those are the values a model sees above its noise floor. Errors and ranges
//! are in dB of power whatever the output: natural-log outputs are scaled by
//! 10/ln 10, and for a magnitude spectrum (a band sums |X|, an amplitude) by
//! 20/ln 10 or 20·log10, the usual decibel of an amplitude (common practice),
//! so R = 60 dB means the same 60 dB of power for every configuration.
//!
//! Bands whose reference value lies below the input's own resolution (the
//! level the 16-bit input's rounding noise alone would give that band, see
//! [`crate::reference::Reference::input_noise_floor`]) are not compared: no
//! 16-bit source can carry a signal there. They are counted instead
//! ([`Comparison::below_resolution`]), and reports print the count.

use stapes_core::config::{FeatureConfig, LogKind, SpectrumKind};

/// max / mean / 99th percentile of |error| over a set of values.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct ErrorSummary {
    /// Largest |error| in dB.
    pub max: f64,
    /// Mean |error| in dB.
    pub mean: f64,
    /// 99th percentile of |error| in dB.
    pub p99: f64,
    /// How many values were compared.
    pub count: usize,
}

impl ErrorSummary {
    fn of(mut errors: Vec<f64>) -> ErrorSummary {
        if errors.is_empty() {
            return ErrorSummary::default();
        }
        errors.sort_by(f64::total_cmp);
        let n = errors.len();
        let p99_index = ((0.99 * n as f64).ceil() as usize).clamp(1, n) - 1;
        ErrorSummary {
            max: errors[n - 1],
            mean: errors.iter().sum::<f64>() / n as f64,
            p99: errors[p99_index],
            count: n,
        }
    }
}

/// The comparison of two runs.
#[derive(Debug, Clone, PartialEq)]
pub struct Comparison {
    /// Over all compared values.
    pub overall: ErrorSummary,
    /// Per band.
    pub per_band: Vec<ErrorSummary>,
    /// Frames compared.
    pub frames: usize,
    /// The range used.
    pub range_db: f64,
    /// |core − reference| in dB per frame and band (NaN where not compared).
    pub error_map: Vec<Vec<f64>>,
    /// Values within the range but below the input's resolution (not compared).
    pub below_resolution: usize,
}

/// Output units to dB of power for `config` (see the module docs).
pub fn db_per_output_unit(config: &FeatureConfig) -> f64 {
    let log = match config.log {
        LogKind::Decibel => 1.0,
        LogKind::Natural => 10.0 / std::f64::consts::LN_10,
    };
    match config.spectrum {
        SpectrumKind::Power => log,
        SpectrumKind::Magnitude => 2.0 * log,
    }
}

/// Dynamic range and tolerance of one check.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tolerance {
    /// Bands within this many dB of the frame's loudest are compared.
    pub range_db: f64,
    /// Largest allowed |error| in dB.
    pub max_error_db: f64,
}

/// Compares `core` (frames × bands, output units) with `reference`; with
/// `resolution` (per band, output units), values below it are counted, not compared.
pub fn compare(
    core: &[Vec<f32>],
    reference: &[Vec<f64>],
    config: &FeatureConfig,
    range_db: f64,
    resolution: Option<&[f64]>,
) -> Comparison {
    let to_db = db_per_output_unit(config);
    let bands = reference.first().map_or(0, Vec::len);
    let mut per_band: Vec<Vec<f64>> = vec![Vec::new(); bands];
    let mut all = Vec::new();
    let mut error_map = Vec::with_capacity(reference.len());
    let mut below_resolution = 0;
    for (c_row, r_row) in core.iter().zip(reference) {
        let loudest = r_row.iter().copied().fold(f64::NEG_INFINITY, f64::max) * to_db;
        let mut map_row = vec![f64::NAN; bands];
        for (b, (&c, &r)) in c_row.iter().zip(r_row).enumerate() {
            if r * to_db >= loudest - range_db {
                if resolution.is_some_and(|floor| r < floor[b]) {
                    below_resolution += 1;
                    continue;
                }
                let e = (c as f64 - r).abs() * to_db;
                per_band[b].push(e);
                all.push(e);
                map_row[b] = e;
            }
        }
        error_map.push(map_row);
    }
    Comparison {
        overall: ErrorSummary::of(all),
        per_band: per_band.into_iter().map(ErrorSummary::of).collect(),
        frames: core.len().min(reference.len()),
        range_db,
        error_map,
        below_resolution,
    }
}
