//! One type describes a front end: [`FeatureConfig`].
//!
//! A configuration is plain data with public fields, so it can be built in a
//! `const` and kept in flash. [`FeatureConfig::validate`] checks it once, on
//! the host or at start-up; every rejection is a [`ConfigError`] that names the
//! field, the value, the allowed range and a fix.
//!
//! ```
//! use stapes_core::config::FeatureConfig;
//! use stapes_core::presets::SPEECH16K_40;
//!
//! const MINE: FeatureConfig = FeatureConfig { bands: 32, ..SPEECH16K_40 };
//! assert!(MINE.validate().is_ok());
//!
//! let broken = FeatureConfig { hop_samples: 0, ..SPEECH16K_40 };
//! let err = broken.validate().unwrap_err();
//! assert_eq!(err.field(), "hop_samples");
//! ```

use core::fmt;

use crate::crc32::Crc32;
use crate::quantise::CodeRange;
use crate::scale;
pub use crate::stage_config::{
    LEVEL_MAP_BYTES, LevelMapConfig, MfccConfig, ModelWindowConfig, QuantiseConfig,
    RangeFloorConfig, STAGE_CONFIG_BYTES, STAGE_SECTION_MAX_BYTES, StageConfig,
};

/// Largest FFT length the configuration accepts (a compile-time FFT must exist).
pub const MAX_FFT_POINTS: usize = 4096;
/// Smallest FFT length the configuration accepts.
pub const MIN_FFT_POINTS: usize = 16;
/// Largest number of mel bands.
pub const MAX_BANDS: usize = 256;

/// Shape of the analysis window applied to each frame.
///
/// Symmetric forms use `n / (L - 1)`; periodic forms use `n / L` (the first
/// `L` points of an `L + 1` symmetric window, common practice for spectral
/// analysis because it overlap-adds to a constant).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WindowShape {
    /// `0.5 - 0.5 cos(2πn / (L-1))`.
    Hann,
    /// `0.5 - 0.5 cos(2πn / L)`.
    HannPeriodic,
    /// `0.54 - 0.46 cos(2πn / (L-1))`.
    Hamming,
    /// `0.54 - 0.46 cos(2πn / L)`.
    HammingPeriodic,
    /// All ones (no taper); for tests and measurements.
    Rectangular,
}

/// Formula mapping frequency in Hz to mels.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum MelScale {
    /// `2595 · log10(1 + f / 700)` (O'Shaughnessy, *Speech Communication*, 1987).
    OShaughnessy,
    /// Linear below 1 kHz (200/3 Hz per mel), logarithmic above with steps of
    /// `ln(6.4) / 27` (Slaney, *Auditory Toolbox* v2, Interval Research TR 1998-010).
    Slaney,
}

/// How the triangular filters are placed on the FFT bins.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum TrianglePlacement {
    /// Each triangle is evaluated at every bin's exact frequency `k · fs / N`;
    /// band edges are equally spaced in mels and never rounded to bins.
    ExactFrequency,
    /// Centre frequencies are rounded to the nearest bin and the weights follow
    /// the integer construction of ETSI ES 201 108 §4.2.9 (the distributed
    /// speech recognition front end): the last edge is the Nyquist bin.
    RoundedCentreBins,
}

/// Gain of each triangular band.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum BandGain {
    /// Every triangle peaks at 1.
    PeakOne,
    /// Every triangle has unit area in Hz: peak `2 / (upper_hz - lower_hz)`.
    EqualArea,
}

/// Which spectrum feeds the filterbank.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SpectrumKind {
    /// `P[k] = |X[k]|²`.
    Power,
    /// `|X[k]|`.
    Magnitude,
}

/// Logarithm applied to the band energies.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LogKind {
    /// `10 · log10(max(E, floor))`.
    Decibel,
    /// `ln(max(E, floor))`.
    Natural,
}

