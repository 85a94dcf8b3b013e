//! The tables of the stages after the filterbank, as the host generator
//! ships them beside the filterbank's: the DCT matrix and lifter (f32 and
//! Q15/Q11), the per-value statistics, and the fixed path's integer
//! parameters for PCEN and the quantiser (derived from the configuration's
//! floats on the host, so a board needs no float).
//!
//! [`StageTables::check`] ties them to a configuration once; the accessors
//! then hand each stage its part.
//!
//! ```
//! use stapes_core::presets::SPEECH16K_40;
//! use stapes_core::stage_tables::StageTables;
//! // A configuration without stages needs no stage table.
//! assert!(StageTables::NONE.check(&SPEECH16K_40).is_ok());
//! ```

use crate::config::FeatureConfig;
use crate::mfcc::DctTable;
use crate::normalise::BandStatistics;
use crate::pcen_fixed::{FixedPcenParams, Soft};
use crate::quantise::{CodeRange, FixedQuantiser};

/// Words in [`FixedStageParams::to_words`].
pub const FIXED_STAGE_WORDS: usize = 14;

/// The fixed path's integer parameters of the stages.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FixedStageParams {
    /// PCEN's parameters (zeros when the configuration has no PCEN).
    pub pcen: FixedPcenParams,
    /// The quantiser's multiplier `M` (`code = round(x·M / 2^k) + Z` for `x`
    /// in the level stage's units); 0 when there is no quantiser.
    pub quantise_multiplier: i32,
    /// The quantiser's shift `k`.
    pub quantise_shift: u32,
    /// Fraction bits of the values the quantiser reads (8 for log and MFCC
    /// values in 1/256 units, 16 for PCEN's `I16F16`).
    pub quantise_fraction_bits: u32,
    /// The range floor's distance below each frame's peak in 1/256 units of
    /// the log's output (`I8F8` bits); 0 when there is no range floor.
    pub range_floor_q8: i32,
    /// The shift `k` shared by the normalising quantiser's multipliers
    /// ([`StageTables::norm_multipliers`]); 0 without normalisation.
    pub norm_shift: u32,
}

impl FixedStageParams {
    /// No fixed stage parameters.
    pub const NONE: FixedStageParams = FixedStageParams {
        pcen: FixedPcenParams {
            alpha_q16: 0,
            root_q16: 0,
            smoothing_q31: 0,
            epsilon: Soft::ZERO,
            delta: Soft::ZERO,
            delta_root: Soft::ZERO,
        },
        quantise_multiplier: 0,
        quantise_shift: 0,
        quantise_fraction_bits: 0,
        range_floor_q8: 0,
        norm_shift: 0,
    };

    /// The blob encoding: one little-endian word per field, [`Soft`]s as
    /// mantissa then exponent.
    pub fn to_words(&self) -> [i32; FIXED_STAGE_WORDS] {
        let p = &self.pcen;
        [
            p.alpha_q16,
            p.root_q16,
            p.smoothing_q31 as i32,
            p.epsilon.mantissa as i32,
            p.epsilon.exponent,
            p.delta.mantissa as i32,
            p.delta.exponent,
            p.delta_root.mantissa as i32,
            p.delta_root.exponent,
            self.quantise_multiplier,
            self.quantise_shift as i32,
            self.quantise_fraction_bits as i32,
            self.range_floor_q8,
            self.norm_shift as i32,
        ]
    }

    /// Decodes [`FixedStageParams::to_words`]; `None` for a wrong length.
    pub fn from_words(w: &[i32]) -> Option<FixedStageParams> {
        if w.len() != FIXED_STAGE_WORDS {
            return None;
        }
        let soft = |m: i32, e: i32| Soft {
            mantissa: m as u32,
            exponent: e,
        };
        Some(FixedStageParams {
            pcen: FixedPcenParams {
                alpha_q16: w[0],
                root_q16: w[1],
                smoothing_q31: w[2] as u32,
                epsilon: soft(w[3], w[4]),
                delta: soft(w[5], w[6]),
                delta_root: soft(w[7], w[8]),
            },
            quantise_multiplier: w[9],
            quantise_shift: w[10] as u32,
            quantise_fraction_bits: w[11] as u32,
            range_floor_q8: w[12],
            norm_shift: w[13] as u32,
        })
    }
}

