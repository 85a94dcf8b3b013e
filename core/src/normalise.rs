//! Per-band normalisation of the model's input: `(x − μ_b) / σ_b` for each
//! output value `b`, with the means and deviations a training pipeline
//! computed over its data (given in the configuration or by the host from a
//! set of clips).
//!
//! As a stage on its own ([`Normalise`], `f32` in place), or folded into the
//! quantiser ([`NormalisedQuantise`]): `q = clamp(round((x − μ_b) /
//! (σ_b·S)) + Z)`, one subtraction and one division per value with the
//! product `σ_b·S` formed once.
//!
//! ```
//! use stapes_core::normalise::{Normalise, BandStatistics};
//! use stapes_core::stage::FrameStage;
//! let (mean, deviation) = ([10.0, -5.0], [2.0, 0.5]);
//! let stats = BandStatistics::new(&mean, &deviation).unwrap();
//! let mut n = Normalise::new(stats);
//! assert_eq!(n.process(&mut [14.0, -5.5]), &[2.0, -1.0]);
//! ```

use crate::quantise::{AffineQuantiser, Code, QuantiserError};

/// Per-band means and standard deviations, borrowed (from a table in flash
/// or a blob).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BandStatistics<'t> {
    mean: &'t [f32],
    deviation: &'t [f32],
}

/// Why statistics were refused.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum NormaliseError {
    /// Means and deviations differ in count, or exceed the stage.
    Count {
        /// Means given.
        means: usize,
        /// Deviations given.
        deviations: usize,
        /// The stage's capacity (0 where none applies).
        capacity: usize,
    },
    /// A mean is not finite, or a deviation not positive and finite.
    Value {
        /// The band.
        band: usize,
    },
    /// The quantiser it is folded into was refused.
    Quantiser(QuantiserError),
}

impl core::fmt::Display for NormaliseError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {
            NormaliseError::Count {
                means,
                deviations,
                capacity,
            } => write!(
                f,
                "{means} means and {deviations} deviations: give one of each per output value \
                 (at most {capacity} for this stage)"
            ),
            NormaliseError::Value { band } => write!(
                f,
                "band {band}: its mean must be finite and its deviation positive and finite; \
                 recompute the statistics (a constant band has deviation 0: drop it or use 1)"
            ),
            NormaliseError::Quantiser(e) => write!(f, "{e}"),
        }
    }
}

impl core::error::Error for NormaliseError {}

impl<'t> BandStatistics<'t> {
    /// Checked statistics: equal counts, finite means, positive finite deviations.
    pub fn new(mean: &'t [f32], deviation: &'t [f32]) -> Result<Self, NormaliseError> {
        if mean.len() != deviation.len() {
            return Err(NormaliseError::Count {
                means: mean.len(),
                deviations: deviation.len(),
                capacity: 0,
            });
        }
        for (band, (&m, &d)) in mean.iter().zip(deviation).enumerate() {
            if !m.is_finite() || !(d.is_finite() && d > 0.0) {
                return Err(NormaliseError::Value { band });
            }
        }
        Ok(BandStatistics { mean, deviation })
    }

    /// Values covered.
    pub fn len(&self) -> usize {
        self.mean.len()
    }

    /// Whether no value is covered.
    pub fn is_empty(&self) -> bool {
        self.mean.is_empty()
    }
}

/// `(x − μ_b) / σ_b` in place; values beyond the statistics pass unchanged.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Normalise<'t> {
    stats: BandStatistics<'t>,
}

impl<'t> Normalise<'t> {
    /// A stage for `stats`.
    pub fn new(stats: BandStatistics<'t>) -> Self {
        Normalise { stats }
    }
}

impl crate::stage::FrameStage<f32> for Normalise<'_> {
    type Out = f32;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [f32] {
        for ((x, &m), &d) in input
            .iter_mut()
            .zip(self.stats.mean)
            .zip(self.stats.deviation)
        {
            *x = (*x - m) / d;
        }
        input
    }
}

/// Normalisation folded into the quantiser: `q = clamp(round((x − μ_b) /
/// (σ_b·S)) + Z)` for up to `C` values, codes of type `T` (`i8`/`u8`).
#[derive(Clone, Debug)]
pub struct NormalisedQuantise<'t, T, const C: usize> {
    mean: &'t [f32],
    quantisers: [AffineQuantiser; C],
    out: [T; C],
    clamped: u64,
}

impl<'t, T: Code, const C: usize> NormalisedQuantise<'t, T, C> {
    /// A stage for `stats` folded into `quantiser` (whose range must be `T`'s).
    pub fn new(
        stats: BandStatistics<'t>,
        quantiser: AffineQuantiser,
    ) -> Result<Self, NormaliseError> {
        if stats.len() > C {
            return Err(NormaliseError::Count {
                means: stats.len(),
                deviations: stats.len(),
                capacity: C,
            });
        }
        if quantiser.range() != T::RANGE {
            return Err(NormaliseError::Quantiser(QuantiserError::CodeType {
                quantiser: quantiser.range(),
                stage: T::RANGE,
            }));
        }
        let mut quantisers = [quantiser; C];
        for (q, &d) in quantisers.iter_mut().zip(stats.deviation) {
            *q = AffineQuantiser::new(d * quantiser.scale(), quantiser.zero_point(), T::RANGE)
                .map_err(NormaliseError::Quantiser)?;
        }
        Ok(NormalisedQuantise {
            mean: stats.mean,
            quantisers,
            out: [T::default(); C],
            clamped: 0,
        })
    }