/// A complete front-end description. See the crate docs for the framing and
/// numeric conventions every field follows.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FeatureConfig {
    /// Sample rate of the input stream in Hz.
    pub sample_rate_hz: u32,
    /// Samples per analysis frame (the window length).
    pub window_samples: u32,
    /// FFT length: a power of two, at least `window_samples`; the windowed
    /// frame is zero-padded to this length.
    pub fft_points: u32,
    /// Samples between the starts of consecutive frames, `1..=window_samples`.
    pub hop_samples: u32,
    /// Window shape.
    pub window: WindowShape,
    /// DC removal `y[n] = x[n] - x[n-1] + p·y[n-1]` with pole `p` in `[0, 1)`,
    /// run on the continuous stream from zero state; `None` disables it.
    pub dc_removal_pole: Option<f32>,
    /// Pre-emphasis `y[n] = x[n] - a·x[n-1]` with `a` in `[0, 1)`, run on the
    /// continuous stream (after DC removal) from zero state; `None` disables it.
    pub pre_emphasis: Option<f32>,
    /// Number of mel bands.
    pub bands: u32,
    /// Lower edge of the first band in Hz.
    pub low_edge_hz: f32,
    /// Upper edge of the last band in Hz (at most the Nyquist frequency).
    pub high_edge_hz: f32,
    /// Mel formula used to space the band edges.
    pub mel_scale: MelScale,
    /// How triangles are placed on the bins.
    pub triangles: TrianglePlacement,
    /// Gain of each band.
    pub band_gain: BandGain,
    /// Power or magnitude spectrum.
    pub spectrum: SpectrumKind,
    /// Decibels or natural log.
    pub log: LogKind,
    /// Energy floor in dB (`10·log10` of the smallest band energy kept),
    /// whatever the output log; the output never goes below it.
    pub floor_db: f32,
    /// The stages after the filterbank (PCEN, range floor, MFCC,
    /// normalisation, quantisation, the model's window);
    /// [`StageConfig::NONE`] for plain log-mel frames.
    pub stages: StageConfig,
}

/// Why a configuration was rejected. [`fmt::Display`] gives the full sentence
/// with the fix; the accessors give the pieces for programs.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum ConfigError {
    /// A float field is NaN or infinite.
    NotFinite {
        /// Field name.
        field: &'static str,
    },
    /// A numeric field is outside its allowed range.
    OutOfRange {
        /// Field name.
        field: &'static str,
        /// The value given.
        value: Value,
        /// Smallest allowed value.
        min: Value,
        /// Largest allowed value.
        max: Value,
        /// What to change.
        fix: &'static str,
    },
    /// The FFT length is not a power of two.
    FftNotPowerOfTwo {
        /// The value given.
        fft_points: u32,
    },
    /// The FFT is shorter than the window.
    FftSmallerThanWindow {
        /// The FFT length given.
        fft_points: u32,
        /// The window length given.
        window_samples: u32,
    },
    /// A band edge lies above the Nyquist frequency.
    EdgeAboveNyquist {
        /// The upper edge given.
        high_edge_hz: f32,
        /// Half the sample rate.
        nyquist_hz: f32,
    },
    /// The lower edge is not below the upper edge.
    EdgesOutOfOrder {
        /// Lower edge given.
        low_edge_hz: f32,
        /// Upper edge given.
        high_edge_hz: f32,
    },
    /// A band has no FFT bin inside it at this resolution.
    EmptyBand {
        /// Zero-based band index.
        band: u32,
        /// Band lower edge in Hz.
        lower_hz: f32,
        /// Band upper edge in Hz.
        upper_hz: f32,
        /// FFT bin spacing in Hz.
        bin_hz: f32,
    },
    /// Two neighbouring bands round to the same centre bin
    /// ([`TrianglePlacement::RoundedCentreBins`] only).
    SharedCentreBin {
        /// Zero-based index of the second band of the pair.
        band: u32,
        /// The shared bin.
        bin: u32,
    },
    /// The ES 201 108 construction fixes its own weights.
    GainNotForRoundedBins,
    /// Two stages that cannot be chained.
    StageConflict {
        /// The stage at fault.
        field: &'static str,
        /// The stage it conflicts with.
        with: &'static str,
        /// Why, and what to change.
        fix: &'static str,
    },
}

impl ConfigError {
    /// Name of the configuration field at fault.
    pub fn field(&self) -> &'static str {
        match self {
            ConfigError::NotFinite { field } | ConfigError::OutOfRange { field, .. } => field,
            ConfigError::FftNotPowerOfTwo { .. } | ConfigError::FftSmallerThanWindow { .. } => {
                "fft_points"
            }
            ConfigError::EdgeAboveNyquist { .. } | ConfigError::EdgesOutOfOrder { .. } => {
                "high_edge_hz"
            }
            ConfigError::EmptyBand { .. } | ConfigError::SharedCentreBin { .. } => "bands",
            ConfigError::GainNotForRoundedBins => "band_gain",
            ConfigError::StageConflict { field, .. } => field,
        }
    }
}

