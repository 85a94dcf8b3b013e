//! The window stage, in every arithmetic: the window multiplies the
//! `window_samples` frame, and the rest of the FFT buffer (when the FFT is
//! longer) is zero-filled.
//!
//! **`f32`** ([`apply_f32`], [`apply_saving_f32`]): one IEEE-754 product per
//! sample. On a hard-float Cortex-M (`cfg(stapes_arm_fpu)`) the products run
//! eight at a time from load-multiple and store-multiple instructions (13
//! instructions per eight samples; the compiled loop takes about 35); the
//! portable loop is its twin and handles what does not fill a block of eight.
//!
//! **Fixed point** (`FixedWindowing`, private to the crate): two passes
//! over the raw samples. Pass 1 runs the integer conditioner
//! ([`crate::conditioning::IntConditioner`]) from the state at the frame's
//! first sample and finds the frame's range (per segment for 16-bit data,
//! see [`NORMALISATION_SEGMENTS`]) and, with offset compensation, its
//! window-weighted mean; pass 2 takes the offset out, shifts the frame to
//! use the FFT's range and applies the Q15 (16-bit data) or Q31 (32-bit
//! data) window with one rounding. On a Cortex-M4 (`cfg(stapes_arm_dsp)`)
//! both passes over raw 16-bit samples take two samples per word; the
//! portable loops are their twins.

use crate::conditioning::{CONDITIONING_FRACTION_BITS, IntConditioner};
use crate::config::FeatureConfig;
use crate::fft::Precision;
use crate::fixed_data::FrameData;
use crate::fixed_tables::FixedTables;

/// Applies `window` to the first `window.len()` elements of `buf` and zeroes the rest.
#[inline]
pub fn apply_f32(buf: &mut [f32], window: &[f32]) {
    let (frame, padding) = buf.split_at_mut(window.len().min(buf.len()));
    multiply_in_place(frame, &window[..frame.len()]);
    padding.fill(0.0);
}

/// [`apply_f32`], after copying the raw `buf[from .. from + saved.len()]`
/// into `saved` (the samples the next frame shares). When that range ends
/// where the window does (`from + saved.len() == window.len()`, as for the
/// framer's overlap), a hard-float Cortex-M stores each block of raw samples
/// as it windows it, in the same pass; the values are the same either way.
#[inline]
pub fn apply_saving_f32(buf: &mut [f32], window: &[f32], from: usize, saved: &mut [f32]) {
    let wlen = window.len().min(buf.len());
    if from.checked_add(saved.len()) != Some(wlen) {
        saved.copy_from_slice(&buf[from..from + saved.len()]);
        return apply_f32(buf, window);
    }
    let (frame, padding) = buf.split_at_mut(wlen);
    let (head, tail) = frame.split_at_mut(from);
    let (w_head, w_tail) = window[..wlen].split_at(from);
    multiply_in_place(head, w_head);
    #[cfg(stapes_arm_fpu)]
    let done = arm_fpu::multiply_saving_blocks(tail, w_tail, saved);
    #[cfg(not(stapes_arm_fpu))]
    let done = 0;
    saved[done..].copy_from_slice(&tail[done..]);
    multiply_in_place(&mut tail[done..], &w_tail[done..]);
    padding.fill(0.0);
}

/// `x[i] *= w[i]` (same lengths).
#[inline]
fn multiply_in_place(x: &mut [f32], w: &[f32]) {
    #[cfg(stapes_arm_fpu)]
    let done = arm_fpu::multiply_blocks(x, w);
    #[cfg(not(stapes_arm_fpu))]
    let done = 0;
    for (x, &w) in x[done..].iter_mut().zip(&w[done..]) {
        *x *= w;
    }
}

