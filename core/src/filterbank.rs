//! The filterbank stage, in every arithmetic: `E[b] = Σ w·S` over each
//! band's bins, then the optional per-band gain.
//!
//! One walk over the table (`band_energies`, private to the crate) serves
//! every arithmetic and form: a sparse band's weighted sum, or a compact
//! segment's two sides (its bins feed the rising side of the band above
//! with `w` and the falling side of the band below with `1 − w`). What a
//! bin is and how a weight multiplies it is the arithmetic's
//! (`BandInput`): `f32` values ([`accumulate_f32`]), or the fixed path's
//! 16- or 32-bit bins with Q15 weights into `u64` sums (a band's sum is at
//! most `(Σ w)·max S`; the spectrum stage shifts the bins so that this
//! bound stays below `2^64`). The table's own properties the front ends
//! need (the largest `Σ w` of a band, the lowest bin read) come from the
//! same walk.
//!
//! Target kernels, each the twin of the portable loop it replaces: on a
//! hard-float Cortex-M the `f32` sparse form's whole band loop; on a
//! Cortex-M4 the 16-bit bins' weighted sums (`UMLAL`, two weights per turn).

use crate::fixed_data::FrameData;
use crate::table::Filterbank;

/// A spectrum as the filterbank's walk reads it.
pub(crate) trait BandInput<W> {
    /// A band's (partial) sum.
    type Sum: Copy + Default;
    /// `Σ w[i]·bin[first + i]`.
    fn weighted(&self, first: usize, weights: &[W]) -> Self::Sum;
    /// `(Σ w·bin, Σ (1 − w)·bin)` over a compact segment's bins (`first ..`).
    fn weighted_both(&self, first: usize, weights: &[W]) -> (Self::Sum, Self::Sum);
    /// A band's two sides joined: rising, then falling.
    fn join(rising: Self::Sum, falling: Self::Sum) -> Self::Sum;
}

/// The one walk over a filterbank: each band's sum, handed to `emit` with
/// its index as soon as it is complete (lowest band first), so no partial
/// sums are stored. `filterbank` passed
/// [`TableView::check`](crate::table::TableView::check) for a configuration
/// with `bands` bands.
#[inline(always)]
pub(crate) fn band_energies<W: Copy, I: BandInput<W>>(
    filterbank: &Filterbank<'_, W>,
    input: &I,
    bands: usize,
    emit: impl FnMut(usize, I::Sum),
) {
    match *filterbank {
        Filterbank::Sparse { spans, weights } => sparse_walk(spans, weights, input, emit),
        Filterbank::Compact {
            segment_starts,
            weights,
        } => compact_walk(segment_starts, weights, input, bands, emit),
    }
}

/// [`band_energies`] of the sparse form: each band's span.
#[inline(always)]
fn sparse_walk<W: Copy, I: BandInput<W>>(
    spans: &[crate::table::BinSpan],
    weights: &[W],
    input: &I,
    mut emit: impl FnMut(usize, I::Sum),
) {
    let mut offset = 0usize;
    for (b, &[first, count]) in spans.iter().enumerate() {
        let count = count as usize;
        emit(
            b,
            input.weighted(first as usize, &weights[offset..offset + count]),
        );
        offset += count;
    }
}

/// [`band_energies`] of the compact form: segment `s` is the rising side of
/// band `s` and the falling side of band `s − 1`.
#[inline(always)]
fn compact_walk<W: Copy, I: BandInput<W>>(
    segment_starts: &[u16],
    weights: &[W],
    input: &I,
    bands: usize,
    mut emit: impl FnMut(usize, I::Sum),
) {
    let base = segment_starts[0] as usize;
    // The rising side of the band below (segment 0 is the lowest band's
    // rising side only).
    let mut carry = I::Sum::default();
    for seg in 0..=bands {
        let lo = segment_starts[seg] as usize;
        let hi = segment_starts[seg + 1] as usize;
        let (rising, falling) = input.weighted_both(lo, &weights[lo - base..hi - base]);
        if seg > 0 {
            emit(seg - 1, I::join(carry, falling));
        }
        carry = rising;
    }
}

