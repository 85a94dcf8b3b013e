//! The spectrum stage, in every arithmetic: each bin's power `|X[k]|²` or
//! magnitude `|X[k]|`, in place in the FFT buffer (no separate power array).
//!
//! The DFT has no `1/N` factor: `X[k] = Σ x[n]·e^(-2πikn/N)` of the windowed,
//! zero-padded, full-scale-normalised frame.
//!
//! * **`f32`** ([`spectrum_in_place`]): the values replace the first
//!   `N/2 + 1` elements of the buffer.
//! * **Fixed point** (`FixedSpectrum`, private to the crate): `re² + im²`
//!   exactly (`u32` for 16-bit data; `u64` shifted right just enough that no
//!   band sum can overflow, for 32-bit data), or an integer square root of
//!   it; bin `k < N/2` replaces `X[k]`'s pair, bin `N/2` is kept aside. Where
//!   the window stage took the frame's offset `d` out, `d·W(k)` is added
//!   back to the bins where the window's DFT `W` lives ([`offset_spectrum`]).

use crate::config::SpectrumKind;
use crate::config::{FeatureConfig, WindowShape};
use crate::filterbank::{lowest_bin, max_band_weight_sum};
use crate::fixed_data::FrameData;
use crate::fixed_tables::FixedTables;
use crate::int_log::energy_word;
use crate::int_root::{isqrt_u32, isqrt_u64};
use crate::window::Windowed;

/// Turns the packed FFT output in `buf` (length `N`) into `N/2 + 1` spectrum
/// values at `buf[..=N/2]`: `|X[k]|²` or `|X[k]|`.
///
/// In place is safe in increasing `k`: value `k` is written to `buf[k]` after
/// bins `0..=k/2` (the only ones stored at or below index `k`) were read.
#[inline]
pub fn spectrum_in_place(buf: &mut [f32], kind: SpectrumKind) -> &[f32] {
    let n = buf.len();
    let half = n / 2;
    let dc = buf[0];
    let nyquist = buf[1];
    #[cfg(stapes_arm_fpu)]
    let first = 1 + arm_fpu::power_blocks(buf);
    #[cfg(not(stapes_arm_fpu))]
    let first = 1;
    for k in first..half {
        let re = buf[2 * k];
        let im = buf[2 * k + 1];
        buf[k] = re * re + im * im;
    }
    buf[0] = dc * dc;
    buf[half] = nyquist * nyquist;
    let spectrum = &mut buf[..=half];
    if kind == SpectrumKind::Magnitude {
        sqrt_in_place(spectrum);
    }
    spectrum
}

/// Cortex-M4F: bins `1, 2, …` of the power spectrum four at a time.
#[cfg(stapes_arm_fpu)]
#[allow(unsafe_code)]
mod arm_fpu {
    /// Writes `buf[k] = re² + im²` (`re = buf[2k]`, `im = buf[2k + 1]`) for
    /// `k = 1 ..= 4·blocks` in blocks of four bins (one load-multiple, four
    /// products, four multiply-adds and one store-multiple: the same two
    /// roundings per bin as `re * re + im * im`, since `VMLA` rounds its
    /// product before the sum), and returns how many bins it wrote.
    #[inline]
    pub(super) fn power_blocks(buf: &mut [f32]) -> usize {
        let half = buf.len() / 2;
        let blocks = half.saturating_sub(1) / 4;
        if blocks == 0 {
            return 0;
        }
        // SAFETY: reads buf[2 .. 2 + 8·blocks] and writes buf[1 .. 1 + 4·blocks],
        // both inside `buf` (8·blocks ≤ 2·(half − 1)); a block's eight values
        // are loaded before its four are stored, and every store lands below
        // the next block's first load (1 + 4·(j + 1) ≤ 2 + 8·(j + 1)).
        unsafe {
            core::arch::asm!(
                "2:",
                "vldmia {src}!, {{s0-s7}}",
                "vmul.f32 s8, s0, s0",
                "vmul.f32 s9, s2, s2",
                "vmul.f32 s10, s4, s4",
                "vmul.f32 s11, s6, s6",
                "vmla.f32 s8, s1, s1",
                "vmla.f32 s9, s3, s3",
                "vmla.f32 s10, s5, s5",
                "vmla.f32 s11, s7, s7",
                "vstmia {dst}!, {{s8-s11}}",
                "subs {k}, {k}, #1",
                "bne 2b",
                src = inout(reg) buf.as_ptr().add(2) => _,
                dst = inout(reg) buf.as_mut_ptr().add(1) => _,
                k = inout(reg) blocks => _,
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                options(nostack),
            );
        }
        4 * blocks
    }
}