#[cfg(stapes_arm_fpu)]
#[allow(unsafe_code)]
mod arm_fpu {
    /// Multiplies the longest prefix of whole blocks of eight, returns its length.
    #[inline]
    pub(super) fn multiply_blocks(x: &mut [f32], w: &[f32]) -> usize {
        let blocks = x.len().min(w.len()) / 8;
        if blocks == 0 {
            return 0;
        }
        // SAFETY: reads 8·blocks floats of `w`, reads and rewrites as many of
        // `x` (both at least that long, `x` borrowed mutably so no overlap);
        // the FPU registers it uses are declared clobbered.
        unsafe {
            core::arch::asm!(
                "2:",
                "vldmia {x}, {{s0-s7}}",
                "vldmia {w}!, {{s8-s15}}",
                "vmul.f32 s0, s0, s8",
                "vmul.f32 s1, s1, s9",
                "vmul.f32 s2, s2, s10",
                "vmul.f32 s3, s3, s11",
                "vmul.f32 s4, s4, s12",
                "vmul.f32 s5, s5, s13",
                "vmul.f32 s6, s6, s14",
                "vmul.f32 s7, s7, s15",
                "vstmia {x}!, {{s0-s7}}",
                "subs {k}, {k}, #1",
                "bne 2b",
                x = inout(reg) x.as_mut_ptr() => _,
                w = inout(reg) w.as_ptr() => _,
                k = inout(reg) blocks => _,
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                options(nostack),
            );
        }
        8 * blocks
    }

    /// [`multiply_blocks`], storing each block of `x` into `saved` before
    /// multiplying it.
    #[inline]
    pub(super) fn multiply_saving_blocks(x: &mut [f32], w: &[f32], saved: &mut [f32]) -> usize {
        let blocks = x.len().min(w.len()).min(saved.len()) / 8;
        if blocks == 0 {
            return 0;
        }
        // SAFETY: as `multiply_blocks`, plus 8·blocks floats written to
        // `saved` (at least that long, borrowed mutably apart from `x`).
        unsafe {
            core::arch::asm!(
                "2:",
                "vldmia {x}, {{s0-s7}}",
                "vstmia {sv}!, {{s0-s7}}",
                "vldmia {w}!, {{s8-s15}}",
                "vmul.f32 s0, s0, s8",
                "vmul.f32 s1, s1, s9",
                "vmul.f32 s2, s2, s10",
                "vmul.f32 s3, s3, s11",
                "vmul.f32 s4, s4, s12",
                "vmul.f32 s5, s5, s13",
                "vmul.f32 s6, s6, s14",
                "vmul.f32 s7, s7, s15",
                "vstmia {x}!, {{s0-s7}}",
                "subs {k}, {k}, #1",
                "bne 2b",
                x = inout(reg) x.as_mut_ptr() => _,
                w = inout(reg) w.as_ptr() => _,
                sv = inout(reg) saved.as_mut_ptr() => _,
                k = inout(reg) blocks => _,
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                options(nostack),
            );
        }
        8 * blocks
    }
}

// ---- Fixed point ----

