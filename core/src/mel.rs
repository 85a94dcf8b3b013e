//! Mel filterbank accumulation from a table view: `E[b] = Σ w·S` over each
//! band's bins, then the optional per-band gain.

use crate::table::Filterbank;

/// Accumulates `spectrum` (`N/2 + 1` values) into `out` (one per band) with an
/// `f32` filterbank that [`TableView::check`](crate::table::TableView::check)
/// accepted for this configuration.
#[inline]
pub fn accumulate_f32(filterbank: &Filterbank<'_, f32>, spectrum: &[f32], out: &mut [f32]) {
    match *filterbank {
        Filterbank::Sparse { spans, weights } => {
            let mut offset = 0usize;
            for (energy, &[first, count]) in out.iter_mut().zip(spans) {
                let (first, count) = (first as usize, count as usize);
                let w = &weights[offset..offset + count];
                let s = &spectrum[first..first + count];
                *energy = dot(w, s);
                offset += count;
            }
        }
        Filterbank::Compact {
            segment_starts,
            weights,
        } => {
            let base = segment_starts[0] as usize;
            let bands = out.len();
            out.fill(0.0);
            for seg in 0..=bands {
                let lo = segment_starts[seg] as usize;
                let hi = segment_starts[seg + 1] as usize;
                let w = &weights[lo - base..hi - base];
                let s = &spectrum[lo..hi];
                let (mut rising, mut falling) = (0.0f32, 0.0f32);
                for (&w, &s) in w.iter().zip(s) {
                    let part = w * s;
                    rising += part;
                    falling += s - part;
                }
                if seg < bands {
                    out[seg] += rising;
                }
                if seg > 0 {
                    out[seg - 1] += falling;
                }
            }
        }
    }
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
