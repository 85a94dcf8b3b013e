//! The project's own integer real FFT with block floating point.
//!
//! An `N`-point real FFT runs as an `N/2`-point complex radix-2
//! decimation-in-time FFT on the frame viewed as interleaved `(re, im)`
//! pairs, followed by the split step that separates the even and odd
//! samples' spectra. Data are `i16` ([`Fixed16`]: twiddles Q15) or `i32`
//! ([`Fixed32`]: twiddles Q31).
//!
//! **Block floating point, exact shifts**: each stage (and the split) is
//! computed twice. The first pass finds the largest output before rounding;
//! the second writes the outputs shifted right by the fewest bits (0, 1 or 2)
//! that keep that largest output in range, each output rounded once. The
//! shifts add up to the frame's exponent. A quiet frame is never scaled down,
//! and no value can overflow, so nothing wraps around (narrowing saturates
//! all the same).
//!
//! **Output** (same packing as microfft's): `buf[0]` = `X[0]`, `buf[1]` =
//! `X[N/2]` (both real), then `(re, im)` of `X[k]` at `buf[2k], buf[2k+1]`
//! for `k = 1 .. N/2`; the true spectrum is `X_int · 2^exponent` relative to
//! the input's scale.
//!
//! **Twiddles**: a quarter-wave cosine table `q[j] = cos(2πj/N)`,
//! `j = 0 ..= N/4`, from the generated tables; `sin(2πj/N) = q[N/4 - j]`.
//!
//! ```
//! use stapes_core::int_fft::{Fixed16, real_fft};
//! // Q15 quarter-wave cosine for N = 16 (cos(2πj/16), j = 0..=4), 1.0 as 32767.
//! let q = [32767i16, 30274, 23170, 12540, 0];
//! let mut x = [0i16; 16];
//! x[0] = 8192; // an impulse: flat spectrum
//! let exponent = real_fft::<Fixed16>(&mut x, &q);
//! assert_eq!(exponent, 0);
//! assert_eq!((x[0], x[1]), (8192, 8192));
//! assert!(x[2..].chunks(2).all(|c| c == [8192, 0]));
//! ```

/// The integer type butterflies compute in: `i32` for 16-bit data (single
/// cycle on every Cortex-M), `i64` for 32-bit data.
pub trait WideInt:
    Copy
    + Ord
    + core::fmt::Debug
    + core::ops::Add<Output = Self>
    + core::ops::Sub<Output = Self>
    + core::ops::Neg<Output = Self>
    + core::ops::Shl<u32, Output = Self>
    + core::ops::Shr<u32, Output = Self>
{
    /// 0.
    const ZERO: Self;
    /// 1.
    const ONE: Self;
    /// `|self|`.
    fn abs(self) -> Self;
}

impl WideInt for i32 {
    const ZERO: i32 = 0;
    const ONE: i32 = 1;
    #[inline(always)]
    fn abs(self) -> i32 {
        i32::abs(self)
    }
}

impl WideInt for i64 {
    const ZERO: i64 = 0;
    const ONE: i64 = 1;
    #[inline(always)]
    fn abs(self) -> i64 {
        i64::abs(self)
    }
}

