//! The project's own integer real FFT with block floating point.
//!
//! An `N`-point real FFT runs as an `N/2`-point complex decimation-in-time
//! FFT on the frame viewed as interleaved `(re, im)` pairs, followed by the
//! split step that separates the even and odd samples' spectra. Data are
//! `i16` ([`Fixed16`]: twiddles Q15) or `i32` ([`Fixed32`]: twiddles Q31);
//! every butterfly computes in `i32` (the split step of 32-bit data sums in
//! `i64`).
//!
//! **Passes**: after the bit-reversal permutation, the radix-2 levels run
//! two at a time as radix-4 passes (one read and one write of the buffer
//! for two levels, three complex products per four points); when the number
//! of levels is odd, the first level runs alone. The first pass needs no
//! multiply (its twiddles are 1 and −i).
//!
//! **Block floating point, one pass per two levels, shifts from a bound**:
//! every value stored in the buffer stays within `±LIMIT` (32767 for `i16`,
//! `2^29 − 2` for `i32`, leaving the guard bits that let butterfly sums
//! stay inside `i32`). Before each pass, its shift (0 to 3 bits) is chosen
//! from a bound `M` on the magnitudes `|z|` of its inputs: a radix-4 pass
//! maps four values to sums `y0 ± y1 ± y2 ± y3` of the rotated inputs, so
//! `|out| ≤ 4M` (plus the products' rounding), and the shift is the smallest
//! that keeps that within `LIMIT`. Each pass tracks what it wrote (the
//! largest `re² + im²` of 16-bit data, the OR of the components of 32-bit
//! data) and hands the next pass that tighter bound. So no output can
//! overflow (no clamp anywhere), nothing is computed twice, and a quiet
//! frame is never scaled down. The shifts add up to the frame's exponent.
//!
//! **Rounding**: twiddle products of 16-bit data keep 13 fraction bits;
//! the four terms of an output are summed exactly and rounded once, with
//! the pass's shift.
//! Products of 32-bit data are `round(a·b / 2^32)` (the Cortex-M4's
//! `SMMULR`; on cores without it an exact four-product twin gives the same
//! bits).
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
//! use stapes_core::fft::{Fixed16, real_fft};
//! // Q15 quarter-wave cosine for N = 16 (cos(2πj/16), j = 0..=4), 1.0 as 32767.
//! let q = [32767i16, 30274, 23170, 12540, 0];
//! let mut x = [0i16; 16];
//! x[0] = 8192; // an impulse: flat spectrum
//! let exponent = real_fft::<Fixed16>(&mut x, &q);
//! // The bound allows each level to double: the block is scaled down once.
//! assert_eq!(exponent, 1);
//! assert_eq!((x[0], x[1]), (4096, 4096));
//! assert!(x[2..].chunks(2).all(|c| c == [4096, 0]));
//! ```
//!
//! # `f32`
//! The `f32` path's real FFT is microfft's (its packed layout is the same),
//! for the sizes compiled in by cargo features ([`real_fft_in_place`]).

/// FFT lengths compiled into this build (cargo features `fft-N`).
pub const COMPILED_FFT_SIZES: &[usize] = &[
    #[cfg(feature = "fft-16")]
    16,
    #[cfg(feature = "fft-32")]
    32,
    #[cfg(feature = "fft-64")]
    64,
    #[cfg(feature = "fft-128")]
    128,
    #[cfg(feature = "fft-256")]
    256,
    #[cfg(feature = "fft-512")]
    512,
    #[cfg(feature = "fft-1024")]
    1024,
    #[cfg(feature = "fft-2048")]
    2048,
    #[cfg(feature = "fft-4096")]
    4096,
];

/// Whether an FFT of `n` points is compiled in.
pub fn fft_compiled(n: usize) -> bool {
    COMPILED_FFT_SIZES.contains(&n)
}

macro_rules! dispatch {
    ($buf:expr, $( $n:literal => $f:ident, $feat:literal ;)*) => {
        match $buf.len() {
            $(
                #[cfg(feature = $feat)]
                $n => {
                    if let Ok(a) = <&mut [f32; $n]>::try_from(&mut *$buf) {
                        let _ = microfft::real::$f(a);
                        return true;
                    }
                    false
                }
            )*
            _ => false,
        }
    };
}

/// Real FFT of `buf` in place (microfft's packed layout: `buf[0]` = DC,
/// `buf[1]` = Nyquist, then re/im pairs). Returns `false`, leaving `buf`
/// untouched, when its length is not a compiled FFT size.
#[inline]
pub fn real_fft_in_place(buf: &mut [f32]) -> bool {
    dispatch!(buf,
        16 => rfft_16, "fft-16";
        32 => rfft_32, "fft-32";
        64 => rfft_64, "fft-64";
        128 => rfft_128, "fft-128";
        256 => rfft_256, "fft-256";
        512 => rfft_512, "fft-512";
        1024 => rfft_1024, "fft-1024";
        2048 => rfft_2048, "fft-2048";
        4096 => rfft_4096, "fft-4096";
    )
}

/// A data type of the integer FFT.
pub trait BfpSample: crate::sealed::Sealed + Copy + Default + core::fmt::Debug + 'static {
    /// Twiddle storage: Q15 `i16` or Q31 `i32`.
    type Twiddle: Copy + core::fmt::Debug + 'static;
    /// Largest magnitude any level writes.
    const LIMIT: u32;
    /// Extra fraction bits of a level's sums before their one rounding.
    const FRAC: u32;
    /// The value as `i32`.
    fn get(self) -> i32;
    /// From `i32`; the caller's bound keeps `v` within `±LIMIT`.
    fn put(v: i32) -> Self;
    /// From `i32` in the type's range.
    fn put_unchecked(v: i32) -> Self;
    /// Largest component magnitude the first pass accepts (its sums of four
    /// stay inside `i32`).
    const FIRST_PASS_MAX: u32;
    /// `W·x · 2^FRAC` for `W = c − i·s`, as `(re, im)`, for `|x|` components
    /// within `±LIMIT`.
    fn rotate(xr: i32, xi: i32, c: Self::Twiddle, s: Self::Twiddle) -> (i32, i32);
    /// Twiddle 0.
    const ZERO: Self::Twiddle;
    /// A placeholder for twiddle 1 (never multiplied by).
    const ONE: Self::Twiddle;
    /// Negates a twiddle.
    fn neg_twiddle(t: Self::Twiddle) -> Self::Twiddle;
    /// The split step's output `round((e·2^SPLIT_FRAC − t) / 2^(SPLIT_FRAC + 1 + shift))`.
    fn split_out(e: i32, t: i32, shift: u32) -> Self;
    /// Fraction bits of the split step's rotated values (see [`BfpSample::split_rotate`]).
    const SPLIT_FRAC: u32;
    /// Folds one complex output into a pass's running tracker (start: 0).
    fn track(acc: u32, re: i32, im: i32) -> u32;
    /// A bound on the magnitude `|z|` of every complex value tracked into `acc`.
    fn magnitude_bound(acc: u32) -> u32;
    /// The FFT input's tracker (as [`BfpSample::track`] folds it) and its
    /// largest component magnitude, where the type can exceed what the first
    /// pass accepts (0 where it cannot).
    fn input_bound(buf: &[Self]) -> (u32, u32);
    /// The split step's `W·x · 2^SPLIT_FRAC`, for `|x|` components within
    /// `±2·LIMIT` (differences of two values).
    fn split_rotate(xr: i32, xi: i32, c: Self::Twiddle, s: Self::Twiddle) -> (i32, i32);
    /// Every column of a radix-4 pass over sub-transforms of `m` points
    /// (see `twiddled_columns`); returns the tracker. The same bits as the
    /// generic butterflies; a type may run them on packed words.
    fn radix4_columns(buf: &mut [Self], quarter: &[Self::Twiddle], m: usize, shift: u32) -> u32 {
        twiddled_columns::<Self>(buf, quarter, m, shift)
    }
    /// The first two levels' butterflies (see `first_radix4`) with the
    /// shift `s`; returns the tracker. A type may run them on packed words.
    fn first_radix4_groups(buf: &mut [Self], s: u32) -> u32 {
        first_radix4_generic::<Self>(buf, s)
    }
    /// The split step's pairs `1 ≤ k < N/4` (see `split`) with the shift
    /// `s`. A type may run them on packed words.
    fn split_pairs(buf: &mut [Self], quarter: &[Self::Twiddle], s: u32) {
        split_pairs_generic::<Self>(buf, quarter, s)
    }
}

/// 16-bit data, Q15 twiddles: fast.
#[derive(Clone, Copy, Debug)]
pub struct Fixed16;
/// 32-bit data, Q31 twiddles: accurate.
#[derive(Clone, Copy, Debug)]
pub struct Fixed32;

