//! Logarithm with a floor: `10·log10(max(E, floor))` or `ln(max(E, floor))`.
//!
//! `x = 2^e·m` with `m` in `[√½, √2)`, taken from the float's bits with
//! integer steps (no comparison of floats), and
//! `ln m = 2·atanh(s) = 2(s + s³/3 + s⁵/5 + s⁷/7 + …)` with
//! `s = (m − 1)/(m + 1)`, `|s| < 0.172` (a textbook identity, common
//! practice). Four terms leave a truncation of `2|s|·z⁴/9 < 3e-8` (`z = s²`),
//! under f32's own rounding of the result. The output's scale (`10/ln 10`
//! for dB, 1 for natural log) is folded into the series' coefficients and
//! into `ln 2`:
//!
//! `out = e·(k·ln 2) + s·(2k + z·(2k/3 + z·(2k/5 + z·2k/7)))`
//!
//! One division, four multiply-adds, no library call. Every target evaluates
//! it with the same IEEE-754 single operations in the same order; on a
//! hard-float Cortex-M a hand-scheduled loop (`cfg(stapes_arm_fpu)`) does
//! so with `VMLA` (which rounds its product, then its sum, like `a + b * c`),
//! and [`log_f32`]'s portable loop is its twin.
//!
//! ```
//! use stapes_core::log::ln_f32;
//! for x in [1e-10f32, 0.5, 1.0, 3.0, 1e6] {
//!     assert!((ln_f32(x) as f64 - (x as f64).ln()).abs() < 2e-6 * (x as f64).ln().abs().max(1.0));
//! }
//! ```

use crate::config::LogKind;

/// The linear energy floor for a floor in dB (`10^(floor_db / 10)`).
pub fn floor_energy(floor_db: f32) -> f32 {
    libm::powf(10.0, floor_db / 10.0)
}

/// The bits of `√½` rounded to f32: subtracting them from a positive
/// float's bits and shifting by 23 gives the exponent `e` that leaves the
/// mantissa in `[√½, √2)`.
const SQRT_HALF_BITS: u32 = 0x3F35_04F3;

/// The scaled series of one log kind, in the order the Cortex-M4F loop
/// loads them: `2k, 2k/3, 2k/5, 2k/7, k·ln 2, 1`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LogCoefficients([f32; 6]);

impl LogCoefficients {
    /// The coefficients for output scale `k` (rounded once from f64).
    pub const fn for_scale(k: f64) -> Self {
        LogCoefficients([
            (2.0 * k) as f32,
            (2.0 * k / 3.0) as f32,
            (2.0 * k / 5.0) as f32,
            (2.0 * k / 7.0) as f32,
            (k * core::f64::consts::LN_2) as f32,
            1.0,
        ])
    }

    /// `10·log10` (dB) or `ln`.
    pub const fn for_kind(kind: LogKind) -> Self {
        match kind {
            LogKind::Decibel => Self::for_scale(10.0 / core::f64::consts::LN_10),
            LogKind::Natural => Self::for_scale(1.0),
        }
    }

    /// `k·ln x` for a positive, normal, finite `x`.
    #[inline(always)]
    pub fn log(&self, x: f32) -> f32 {
        let [c0, c1, c2, c3, k_ln2, one] = self.0;
        let bits = x.to_bits();
        let e = (bits.wrapping_sub(SQRT_HALF_BITS) as i32) >> 23;
        let m = f32::from_bits(bits.wrapping_sub((e as u32) << 23));
        let s = (m - one) / (m + one);
        let z = s * s;
        let q = c2 + z * c3;
        let q = c1 + z * q;
        let q = c0 + z * q;
        s * q + e as f32 * k_ln2
    }
}

/// `ln x` for a positive, normal, finite `x` (the front ends only pass
/// values at or above their floor, which validation keeps ≥ 1e-30).
#[inline]
pub fn ln_f32(x: f32) -> f32 {
    const NATURAL: LogCoefficients = LogCoefficients::for_kind(LogKind::Natural);
    NATURAL.log(x)
}

/// Replaces each energy `E` by `k·ln(max(E, floor))` (energies are never
/// NaN; a negative zero counts as below the floor). The floor is applied to
/// the bits: for floats of sign 0, integer order is float order.
#[inline]
pub fn log_f32(kind: LogKind, floor: f32, values: &mut [f32]) {
    let coefficients = LogCoefficients::for_kind(kind);
    #[cfg(stapes_arm_fpu)]
    if !values.is_empty() && floor.to_bits() as i32 > 0 {
        arm_fpu::log_floored(&coefficients, floor, values);
        return;
    }
    let floor_bits = floor.to_bits() as i32;
    for v in values.iter_mut() {
        let bits = v.to_bits() as i32;
        let e = if bits < floor_bits { floor_bits } else { bits };
        *v = coefficients.log(f32::from_bits(e as u32));
    }
}

#[cfg(stapes_arm_fpu)]
#[allow(unsafe_code)]
mod arm_fpu {
    use super::{LogCoefficients, SQRT_HALF_BITS};

    /// [`super::log_f32`]'s loop: the same operations in the same order.
    #[inline]
    pub(super) fn log_floored(c: &LogCoefficients, floor: f32, values: &mut [f32]) {
        // SAFETY: reads the six coefficients, reads and rewrites each of the
        // `values.len() ≥ 1` values once; the FPU registers it uses are
        // declared clobbered.
        unsafe {
            core::arch::asm!(
                "vldmia {pc}, {{s8-s13}}",
                "2:",
                "ldr {b}, [{p}]",
                "cmp {b}, {fl}",
                "it lt",
                "movlt {b}, {fl}",
                "sub {e}, {b}, {half}",
                "asr {e}, {e}, #23",
                "sub {b}, {b}, {e}, lsl #23",
                "vmov s0, {b}",
                "vmov s1, {e}",
                "vcvt.f32.s32 s1, s1",
                "vsub.f32 s2, s0, s13",
                "vadd.f32 s0, s0, s13",
                "vdiv.f32 s2, s2, s0",
                "vmul.f32 s0, s2, s2",
                "vmov.f32 s4, s10",
                "vmla.f32 s4, s0, s11",
                "vmov.f32 s5, s9",
                "vmla.f32 s5, s0, s4",
                "vmov.f32 s4, s8",
                "vmla.f32 s4, s0, s5",
                "vmul.f32 s2, s2, s4",
                "vmla.f32 s2, s1, s12",
                "vstmia {p}!, {{s2}}",
                "subs {n}, {n}, #1",
                "bne 2b",
                pc = in(reg) c.0.as_ptr(),
                fl = in(reg) floor.to_bits(),
                half = in(reg) SQRT_HALF_BITS,
                p = inout(reg) values.as_mut_ptr() => _,
                n = inout(reg) values.len() => _,
                b = out(reg) _,
                e = out(reg) _,
                out("s0") _, out("s1") _, out("s2") _, out("s4") _, out("s5") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _,
                options(nostack),
            );
        }
    }
}