/// A data type of the integer FFT.
pub trait BfpSample: Copy + Default + core::fmt::Debug + 'static {
    /// Twiddle storage: Q15 `i16` or Q31 `i32`.
    type Twiddle: Copy + core::fmt::Debug + 'static;
    /// The computing type.
    type Wide: WideInt;
    /// Fraction bits of unrounded stage outputs: 14 for `i16` (in `i32`),
    /// 29 for `i32` (in `i64`). Chosen so that `a ± w·b` (at most
    /// `2.42 · max`) cannot overflow; the twiddle product's dropped bits lie
    /// far below an output LSB. The split step uses one bit fewer.
    const WIDE_FRAC: u32;
    /// Fraction bits of the twiddle format (15 or 31).
    const TWIDDLE_FRAC: u32;
    /// Largest value of the type, widened.
    const MAX: Self::Wide;
    /// Widens.
    fn wide(self) -> Self::Wide;
    /// `round(x · t / 2^drop)` for `|x| < 2^(bits + 1)` (a sum or
    /// difference of two values of the type).
    fn twiddle_product(x: Self::Wide, t: Self::Twiddle, drop: u32) -> Self::Wide;
    /// Negates a twiddle.
    fn neg_twiddle(t: Self::Twiddle) -> Self::Twiddle;
    /// Saturates a wide value into the type.
    fn saturate(v: Self::Wide) -> Self;
    /// `round(v / 2^shift)`, saturated to the type.
    #[inline(always)]
    fn narrow(v: Self::Wide, shift: u32) -> Self {
        let rounded = if shift == 0 {
            v
        } else {
            (v + (Self::Wide::ONE << (shift - 1))) >> shift
        };
        Self::saturate(rounded)
    }
}

/// 16-bit data, Q15 twiddles: fast.
#[derive(Clone, Copy, Debug)]
pub struct Fixed16;
/// 32-bit data, Q31 twiddles: accurate.
#[derive(Clone, Copy, Debug)]
pub struct Fixed32;

/// Ties a precision marker to its data type.
pub trait Precision: Copy + core::fmt::Debug + 'static {
    /// The data type.
    type Data: BfpSample;
}

impl Precision for Fixed16 {
    type Data = i16;
}

impl Precision for Fixed32 {
    type Data = i32;
}

impl BfpSample for i16 {
    type Twiddle = i16;
    type Wide = i32;
    const WIDE_FRAC: u32 = 14;
    const TWIDDLE_FRAC: u32 = 15;
    const MAX: i32 = i16::MAX as i32;

    #[inline(always)]
    fn wide(self) -> i32 {
        self as i32
    }
    #[inline(always)]
    fn twiddle_product(x: i32, t: i16, drop: u32) -> i32 {
        // |x| ≤ 65535 and |t| ≤ 32767: the product is exact in i32.
        (x * t as i32 + (1 << (drop - 1))) >> drop
    }
    #[inline(always)]
    fn neg_twiddle(t: i16) -> i16 {
        -t
    }
    #[inline(always)]
    fn saturate(v: i32) -> i16 {
        v.clamp(i16::MIN as i32, i16::MAX as i32) as i16
    }
}

impl BfpSample for i32 {
    type Twiddle = i32;
    type Wide = i64;
    const WIDE_FRAC: u32 = 29;
    const TWIDDLE_FRAC: u32 = 31;
    const MAX: i64 = i32::MAX as i64;

    #[inline(always)]
    fn wide(self) -> i64 {
        self as i64
    }
    #[inline(always)]
    fn twiddle_product(x: i64, t: i32, drop: u32) -> i64 {
        // |x| < 2^32 and |t| < 2^31: the product fits i64.
        (x * t as i64 + (1 << (drop - 1))) >> drop
    }
    #[inline(always)]
    fn neg_twiddle(t: i32) -> i32 {
        -t
    }
    #[inline(always)]
    fn saturate(v: i64) -> i32 {
        v.clamp(i32::MIN as i64, i32::MAX as i64) as i32
    }
}

/// `(cos, sin)` of `2πk/N` for `k` in `1 .. N/2`, from the quarter-wave table.
#[inline]
fn twiddle<T: BfpSample>(quarter: &[T::Twiddle], k: usize) -> (T::Twiddle, T::Twiddle) {
    let q = quarter.len() - 1; // N/4
    if k <= q {
        (quarter[k], quarter[q - k])
    } else {
        (T::neg_twiddle(quarter[2 * q - k]), quarter[k - q])
    }
}

