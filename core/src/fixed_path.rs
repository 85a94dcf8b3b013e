//! The fixed-point front end for boards without an FPU: `i16` samples in,
//! [`I8F8`] log-mel frames out (1/256 dB, or 1/256 natural-log unit, per
//! LSB). No float operation anywhere on this path.
//!
//! # Numerics
//! * **Stream**: raw `i16` samples are stored (frame assembly and overlap, as
//!   in the `f32` path). DC removal and pre-emphasis are run at frame time
//!   from the filter state saved at the frame's first sample, in `i32` with
//!   13 extra fraction bits (`i64` products), so the stored stream stays exact.
//! * **Offset compensation** (16-bit data): the frame's window-weighted
//!   mean `d` is taken out before the FFT and `d·W(k)` added back to the
//!   bins where the window's DFT `W` lives: bins 0 and 1 exactly for a
//!   window whose DFT has only those ([`offset_spectrum`]: a periodic raised
//!   cosine or a rectangle filling the FFT), or the first bins the generator
//!   lists for any other window whose DFT falls below `2^-17·W(0)` within
//!   `N/8` bins ([`FixedTables::window_spectrum`], for example a periodic
//!   Hann zero-padded to the FFT). Without it a DC offset takes the 16-bit
//!   FFT's range from the speech on it.
//! * **Normalisation before windowing**: the conditioned frame is shifted so
//!   its largest sample uses the FFT's full range (15 bits for
//!   [`Fixed16`](crate::int_fft::Fixed16), 29 for [`Fixed32`](crate::int_fft::Fixed32)); quiet frames keep their precision.
//! * **Window**: Q15 (16-bit data) or Q31 (32-bit data), rounded product.
//! * **FFT**: one-pass block floating point ([`crate::int_fft`]), exponent tracked.
//! * **Spectrum**: `re² + im²` exactly (`u32` for 16-bit data; `u64` shifted
//!   right just enough that no band sum can overflow, for 32-bit data), or an
//!   integer square root of it for magnitude configurations.
//! * **Mel**: Q15 weights, `u64` accumulators. A band's sum is at most
//!   `(Σ w) · max S`; the constructor computes `Σ w` of every band from the
//!   table and picks the spectrum shift so that bound stays below `2^64`.
//! * **Log**: `log2` of the accumulator by [`crate::int_log`], plus the frame's
//!   exponent, times `log2_to_output`, rounded to 1/256; then the band's gain
//!   offset, the floor, and saturation to the `i16` range.
//!
//! # Saturation rules
//! No value can wrap: normalised samples and windowed values fit by
//! construction, the FFT's shifts are chosen from a bound so no value can
//! overflow, and the output saturates (±128 output units). Digital silence
//! gives exactly the floor.
//!
//! ```
//! use stapes_core::fixed_path::FixedFrontEnd;
//! use stapes_core::int_fft::Fixed16;
//! # use stapes_core::fixed_tables::FixedTables;
//! # fn run(tables: FixedTables<'static>) {
//! let mut fe = FixedFrontEnd::<Fixed16, 512, 352, 40>::new(stapes_core::presets::SPEECH16K_40, tables).unwrap();
//! let chunk = [0i16; 160];
//! let mut rest = &chunk[..];
//! while let Some(frame) = fe.next_frame(&mut rest) {
//!     let _db: i16 = frame.bands[0].to_bits(); // 1/256 dB per LSB
//! }
//! # }
//! ```

use core::marker::PhantomData;

use crate::config::{FeatureConfig, SpectrumKind, WindowShape};
use crate::error::FrontEndError;
use crate::fixed_tables::FixedTables;
use crate::frame::Frame;
use crate::framer::Framer;
use crate::int_fft::{BfpSample, Precision, real_fft};
use crate::int_log::{EMPTY_ENERGY, energy_word};
use crate::log::FixedLog;
use crate::probe::{Stage, StageProbe};
use crate::stage::FrameStage;
use crate::table::Filterbank;

/// Extra fraction bits of the conditioned stream.
const CONDITIONING_FRACTION_BITS: u32 = 13;

/// Integer DC removal and pre-emphasis (see the module docs).
///
/// DC removal runs with a Q31 pole and *fraction saving*: the bits the
/// feedback product drops are carried into the next sample's product, so
/// truncation neither biases the output nor leaves a limit cycle; in silence
/// the state settles at exactly 0.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct IntConditioner {
    dc_pole: Option<i32>,
    pre_emphasis: Option<i32>,
    last_in: i32,
    dc_last_out: i32,
    dc_carry: i64,
    pre_last_in: i32,
}

impl IntConditioner {
    /// Zero state; the DC pole in Q31, the pre-emphasis coefficient in Q15.
    pub fn new(dc_pole_q31: Option<i32>, pre_emphasis_q15: Option<i32>) -> Self {
        IntConditioner {
            dc_pole: dc_pole_q31,
            pre_emphasis: pre_emphasis_q15,
            ..Default::default()
        }
    }

    /// Whether any conditioning is on.
    pub fn active(&self) -> bool {
        self.dc_pole.is_some() || self.pre_emphasis.is_some()
    }

    /// One sample in (Q15), one out with 13 extra fraction bits: |x| ≤ 2^28,
    /// the DC filter at most doubles it (its impulse response has L1 norm 2)
    /// and pre-emphasis multiplies by at most 1 + a < 2, so |out| < 2^30.
    #[inline]
    pub fn step(&mut self, raw: i16) -> i32 {
        let x = (raw as i32) << CONDITIONING_FRACTION_BITS;
        let y = match self.dc_pole {
            Some(p) => {
                // |y| ≤ 2·max|x| (the filter's impulse response has L1 norm 2);
                // p·y < 2^31 · 2^29 fits i64, and so does the carry (< 2^31).
                let acc = p as i64 * self.dc_last_out as i64 + self.dc_carry;
                let feedback = acc >> 31;
                self.dc_carry = acc - (feedback << 31);
                let y = x - self.last_in + feedback as i32;
                self.last_in = x;
                self.dc_last_out = y;
                y
            }
            None => x,
        };
        match self.pre_emphasis {
            Some(a) => {
                let z = y - ((a as i64 * self.pre_last_in as i64 + (1 << 14)) >> 15) as i32;
                self.pre_last_in = y;
                z
            }
            None => y,
        }
    }
}

/// Conversions between raw samples, the data type and wide values.
pub trait FrameData: BfpSample {
    /// Data bits available for a normalised sample and every FFT value (15 or 29).
    const SAMPLE_BITS: u32;
    /// A raw sample stored in the frame buffer.
    fn from_raw(x: i16) -> Self;
    /// The raw sample back.
    fn to_raw(self) -> i16;
    /// `v` saturated into the type.
    fn from_i64_saturating(v: i64) -> Self;
    /// Stores an unsigned value of up to the type's width as its raw bits
    /// (magnitudes fit: `< 2^16` for 16-bit data, `< 2^32` for 32-bit).
    fn from_bits_u32(v: u32) -> Self;
    /// The raw bits back.
    fn to_bits_u32(self) -> u32;
    /// `round(self · w / 2^15)` for a Q15 weight, saturated.
    fn mul_q15(self, w: i16) -> Self;
    /// `|re|² + |im|²` as `u64`, shifted right by `shift`.
    fn power(re: Self, im: Self, shift: u32) -> u64;
    /// `√(re² + im²)` with [`FrameData::MAGNITUDE_FRACTION_BITS`] fraction
    /// bits (rounded down), shifted right by `shift`.
    fn magnitude(re: Self, im: Self, shift: u32) -> u64;
    /// Fraction bits of a magnitude bin: 15 for 16-bit data, whose small
    /// bins would otherwise lose up to a whole unit to the root's floor
    /// (0.4 dB in the weak high bands of a DC step through `dsr8k-23`); 0 for
    /// 32-bit data, whose bins keep 14 more bits.
    const MAGNITUDE_FRACTION_BITS: u32;
    /// Whether a conditioned sample (13 extra fraction bits) fits the type,
    /// so that pass 2 can read it back instead of recomputing it.
    const HOLDS_CONDITIONED: bool;
    /// Whether unconditioned frames are normalised on a bound of the
    /// *windowed* frame (see [`NORMALISATION_SEGMENTS`]) rather than on the
    /// raw frame's range: 16-bit data, whose FFT input is the windowed frame
    /// rounded to 16 bits.
    const WINDOWED_NORMALISATION: bool;
    /// Whether the frame's offset is taken out before the FFT where the
    /// window allows ([`offset_spectrum`], [`FixedTables::window_spectrum`]):
    /// 16-bit data only (32-bit data
    /// have the range to keep it).
    const OFFSET_COMPENSATION: bool;
    /// A value known to fit the type.
    fn from_i32(v: i32) -> Self;
    /// The value as `i32`.
    fn get_i32(self) -> i32;
    /// Saves the raw samples the next frame shares, before the FFT.
    #[inline(always)]
    fn save_shared<const F: usize, const O: usize>(framer: &mut Framer<Self, i16, F, O>) {
        framer.begin_frame(Self::to_raw);
    }
    /// Puts the shared samples back, after the frame.
    #[inline(always)]
    fn restore_shared<const F: usize, const O: usize>(framer: &mut Framer<Self, i16, F, O>) {
        framer.end_frame(Self::from_raw);
    }
    /// Stores a bin value (a power `< 2^32` for 16-bit data, `< 2^64` for
    /// 32-bit data) in a pair of slots.
    fn store_bin(slot: &mut [Self], v: u64);
    /// The bin value back.
    fn load_bin(slot: &[Self]) -> u64;
    /// `v · w` for a bin value and a Q15 weight (`w ≤ 2^15`).
    fn weigh(v: u64, w: u32) -> u64;
    /// Bins in place from re/im pairs: power or magnitude, shifted right by
    /// `shift` (see [`spectrum_pairs`]).
    #[inline(always)]
    fn spectrum_pairs(pairs: &mut [Self], shift: u32, magnitude: bool) {
        pairwise_spectrum(pairs, shift, magnitude);
    }
    /// `Σ weights[i] · bin[i]` over the bins stored in `slots` (two elements
    /// each) and as many non-negative Q15 weights (the table check refuses
    /// negative ones).
    #[inline(always)]
    fn weighted_bins(slots: &[Self], weights: &[i16]) -> u64 {
        folded_weighted_bins(slots, weights)
    }
}