/// Replaces each value by its correctly rounded square root (IEEE 754): the
/// FPU's instruction where the target has one (`libm::sqrtf` is a software
/// routine of about 60 instructions on a Cortex-M4F), `libm::sqrtf`
/// elsewhere. Both give the same bits for every input, as IEEE 754 requires.
#[inline]
pub fn sqrt_in_place(values: &mut [f32]) {
    #[cfg(stapes_arm_fpu)]
    if !values.is_empty() {
        // Stable Rust names no FPU register class for these targets, so the
        // loop saves and restores the one register it uses.
        // SAFETY: reads and writes exactly `values` (non-empty), one word at
        // a time; s0 is pushed to the stack before and popped after.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                ".fpu fpv4-sp-d16",
                "vpush {{s0}}",
                "2:",
                "vldr s0, [{p}]",
                "vsqrt.f32 s0, s0",
                "vstmia {p}!, {{s0}}",
                "subs {n}, {n}, #1",
                "bne 2b",
                "vpop {{s0}}",
                p = inout(reg) values.as_mut_ptr() => _,
                n = inout(reg) values.len() => _,
            );
        }
        return;
    }
    for v in values.iter_mut() {
        *v = libm::sqrtf(*v);
    }
}

/// The `f32` frame's energy (Parseval): `Σ c_k·P[k] / N` over bins `from
/// ..= N/2` of the power spectrum, `c_k = 2` but at 0 and `N/2`.
#[inline]
pub fn frame_energy_f32(spectrum: &[f32], from: usize) -> f32 {
    let half = spectrum.len() - 1;
    let n = 2 * half;
    let mut sum = 0.0f32;
    for (k, &p) in spectrum[..=half].iter().enumerate().skip(from.min(half)) {
        sum += if k == 0 || k == half { p } else { 2.0 * p };
    }
    sum / n as f32
}

// ---- Fixed point ----

/// A fixed-point data type's bin values: power or magnitude of a re/im pair.
pub(crate) trait SpectrumData: FrameData {
    /// Fraction bits of a magnitude bin: 15 for 16-bit data, whose small
    /// bins would otherwise lose up to a whole unit to the root's floor
    /// (0.4 dB in the weak high bands of a DC step through `dsr8k-23`); 0 for
    /// 32-bit data, whose bins keep 14 more bits.
    const MAGNITUDE_FRACTION_BITS: u32;
    /// Whether a bin may use all 64 bits (32-bit data) rather than 32.
    const WIDE_BINS: bool;
    /// `|re|² + |im|²` as `u64`, shifted right by `shift`.
    fn power(re: Self, im: Self, shift: u32) -> u64;
    /// `√(re² + im²)` with [`SpectrumData::MAGNITUDE_FRACTION_BITS`]
    /// fraction bits (rounded down), shifted right by `shift`.
    fn magnitude(re: Self, im: Self, shift: u32) -> u64;
    /// Bins in place from re/im pairs: power or magnitude, shifted right by
    /// `shift` (see [`spectrum_pairs`]).
    #[inline(always)]
    fn spectrum_pairs(pairs: &mut [Self], shift: u32, magnitude: bool) {
        pairwise_spectrum(pairs, shift, magnitude);
    }
}