/// The `f32` spectrum (`N/2 + 1` values) as the walk reads it.
struct FloatSpectrum<'a>(&'a [f32]);

impl BandInput<f32> for FloatSpectrum<'_> {
    type Sum = f32;
    #[inline(always)]
    fn weighted(&self, first: usize, weights: &[f32]) -> f32 {
        dot(weights, &self.0[first..first + weights.len()])
    }
    #[inline(always)]
    fn weighted_both(&self, first: usize, weights: &[f32]) -> (f32, f32) {
        let s = &self.0[first..first + weights.len()];
        let (mut rising, mut falling) = (0.0f32, 0.0f32);
        for (&w, &s) in weights.iter().zip(s) {
            let part = w * s;
            rising += part;
            falling += s - part;
        }
        (rising, falling)
    }
    #[inline(always)]
    fn join(rising: f32, falling: f32) -> f32 {
        rising + falling
    }
}

/// Accumulates `spectrum` (`N/2 + 1` values) into `out` (one per band) with an
/// `f32` filterbank that [`TableView::check`](crate::table::TableView::check)
/// accepted for this configuration.
#[inline]
pub fn accumulate_f32(filterbank: &Filterbank<'_, f32>, spectrum: &[f32], out: &mut [f32]) {
    let bands = out.len();
    band_energies(filterbank, &FloatSpectrum(spectrum), bands, |b, e| {
        out[b] = e
    });
}

/// [`accumulate_f32`] for a filterbank known to fit: on a hard-float Cortex-M
/// the sparse form's whole band loop runs as one hand-scheduled loop (the
/// same products and sums in the same order), with no per-band slicing.
///
/// # Safety
/// `filterbank` passed [`TableView::check`](crate::table::TableView::check)
/// for a configuration with `spectrum.len()` spectrum bins and `out.len()`
/// bands: every sparse span has `count ≥ 1` and `first + count ≤
/// spectrum.len()`, there are `out.len()` spans, and the counts add up to
/// `weights.len()`.
#[inline]
#[allow(unsafe_code)]
pub(crate) unsafe fn accumulate_checked_f32(
    filterbank: &Filterbank<'_, f32>,
    spectrum: &[f32],
    out: &mut [f32],
) {
    #[cfg(stapes_arm_fpu)]
    if let Filterbank::Sparse { spans, weights } = *filterbank {
        // SAFETY: the caller's contract is the kernel's.
        unsafe { arm_fpu::sparse_bands(spans, weights, spectrum, out) };
        return;
    }
    accumulate_f32(filterbank, spectrum, out);
}

/// `Σ w[i]·s[i]`, summed strictly left to right (four products per turn, so
/// the loop costs less without changing a single rounding). On a hard-float
/// Cortex-M, a loop of load-multiples and `VMLA`s (which rounds its product,
/// then its sum, like `acc += a * b`) is the same sum in the same order.
#[inline]
fn dot(w: &[f32], s: &[f32]) -> f32 {
    #[cfg(stapes_arm_fpu)]
    if w.len() == s.len() {
        return arm_fpu::dot(w, s);
    }
    let mut acc = 0.0f32;
    let (mut wq, mut sq) = (w.chunks_exact(4), s.chunks_exact(4));
    for (a, b) in (&mut wq).zip(&mut sq) {
        acc += a[0] * b[0];
        acc += a[1] * b[1];
        acc += a[2] * b[2];
        acc += a[3] * b[3];
    }
    for (&a, &b) in wq.remainder().iter().zip(sq.remainder()) {
        acc += a * b;
    }
    acc
}