impl FrameData for i16 {
    const SAMPLE_BITS: u32 = 15;
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
    fn weighted_bins(slots: &[i16], weights: &[i16]) -> u64 {
        // Cortex-M4: a hand-scheduled loop over the bins as words (UMLAL).
        #[cfg(stapes_arm_dsp)]
        if let Some(sum) = arm_dsp_mel::weighted_bins(slots, weights) {
            return sum;
        }
        folded_weighted_bins(slots, weights)
    }
    // Raw samples are the frame's own type: a block copy.
    #[inline(always)]
    fn save_shared<const F: usize, const O: usize>(framer: &mut Framer<i16, i16, F, O>) {
        framer.begin_frame_unconverted();
    }
    #[inline(always)]
    fn restore_shared<const F: usize, const O: usize>(framer: &mut Framer<i16, i16, F, O>) {
        framer.end_frame_unconverted();
    }
    const HOLDS_CONDITIONED: bool = false;
    const WINDOWED_NORMALISATION: bool = true;
    const OFFSET_COMPENSATION: bool = true;
    #[inline(always)]
    fn from_i32(v: i32) -> i16 {
        v as i16
    }
    #[inline(always)]
    fn get_i32(self) -> i32 {
        self as i32
    }
    #[inline(always)]
    fn magnitude(re: i16, im: i16, shift: u32) -> u64 {
        let (re, im) = (re as i32, im as i32);
        // Shifts of 32 or more (offset compensation's) give 0.
        root_q15((re * re) as u32 + (im * im) as u32)
            .checked_shr(shift)
            .unwrap_or(0) as u64
    }
    const MAGNITUDE_FRACTION_BITS: u32 = 15;
    #[inline(always)]
    fn store_bin(slot: &mut [i16], v: u64) {
        // Powers of 16-bit data are below 2^31 (and magnitudes below 2^16).
        slot[0] = v as u16 as i16;
        slot[1] = (v >> 16) as u16 as i16;
    }
    #[inline(always)]
    fn load_bin(slot: &[i16]) -> u64 {
        (slot[0] as u16 as u32 | (slot[1] as u16 as u32) << 16) as u64
    }
    #[inline(always)]
    fn weigh(v: u64, w: u32) -> u64 {
        // v < 2^32: one UMULL on the Cortex-M4; two 32-bit products on cores
        // whose only multiply gives the low 32 bits (a 64-bit product is a
        // library call there). The same bits either way.
        #[cfg(stapes_no_long_multiply)]
        {
            let v = v as u32;
            let (lo, hi) = (w * (v & 0xffff), w * (v >> 16));
            ((hi as u64) << 16) + lo as u64
        }
        #[cfg(not(stapes_no_long_multiply))]
        {
            v * w as u64
        }
    }
    #[inline]
    fn from_raw(x: i16) -> i16 {
        x
    }
    #[inline]
    fn to_raw(self) -> i16 {
        self
    }
    #[inline]
    fn from_i64_saturating(v: i64) -> i16 {
        v.clamp(i16::MIN as i64, i16::MAX as i64) as i16
    }
    #[inline]
    fn from_bits_u32(v: u32) -> i16 {
        v.min(u16::MAX as u32) as u16 as i16
    }
    #[inline]
    fn to_bits_u32(self) -> u32 {
        self as u16 as u32
    }
    #[inline(always)]
    fn mul_q15(self, w: i16) -> i16 {
        // ≤ 2^30 in magnitude: exact in i32; with |w| ≤ 32767 the rounded
        // result lies within ±32767 (no clamp needed).
        ((self as i32 * w as i32 + (1 << 14)) >> 15) as i16
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

impl FrameData for i32 {
    // The FFT keeps 32-bit data within ±(2^29 − 2) (its guard bits); a
    // windowed sample beyond that is shifted into range by the FFT.
    const SAMPLE_BITS: u32 = 29;
    const HOLDS_CONDITIONED: bool = true;
    const WINDOWED_NORMALISATION: bool = false;
    const OFFSET_COMPENSATION: bool = false;
    #[inline(always)]
    fn from_i32(v: i32) -> i32 {
        v
    }
    #[inline(always)]
    fn get_i32(self) -> i32 {
        self
    }
    #[inline(always)]
    fn magnitude(re: i32, im: i32, shift: u32) -> u64 {
        isqrt_u64(Self::power(re, im, 0))
            .checked_shr(shift)
            .unwrap_or(0)
    }
    const MAGNITUDE_FRACTION_BITS: u32 = 0;
    #[inline(always)]
    fn store_bin(slot: &mut [i32], v: u64) {
        slot[0] = v as u32 as i32;
        slot[1] = (v >> 32) as u32 as i32;
    }
    #[inline(always)]
    fn load_bin(slot: &[i32]) -> u64 {
        slot[0] as u32 as u64 | (slot[1] as u32 as u64) << 32
    }
    #[inline(always)]
    fn weigh(v: u64, w: u32) -> u64 {
        // The spectrum shift keeps v · w below 2^64.
        #[cfg(stapes_no_long_multiply)]
        {
            // v·w < 2^64 makes hi·w < 2^32; the low word goes by halves.
            let (lo, hi) = (v as u32, (v >> 32) as u32);
            let low = (((w * (lo >> 16)) as u64) << 16) + (w * (lo & 0xffff)) as u64;
            low + (((w * hi) as u64) << 32)
        }
        #[cfg(not(stapes_no_long_multiply))]
        {
            v * w as u64
        }
    }
    #[inline]
    fn from_raw(x: i16) -> i32 {
        x as i32
    }
    #[inline]
    fn to_raw(self) -> i16 {
        self.clamp(i16::MIN as i32, i16::MAX as i32) as i16
    }
    #[inline]
    fn from_i64_saturating(v: i64) -> i32 {
        v.clamp(i32::MIN as i64, i32::MAX as i64) as i32
    }
    #[inline]
    fn from_bits_u32(v: u32) -> i32 {
        v as i32
    }
    #[inline]
    fn to_bits_u32(self) -> u32 {
        self as u32
    }
    #[inline]
    fn mul_q15(self, w: i16) -> i32 {
        ((self as i64 * w as i64 + (1 << 14)) >> 15).clamp(i32::MIN as i64, i32::MAX as i64) as i32
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

/// The sparse filterbank's band energies from the spectrum in `buf` (bin
/// `k < N/2` at `buf[2k..2k + 2]`, bin `N/2` as `last`), each handed to
/// `emit` with its band's index as soon as it is summed (so no energies are
/// stored). Out of line: the loop keeps its accumulator and pointers in
/// registers.
#[inline(never)]
fn sparse_energies<D: FrameData>(
    spans: &[[u16; 2]],
    weights: &[i16],
    buf: &[D],
    last: u64,
    mut emit: impl FnMut(usize, u64),
) {
    let half = buf.len() / 2;
    let mut offset = 0;
    for (b, &[first, count]) in spans.iter().enumerate() {
        let (first, count) = (first as usize, count as usize);
        let ws = &weights[offset..offset + count];
        offset += count;
        // Bins below N/2 from the buffer (no per-bin branch), bin N/2 from `last`.
        let inside = count.min(half.saturating_sub(first));
        let mut acc = D::weighted_bins(&buf[2 * first..2 * (first + inside)], &ws[..inside]);
        if let Some(&wt) = ws.get(inside) {
            acc += D::weigh(last, wt as u32);
        }
        emit(b, acc);
    }
}

/// The compact filterbank's band energies, handed to `emit` as in
/// [`sparse_energies`]: each segment's bins feed the rising side of the band
/// above and, with `1 − w`, the falling side of the band below.
#[inline(never)]
fn compact_energies<D: FrameData>(
    segment_starts: &[u16],
    weights: &[i16],
    buf: &[D],
    last: u64,
    bands: usize,
    mut emit: impl FnMut(usize, u64),
) {
    let half = buf.len() / 2;
    let base = segment_starts[0] as usize;
    let mut carry = 0u64; // falling side of the band below
    for seg in 0..=bands {
        let lo = segment_starts[seg] as usize;
        let hi = segment_starts[seg + 1] as usize;
        let ws = &weights[lo - base..hi - base];
        let inside = ws.len().min(half.saturating_sub(lo));
        let slots = buf[2 * lo..2 * (lo + inside)].chunks_exact(2);
        let (mut rising, mut falling) =
            ws[..inside]
                .iter()
                .zip(slots)
                .fold((0u64, 0u64), |(r, f), (&wt, slot)| {
                    let (v, wt) = (D::load_bin(slot), wt as u32);
                    (r + D::weigh(v, wt), f + D::weigh(v, 32768 - wt))
                });
        if let Some(&wt) = ws.get(inside) {
            let wt = wt as u32;
            rising += D::weigh(last, wt);
            falling += D::weigh(last, 32768 - wt);
        }
        if seg > 0 {
            emit(seg - 1, carry + falling);
        }
        carry = rising;
    }
}

/// [`FrameData::spectrum_pairs`] element by element, for any data type.
#[inline(always)]
fn pairwise_spectrum<D: FrameData>(pairs: &mut [D], shift: u32, magnitude: bool) {
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

/// [`FrameData::weighted_bins`] as a plain fold, for any data type (the
/// Cortex-M4 kernel's twin for 16-bit data).
#[inline(always)]
fn folded_weighted_bins<D: FrameData>(slots: &[D], weights: &[i16]) -> u64 {
    weights
        .iter()
        .zip(slots.chunks_exact(2))
        .fold(0u64, |acc, (&w, slot)| {
            acc + D::weigh(D::load_bin(slot), w as u32)
        })
}

/// Bins 1 .. N/2 in place (`pairs` holds X[1], X[2], … as re/im pairs): each
/// pair becomes its power or magnitude shifted right by `shift`. Out of line,
/// with the kind chosen once outside the loop, so that the loop keeps its few
/// values in registers (inside the frame function the Cortex-M0 spilled
/// them: 27 instructions per bin).
#[inline(never)]
fn spectrum_pairs<D: FrameData>(pairs: &mut [D], shift: u32, magnitude: bool) {
    D::spectrum_pairs(pairs, shift, magnitude);
}

/// Pass 1 over raw samples with offset compensation: their range and their
/// window-weighted sum. Out of line, so that its few live values stay in
/// the eight low registers of a Cortex-M0 (used there only: elsewhere the
/// inline loop measured faster).
#[inline(never)]
fn raw_offset_statistics<P: TwiddlesFor>(
    samples: &[P::Data],
    window: &[P::WindowCoef],
) -> (i32, i32, WideSum)
where
    P::Data: FrameData,
{
    let (mut lo, mut hi) = (i32::MAX, i32::MIN);
    let mut weighted = WideSum::default();
    for (v, &win) in samples.iter().zip(window) {
        let c = v.to_raw() as i32;
        lo = lo.min(c);
        hi = hi.max(c);
        // |c| ≤ 2^15 and a Q15 coefficient: within 2^30.
        weighted.add(c * P::coef_q15(win));
    }
    (lo, hi, weighted)
}

/// Pass 2 over raw samples: `((c − offset + round) >> down) << up`, windowed.
/// Out of line on a Cortex-M0 (its eight low registers), inline elsewhere
/// (measured faster each way).
#[cfg_attr(stapes_no_long_multiply, inline(never))]
#[cfg_attr(not(stapes_no_long_multiply), inline(always))]
fn place_and_window<P: TwiddlesFor>(
    samples: &mut [P::Data],
    window: &[P::WindowCoef],
    offset: i32,
    (up, down): (u32, u32),
) where
    P::Data: FrameData,
{
    if P::place_and_window_fast(samples, window, offset, (up, down)) {
        return;
    }
    let round = (1i32 << down) >> 1;
    let up = up + P::WINDOW_PRESHIFT;
    for (v, &win) in samples.iter_mut().zip(window) {
        let c = v.to_raw() as i32;
        let placed = <P::Data as FrameData>::from_i32((((c - offset) + round) >> down) << up);
        *v = P::apply_window_preshifted(placed, win);
    }
}

/// A sum of `i32` terms within `±2^30` each, as `i64`: one 64-bit
/// accumulate where the core has it; on cores where 64-bit additions cost
/// several instructions, the terms' high and low 16 bits summed apart in
/// 32 bits (exact for up to 65 537 terms) and joined at the end.
#[derive(Clone, Copy, Debug, Default)]
pub struct WideSum {
    #[cfg(not(stapes_no_long_multiply))]
    sum: i64,
    #[cfg(stapes_no_long_multiply)]
    high: i32,
    #[cfg(stapes_no_long_multiply)]
    low: u32,
}

impl WideSum {
    /// Adds a term.
    #[inline(always)]
    pub fn add(&mut self, p: i32) {
        #[cfg(not(stapes_no_long_multiply))]
        {
            self.sum += p as i64;
        }
        #[cfg(stapes_no_long_multiply)]
        {
            self.high += p >> 16;
            self.low += (p & 0xffff) as u32;
        }
    }
    /// A sum holding `total`.
    #[inline(always)]
    pub fn from_total(total: i64) -> Self {
        let mut s = WideSum::default();
        #[cfg(not(stapes_no_long_multiply))]
        {
            s.sum = total;
        }
        #[cfg(stapes_no_long_multiply)]
        {
            s.high = (total >> 16) as i32;
            s.low = (total & 0xffff) as u32;
        }
        s
    }
    /// The sum.
    #[inline(always)]
    pub fn total(self) -> i64 {
        #[cfg(not(stapes_no_long_multiply))]
        {
            self.sum
        }
        #[cfg(stapes_no_long_multiply)]
        {
            ((self.high as i64) << 16) + self.low as i64
        }
    }
}

/// `a · b` as `i64`: one long multiply where the core has it,
/// [`wide_product_by_halves`] where a 64-bit product would be a library call.
#[inline(always)]
pub fn wide_product(a: i32, b: i32) -> i64 {
    #[cfg(stapes_no_long_multiply)]
    {
        wide_product_by_halves(a, b)
    }
    #[cfg(not(stapes_no_long_multiply))]
    {
        a as i64 * b as i64
    }
}

/// `a · b` from four 16 × 16-bit products, each within 32 bits; only their
/// sum is 64-bit (additions and constant shifts, no library call). Equal to
/// `a as i64 * b as i64` for every input (tested).
#[inline(always)]
pub fn wide_product_by_halves(a: i32, b: i32) -> i64 {
    let (ah, al) = (a >> 16, (a & 0xffff) as u32);
    let (bh, bl) = (b >> 16, (b & 0xffff) as u32);
    // |ah|, |bh| ≤ 2^15 and al, bl < 2^16: each cross product lies within
    // ±(2^31 − 2^16) (fits i32), al·bl below 2^32 (fits u32).
    let low = (al * bl) as i64;
    let mid = (ah * bl as i32) as i64 + (al as i32 * bh) as i64;
    (((ah * bh) as i64) << 32) + (mid << 16) + low
}

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

/// Segments of the frame over which 16-bit data's normalisation bounds the
/// windowed frame.
///
/// The FFT's 16-bit input is the windowed frame, rounded. Normalising on the
/// raw frame's range (its largest `|c − d|`) wastes bits whenever that peak
/// sits where the window is small: a speech onset at the frame's end, for
/// example, sets the shift while the windowed frame is tens of dB quieter,
/// and the rounding then buries the weak bands (0.28–0.31 dB at R = 40 on
/// two clean corpus clips and 1.01 dB at R = 60 on a third, 0.35 dB on one
/// through `tiny16k-10`). A model in numpy (16-bit windowed frame, exact
/// FFT, against float64; speech16k-40 on those three clips;
/// `tests/python/fixed_point_models.py`) gives 0.20–0.35 dB at R = 40 with
/// the raw-range shift, 0.009–0.013 dB with the windowed frame's exact
/// peak, and 0.025–0.042 dB
/// with this bound over eight segments (0.016–0.022 dB over sixteen, which
/// cost 460 more Cortex-M4 instructions per frame): per segment, its largest
/// `|c − d|` times its largest window coefficient. It costs one range per
/// segment in pass 1 instead of one per frame. Conditioned 16-bit data
/// (DC removal or pre-emphasis) are bounded the same way, their windowed
/// products taken in 64 bits.
pub const NORMALISATION_SEGMENTS: usize = 8;

/// Samples per normalisation segment: `⌈window / 8⌉`, rounded up to even
/// (the Cortex-M4 passes read two samples per word).
fn segment_len(window: usize) -> usize {
    let n = window.div_ceil(NORMALISATION_SEGMENTS).max(1);
    n + (n & 1)
}

/// The largest window coefficient (Q15, magnitude) of each segment.
fn segment_window_max<P: TwiddlesFor>(window: &[P::WindowCoef]) -> [u16; NORMALISATION_SEGMENTS] {
    let mut out = [0u16; NORMALISATION_SEGMENTS];
    for (slot, seg) in out.iter_mut().zip(window.chunks(segment_len(window.len()))) {
        *slot = seg
            .iter()
            .map(|&c| P::coef_q15(c).unsigned_abs().min(32767) as u16)
            .max()
            .unwrap_or(0);
    }
    out
}

/// The normalising shift `s` (at most 15) for a windowed-frame bound
/// `bound` (`|c − d|·w_q15 ≤ bound` for every sample): the largest with
/// `bound·2^s < 2^30 − 2^14`, so every `round((c − d)·w·2^s / 2^15)` lies
/// within `±32767`. Raw samples give `s ≥ −1`; conditioned ones, with 13
/// extra fraction bits, down to −15.
fn windowed_shift(bound: u64) -> i32 {
    const LIMIT: u64 = (1 << 30) - (1 << 14);
    // bound < 2^46, so every shift below stays within u64.
    let fits = |s: i32| {
        if s >= 0 {
            bound << s < LIMIT
        } else {
            bound < LIMIT << -s
        }
    };
    let mut s = (30 - (64 - bound.leading_zeros()) as i32).clamp(-20, 15);
    while !fits(s) {
        s -= 1;
    }
    s
}

/// `round(g·w / 2^shift)` (halves up) for `|g| < 2^30`, `0 ≤ w < 2^15` and
/// `shift ≤ 31`, when the result fits `i32`: one 64-bit product where the
/// core has it; on Cortex-M0, where that is a library call, from 16-bit
/// halves of `g` (below 2^16 the whole product fits `i32`, since the result
/// is below 2^15; above, `⌊(h·2^16 + t)/2^s⌋ = ⌊(h + ⌊t/2^16⌋)/2^(s−16)⌋`).
/// The same value either way.
#[inline(always)]
fn rounded_product(g: i32, w: i32, shift: u32) -> i32 {
    #[cfg(stapes_no_long_multiply)]
    {
        rounded_product_by_halves(g, w, shift)
    }
    #[cfg(not(stapes_no_long_multiply))]
    {
        rounded_product_wide(g, w, shift)
    }
}

/// [`rounded_product`] with one 64-bit product.
#[inline(always)]
pub fn rounded_product_wide(g: i32, w: i32, shift: u32) -> i32 {
    ((g as i64 * w as i64 + ((1i64 << shift) >> 1)) >> shift) as i32
}

/// [`rounded_product`] from 16-bit halves of `g`, in 32-bit steps.
#[inline(always)]
pub fn rounded_product_by_halves(g: i32, w: i32, shift: u32) -> i32 {
    if shift < 16 {
        (g.wrapping_mul(w).wrapping_add((1 << shift) >> 1)) >> shift
    } else {
        // (g mod 2^16)·w < 2^31 and the rounding term ≤ 2^30: t < 2^32.
        let high = (g >> 16) * w;
        let t = (g & 0xffff) as u32 * w as u32 + (1u32 << (shift - 1));
        (high + (t >> 16) as i32) >> (shift - 16)
    }
}

/// Pass 2 for unconditioned 16-bit data normalised on the windowed bound:
/// `round((c − d)·w / 2^(15 − s))` for each raw sample `c` (one rounding,
/// in `i32`: `|c − d| < 2^16`, `w < 2^15`). On the Cortex-M4 the packed loop
/// gives the same values when `0 ≤ s ≤ 14` and every `|c − d| < 2^15`.
fn windowed_place<P: TwiddlesFor>(
    samples: &mut [P::Data],
    window: &[P::WindowCoef],
    offset: i32,
    s: i32,
    packed_ok: bool,
) where
    P::Data: FrameData,
{
    if packed_ok
        && (0..=14).contains(&s)
        && P::place_and_window_fast(samples, window, offset, (s as u32, 0))
    {
        return;
    }
    let shift = (15 - s) as u32; // 0 ..= 16
    let round = (1i32 << shift) >> 1;
    for (v, &win) in samples.iter_mut().zip(window) {
        let g = v.to_raw() as i32 - offset;
        let x = (g * P::coef_q15(win) + round) >> shift;
        *v = <P::Data as FrameData>::from_i32(x);
    }
}

/// Streaming fixed-point front end. `P` is [`Fixed16`](crate::int_fft::Fixed16)
/// or [`Fixed32`](crate::int_fft::Fixed32); the const parameters size the
/// buffers as for [`crate::float_path::FloatFrontEnd`].
#[derive(Clone, Debug)]
pub struct FixedFrontEnd<
    't,
    P: Precision,
    const FFT: usize,
    const OVERLAP: usize,
    const BANDS: usize,
    S = FixedLog<'t, BANDS>,
> where
    P: TwiddlesFor,
    P::Data: FrameData,
{
    config: FeatureConfig,
    tables: FixedTables<'t>,
    twiddles: &'t [<P::Data as BfpSample>::Twiddle],
    window: &'t [P::WindowCoef],
    framer: Framer<P::Data, i16, FFT, OVERLAP>,
    frame_start: IntConditioner,
    /// The filterbank's output: one [`energy_word`] per band.
    energies: [i32; BANDS],
    /// The stages after the filterbank.
    stages: S,
    fraction_bits: u32,
    spectrum_shift: u32,
    /// The window's DFT `W(k)` (Q16) for the bins the frame's offset is
    /// added back to, when it is taken out before the FFT (see
    /// [`offset_spectrum`] and [`FixedTables::window_spectrum`]).
    offset_spectrum: Option<OffsetBins<'t>>,
    /// The lowest bin any band reads.
    lowest_bin: usize,
    /// `Σ w` of the window in Q15 (offset compensation's weighted mean).
    window_sum: i64,
    /// Samples per normalisation segment (even; see [`NORMALISATION_SEGMENTS`]).
    segment_len: usize,
    /// The largest window coefficient (Q15) of each segment.
    segment_window_max: [u16; NORMALISATION_SEGMENTS],
    next_index: u64,
    precision: PhantomData<P>,
}

/// Selects the twiddle and window tables of a precision.
pub trait TwiddlesFor: Precision {
    /// Window coefficient type: Q15 `i16` for 16-bit data, Q31 `i32` for 32-bit.
    type WindowCoef: Copy + core::fmt::Debug + 'static;
    /// Whether this precision reads the Q31 arrays.
    const WIDE: bool;
    /// The quarter-wave table this precision reads.
    fn quarter_wave<'a>(tables: &FixedTables<'a>) -> &'a [<Self::Data as BfpSample>::Twiddle];
    /// The window this precision reads.
    fn window<'a>(tables: &FixedTables<'a>) -> &'a [Self::WindowCoef];
    /// `round(x · w)` for a normalised sample and a window coefficient, saturated.
    fn apply_window(x: Self::Data, w: Self::WindowCoef) -> Self::Data;
    /// Pass 1 per normalisation segment (see [`NORMALISATION_SEGMENTS`]):
    /// each `segment`-sample segment's range into `ranges`, and the whole
    /// frame's window-weighted sum; `None` to take the portable loop. The
    /// same values either way.
    fn segment_statistics_fast(
        samples: &[Self::Data],
        window: &[Self::WindowCoef],
        segment: usize,
        ranges: &mut [[i32; 2]; NORMALISATION_SEGMENTS],
    ) -> Option<i64> {
        let _ = (samples, window, segment, ranges);
        None
    }
    /// [`place_and_window`] by a faster route where the target has one;
    /// `false` (nothing done) to take the portable loop. The same values.
    fn place_and_window_fast(
        samples: &mut [Self::Data],
        window: &[Self::WindowCoef],
        offset: i32,
        shifts: (u32, u32),
    ) -> bool {
        let _ = (samples, window, offset, shifts);
        false
    }
    /// Left shift [`TwiddlesFor::apply_window_preshifted`] expects of its
    /// input (folded into the normalisation's own shift).
    const WINDOW_PRESHIFT: u32;
    /// [`TwiddlesFor::apply_window`] of `x_pre >> WINDOW_PRESHIFT`.
    fn apply_window_preshifted(x_pre: Self::Data, w: Self::WindowCoef) -> Self::Data;
    /// The coefficient in Q15.
    fn coef_q15(w: Self::WindowCoef) -> i32;
}

impl TwiddlesFor for crate::int_fft::Fixed16 {
    type WindowCoef = i16;
    const WIDE: bool = false;
    #[cfg(stapes_arm_dsp)]
    fn segment_statistics_fast(
        samples: &[i16],
        window: &[i16],
        segment: usize,
        ranges: &mut [[i32; 2]; NORMALISATION_SEGMENTS],
    ) -> Option<i64> {
        arm_dsp_statistics::segment_statistics(samples, window, segment, ranges)
    }
    #[cfg(stapes_arm_dsp)]
    fn place_and_window_fast(
        samples: &mut [i16],
        window: &[i16],
        offset: i32,
        shifts: (u32, u32),
    ) -> bool {
        arm_dsp_statistics::place_and_window(samples, window, offset, shifts)
    }
    fn quarter_wave<'a>(tables: &FixedTables<'a>) -> &'a [i16] {
        tables.twiddles_q15
    }
    fn window<'a>(tables: &FixedTables<'a>) -> &'a [i16] {
        tables.table.window
    }
    #[inline(always)]
    fn apply_window(x: i16, w: i16) -> i16 {
        x.mul_q15(w)
    }
    const WINDOW_PRESHIFT: u32 = 0;
    #[inline(always)]
    fn apply_window_preshifted(x: i16, w: i16) -> i16 {
        x.mul_q15(w)
    }
    #[inline(always)]
    fn coef_q15(w: i16) -> i32 {
        w as i32
    }
}