impl SpectrumData for i16 {
    const MAGNITUDE_FRACTION_BITS: u32 = 15;
    const WIDE_BINS: bool = false;
    #[inline(always)]
    fn spectrum_pairs(pairs: &mut [i16], shift: u32, magnitude: bool) {
        // A pair is one word (the buffer is word-aligned): `re² + im²` is
        // one SMUAD on the Cortex-M4, and the bin is stored back as the word
        // `store_bin` writes as two halves.
        let Ok(words) = bytemuck::try_cast_slice_mut::<i16, u32>(pairs) else {
            return pairwise_spectrum(pairs, shift, magnitude);
        };
        if shift >= 32 {
            // Every value is below 2^32: shifted out.
            words.fill(0);
        } else if magnitude {
            for w in words.iter_mut() {
                *w = root_q15(crate::dsp16::sum_of_squares(*w)) >> shift;
            }
        } else {
            for w in words.iter_mut() {
                *w = crate::dsp16::sum_of_squares(*w) >> shift;
            }
        }
    }
    #[inline(always)]
    fn magnitude(re: i16, im: i16, shift: u32) -> u64 {
        let (re, im) = (re as i32, im as i32);
        // Shifts of 32 or more (offset compensation's) give 0.
        root_q15((re * re) as u32 + (im * im) as u32)
            .checked_shr(shift)
            .unwrap_or(0) as u64
    }
    #[inline(always)]
    fn power(re: i16, im: i16, shift: u32) -> u64 {
        let (re, im) = (re as i32, im as i32);
        // ≤ 2^31: exact in u32 (and shifted in 32 bits: a 64-bit shift is a
        // library call on Cortex-M0). Shifts of 32 or more give 0.
        ((re * re) as u32 + (im * im) as u32)
            .checked_shr(shift)
            .unwrap_or(0) as u64
    }
}

impl SpectrumData for i32 {
    const MAGNITUDE_FRACTION_BITS: u32 = 0;
    const WIDE_BINS: bool = true;
    #[inline(always)]
    fn magnitude(re: i32, im: i32, shift: u32) -> u64 {
        isqrt_u64(Self::power(re, im, 0))
            .checked_shr(shift)
            .unwrap_or(0)
    }
    #[inline]
    fn power(re: i32, im: i32, shift: u32) -> u64 {
        let (re, im) = (re as i64, im as i64);
        // Each square ≤ 2^62, their sum ≤ 2^63: exact in u64.
        ((re * re) as u64 + (im * im) as u64)
            .checked_shr(shift)
            .unwrap_or(0)
    }
}

/// [`SpectrumData::spectrum_pairs`] element by element, for any data type.
#[inline(always)]
fn pairwise_spectrum<D: SpectrumData>(pairs: &mut [D], shift: u32, magnitude: bool) {
    if magnitude {
        for pair in pairs.chunks_exact_mut(2) {
            let v = D::magnitude(pair[0], pair[1], shift);
            D::store_bin(pair, v);
        }
    } else {
        for pair in pairs.chunks_exact_mut(2) {
            let v = D::power(pair[0], pair[1], shift);
            D::store_bin(pair, v);
        }
    }
}

/// Bins 1 .. N/2 in place (`pairs` holds X[1], X[2], … as re/im pairs): each
/// pair becomes its power or magnitude shifted right by `shift`. Out of line,
/// with the kind chosen once outside the loop, so that the loop keeps its few
/// values in registers (inside the frame function the Cortex-M0 spilled
/// them: 27 instructions per bin).
#[inline(never)]
fn spectrum_pairs<D: SpectrumData>(pairs: &mut [D], shift: u32, magnitude: bool) {
    D::spectrum_pairs(pairs, shift, magnitude);
}

/// `√p` with 15 fraction bits for a 16-bit bin's power `p < 2^31`:
/// `⌊√(p·4^j)⌋·2^(15 − j)` with `j = min(⌊lz(p)/2⌋, 15)`, one 32-bit root of
/// `p` shifted up as far as 32 bits allow. Every value keeps at least 15
/// significant bits (a small bin gets many fraction bits, a large one has
/// many integer bits), and the result is below `2^30.5`. Integer steps only:
/// the same bits on every target.
#[inline(always)]
pub fn root_q15(p: u32) -> u32 {
    let j = (p.leading_zeros() / 2).min(15);
    isqrt_u32(p << (2 * j)) << (15 - j)
}

/// `W(0)` and `W(1)` (Q16) of the DFT of a window whose spectrum has only
/// those bins (and their mirror `W(N − 1) = W(1)`): a periodic raised cosine
/// or a rectangle filling the FFT. `None` for every other window.
///
/// For such a window the frame's offset `d` can be taken out before the
/// FFT, where 16-bit data would otherwise spend their range on it (speech on
/// a 25 % DC offset, or a constant input, loses most of its bits), and added
/// back exactly in the spectrum: `DFT((x − d)·w) + d·W(k)`.
pub fn offset_spectrum(config: &FeatureConfig) -> Option<(i64, i64)> {
    let n = config.fft_points as i64;
    if config.window_samples as i64 != n {
        return None;
    }
    // a0 − a1·cos(2πn/N): W(0) = a0·N, W(±1) = −a1·N/2 (common practice).
    match config.window {
        WindowShape::HannPeriodic => Some((n << 15, -(n << 14))),
        WindowShape::HammingPeriodic => {
            Some(((n * 54 * 65536 + 50) / 100, -((n * 23 * 65536 + 50) / 100)))
        }
        WindowShape::Rectangular => Some((n << 16, 0)),
        WindowShape::Hann | WindowShape::Hamming => None,
    }
}