/// The fewest right shifts that bring `peak / 2^base`, rounded, into range.
#[inline]
fn exact_shift<T: BfpSample>(peak: T::Wide, base: u32) -> u32 {
    let mut shift = 0;
    while ((peak + (T::Wide::ONE << (base + shift - 1))) >> (base + shift)) > T::MAX {
        shift += 1;
    }
    shift
}

/// Real FFT of `buf` (length `N`, a power of two ≥ 16) in place, with the
/// quarter-wave twiddle table of `N/4 + 1` entries. Returns the block
/// exponent: the true spectrum is the output times `2^exponent`.
///
/// The caller guarantees the lengths (the front ends check them once); with
/// other lengths the function returns 0 and leaves `buf` as it was.
pub fn real_fft<P: Precision>(
    buf: &mut [P::Data],
    quarter: &[<P::Data as BfpSample>::Twiddle],
) -> i32 {
    let n = buf.len();
    if n < 16 || !n.is_power_of_two() || quarter.len() != n / 4 + 1 {
        return 0;
    }
    bit_reverse_pairs(buf, n / 2);
    let mut exponent = 0;
    let mut len = 2;
    while len <= n / 2 {
        exponent += stage(buf, quarter, len);
        len *= 2;
    }
    exponent + split(buf, quarter)
}

/// Bit-reversal permutation of `half` complex pairs.
fn bit_reverse_pairs<T: BfpSample>(buf: &mut [T], half: usize) {
    let bits = half.trailing_zeros();
    for i in 0..half {
        let j = i.reverse_bits() >> (usize::BITS - bits);
        if j > i {
            buf.swap(2 * i, 2 * j);
            buf.swap(2 * i + 1, 2 * j + 1);
        }
    }
}

/// One pass over a stage with groups of `len` complex points. With `WRITE`
/// false it returns the largest output before rounding (for a butterfly,
/// `max(|a + t|, |a − t|) = |a| + |t|` per component); with `WRITE` true it
/// writes every output `a ± w·b`, rounded once after a right shift of
/// `total_shift` bits, and returns 0.
///
/// The twiddle of each butterfly column `j` is read once per stage, and the
/// groups are walked as disjoint slices, so the inner loop has no branch on
/// the twiddle and no repeated table lookups.
#[inline(always)]
fn stage_pass<T: BfpSample, const WRITE: bool>(
    buf: &mut [T],
    quarter: &[T::Twiddle],
    len: usize,
    total_shift: u32,
) -> T::Wide {
    let frac = T::WIDE_FRAC;
    let drop = T::TWIDDLE_FRAC - frac;
    let stride = buf.len() / len; // twiddle index step in the N-point table
    let mut peak = T::Wide::ZERO;
    for j in 0..len / 2 {
        let w = (j != 0).then(|| twiddle::<T>(quarter, j * stride));
        for group in buf.chunks_exact_mut(2 * len) {
            let (lo, hi) = group.split_at_mut(len);
            let (a, b) = (&mut lo[2 * j..2 * j + 2], &mut hi[2 * j..2 * j + 2]);
            let (ar, ai) = (a[0].wide() << frac, a[1].wide() << frac);
            let (br, bi) = (b[0].wide(), b[1].wide());
            // w·b = (c·br + s·bi) + i(c·bi − s·br); |w·b| ≤ √2·max, so every
            // sum stays below 2.42·2^(bits − 1 + WIDE_FRAC), inside the wide type.
            let (tr, ti) = match w {
                Some((c, s)) => (
                    T::twiddle_product(br, c, drop) + T::twiddle_product(bi, s, drop),
                    T::twiddle_product(bi, c, drop) - T::twiddle_product(br, s, drop),
                ),
                None => (br << frac, bi << frac),
            };
            if WRITE {
                a[0] = T::narrow(ar + tr, total_shift);
                a[1] = T::narrow(ai + ti, total_shift);
                b[0] = T::narrow(ar - tr, total_shift);
                b[1] = T::narrow(ai - ti, total_shift);
            } else {
                peak = peak.max(ar.abs() + tr.abs()).max(ai.abs() + ti.abs());
            }
        }
    }
    peak
}