/// The stage tables of one configuration. Empty slices for stages it does
/// not have.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StageTables<'t> {
    /// DCT matrix, `coefficients × bands`, row-major, f32.
    pub dct_f32: &'t [f32],
    /// The same in Q15.
    pub dct_q15: &'t [i16],
    /// Lifter factors, one per coefficient, f32 (empty without a lifter).
    pub lifter_f32: &'t [f32],
    /// The same in Q11 ([`crate::mfcc::LIFTER_FRACTION_BITS`]).
    pub lifter_q11: &'t [i16],
    /// Per-value means (empty without normalisation).
    pub mean: &'t [f32],
    /// Per-value standard deviations (positive).
    pub deviation: &'t [f32],
    /// The fixed path's normalising quantiser: per value `round(μ·2^f)` in
    /// the quantiser's input units (empty without normalisation and a
    /// quantiser).
    pub norm_offsets: &'t [i32],
    /// Per value `M` with `M / 2^k ≈ 1 / (σ·S·2^f)`, `k` the shared
    /// [`FixedStageParams::norm_shift`].
    pub norm_multipliers: &'t [i32],
    /// The fixed path's integer parameters.
    pub fixed: FixedStageParams,
}

/// Why stage tables do not fit a configuration.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum StageTableError {
    /// A table has the wrong number of values.
    Length {
        /// Which table.
        table: &'static str,
        /// Values the configuration needs.
        expected: usize,
        /// Values given.
        actual: usize,
    },
    /// A deviation is not a positive finite number.
    Deviation {
        /// The value's index.
        index: usize,
    },
    /// The fixed parameters do not match the configuration's stages.
    FixedParams,
}

impl core::fmt::Display for StageTableError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {
            StageTableError::Length {
                table,
                expected,
                actual,
            } => write!(
                f,
                "the stage table `{table}` holds {actual} values but the configuration needs \
                 {expected}: regenerate the tables for this configuration"
            ),
            StageTableError::Deviation { index } => write!(
                f,
                "normalisation deviation {index} is not a positive finite number: recompute the \
                 statistics"
            ),
            StageTableError::FixedParams => write!(
                f,
                "the fixed-point stage parameters do not match the configuration's stages: \
                 regenerate the tables"
            ),
        }
    }
}

impl core::error::Error for StageTableError {}

