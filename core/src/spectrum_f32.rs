//! `f32` real FFT (microfft) and power or magnitude, in place.
//!
//! The DFT has no `1/N` factor: `X[k] = Σ x[n]·e^(-2πikn/N)` of the windowed,
//! zero-padded, full-scale-normalised frame. The spectrum replaces the first
//! `N/2 + 1` elements of the FFT buffer, so no separate power array is kept.

use crate::config::SpectrumKind;

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
