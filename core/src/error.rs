//! Errors from building a front end.

use core::fmt;

use crate::config::{ConfigError, FeatureConfig, Value};
use crate::table::TableError;

/// Why a front end could not be built.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FrontEndError {
    /// The configuration's sizes are impossible.
    Config(ConfigError),
    /// The table does not fit the configuration.
    Table(TableError),
    /// The fixed-point tables do not fit the configuration.
    Fixed(crate::fixed_tables::FixedTableError),
    /// A compile-time buffer is too small for the configuration.
    Capacity {
        /// Which buffer.
        buffer: &'static str,
        /// Elements the configuration needs.
        needed: usize,
        /// Elements the type provides.
        capacity: usize,
    },
    /// This build has no FFT of the configured size.
    FftNotCompiled {
        /// The FFT length.
        fft_points: u32,
    },
}

impl From<TableError> for FrontEndError {
    fn from(e: TableError) -> Self {
        FrontEndError::Table(e)
    }
}

impl From<ConfigError> for FrontEndError {
    fn from(e: ConfigError) -> Self {
        FrontEndError::Config(e)
    }
}

impl fmt::Display for FrontEndError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            FrontEndError::Config(e) => write!(f, "{e}"),
            FrontEndError::Table(e) => write!(f, "{e}"),
            FrontEndError::Fixed(e) => write!(f, "{e}"),
            FrontEndError::Capacity {
                buffer,
                needed,
                capacity,
            } => write!(
                f,
                "the {buffer} buffer holds {capacity} elements but the configuration needs \
                 {needed}: raise that const parameter of the front-end type"
            ),
            FrontEndError::FftNotCompiled { fft_points } => write!(
                f,
                "no {fft_points}-point FFT is compiled in: enable cargo feature \
                 `fft-{fft_points}` of stapes-core"
            ),
        }
    }
}

impl core::error::Error for FrontEndError {}

/// Integer-only checks of the sizes a front end relies on, against its buffers.
pub(crate) fn check_shape(
    config: &FeatureConfig,
    fft_capacity: usize,
    overlap_capacity: usize,
    band_capacity: usize,
) -> Result<(), FrontEndError> {
    let window = config.window_samples;
    if !config.fft_points.is_power_of_two() || config.fft_points < 16 {
        return Err(ConfigError::FftNotPowerOfTwo {
            fft_points: config.fft_points,
        }
        .into());
    }
    if config.fft_points < window {
        return Err(ConfigError::FftSmallerThanWindow {
            fft_points: config.fft_points,
            window_samples: window,
        }
        .into());
    }
    if config.hop_samples == 0 || config.hop_samples > window {
        return Err(ConfigError::OutOfRange {
            field: "hop_samples",
            value: Value::Int(config.hop_samples),
            min: Value::Int(1),
            max: Value::Int(window),
            fix: "use a hop between 1 and the window length (frames must not leave gaps)",
        }
        .into());
    }
    let needs = [
        ("FFT", config.fft_points as usize, fft_capacity),
        ("overlap", config.overlap_samples(), overlap_capacity),
        ("band", config.stage_inputs(), band_capacity),
    ];
    for (buffer, needed, capacity) in needs {
        if needed > capacity {
            return Err(FrontEndError::Capacity {
                buffer,
                needed,
                capacity,
            });
        }
    }
    Ok(())
}