impl fmt::Display for ConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            ConfigError::NotFinite { field } => {
                write!(f, "`{field}` is not a finite number; give a finite value")
            }
            ConfigError::OutOfRange {
                field,
                value,
                min,
                max,
                fix,
            } => write!(
                f,
                "`{field}` = {value} is out of range: allowed {min} to {max}; {fix}"
            ),
            ConfigError::FftNotPowerOfTwo { fft_points } => {
                // The neighbouring powers of two within the allowed range.
                let (min, max) = (MIN_FFT_POINTS as u32, MAX_FFT_POINTS as u32);
                let below = prev_pow2(fft_points).clamp(min, max);
                let above = prev_pow2(fft_points).saturating_mul(2).clamp(min, max);
                if below == above {
                    write!(
                        f,
                        "`fft_points` = {fft_points} is not a power of two; use {below} \
                         (allowed: powers of two from {min} to {max})"
                    )
                } else {
                    write!(
                        f,
                        "`fft_points` = {fft_points} is not a power of two; use {below} or \
                         {above} (allowed: powers of two from {min} to {max})"
                    )
                }
            }
            ConfigError::FftSmallerThanWindow {
                fft_points,
                window_samples,
            } => write!(
                f,
                "`fft_points` = {fft_points} is smaller than `window_samples` = {window_samples}: \
                 allowed {window_samples} or more; use fft_points = {} or a shorter window",
                window_samples
                    .checked_next_power_of_two()
                    .unwrap_or(u32::MAX)
            ),
            ConfigError::EdgeAboveNyquist {
                high_edge_hz,
                nyquist_hz,
            } => write!(
                f,
                "`high_edge_hz` = {high_edge_hz} is above the Nyquist frequency: allowed up to \
                 {nyquist_hz} Hz (half the sample rate); lower it or raise sample_rate_hz"
            ),
            ConfigError::EdgesOutOfOrder {
                low_edge_hz,
                high_edge_hz,
            } => write!(
                f,
                "`high_edge_hz` = {high_edge_hz} is not above `low_edge_hz` = {low_edge_hz}: \
                 allowed above {low_edge_hz}; swap or widen the band range"
            ),
            ConfigError::EmptyBand {
                band,
                lower_hz,
                upper_hz,
                bin_hz,
            } => write!(
                f,
                "band {band} ({lower_hz:.1} Hz to {upper_hz:.1} Hz) contains no FFT bin at \
                 {bin_hz:.2} Hz per bin: allowed are band layouts where every band holds a bin; \
                 use fewer `bands`, a larger `fft_points` or a higher `low_edge_hz`"
            ),
            ConfigError::SharedCentreBin { band, bin } => write!(
                f,
                "bands {} and {band} round to the same centre bin {bin}: allowed are layouts \
                 with distinct centre bins; use fewer `bands` or a larger `fft_points`",
                band - 1
            ),
            ConfigError::GainNotForRoundedBins => write!(
                f,
                "`band_gain` = equal-area cannot be combined with triangles = \
                 rounded-centre-bins (that construction fixes its own weights): allowed \
                 peak-one; use band_gain = peak-one or triangles = exact-frequency"
            ),
            ConfigError::StageConflict { field, with, fix } => {
                write!(f, "`{field}` cannot be combined with `{with}`: {fix}")
            }
        }
    }
}

impl core::error::Error for ConfigError {}

fn prev_pow2(x: u32) -> u32 {
    if x == 0 {
        1
    } else {
        1 << (31 - x.leading_zeros())
    }
}

fn check_finite(field: &'static str, v: f32) -> Result<(), ConfigError> {
    if v.is_finite() {
        Ok(())
    } else {
        Err(ConfigError::NotFinite { field })
    }
}

fn check_int(
    field: &'static str,
    v: u32,
    min: u32,
    max: u32,
    fix: &'static str,
) -> Result<(), ConfigError> {
    if v >= min && v <= max {
        Ok(())
    } else {
        Err(ConfigError::OutOfRange {
            field,
            value: Value::Int(v),
            min: Value::Int(min),
            max: Value::Int(max),
            fix,
        })
    }
}

