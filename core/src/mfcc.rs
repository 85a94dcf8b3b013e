//! MFCC: the orthonormal DCT-II of each frame's log-mel values, to `K`
//! coefficients, with optional sinusoidal liftering.
//!
//! `c[k] = Σ_b C[k][b]·x[b]` with `C[k][b] = s_k·cos(π·k·(2b + 1) / (2B))`,
//! `s_0 = √(1/B)`, `s_k = √(2/B)`: the DCT-II with orthonormal scaling
//! (`C·Cᵀ = I`; `scipy.fft.dct(x, type=2, norm="ortho")`, common practice).
//! Liftering multiplies `c[k]` by `1 + (L/2)·sin(π·k / L)` (Juang, Rabiner &
//! Wilpon, IEEE TASSP 1987). The matrix and the lifter come from the host
//! generator as a table (`K × B` row-major, f32 or Q15), so the board holds
//! no cosine.
//!
//! Both stages read the log stage's output: [`FloatMfcc`] after
//! [`FloatLog`](crate::log::FloatLog), [`FixedMfcc`] after
//! [`FixedLog`](crate::log::FixedLog): `I8F8` in and `I24F8` out, 1/256
//! units both (an orthonormal transform keeps the scale, but not the range:
//! `c0 = √B·mean`, up to ±1024 for 64 bands at ±128, and a lifter multiplies
//! further, so the output is 32 bits wide).
//!
//! ```
//! use stapes_core::mfcc::{DctTable, FloatMfcc};
//! use stapes_core::stage::FrameStage;
//! // B = 2 bands, K = 2: C = [[√½, √½], [√½, −√½]].
//! let h = core::f32::consts::FRAC_1_SQRT_2;
//! let matrix = [h, h, h, -h];
//! let table = DctTable { bands: 2, coefficients: 2, matrix: &matrix[..], lifter: None };
//! let mut mfcc = FloatMfcc::<2>::new(table).unwrap();
//! let mut frame = [1.0, 1.0];
//! let c = mfcc.process(&mut frame);
//! assert!((c[0] - 2.0f32.sqrt()).abs() < 1e-6 && c[1].abs() < 1e-6);
//! ```

use fixed::types::{I8F8, I24F8};

/// Why an MFCC stage could not be built.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum MfccError {
    /// The matrix does not hold `coefficients × bands` values.
    MatrixSize {
        /// Values needed.
        expected: usize,
        /// Values given.
        actual: usize,
    },
    /// More coefficients than bands, none, or more than the stage holds.
    Coefficients {
        /// Coefficients asked for.
        coefficients: usize,
        /// Bands of the input.
        bands: usize,
        /// The stage's capacity.
        capacity: usize,
    },
    /// The lifter does not hold one value per coefficient.
    LifterSize {
        /// Values needed.
        expected: usize,
        /// Values given.
        actual: usize,
    },
}

impl core::fmt::Display for MfccError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {
            MfccError::MatrixSize { expected, actual } => write!(
                f,
                "the DCT table holds {actual} values but coefficients × bands is {expected}: \
                 regenerate it for this configuration"
            ),
            MfccError::Coefficients {
                coefficients,
                bands,
                capacity,
            } => write!(
                f,
                "{coefficients} MFCC coefficients do not fit {bands} bands and a stage of \
                 {capacity}: ask for 1 to min(bands, capacity) coefficients"
            ),
            MfccError::LifterSize { expected, actual } => write!(
                f,
                "the lifter holds {actual} values, not one per coefficient ({expected}): \
                 regenerate the table"
            ),
        }
    }
}

impl core::error::Error for MfccError {}

/// A DCT table as the generator writes it: `coefficients × bands` values,
/// row `k` for coefficient `k`, and an optional lifter (one per coefficient).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct DctTable<'t, T> {
    /// Bands of the input (`B`).
    pub bands: usize,
    /// Coefficients out (`K ≤ B`).
    pub coefficients: usize,
    /// `C[k][b]` at `k·B + b`.
    pub matrix: &'t [T],
    /// The lifter's factors, or none.
    pub lifter: Option<&'t [T]>,
}

impl<T> DctTable<'_, T> {
    fn check(&self, capacity: usize) -> Result<(), MfccError> {
        let (b, k) = (self.bands, self.coefficients);
        if k == 0 || k > b || k > capacity {
            return Err(MfccError::Coefficients {
                coefficients: k,
                bands: b,
                capacity,
            });
        }
        if self.matrix.len() != k * b {
            return Err(MfccError::MatrixSize {
                expected: k * b,
                actual: self.matrix.len(),
            });
        }
        match self.lifter {
            Some(l) if l.len() != k => Err(MfccError::LifterSize {
                expected: k,
                actual: l.len(),
            }),
            _ => Ok(()),
        }
    }
}

