//! Packed 16-bit arithmetic: two `i16` halves in one `u32` word (the low
//! half first, as `[re, im]` pairs lie in memory on a little-endian core).
//!
//! Each function is the exact integer meaning of one Armv7E-M DSP
//! instruction. On `thumbv7em` targets the multiply-accumulates are that
//! instruction (inline assembly); everywhere else the portable expression
//! below it runs. Both give the same bits for every input whose result
//! fits `i32` (the callers' bounds guarantee it; tested).
//!
//! ```
//! use stapes_core::dsp16::{pack, dual_multiply_add, cross_multiply_sub};
//! let w = pack(3, -2); // (c, s)
//! let x = pack(5, 7); // (re, im)
//! assert_eq!(dual_multiply_add(w, x, 1), 3 * 5 + -2 * 7 + 1);
//! assert_eq!(cross_multiply_sub(w, x, 1), 3 * 7 - -2 * 5 + 1);
//! ```

/// The low half as `i32`.
#[inline(always)]
pub fn low(x: u32) -> i32 {
    x as i16 as i32
}

/// The high half as `i32`.
#[inline(always)]
pub fn high(x: u32) -> i32 {
    (x as i32) >> 16
}

/// Packs the low 16 bits of `lo` and of `hi` (`PKHBT`).
#[inline(always)]
pub fn pack(lo: i32, hi: i32) -> u32 {
    (lo as u32 & 0xffff) | ((hi as u32) << 16)
}

/// One dual 16-bit multiply-accumulate: the Armv7E-M instruction on
/// `thumbv7em`, the portable expression elsewhere (the same bits).
macro_rules! dual_multiply {
    ($(#[$doc:meta])* $name:ident, $instr:literal, |$a:ident, $b:ident, $acc:ident| $portable:expr) => {
        $(#[$doc])*
        #[inline(always)]
        pub fn $name($a: u32, $b: u32, $acc: i32) -> i32 {
            #[cfg(stapes_arm_dsp)]
            {
                let r: i32;
                // SAFETY: one register-only instruction: no memory, stack or
                // flags read (it may set the sticky Q flag, which nothing reads).
                #[allow(unsafe_code)]
                unsafe {
                    core::arch::asm!(
                        concat!($instr, " {r}, {a}, {b}, {acc}"),
                        r = lateout(reg) r,
                        a = in(reg) $a,
                        b = in(reg) $b,
                        acc = in(reg) $acc,
                        options(pure, nomem, nostack)
                    );
                }
                r
            }
            #[cfg(not(stapes_arm_dsp))]
            {
                $portable
            }
        }
    };
}

dual_multiply!(
    /// `low(a)·low(b) + high(a)·high(b) + acc` (`SMLAD`).
    dual_multiply_add, "smlad",
    |a, b, acc| low(a).wrapping_mul(low(b)).wrapping_add(high(a).wrapping_mul(high(b))).wrapping_add(acc)
);
dual_multiply!(
    /// `low(a)·high(b) − high(a)·low(b) + acc` (`SMLSDX`).
    cross_multiply_sub, "smlsdx",
    |a, b, acc| low(a).wrapping_mul(high(b)).wrapping_sub(high(a).wrapping_mul(low(b))).wrapping_add(acc)
);
dual_multiply!(
    /// `low(a)·low(b) − high(a)·high(b) + acc` (`SMLSD`).
    dual_multiply_sub, "smlsd",
    |a, b, acc| low(a).wrapping_mul(low(b)).wrapping_sub(high(a).wrapping_mul(high(b))).wrapping_add(acc)
);
dual_multiply!(
    /// `low(a)·high(b) + high(a)·low(b) + acc` (`SMLADX`).
    cross_multiply_add, "smladx",
    |a, b, acc| low(a).wrapping_mul(high(b)).wrapping_add(high(a).wrapping_mul(low(b))).wrapping_add(acc)
);

/// `low(x)² + high(x)²` as `u32` (`SMUAD x, x`; at most `2^31`, which the
/// instruction's wrapped `i32` result also holds as `u32`).
#[inline(always)]
pub fn sum_of_squares(x: u32) -> u32 {
    dual_multiply_add(x, x, 0) as u32
}
