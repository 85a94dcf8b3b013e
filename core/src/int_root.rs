//! Integer square roots (floor) of `u32` and `u64`, for the fixed path's
//! magnitudes and the FFT's bounds: one route where the core divides or
//! multiplies long in hardware, another (digit by digit) on Cortex-M0; the
//! same bits either way (tested against each other).

/// Integer square root (floor) of a `u32`.
///
/// Where the core divides in hardware (Cortex-M3/M4/M7/M33, hosts): Newton's
/// iteration `r ← (r + v/r) / 2` from a power of two above `√v`, which falls
/// monotonically to `⌊√v⌋` in about five steps. On Cortex-M0 (no divide
/// instruction): digit by digit, two bits per step. Both give the floor, so
/// the bits are the same everywhere (tested against each other).
#[inline]
pub fn isqrt_u32(v: u32) -> u32 {
    #[cfg(stapes_no_long_multiply)]
    {
        isqrt_u32_by_digits(v)
    }
    #[cfg(not(stapes_no_long_multiply))]
    {
        isqrt_u32_by_newton(v)
    }
}

/// [`isqrt_u32`] by Newton's iteration (one division per step).
#[inline(never)]
pub fn isqrt_u32_by_newton(v: u32) -> u32 {
    if v < 2 {
        return v;
    }
    // 2^ceil(bits/2) ≥ √v.
    let mut r = 1u32 << (32 - v.leading_zeros()).div_ceil(2);
    loop {
        let next = (r + v / r) >> 1;
        if next >= r {
            return r;
        }
        r = next;
    }
}

/// Digit-by-digit integer square root for one unsigned width: two bits of
/// `v` per step from its leading pair; shifts, adds and compares only.
macro_rules! isqrt_by_digits {
    ($name:ident, $t:ty, $doc:literal) => {
        #[doc = $doc]
        #[inline]
        pub fn $name(v: $t) -> $t {
            if v == 0 {
                return 0;
            }
            let (mut rem, mut root) = (v, 0);
            let mut bit: $t = 1 << ((<$t>::BITS - 1 - v.leading_zeros()) & !1);
            while bit != 0 {
                if rem >= root + bit {
                    rem -= root + bit;
                    root = (root >> 1) + bit;
                } else {
                    root >>= 1;
                }
                bit >>= 2;
            }
            root
        }
    };
}

isqrt_by_digits!(
    isqrt_u32_by_digits,
    u32,
    "[`isqrt_u32`] digit by digit (shifts, adds and compares only)."
);
isqrt_by_digits!(
    isqrt_u64_by_digits,
    u64,
    "[`isqrt_u64`] digit by digit (shifts, adds and compares only)."
);

/// Integer square root (floor) of a `u64`.
///
/// Where the core has a 32 × 32 → 64-bit multiply (not Cortex-M0): the top
/// half of the root from [`isqrt_u32`] of `v`'s leading bits, then the
/// remaining bits one at a time, each kept if its square stays within `v`.
/// (With `R = ⌊√v⌋` and `h = ⌊√⌊v / 4^k⌋⌋`, `R >> k = h` exactly, so the
/// greedy low bits give `R`.) On Cortex-M0: digit by digit. Both give the
/// floor (tested against each other).
#[inline]
pub fn isqrt_u64(v: u64) -> u64 {
    #[cfg(stapes_no_long_multiply)]
    {
        isqrt_u64_by_digits(v)
    }
    #[cfg(not(stapes_no_long_multiply))]
    {
        isqrt_u64_by_halves(v)
    }
}

/// [`isqrt_u64`] from a 32-bit root and the remaining bits.
#[inline(never)]
pub fn isqrt_u64_by_halves(v: u64) -> u64 {
    if v >> 32 == 0 {
        return isqrt_u32(v as u32) as u64;
    }
    // v >> 2k < 2^32.
    let k = (64 - v.leading_zeros() - 32).div_ceil(2);
    let mut root = (isqrt_u32((v >> (2 * k)) as u32) as u64) << k;
    for b in (0..k).rev() {
        // root < 2^32, so the square fits u64.
        let c = root | (1 << b);
        if c * c <= v {
            root = c;
        }
    }
    root
}
