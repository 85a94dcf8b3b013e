//! Affine quantisation of the model's input: `q = clamp(round(x / S) + Z)`,
//! with the scale `S` and zero point `Z` of the model's input tensor (the
//! scheme of Jacob et al., "Quantization and Training of Neural Networks for
//! Efficient Integer-Arithmetic-Only Inference", CVPR 2018: `r = S·(q − Z)`).
//!
//! Rounding: to the nearest integer, **ties away from zero** (2.5 → 3,
//! −2.5 → −3), the rule of C's `round` that common inference runtimes use
//! for their reference quantiser (common practice). The quotient `x / S` is
//! one IEEE-754 division, the same on every target; the rounding is done in
//! integers from it, exactly (no `+ 0.5` trick, which rounds 0.49999997 up).
//! Values beyond the code range are clamped and counted; NaN is taken as 0
//! and counted with them.
//!
//! ```
//! use stapes_core::quantise::{AffineQuantiser, CodeRange};
//! let q = AffineQuantiser::new(0.5, -3, CodeRange::Int8).unwrap();
//! let mut out = [0i32; 5];
//! let clamped = q.quantise(&[0.0, 1.25, -1.25, 100.0, 0.24], &mut out);
//! assert_eq!(out, [-3, 0, -6, 127, -3]); // 1.25 / 0.5 = 2.5 → 3, then + (−3)
//! assert_eq!(clamped, 1);
//! ```

/// The code range of the model's input tensor.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CodeRange {
    /// `i8`: −128 ..= 127.
    Int8,
    /// `u8`: 0 ..= 255.
    Uint8,
}

impl CodeRange {
    /// The smallest and largest code.
    pub const fn limits(self) -> (i32, i32) {
        match self {
            CodeRange::Int8 => (-128, 127),
            CodeRange::Uint8 => (0, 255),
        }
    }
}

/// Why a quantiser could not be built.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum QuantiserError {
    /// The scale is not a positive, finite, normal number.
    Scale {
        /// The scale given.
        scale: f32,
    },
    /// A stage's code type is not the quantiser's code range.
    CodeType {
        /// The quantiser's range.
        quantiser: CodeRange,
        /// The stage's code type's range.
        stage: CodeRange,
    },
    /// A fixed quantiser's multiplier is not positive or its shift above 62.
    Parts {
        /// The multiplier given.
        multiplier: i32,
        /// The shift given.
        shift: u32,
    },
    /// The zero point lies outside the code range.
    ZeroPoint {
        /// The zero point given.
        zero_point: i32,
        /// The code range.
        range: CodeRange,
    },
}

impl core::fmt::Display for QuantiserError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match *self {
            QuantiserError::Scale { scale } => write!(
                f,
                "quantiser scale {scale} is not a positive finite number: give the model input \
                 tensor's scale (for example 0.1)"
            ),
            QuantiserError::CodeType { quantiser, stage } => write!(
                f,
                "the quantiser gives {quantiser:?} codes but the stage stores {stage:?}: use \
                 QuantiseStage<i8, _> for Int8 and QuantiseStage<u8, _> for Uint8"
            ),
            QuantiserError::Parts { multiplier, shift } => write!(
                f,
                "fixed quantiser multiplier {multiplier} and shift {shift}: the multiplier must \
                 be at least 1 and the shift at most 62; derive both from the scale on the host"
            ),
            QuantiserError::ZeroPoint { zero_point, range } => {
                let (lo, hi) = range.limits();
                write!(
                    f,
                    "zero point {zero_point} lies outside the {range:?} codes {lo} ..= {hi}: give \
                     the model input tensor's zero point"
                )
            }
        }
    }
}

impl core::error::Error for QuantiserError {}

/// `q = clamp(round(x / scale) + zero_point)` into a [`CodeRange`].
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AffineQuantiser {
    scale: f32,
    zero_point: i32,
    range: CodeRange,
}

impl AffineQuantiser {
    /// A quantiser for the model input's `scale` and `zero_point`.
    pub fn new(scale: f32, zero_point: i32, range: CodeRange) -> Result<Self, QuantiserError> {
        if !(scale.is_normal() && scale > 0.0) {
            return Err(QuantiserError::Scale { scale });
        }
        let (lo, hi) = range.limits();
        if !(lo..=hi).contains(&zero_point) {
            return Err(QuantiserError::ZeroPoint { zero_point, range });
        }
        Ok(AffineQuantiser {
            scale,
            zero_point,
            range,
        })
    }

    /// The scale `S`.
    pub fn scale(&self) -> f32 {
        self.scale
    }

    /// The zero point `Z`.
    pub fn zero_point(&self) -> i32 {
        self.zero_point
    }

    /// The code range.
    pub fn range(&self) -> CodeRange {
        self.range
    }