/// Ties a precision marker to its data type.
pub trait Precision: crate::sealed::Sealed + Copy + core::fmt::Debug + 'static {
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
    const ZERO: i16 = 0;
    const ONE: i16 = i16::MAX;
    const LIMIT: u32 = i16::MAX as u32;
    // (x0·2^13 + W·x1·2^13) ≤ 2.42·2^28; the split's 2E·2^12 − 2T·2^12 ≤ 2^30.
    const FRAC: u32 = 13;
    const FIRST_PASS_MAX: u32 = 32768;
    const SPLIT_FRAC: u32 = 12;

    #[inline(always)]
    fn get(self) -> i32 {
        self as i32
    }
    #[inline(always)]
    fn put_unchecked(v: i32) -> i16 {
        v as i16
    }
    #[inline(always)]
    fn put(v: i32) -> i16 {
        debug_assert!(v.unsigned_abs() <= Self::LIMIT, "FFT bound broken: {v}");
        v as i16
    }
    #[inline(always)]
    fn rotate(xr: i32, xi: i32, c: i16, s: i16) -> (i32, i32) {
        // |x| ≤ LIMIT and |c| + |s| ≤ √2·2^15: the sum of two products is
        // below 1.52·10^9 in magnitude, inside i32. Truncated to FRAC = 13
        // fraction bits (a bias of 3/8 of 2^-13, far below the output's one
        // rounding; with few fraction bits, rounding ties up biased every
        // output), so that one shift folds into the next addition.
        let (c, s) = (c as i32, s as i32);
        ((c * xr + s * xi) >> 2, (c * xi - s * xr) >> 2)
    }
    #[inline(always)]
    fn neg_twiddle(t: i16) -> i16 {
        -t
    }
    #[inline(always)]
    fn track(acc: u32, re: i32, im: i32) -> u32 {
        // |re|, |im| ≤ 32768 (the input may hold −32768): each square ≤ 2^30,
        // their sum ≤ 2^31, summed in u32.
        fold_square(acc, (re * re) as u32 + (im * im) as u32)
    }
    #[inline]
    fn magnitude_bound(acc: u32) -> u32 {
        // Every folded re² + im² is at most (its top 16 bits)·2^16 + 0xffff.
        let top = (acc & 0xffff).max(acc >> 16);
        crate::int_root::isqrt_u32((top << 16) | 0xffff) + 1
    }
    #[inline]
    fn input_bound(buf: &[i16]) -> (u32, u32) {
        #[cfg(stapes_arm_dsp)]
        if let Ok(words) = bytemuck::try_cast_slice::<i16, u32>(buf) {
            if let Some(acc) = arm_dsp_scan::input_tracker(words) {
                return (acc, 0);
            }
        }
        let acc = buf
            .chunks_exact(2)
            .fold(0, |acc, p| Self::track(acc, p[0] as i32, p[1] as i32));
        (acc, 0) // every 16-bit value is accepted
    }
    #[inline(always)]
    fn split_rotate(xr: i32, xi: i32, c: i16, s: i16) -> (i32, i32) {
        // |x| ≤ 2·LIMIT, so |c·xr + s·xi| ≤ |W|·|x|·2^15 < 2^31 − 2^17: the
        // sum fits i32 (each product alone does too); rounded once to 12
        // fraction bits.
        let (c, s) = (c as i32, s as i32);
        ((c * xr + s * xi + 4) >> 3, (c * xi - s * xr + 4) >> 3)
    }
    #[inline(always)]
    fn split_out(e: i32, t: i32, shift: u32) -> i16 {
        // |e|·2^12 ≤ 2^29, |t| ≤ 2·√2·2·LIMIT·2^12 < 1.52·2^30: inside i32.
        let total = Self::SPLIT_FRAC + 1 + shift;
        Self::put(((e << Self::SPLIT_FRAC) - t + (1 << (total - 1))) >> total)
    }
    #[cfg(not(stapes_no_long_multiply))]
    fn radix4_columns(buf: &mut [i16], quarter: &[i16], m: usize, shift: u32) -> u32 {
        // Pairs read as words where the buffer is word-aligned (the front
        // ends' frame buffers are) on a little-endian core.
        match bytemuck::try_cast_slice_mut::<i16, u32>(buf) {
            Ok(words) if cfg!(target_endian = "little") => {
                packed16_columns(words, quarter, m, shift)
            }
            _ => twiddled_columns::<i16>(buf, quarter, m, shift),
        }
    }
    #[cfg(not(stapes_no_long_multiply))]
    fn first_radix4_groups(buf: &mut [i16], s: u32) -> u32 {
        match bytemuck::try_cast_slice_mut::<i16, u32>(buf) {
            Ok(words) if cfg!(target_endian = "little") => {
                #[cfg(stapes_arm_dsp)]
                if let Some(acc) = arm_dsp_first::first_radix4(words, s) {
                    return acc;
                }
                packed16_first_radix4(words, s)
            }
            _ => first_radix4_generic::<i16>(buf, s),
        }
    }
    #[cfg(not(stapes_no_long_multiply))]
    fn split_pairs(buf: &mut [i16], quarter: &[i16], s: u32) {
        match bytemuck::try_cast_slice_mut::<i16, u32>(buf) {
            Ok(words) if cfg!(target_endian = "little") => {
                #[cfg(stapes_arm_dsp)]
                if arm_dsp_split::split_pairs(words, quarter, s) {
                    return;
                }
                packed16_split_pairs(words, quarter, s)
            }
            _ => split_pairs_generic::<i16>(buf, quarter, s),
        }
    }
}

/// `round(a·b / 2^32)` (halves rounded up), exactly.
#[inline(always)]
pub fn mul_high(a: i32, b: i32) -> i32 {
    #[cfg(stapes_arm_dsp)]
    {
        // The Cortex-M4's `SMMULR`: round(a·b / 2^32), halves rounded up,
        // the same bits as the portable expression below (tested on the
        // board against the host, frame by frame).
        let r: i32;
        // SAFETY: one register-only instruction: no memory, stack or flags.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "smmulr {r}, {a}, {b}",
                r = lateout(reg) r,
                a = in(reg) a,
                b = in(reg) b,
                options(pure, nomem, nostack, preserves_flags)
            );
        }
        r
    }
    #[cfg(not(any(stapes_arm_dsp, stapes_no_long_multiply)))]
    {
        ((a as i64 * b as i64 + (1 << 31)) >> 32) as i32
    }
    #[cfg(stapes_no_long_multiply)]
    {
        mul_high_by_halves(a, b)
    }
}

/// [`mul_high`] from four 16 × 16-bit products (for cores whose only
/// multiply gives the low 32 bits, where a 64-bit product is a library call).
/// Gives the same bits as [`mul_high`] for every input (tested).
#[inline(always)]
pub fn mul_high_by_halves(a: i32, b: i32) -> i32 {
    let (ah, al) = (a >> 16, a & 0xffff);
    let (bh, bl) = (b >> 16, b & 0xffff);
    // a·b + 2^31 = ah·bh·2^32 + (ah·bl + al·bh + 2^15)·2^16 + al·bl, with
    // ah, bh signed (|·| ≤ 2^15) and al, bl unsigned (< 2^16). The low 16
    // bits of al·bl cannot carry into bit 32, so they are dropped.
    let low = ((al as u32).wrapping_mul(bl as u32) >> 16) as i32;
    // At most 32767·65535 + 65534 + 32768 = 2^31 − 1 in magnitude: fits i32.
    let m1 = ah * bl + low + (1 << 15);
    let m2 = al * bh;
    let mid = (m1 >> 16) + (m2 >> 16) + (((m1 & 0xffff) + (m2 & 0xffff)) >> 16);
    ah * bh + mid
}

impl BfpSample for i32 {
    type Twiddle = i32;
    const ZERO: i32 = 0;
    const ONE: i32 = i32::MAX;
    // A radix-4 output sums four terms, each within its input's bound plus
    // 1 (the products' rounding), and the rounding half of a shift of at
    // most 3: 4·(2^29 − 2) + 3 + 4 = 2^31 − 1. (Samples normalised below
    // 2^29 reach beyond this only at exactly 2^29 − 1 under a window of 1.)
    const LIMIT: u32 = (1 << 29) - 2;
    const FRAC: u32 = 0;
    // The first pass sums four inputs and rounds: 4·LIMIT + 4 < 2^31.
    const FIRST_PASS_MAX: u32 = Self::LIMIT;
    const SPLIT_FRAC: u32 = 0;