impl TwiddlesFor for crate::int_fft::Fixed32 {
    type WindowCoef = i32;
    const WIDE: bool = true;
    fn quarter_wave<'a>(tables: &FixedTables<'a>) -> &'a [i32] {
        tables.twiddles_q31
    }
    fn window<'a>(tables: &FixedTables<'a>) -> &'a [i32] {
        tables.window_q31
    }
    #[inline(always)]
    fn apply_window(x: i32, w: i32) -> i32 {
        // round(x·w / 2^31), halves up: for |x| < 2^30 (placed samples are
        // below 2^29), exactly round(2x·w / 2^32), one `SMMULR` on the
        // Cortex-M4 (and no 64-bit product on the Cortex-M0).
        debug_assert!(x.unsigned_abs() < 1 << 30, "window input {x}");
        crate::int_fft::mul_high(x << 1, w)
    }
    const WINDOW_PRESHIFT: u32 = 1;
    #[inline(always)]
    fn apply_window_preshifted(x2: i32, w: i32) -> i32 {
        crate::int_fft::mul_high(x2, w)
    }
    #[inline(always)]
    fn coef_q15(w: i32) -> i32 {
        w >> 16
    }
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

/// The lowest bin with a nonzero weight in any band.
fn lowest_bin(filterbank: &Filterbank<'_, i16>) -> usize {
    match *filterbank {
        Filterbank::Sparse { spans, weights } => {
            let mut offset = 0;
            let mut lowest = usize::MAX;
            for &[first, count] in spans {
                let ws = &weights[offset..offset + count as usize];
                if let Some(j) = ws.iter().position(|&w| w > 0) {
                    lowest = lowest.min(first as usize + j);
                }
                offset += count as usize;
            }
            lowest
        }
        // The first segment is the lowest band's rising side.
        Filterbank::Compact { segment_starts, .. } => segment_starts[0] as usize,
    }
}