/// MFCC on the `f32` path: `K` coefficients (at most) from an f32 table.
/// Each coefficient is summed left to right over the bands, then liftered.
#[derive(Clone, Debug)]
pub struct FloatMfcc<'t, const K: usize> {
    table: DctTable<'t, f32>,
    log_energy: bool,
    out: [f32; K],
}

impl<'t, const K: usize> FloatMfcc<'t, K> {
    /// A stage reading `table` (checked once here).
    pub fn new(table: DctTable<'t, f32>) -> Result<Self, MfccError> {
        table.check(K)?;
        Ok(FloatMfcc {
            table,
            log_energy: false,
            out: [0.0; K],
        })
    }

    /// With `on`, c0 is replaced by the value after the bands (the frame's
    /// log-energy, see [`MfccConfig::log_energy`](crate::stage_config::MfccConfig::log_energy)).
    pub fn with_log_energy(self, on: bool) -> Self {
        FloatMfcc {
            log_energy: on,
            ..self
        }
    }
}

impl<const K: usize> crate::stage::FrameStage<f32> for FloatMfcc<'_, K> {
    type Out = f32;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [f32] {
        let t = &self.table;
        let k = t.coefficients.min(K);
        let x = &input[..t.bands.min(input.len())];
        for (c, row) in self.out[..k].iter_mut().zip(t.matrix.chunks_exact(t.bands)) {
            let mut acc = 0.0f32;
            for (&w, &v) in row.iter().zip(x) {
                acc += w * v;
            }
            *c = acc;
        }
        if let Some(lifter) = t.lifter {
            for (c, &l) in self.out[..k].iter_mut().zip(lifter) {
                *c *= l;
            }
        }
        if self.log_energy && k > 0 {
            if let Some(&e) = input.get(t.bands) {
                self.out[0] = e;
            }
        }
        &mut self.out[..k]
    }
}

/// MFCC on the fixed path: Q15 matrix (`C[k][b]` within ±1, as every
/// orthonormal DCT row is for `B ≥ 3`), lifter in Q11 (factors below 16),
/// `I8F8` in, `I24F8` out (1/256 units both). Each coefficient sums its
/// products exactly in `i64`, rounds once (halves up) to 1/256 units, and
/// is liftered with one more rounding; `|c| < 2^13·16` units, so nothing
/// saturates.
#[derive(Clone, Debug)]
pub struct FixedMfcc<'t, const K: usize> {
    table: DctTable<'t, i16>,
    log_energy: bool,
    out: [I24F8; K],
}

impl<'t, const K: usize> FixedMfcc<'t, K> {
    /// A stage reading `table` (checked once here).
    pub fn new(table: DctTable<'t, i16>) -> Result<Self, MfccError> {
        table.check(K)?;
        Ok(FixedMfcc {
            table,
            log_energy: false,
            out: [I24F8::ZERO; K],
        })
    }

    /// With `on`, c0 is replaced by the value after the bands (the frame's
    /// log-energy), in the same 1/256 units.
    pub fn with_log_energy(self, on: bool) -> Self {
        FixedMfcc {
            log_energy: on,
            ..self
        }
    }
}

/// Fraction bits of the fixed lifter.
pub const LIFTER_FRACTION_BITS: u32 = 11;

impl<const K: usize> crate::stage::FrameStage<I8F8> for FixedMfcc<'_, K> {
    type Out = I24F8;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [I8F8]) -> &'a mut [I24F8] {
        let t = &self.table;
        let k = t.coefficients.min(K);
        let x = &input[..t.bands.min(input.len())];
        for (i, (c, row)) in self.out[..k]
            .iter_mut()
            .zip(t.matrix.chunks_exact(t.bands))
            .enumerate()
        {
            // Each product of two 16-bit values fits i32 exactly (one 32-bit
            // multiply, also on cores without a long multiply); |Σ| ≤
            // B·2^15·2^15 < 2^40: summed exactly in i64.
            let acc: i64 = row
                .iter()
                .zip(x)
                .map(|(&w, &v)| (w as i32 * v.to_bits() as i32) as i64)
                .sum();
            let mut units = (acc + (1 << 14)) >> 15;
            if let Some(lifter) = t.lifter {
                let l = lifter.get(i).copied().unwrap_or(1 << LIFTER_FRACTION_BITS) as i64;
                units = (units * l + (1 << (LIFTER_FRACTION_BITS - 1))) >> LIFTER_FRACTION_BITS;
            }
            *c = I24F8::from_bits(units.clamp(i32::MIN as i64, i32::MAX as i64) as i32);
        }
        if self.log_energy && k > 0 {
            if let Some(&e) = input.get(t.bands) {
                self.out[0] = I24F8::from_bits(e.to_bits() as i32);
            }
        }
        &mut self.out[..k]
    }
}