    #[inline(always)]
    fn get(self) -> i32 {
        self
    }
    #[inline(always)]
    fn put_unchecked(v: i32) -> i32 {
        v
    }
    #[inline(always)]
    fn put(v: i32) -> i32 {
        debug_assert!(v.unsigned_abs() <= Self::LIMIT, "FFT bound broken: {v}");
        v
    }
    #[inline(always)]
    fn rotate(xr: i32, xi: i32, c: i32, s: i32) -> (i32, i32) {
        // |x| < 2^30, so 2x fits i32; Q31 · 2x / 2^32 = W·x.
        let (xr, xi) = (xr << 1, xi << 1);
        (
            mul_high(c, xr) + mul_high(s, xi),
            mul_high(c, xi) - mul_high(s, xr),
        )
    }
    #[inline(always)]
    fn neg_twiddle(t: i32) -> i32 {
        -t
    }
    #[inline(always)]
    fn track(acc: u32, re: i32, im: i32) -> u32 {
        // Squares of 29-bit values would need 64 bits: the OR of the
        // components' magnitudes bounds them instead.
        acc | magnitude_bits(re) | magnitude_bits(im)
    }
    #[inline]
    fn magnitude_bound(acc: u32) -> u32 {
        // Components ≤ acc + 1, so |z| ≤ √2·(acc + 1); 92682 / 2^16 > √2.
        (((acc as u64 + 1) * 92682) >> 16) as u32 + 1
    }
    #[inline]
    fn input_bound(buf: &[i32]) -> (u32, u32) {
        // The largest component exactly (the OR of magnitudes that the
        // passes track could reach 2^29 − 1 from values well below it, and
        // shift the whole frame for nothing); it also serves as the tracker
        // (every component within it, and within the OR of it).
        let widest = buf.iter().fold(0, |m: u32, v| m.max(v.unsigned_abs()));
        (widest, widest)
    }
    #[inline(always)]
    fn split_rotate(xr: i32, xi: i32, c: i32, s: i32) -> (i32, i32) {
        Self::rotate(xr, xi, c, s)
    }
    #[inline(always)]
    fn split_out(e: i32, t: i32, shift: u32) -> i32 {
        Self::put(halved_difference_rounded(e, t, shift))
    }
}

/// `round((e − t) / 2^(1 + shift))` (halves up) for any `e`, `t`, in 32-bit
/// steps: `e − t` can exceed `i32` (the split step's reaches 4.83·LIMIT), so
/// it is taken as `2h + b` with `h = ⌊e/2⌋ − ⌊t/2⌋` and `b ∈ {−1, 0, 1}`;
/// then `(2h + b + 2^shift) >> (1 + shift) = (h + ⌊(b + 2^shift)/2⌋) >> shift`.
/// Equal to the 64-bit expression for every input (tested).
#[inline(always)]
pub fn halved_difference_rounded(e: i32, t: i32, shift: u32) -> i32 {
    let h = (e >> 1) - (t >> 1);
    let b = (e & 1) - (t & 1);
    (h + ((b + (1 << shift)) >> 1)) >> shift
}

/// Folds a 16-bit value's `re² + im²` (at most `2^31`) into a tracker that
/// keeps the largest top half (`sq >> 16`, at most `2^15`) in either of its
/// two 16-bit lanes: the Cortex-M4 loops keep a running maximum per lane
/// with `USUB16`/`SEL`, the portable code in the low lane; the bound is the
/// larger lane ([`BfpSample::magnitude_bound`]). Dropping the low 16 bits
/// of a square loosens the bound by less than 2^-15 of itself.
#[inline(always)]
pub fn fold_square(acc: u32, sq: u32) -> u32 {
    let low = (acc & 0xffff).max(sq >> 16);
    (acc & 0xffff_0000) | low
}

/// Bound on a level's output magnitudes (before its shift) for input
/// magnitudes within `bound`: `|a ± w·b| ≤ |a| + |b| ≤ 2·bound`, plus the
/// products' rounding.
#[inline]
fn grown(bound: u32) -> u64 {
    2 * bound as u64 + 2
}

/// The fewest right shifts that bring magnitudes within `grown` inside
/// `limit` after rounding, and the magnitude bound they then keep.
#[inline]
fn shift_for(grown: u64, limit: u32) -> (u32, u32) {
    let mut shift = 0;
    loop {
        // Rounding each component moves the magnitude by less than 1.
        let after = ((grown + ((1u64 << shift) >> 1)) >> shift) + 1;
        if after <= limit as u64 {
            return (shift, after as u32);
        }
        shift += 1;
    }
}

/// `round(v / 2^total)` (`v` itself for `total = 0`).
#[inline(always)]
fn round_shift(v: i32, total: u32) -> i32 {
    (v + ((1 << total) >> 1)) >> total
}

/// `|v|` or `|v| − 1`: ORed over values, it bounds every `|v|` by one more.
#[inline(always)]
fn magnitude_bits(v: i32) -> u32 {
    (v ^ (v >> 31)) as u32
}

/// Real FFT of `buf` (length `N`, a power of two ≥ 16) in place, with the
/// quarter-wave twiddle table of `N/4 + 1` entries. Returns the block
/// exponent: the true spectrum is the output times `2^exponent`.
///
/// The caller guarantees the lengths (the front ends check them once); with
/// other lengths the function returns 0 and leaves `buf` as it was.
/// Inputs beyond `±LIMIT` (possible only for 32-bit data) are first shifted
/// into range, which the exponent accounts for.
pub fn real_fft<P: Precision>(
    buf: &mut [P::Data],
    quarter: &[<P::Data as BfpSample>::Twiddle],
) -> i32 {
    transform::<P::Data, false>(buf, quarter)
}

/// [`real_fft`] with the generic radix-4 butterflies on every type (the
/// twin that the packed 16-bit butterflies are tested against).
#[doc(hidden)]
pub fn real_fft_generic_butterflies<P: Precision>(
    buf: &mut [P::Data],
    quarter: &[<P::Data as BfpSample>::Twiddle],
) -> i32 {
    transform::<P::Data, true>(buf, quarter)
}

/// The real FFT with the type's own butterflies, or the generic ones.
#[inline(always)]
fn transform<T: BfpSample, const GENERIC: bool>(buf: &mut [T], quarter: &[T::Twiddle]) -> i32 {
    let n = buf.len();
    if n < 16 || !n.is_power_of_two() || quarter.len() != n / 4 + 1 {
        return 0;
    }
    let half = n / 2;
    let mut exponent = 0i32;
    let mut bound = prepare::<T>(buf, &mut exponent);
    bit_reverse_pairs(buf, half);
    let mut m = if half.trailing_zeros() % 2 == 1 {
        bound = first_radix2(buf, bound, &mut exponent);
        2
    } else {
        bound = first_radix4::<T, GENERIC>(buf, bound, &mut exponent);
        4
    };
    while m < half {
        let (s, after) = shift_for(grown4(bound), T::LIMIT);
        let acc = if GENERIC {
            twiddled_columns::<T>(buf, quarter, m, s)
        } else {
            T::radix4_columns(buf, quarter, m, s)
        };
        exponent += s as i32;
        bound = after.min(T::magnitude_bound(acc));
        m *= 4;
    }
    split::<T, GENERIC>(buf, quarter, bound, &mut exponent);
    exponent
}

/// Magnitude bound of the input pairs; shifts them into range first if a
/// component exceeds what the first pass accepts (only 32-bit data can).
#[inline(never)]
fn prepare<T: BfpSample>(buf: &mut [T], exponent: &mut i32) -> u32 {
    let (acc, widest) = T::input_bound(buf);
    if widest <= T::FIRST_PASS_MAX {
        return T::magnitude_bound(acc);
    }
    let shift = 32 - (T::FIRST_PASS_MAX + 1).leading_zeros() - 1;
    let shift = (32 - widest.leading_zeros()).saturating_sub(shift);
    for v in buf.iter_mut() {
        // Floor, not rounding: rounding could carry the largest value just
        // past the bound (only inputs using the type's whole range get here).
        *v = T::put_unchecked(v.get() >> shift);
    }
    *exponent += shift as i32;
    T::magnitude_bound(T::input_bound(buf).0)
}

/// Bit-reversal permutation of `half` complex pairs.
#[inline(never)]
fn bit_reverse_pairs<T: BfpSample>(buf: &mut [T], half: usize) {
    let (pairs, _) = buf.as_chunks_mut::<2>();
    let pairs = &mut pairs[..half];
    let bits = half.trailing_zeros();
    #[cfg(stapes_arm_dsp)]
    if core::mem::size_of::<[T; 2]>() == 4 && arm_dsp_scan::bit_reverse_words(pairs, bits) {
        return;
    }
    #[cfg(not(stapes_no_long_multiply))]
    for i in 0..pairs.len() {
        // `RBIT` on the Cortex-M4.
        let j = i.reverse_bits() >> (usize::BITS - bits);
        if j > i {
            pairs.swap(i, j);
        }
    }
    #[cfg(stapes_no_long_multiply)]
    for i in 0..pairs.len() {
        // No bit-reverse instruction: two lookups in a 256-entry table of
        // reversed bytes (up to 2^16 pairs).
        let r = (REVERSED_BYTES[i & 0xff] as usize) << 8 | REVERSED_BYTES[(i >> 8) & 0xff] as usize;
        let j = r >> (16 - bits);
        if j > i {
            pairs.swap(i, j);
        }
    }
}