    /// The code for one value, and whether it was clamped (or NaN).
    #[inline]
    pub fn code(&self, x: f32) -> (i32, bool) {
        let (lo, hi) = self.range.limits();
        let v = x / self.scale;
        if v.is_nan() {
            return (self.zero_point, true);
        }
        // Beyond ±2^30 every code clamps; below it the integer steps are exact.
        const LIMIT: f32 = 1_073_741_824.0;
        if v >= LIMIT || v <= -LIMIT {
            return (if v > 0.0 { hi } else { lo }, true);
        }
        let q = round_half_away(v) + self.zero_point;
        if q < lo {
            (lo, true)
        } else if q > hi {
            (hi, true)
        } else {
            (q, false)
        }
    }

    /// Quantises `x` into `out` (the shorter length) and returns how many
    /// values were clamped (NaN included).
    #[inline]
    pub fn quantise(&self, x: &[f32], out: &mut [i32]) -> usize {
        let mut clamped = 0;
        for (o, &v) in out.iter_mut().zip(x) {
            let (q, c) = self.code(v);
            *o = q;
            clamped += c as usize;
        }
        clamped
    }
}

/// `v` rounded to the nearest integer, ties away from zero, for
/// `|v| < 2^30`: the truncation `t` is exact, and so is `v − t` (Sterbenz's
/// lemma for `|v| ≥ 1`, since `t ≤ v < t + 1 ≤ 2t`; `v` itself below 1; and
/// 0 from 2^23 on, where every float is an integer).
#[inline]
fn round_half_away(v: f32) -> i32 {
    let t = v as i32; // towards zero
    let frac = v - t as f32;
    if frac >= 0.5 {
        t + 1
    } else if frac <= -0.5 {
        t - 1
    } else {
        t
    }
}

/// A code type of the model's input tensor: `i8` or `u8`.
pub trait Code: Copy + Default + sealed::Sealed {
    /// Its code range.
    const RANGE: CodeRange;
    /// A code within [`Code::RANGE`].
    fn from_code(q: i32) -> Self;
}

mod sealed {
    pub trait Sealed {}
    impl Sealed for i8 {}
    impl Sealed for u8 {}
}

impl Code for i8 {
    const RANGE: CodeRange = CodeRange::Int8;
    #[inline(always)]
    fn from_code(q: i32) -> i8 {
        q as i8
    }
}

impl Code for u8 {
    const RANGE: CodeRange = CodeRange::Uint8;
    #[inline(always)]
    fn from_code(q: i32) -> u8 {
        q as u8
    }
}

/// The quantiser as a [stage](crate::stage) of the `f32` path: up to `C`
/// values in, as many codes of type `T` out, clamped values counted.
///
/// ```
/// use stapes_core::quantise::{AffineQuantiser, CodeRange, QuantiseStage};
/// use stapes_core::stage::FrameStage;
/// let q = AffineQuantiser::new(0.25, 10, CodeRange::Int8).unwrap();
/// let mut stage = QuantiseStage::<i8, 4>::new(q).unwrap();
/// assert_eq!(stage.process(&mut [0.0, 1.0, -100.0]), &[10, 14, -128]);
/// assert_eq!(stage.clamped(), 1);
/// ```
#[derive(Clone, Debug)]
pub struct QuantiseStage<T, const C: usize> {
    quantiser: AffineQuantiser,
    out: [T; C],
    clamped: u64,
}

impl<T: Code, const C: usize> QuantiseStage<T, C> {
    /// A stage for `quantiser`, whose code range must be `T`'s.
    pub fn new(quantiser: AffineQuantiser) -> Result<Self, QuantiserError> {
        if quantiser.range != T::RANGE {
            return Err(QuantiserError::CodeType {
                quantiser: quantiser.range,
                stage: T::RANGE,
            });
        }
        Ok(QuantiseStage {
            quantiser,
            out: [T::default(); C],
            clamped: 0,
        })
    }

    /// Values clamped (or NaN) since the start or the last reset.
    pub fn clamped(&self) -> u64 {
        self.clamped
    }
}

impl<T: Code, const C: usize> crate::stage::FrameStage<f32> for QuantiseStage<T, C> {
    type Out = T;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [T] {
        let n = input.len().min(C);
        for (o, &x) in self.out[..n].iter_mut().zip(&input[..n]) {
            let (q, c) = self.quantiser.code(x);
            *o = T::from_code(q);
            self.clamped += c as u64;
        }
        &mut self.out[..n]
    }

    fn reset(&mut self) {
        self.clamped = 0;
    }
}

