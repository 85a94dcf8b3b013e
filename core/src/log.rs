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

use fixed::types::I8F8;

use crate::config::LogKind;
use crate::int_log::{EMPTY_ENERGY, log2_q16_of_word};

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
    log_in_place(&LogCoefficients::for_kind(kind), floor, values);
}

/// [`log_f32`] with the coefficients given.
#[inline]
pub fn log_in_place(coefficients: &LogCoefficients, floor: f32, values: &mut [f32]) {
    #[cfg(stapes_arm_fpu)]
    if !values.is_empty() && floor.to_bits() as i32 > 0 {
        let p = values.as_mut_ptr();
        // SAFETY: source and destination are the same `values.len()` floats;
        // the kernel reads each before it writes it.
        #[allow(unsafe_code)]
        unsafe {
            arm_fpu::log_floored(coefficients, floor, p, p, values.len())
        };
        return;
    }
    for v in values.iter_mut() {
        *v = floored_log(coefficients, floor, *v);
    }
}

/// The portable twin of the Cortex-M4F loop, one value.
#[inline(always)]
fn floored_log(coefficients: &LogCoefficients, floor: f32, v: f32) -> f32 {
    let (bits, floor_bits) = (v.to_bits() as i32, floor.to_bits() as i32);
    let e = if bits < floor_bits { floor_bits } else { bits };
    coefficients.log(f32::from_bits(e as u32))
}

/// The log stage of the `f32` path: `k·ln(max(E, floor))` per band, in
/// place (no buffer of its own).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FloatLog {
    coefficients: LogCoefficients,
    floor: f32,
}

impl FloatLog {
    /// The log a configuration asks for (its kind and its floor).
    pub fn for_config(config: &crate::config::FeatureConfig) -> Self {
        FloatLog {
            coefficients: LogCoefficients::for_kind(config.log),
            floor: floor_energy(config.floor_db),
        }
    }
}

impl crate::stage::FrameStage<f32> for FloatLog {
    type Out = f32;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [f32] {
        log_in_place(&self.coefficients, self.floor, input);
        input
    }
}

/// The log stage of the fixed path: each band's energy word
/// ([`energy_word`](crate::int_log::energy_word)) to its level in 1/256 units (dB or
/// natural-log units), `log2` scaled by the tables' `k_log` (Q16 → Q32
/// output units, rounded to 1/256), plus the band's gain, at or above the
/// floor and within `i16`.
///
/// `k_log` is one of [`log2_to_output_q16`](crate::fixed_tables::log2_to_output_q16)'s
/// values, within `[2^15, 2^20]` (the table check refuses others); an
/// energy word's exponent is within ±511 octaves (beyond which every output
/// saturates either way), so its log2 stays below 2^26 in Q16 and every sum
/// fits `i32`.
#[derive(Clone, Debug)]
pub struct FixedLog<'t, const BANDS: usize> {
    k_log: i32,
    gains: Option<&'t [i16]>,
    floor: i16,
    out: [I8F8; BANDS],
}

impl<'t, const BANDS: usize> FixedLog<'t, BANDS> {
    /// The log the fixed tables describe (their log constant, floor and gains).
    pub fn for_tables(tables: &crate::fixed_tables::FixedTables<'t>) -> Self {
        FixedLog {
            k_log: tables.params.log2_to_output.to_bits(),
            gains: tables.table.band_gains,
            floor: tables.params.floor.to_bits(),
            out: [I8F8::ZERO; BANDS],
        }
    }
}

/// Every band's level (see [`FixedLog`]). Out of line and not generic over
/// the band count (one copy, a loop the compiler does not unroll per
/// preset), one loop per case (with or without gains), so that the loop
/// keeps its values in registers.
#[inline(never)]
fn fixed_levels(k_log: i32, floor: i16, gains: Option<&[i16]>, words: &[i32], out: &mut [I8F8]) {
    match gains {
        None => {
            for (o, &word) in out.iter_mut().zip(words) {
                *o = fixed_level(k_log, floor, word, 0);
            }
        }
        Some(gains) => {
            for ((o, &word), &gain) in out.iter_mut().zip(words).zip(gains) {
                *o = fixed_level(k_log, floor, word, gain);
            }
            // A value after the bands (the frame's energy) has no gain.
            let g = gains.len().min(out.len());
            for (o, &word) in out[g..].iter_mut().zip(&words[g..]) {
                *o = fixed_level(k_log, floor, word, 0);
            }
        }
    }
}

/// One band's level (see [`FixedLog`]).
#[inline(always)]
fn fixed_level(k_log: i32, floor: i16, word: i32, gain: i16) -> I8F8 {
    if word == EMPTY_ENERGY {
        return I8F8::from_bits(floor);
    }
    // The word's exponent is within ±511, so |log2| < 2^26 in Q16.
    let log2 = log2_q16_of_word(word);
    // Q16 · Q16 → Q32 output units; to 1/256 units with rounding:
    // |units| ≤ 2^26 · 2^20 / 2^24 = 2^22.
    let units = ((log2 as i64 * k_log as i64 + (1 << 23)) >> 24) as i32;
    let level = (units + gain as i32).clamp(floor as i32, i16::MAX as i32);
    I8F8::from_bits(level as i16)
}

impl<const BANDS: usize> crate::stage::FrameStage<i32> for FixedLog<'_, BANDS> {
    type Out = I8F8;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [i32]) -> &'a mut [I8F8] {
        let n = input.len().min(BANDS);
        let out = &mut self.out[..n];
        fixed_levels(self.k_log, self.floor, self.gains, &input[..n], out);
        out
    }
}

#[cfg(stapes_arm_fpu)]
#[allow(unsafe_code)]
mod arm_fpu {
    use super::{LogCoefficients, SQRT_HALF_BITS};

    /// [`super::floored_log`] over `n ≥ 1` values from `src` to `dst` (which
    /// may be the same): the same operations in the same order.
    ///
    /// # Safety
    /// `src` is valid for reading and `dst` for writing `n ≥ 1` floats; if
    /// they overlap they are equal (each value is read before it is written).
    #[inline]
    pub(super) unsafe fn log_floored(
        c: &LogCoefficients,
        floor: f32,
        src: *const f32,
        dst: *mut f32,
        n: usize,
    ) {
        // SAFETY: reads the six coefficients and, per the contract, `n`
        // floats from `src` and `n` to `dst`; the FPU registers it uses are
        // declared clobbered.
        unsafe {
            core::arch::asm!(
                "vldmia {pc}, {{s8-s13}}",
                "2:",
                "ldr {b}, [{src}], #4",
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
                "vstmia {dst}!, {{s2}}",
                "subs {n}, {n}, #1",
                "bne 2b",
                pc = in(reg) c.0.as_ptr(),
                fl = in(reg) floor.to_bits(),
                half = in(reg) SQRT_HALF_BITS,
                src = inout(reg) src => _,
                dst = inout(reg) dst => _,
                n = inout(reg) n => _,
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