/// `REVERSED_BYTES[b]` = the bits of `b` in reverse order.
#[cfg(stapes_no_long_multiply)]
static REVERSED_BYTES: [u8; 256] = {
    let mut t = [0u8; 256];
    let mut b = 0;
    while b < 256 {
        t[b] = (b as u8).reverse_bits();
        b += 1;
    }
    t
};

/// The first level alone (pairs of points, twiddle 1).
#[inline(never)]
fn first_radix2<T: BfpSample>(buf: &mut [T], bound: u32, exponent: &mut i32) -> u32 {
    let (s, after) = shift_for(grown(bound), T::LIMIT);
    let mut acc = 0u32;
    for p in buf.chunks_exact_mut(4) {
        let (x0r, x0i, x1r, x1i) = (p[0].get(), p[1].get(), p[2].get(), p[3].get());
        let out = [
            round_shift(x0r + x1r, s),
            round_shift(x0i + x1i, s),
            round_shift(x0r - x1r, s),
            round_shift(x0i - x1i, s),
        ];
        acc = T::track(T::track(acc, out[0], out[1]), out[2], out[3]);
        for (d, v) in p.iter_mut().zip(out) {
            *d = T::put(v);
        }
    }
    *exponent += s as i32;
    after.min(T::magnitude_bound(acc))
}

/// The first two levels (twiddles 1 and −i): sums of four inputs, exact in
/// `i32` (at most 4 · 32768 for 16-bit data, 4 · LIMIT < 2^31 for 32-bit),
/// rounded once with the two levels' shift.
#[inline(never)]
fn first_radix4<T: BfpSample, const GENERIC: bool>(
    buf: &mut [T],
    bound: u32,
    exponent: &mut i32,
) -> u32 {
    let (s, after) = shift_for(grown(grown(bound) as u32), T::LIMIT);
    let acc = if GENERIC {
        first_radix4_generic::<T>(buf, s)
    } else {
        T::first_radix4_groups(buf, s)
    };
    *exponent += s as i32;
    after.min(T::magnitude_bound(acc))
}

/// The butterflies of [`first_radix4`] on any type.
#[inline(always)]
fn first_radix4_generic<T: BfpSample>(buf: &mut [T], s: u32) -> u32 {
    let r = (1i32 << s) >> 1;
    let mut acc = 0u32;
    for g in buf.chunks_exact_mut(8) {
        let x: [i32; 8] = core::array::from_fn(|i| g[i].get());
        // Level 1: (x0, x1) and (x2, x3), twiddle 1.
        let (ar, ai, br, bi) = (x[0] + x[2], x[1] + x[3], x[0] - x[2], x[1] - x[3]);
        let (cr, ci, dr, di) = (x[4] + x[6], x[5] + x[7], x[4] - x[6], x[5] - x[7]);
        // Level 2: (a, c) with twiddle 1, (b, d) with −i: −i·d = (di, −dr).
        let out = [
            (ar + cr + r) >> s,
            (ai + ci + r) >> s,
            (br + di + r) >> s,
            (bi - dr + r) >> s,
            (ar - cr + r) >> s,
            (ai - ci + r) >> s,
            (br - di + r) >> s,
            (bi + dr + r) >> s,
        ];
        for pair in out.chunks_exact(2) {
            acc = T::track(acc, pair[0], pair[1]);
        }
        for (d, v) in g.iter_mut().zip(out) {
            *d = T::put(v);
        }
    }
    acc
}

/// [`first_radix4_generic`] for 16-bit data on packed words (the same bits).
#[cfg(not(stapes_no_long_multiply))]
#[inline(never)]
fn packed16_first_radix4(words: &mut [u32], s: u32) -> u32 {
    use crate::dsp16::{high, low, pack, sum_of_squares};
    let r = (1i32 << s) >> 1;
    let mut acc = 0u32;
    for g in words.chunks_exact_mut(4) {
        let (x0, x1, x2, x3) = (g[0], g[1], g[2], g[3]);
        let (ar, ai) = (low(x0) + low(x1), high(x0) + high(x1));
        let (br, bi) = (low(x0) - low(x1), high(x0) - high(x1));
        let (cr, ci) = (low(x2) + low(x3), high(x2) + high(x3));
        let (dr, di) = (low(x2) - low(x3), high(x2) - high(x3));
        let (ar, ai, br, bi) = (ar + r, ai + r, br + r, bi + r);
        let out = [
            pack((ar + cr) >> s, (ai + ci) >> s),
            pack((br + di) >> s, (bi - dr) >> s),
            pack((ar - cr) >> s, (ai - ci) >> s),
            pack((br - di) >> s, (bi + dr) >> s),
        ];
        for (d, v) in g.iter_mut().zip(out) {
            acc = fold_square(acc, sum_of_squares(v));
            *d = v;
        }
    }
    acc
}

/// Bound on a radix-4 output's magnitude for inputs within `bound`: the
/// sum of four magnitudes, each grown by its product's rounding (< 2).
#[inline]
fn grown4(bound: u32) -> u64 {
    4 * bound as u64 + 8
}

/// `W^k = (cos, sin)` of `2πk/N` for `0 ≤ k < 3N/4`, from the quarter-wave
/// table (`q = N/4`).
#[inline(always)]
fn twiddle<T: BfpSample>(quarter: &[T::Twiddle], k: usize) -> (T::Twiddle, T::Twiddle) {
    let q = quarter.len() - 1;
    if k <= q {
        (quarter[k], quarter[q - k])
    } else if k <= 2 * q {
        (T::neg_twiddle(quarter[2 * q - k]), quarter[k - q])
    } else {
        let k = k - 2 * q;
        (T::neg_twiddle(quarter[k]), T::neg_twiddle(quarter[q - k]))
    }
}

/// Two levels in one pass (radix 4): sub-transforms of `m` points combine
/// into transforms of `4m` points. Each output is `y0 ± y1 ± y2 ± y3` (with
/// factors `±i`) of the rotated inputs `y_r = W^(r·j)·A_r[j]`, summed
/// exactly with `FRAC` fraction bits and rounded once with the pass's shift,
/// chosen from the tracked bound: `|out| ≤ 4·bound` plus the products'
/// rounding ([`grown4`]). Returns the tracker of what it wrote.
#[inline(never)]
fn twiddled_columns<T: BfpSample>(
    buf: &mut [T],
    quarter: &[T::Twiddle],
    m: usize,
    shift: u32,
) -> u32 {
    let q = quarter.len() - 1;
    let step = q / m;
    let one = (T::ONE, T::ZERO);
    // Column 0 has twiddles 1 (exactly: the tables store 1.0 as 1 − 2^-15).
    let mut acc = column::<T, true>(buf, m, 0, [one; 3], shift, 0);
    for j in 1..m {
        // W_4m^(r·j) for r = 1, 2, 3: angles below 3/4 of a turn.
        let k = j * step;
        let w = [
            twiddle::<T>(quarter, k),
            twiddle::<T>(quarter, 2 * k),
            twiddle::<T>(quarter, 3 * k),
        ];
        acc = column::<T, false>(buf, m, j, w, shift, acc);
    }
    acc
}

