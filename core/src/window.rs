//! Windowing: the window multiplies the `window_samples` frame, and the rest
//! of the FFT buffer (when the FFT is longer) is zero-filled.
//!
//! On a hard-float Cortex-M (`cfg(stapes_arm_fpu)`) the products run eight
//! at a time from load-multiple and store-multiple instructions (13
//! instructions per eight samples; the compiled loop takes about 35). Each
//! product is the same IEEE-754 single multiplication as the portable loop,
//! which is its twin and handles what does not fill a block of eight.

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