/// Multiplies each band energy by its gain.
#[inline]
pub fn apply_gains_f32(gains: &[f32], out: &mut [f32]) {
    for (e, &g) in out.iter_mut().zip(gains) {
        *e *= g;
    }
}

#[cfg(stapes_arm_fpu)]
#[allow(unsafe_code)]
mod arm_fpu {
    use crate::table::BinSpan;

    /// Every band of a sparse filterbank: per band, four weights per turn,
    /// then the last two and the last one as the count's low bits say, each
    /// product added left to right into an accumulator that starts at 0.
    ///
    /// # Safety
    /// As [`super::accumulate_checked_f32`].
    #[inline]
    pub(super) unsafe fn sparse_bands(
        spans: &[BinSpan],
        weights: &[f32],
        spectrum: &[f32],
        out: &mut [f32],
    ) {
        if out.is_empty() {
            return;
        }
        // SAFETY: per the contract, band b reads spans[b], `count` weights
        // following the previous bands' (inside `weights`, whose length is
        // the counts' sum) and spectrum[first .. first + count] (inside
        // `spectrum`), and writes out[b]; `out.len() ≥ 1` bands.
        unsafe {
            core::arch::asm!(
                "1:",
                "ldr {t}, [{ps}], #4",
                "vmov s0, {zero}",
                "uxth {a}, {t}",
                "add {a}, {spec}, {a}, lsl #2",
                "lsrs {c}, {t}, #18",
                "beq 3f",
                "2:",
                "vldmia {pw}!, {{s8-s11}}",
                "vldmia {a}!, {{s12-s15}}",
                "vmla.f32 s0, s8, s12",
                "vmla.f32 s0, s9, s13",
                "vmla.f32 s0, s10, s14",
                "vmla.f32 s0, s11, s15",
                "subs {c}, {c}, #1",
                "bne 2b",
                "3:",
                // C = bit 1 of the count, N = bit 0 (FPU instructions leave
                // the flags alone).
                "lsls {c}, {t}, #15",
                "bcc 4f",
                "vldmia {pw}!, {{s8-s9}}",
                "vldmia {a}!, {{s12-s13}}",
                "vmla.f32 s0, s8, s12",
                "vmla.f32 s0, s9, s13",
                "4:",
                "bpl 5f",
                "vldmia {pw}!, {{s8}}",
                "vldmia {a}!, {{s12}}",
                "vmla.f32 s0, s8, s12",
                "5:",
                "vstmia {po}!, {{s0}}",
                "subs {nb}, {nb}, #1",
                "bne 1b",
                zero = in(reg) 0u32,
                spec = in(reg) spectrum.as_ptr(),
                ps = inout(reg) spans.as_ptr() => _,
                pw = inout(reg) weights.as_ptr() => _,
                po = inout(reg) out.as_mut_ptr() => _,
                nb = inout(reg) out.len() => _,
                t = out(reg) _,
                a = out(reg) _,
                c = out(reg) _,
                out("s0") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                options(nostack),
            );
        }
    }

    /// `Σ w[i]·s[i]` left to right, for slices of equal length.
    #[inline]
    pub(super) fn dot(w: &[f32], s: &[f32]) -> f32 {
        let acc: u32;
        // SAFETY: reads w.len() floats of each slice (equal lengths, checked by
        // the caller), four at a time and then one at a time; writes nothing.
        unsafe {
            core::arch::asm!(
                "vmov s0, {zero}",
                "lsrs {q}, {n}, #2",
                "beq 3f",
                "2:",
                "vldmia {pw}!, {{s8-s11}}",
                "vldmia {ps}!, {{s12-s15}}",
                "vmla.f32 s0, s8, s12",
                "vmla.f32 s0, s9, s13",
                "vmla.f32 s0, s10, s14",
                "vmla.f32 s0, s11, s15",
                "subs {q}, {q}, #1",
                "bne 2b",
                "3:",
                "ands {n}, {n}, #3",
                "beq 5f",
                "4:",
                "vldmia {pw}!, {{s8}}",
                "vldmia {ps}!, {{s12}}",
                "vmla.f32 s0, s8, s12",
                "subs {n}, {n}, #1",
                "bne 4b",
                "5:",
                "vmov {acc}, s0",
                zero = in(reg) 0u32,
                q = out(reg) _,
                n = inout(reg) w.len() => _,
                pw = inout(reg) w.as_ptr() => _,
                ps = inout(reg) s.as_ptr() => _,
                acc = lateout(reg) acc,
                out("s0") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                options(nostack, readonly),
            );
        }
        f32::from_bits(acc)
    }
}

