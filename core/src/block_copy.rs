//! Copying the samples two frames share, in blocks of words.
//!
//! The framer saves the `window - hop` shared samples before each in-place
//! FFT and puts them back after it (two copies of 352 values per frame for
//! `speech16k-40`). The general-purpose `memcpy` a bare-metal build links
//! moves one word per five instructions; on Arm a load-multiple and a
//! store-multiple move four (Cortex-M0) or eight (Cortex-M4) words per four
//! instructions. Elsewhere, and for whatever does not fill a whole block or
//! is not on a word boundary, the copy is `copy_from_slice`. Both give the
//! same bytes: only the instructions differ.

/// Copies `src` into `dst` (same length; the framer's two buffers never
/// overlap, which `&mut` guarantees).
// Not inlined: the front ends' frame functions keep their registers for
// the stages around it (inlined, it cost Cortex-M0's spectrum loop 1.3k).
#[inline(never)]
pub fn copy<T: Copy>(dst: &mut [T], src: &[T]) {
    let len = dst.len().min(src.len());
    let (dst, src) = (&mut dst[..len], &src[..len]);
    #[cfg(stapes_arm_block_copy)]
    {
        let done = arm::copy_whole_blocks(dst, src);
        dst[done..].copy_from_slice(&src[done..]);
    }
    #[cfg(not(stapes_arm_block_copy))]
    dst.copy_from_slice(src);
}

#[cfg(stapes_arm_block_copy)]
#[allow(unsafe_code)]
mod arm {
    /// Words moved by one load-multiple/store-multiple pair.
    #[cfg(stapes_no_long_multiply)]
    const BLOCK_WORDS: usize = 4;
    #[cfg(not(stapes_no_long_multiply))]
    const BLOCK_WORDS: usize = 8;

    /// Copies the longest prefix of `src` made of whole word blocks when both
    /// slices start on a word boundary, and returns how many elements it
    /// copied (0 otherwise).
    #[inline]
    pub(super) fn copy_whole_blocks<T: Copy>(dst: &mut [T], src: &[T]) -> usize {
        let size = core::mem::size_of::<T>();
        let (d, s) = (dst.as_mut_ptr() as usize, src.as_ptr() as usize);
        if size == 0 || (4 * BLOCK_WORDS) % size != 0 || (d | s) & 3 != 0 {
            return 0;
        }
        let bytes = src.len() * size;
        let blocks = bytes / (4 * BLOCK_WORDS);
        if blocks == 0 {
            return 0;
        }
        let block_bytes = blocks * 4 * BLOCK_WORDS;
        // SAFETY: both ranges lie inside the slices (`block_bytes <= bytes`),
        // start on a word boundary (checked above) and do not overlap (one
        // is borrowed mutably). The loop runs `blocks >= 1` times; the
        // registers it uses are declared clobbered.
        unsafe {
            let end = s + block_bytes;
            #[cfg(stapes_no_long_multiply)]
            core::arch::asm!(
                // Thumb-1 takes operands in low registers only: the end
                // moves to r8 so that r2-r5 can carry the data.
                "mov r8, r2",
                "2:",
                "ldmia r0!, {{r2, r3, r4, r5}}",
                "stmia r1!, {{r2, r3, r4, r5}}",
                "cmp r0, r8",
                "bne 2b",
                inout("r0") s => _,
                inout("r1") d => _,
                inout("r2") end => _,
                out("r3") _, out("r4") _, out("r5") _, out("r8") _,
                options(nostack),
            );
            #[cfg(not(stapes_no_long_multiply))]
            core::arch::asm!(
                "2:",
                "ldmia {s}!, {{r2, r3, r4, r5, r8, r10, r11, r12}}",
                "stmia {d}!, {{r2, r3, r4, r5, r8, r10, r11, r12}}",
                "cmp {s}, {end}",
                "bne 2b",
                s = inout(reg) s => _,
                d = inout(reg) d => _,
                end = in(reg) end,
                out("r2") _, out("r3") _, out("r4") _, out("r5") _,
                out("r8") _, out("r10") _, out("r11") _, out("r12") _,
                options(nostack),
            );
        }
        block_bytes / size
    }
}
