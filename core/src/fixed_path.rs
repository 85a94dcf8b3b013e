//! The fixed-point front end for boards without an FPU: `i16` samples in,
//! [`I8F8`] log-mel frames out (1/256 dB, or 1/256 natural-log unit, per
//! LSB). No float operation anywhere on this path.
//!
//! # Numerics
//! * **Stream**: raw `i16` samples are stored (frame assembly and overlap, as
//!   in the `f32` path). DC removal and pre-emphasis are run at frame time
//!   from the filter state saved at the frame's first sample, in `i32` with
//!   13 extra fraction bits (`i64` products), so the stored stream stays exact.
//! * **Normalisation before windowing**: the conditioned frame is shifted so
//!   its largest sample uses the data type's full width (15 bits for
//!   [`Fixed16`](crate::int_fft::Fixed16), 31 for [`Fixed32`](crate::int_fft::Fixed32)); quiet frames keep their precision.
//! * **Window**: Q15, rounded product.
//! * **FFT**: block floating point ([`crate::int_fft`]), exponent tracked.
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
//! Every narrowing saturates (never wraps): normalised samples, FFT stages
//! (which never need it: their shifts are chosen so no value can overflow),
//! and the output (±128 output units). Digital silence gives exactly the floor.
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

use fixed::types::I8F8;

use crate::config::{FeatureConfig, SpectrumKind};
use crate::error::FrontEndError;
use crate::fixed_tables::FixedTables;
use crate::frame::Frame;
use crate::framer::Framer;
use crate::int_fft::{BfpSample, Precision, real_fft};
use crate::int_log::log2_q16;
use crate::probe::{Stage, StageProbe};
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
    /// Data bits available for a normalised sample (15 or 31).
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
}

impl FrameData for i16 {
    const SAMPLE_BITS: u32 = 15;
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
    #[inline]
    fn mul_q15(self, w: i16) -> i16 {
        // ≤ 2^30 in magnitude: exact in i32.
        ((self as i32 * w as i32 + (1 << 14)) >> 15).clamp(i16::MIN as i32, i16::MAX as i32) as i16
    }
    #[inline]
    fn power(re: i16, im: i16, shift: u32) -> u64 {
        let (re, im) = (re as i32, im as i32);
        // ≤ 2^31: exact in u32.
        (((re * re) as u32 + (im * im) as u32) as u64) >> shift
    }
}

impl FrameData for i32 {
    const SAMPLE_BITS: u32 = 31;
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
        ((re * re) as u64 + (im * im) as u64) >> shift
    }
}

/// Integer square root (floor) of a `u64`.
#[inline]
pub fn isqrt_u64(v: u64) -> u64 {
    // Digit by digit, two bits of `v` per step, starting at its leading pair:
    // shifts, adds and compares only (no division, which is a library call on
    // Cortex-M for 64 bits).
    if v == 0 {
        return 0;
    }
    let mut rem = v;
    let mut root = 0u64;
    let mut bit = 1u64 << ((63 - v.leading_zeros()) & !1);
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
    out: [I8F8; BANDS],
    fraction_bits: u32,
    spectrum_shift: u32,
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
}

impl TwiddlesFor for crate::int_fft::Fixed16 {
    type WindowCoef = i16;
    const WIDE: bool = false;
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
        // |x| < 2^31, |w| < 2^31: the product fits i64; rounded once.
        ((x as i64 * w as i64 + (1 << 30)) >> 31) as i32
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
    /// A front end for `config` reading `tables`; integer checks only.
    pub fn new(config: FeatureConfig, tables: FixedTables<'t>) -> Result<Self, FrontEndError> {
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
            SpectrumKind::Magnitude => <P::Data as FrameData>::SAMPLE_BITS + 1,
        };
        let spectrum_shift = (spectrum_max_bits + weight_bits).saturating_sub(64);
        Ok(FixedFrontEnd {
            config,
            tables,
            twiddles: P::quarter_wave(&tables),
            window: P::window(&tables),
            framer: Framer::new(config.window_samples as usize, config.hop_samples as usize),
            frame_start: conditioner,
            out: [I8F8::ZERO; BANDS],
            fraction_bits: if conditioner.active() {
                CONDITIONING_FRACTION_BITS
            } else {
                0
            },
            spectrum_shift,
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
        self.next_index = 0;
    }

    /// Consumes samples from the front of `input` until a frame completes and
    /// returns it, or `None` once `input` is empty.
    pub fn next_frame(&mut self, input: &mut &[i16]) -> Option<Frame<'_, I8F8>> {
        self.next_frame_probed(input, &mut ())
    }

