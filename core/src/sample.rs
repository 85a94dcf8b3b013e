//! Input sample types.
//!
//! Samples are `i16` (full scale 32768 = 1.0) or `f32` in `[-1, 1]`.
//! A non-finite `f32` sample (NaN or ±∞) is **treated as 0** and counted, so
//! one bad DMA word never poisons every later frame; the front ends report the
//! count (`non_finite_samples()`), and host tools reject such input outright.

/// A type the front ends accept as input.
pub trait Sample: Copy {
    /// The sample as a full-scale-normalised `f32`, with non-finite values as `None`.
    fn to_unit_f32(self) -> Option<f32>;
}

impl Sample for i16 {
    #[inline]
    fn to_unit_f32(self) -> Option<f32> {
        // Exact: every i16 is representable and 1/32768 is a power of two.
        Some(self as f32 * (1.0 / 32768.0))
    }
}

impl Sample for f32 {
    #[inline]
    fn to_unit_f32(self) -> Option<f32> {
        if self.is_finite() { Some(self) } else { None }
    }
}
