//! PCEN on the fixed path (see [`crate::pcen`] for the method): integers
//! only, on the filterbank's energy words, output in `I16F16`.
//!
//! Linear values (the smoother, ε, δ, the sums) are kept as 32-bit
//! mantissas with a binary exponent ([`Soft`]); powers go through logarithms:
//! `E/(ε + M)^α = 2^(log2 E − α·log2(ε + M))` and `(x + δ)^r = 2^(r·log2(x +
//! δ))`, with [`int_log`](crate::int_log)'s log2 (64-entry table, linear
//! interpolation) and a 2^x from a 257-entry table of `2^(k/256)` (computed
//! at compile time by eight integer square roots of 2) with linear
//! interpolation. The parameters come from the host as integers
//! ([`FixedPcenParams`]), so the board needs no float.

use fixed::types::I16F16;

use crate::int_log::{EMPTY_ENERGY, log2_q16_of_word};

/// An unsigned value `m·2^(e − 31)` with `m` normalised (bit 31 set) or 0.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub struct Soft {
    /// Mantissa, bit 31 set unless the value is 0.
    pub mantissa: u32,
    /// Binary exponent.
    pub exponent: i32,
}

impl Soft {
    /// Zero.
    pub const ZERO: Soft = Soft {
        mantissa: 0,
        exponent: 0,
    };

    /// `value·2^exponent` for any `value` (normalised here).
    pub const fn from_parts(value: u64, exponent: i32) -> Soft {
        if value == 0 {
            return Soft::ZERO;
        }
        let lz = value.leading_zeros() as i32; // value's top bit at 63 − lz
        let top = 63 - lz;
        let mantissa = if top >= 31 {
            (value >> (top - 31)) as u32
        } else {
            (value << (31 - top)) as u32
        };
        Soft {
            mantissa,
            exponent: exponent + top,
        }
    }

    /// An energy word (the filterbank's output) as a value.
    #[inline]
    pub fn from_word(word: i32) -> Soft {
        if word == EMPTY_ENERGY {
            return Soft::ZERO;
        }
        Soft {
            mantissa: (1 << 31) | (((word as u32) & 0x3F_FFFF) << 9),
            exponent: word >> 22,
        }
    }

    /// `log2` in Q16 (not for 0).
    #[inline]
    fn log2_q16(self) -> i32 {
        let word =
            (self.exponent.clamp(-511, 511) << 22) | ((self.mantissa >> 9) & 0x3F_FFFF) as i32;
        log2_q16_of_word(word)
    }

    /// `self + other`, the smaller one's bits beyond 32 dropped.
    #[inline]
    fn add(self, other: Soft) -> Soft {
        let (a, b) =
            if other.mantissa == 0 || (self.mantissa != 0 && self.exponent >= other.exponent) {
                (self, other)
            } else {
                (other, self)
            };
        if b.mantissa == 0 {
            return a;
        }
        let d = (a.exponent - b.exponent) as u32;
        let low = if d >= 32 { 0 } else { b.mantissa >> d };
        let sum = a.mantissa as u64 + low as u64;
        if sum >> 32 != 0 {
            Soft {
                mantissa: (sum >> 1) as u32,
                exponent: a.exponent + 1,
            }
        } else {
            Soft {
                mantissa: sum as u32,
                exponent: a.exponent,
            }
        }
    }

    /// `self − other` for `self ≥ other` (0 otherwise), renormalised.
    #[inline]
    fn sub(self, other: Soft) -> Soft {
        if other.mantissa == 0 {
            return self;
        }
        if self.mantissa == 0 || self.exponent < other.exponent {
            return Soft::ZERO;
        }
        let d = (self.exponent - other.exponent) as u32;
        let low = if d >= 32 { 0 } else { other.mantissa >> d };
        match self.mantissa.checked_sub(low) {
            None | Some(0) => Soft::ZERO,
            Some(m) => Soft::from_parts(m as u64, self.exponent - 31),
        }
    }

    /// `self·c` for `c` in Q31 (`0 ≤ c < 2^31`).
    #[inline]
    fn scale(self, c: u32) -> Soft {
        if self.mantissa == 0 || c == 0 {
            return Soft::ZERO;
        }
        Soft::from_parts(self.mantissa as u64 * c as u64, self.exponent - 62)
    }

    /// `2^t` for `t` in Q16.
    #[inline]
    fn exp2_q16(t: i32) -> Soft {
        let int = t >> 16;
        let frac = (t & 0xFFFF) as u32; // [0, 1) in Q16
        let index = (frac >> 8) as usize; // 256 steps
        let within = (frac & 0xFF) as u64;
        let (lo, hi) = (EXP2_TABLE[index], EXP2_TABLE[index + 1]);
        // Q31 mantissa in [2^31, 2^32]: lo + (hi − lo)·within/256.
        let m = lo + (((hi - lo) * within + 128) >> 8);
        Soft::from_parts(m, int - 31)
    }