/// The fixed path's affine quantiser, integers only: for a value `x_raw` in
/// 1/256 units (the bits of an `I8F8` level or an `I24F8` coefficient),
/// `q = clamp(round(x_raw·M / 2^k) + Z)`, ties away from zero, with the
/// multiplier `M` and shift `k` the host derives from the model's scale
/// (`M / 2^k ≈ 1 / (256·S)`, `M` below 2^31: a relative error under 2^-30;
/// `stapes_sim::quantiser_parts`). The board needs no float.
///
/// ```
/// use stapes_core::quantise::{CodeRange, FixedQuantiser};
/// // S = 0.5 dB per code: M / 2^k = 1/128.
/// let q = FixedQuantiser::from_parts(1, 7, 0, CodeRange::Int8).unwrap();
/// assert_eq!(q.code(192), (2, false)); // 0.75 dB / 0.5 = 1.5 → 2
/// assert_eq!(q.code(-192), (-2, false)); // ties away from zero
/// assert_eq!(q.code(-40000), (-128, true));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FixedQuantiser {
    multiplier: i32,
    shift: u32,
    zero_point: i32,
    range: CodeRange,
}

impl FixedQuantiser {
    /// A quantiser from its integer parts: `multiplier ≥ 1`, `shift ≤ 62`.
    pub fn from_parts(
        multiplier: i32,
        shift: u32,
        zero_point: i32,
        range: CodeRange,
    ) -> Result<Self, QuantiserError> {
        if multiplier < 1 || shift > 62 {
            return Err(QuantiserError::Parts { multiplier, shift });
        }
        let (lo, hi) = range.limits();
        if !(lo..=hi).contains(&zero_point) {
            return Err(QuantiserError::ZeroPoint { zero_point, range });
        }
        Ok(FixedQuantiser {
            multiplier,
            shift,
            zero_point,
            range,
        })
    }

    /// The code range.
    pub fn range(&self) -> CodeRange {
        self.range
    }

    /// The code for a value in the units its parts were derived for (1/256
    /// for log and MFCC values), and whether it was clamped.
    #[inline]
    pub fn code(&self, raw: i32) -> (i32, bool) {
        let (lo, hi) = self.range.limits();
        // |raw·M| < 2^62: exact in i64.
        let p = raw as i64 * self.multiplier as i64;
        let half = (1i64 << self.shift) >> 1;
        let magnitude = (p.unsigned_abs() as i64 + half) >> self.shift;
        let q = if p < 0 { -magnitude } else { magnitude } + self.zero_point as i64;
        if q < lo as i64 {
            (lo, true)
        } else if q > hi as i64 {
            (hi, true)
        } else {
            (q as i32, false)
        }
    }
}

/// A fixed-path value as the integer the quantiser reads: its bits (1/256
/// units for `I8F8` and `I24F8`, 1/65536 for `I16F16`).
pub trait RawUnits: Copy {
    /// The value's bits.
    fn raw_units(self) -> i32;
}

impl RawUnits for fixed::types::I8F8 {
    #[inline(always)]
    fn raw_units(self) -> i32 {
        self.to_bits() as i32
    }
}

/// PCEN's output: 1/65536 units (the host derives the quantiser's parts for
/// 16 fraction bits).
impl RawUnits for fixed::types::I16F16 {
    #[inline(always)]
    fn raw_units(self) -> i32 {
        self.to_bits()
    }
}

impl RawUnits for fixed::types::I24F8 {
    #[inline(always)]
    fn raw_units(self) -> i32 {
        self.to_bits()
    }
}

/// [`FixedQuantiser`] as a stage of the fixed path: up to `C` values in
/// 1/256 units (after `FixedLog` or `FixedMfcc`) to codes of type `T`.
#[derive(Clone, Debug)]
pub struct FixedQuantiseStage<T, const C: usize> {
    quantiser: FixedQuantiser,
    out: [T; C],
    clamped: u64,
}

impl<T: Code, const C: usize> FixedQuantiseStage<T, C> {
    /// A stage for `quantiser`, whose code range must be `T`'s.
    pub fn new(quantiser: FixedQuantiser) -> Result<Self, QuantiserError> {
        if quantiser.range != T::RANGE {
            return Err(QuantiserError::CodeType {
                quantiser: quantiser.range,
                stage: T::RANGE,
            });
        }
        Ok(FixedQuantiseStage {
            quantiser,
            out: [T::default(); C],
            clamped: 0,
        })
    }

    /// Values clamped since the start or the last reset.
    pub fn clamped(&self) -> u64 {
        self.clamped
    }
}

impl<In: RawUnits, T: Code, const C: usize> crate::stage::FrameStage<In>
    for FixedQuantiseStage<T, C>
{
    type Out = T;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [In]) -> &'a mut [T] {
        let n = input.len().min(C);
        for (o, &x) in self.out[..n].iter_mut().zip(&input[..n]) {
            let (q, c) = self.quantiser.code(x.raw_units());
            *o = T::from_code(q);
            self.clamped += c as u64;
        }
        &mut self.out[..n]
    }

    fn reset(&mut self) {
        self.clamped = 0;
    }
}
