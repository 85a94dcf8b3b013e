//! Input sample types.
//!
//! Samples are `i16` (full scale 32768 = 1.0) or `f32` in `[-1, 1]`.
//! On the board nothing is refused; bad samples are repaired and counted, so
//! one bad DMA word never poisons every later frame:
//! * a non-finite `f32` sample (NaN or ±∞) is **taken as 0** and counted
//!   (`non_finite_samples()` on the front end);
//! * a finite `f32` sample outside `[-1, 1]` is **clamped to ±1** and counted
//!   (`clamped_samples()`): a stray 1e30 reads as full scale, not as 385 dB,
//!   and 3e38 no longer reads as silence.
//!
//! Host tools refuse both outright, naming the file and the sample.
//!
//! ```
//! use stapes_core::sample::{Sample, SampleCounts};
//! let mut out = [0.0f32; 4];
//! let counts = i16::to_unit_f32_slice(&[16384, -32768, 1, 0], &mut out);
//! assert_eq!(counts, SampleCounts::default());
//! assert_eq!(out, [0.5, -1.0, 1.0 / 32768.0, 0.0]);
//! let counts = f32::to_unit_f32_slice(&[0.25, f32::NAN, -0.5, 1e30], &mut out);
//! assert_eq!(counts, SampleCounts { non_finite: 1, clamped: 1 });
//! assert_eq!(out, [0.25, 0.0, -0.5, 1.0]);
//! ```

/// Samples repaired on the way in.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct SampleCounts {
    /// Non-finite samples, each taken as 0.
    pub non_finite: u64,
    /// Finite samples outside `[-1, 1]`, each clamped to ±1.
    pub clamped: u64,
}

/// A type the front ends accept as input (`i16` or `f32`; sealed).
pub trait Sample: crate::sealed::Sealed + Copy {
    /// The sample as a full-scale-normalised `f32` clamped to `[-1, 1]`,
    /// with non-finite values as `None`.
    fn to_unit_f32(self) -> Option<f32>;

    /// Whether the sample is finite but outside `[-1, 1]` (clamped).
    fn out_of_range(self) -> bool;

    /// The sample in Q15 (`i16`, 32768 = 1.0) for the fixed path: `i16` as
    /// it is; `f32` clamped to `[-1, 1]`, rounded to the nearest (ties away
    /// from zero) and saturated to the `i16` range (1.0 is 32767);
    /// non-finite values as `None`.
    fn to_q15(self) -> Option<i16>;

    /// Converts `src` into `dst` (the shorter length) as
    /// [`Sample::to_unit_f32`] does, a non-finite sample as 0, and counts
    /// the repairs.
    #[inline]
    fn to_unit_f32_slice(src: &[Self], dst: &mut [f32]) -> SampleCounts {
        let mut counts = SampleCounts::default();
        for (d, &s) in dst.iter_mut().zip(src) {
            counts.clamped += s.out_of_range() as u64;
            *d = s.to_unit_f32().unwrap_or_else(|| {
                counts.non_finite += 1;
                0.0
            });
        }
        counts
    }
}

impl Sample for i16 {
    #[inline(always)]
    fn to_q15(self) -> Option<i16> {
        Some(self)
    }

    #[inline(always)]
    fn out_of_range(self) -> bool {
        false
    }

    #[inline]
    fn to_unit_f32(self) -> Option<f32> {
        // Exact: every i16 is representable and 1/32768 is a power of two.
        Some(self as f32 * (1.0 / 32768.0))
    }

    #[inline]
    fn to_unit_f32_slice(src: &[i16], dst: &mut [f32]) -> SampleCounts {
        let n = src.len().min(dst.len());
        #[cfg(stapes_arm_fpu)]
        let done = arm_fpu::convert_blocks(&src[..n], &mut dst[..n]);
        #[cfg(not(stapes_arm_fpu))]
        let done = 0;
        for (d, &s) in dst[done..n].iter_mut().zip(&src[done..n]) {
            *d = s as f32 * (1.0 / 32768.0);
        }
        SampleCounts::default()
    }
}

impl Sample for f32 {
    #[inline]
    fn to_q15(self) -> Option<i16> {
        // ×32768 is exact; the cast saturates (1.0 to 32767).
        self.to_unit_f32().map(|v| libm::roundf(v * 32768.0) as i16)
    }

    #[inline]
    fn out_of_range(self) -> bool {
        self.is_finite() && !(-1.0..=1.0).contains(&self)
    }

    #[inline]
    fn to_unit_f32(self) -> Option<f32> {
        if self.is_finite() {
            Some(self.clamp(-1.0, 1.0))
        } else {
            None
        }
    }
}

/// Cortex-M4F: `i16` to `f32` eight samples per turn, each by the FPU's
/// fixed-point conversion with 15 fraction bits (`VCVT.F32.S32 #15`: the
/// exact value `s / 32768`, as the portable product by a power of two).
#[cfg(stapes_arm_fpu)]
#[allow(unsafe_code)]
mod arm_fpu {
    /// Converts the longest prefix of whole blocks of eight (equal lengths)
    /// and returns its length.
    #[inline]
    pub(super) fn convert_blocks(src: &[i16], dst: &mut [f32]) -> usize {
        let blocks = src.len().min(dst.len()) / 8;
        if blocks == 0 {
            return 0;
        }
        // SAFETY: reads 8·blocks halfwords of `src` one at a time (any
        // alignment) and writes as many words of `dst` (a float slice, so
        // word-aligned); the registers it uses are declared clobbered.
        unsafe {
            core::arch::asm!(
                "2:",
                "ldrsh {a}, [{s}], #2",
                "ldrsh {b}, [{s}], #2",
                "vmov s0, s1, {a}, {b}",
                "ldrsh {a}, [{s}], #2",
                "ldrsh {b}, [{s}], #2",
                "vmov s2, s3, {a}, {b}",
                "ldrsh {a}, [{s}], #2",
                "ldrsh {b}, [{s}], #2",
                "vmov s4, s5, {a}, {b}",
                "ldrsh {a}, [{s}], #2",
                "ldrsh {b}, [{s}], #2",
                "vmov s6, s7, {a}, {b}",
                "vcvt.f32.s32 s0, s0, #15",
                "vcvt.f32.s32 s1, s1, #15",
                "vcvt.f32.s32 s2, s2, #15",
                "vcvt.f32.s32 s3, s3, #15",
                "vcvt.f32.s32 s4, s4, #15",
                "vcvt.f32.s32 s5, s5, #15",
                "vcvt.f32.s32 s6, s6, #15",
                "vcvt.f32.s32 s7, s7, #15",
                "vstmia {d}!, {{s0-s7}}",
                "subs {k}, {k}, #1",
                "bne 2b",
                s = inout(reg) src.as_ptr() => _,
                d = inout(reg) dst.as_mut_ptr() => _,
                k = inout(reg) blocks => _,
                a = out(reg) _,
                b = out(reg) _,
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                options(nostack),
            );
        }
        8 * blocks
    }
}