fn check_float(
    field: &'static str,
    v: f32,
    min: f32,
    max: f32,
    fix: &'static str,
) -> Result<(), ConfigError> {
    check_finite(field, v)?;
    if v >= min && v <= max {
        Ok(())
    } else {
        Err(ConfigError::OutOfRange {
            field,
            value: Value::Float(v),
            min: Value::Float(min),
            max: Value::Float(max),
            fix,
        })
    }
}

/// A number in a [`ConfigError`], kept in the field's own type.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Value {
    /// An integer field.
    Int(u32),
    /// A signed integer field.
    Signed(i32),
    /// A float field.
    Float(f32),
}

impl fmt::Display for Value {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Value::Int(v) => write!(f, "{v}"),
            Value::Signed(v) => write!(f, "{v}"),
            Value::Float(v) => write!(f, "{v}"),
        }
    }
}

/// Length in bytes of [`FeatureConfig::to_bytes`].
pub const CONFIG_BYTES: usize = 60;

impl FeatureConfig {
    /// Checks every field, the band layout this configuration implies and the
    /// stages after the filterbank.
    ///
    /// Uses `f64` arithmetic (through `libm`) to place the bands; call it on the
    /// host or once at start-up, never on the per-frame path.
    pub fn validate(&self) -> Result<(), ConfigError> {
        check_int(
            "sample_rate_hz",
            self.sample_rate_hz,
            1000,
            384_000,
            "give the input stream's sample rate in Hz",
        )?;
        check_int(
            "window_samples",
            self.window_samples,
            MIN_FFT_POINTS as u32,
            MAX_FFT_POINTS as u32,
            "give the frame length in samples",
        )?;
        if !self.fft_points.is_power_of_two() {
            return Err(ConfigError::FftNotPowerOfTwo {
                fft_points: self.fft_points,
            });
        }
        check_int(
            "fft_points",
            self.fft_points,
            MIN_FFT_POINTS as u32,
            MAX_FFT_POINTS as u32,
            "choose a power of two in that range",
        )?;
        if self.fft_points < self.window_samples {
            return Err(ConfigError::FftSmallerThanWindow {
                fft_points: self.fft_points,
                window_samples: self.window_samples,
            });
        }
        check_int(
            "hop_samples",
            self.hop_samples,
            1,
            self.window_samples,
            "use a hop between 1 and the window length (frames must not leave gaps)",
        )?;
        if let Some(p) = self.dc_removal_pole {
            check_float(
                "dc_removal_pole",
                p,
                0.0,
                0.99999,
                "use a pole such as 0.999, or disable DC removal",
            )?;
        }
        if let Some(a) = self.pre_emphasis {
            check_float(
                "pre_emphasis",
                a,
                0.0,
                0.99999,
                "use a coefficient such as 0.97, or disable pre-emphasis",
            )?;
        }
        check_int("bands", self.bands, 1, MAX_BANDS as u32, "use fewer bands")?;
        check_finite("low_edge_hz", self.low_edge_hz)?;
        check_finite("high_edge_hz", self.high_edge_hz)?;
        check_finite("floor_db", self.floor_db)?;
        let nyquist = self.sample_rate_hz as f32 / 2.0;
        check_float(
            "low_edge_hz",
            self.low_edge_hz,
            0.0,
            nyquist,
            "use a lower edge between 0 Hz and half the sample rate",
        )?;
        if self.high_edge_hz > nyquist {
            return Err(ConfigError::EdgeAboveNyquist {
                high_edge_hz: self.high_edge_hz,
                nyquist_hz: nyquist,
            });
        }
        if self.high_edge_hz <= self.low_edge_hz {
            return Err(ConfigError::EdgesOutOfOrder {
                low_edge_hz: self.low_edge_hz,
                high_edge_hz: self.high_edge_hz,
            });
        }
        check_float(
            "floor_db",
            self.floor_db,
            -300.0,
            0.0,
            "use a floor such as -100 dB (energies below it are clamped)",
        )?;
        match self.triangles {
            TrianglePlacement::ExactFrequency => self.check_exact_bands()?,
            TrianglePlacement::RoundedCentreBins => {
                if self.band_gain != BandGain::PeakOne {
                    return Err(ConfigError::GainNotForRoundedBins);
                }
                self.check_rounded_bands()?
            }
        }
        self.check_stages()
    }