/// The radix-4 butterflies of column `j` over sub-transforms of `m` points,
/// in every group; `ONE` skips the multiplies (twiddles 1). After the
/// bit-reversal permutation a group's four quarters hold the transforms of
/// the samples `≡ 0, 2, 1, 3 (mod 4)`. Returns the tracker.
#[inline(always)]
fn column<T: BfpSample, const ONE: bool>(
    buf: &mut [T],
    m: usize,
    j: usize,
    [w1, w2, w3]: [(T::Twiddle, T::Twiddle); 3],
    shift: u32,
    mut acc: u32,
) -> u32 {
    let f = T::FRAC;
    let t = f + shift;
    let r = (1i32 << t) >> 1;
    let rotate = |x: &[T], (c, s): (T::Twiddle, T::Twiddle)| {
        if ONE {
            (x[0].get() << f, x[1].get() << f)
        } else {
            T::rotate(x[0].get(), x[1].get(), c, s)
        }
    };
    for g in buf.chunks_exact_mut(8 * m) {
        let (p01, p23) = g.split_at_mut(4 * m);
        let (p0, p2) = p01.split_at_mut(2 * m);
        let (p1, p3) = p23.split_at_mut(2 * m);
        let (x0, x2) = (&mut p0[2 * j..2 * j + 2], &mut p2[2 * j..2 * j + 2]);
        let (x1, x3) = (&mut p1[2 * j..2 * j + 2], &mut p3[2 * j..2 * j + 2]);
        // y_r = W^(r·j)·A_r[j]; A_1 sits in the third quarter, A_2 in the second.
        let (y0r, y0i) = ((x0[0].get() << f) + r, (x0[1].get() << f) + r);
        let (y1r, y1i) = rotate(x1, w1);
        let (y2r, y2i) = rotate(x2, w2);
        let (y3r, y3i) = rotate(x3, w3);
        let (ar, ai) = (y0r + y2r, y0i + y2i);
        let (br, bi) = (y0r - y2r, y0i - y2i);
        let (cr, ci) = (y1r + y3r, y1i + y3i);
        let (dr, di) = (y1r - y3r, y1i - y3i);
        // X[j] = a + c, X[j + m] = b − i·d, X[j + 2m] = a − c, X[j + 3m] = b + i·d.
        let out = [
            (ar + cr) >> t,
            (ai + ci) >> t,
            (br + di) >> t,
            (bi - dr) >> t,
            (ar - cr) >> t,
            (ai - ci) >> t,
            (br - di) >> t,
            (bi + dr) >> t,
        ];
        for pair in out.chunks_exact(2) {
            acc = T::track(acc, pair[0], pair[1]);
        }
        x0[0] = T::put(out[0]);
        x0[1] = T::put(out[1]);
        x2[0] = T::put(out[2]);
        x2[1] = T::put(out[3]);
        x1[0] = T::put(out[4]);
        x1[1] = T::put(out[5]);
        x3[0] = T::put(out[6]);
        x3[1] = T::put(out[7]);
    }
    acc
}

/// Split step: from `Z = FFT(x[2n] + i·x[2n+1])` to the real spectrum `X`.
/// With `E = (Z[k] + Z*[N/2−k])/2`, `O = (Z[k] − Z*[N/2−k])/2` and
/// `T = i·W^k·O`: `X[k] = E − T`, `X[N/2−k] = conj(E + T)`. Computed from
/// `2E` and `2T`, with one rounding per output (which also halves).
#[inline(never)]
fn split<T: BfpSample, const GENERIC: bool>(
    buf: &mut [T],
    quarter: &[T::Twiddle],
    bound: u32,
    exponent: &mut i32,
) {
    let half = buf.len() / 2;
    let q = half / 2;
    // |X| ≤ |E| + |O| ≤ √2·√(|E|² + |O|²) = √(|Z[k]|² + |Z[m]|²) ≤ √2·bound
    // (92682 / 2^16 > √2), plus the products' rounding.
    let (s, _) = shift_for(((bound as u64 * 92682) >> 16) + 3, T::LIMIT);
    let f = T::SPLIT_FRAC;
    if GENERIC {
        split_pairs_generic::<T>(buf, quarter, s);
    } else {
        T::split_pairs(buf, quarter, s);
    }
    // k = 0: X[0] = re + im and X[N/2] = re − im of Z[0] (2E = 2·re, 2T = ∓2·im);
    // k = N/4: X = conj(Z[N/4]) (2T = 0).
    let (z0r, z0i) = (buf[0].get(), buf[1].get());
    let (zqr, zqi) = (buf[2 * q].get(), buf[2 * q + 1].get());
    buf[0] = T::split_out(2 * z0r, (-2 * z0i) << f, s);
    buf[1] = T::split_out(2 * z0r, (2 * z0i) << f, s);
    buf[2 * q] = T::split_out(2 * zqr, 0, s);
    buf[2 * q + 1] = T::split_out(-2 * zqi, 0, s);
    *exponent += s as i32;
}

/// The split step's pairs on any type.
#[inline(always)]
fn split_pairs_generic<T: BfpSample>(buf: &mut [T], quarter: &[T::Twiddle], s: u32) {
    let half = buf.len() / 2;
    let q = half / 2;
    // Pair k (1 ≤ k < N/4) with m = N/2 − k: Z[k] in the lower half of the
    // buffer, Z[m] in the upper half walked backwards; W^k = (q[k], q[Q − k]).
    let (lower, upper) = buf.split_at_mut(half);
    let twiddles = quarter[1..q].iter().zip(quarter[1..q].iter().rev());
    let pairs = lower[2..]
        .chunks_exact_mut(2)
        .zip(upper[2..].rchunks_exact_mut(2));
    for ((zk, zm), (&c, &sw)) in pairs.zip(twiddles) {
        let (ar, ai) = (zk[0].get(), zk[1].get());
        let (br, bi) = (zm[0].get(), -zm[1].get()); // conj(Z[m])
        let (er2, ei2) = (ar + br, ai + bi);
        // W·2O, then 2T = i·W·2O = (−im, re).
        let (ur, ui) = T::split_rotate(ar - br, ai - bi, c, sw);
        let (tr2, ti2) = (-ui, ur);
        zk[0] = T::split_out(er2, tr2, s);
        zk[1] = T::split_out(ei2, ti2, s);
        zm[0] = T::split_out(er2, -tr2, s);
        zm[1] = T::split_out(-ei2, ti2, s);
    }
}

/// [`split_pairs_generic`] for 16-bit data on packed words (the same bits):
/// with `x = Z[k] − conj(Z[m])`, `c·xr + s·xi` and `c·xi − s·xr` are two
/// dual multiplies of the packed `Z[k]` and `Z[m]` each.
#[cfg(not(stapes_no_long_multiply))]
#[inline(never)]
fn packed16_split_pairs(words: &mut [u32], quarter: &[i16], s: u32) {
    use crate::dsp16::{
        cross_multiply_add, cross_multiply_sub, dual_multiply_add, dual_multiply_sub, high, low,
        pack,
    };
    let q = words.len() / 2;
    let (lower, upper) = words.split_at_mut(q);
    let twiddles = quarter[1..q].iter().zip(quarter[1..q].iter().rev());
    let pairs = lower[1..].iter_mut().zip(upper[1..].iter_mut().rev());
    let out = |e: i32, t: i32| <i16 as BfpSample>::split_out(e, t, s) as i32;
    for ((zk, zm), (&c, &sw)) in pairs.zip(twiddles) {
        let (a, b) = (*zk, *zm);
        let w = pack(c as i32, sw as i32);
        let (er2, ei2) = (low(a) + low(b), high(a) - high(b));
        // c·(ar − br) + s·(ai + bi) and c·(ai + bi) − s·(ar − br), each
        // within i32 (as in `split_rotate`), rounded once.
        let ur = dual_multiply_add(w, a, 4).wrapping_sub(dual_multiply_sub(w, b, 0)) >> 3;
        let ui = cross_multiply_sub(w, a, 4).wrapping_add(cross_multiply_add(w, b, 0)) >> 3;
        let (tr2, ti2) = (-ui, ur);
        *zk = pack(out(er2, tr2), out(ei2, ti2));
        *zm = pack(out(er2, -tr2), out(-ei2, ti2));
    }
}

/// [`twiddled_columns`] for 16-bit data on packed words ([`crate::dsp16`]):
/// a complex value `(re, im)` is one `u32`, a twiddle `(c, s)` another, and
/// each 13-fraction-bit product component is one multiply-accumulate
/// (`SMLAD`/`SMLSDX` on the Cortex-M4). The same bits as the generic
/// butterflies (tested).
#[cfg(not(stapes_no_long_multiply))]
#[inline]
fn packed16_columns(buf: &mut [u32], quarter: &[i16], m: usize, shift: u32) -> u32 {
    // The shift as a constant for the whole pass (immediates in the loop).
    match shift {
        0 => packed16_pass::<0>(buf, quarter, m),
        1 => packed16_pass::<1>(buf, quarter, m),
        2 => packed16_pass::<2>(buf, quarter, m),
        3 => packed16_pass::<3>(buf, quarter, m),
        _ => twiddled_columns::<i16>(bytemuck::cast_slice_mut(buf), quarter, m, shift),
    }
}