/// Largest `Σ w` of any band (the compact form's falling side counts `1 − w`).
fn max_band_weight_sum(filterbank: &Filterbank<'_, i16>, bands: usize) -> u64 {
    match *filterbank {
        Filterbank::Sparse { spans, weights } => {
            let mut offset = 0;
            let mut worst = 0u64;
            for &[_, count] in spans {
                let sum: u64 = weights[offset..offset + count as usize]
                    .iter()
                    .map(|&w| w.max(0) as u64)
                    .sum();
                worst = worst.max(sum);
                offset += count as usize;
            }
            worst
        }
        Filterbank::Compact {
            segment_starts,
            weights,
        } => {
            let base = segment_starts[0] as usize;
            let seg = |s: usize| {
                &weights[segment_starts[s] as usize - base..segment_starts[s + 1] as usize - base]
            };
            (0..bands)
                .map(|b| {
                    let rising: u64 = seg(b).iter().map(|&w| w.max(0) as u64).sum();
                    let falling: u64 = seg(b + 1).iter().map(|&w| 32768 - w.max(0) as u64).sum();
                    rising + falling
                })
                .max()
                .unwrap_or(0)
        }
    }
}

impl<'t, P, const FFT: usize, const OVERLAP: usize, const BANDS: usize>
    FixedFrontEnd<'t, P, FFT, OVERLAP, BANDS>
