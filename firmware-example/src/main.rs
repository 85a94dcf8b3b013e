//! stapes on a Cortex-M board: the reference preset's compiled-in tables, fed
//! a test signal in DMA-sized chunks, in the arithmetic chosen by a cargo
//! feature (`f32`, `fixed16`, `fixed32`). This is the minimal board binary;
//! running it under emulation and reporting frames is the firmware example's
//! next step.
#![no_std]
#![no_main]

#[cfg(not(any(feature = "f32", feature = "fixed16", feature = "fixed32")))]
compile_error!("enable exactly one arithmetic feature: f32, fixed16 or fixed32");

use core::panic::PanicInfo;

use cortex_m_rt::entry;

#[allow(dead_code)]
mod preset {
    include!("../../tables/speech16k-40.rs");
}

/// One DMA half-buffer of 10 ms at 16 kHz.
const CHUNK: usize = 160;

#[cfg(feature = "f32")]
type BoardFrontEnd = stapes_core::float_path::FloatFrontEnd<'static, { preset::FFT_POINTS }, { preset::OVERLAP_SAMPLES }, { preset::BANDS }>;
#[cfg(all(feature = "fixed16", not(feature = "f32")))]
type BoardFrontEnd = stapes_core::fixed_path::FixedFrontEnd<'static, stapes_core::int_fft::Fixed16, { preset::FFT_POINTS }, { preset::OVERLAP_SAMPLES }, { preset::BANDS }>;
#[cfg(all(feature = "fixed32", not(any(feature = "f32", feature = "fixed16"))))]
type BoardFrontEnd = stapes_core::fixed_path::FixedFrontEnd<'static, stapes_core::int_fft::Fixed32, { preset::FFT_POINTS }, { preset::OVERLAP_SAMPLES }, { preset::BANDS }>;

fn front_end() -> Option<BoardFrontEnd> {
    #[cfg(feature = "f32")]
    let made = BoardFrontEnd::new(preset::CONFIG, preset::TABLE_F32_COMPACT);
    #[cfg(not(feature = "f32"))]
    let made = BoardFrontEnd::new(preset::CONFIG, preset::FIXED_COMPACT);
    made.ok()
}

#[entry]
fn main() -> ! {
    let Some(mut fe) = front_end() else {
        loop {
            cortex_m::asm::bkpt();
        }
    };
    let mut chunk = [0i16; CHUNK];
    let mut phase: u32 = 0;
    let mut checksum = 0u32;
    loop {
        // A 1 kHz square-ish tone from integer phase (no float work for input).
        for s in chunk.iter_mut() {
            phase = phase.wrapping_add(1 << 28);
            *s = if phase < (1 << 31) { 8000 } else { -8000 };
        }
        let mut rest = &chunk[..];
        while let Some(frame) = fe.next_frame(&mut rest) {
            checksum = checksum.wrapping_add(frame.bands[0].to_bits() as u32);
        }
        core::hint::black_box(checksum);
    }
}

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    loop {
        cortex_m::asm::bkpt();
    }
}