    /// [`FixedFrontEnd::next_frame`] with a [`StageProbe`] told when each stage ends.
    pub fn next_frame_probed<Pr: StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut Pr,
    ) -> Option<Frame<'_, I8F8>> {
        if !self
            .framer
            .fill_from(input, <P::Data as FrameData>::from_raw)
        {
            return None;
        }
        self.compute_frame(probe);
        let index = self.next_index;
        self.next_index += 1;
        Some(Frame {
            index,
            bands: &self.out[..self.config.bands as usize],
        })
    }

    fn compute_frame<Pr: StageProbe>(&mut self, probe: &mut Pr) {
        let n = self.config.fft_points as usize;
        let w = self.config.window_samples as usize;
        let hop = self.config.hop_samples as usize;
        let bands = self.config.bands as usize;
        let floor = self.tables.params.floor;
        probe.start();
        self.framer.begin_frame(<P::Data as FrameData>::to_raw);
        let buf = &mut self.framer.buffer_mut()[..n];

        // Pass 1: largest conditioned sample, and the filter state at the next frame's start.
        let mut cond = self.frame_start;
        let mut next_start = cond;
        let mut max = 0u32;
        let conditioned = |c: &mut IntConditioner, raw: i16, fraction_bits: u32| -> i32 {
            if fraction_bits == 0 {
                raw as i32
            } else {
                c.step(raw)
            }
        };
        for (i, v) in buf[..w].iter().enumerate() {
            max = max.max(conditioned(&mut cond, v.to_raw(), self.fraction_bits).unsigned_abs());
            if i + 1 == hop {
                next_start = cond;
            }
        }
        let start = self.frame_start;
        self.frame_start = next_start;

        if max == 0 {
            // Digital silence: every band is exactly the floor.
            self.out[..bands].fill(floor);
            self.framer.end_frame(<P::Data as FrameData>::from_raw);
            for stage in Stage::ALL {
                probe.mark(stage);
            }
            return;
        }

        // Pass 2: normalise (shift by the leading zeros), window, store.
        let bits = 32 - max.leading_zeros();
        let norm = <P::Data as FrameData>::SAMPLE_BITS as i32 - bits as i32;
        let mut cond = start;
        for (v, &win) in buf[..w].iter_mut().zip(self.window) {
            let c = conditioned(&mut cond, v.to_raw(), self.fraction_bits);
            // |c| ≤ max < 2^bits, so c << norm < 2^SAMPLE_BITS fits i32.
            let x = if norm >= 0 {
                c << norm
            } else {
                (c + (1 << (-norm - 1))) >> -norm
            };
            *v = P::apply_window(<P::Data as FrameData>::from_i64_saturating(x as i64), win);
        }
        buf[w..].fill(P::Data::default());
        probe.mark(Stage::Window);

        let fft_exponent = real_fft::<P>(buf, self.twiddles);
        probe.mark(Stage::Fft);
        probe.mark(Stage::Spectrum);
        // True spectrum = X_int · 2^e_x in full-scale units.
        let e_x = fft_exponent - 15 - self.fraction_bits as i32 - norm;
        let shift = self.spectrum_shift;
        let half = n / 2;
        let magnitude = self.config.spectrum == SpectrumKind::Magnitude;
        // Bin k sits at buf[2k], buf[2k + 1]; X[0] and X[N/2] (real) at buf[0], buf[1].
        let slot = |k: usize| {
            if k == 0 {
                0
            } else if k == half {
                1
            } else {
                2 * k
            }
        };
        if magnitude {
            // Once per bin, in place: |X[k]| replaces the real part, as raw bits.
            for k in 0..=half {
                let (re, im) = if k == 0 || k == half {
                    (buf[slot(k)], P::Data::default())
                } else {
                    (buf[2 * k], buf[2 * k + 1])
                };
                let m = isqrt_u64(<P::Data as FrameData>::power(re, im, 0)) >> shift;
                buf[slot(k)] = <P::Data as FrameData>::from_bits_u32(m as u32);
            }
        }
        let buf = &*buf;
        let value = |k: usize| -> u64 {
            if magnitude {
                return buf[slot(k)].to_bits_u32() as u64;
            }
            let (re, im) = if k == 0 || k == half {
                (buf[slot(k)], P::Data::default())
            } else {
                (buf[2 * k], buf[2 * k + 1])
            };
            <P::Data as FrameData>::power(re, im, shift)
        };
        // Energy = acc · 2^energy_exponent (weights are Q15).
        let energy_exponent = if magnitude { e_x } else { 2 * e_x } + shift as i32 - 15;

        let out = &mut self.out[..bands];
        let gains = self.tables.table.band_gains;
        let k_log = self.tables.params.log2_to_output.to_bits() as i64;
        let mut emit = |b: usize, acc: u64| {
            let level = match log2_q16(acc) {
                None => floor.to_bits() as i32,
                Some(l) => {
                    let log2 = l as i64 + ((energy_exponent as i64) << 16);
                    // Q16 · Q16 → Q32 output units; to 1/256 units with rounding.
                    let units = (log2 * k_log + (1 << 23)) >> 24;
                    let with_gain = units + gains.map_or(0, |g| g[b] as i64);
                    with_gain
                        .max(floor.to_bits() as i64)
                        .clamp(i16::MIN as i64, i16::MAX as i64) as i32
                }
            };
            out[b] = I8F8::from_bits(level as i16);
        };
        match self.tables.table.filterbank {
            Filterbank::Sparse { spans, weights } => {
                let mut offset = 0;
                for (b, &[first, count]) in spans.iter().enumerate() {
                    let (first, count) = (first as usize, count as usize);
                    let acc = weights[offset..offset + count]
                        .iter()
                        .enumerate()
                        .fold(0u64, |acc, (j, &wt)| {
                            acc + wt.max(0) as u64 * value(first + j)
                        });
                    offset += count;
                    emit(b, acc);
                }
            }
            Filterbank::Compact {
                segment_starts,
                weights,
            } => {
                let base = segment_starts[0] as usize;
                let mut carry = 0u64; // falling side of the band below
                for seg in 0..=bands {
                    let lo = segment_starts[seg] as usize;
                    let hi = segment_starts[seg + 1] as usize;
                    let (mut rising, mut falling) = (0u64, 0u64);
                    for (k, &wt) in (lo..hi).zip(&weights[lo - base..hi - base]) {
                        let v = value(k);
                        let wt = wt.max(0) as u64;
                        rising += wt * v;
                        falling += (32768 - wt) * v;
                    }
                    if seg > 0 {
                        emit(seg - 1, carry + falling);
                    }
                    carry = rising;
                }
            }
        }
        // Spectrum and log are computed band by band inside the mel loop.
        probe.mark(Stage::Mel);
        self.framer.end_frame(<P::Data as FrameData>::from_raw);
        probe.mark(Stage::Log);
    }
}