where
    P: Precision + TwiddlesFor,
    P::Data: FrameData,
{
    /// A front end for `config` reading `tables`, its frames the log-mel
    /// levels (`I8F8`) the tables describe; integer checks only.
    pub fn new(config: FeatureConfig, tables: FixedTables<'t>) -> Result<Self, FrontEndError> {
        Self::with_stages(config, tables, FixedLog::for_tables(&tables))
    }
}

impl<'t, P, const FFT: usize, const OVERLAP: usize, const BANDS: usize, S>
    FixedFrontEnd<'t, P, FFT, OVERLAP, BANDS, S>
where
    P: Precision + TwiddlesFor,
    P::Data: FrameData,
    S: FrameStage<i32>,
{
    /// A front end whose filterbank energies (one
    /// [`energy_word`](crate::int_log::energy_word) per band) go through
    /// `stages` (instead of the log alone); checks as [`FixedFrontEnd::new`].
    pub fn with_stages(
        config: FeatureConfig,
        tables: FixedTables<'t>,
        stages: S,
    ) -> Result<Self, FrontEndError> {
        crate::error::check_shape(&config, FFT, OVERLAP, BANDS)?;
        tables.check(&config).map_err(FrontEndError::Fixed)?;
        tables
            .check_precision(&config, P::WIDE)
            .map_err(FrontEndError::Fixed)?;
        let p = tables.params;
        let conditioner = IntConditioner::new(
            config
                .dc_removal_pole
                .is_some()
                .then(|| p.dc_pole.to_bits() as i32),
            config
                .pre_emphasis
                .is_some()
                .then(|| p.pre_emphasis.to_bits() as i32),
        );
        // Spectrum values must keep (Σ w)·S below 2^64.
        let weight_bits = 64
            - max_band_weight_sum(&tables.table.filterbank, config.bands as usize).leading_zeros();
        let spectrum_max_bits = match config.spectrum {
            // |re|, |im| <= 2^B: re² + im² < 2^(2B + 2); its root < 2^(B + 1).
            SpectrumKind::Power => 2 * <P::Data as FrameData>::SAMPLE_BITS + 2,
            SpectrumKind::Magnitude => {
                <P::Data as FrameData>::SAMPLE_BITS
                    + 1
                    + <P::Data as FrameData>::MAGNITUDE_FRACTION_BITS
            }
        };
        let spectrum_shift = (spectrum_max_bits + weight_bits).saturating_sub(64);
        Ok(FixedFrontEnd {
            config,
            tables,
            twiddles: P::quarter_wave(&tables),
            window: P::window(&tables),
            framer: Framer::new(config.window_samples as usize, config.hop_samples as usize),
            frame_start: conditioner,
            energies: [EMPTY_ENERGY; BANDS],
            stages,
            fraction_bits: if conditioner.active() {
                CONDITIONING_FRACTION_BITS
            } else {
                0
            },
            spectrum_shift,
            offset_spectrum: if <P::Data as FrameData>::OFFSET_COMPENSATION {
                match offset_spectrum(&config) {
                    Some((w0, w1)) => Some(OffsetBins::Ideal(w0, w1)),
                    None if !tables.window_spectrum.is_empty() => {
                        let lowest = lowest_bin(&tables.table.filterbank);
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
            },
            lowest_bin: lowest_bin(&tables.table.filterbank),
            window_sum: P::window(&tables)[..config.window_samples as usize]
                .iter()
                .map(|&c| P::coef_q15(c) as i64)
                .sum(),
            segment_len: segment_len(config.window_samples as usize),
            segment_window_max: segment_window_max::<P>(
                &P::window(&tables)[..config.window_samples as usize],
            ),
            next_index: 0,
            precision: PhantomData,
        })
    }

    /// The configuration in use.
    pub fn config(&self) -> &FeatureConfig {
        &self.config
    }

    /// Returns to the state of a new front end.
    pub fn reset(&mut self) {
        self.framer.reset();
        self.frame_start =
            IntConditioner::new(self.frame_start.dc_pole, self.frame_start.pre_emphasis);
        self.stages.reset();
        self.next_index = 0;
    }

    /// Consumes samples from the front of `input` until a frame completes and
    /// returns it, or `None` once `input` is empty.
    pub fn next_frame(&mut self, input: &mut &[i16]) -> Option<Frame<'_, S::Out>> {
        self.next_frame_probed(input, &mut ())
    }

    /// [`FixedFrontEnd::next_frame`] with a [`StageProbe`] told when each stage ends.
    pub fn next_frame_probed<Pr: StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut Pr,
    ) -> Option<Frame<'_, S::Out>> {
        if !self
            .framer
            .fill_from(input, <P::Data as FrameData>::from_raw)
        {
            return None;
        }
        self.compute_frame(probe);
        let index = self.next_index;
        self.next_index += 1;
        let bands = self
            .stages
            .process(&mut self.energies[..self.config.stage_inputs()]);
        probe.mark(Stage::Log);
        Some(Frame { index, bands })
    }

    fn compute_frame<Pr: StageProbe>(&mut self, probe: &mut Pr) {
        let n = self.config.fft_points as usize;
        let w = self.config.window_samples as usize;
        let hop = self.config.hop_samples as usize;
        let bands = self.config.bands as usize;
        probe.start();
        <P::Data as FrameData>::save_shared(&mut self.framer);
        let buf = &mut self.framer.buffer_mut()[..n];

        // Pass 1: the OR of the conditioned samples' magnitudes (its bit length
        // is the largest one's), and the filter state at the next frame's start.
        // 32-bit data keep the conditioned samples in place for pass 2.
        let start = self.frame_start;
        let conditioning = self.fraction_bits != 0;
        let keep = <P::Data as FrameData>::HOLDS_CONDITIONED;
        let offset_terms = self.offset_spectrum;
        // With offset compensation: the range [lo, hi] and the window-weighted
        // sum whose mean is the offset (weighted, so that the offset leaves no
        // DC in the windowed frame). Conditioned samples enter the sum 14
        // bits down, so each product fits i32.
        let mean_shift = if conditioning { 14 } else { 0 };
        let (mut lo, mut hi) = (i32::MAX, i32::MIN);
        let mut weighted = WideSum::default();
        let mut mags = 0u32;
        let window = &self.window[..w];
        let mut observe = |c: i32, win: P::WindowCoef| {
            if offset_terms.is_some() {
                lo = lo.min(c);
                hi = hi.max(c);
                weighted.add((c >> mean_shift) * P::coef_q15(win));
            } else {
                mags |= c.unsigned_abs();
            }
        };
        // 16-bit data, unconditioned: each segment's range (see
        // NORMALISATION_SEGMENTS), the frame's from them.
        let windowed = <P::Data as FrameData>::WINDOWED_NORMALISATION;
        let mut ranges = [[0i32; 2]; NORMALISATION_SEGMENTS];
        if windowed && conditioning {
            // Conditioned 16-bit data: each segment's range of the conditioned
            // samples (13 extra fraction bits), the filter state as below.
            let mut cond = start;
            let mut i = 0;
            let segments = buf[..w].chunks(self.segment_len);
            for (range, (xs, ws)) in ranges
                .iter_mut()
                .zip(segments.zip(window.chunks(self.segment_len)))
            {
                let (mut l, mut h) = (i32::MAX, i32::MIN);
                for (v, &win) in xs.iter().zip(ws) {
                    if i == hop {
                        self.frame_start = cond;
                    }
                    let c = cond.step(v.to_raw());
                    (l, h) = (l.min(c), h.max(c));
                    if offset_terms.is_some() {
                        weighted.add((c >> mean_shift) * P::coef_q15(win));
                    }
                    i += 1;
                }
                *range = [l, h];
                (lo, hi) = (lo.min(l), hi.max(h));
            }
            if hop >= w {
                self.frame_start = cond;
            }
            if offset_terms.is_none() {
                mags = hi.unsigned_abs().max(lo.unsigned_abs());
            }
        } else if windowed {
            let seg = self.segment_len;
            let total = match P::segment_statistics_fast(&buf[..w], window, seg, &mut ranges) {
                Some(total) => total,
                None => {
                    let mut total = 0i64;
                    let segments = buf[..w].chunks(seg).zip(window.chunks(seg));
                    for (range, (xs, ws)) in ranges.iter_mut().zip(segments) {
                        let (l, h, sum) = raw_offset_statistics::<P>(xs, ws);
                        *range = [l, h];
                        total += sum.total();
                    }
                    total
                }
            };
            for &[l, h] in &ranges[..w.div_ceil(seg)] {
                (lo, hi) = (lo.min(l), hi.max(h));
            }
            weighted = WideSum::from_total(total);
            if offset_terms.is_none() {
                mags = (hi.unsigned_abs()).max(lo.unsigned_abs());
            }
        } else if conditioning {
            let mut cond = start;
            for (i, (v, &win)) in buf[..w].iter_mut().zip(window).enumerate() {
                if i == hop {
                    self.frame_start = cond;
                }
                let c = cond.step(v.to_raw());
                observe(c, win);
                if keep {
                    *v = <P::Data as FrameData>::from_i32(c);
                }
            }
            if hop >= w {
                self.frame_start = cond;
            }
        } else if cfg!(stapes_no_long_multiply) && offset_terms.is_some() {
            (lo, hi, weighted) = raw_offset_statistics::<P>(&buf[..w], window);
        } else {
            for (v, &win) in buf[..w].iter().zip(window) {
                observe(v.to_raw() as i32, win);
            }
        }
        let offset = if offset_terms.is_some() && hi >= lo {
            // round(Σ c·w / Σ w), clamped into [lo, hi] (so |c − d| ≤ hi − lo < 2^30).
            // Any offset is exact once added back; this one only needs to be
            // near the mean, so both sides are brought below 2^30 and divided
            // in 32 bits (no 64-bit division, a library call on Cortex-M).
            let weighted = weighted.total();
            let top = 64 - weighted.unsigned_abs().leading_zeros();
            let k = top.saturating_sub(30);
            let num = (weighted >> k) as i32;
            let den = ((self.window_sum >> k) as i32).max(1);
            let mean = num / den;
            let d = ((mean as i64) << mean_shift).clamp(lo as i64, hi as i64) as i32;
            mags = (hi - d).max(d - lo) as u32;
            d
        } else {
            0
        };
        let silent = mags == 0 && offset == 0;

        if silent {
            // Digital silence: no band has energy (its log is the floor).
            self.energies[..self.config.stage_inputs()].fill(EMPTY_ENERGY);
            <P::Data as FrameData>::restore_shared(&mut self.framer);
            for stage in [Stage::Window, Stage::Fft, Stage::Spectrum, Stage::Mel] {
                probe.mark(stage);
            }
            return;
        }

        // Pass 2: normalise (shift by the leading zeros), window, store. Every
        // |c| < 2^bits, so c << norm < 2^SAMPLE_BITS fits the FFT's range; the
        // window product cannot overflow either (|w| < 1). Unconditioned
        // 16-bit data: the shift comes from the windowed frame's bound.
        let bits = 32 - mags.leading_zeros();
        let norm = if windowed {
            let segments = ranges.iter().zip(&self.segment_window_max);
            let bound = if conditioning {
                // |c − d| < 2^30 and w < 2^15.
                segments
                    .map(|(&[l, h], &wmax)| {
                        (h - offset).max(offset - l).max(0) as u64 * wmax as u64
                    })
                    .max()
            } else {
                // Raw samples: |c − d| < 2^16, so the product fits u32.
                segments
                    .map(|(&[l, h], &wmax)| {
                        (h - offset).max(offset - l).max(0) as u32 * wmax as u32
                    })
                    .max()
                    .map(u64::from)
            };
            windowed_shift(bound.unwrap_or(0))
        } else {
            <P::Data as FrameData>::SAMPLE_BITS as i32 - bits as i32
        };
        let (up, down) = if norm >= 0 {
            (norm as u32, 0)
        } else {
            (0, (-norm) as u32)
        };
        let round = (1i32 << down) >> 1;
        let place =
            |c: i32| <P::Data as FrameData>::from_i32((((c - offset) + round) >> down) << up);
        if windowed && conditioning {
            // round((c − d)·w / 2^(15 − norm)) in i64 (c carries 13 extra
            // fraction bits), one rounding.
            let shift = (15 - norm) as u32;
            let mut cond = start;
            for (v, &win) in buf[..w].iter_mut().zip(window) {
                let g = cond.step(v.to_raw()) - offset;
                let x = rounded_product(g, P::coef_q15(win), shift);
                *v = <P::Data as FrameData>::from_i32(x);
            }
        } else if windowed {
            windowed_place::<P>(&mut buf[..w], window, offset, norm, mags < 1 << 15);
        } else if !conditioning {
            place_and_window::<P>(&mut buf[..w], window, offset, (up, down));
        } else if keep {
            for (v, &win) in buf[..w].iter_mut().zip(window) {
                *v = P::apply_window(place(v.get_i32()), win);
            }
        } else {
            let mut cond = start;
            for (v, &win) in buf[..w].iter_mut().zip(window) {
                *v = P::apply_window(place(cond.step(v.to_raw())), win);
            }
        }
        buf[w..].fill(P::Data::default());
        probe.mark(Stage::Window);

        let fft_exponent = real_fft::<P>(buf, self.twiddles);
        probe.mark(Stage::Fft);
        // True spectrum = X_int · 2^e_x in full-scale units.
        let e_x = fft_exponent - 15 - self.fraction_bits as i32 - norm;
        let shift = self.spectrum_shift;
        let magnitude = self.config.spectrum == SpectrumKind::Magnitude;
        // Spectrum, once per bin, in place: bin k (1 ≤ k < N/2) replaces X[k]
        // at buf[2k], buf[2k + 1]; bin 0 replaces X[0], X[N/2] (both real, at
        // buf[0], buf[1]); bin N/2 is kept aside.
        // A bin's value shifted right by `s` (floor shifts compose, so one
        // shift by the sum gives the bits of two).
        let value_of = |re: P::Data, im: P::Data, s: u32| -> u64 {
            if magnitude {
                <P::Data as FrameData>::magnitude(re, im, s)
            } else {
                <P::Data as FrameData>::power(re, im, s)
            }
        };
        let zero = P::Data::default();
        let last = value_of(buf[1], zero, shift);
        // Offset compensation: the first K bins get d·W(k) back, in i64
        // (|D| < 2^55), their values as m·2^e; if they outgrow the other bins'
        // 32 bits, the whole frame's values are shifted right by
        // `offset_bin_shift`. Each such bin is computed twice (once for the
        // shift, once to store it), so no array is kept.
        let compensated = match offset_terms {
            Some(terms) if offset != 0 => Some(terms),
            _ => None,
        };
        // D = d·W·2^(norm − 16 − e_f); norm ≤ 15 and e_f ≥ 0: a right shift.
        let down = (16 + fft_exponent - norm) as u32;
        let lowest = self.lowest_bin;
        // The raw FFT output of bin k (k < N/2) as (re, im).
        let raw = |buf: &[P::Data], k: usize| -> (i64, i64) {
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
                (
                    isqrt_u64(p),
                    t + <P::Data as FrameData>::MAGNITUDE_FRACTION_BITS,
                )
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
                    z_bits + <P::Data as FrameData>::MAGNITUDE_FRACTION_BITS
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
                <P::Data as FrameData>::store_bin(&mut buf[..2], place(b0));
                <P::Data as FrameData>::store_bin(&mut buf[2..4], place(b1));
                spectrum_pairs(&mut buf[4..], total, magnitude);
            }
            Some(terms) => {
                // Bins 1 .. K first, each from its raw pair, then bin 0 (whose
                // pair holds X[0] and X[N/2]), then the rest.
                let bins = terms.bins();
                for k in 1..bins {
                    let v = place(added(terms, k, raw(buf, k)));
                    <P::Data as FrameData>::store_bin(&mut buf[2 * k..2 * k + 2], v);
                }
                let v0 = place(added(terms, 0, raw(buf, 0)));
                <P::Data as FrameData>::store_bin(&mut buf[..2], v0);
                spectrum_pairs(&mut buf[2 * bins..], total, magnitude);
            }
            None => {
                let first = value_of(buf[0], zero, total);
                <P::Data as FrameData>::store_bin(&mut buf[..2], first);
                spectrum_pairs(&mut buf[2..], total, magnitude);
            }
        }
        probe.mark(Stage::Spectrum);
        let buf = &*buf;
        // Energy = acc · 2^energy_exponent (weights are Q15).
        let energy_exponent = if magnitude {
            e_x - <P::Data as FrameData>::MAGNITUDE_FRACTION_BITS as i32
        } else {
            2 * e_x
        } + shift as i32
            + offset_bin_shift as i32
            - 15;

        // The filterbank: each band's energy as one 32-bit word (mantissa and
        // exponent, the frame's exponent included), for the stages after it.
        let energies = &mut self.energies[..bands];
        let emit = |b: usize, e: u64| energies[b] = energy_word(e, energy_exponent);
        match self.tables.table.filterbank {
            Filterbank::Sparse { spans, weights } => {
                sparse_energies::<P::Data>(spans, weights, buf, last, emit)
            }
            Filterbank::Compact {
                segment_starts,
                weights,
            } => compact_energies::<P::Data>(segment_starts, weights, buf, last, bands, emit),
        }
        if self.config.stage_inputs() > bands {
            // The frame's energy (Parseval): Σ c_k·bin_k / N from the lowest
            // band's first bin, c_k = 2 but at 0 and N/2 (the weights' Q15
            // does not apply). 16-bit data's bins are below 2^32, so the sum
            // of at most 4096 of them fits u64 exactly; 32-bit data's may use
            // all 64 bits, so each is first shifted right by log2(N) + 1
            // (bits far below the sum's top).
            let half = n / 2;
            let from = self.tables.table.filterbank.first_bin().min(half);
            let s = if P::WIDE { n.trailing_zeros() + 1 } else { 0 };
            let mut sum = 0u64;
            for k in from..half {
                let v = <P::Data as FrameData>::load_bin(&buf[2 * k..2 * k + 2]) >> s;
                sum += if k == 0 { v } else { 2 * v };
            }
            sum += last >> s;
            self.energies[bands] = energy_word(
                sum,
                energy_exponent + 15 + s as i32 - n.trailing_zeros() as i32,
            );
        }
        <P::Data as FrameData>::restore_shared(&mut self.framer);
        probe.mark(Stage::Mel);
    }
}