impl<'t> StageTables<'t> {
    /// No stage tables (a configuration without MFCC, normalisation, PCEN or
    /// quantiser).
    pub const NONE: StageTables<'static> = StageTables {
        dct_f32: &[],
        dct_q15: &[],
        lifter_f32: &[],
        lifter_q11: &[],
        mean: &[],
        deviation: &[],
        norm_offsets: &[],
        norm_multipliers: &[],
        fixed: FixedStageParams::NONE,
    };

    /// Checks every table's length against `config`'s stages, and that the
    /// fixed parameters are present exactly where a stage needs them.
    pub fn check(&self, config: &FeatureConfig) -> Result<(), StageTableError> {
        let s = &config.stages;
        let len = |table, expected: usize, actual: usize| {
            if expected == actual {
                Ok(())
            } else {
                Err(StageTableError::Length {
                    table,
                    expected,
                    actual,
                })
            }
        };
        let (dct, lifter) = match s.mfcc {
            Some(m) => (
                m.coefficients as usize * config.bands as usize,
                if m.lifter.is_some() {
                    m.coefficients as usize
                } else {
                    0
                },
            ),
            None => (0, 0),
        };
        len("dct_f32", dct, self.dct_f32.len())?;
        len("dct_q15", dct, self.dct_q15.len())?;
        len("lifter_f32", lifter, self.lifter_f32.len())?;
        len("lifter_q11", lifter, self.lifter_q11.len())?;
        let values = if s.normalise {
            config.stage_values()
        } else {
            0
        };
        len("mean", values, self.mean.len())?;
        len("deviation", values, self.deviation.len())?;
        let folded = if s.quantise.is_some() { values } else { 0 };
        len("norm_offsets", folded, self.norm_offsets.len())?;
        len("norm_multipliers", folded, self.norm_multipliers.len())?;
        if self.norm_multipliers.iter().any(|&m| m < 1)
            || (self.fixed.norm_shift > 62)
            || ((folded == 0) != (self.fixed.norm_shift == 0))
        {
            return Err(StageTableError::FixedParams);
        }
        if let Some(index) = self
            .deviation
            .iter()
            .position(|d| !(d.is_finite() && *d > 0.0))
        {
            return Err(StageTableError::Deviation { index });
        }
        let f = &self.fixed;
        let pcen_ok = (s.pcen.is_some()) == (f.pcen.smoothing_q31 != 0);
        let floor_ok = (s.range_floor.is_some()) == (f.range_floor_q8 > 0);
        let quantise_ok = match s.quantise {
            Some(_) => {
                f.quantise_multiplier >= 1
                    && f.quantise_shift <= 62
                    && f.quantise_fraction_bits == if s.pcen.is_some() { 16 } else { 8 }
            }
            None => {
                f.quantise_multiplier == 0 && f.quantise_shift == 0 && f.quantise_fraction_bits == 0
            }
        };
        if !(pcen_ok && floor_ok && quantise_ok) {
            return Err(StageTableError::FixedParams);
        }
        Ok(())
    }

    /// The f32 DCT table, if the configuration has MFCC.
    pub fn dct_f32(&self, config: &FeatureConfig) -> Option<DctTable<'t, f32>> {
        config.stages.mfcc.map(|m| DctTable {
            bands: config.bands as usize,
            coefficients: m.coefficients as usize,
            matrix: self.dct_f32,
            lifter: m.lifter.map(|_| self.lifter_f32),
        })
    }

    /// The Q15 DCT table (Q11 lifter), if the configuration has MFCC.
    pub fn dct_q15(&self, config: &FeatureConfig) -> Option<DctTable<'t, i16>> {
        config.stages.mfcc.map(|m| DctTable {
            bands: config.bands as usize,
            coefficients: m.coefficients as usize,
            matrix: self.dct_q15,
            lifter: m.lifter.map(|_| self.lifter_q11),
        })
    }

    /// The normalisation statistics, if the configuration normalises.
    pub fn statistics(&self, config: &FeatureConfig) -> Option<BandStatistics<'t>> {
        if config.stages.normalise {
            BandStatistics::new(self.mean, self.deviation).ok()
        } else {
            None
        }
    }

    /// The fixed path's quantiser, if the configuration quantises.
    pub fn fixed_quantiser(&self, config: &FeatureConfig) -> Option<FixedQuantiser> {
        let q = config.stages.quantise?;
        FixedQuantiser::from_parts(
            self.fixed.quantise_multiplier,
            self.fixed.quantise_shift,
            q.zero_point,
            q.codes,
        )
        .ok()
    }

    /// The fixed path's range floor (`I8F8`), if the configuration has one.
    pub fn fixed_range_floor(
        &self,
        config: &FeatureConfig,
    ) -> Option<crate::range_floor::RangeFloor<fixed::types::I8F8>> {
        config.stages.range_floor.map(|_| {
            let bits = self.fixed.range_floor_q8.clamp(0, i16::MAX as i32) as i16;
            crate::range_floor::RangeFloor::new(fixed::types::I8F8::from_bits(bits))
        })
    }

    /// The fixed path's quantiser with the normalisation folded in, if the
    /// configuration normalises and quantises (codes of type `T`, at most
    /// `C` values).
    pub fn fixed_normalised_quantiser<T: crate::quantise::Code, const C: usize>(
        &self,
        config: &FeatureConfig,
    ) -> Option<crate::normalise::FixedNormalisedQuantise<'t, T, C>> {
        let q = config.stages.quantise.filter(|_| config.stages.normalise)?;
        crate::normalise::FixedNormalisedQuantise::new(
            self.norm_offsets,
            self.norm_multipliers,
            self.fixed.norm_shift,
            q.zero_point,
            q.codes,
        )
        .ok()
    }

    /// The fixed path's PCEN parameters, if the configuration has PCEN.
    pub fn fixed_pcen(&self, config: &FeatureConfig) -> Option<FixedPcenParams> {
        config.stages.pcen.map(|_| self.fixed.pcen)
    }
}

/// The code range's name in reports.
pub fn code_name(range: CodeRange) -> &'static str {
    match range {
        CodeRange::Int8 => "int8",
        CodeRange::Uint8 => "uint8",
    }
}