/// One radix-2 stage over groups of `len` complex points; returns its shift.
fn stage<T: BfpSample>(buf: &mut [T], quarter: &[T::Twiddle], len: usize) -> i32 {
    let peak = stage_pass::<T, false>(buf, quarter, len, 0);
    let shift = exact_shift::<T>(peak, T::WIDE_FRAC);
    stage_pass::<T, true>(buf, quarter, len, T::WIDE_FRAC + shift);
    shift as i32
}

/// Split step: from `Z = FFT(x[2n] + i·x[2n+1])` to the real spectrum `X`.
/// With `E = (Z[k] + Z*[N/2−k])/2`, `O = (Z[k] − Z*[N/2−k])/2` and
/// `T = i·W^k·O`: `X[k] = E − T`, `X[N/2−k] = conj(E + T)`. Outputs before
/// rounding carry `WIDE_FRAC` fraction bits: `WIDE_FRAC − 1` for the
/// products, one more for the exact `/2`.
/// Returns the shift.
fn split<T: BfpSample>(buf: &mut [T], quarter: &[T::Twiddle]) -> i32 {
    let half = buf.len() / 2;
    let q = half / 2;
    let frac = T::WIDE_FRAC - 1;
    let drop = T::TWIDDLE_FRAC - frac;
    let base = frac + 1;
    // Outputs for pair k (1 ≤ k < N/4): [Xk.re, Xk.im, Xm.re, Xm.im], m = N/2 − k.
    let pair = |buf: &[T], k: usize| -> [T::Wide; 4] {
        let m = half - k;
        let (ar, ai) = (buf[2 * k].wide(), buf[2 * k + 1].wide());
        let (br, bi) = (buf[2 * m].wide(), -buf[2 * m + 1].wide()); // conj(Z[m])
        let (er2, ei2) = ((ar + br) << frac, (ai + bi) << frac);
        let (or2, oi2) = (ar - br, ai - bi);
        let (c, s) = twiddle::<T>(quarter, k);
        // 2T = (s·2Or − c·2Oi) + i(c·2Or + s·2Oi); |2T| ≤ |2O| ≤ √2·2^bits.
        let tr2 = T::twiddle_product(or2, s, drop) - T::twiddle_product(oi2, c, drop);
        let ti2 = T::twiddle_product(or2, c, drop) + T::twiddle_product(oi2, s, drop);
        [er2 - tr2, ei2 - ti2, er2 + tr2, -(ei2 + ti2)]
    };
    let (z0r, z0i) = (buf[0].wide(), buf[1].wide());
    let ends = [
        (z0r + z0i) << base,
        (z0r - z0i) << base,
        buf[2 * q].wide() << base,
        -buf[2 * q + 1].wide() << base,
    ];
    let mut peak = ends.iter().fold(T::Wide::ZERO, |p, &v| p.max(v.abs()));
    for k in 1..q {
        for v in pair(buf, k) {
            peak = peak.max(v.abs());
        }
    }
    let shift = exact_shift::<T>(peak, base);
    for k in 1..q {
        let out = pair(buf, k);
        let m = half - k;
        buf[2 * k] = T::narrow(out[0], base + shift);
        buf[2 * k + 1] = T::narrow(out[1], base + shift);
        buf[2 * m] = T::narrow(out[2], base + shift);
        buf[2 * m + 1] = T::narrow(out[3], base + shift);
    }
    // k = 0 (X[0] and X[N/2], both real) and k = N/4 (X = conj(Z)).
    buf[0] = T::narrow(ends[0], base + shift);
    buf[1] = T::narrow(ends[1], base + shift);
    buf[2 * q] = T::narrow(ends[2], base + shift);
    buf[2 * q + 1] = T::narrow(ends[3], base + shift);
    shift as i32
}