impl<P, const FFT: usize, const OVERLAP: usize, const BANDS: usize, S>
    crate::frame::StreamingFrontEnd for FixedFrontEnd<'_, P, FFT, OVERLAP, BANDS, S>
where
    P: Precision + TwiddlesFor,
    P::Data: FrameData,
    S: FrameStage<i32>,
{
    type Value = S::Out;

    fn configuration(&self) -> &FeatureConfig {
        &self.config
    }

    fn restart(&mut self) {
        self.reset();
    }

    #[inline]
    fn next_frame_with<Pr: StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut Pr,
    ) -> Option<Frame<'_, S::Out>> {
        self.next_frame_probed(input, probe)
    }
}

/// Cortex-M4: the filterbank's weighted sum of 16-bit data's bins.
#[cfg(stapes_arm_dsp)]
#[allow(unsafe_code)]
mod arm_dsp_mel {
    /// `Σ w·bin`, two weights per turn (LDRH, LDR, UMLAL); `None` when the
    /// bins are off a word boundary or the counts differ.
    #[inline(always)]
    pub(super) fn weighted_bins(slots: &[i16], weights: &[i16]) -> Option<u64> {
        let bins = bytemuck::try_cast_slice::<i16, u32>(slots).ok()?;
        if bins.len() != weights.len() {
            return None;
        }
        let pairs = weights.len() / 2;
        let (mut lo, mut hi) = (0u32, 0u32);
        if pairs > 0 {
            // SAFETY: reads 2·pairs halfwords of `weights` and as many words of
            // `bins` (both at least that long); writes nothing.
            unsafe {
                core::arch::asm!(
                    "2:",
                    "ldrh  {t0}, [{pw}], #2",
                    "ldrh  {t1}, [{pw}], #2",
                    "ldr   {b0}, [{pb}], #4",
                    "ldr   {b1}, [{pb}], #4",
                    "umlal {lo}, {hi}, {b0}, {t0}",
                    "umlal {lo}, {hi}, {b1}, {t1}",
                    "subs  {k}, {k}, #1",
                    "bne   2b",
                    pw = inout(reg) weights.as_ptr() => _,
                    pb = inout(reg) bins.as_ptr() => _,
                    k = inout(reg) pairs => _,
                    lo = inout(reg) lo,
                    hi = inout(reg) hi,
                    t0 = out(reg) _,
                    t1 = out(reg) _,
                    b0 = out(reg) _,
                    b1 = out(reg) _,
                    options(nostack, readonly)
                );
            }
        }
        let mut sum = (hi as u64) << 32 | lo as u64;
        if weights.len() % 2 == 1 {
            sum += bins[2 * pairs] as u64 * weights[2 * pairs] as u16 as u64;
        }
        Some(sum)
    }
}