/// [`packed16_columns`] for one shift.
#[cfg(not(stapes_no_long_multiply))]
#[inline(never)]
fn packed16_pass<const SHIFT: u32>(buf: &mut [u32], quarter: &[i16], m: usize) -> u32 {
    use crate::dsp16::pack;
    let q = quarter.len() - 1;
    let step = q / m;
    let one = pack(i16::MAX as i32, 0);
    #[cfg(stapes_arm_dsp)]
    let mut kernel = arm_dsp_column::PassKernel::new(buf.len(), m);
    #[cfg(stapes_arm_dsp)]
    let first = kernel.run_first::<SHIFT>(buf, 0);
    #[cfg(not(stapes_arm_dsp))]
    let first = None;
    let mut acc =
        first.unwrap_or_else(|| packed16_column_out_of_line::<true>(buf, m, 0, [one; 3], SHIFT, 0));
    let word = |c: i16, s: i16| pack(c as i32, s as i32);
    let table = &quarter[..=q];
    // k = j·step < q for the columns j = 1 .. m; the branches say which
    // quadrant 2k and 3k lie in.
    for (j, k) in (step..q).step_by(step.max(1)).enumerate() {
        let w1 = word(table[k], table[q - k]);
        let k2 = 2 * k;
        let w2 = if k2 <= q {
            word(table[k2], table[q - k2])
        } else {
            word(-table[2 * q - k2], table[k2 - q])
        };
        let k3 = 3 * k;
        let w3 = if k3 <= q {
            word(table[k3], table[q - k3])
        } else if k3 <= 2 * q {
            word(-table[2 * q - k3], table[k3 - q])
        } else {
            let k3 = k3 - 2 * q;
            word(-table[k3], -table[q - k3])
        };
        let w = [w1, w2, w3];
        #[cfg(stapes_arm_dsp)]
        if let Some(a) = kernel.run::<SHIFT>(buf, j + 1, w, acc) {
            acc = a;
            continue;
        }
        // Elsewhere the twin; on the Cortex-M4 only if the kernel declined
        // (it does not for the passes the FFT makes), out of line.
        acc = if cfg!(stapes_arm_dsp) {
            packed16_column_out_of_line::<false>(buf, m, j + 1, w, SHIFT, acc)
        } else {
            packed16_column::<false>(buf, m, j + 1, w, SHIFT, acc)
        };
    }
    acc
}

/// [`packed16_column`] as one function for every shift (less flash where
/// speed does not matter).
#[cfg(not(stapes_no_long_multiply))]
#[inline(never)]
fn packed16_column_out_of_line<const ONE: bool>(
    buf: &mut [u32],
    m: usize,
    j: usize,
    w: [u32; 3],
    shift: u32,
    acc: u32,
) -> u32 {
    packed16_column::<ONE>(buf, m, j, w, shift, acc)
}

/// One column of [`packed16_columns`] in every group.
#[cfg(not(stapes_no_long_multiply))]
#[inline(always)]
fn packed16_column<const ONE: bool>(
    buf: &mut [u32],
    m: usize,
    j: usize,
    [w1, w2, w3]: [u32; 3],
    shift: u32,
    mut acc: u32,
) -> u32 {
    use crate::dsp16::{cross_multiply_sub, dual_multiply_add, high, low, pack, sum_of_squares};
    let f = <i16 as BfpSample>::FRAC;
    let t = f + shift;
    let r = (1i32 << t) >> 1;
    // W·x with 13 fraction bits: (c·re + s·im) >> 2, (c·im − s·re) >> 2,
    // exactly as `<i16 as BfpSample>::rotate`.
    let rotate = |x: u32, w: u32| {
        if ONE {
            (low(x) << f, high(x) << f)
        } else {
            (
                dual_multiply_add(w, x, 0) >> 2,
                cross_multiply_sub(w, x, 0) >> 2,
            )
        }
    };
    // Pair j of each group's four quarters: words j, j + m, j + 2m, j + 3m.
    let span = 3 * m + 1;
    let mut base = j;
    while base + span <= buf.len() {
        let g = &mut buf[base..base + span];
        let (x0, x2, x1, x3) = (g[0], g[m], g[2 * m], g[3 * m]);
        let (y0r, y0i) = ((low(x0) << f) + r, (high(x0) << f) + r);
        let (y1r, y1i) = rotate(x1, w1);
        let (y2r, y2i) = rotate(x2, w2);
        let (y3r, y3i) = rotate(x3, w3);
        let (ar, ai) = (y0r + y2r, y0i + y2i);
        let (br, bi) = (y0r - y2r, y0i - y2i);
        let (cr, ci) = (y1r + y3r, y1i + y3i);
        let (dr, di) = (y1r - y3r, y1i - y3i);
        let out = [
            pack((ar + cr) >> t, (ai + ci) >> t),
            pack((br + di) >> t, (bi - dr) >> t),
            pack((ar - cr) >> t, (ai - ci) >> t),
            pack((br - di) >> t, (bi + dr) >> t),
        ];
        for (k, &v) in out.iter().enumerate() {
            acc = fold_square(acc, sum_of_squares(v));
            g[k * m] = v;
        }
        base += 4 * m;
    }
    acc
}

/// The twiddled radix-4 column in Armv7E-M assembly.
#[cfg(stapes_arm_dsp)]
mod arm_dsp_column {
    /// A pass's group count, for the hand-scheduled column loop (the twin
    /// of [`super::packed16_column`]: the same bits, checked on the board
    /// against the host frame by frame).
    pub(super) struct PassKernel {
        m: usize,
        /// Words from a column's first group start to one past its last
        /// (0 when the pass has no whole group).
        span: usize,
        len: usize,
        ctx: [u32; 4],
    }

    impl PassKernel {
        /// Column 0 (twiddles 1) over every group: the same loop with the
        /// twiddle 2^14 and one bit less dropped from the products, so each
        /// `y = x·2^13` exactly, as the twin's; `None` as for [`PassKernel::run`].
        #[inline(always)]
        pub(super) fn run_first<const SHIFT: u32>(
            &mut self,
            buf: &mut [u32],
            acc: u32,
        ) -> Option<u32> {
            if buf.len() != self.len || self.span == 0 || SHIFT > 3 {
                return None;
            }
            let start = buf.as_mut_ptr();
            let end = start.wrapping_add(self.span);
            let one = 1u32 << 14;
            self.ctx = [one, one, one, end as u32];
            Some(run::<SHIFT, 1>(start, self.m, &mut self.ctx, acc))
        }

        /// For a pass over `len` words with sub-transforms of `m` points.
        #[inline(always)]
        pub(super) fn new(len: usize, m: usize) -> Self {
            let groups = if m == 0 { 0 } else { len / (4 * m) };
            PassKernel {
                m,
                span: 4 * m * groups,
                len,
                ctx: [0; 4],
            }
        }

        /// Runs column `j` over every group; `None` (nothing done) when
        /// the column does not fit.
        #[inline(always)]
        pub(super) fn run<const SHIFT: u32>(
            &mut self,
            buf: &mut [u32],
            j: usize,
            [w1, w2, w3]: [u32; 3],
            acc: u32,
        ) -> Option<u32> {
            // Group g reads and writes words j + 4mg + {0, m, 2m, 3m}: all
            // inside the buffer when j < m and span = 4m·groups ≤ len.
            if buf.len() != self.len || self.span == 0 || j >= self.m || SHIFT > 3 {
                return None;
            }
            let start = buf.as_mut_ptr().wrapping_add(j);
            // One past the last group's start (never dereferenced).
            let end = start.wrapping_add(self.span);
            self.ctx = [w1, w2, w3, end as u32];
            Some(run::<SHIFT, 2>(start, self.m, &mut self.ctx, acc))
        }
    }