/// The window's DFT on the bins the frame's offset is added back to.
#[derive(Clone, Copy, Debug)]
enum OffsetBins<'t> {
    /// `W(0)` and `W(±1)`, exact, of a window whose DFT has only those bins.
    Ideal(i64, i64),
    /// `(re, im)` of `W(k)` for `k = 0 .. len/2`, Q16, from the generator
    /// (beyond them `|W(k)|` stays below `2^-17·W(0)`), and the largest
    /// `|W(k)|` (rounded up) over the bins a band reads.
    Table(&'t [i32], u64),
}

impl OffsetBins<'_> {
    /// Bins that get the offset back.
    fn bins(&self) -> usize {
        match self {
            OffsetBins::Ideal(..) => 2,
            OffsetBins::Table(t, _) => t.len() / 2,
        }
    }

    /// `W(k)` in Q16, `k < bins()`.
    #[inline]
    fn at(&self, k: usize) -> (i64, i64) {
        match *self {
            OffsetBins::Ideal(w0, w1) => (if k == 0 { w0 } else { w1 }, 0),
            OffsetBins::Table(t, _) => (t[2 * k] as i64, t[2 * k + 1] as i64),
        }
    }
}

/// The fixed path's spectrum stage: each bin's power or magnitude in place,
/// shifted right so that no band's sum can overflow, with the frame's
/// offset added back where the window stage took it out.
#[derive(Clone, Copy, Debug)]
pub(crate) struct FixedSpectrum<'t> {
    /// Right shift of every bin: a band's sum is at most `(Σ w)·max bin`,
    /// which must stay below `2^64`.
    shift: u32,
    magnitude: bool,
    /// The window's DFT `W(k)` (Q16) for the bins the frame's offset is
    /// added back to, when the window stage takes it out (see
    /// [`offset_spectrum`] and
    /// [`FixedTables::window_spectrum`](crate::fixed_tables::FixedTables::window_spectrum)).
    offset_bins: Option<OffsetBins<'t>>,
    /// The lowest bin any band reads.
    lowest_bin: usize,
}

/// The spectrum stage's output beside the bins left in the frame buffer
/// (bin `k < N/2` at `buf[2k..2k + 2]`).
#[derive(Clone, Copy, Debug)]
pub(crate) struct FixedBins {
    /// Bin `N/2`.
    pub last: u64,
    /// A weighted sum of bins with Q15 weights is the energy
    /// `sum · 2^energy_exponent` (full scale = 1).
    pub energy_exponent: i32,
}

impl<'t> FixedSpectrum<'t> {
    /// The stage for `config` over `tables`, for data type `D`.
    pub(crate) fn new<D: SpectrumData>(config: &FeatureConfig, tables: &FixedTables<'t>) -> Self {
        let filterbank = &tables.table.filterbank;
        // Spectrum values must keep (Σ w)·S below 2^64.
        let weight_bits =
            64 - max_band_weight_sum(filterbank, config.bands as usize).leading_zeros();
        let magnitude = config.spectrum == SpectrumKind::Magnitude;
        let spectrum_max_bits = if magnitude {
            D::SAMPLE_BITS + 1 + D::MAGNITUDE_FRACTION_BITS
        } else {
            // |re|, |im| <= 2^B: re² + im² < 2^(2B + 2); its root < 2^(B + 1).
            2 * D::SAMPLE_BITS + 2
        };
        let lowest = lowest_bin(filterbank, config.bands as usize);
        let offset_bins = if D::OFFSET_COMPENSATION {
            match offset_spectrum(config) {
                Some((w0, w1)) => Some(OffsetBins::Ideal(w0, w1)),
                None if !tables.window_spectrum.is_empty() => {
                    let w_max = tables
                        .window_spectrum
                        .chunks_exact(2)
                        .skip(lowest)
                        .map(|w| {
                            let p = (w[0] as i64 * w[0] as i64) as u64
                                + (w[1] as i64 * w[1] as i64) as u64;
                            isqrt_u64(p) + 1
                        })
                        .max()
                        .unwrap_or(0);
                    Some(OffsetBins::Table(tables.window_spectrum, w_max))
                }
                None => None,
            }
        } else {
            None
        };
        FixedSpectrum {
            shift: (spectrum_max_bits + weight_bits).saturating_sub(64),
            magnitude,
            offset_bins,
            lowest_bin: lowest,
        }
    }