/// The window stage's passes over raw 16-bit samples in Armv7E-M assembly,
/// two samples per word: per segment, lane-wise maximum and minimum
/// (`SSUB16`/`SEL`) and the window-weighted sum in 64 bits (`SMLALD`); then
/// offset removal and the window product. Exactly the values of the
/// portable loops (the board's frames are checked against the host's).
#[cfg(stapes_arm_dsp)]
mod arm_dsp_statistics {
    /// Pass 1 per normalisation segment: every whole `segment`-sample
    /// segment's range (two samples per word, `SSUB16`/`SEL`, two words per
    /// turn) and the window-weighted sum (`SMLALD`) in one loop, the last
    /// partial segment in plain Rust; `None` (nothing done) when a segment
    /// is not a whole number of word pairs, the frame has fewer samples than
    /// one segment, or the slices are off a word boundary.
    #[inline(never)]
    pub(super) fn segment_statistics(
        samples: &[i16],
        window: &[i16],
        segment: usize,
        ranges: &mut [[i32; 2]; super::NORMALISATION_SEGMENTS],
    ) -> Option<i64> {
        let n = samples.len();
        if segment == 0 || !segment.is_multiple_of(4) || window.len() < n {
            return None;
        }
        let full = (n / segment).min(super::NORMALISATION_SEGMENTS);
        if full == 0 {
            return None;
        }
        let whole = full * segment;
        let xs = bytemuck::try_cast_slice::<i16, u32>(&samples[..whole]).ok()?;
        let ws = bytemuck::try_cast_slice::<i16, u32>(&window[..whole]).ok()?;
        // Each slot holds its segment's count of word pairs on the way in
        // and its (min, max) on the way out; a zero count ends the loop.
        let mut slots = [[0u32; 2]; super::NORMALISATION_SEGMENTS + 1];
        for slot in &mut slots[..full] {
            slot[0] = (segment / 4) as u32;
        }
        let (mut sum_lo, mut sum_hi) = (0u32, 0u32);
        // SAFETY: reads the `whole / 2` words of `xs` and `ws` (full segments
        // of segment / 4 ≥ 1 word pairs each), reads and rewrites the first
        // `full` slots of `slots` and reads the zero count after them.
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                "1:",
                "ldr    {k}, [{po}]",
                "cmp    {k}, #0",
                "beq    3f",
                "ldr    {x0}, [{px}]",
                "mov    {hi}, {x0}",
                "mov    {lo}, {x0}",
                "2:",
                "ldrd   {x0}, {x1}, [{px}], #8",
                "ldrd   {w0}, {w1}, [{pw}], #8",
                "smlald {sl}, {sh}, {x0}, {w0}",
                "ssub16 {w0}, {x0}, {hi}",
                "sel    {hi}, {x0}, {hi}",
                "ssub16 {w0}, {lo}, {x0}",
                "sel    {lo}, {x0}, {lo}",
                "smlald {sl}, {sh}, {x1}, {w1}",
                "ssub16 {w1}, {x1}, {hi}",
                "sel    {hi}, {x1}, {hi}",
                "ssub16 {w1}, {lo}, {x1}",
                "sel    {lo}, {x1}, {lo}",
                "subs   {k}, {k}, #1",
                "bne    2b",
                // The segment's (min, max) from the two lanes of each.
                "sxth   {x0}, {lo}",
                "cmp    {x0}, {lo}, asr #16",
                "it     gt",
                "asrgt  {x0}, {lo}, #16",
                "sxth   {x1}, {hi}",
                "cmp    {x1}, {hi}, asr #16",
                "it     lt",
                "asrlt  {x1}, {hi}, #16",
                "strd   {x0}, {x1}, [{po}], #8",
                "b      1b",
                "3:",
                px = inout(reg) xs.as_ptr() => _,
                pw = inout(reg) ws.as_ptr() => _,
                po = inout(reg) slots.as_mut_ptr() => _,
                k = out(reg) _,
                hi = out(reg) _,
                lo = out(reg) _,
                sl = inout(reg) sum_lo,
                sh = inout(reg) sum_hi,
                x0 = out(reg) _,
                x1 = out(reg) _,
                w0 = out(reg) _,
                w1 = out(reg) _,
                options(nostack)
            );
        }
        for (range, &[lo, hi]) in ranges.iter_mut().zip(&slots[..full]) {
            *range = [lo as i32, hi as i32];
        }
        let mut sum = ((sum_hi as u64) << 32 | sum_lo as u64) as i64;
        if whole < n {
            let (mut l, mut h) = (i32::MAX, i32::MIN);
            for (&c, &w) in samples[whole..].iter().zip(&window[whole..n]) {
                let c = c as i32;
                (l, h) = (l.min(c), h.max(c));
                sum += (c * w as i32) as i64;
            }
            *ranges.get_mut(full)? = [l, h];
        }
        Some(sum)
    }

    /// Pass 2 over raw 16-bit samples with no right shift (`down = 0`):
    /// `round((c − d)·2^up·w / 2^15)` as `round((c − d)·w / 2^(15 − up))`,
    /// two samples per word (`SSUB16`, `SMULBB`/`SMULTT`). The portable
    /// loop's values exactly: |c − d| < 2^(15 − up) there, so the packed
    /// difference cannot wrap. `false` (nothing done) otherwise.
    #[inline(never)]
    pub(super) fn place_and_window(
        samples: &mut [i16],
        window: &[i16],
        offset: i32,
        (up, down): (u32, u32),
    ) -> bool {
        let n = samples.len();
        if down != 0 || up > 14 || n == 0 || !n.is_multiple_of(2) || window.len() < n {
            return false;
        }
        if !(offset as i16 as i32 == offset) {
            return false;
        }
        let Ok(ws) = bytemuck::try_cast_slice::<i16, u32>(&window[..n]) else {
            return false;
        };
        let Ok(xs) = bytemuck::try_cast_slice_mut::<i16, u32>(samples) else {
            return false;
        };
        let dd = (offset as u32 & 0xffff) * 0x1_0001;
        let (round, shift) = (1u32 << (14 - up), 15 - up);
        // SAFETY: reads and rewrites the n/2 words of `xs`, reads those of
        // `ws` (n even, positive).
        #[allow(unsafe_code)]
        unsafe {
            core::arch::asm!(
                // Two words per turn (LDRD/STRD), then the odd word if any.
                // SMLABB/SMLATT add the rounding constant to the product in
                // the same 32-bit sum as a separate addition would.
                "lsrs   {k}, {n}, #1",
                "beq    3f",
                "2:",
                "ldrd   {x0}, {x1}, [{px}]",
                "ldrd   {w0}, {w1}, [{pw}], #8",
                "ssub16 {x0}, {x0}, {dd}",
                "smlatt {b}, {x0}, {w0}, {r}",
                "smlabb {x0}, {x0}, {w0}, {r}",
                "asr    {x0}, {x0}, {s}",
                "asr    {b}, {b}, {s}",
                "pkhbt  {x0}, {x0}, {b}, lsl #16",
                "ssub16 {x1}, {x1}, {dd}",
                "smlatt {b}, {x1}, {w1}, {r}",
                "smlabb {x1}, {x1}, {w1}, {r}",
                "asr    {x1}, {x1}, {s}",
                "asr    {b}, {b}, {s}",
                "pkhbt  {x1}, {x1}, {b}, lsl #16",
                "strd   {x0}, {x1}, [{px}], #8",
                "subs   {k}, {k}, #1",
                "bne    2b",
                "3:",
                "lsls   {n}, {n}, #31",
                "beq    4f",
                "ldr    {x0}, [{px}]",
                "ldr    {w0}, [{pw}]",
                "ssub16 {x0}, {x0}, {dd}",
                "smlatt {b}, {x0}, {w0}, {r}",
                "smlabb {x0}, {x0}, {w0}, {r}",
                "asr    {x0}, {x0}, {s}",
                "asr    {b}, {b}, {s}",
                "pkhbt  {x0}, {x0}, {b}, lsl #16",
                "str    {x0}, [{px}]",
                "4:",
                px = inout(reg) xs.as_mut_ptr() => _,
                pw = inout(reg) ws.as_ptr() => _,
                n = inout(reg) xs.len() => _,
                k = out(reg) _,
                dd = in(reg) dd,
                r = in(reg) round,
                s = in(reg) shift,
                x0 = out(reg) _,
                x1 = out(reg) _,
                w0 = out(reg) _,
                w1 = out(reg) _,
                b = out(reg) _,
                options(nostack)
            );
        }
        true
    }
}