    /// The loop for one shift. `ctx` = `[w1, w2, w3, end]`.
    ///
    /// Per group, with `st` = `4m` bytes: `x0 = [p]`, `x2 = [p + st]`
    /// (the quarter holding A₂), `x1 = [p + 2st]` (A₁), `x3 = [p + 3st]`;
    /// `4·y_r = SMUAD/SMUSDX(w_r, x_r)`, `y_r = 4·y_r >> 2` (truncated, as
    /// the twin), `y0 = (x0 << 13) + R`; then the 4-point DFT, each output
    /// `>> t` (t = 13 + SHIFT) and packed, its `re² + im²` folded into the
    /// tracker `acc` ([`super::fold_square`], per lane). Values wrap in 32 bits only where the final
    /// result is in range (so they are exact).
    #[inline(always)]
    fn run<const SHIFT: u32, const Q: u32>(
        start: *mut u32,
        m: usize,
        ctx: &mut [u32; 4],
        acc: u32,
    ) -> u32 {
        let mut acc = acc;
        let st = 4 * m;
        // SAFETY: `PassKernel::run` checked that every group's four words
        // lie in the buffer; the loop runs while p < end (at least once:
        // one group).
        // Only registers, the buffer's words and `ctx` are touched.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "2:",
                "add    {t6}, {p}, {st}, lsl #1",
                "ldr    {t0}, [{t6}]",
                "ldr    {t1}, [{tw}]",
                "smuad  {t2}, {t1}, {t0}",
                "smusdx {t0}, {t1}, {t0}",
                "ldr    {t1}, [{t6}, {st}]",
                "ldr    {t3}, [{tw}, #8]",
                "smuad  {t4}, {t3}, {t1}",
                "smusdx {t1}, {t3}, {t1}",
                "asr    {t2}, {t2}, #{q}",
                "add    {t3}, {t2}, {t4}, asr #{q}",   // cr
                "sub    {t2}, {t2}, {t4}, asr #{q}",   // dr
                "asr    {t0}, {t0}, #{q}",
                "add    {t4}, {t0}, {t1}, asr #{q}",   // ci
                "sub    {t0}, {t0}, {t1}, asr #{q}",   // di
                "ldr    {t1}, [{p}, {st}]",           // x2
                "ldr    {t5}, [{tw}, #4]",            // w2
                "smuad  {t6}, {t5}, {t1}",
                "smusdx {t1}, {t5}, {t1}",
                "ldr    {t5}, [{p}]",                 // x0
                "lsl    {t7}, {t5}, #16",
                "asr    {t7}, {t7}, #3",
                "add    {t7}, {t7}, #{r}",            // y0r
                "asr    {t6}, {t6}, #{q}",              // y2r
                "add    {t6}, {t7}, {t6}",            // ar
                "rsb    {t7}, {t6}, {t7}, lsl #1",    // br = 2·y0r − ar
                "add    {t6}, {t6}, {t3}",            // X0r = ar + cr
                "sub    {t3}, {t6}, {t3}, lsl #1",    // X2r = ar − cr
                "add    {t7}, {t7}, {t0}",            // X1r = br + di
                "sub    {t0}, {t7}, {t0}, lsl #1",    // X3r = br − di
                "asr    {t5}, {t5}, #16",
                "lsl    {t5}, {t5}, #13",
                "add    {t5}, {t5}, #{r}",            // y0i
                "asr    {t1}, {t1}, #{q}",              // y2i
                "add    {t1}, {t5}, {t1}",            // ai
                "rsb    {t5}, {t1}, {t5}, lsl #1",    // bi = 2·y0i − ai
                "add    {t1}, {t1}, {t4}",            // X0i = ai + ci
                "sub    {t4}, {t1}, {t4}, lsl #1",    // X2i = ai − ci
                "sub    {t5}, {t5}, {t2}",            // X1i = bi − dr
                "add    {t2}, {t5}, {t2}, lsl #1",    // X3i = bi + dr
                "asr    {t6}, {t6}, #{t}",
                "pkhbt  {t6}, {t6}, {t1}, lsl #{u}",  // X0
                "asr    {t7}, {t7}, #{t}",
                "pkhbt  {t7}, {t7}, {t5}, lsl #{u}",  // X1
                "asr    {t3}, {t3}, #{t}",
                "pkhbt  {t3}, {t3}, {t4}, lsl #{u}",  // X2
                "asr    {t0}, {t0}, #{t}",
                "pkhbt  {t0}, {t0}, {t2}, lsl #{u}",  // X3
                "str    {t6}, [{p}]",
                "str    {t7}, [{p}, {st}]",
                "str    {t3}, [{p}, {st}, lsl #1]",
                "add    {t1}, {p}, {st}, lsl #1",
                "str    {t0}, [{t1}, {st}]",
                "smuad  {t6}, {t6}, {t6}",            // re² + im² of each output
                "smuad  {t7}, {t7}, {t7}",
                "smuad  {t3}, {t3}, {t3}",
                "smuad  {t0}, {t0}, {t0}",
                "pkhtb  {t6}, {t7}, {t6}, asr #16",   // top halves, two per word
                "pkhtb  {t3}, {t0}, {t3}, asr #16",
                "usub16 {t7}, {t6}, {acc}",           // lane-wise maximum
                "sel    {acc}, {t6}, {acc}",
                "usub16 {t7}, {t3}, {acc}",
                "sel    {acc}, {t3}, {acc}",
                "add    {p}, {p}, {st}, lsl #2",
                "ldr    {t1}, [{tw}, #12]",
                "cmp    {p}, {t1}",
                "blo    2b",
                p = inout(reg) start => _,
                st = in(reg) st,
                tw = in(reg) ctx.as_mut_ptr(),
                acc = inout(reg) acc,
                t0 = out(reg) _,
                t1 = out(reg) _,
                t2 = out(reg) _,
                t3 = out(reg) _,
                t4 = out(reg) _,
                t5 = out(reg) _,
                t6 = out(reg) _,
                t7 = out(reg) _,
                r = const 1u32 << (12 + SHIFT),
                t = const 13 + SHIFT,
                u = const 3 - SHIFT,
                q = const Q,
                options(nostack)
            );
        }
        acc
    }
}

/// The split step's pairs in Armv7E-M assembly: the twin of
/// [`packed16_split_pairs`] (the same bits; the board's frames are checked
/// against the host's, which run the twin).
#[cfg(stapes_arm_dsp)]
mod arm_dsp_split {
    /// Runs the pairs `1 ≤ k < N/4`; `false` (nothing done) for a shift
    /// beyond 3 or lengths that do not match.
    #[inline(always)]
    pub(super) fn split_pairs(words: &mut [u32], quarter: &[i16], s: u32) -> bool {
        let q = words.len() / 2;
        if q < 2 || quarter.len() != q + 1 || words.len() != 2 * q {
            return false;
        }
        match s {
            0 => run::<0>(words, quarter, q),
            1 => run::<1>(words, quarter, q),
            2 => run::<2>(words, quarter, q),
            3 => run::<3>(words, quarter, q),
            _ => return false,
        }
        true
    }

    /// Per pair: `a = Z[k]`, `b = Z[N/2 − k]`, `w = (q[k], q[Q − k])`;
    /// `u = (SMUAD(w, a) − SMUSD(w, b) + 4) >> 3`,
    /// `v = (SMUSDX(w, a) + SMUADX(w, b) + 4) >> 3`, `E = (re a + re b, im a − im b)`;
    /// `Z[k] = ((E·2^12 + (v, −u) + R) >> T)`, `Z[N/2 − k] = ((E·2^12)·(1, −1) + (−v, −u) + R) >> T`
    /// with `T = 13 + SHIFT`, `R = 2^(T − 1)` (as [`super::packed16_split_pairs`]).
    #[inline(never)]
    fn run<const SHIFT: u32>(words: &mut [u32], quarter: &[i16], q: usize) {
        let lower = words[1..].as_mut_ptr();
        let upper = words[2 * q - 1..].as_mut_ptr();
        let cos = quarter[1..].as_ptr();
        let sin = quarter[q - 1..].as_ptr();
        let count = q - 1;
        // SAFETY: k runs over 1 ..= q − 1: words k and 2q − k (q + 1 ..= 2q − 1)
        // and quarter entries k and q − k (1 ..= q − 1) lie inside the
        // slices; only those words are written.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "2:",
                "ldr    {a}, [{pk}]",
                "ldr    {b}, [{pm}]",
                "ldrh   {t1}, [{tc}], #2",
                "ldrh   {t2}, [{ts}], #-2",
                "pkhbt  {w}, {t1}, {t2}, lsl #16",
                "smuad  {t1}, {w}, {a}",
                "smusd  {t2}, {w}, {b}",
                "sub    {t1}, {t1}, {t2}",
                "add    {t1}, {t1}, #4",
                "asr    {t1}, {t1}, #3",            // u
                "smusdx {t2}, {w}, {a}",
                "smuadx {t3}, {w}, {b}",
                "add    {t2}, {t2}, {t3}",
                "add    {t2}, {t2}, #4",
                "asr    {t2}, {t2}, #3",            // v
                "sxth   {t3}, {a}",
                "sxtah  {t3}, {t3}, {b}",           // E re
                "asr    {t4}, {a}, #16",
                "sub    {t4}, {t4}, {b}, asr #16",  // E im
                "lsl    {t3}, {t3}, #12",
                "add    {t3}, {t3}, #{r}",
                "lsl    {t4}, {t4}, #12",
                "add    {a}, {t3}, {t2}",           // Z[k] re
                "sub    {b}, {t3}, {t2}",           // Z[m] re
                "sub    {w}, {t4}, {t1}",
                "add    {w}, {w}, #{r}",            // Z[k] im
                "add    {t3}, {t4}, {t1}",
                "rsb    {t3}, {t3}, #{r}",          // Z[m] im
                "asr    {a}, {a}, #{t}",
                "pkhbt  {a}, {a}, {w}, lsl #{u}",
                "asr    {b}, {b}, #{t}",
                "pkhbt  {b}, {b}, {t3}, lsl #{u}",
                "str    {a}, [{pk}], #4",
                "str    {b}, [{pm}], #-4",
                "subs   {n}, {n}, #1",
                "bne    2b",
                pk = inout(reg) lower => _,
                pm = inout(reg) upper => _,
                tc = inout(reg) cos => _,
                ts = inout(reg) sin => _,
                n = inout(reg) count => _,
                a = out(reg) _,
                b = out(reg) _,
                w = out(reg) _,
                t1 = out(reg) _,
                t2 = out(reg) _,
                t3 = out(reg) _,
                t4 = out(reg) _,
                r = const 1u32 << (12 + SHIFT),
                t = const 13 + SHIFT,
                u = const 3 - SHIFT,
                options(nostack)
            );
        }
    }
}