    /// The value in `I16F16`, saturating.
    #[inline]
    fn to_i16f16(self) -> I16F16 {
        if self.mantissa == 0 {
            return I16F16::ZERO;
        }
        // value·2^16 = m·2^(e − 15).
        let shift = self.exponent - 15;
        let bits = if shift >= 0 {
            if shift >= 32 {
                i32::MAX as u64
            } else {
                ((self.mantissa as u64) << shift).min(i32::MAX as u64)
            }
        } else if shift <= -32 {
            0
        } else {
            let s = (-shift) as u32;
            (self.mantissa as u64 + (1u64 << (s - 1))) >> s
        };
        I16F16::from_bits(bits.min(i32::MAX as u64) as i32)
    }
}

/// `round(2^(k/256)·2^31)` for `k = 0 ..= 256`.
pub const EXP2_TABLE: [u64; 257] = {
    // 2^(1/256) in Q62, from eight integer square roots of 2 (each in Q124
    // under the root, so the result stays in Q62).
    let mut root: u128 = 2u128 << 62; // 2 in Q62
    let mut i = 0;
    while i < 8 {
        root = isqrt_u128(root << 62);
        i += 1;
    }
    let mut t = [0u64; 257];
    let mut v: u128 = 1u128 << 62; // 1 in Q62
    let mut k = 0;
    while k <= 256 {
        t[k] = ((v + (1 << 30)) >> 31) as u64;
        v = (v * root + (1u128 << 61)) >> 62;
        k += 1;
    }
    t
};

/// Integer square root (floor) of a `u128`, for the table above.
const fn isqrt_u128(v: u128) -> u128 {
    if v < 2 {
        return v;
    }
    let mut r: u128 = 1 << ((128 - v.leading_zeros()).div_ceil(2));
    loop {
        let next = (r + v / r) >> 1;
        if next >= r {
            return r;
        }
        r = next;
    }
}

/// PCEN's parameters as the fixed stage reads them (the host derives them
/// from [`PcenParams`](crate::pcen::PcenParams)).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FixedPcenParams {
    /// α in Q16.
    pub alpha_q16: i32,
    /// r in Q16.
    pub root_q16: i32,
    /// The smoother's `s` in Q31.
    pub smoothing_q31: u32,
    /// ε.
    pub epsilon: Soft,
    /// δ.
    pub delta: Soft,
    /// δ^r.
    pub delta_root: Soft,
}

/// PCEN on the fixed path: energy words in, `I16F16` out, the smoother's
/// state (`BANDS` values) carried from frame to frame and started at the
/// first frame's energies.
#[derive(Clone, Debug)]
pub struct FixedPcen<const BANDS: usize> {
    params: FixedPcenParams,
    smoothed: [Soft; BANDS],
    started: bool,
    out: [I16F16; BANDS],
}

impl<const BANDS: usize> FixedPcen<BANDS> {
    /// A stage with `params`.
    pub fn new(params: FixedPcenParams) -> Self {
        FixedPcen {
            params,
            smoothed: [Soft::ZERO; BANDS],
            started: false,
            out: [I16F16::ZERO; BANDS],
        }
    }
}

impl<const BANDS: usize> crate::stage::FrameStage<i32> for FixedPcen<BANDS> {
    type Out = I16F16;

    fn process<'a>(&'a mut self, input: &'a mut [i32]) -> &'a mut [I16F16] {
        let n = input.len().min(BANDS);
        let p = self.params;
        if !self.started {
            for (m, &w) in self.smoothed[..n].iter_mut().zip(&input[..n]) {
                *m = Soft::from_word(w);
            }
            self.started = true;
        }
        let keep = (1u32 << 31) - p.smoothing_q31;
        for ((o, m), &w) in self.out[..n]
            .iter_mut()
            .zip(&mut self.smoothed[..n])
            .zip(&input[..n])
        {
            let e = Soft::from_word(w);
            *m = m.scale(keep).add(e.scale(p.smoothing_q31));
            let x = if e.mantissa == 0 {
                Soft::ZERO
            } else {
                let gain = p.epsilon.add(*m).log2_q16();
                let t = e.log2_q16() as i64 - ((p.alpha_q16 as i64 * gain as i64) >> 16);
                Soft::exp2_q16(t.clamp(i32::MIN as i64 / 2, i32::MAX as i64 / 2) as i32)
            };
            let y = x.add(p.delta).log2_q16();
            let z = Soft::exp2_q16(((p.root_q16 as i64 * y as i64) >> 16) as i32);
            *o = z.sub(p.delta_root).to_i16f16();
        }
        &mut self.out[..n]
    }

    fn reset(&mut self) {
        self.started = false;
    }
}