    fn check_stages(&self) -> Result<(), ConfigError> {
        let s = &self.stages;
        if let Some(p) = s.pcen {
            let fields = [
                ("stages.pcen.alpha", p.alpha, 1e-6, 1.0),
                ("stages.pcen.delta", p.delta, 1e-12, 1e6),
                ("stages.pcen.root", p.root, 1e-6, 1.0),
                ("stages.pcen.epsilon", p.epsilon, 1e-30, 1e6),
                ("stages.pcen.time_constant_s", p.time_constant_s, 1e-4, 1e4),
            ];
            for (field, v, lo, hi) in fields {
                check_float(
                    field,
                    v,
                    lo,
                    hi,
                    "see the PCEN defaults (alpha 0.98, delta 2, root 0.5, epsilon 1e-6, time constant 0.4 s)",
                )?;
            }
            if s.range_floor.is_some() {
                return Err(ConfigError::StageConflict {
                    field: "stages.range_floor",
                    with: "stages.pcen",
                    fix: "the range floor acts on log values and PCEN replaces the log; drop one",
                });
            }
            if s.mfcc.is_some() {
                return Err(ConfigError::StageConflict {
                    field: "stages.mfcc",
                    with: "stages.pcen",
                    fix: "MFCC transforms log-mel values and PCEN replaces the log; drop one",
                });
            }
        }
        if let Some(m) = s.level_map {
            if s.pcen.is_some() {
                return Err(ConfigError::StageConflict {
                    field: "stages.level_map",
                    with: "stages.pcen",
                    fix: "the level map acts on log values and PCEN replaces the log; drop one",
                });
            }
            if m.added_energy != 0.0 {
                check_float(
                    "stages.level_map.added_energy",
                    m.added_energy,
                    1e-30,
                    1e30,
                    "give the energy added before the log in the board's units (samples at ±1, no 1/N), or 0 for none",
                )?;
            }
            check_float(
                "stages.level_map.gain",
                m.gain,
                1e-4,
                1e4,
                "give the factor on the log's values, such as 0.1 for log10 from dB",
            )?;
            check_float(
                "stages.level_map.offset",
                m.offset,
                -1e6,
                1e6,
                "give the value added after the gain, in the output's unit",
            )?;
            for (field, v) in [
                ("stages.level_map.lower", m.lower),
                ("stages.level_map.upper", m.upper),
            ] {
                if let Some(v) = v {
                    check_float(field, v, -1e6, 1e6, "give a bound in the output's unit")?;
                }
            }
            if let (Some(lo), Some(hi)) = (m.lower, m.upper)
                && lo >= hi
            {
                return Err(ConfigError::StageConflict {
                    field: "stages.level_map.lower",
                    with: "stages.level_map.upper",
                    fix: "the lower bound must be below the upper bound",
                });
            }
        }
        if let Some(r) = s.range_floor {
            check_float(
                "stages.range_floor.below_peak_db",
                r.below_peak_db,
                1e-3,
                300.0,
                "give how far below each frame's loudest value the floor sits, such as 60 dB",
            )?;
        }
        if let Some(m) = s.mfcc {
            if m.log_energy {
                if self.spectrum != SpectrumKind::Power {
                    return Err(ConfigError::StageConflict {
                        field: "stages.mfcc.log_energy",
                        with: "spectrum",
                        fix: "the frame's energy is summed from a power spectrum: use spectrum = power, or drop log_energy",
                    });
                }
                check_int(
                    "bands",
                    self.bands,
                    1,
                    MAX_BANDS as u32 - 1,
                    "the log-energy takes one more slot than the bands: use fewer bands",
                )?;
            }
            check_int(
                "stages.mfcc.coefficients",
                m.coefficients,
                1,
                self.bands,
                "keep at most one coefficient per mel band",
            )?;
            if let Some(l) = m.lifter {
                check_int(
                    "stages.mfcc.lifter",
                    l,
                    1,
                    1000,
                    "use a lifter parameter such as 22, or none",
                )?;
            }
        }
        if let Some(q) = s.quantise {
            check_float(
                "stages.quantise.scale",
                q.scale,
                1e-6,
                1e6,
                "give the model input tensor's scale",
            )?;
            let (lo, hi) = q.codes.limits();
            if !(lo..=hi).contains(&q.zero_point) {
                return Err(ConfigError::OutOfRange {
                    field: "stages.quantise.zero_point",
                    value: Value::Signed(q.zero_point),
                    min: Value::Signed(lo),
                    max: Value::Signed(hi),
                    fix: match q.codes {
                        CodeRange::Int8 => "an int8 zero point lies in the code range",
                        CodeRange::Uint8 => "a uint8 zero point lies in the code range",
                    },
                });
            }
        }
        if let Some(w) = s.model_window {
            check_int(
                "stages.model_window.frames",
                w.frames,
                1,
                1024,
                "give the frames the model reads, such as 49",
            )?;
            check_int(
                "stages.model_window.stride",
                w.stride,
                1,
                w.frames,
                "run the model every 1 to `frames` frames",
            )?;
        }
        Ok(())
    }