    /// Values clamped (or NaN) since the start or the last reset.
    pub fn clamped(&self) -> u64 {
        self.clamped
    }
}

impl<T: Code, const C: usize> crate::stage::FrameStage<f32> for NormalisedQuantise<'_, T, C> {
    type Out = T;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [T] {
        let n = input.len().min(self.mean.len()).min(C);
        for (((o, &x), &m), q) in self.out[..n]
            .iter_mut()
            .zip(&input[..n])
            .zip(self.mean)
            .zip(&self.quantisers)
        {
            let (code, c) = q.code(x - m);
            *o = T::from_code(code);
            self.clamped += c as u64;
        }
        &mut self.out[..n]
    }

    fn reset(&mut self) {
        self.clamped = 0;
    }
}

/// Normalisation folded into the fixed path's quantiser, integers only:
/// for value `b` in raw units `x` (1/256 for log and MFCC values, 1/65536
/// for PCEN's), `q = clamp(round((x − o_b)·M_b / 2^k) + Z)`, ties away from
/// zero, with `o_b = round(μ_b·2^f)` and `M_b / 2^k ≈ 1 / (σ_b·S·2^f)` from
/// the host (`StageTables::norm_offsets`, `norm_multipliers` and the shared
/// shift). The difference saturates at ±(2^31 − 1), beyond which the host's
/// parts guarantee a clamped code.
///
/// ```
/// use stapes_core::normalise::FixedNormalisedQuantise;
/// use stapes_core::quantise::CodeRange;
/// use stapes_core::stage::FrameStage;
/// use stapes_core::fixed::types::I8F8;
/// // Value 0: mean 1.0 (256 raw), σ·S = 0.5 → M/2^k = 1/128; value 1: mean 0, σ·S = 1.
/// let (offsets, multipliers) = ([256, 0], [1 << 23, 1 << 22]);
/// let mut q = FixedNormalisedQuantise::<i8, 2>::new(&offsets, &multipliers, 30, 0, CodeRange::Int8).unwrap();
/// let mut levels = [I8F8::from_num(2.25), I8F8::from_num(-1.5)];
/// assert_eq!(q.process(&mut levels), &[3, -2]); // (2.25 − 1)/0.5 = 2.5 → 3; −1.5 → −2 (ties away from zero)
/// ```
#[derive(Clone, Debug)]
pub struct FixedNormalisedQuantise<'t, T, const C: usize> {
    offsets: &'t [i32],
    multipliers: &'t [i32],
    shift: u32,
    zero_point: i32,
    range: crate::quantise::CodeRange,
    out: [T; C],
    clamped: u64,
}

impl<'t, T: Code, const C: usize> FixedNormalisedQuantise<'t, T, C> {
    /// A stage from the host's parts: one offset and one multiplier (≥ 1)
    /// per value, at most `C`; a shared shift ≤ 62; the zero point within
    /// `range`, which must be `T`'s.
    pub fn new(
        offsets: &'t [i32],
        multipliers: &'t [i32],
        shift: u32,
        zero_point: i32,
        range: crate::quantise::CodeRange,
    ) -> Result<Self, NormaliseError> {
        if offsets.len() != multipliers.len() || offsets.len() > C {
            return Err(NormaliseError::Count {
                means: offsets.len(),
                deviations: multipliers.len(),
                capacity: C,
            });
        }
        if let Some(band) = multipliers.iter().position(|&m| m < 1) {
            return Err(NormaliseError::Value { band });
        }
        if shift > 62 {
            return Err(NormaliseError::Quantiser(QuantiserError::Parts {
                multiplier: multipliers.first().copied().unwrap_or(0),
                shift,
            }));
        }
        if range != T::RANGE {
            return Err(NormaliseError::Quantiser(QuantiserError::CodeType {
                quantiser: range,
                stage: T::RANGE,
            }));
        }
        let (lo, hi) = range.limits();
        if !(lo..=hi).contains(&zero_point) {
            return Err(NormaliseError::Quantiser(QuantiserError::ZeroPoint {
                zero_point,
                range,
            }));
        }
        Ok(FixedNormalisedQuantise {
            offsets,
            multipliers,
            shift,
            zero_point,
            range,
            out: [T::default(); C],
            clamped: 0,
        })
    }

    /// Values clamped since the start or the last reset.
    pub fn clamped(&self) -> u64 {
        self.clamped
    }
}

impl<In: crate::quantise::RawUnits, T: Code, const C: usize> crate::stage::FrameStage<In>
    for FixedNormalisedQuantise<'_, T, C>
{
    type Out = T;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [In]) -> &'a mut [T] {
        let n = input.len().min(self.offsets.len()).min(C);
        let (lo, hi) = self.range.limits();
        let half = (1i64 << self.shift) >> 1;
        for (((o, &x), &off), &m) in self.out[..n]
            .iter_mut()
            .zip(&input[..n])
            .zip(self.offsets)
            .zip(self.multipliers)
        {
            let d = (x.raw_units() as i64 - off as i64).clamp(-(i32::MAX as i64), i32::MAX as i64);
            // |d·M| < 2^62: exact in i64.
            let p = d * m as i64;
            let magnitude = (p.unsigned_abs() as i64 + half) >> self.shift;
            let q = if p < 0 { -magnitude } else { magnitude } + self.zero_point as i64;
            let c = q.clamp(lo as i64, hi as i64);
            self.clamped += (c != q) as u64;
            *o = T::from_code(c as i32);
        }
        &mut self.out[..n]
    }

    fn reset(&mut self) {
        self.clamped = 0;
    }
}