    /// Whether the window stage is to take the frame's offset out.
    pub(crate) fn offset_compensated(&self) -> bool {
        self.offset_bins.is_some()
    }

    /// Turns the FFT's output in `buf` (the packed layout of
    /// [`crate::fft::real_fft`], its `exponent`) of the frame the window
    /// stage made (`windowed`) into bins in place.
    #[inline(always)]
    pub(crate) fn apply<D: SpectrumData>(
        &self,
        buf: &mut [D],
        windowed: Windowed,
        fft_exponent: i32,
    ) -> FixedBins {
        let Windowed {
            norm,
            offset,
            fraction_bits,
        } = windowed;
        // True spectrum = X_int · 2^e_x in full-scale units.
        let e_x = fft_exponent - 15 - fraction_bits as i32 - norm;
        let shift = self.shift;
        let magnitude = self.magnitude;
        // Spectrum, once per bin, in place: bin k (1 ≤ k < N/2) replaces X[k]
        // at buf[2k], buf[2k + 1]; bin 0 replaces X[0], X[N/2] (both real, at
        // buf[0], buf[1]); bin N/2 is kept aside.
        // A bin's value shifted right by `s` (floor shifts compose, so one
        // shift by the sum gives the bits of two).
        let value_of = |re: D, im: D, s: u32| -> u64 {
            if magnitude {
                D::magnitude(re, im, s)
            } else {
                D::power(re, im, s)
            }
        };
        let zero = D::default();
        let last = value_of(buf[1], zero, shift);
        // Offset compensation: the first K bins get d·W(k) back, in i64
        // (|D| < 2^55), their values as m·2^e; if they outgrow the other bins'
        // 32 bits, the whole frame's values are shifted right by
        // `offset_bin_shift`.
        let compensated = match self.offset_bins {
            Some(terms) if offset != 0 => Some(terms),
            _ => None,
        };
        // D = d·W·2^(norm − 16 − e_f); norm ≤ 15 and e_f ≥ 0: a right shift.
        let down = (16 + fft_exponent - norm) as u32;
        let lowest = self.lowest_bin;
        // The raw FFT output of bin k (k < N/2) as (re, im).
        let raw = |buf: &[D], k: usize| -> (i64, i64) {
            if k == 0 {
                (buf[0].get_i32() as i64, 0)
            } else {
                (buf[2 * k].get_i32() as i64, buf[2 * k + 1].get_i32() as i64)
            }
        };
        let added = |terms: &OffsetBins<'_>, k: usize, (xr, xi): (i64, i64)| -> (u64, u32) {
            // A bin no band reads does not count (bin 0 lies below most
            // filterbanks' low edge; with it the offset would cost every band
            // its precision).
            if k < lowest {
                return (0, 0);
            }
            let term = |wq: i64| {
                let v = offset as i64 * wq;
                (v + ((1i64 << down) >> 1)) >> down
            };
            let (wr, wi) = terms.at(k);
            let (re, im) = (xr + term(wr), if k == 0 { 0 } else { xi + term(wi) });
            // Components brought below 2^31 (dropping bits 2^-31 below the
            // value's top), so the squares' sum fits u64.
            let top = re.unsigned_abs() | im.unsigned_abs();
            let t = (64 - top.leading_zeros()).saturating_sub(31);
            let (r, i) = (re >> t, im >> t);
            let p = (r * r) as u64 + (i * i) as u64;
            if magnitude {
                // In the other bins' units: MAGNITUDE_FRACTION_BITS more.
                (isqrt_u64(p), t + D::MAGNITUDE_FRACTION_BITS)
            } else {
                (p, 2 * t)
            }
        };
        let mut offset_bin_shift = 0u32;
        // The two bins of an exactly known window, computed once.
        let mut ideal_bins = None;
        match &compensated {
            Some(terms @ OffsetBins::Ideal(..)) => {
                // Two bins: their exact values set the shift.
                let pair = [added(terms, 0, raw(buf, 0)), added(terms, 1, raw(buf, 1))];
                let bits =
                    |&(m, e): &(u64, u32)| (64 - m.leading_zeros() + e).saturating_sub(shift);
                offset_bin_shift = pair.iter().map(bits).max().unwrap_or(0).saturating_sub(32);
                ideal_bins = Some(pair);
            }
            Some(OffsetBins::Table(_, w_max)) => {
                // Many bins: a bound sets the shift, so each bin is computed
                // once. |X(k) + D(k)| < 2^16 + |d|·max|W|·2^-down + 1 (16-bit
                // data: |X| < √2·2^15); a power's bit length is at most twice
                // that bound's, a magnitude's that plus its fraction bits.
                let d_max = ((offset.unsigned_abs() as u64 * *w_max) >> down) + 1;
                let z_bits = 64 - ((1u64 << 16) + d_max).leading_zeros();
                let bits = if magnitude {
                    z_bits + D::MAGNITUDE_FRACTION_BITS
                } else {
                    2 * z_bits
                };
                offset_bin_shift = bits.saturating_sub(shift).saturating_sub(32);
            }
            None => {}
        }
        let total = shift + offset_bin_shift;
        let place = |(m, e): (u64, u32)| {
            if total >= e {
                m >> (total - e)
            } else {
                m << (e - total)
            }
        };
        let last = last >> offset_bin_shift;
        match &compensated {
            Some(OffsetBins::Ideal(..)) => {
                let [b0, b1] = ideal_bins.expect("computed above");
                D::store_bin(&mut buf[..2], place(b0));
                D::store_bin(&mut buf[2..4], place(b1));
                spectrum_pairs(&mut buf[4..], total, magnitude);
            }
            Some(terms) => {
                // Bins 1 .. K first, each from its raw pair, then bin 0 (whose
                // pair holds X[0] and X[N/2]), then the rest.
                let bins = terms.bins();
                for k in 1..bins {
                    let v = place(added(terms, k, raw(buf, k)));
                    D::store_bin(&mut buf[2 * k..2 * k + 2], v);
                }
                let v0 = place(added(terms, 0, raw(buf, 0)));
                D::store_bin(&mut buf[..2], v0);
                spectrum_pairs(&mut buf[2 * bins..], total, magnitude);
            }
            None => {
                let first = value_of(buf[0], zero, total);
                D::store_bin(&mut buf[..2], first);
                spectrum_pairs(&mut buf[2..], total, magnitude);
            }
        }
        // Energy = acc · 2^energy_exponent (weights are Q15).
        let energy_exponent = if magnitude {
            e_x - D::MAGNITUDE_FRACTION_BITS as i32
        } else {
            2 * e_x
        } + shift as i32
            + offset_bin_shift as i32
            - 15;
        FixedBins {
            last,
            energy_exponent,
        }
    }
}

impl FixedBins {
    /// The frame's energy (Parseval) as an
    /// [`energy_word`](crate::int_log::energy_word): `Σ c_k·bin_k / N` from
    /// bin `from` to `N/2` (`buf` holds the bins below `N/2`), `c_k = 2` but
    /// at 0 and `N/2` (the weights' Q15 does not apply). 16-bit data's bins
    /// are below 2^32, so the sum of at most 4096 of them fits u64 exactly;
    /// 32-bit data's may use all 64 bits, so each is first shifted right by
    /// log2(N) + 1 (bits far below the sum's top).
    #[inline]
    pub(crate) fn frame_energy<D: SpectrumData>(&self, buf: &[D], from: usize) -> i32 {
        let n = buf.len();
        let half = n / 2;
        let s = if D::WIDE_BINS {
            n.trailing_zeros() + 1
        } else {
            0
        };
        let mut sum = 0u64;
        for k in from.min(half)..half {
            let v = D::load_bin(&buf[2 * k..2 * k + 2]) >> s;
            sum += if k == 0 { v } else { 2 * v };
        }
        sum += self.last >> s;
        energy_word(
            sum,
            self.energy_exponent + 15 + s as i32 - n.trailing_zeros() as i32,
        )
    }
}