    /// Values the filterbank hands the stages: one per band, and the frame's
    /// energy last when the MFCC takes the log-energy in place of c0.
    pub const fn stage_inputs(&self) -> usize {
        match self.stages.mfcc {
            Some(m) if m.log_energy => self.bands as usize + 1,
            _ => self.bands as usize,
        }
    }

    /// Values per frame after the stages: the MFCC's coefficients, or the
    /// bands.
    pub const fn stage_values(&self) -> usize {
        match self.stages.mfcc {
            Some(m) => m.coefficients as usize,
            None => self.bands as usize,
        }
    }

    fn bin_hz(&self) -> f64 {
        self.sample_rate_hz as f64 / self.fft_points as f64
    }

    fn check_exact_bands(&self) -> Result<(), ConfigError> {
        let bin_hz = self.bin_hz();
        let last_bin = self.fft_points / 2;
        for band in 0..self.bands {
            let lower = scale::band_edge_hz(self, band);
            let upper = scale::band_edge_hz(self, band + 2);
            // First bin strictly above the lower edge.
            let k = libm::floor(lower / bin_hz) as u32 + 1;
            let has_bin = k <= last_bin && (k as f64) * bin_hz < upper;
            if !has_bin {
                return Err(ConfigError::EmptyBand {
                    band,
                    lower_hz: lower as f32,
                    upper_hz: upper as f32,
                    bin_hz: bin_hz as f32,
                });
            }
        }
        Ok(())
    }

    fn check_rounded_bands(&self) -> Result<(), ConfigError> {
        let mut previous = scale::rounded_centre_bin(self, 0);
        for i in 1..=self.bands + 1 {
            let bin = scale::rounded_centre_bin(self, i);
            if bin <= previous {
                return Err(ConfigError::SharedCentreBin {
                    band: i.saturating_sub(1).max(1),
                    bin,
                });
            }
            previous = bin;
        }
        Ok(())
    }

    /// Number of spectrum bins `fft_points / 2 + 1` (DC to Nyquist).
    pub const fn spectrum_bins(&self) -> usize {
        self.fft_points as usize / 2 + 1
    }

    /// Samples carried from one frame to the next (`window - hop`).
    pub const fn overlap_samples(&self) -> usize {
        (self.window_samples - self.hop_samples) as usize
    }

    /// Canonical little-endian encoding: the bytes the fingerprint covers and the
    /// configuration section of a table blob holds.
    pub fn to_bytes(&self) -> [u8; CONFIG_BYTES] {
        let mut out = [0u8; CONFIG_BYTES];
        let mut w = ByteWriter {
            buf: &mut out,
            at: 0,
        };
        w.u32(self.sample_rate_hz);
        w.u32(self.window_samples);
        w.u32(self.fft_points);
        w.u32(self.hop_samples);
        w.u32(self.bands);
        w.u8(self.window as u8);
        w.u8(self.mel_scale as u8);
        w.u8(self.triangles as u8);
        w.u8(self.band_gain as u8);
        w.u8(self.spectrum as u8);
        w.u8(self.log as u8);
        w.u8(self.dc_removal_pole.is_some() as u8);
        w.u8(self.pre_emphasis.is_some() as u8);
        w.f32(self.dc_removal_pole.unwrap_or(0.0));
        w.f32(self.pre_emphasis.unwrap_or(0.0));
        w.f32(self.low_edge_hz);
        w.f32(self.high_edge_hz);
        w.f32(self.floor_db);
        // 48 bytes used; the rest is reserved for later stages and stays zero.
        out
    }