// ---- Fixed point ----

/// A fixed-point data type's bins times Q15 weights.
pub(crate) trait BinWeights: FrameData {
    /// `v · w` for a bin value and a Q15 weight (`w ≤ 2^15`).
    fn weigh(v: u64, w: u32) -> u64;
    /// `Σ weights[i] · bin[i]` over the bins stored in `slots` (two elements
    /// each) and as many non-negative Q15 weights (the table check refuses
    /// negative ones).
    #[inline(always)]
    fn weighted_bins(slots: &[Self], weights: &[i16]) -> u64 {
        folded_weighted_bins(slots, weights)
    }
}

impl BinWeights for i16 {
    #[inline(always)]
    fn weighted_bins(slots: &[i16], weights: &[i16]) -> u64 {
        // Cortex-M4: a hand-scheduled loop over the bins as words (UMLAL).
        #[cfg(stapes_arm_dsp)]
        if let Some(sum) = arm_dsp_mel::weighted_bins(slots, weights) {
            return sum;
        }
        folded_weighted_bins(slots, weights)
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
}

impl BinWeights for i32 {
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
}

/// [`BinWeights::weighted_bins`] as a plain fold, for any data type (the
/// Cortex-M4 kernel's twin for 16-bit data).
#[inline(always)]
fn folded_weighted_bins<D: BinWeights>(slots: &[D], weights: &[i16]) -> u64 {
    weights
        .iter()
        .zip(slots.chunks_exact(2))
        .fold(0u64, |acc, (&w, slot)| {
            acc + D::weigh(D::load_bin(slot), w as u32)
        })
}

/// The fixed path's bins as the walk reads them: bin `k < N/2` at
/// `buf[2k..2k + 2]`, bin `N/2` as `last`.
struct FixedBinsView<'a, D> {
    buf: &'a [D],
    last: u64,
}

impl<D: BinWeights> BandInput<i16> for FixedBinsView<'_, D> {
    type Sum = u64;
    #[inline(always)]
    fn weighted(&self, first: usize, weights: &[i16]) -> u64 {
        let half = self.buf.len() / 2;
        // Bins below N/2 from the buffer (no per-bin branch), bin N/2 from `last`.
        let inside = weights.len().min(half.saturating_sub(first));
        let mut acc = D::weighted_bins(
            &self.buf[2 * first..2 * (first + inside)],
            &weights[..inside],
        );
        if let Some(&wt) = weights.get(inside) {
            acc += D::weigh(self.last, wt as u32);
        }
        acc
    }
    #[inline(always)]
    fn weighted_both(&self, first: usize, weights: &[i16]) -> (u64, u64) {
        let half = self.buf.len() / 2;
        let inside = weights.len().min(half.saturating_sub(first));
        let slots = self.buf[2 * first..2 * (first + inside)].chunks_exact(2);
        let (mut rising, mut falling) =
            weights[..inside]
                .iter()
                .zip(slots)
                .fold((0u64, 0u64), |(r, f), (&wt, slot)| {
                    let (v, wt) = (D::load_bin(slot), wt as u32);
                    (r + D::weigh(v, wt), f + D::weigh(v, 32768 - wt))
                });
        if let Some(&wt) = weights.get(inside) {
            let wt = wt as u32;
            rising += D::weigh(self.last, wt);
            falling += D::weigh(self.last, 32768 - wt);
        }
        (rising, falling)
    }
    #[inline(always)]
    fn join(rising: u64, falling: u64) -> u64 {
        rising + falling
    }
}

