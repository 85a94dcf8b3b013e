//! Integer base-2 logarithm: leading zeros for the integer part, a 64-entry
//! table with linear interpolation for the fraction. Integer work only.
//!
//! ```
//! use stapes_core::int_log::log2_q16;
//! assert_eq!(log2_q16(1), Some(0));
//! assert_eq!(log2_q16(1 << 40), Some(40 << 16));
//! let three = log2_q16(3).unwrap() as f64 / 65536.0;
//! assert!((three - 3f64.log2()).abs() < 1e-4);
//! assert_eq!(log2_q16(0), None);
//! ```

/// Fraction bits of the table index.
const INDEX_BITS: u32 = 6;
/// Interpolation bits below the index.
const INTERP_BITS: u32 = 16;

/// `log2(1 + i/64)` in Q16 for `i = 0 ..= 64`, computed at compile time by
/// repeated squaring (each squaring yields one binary digit of the
/// logarithm), so the table is exact to rounding and no float is involved.
pub const LOG2_TABLE: [u32; 65] = {
    let mut t = [0u32; 65];
    let mut i = 0;
    while i <= 64 {
        t[i] = log2_fraction_q16(64 + i as u64, 6);
        i += 1;
    }
    t
};

/// `round(log2(m / 2^shift) · 2^16)` for `2^shift <= m <= 2^(shift+1)`.
const fn log2_fraction_q16(m: u64, shift: u32) -> u32 {
    // y in Q62, within [1, 2].
    let one: u128 = 1 << 62;
    let mut y: u128 = (m as u128) << (62 - shift);
    if y >= 2 * one {
        return 1 << 16;
    }
    let mut bits: u64 = 0;
    let mut k = 0;
    // 24 binary digits, rounded to 16.
    while k < 24 {
        y = (y * y) >> 62;
        bits <<= 1;
        if y >= 2 * one {
            y >>= 1;
            bits |= 1;
        }
        k += 1;
    }
    ((bits + (1 << 7)) >> 8) as u32
}

/// `log2(x)` in Q16 (`log2(x) · 65536`, rounded), or `None` for 0.
/// Largest error about 4 Q16 steps (≈ 6e-5 in log2 units).
#[inline]
pub fn log2_q16(x: u64) -> Option<i32> {
    log2_operand(x).map(log2_q16_of_operand)
}

/// What [`log2_q16`] reads of `x`: the leading one's position `t` and the
/// 22 bits below it, packed as `(t + 1) << 22 | bits` (29 bits; 0 for
/// `x = 0`). A band energy kept in this form takes 4 bytes instead of 8 and
/// loses nothing the log uses.
#[inline]
pub fn log2_operand(x: u64) -> Option<u32> {
    if x == 0 {
        return None;
    }
    // The leading one's position, and the 22 bits below it (6 for the table
    // index, 16 for the interpolation), in 32-bit steps: one leading-zero
    // count and no 64-bit shift (library calls on Cortex-M0).
    let (hi, lo) = ((x >> 32) as u32, x as u32);
    let (int_part, bits) = if hi != 0 {
        let t = 63 - hi.leading_zeros();
        let s = t - 22; // 10 ..= 41
        let b = if s < 32 {
            (lo >> s) | (hi << (32 - s))
        } else {
            hi >> (s - 32)
        };
        (t, b)
    } else {
        let t = 31 - lo.leading_zeros();
        let b = if t >= 22 {
            lo >> (t - 22)
        } else {
            lo << (22 - t)
        };
        (t, b)
    };
    Some((int_part + 1) << 22 | (bits & ((1 << 22) - 1)))
}

/// [`log2_q16`] from a [`log2_operand`] (callers keep 0 for "no energy"
/// and do not pass it).
#[inline]
pub fn log2_q16_of_operand(operand: u32) -> i32 {
    let int_part = (operand >> 22).wrapping_sub(1);
    ((int_part as i32) << 16) + fraction_q16(operand)
}

/// `log2(1 + f/2^22)` in Q16 for the low 22 bits `f` of `bits`: the table
/// step and its linear interpolation, rounded.
#[inline(always)]
fn fraction_q16(bits: u32) -> i32 {
    let bits = bits & ((1 << 22) - 1);
    let index = ((bits >> INTERP_BITS) & ((1 << INDEX_BITS) - 1)) as usize;
    let interp = bits & ((1 << INTERP_BITS) - 1);
    let lo = LOG2_TABLE[index];
    let hi = LOG2_TABLE[index + 1];
    (lo + (((hi - lo) * interp + (1 << (INTERP_BITS - 1))) >> INTERP_BITS)) as i32
}

/// A band energy as the fixed filterbank hands it to the next stage:
/// `x·2^exponent` as one word, `e·2^22 + f` for `x·2^exponent =
/// 2^e·(1 + f/2^22)` (22 bits of mantissa below the leading one, the same
/// bits [`log2_operand`] keeps), `e` clamped to ±511 (beyond 500 octaves
/// every output saturates anyway), or [`EMPTY_ENERGY`] for `x = 0`.
///
/// ```
/// use stapes_core::int_log::{EMPTY_ENERGY, energy_word, log2_q16_of_word, log2_q16};
/// let w = energy_word(3 << 40, -50);
/// assert_eq!(log2_q16_of_word(w), log2_q16(3).unwrap() - (10 << 16));
/// assert_eq!(energy_word(0, 7), EMPTY_ENERGY);
/// ```
#[inline]
pub fn energy_word(x: u64, exponent: i32) -> i32 {
    match log2_operand(x) {
        None => EMPTY_ENERGY,
        Some(operand) => {
            let e = ((operand >> 22) as i32 - 1 + exponent).clamp(-511, 511);
            (e << 22) | (operand & ((1 << 22) - 1)) as i32
        }
    }
}

/// The word [`energy_word`] gives a zero energy.
pub const EMPTY_ENERGY: i32 = i32::MIN;

/// `log2` in Q16 of an [`energy_word`] (not [`EMPTY_ENERGY`]).
#[inline]
pub fn log2_q16_of_word(word: i32) -> i32 {
    ((word >> 22) << 16) + fraction_q16(word as u32)
}