/// Pass 1 over raw samples with offset compensation: their range and their
/// window-weighted sum. Out of line, so that its few live values stay in
/// the eight low registers of a Cortex-M0 (used there only: elsewhere the
/// inline loop measured faster).
#[inline(never)]
fn raw_offset_statistics<P: WindowCoefficients>(
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
fn place_and_window<P: WindowCoefficients>(
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
fn segment_window_max<P: WindowCoefficients>(
    window: &[P::WindowCoef],
) -> [u16; NORMALISATION_SEGMENTS] {
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

/// `rounded_product` with one 64-bit product.
#[inline(always)]
pub fn rounded_product_wide(g: i32, w: i32, shift: u32) -> i32 {
    ((g as i64 * w as i64 + ((1i64 << shift) >> 1)) >> shift) as i32
}

/// `rounded_product` from 16-bit halves of `g`, in 32-bit steps.
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
fn windowed_place<P: WindowCoefficients>(
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

/// A precision's window coefficients and window kernels.
pub(crate) trait WindowCoefficients: Precision {
    /// Window coefficient type: Q15 `i16` for 16-bit data, Q31 `i32` for 32-bit.
    type WindowCoef: Copy + core::fmt::Debug + 'static;
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
    /// Left shift [`WindowCoefficients::apply_window_preshifted`] expects of its
    /// input (folded into the normalisation's own shift).
    const WINDOW_PRESHIFT: u32;
    /// [`WindowCoefficients::apply_window`] of `x_pre >> WINDOW_PRESHIFT`.
    fn apply_window_preshifted(x_pre: Self::Data, w: Self::WindowCoef) -> Self::Data;
    /// The coefficient in Q15.
    fn coef_q15(w: Self::WindowCoef) -> i32;
}

impl WindowCoefficients for crate::fft::Fixed16 {
    type WindowCoef = i16;
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
    fn window<'a>(tables: &FixedTables<'a>) -> &'a [i16] {
        tables.table.window
    }
    #[inline(always)]
    fn apply_window(x: i16, w: i16) -> i16 {
        mul_q15(x, w)
    }
    const WINDOW_PRESHIFT: u32 = 0;
    #[inline(always)]
    fn apply_window_preshifted(x: i16, w: i16) -> i16 {
        mul_q15(x, w)
    }
    #[inline(always)]
    fn coef_q15(w: i16) -> i32 {
        w as i32
    }
}

impl WindowCoefficients for crate::fft::Fixed32 {
    type WindowCoef = i32;
    fn window<'a>(tables: &FixedTables<'a>) -> &'a [i32] {
        tables.window_q31
    }
    #[inline(always)]
    fn apply_window(x: i32, w: i32) -> i32 {
        // round(x·w / 2^31), halves up: for |x| < 2^30 (placed samples are
        // below 2^29), exactly round(2x·w / 2^32), one `SMMULR` on the
        // Cortex-M4 (and no 64-bit product on the Cortex-M0).
        debug_assert!(x.unsigned_abs() < 1 << 30, "window input {x}");
        crate::fft::mul_high(x << 1, w)
    }
    const WINDOW_PRESHIFT: u32 = 1;
    #[inline(always)]
    fn apply_window_preshifted(x2: i32, w: i32) -> i32 {
        crate::fft::mul_high(x2, w)
    }
    #[inline(always)]
    fn coef_q15(w: i32) -> i32 {
        w >> 16
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

/// `round(x · w / 2^15)` for a 16-bit sample and a Q15 coefficient: within
/// `±2^30` before the shift, exact in `i32`; with `|w| ≤ 32767` the rounded
/// result lies within `±32767` (no clamp needed).
#[inline(always)]
fn mul_q15(x: i16, w: i16) -> i16 {
    ((x as i32 * w as i32 + (1 << 14)) >> 15) as i16
}

/// The fixed path's window stage: conditioning (run at frame time from the
/// filter state at the frame's first sample), the frame's offset and
/// normalising shift, and the window product, in two passes over the raw
/// samples in the frame buffer. See [the fixed path's
/// numerics](crate::front_end#fixed-point-numerics).
#[derive(Clone, Debug)]
pub(crate) struct FixedWindowing<'t, P: WindowCoefficients> {
    window: &'t [P::WindowCoef],
    /// The conditioner's state at the next frame's first sample.
    frame_start: IntConditioner,
    /// Whether any conditioning is on (the samples then carry
    /// [`CONDITIONING_FRACTION_BITS`] extra fraction bits).
    conditioning: bool,
    /// Whether the frame's offset is taken out (the spectrum stage adds it
    /// back).
    offset_compensated: bool,
    /// `Σ w` of the window in Q15 (the offset's weighted mean).
    window_sum: i64,
    /// Samples per normalisation segment (even; see [`NORMALISATION_SEGMENTS`]).
    segment_len: usize,
    /// The largest window coefficient (Q15) of each segment.
    segment_window_max: [u16; NORMALISATION_SEGMENTS],
}

/// What the window stage hands the FFT and the spectrum stage.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Windowed {
    /// The left shift the frame was normalised by (negative: right).
    pub norm: i32,
    /// The offset taken out of every sample before windowing (0 without
    /// offset compensation).
    pub offset: i32,
    /// Extra fraction bits of the samples (conditioning's, or 0).
    pub fraction_bits: u32,
}