/// The fixed path's band sums (Q15 weights times bins) from the bins in
/// `buf` and bin `N/2` as `last`, each handed to `emit`: the walk of
/// [`band_energies`], each form out of line, so that its loop keeps its
/// accumulators and pointers in registers.
#[inline(always)]
pub(crate) fn fixed_energies<D: BinWeights>(
    filterbank: &Filterbank<'_, i16>,
    buf: &[D],
    last: u64,
    bands: usize,
    emit: impl FnMut(usize, u64),
) {
    let input = FixedBinsView { buf, last };
    match *filterbank {
        Filterbank::Sparse { spans, weights } => fixed_sparse(spans, weights, &input, emit),
        Filterbank::Compact {
            segment_starts,
            weights,
        } => fixed_compact(segment_starts, weights, &input, bands, emit),
    }
}

/// [`sparse_walk`] out of line, for the fixed path.
#[inline(never)]
fn fixed_sparse<D: BinWeights>(
    spans: &[crate::table::BinSpan],
    weights: &[i16],
    input: &FixedBinsView<'_, D>,
    emit: impl FnMut(usize, u64),
) {
    sparse_walk(spans, weights, input, emit);
}

/// [`compact_walk`] out of line, for the fixed path.
#[inline(never)]
fn fixed_compact<D: BinWeights>(
    segment_starts: &[u16],
    weights: &[i16],
    input: &FixedBinsView<'_, D>,
    bands: usize,
    emit: impl FnMut(usize, u64),
) {
    compact_walk(segment_starts, weights, input, bands, emit);
}

/// Every bin taken as 1: a band's sum is its `Σ w` (Q15; the compact
/// form's falling side counts `1 − w`).
struct WeightSums;

impl BandInput<i16> for WeightSums {
    type Sum = u64;
    fn weighted(&self, _: usize, weights: &[i16]) -> u64 {
        weights.iter().map(|&w| w.max(0) as u64).sum()
    }
    fn weighted_both(&self, _: usize, weights: &[i16]) -> (u64, u64) {
        let rising = weights.iter().map(|&w| w.max(0) as u64).sum();
        let falling = weights.iter().map(|&w| 32768 - w.max(0) as u64).sum();
        (rising, falling)
    }
    fn join(rising: u64, falling: u64) -> u64 {
        rising + falling
    }
}

/// The lowest bin a band reads with a nonzero weight: a sparse span's first
/// positive weight; a compact segment's first bin (every bin of a compact
/// segment has `w > 0` or `1 − w > 0`).
struct LowestBin;

impl BandInput<i16> for LowestBin {
    type Sum = usize;
    fn weighted(&self, first: usize, weights: &[i16]) -> usize {
        weights
            .iter()
            .position(|&w| w > 0)
            .map_or(usize::MAX, |j| first + j)
    }
    fn weighted_both(&self, first: usize, _: &[i16]) -> (usize, usize) {
        (first, first)
    }
    fn join(rising: usize, falling: usize) -> usize {
        rising.min(falling)
    }
}

/// The largest `Σ w` of any band (Q15; the compact form's falling side
/// counts `1 − w`).
pub(crate) fn max_band_weight_sum(filterbank: &Filterbank<'_, i16>, bands: usize) -> u64 {
    let mut worst = 0;
    band_energies(filterbank, &WeightSums, bands, |_, s| worst = worst.max(s));
    worst
}

/// The lowest bin with a nonzero weight in any band.
pub(crate) fn lowest_bin(filterbank: &Filterbank<'_, i16>, bands: usize) -> usize {
    let mut lowest = usize::MAX;
    band_energies(filterbank, &LowestBin, bands, |_, b| lowest = lowest.min(b));
    lowest
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
