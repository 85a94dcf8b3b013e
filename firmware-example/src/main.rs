//! stapes on a Cortex-M4F: the reference preset's compiled-in f32 table, fed
//! a tone in DMA-sized chunks. This is the minimal board binary; running it
//! under emulation and reporting frames is the firmware example's next step.
#![no_std]
#![no_main]

use core::panic::PanicInfo;

use cortex_m_rt::entry;
use stapes_core::float_path::FloatFrontEnd;

#[allow(dead_code)]
mod preset {
    include!("../../tables/speech16k-40.rs");
}

type BoardFrontEnd = FloatFrontEnd<'static, { preset::FFT_POINTS }, { preset::OVERLAP_SAMPLES }, { preset::BANDS }>;

/// One DMA half-buffer of 10 ms at 16 kHz.
const CHUNK: usize = 160;

#[entry]
fn main() -> ! {
    let mut fe = match BoardFrontEnd::new(preset::CONFIG, preset::TABLE_F32_COMPACT) {
        Ok(fe) => fe,
        Err(_) => loop {
            cortex_m::asm::bkpt();
        },
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
            checksum = checksum.wrapping_add(frame.bands[0].to_bits());
        }
        cortex_m::asm::nop();
        core::hint::black_box(checksum);
    }
}

#[panic_handler]
fn panic(_: &PanicInfo) -> ! {
    loop {
        cortex_m::asm::bkpt();
    }
}