    /// Decodes [`FeatureConfig::to_bytes`]; `None` when an enum tag is unknown
    /// or a reserved byte is set. The result has no stages (they travel in
    /// their own bytes, [`StageConfig::from_bytes`]) and is not validated.
    pub fn from_bytes(b: &[u8; CONFIG_BYTES]) -> Option<FeatureConfig> {
        let mut r = ByteReader { buf: b, at: 0 };
        let sample_rate_hz = r.u32();
        let window_samples = r.u32();
        let fft_points = r.u32();
        let hop_samples = r.u32();
        let bands = r.u32();
        let window = match r.u8() {
            0 => WindowShape::Hann,
            1 => WindowShape::HannPeriodic,
            2 => WindowShape::Hamming,
            3 => WindowShape::HammingPeriodic,
            4 => WindowShape::Rectangular,
            _ => return None,
        };
        let mel_scale = match r.u8() {
            0 => MelScale::OShaughnessy,
            1 => MelScale::Slaney,
            _ => return None,
        };
        let triangles = match r.u8() {
            0 => TrianglePlacement::ExactFrequency,
            1 => TrianglePlacement::RoundedCentreBins,
            _ => return None,
        };
        let band_gain = match r.u8() {
            0 => BandGain::PeakOne,
            1 => BandGain::EqualArea,
            _ => return None,
        };
        let spectrum = match r.u8() {
            0 => SpectrumKind::Power,
            1 => SpectrumKind::Magnitude,
            _ => return None,
        };
        let log = match r.u8() {
            0 => LogKind::Decibel,
            1 => LogKind::Natural,
            _ => return None,
        };
        let has_dc = r.u8();
        let has_pre = r.u8();
        let dc = r.f32();
        let pre = r.f32();
        let low_edge_hz = r.f32();
        let high_edge_hz = r.f32();
        let floor_db = r.f32();
        if has_dc > 1 || has_pre > 1 || b[r.at..].iter().any(|&x| x != 0) {
            return None;
        }
        Some(FeatureConfig {
            sample_rate_hz,
            window_samples,
            fft_points,
            hop_samples,
            window,
            dc_removal_pole: if has_dc == 1 { Some(dc) } else { None },
            pre_emphasis: if has_pre == 1 { Some(pre) } else { None },
            bands,
            low_edge_hz,
            high_edge_hz,
            mel_scale,
            triangles,
            band_gain,
            spectrum,
            log,
            floor_db,
            stages: StageConfig::NONE,
        })
    }

    /// CRC-32 of [`FeatureConfig::to_bytes`], followed by
    /// [`StageConfig::to_bytes`] when any stage is configured: ties a table
    /// to the configuration it was generated for. A configuration without
    /// stages keeps the fingerprint it had before stages existed.
    pub fn fingerprint(&self) -> u32 {
        let mut crc = Crc32::new();
        crc.update(&self.to_bytes());
        if self.stages.any() {
            let (bytes, len) = self.stages.to_section();
            crc.update(&bytes[..len]);
        }
        crc.finish()
    }
}

struct ByteWriter<'a> {
    buf: &'a mut [u8; CONFIG_BYTES],
    at: usize,
}

impl ByteWriter<'_> {
    fn put(&mut self, bytes: &[u8]) {
        self.buf[self.at..self.at + bytes.len()].copy_from_slice(bytes);
        self.at += bytes.len();
    }
    fn u8(&mut self, v: u8) {
        self.put(&[v]);
    }
    fn u32(&mut self, v: u32) {
        self.put(&v.to_le_bytes());
    }
    fn f32(&mut self, v: f32) {
        self.put(&v.to_bits().to_le_bytes());
    }
}

struct ByteReader<'a> {
    buf: &'a [u8; CONFIG_BYTES],
    at: usize,
}

impl ByteReader<'_> {
    fn take<const N: usize>(&mut self) -> [u8; N] {
        let mut out = [0u8; N];
        out.copy_from_slice(&self.buf[self.at..self.at + N]);
        self.at += N;
        out
    }
    fn u8(&mut self) -> u8 {
        self.take::<1>()[0]
    }
    fn u32(&mut self) -> u32 {
        u32::from_le_bytes(self.take())
    }
    fn f32(&mut self) -> f32 {
        f32::from_bits(u32::from_le_bytes(self.take()))
    }
}