impl<'t, P: WindowCoefficients> FixedWindowing<'t, P>
where
    P::Data: FrameData,
{
    /// The stage for `config` over `tables`' window; `offset_compensated`
    /// when the spectrum stage adds the offset back.
    pub(crate) fn new(
        config: &FeatureConfig,
        tables: &FixedTables<'t>,
        offset_compensated: bool,
    ) -> Self {
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
        let window = &P::window(tables)[..config.window_samples as usize];
        FixedWindowing {
            window,
            frame_start: conditioner,
            conditioning: conditioner.active(),
            offset_compensated,
            window_sum: window.iter().map(|&c| P::coef_q15(c) as i64).sum(),
            segment_len: segment_len(window.len()),
            segment_window_max: segment_window_max::<P>(window),
        }
    }

    /// Back to zero conditioning state.
    pub(crate) fn reset(&mut self) {
        self.frame_start.reset();
    }

    /// Conditions, normalises and windows the raw frame `buf[..window]` in
    /// place and zeroes the rest; `None` for digital silence (nothing
    /// written: no band has energy).
    #[inline(always)]
    pub(crate) fn apply(&mut self, buf: &mut [P::Data], hop: usize) -> Option<Windowed> {
        let window = self.window;
        let w = window.len();
        // Pass 1: the OR of the conditioned samples' magnitudes (its bit length
        // is the largest one's), and the filter state at the next frame's start.
        // 32-bit data keep the conditioned samples in place for pass 2.
        let start = self.frame_start;
        let conditioning = self.conditioning;
        let keep = <P::Data as FrameData>::HOLDS_CONDITIONED;
        let compensate = self.offset_compensated;
        // With offset compensation: the range [lo, hi] and the window-weighted
        // sum whose mean is the offset (weighted, so that the offset leaves no
        // DC in the windowed frame). Conditioned samples enter the sum 14
        // bits down, so each product fits i32.
        let mean_shift = if conditioning { 14 } else { 0 };
        let (mut lo, mut hi) = (i32::MAX, i32::MIN);
        let mut weighted = WideSum::default();
        let mut mags = 0u32;
        let mut observe = |c: i32, win: P::WindowCoef| {
            if compensate {
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
                        self.frame_start.set_state(cond.state());
                    }
                    let c = cond.step(v.to_raw());
                    (l, h) = (l.min(c), h.max(c));
                    if compensate {
                        weighted.add((c >> mean_shift) * P::coef_q15(win));
                    }
                    i += 1;
                }
                *range = [l, h];
                (lo, hi) = (lo.min(l), hi.max(h));
            }
            if hop >= w {
                self.frame_start.set_state(cond.state());
            }
            if !compensate {
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
            if !compensate {
                mags = (hi.unsigned_abs()).max(lo.unsigned_abs());
            }
        } else if conditioning {
            let mut cond = start;
            for (i, (v, &win)) in buf[..w].iter_mut().zip(window).enumerate() {
                if i == hop {
                    self.frame_start.set_state(cond.state());
                }
                let c = cond.step(v.to_raw());
                observe(c, win);
                if keep {
                    *v = <P::Data as FrameData>::from_i32(c);
                }
            }
            if hop >= w {
                self.frame_start.set_state(cond.state());
            }
        } else if cfg!(stapes_no_long_multiply) && compensate {
            (lo, hi, weighted) = raw_offset_statistics::<P>(&buf[..w], window);
        } else {
            for (v, &win) in buf[..w].iter().zip(window) {
                observe(v.to_raw() as i32, win);
            }
        }
        let offset = if compensate && hi >= lo {
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
        if mags == 0 && offset == 0 {
            // Digital silence.
            return None;
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
        Some(Windowed {
            norm,
            offset,
            fraction_bits: if conditioning {
                CONDITIONING_FRACTION_BITS
            } else {
                0
            },
        })
    }
}