/// The first radix-4 pass in Armv7E-M assembly: the twin of
/// [`packed16_first_radix4`] (the same bits; the board's frames are checked
/// against the host's, which run the twin).
#[cfg(stapes_arm_dsp)]
mod arm_dsp_first {
    /// All groups of four words; `None` (nothing done) for a shift outside
    /// 1 ..= 3 or a length that is not a positive multiple of 4.
    #[inline(always)]
    pub(super) fn first_radix4(words: &mut [u32], s: u32) -> Option<u32> {
        if words.is_empty() || !words.len().is_multiple_of(4) {
            return None;
        }
        // (No shift at all, for quiet input, is left to the twin: an
        // immediate shift of 0 has no encoding.)
        Some(match s {
            1 => run::<1>(words),
            2 => run::<2>(words),
            3 => run::<3>(words),
            _ => return None,
        })
    }

    /// Per group `x0..x3`: `a, b = x0 ± x1`, `c, d = x2 ± x3` (componentwise,
    /// exact), `R = 2^SHIFT / 2` added to `a` and `b`; outputs `a + c`,
    /// `b − i·d`, `a − c`, `b + i·d`, each component `>> SHIFT`, packed; the
    /// outputs' `re² + im²` folded into the returned tracker
    /// ([`super::fold_square`], per lane).
    #[inline(never)]
    fn run<const SHIFT: u32>(words: &mut [u32]) -> u32 {
        let start = words.as_mut_ptr();
        let end = start.wrapping_add(words.len());
        let mut acc = 0u32;
        // SAFETY: the loop visits groups of four words from `start` while
        // p < end, and `words.len()` is a positive multiple of 4.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "2:",
                "ldrd   {x0}, {x1}, [{p}]",
                "ldrd   {x2}, {x3}, [{p}, #8]",
                "sxth   {c}, {x0}",
                "sxth   {d}, {x1}",
                "add    {a}, {c}, {d}",               // ar
                "sub    {b}, {c}, {d}",               // br
                "asr    {c}, {x0}, #16",
                "add    {d}, {c}, {x1}, asr #16",     // ai
                "sub    {c}, {c}, {x1}, asr #16",     // bi
                "add    {a}, {a}, #{r}",
                "add    {b}, {b}, #{r}",
                "add    {d}, {d}, #{r}",
                "add    {c}, {c}, #{r}",
                "sxth   {x0}, {x2}",
                "sxth   {x1}, {x3}",
                "sub    {x1}, {x0}, {x1}",            // dr
                "rsb    {x0}, {x1}, {x0}, lsl #1",    // cr = 2·lo(x2) − dr
                "asr    {x2}, {x2}, #16",
                "sub    {x3}, {x2}, {x3}, asr #16",   // di
                "rsb    {x2}, {x3}, {x2}, lsl #1",    // ci
                "add    {a}, {a}, {x0}",              // X0r
                "sub    {x0}, {a}, {x0}, lsl #1",     // X2r
                "add    {d}, {d}, {x2}",              // X0i
                "sub    {x2}, {d}, {x2}, lsl #1",     // X2i
                "add    {b}, {b}, {x3}",              // X1r = br + di
                "sub    {x3}, {b}, {x3}, lsl #1",     // X3r = br − di
                "sub    {c}, {c}, {x1}",              // X1i = bi − dr
                "add    {x1}, {c}, {x1}, lsl #1",     // X3i = bi + dr
                "asr    {a}, {a}, #{s}",
                "pkhbt  {a}, {a}, {d}, lsl #{u}",     // X0
                "asr    {b}, {b}, #{s}",
                "pkhbt  {b}, {b}, {c}, lsl #{u}",     // X1
                "asr    {x0}, {x0}, #{s}",
                "pkhbt  {x0}, {x0}, {x2}, lsl #{u}",  // X2
                "asr    {x3}, {x3}, #{s}",
                "pkhbt  {x3}, {x3}, {x1}, lsl #{u}",  // X3
                "strd   {a}, {b}, [{p}]",
                "strd   {x0}, {x3}, [{p}, #8]",
                "smuad  {d}, {a}, {a}",
                "smuad  {c}, {b}, {b}",
                "smuad  {x2}, {x0}, {x0}",
                "smuad  {x1}, {x3}, {x3}",
                "pkhtb  {d}, {c}, {d}, asr #16",
                "pkhtb  {x2}, {x1}, {x2}, asr #16",
                "usub16 {c}, {d}, {acc}",
                "sel    {acc}, {d}, {acc}",
                "usub16 {c}, {x2}, {acc}",
                "sel    {acc}, {x2}, {acc}",
                "add    {p}, {p}, #16",
                "cmp    {p}, {end}",
                "blo    2b",
                p = inout(reg) start => _,
                end = in(reg) end,
                acc = inout(reg) acc,
                x0 = out(reg) _,
                x1 = out(reg) _,
                x2 = out(reg) _,
                x3 = out(reg) _,
                a = out(reg) _,
                b = out(reg) _,
                c = out(reg) _,
                d = out(reg) _,
                r = const (1u32 << SHIFT) >> 1,
                s = const SHIFT,
                u = const 16 - SHIFT,
                options(nostack)
            );
        }
        acc
    }
}

/// The FFT's input scan and bit reversal in Armv7E-M assembly: twins of the
/// portable fold in `<i16 as BfpSample>::input_bound` and the loop in
/// [`bit_reverse_pairs`] (the same results; the board's frames are checked
/// against the host's).
#[cfg(stapes_arm_dsp)]
mod arm_dsp_scan {
    /// Bit-reversal permutation of 4-byte pairs (16-bit data), `bits` =
    /// log2 of their count: one `RBIT` per even index `i`, since
    /// rev(i + 1) = rev(i) + count/2. `false` (nothing done) for fewer than
    /// 4 pairs or pairs off a word boundary.
    #[inline(always)]
    pub(super) fn bit_reverse_words<T>(pairs: &mut [[T; 2]], bits: u32) -> bool {
        let half = pairs.len();
        if core::mem::size_of::<[T; 2]>() != 4 || half < 4 || half != 1 << bits {
            return false;
        }
        let base = pairs.as_mut_ptr() as *mut u32;
        if !(base as usize).is_multiple_of(4) {
            return false;
        }
        // SAFETY: every index i and j = rev(i) is below `half` (a power of
        // two), so each word access lies in `pairs` (4 bytes per pair, on a
        // word boundary); pairs are swapped whole.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "2:",
                "rbit   {j}, {i}",
                "lsr    {j}, {j}, {sh}",
                "cmp    {j}, {i}",
                "bls    3f",
                "ldr    {a}, [{base}, {i}, lsl #2]",
                "ldr    {b}, [{base}, {j}, lsl #2]",
                "str    {b}, [{base}, {i}, lsl #2]",
                "str    {a}, [{base}, {j}, lsl #2]",
                "3:",
                "add    {j}, {j}, {top}",
                "add    {i}, {i}, #1",
                "cmp    {j}, {i}",
                "bls    4f",
                "ldr    {a}, [{base}, {i}, lsl #2]",
                "ldr    {b}, [{base}, {j}, lsl #2]",
                "str    {b}, [{base}, {i}, lsl #2]",
                "str    {a}, [{base}, {j}, lsl #2]",
                "4:",
                "add    {i}, {i}, #1",
                "cmp    {i}, {half}",
                "blo    2b",
                base = in(reg) base,
                i = inout(reg) 0usize => _,
                sh = in(reg) 32 - bits,
                top = in(reg) half / 2,
                half = in(reg) half,
                j = out(reg) _,
                a = out(reg) _,
                b = out(reg) _,
                options(nostack)
            );
        }
        true
    }

    /// [`super::fold_square`] of every word's `re² + im²`, two words per
    /// step, one per lane; `None` for an empty or odd-length slice.
    #[inline(never)]
    pub(super) fn input_tracker(words: &[u32]) -> Option<u32> {
        if words.is_empty() || !words.len().is_multiple_of(2) {
            return None;
        }
        let start = words.as_ptr();
        let end = start.wrapping_add(words.len());
        let mut acc = 0u32;
        // SAFETY: reads words [start, end) two at a time (the length is a
        // positive even number); writes nothing.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "2:",
                "ldrd   {x}, {y}, [{p}], #8",
                "smuad  {x}, {x}, {x}",
                "smuad  {y}, {y}, {y}",
                "pkhtb  {x}, {y}, {x}, asr #16",
                "usub16 {y}, {x}, {acc}",
                "sel    {acc}, {x}, {acc}",
                "cmp    {p}, {end}",
                "blo    2b",
                p = inout(reg) start => _,
                end = in(reg) end,
                acc = inout(reg) acc,
                x = out(reg) _,
                y = out(reg) _,
                options(nostack, readonly)
            );
        }
        Some(acc)
    }
}
