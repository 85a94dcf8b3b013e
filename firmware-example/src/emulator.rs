//! Everything specific to running under QEMU, in one place: the clip in
//! flash as the sample source, a pin that goes nowhere, semihosting output
//! and exit codes, the SysTick instruction clock, stack painting and the
//! fault handler. A real board replaces this module.

use core::convert::Infallible;
use core::fmt::Write;

use cortex_m::peripheral::SYST;
use cortex_m::peripheral::syst::SystClkSource;
use cortex_m_rt::{ExceptionFrame, exception};
use cortex_m_semihosting::{debug, hio};

use crate::board::SampleSource;

/// The test clip, raw little-endian `i16`, stored in flash.
pub static CLIP: &[u8] = include_bytes!(concat!(env!("OUT_DIR"), "/clip.raw"));

/// Streams a little-endian `i16` clip from flash, as a DMA would fill RAM.
pub struct FlashClip {
    bytes: &'static [u8],
}

impl FlashClip {
    /// A source over `bytes`.
    pub fn new(bytes: &'static [u8]) -> Self {
        FlashClip { bytes }
    }
}

impl SampleSource for FlashClip {
    fn read(&mut self, block: &mut [i16]) -> usize {
        let n = block.len().min(self.bytes.len() / 2);
        for (s, b) in block[..n].iter_mut().zip(self.bytes.chunks_exact(2)) {
            *s = i16::from_le_bytes([b[0], b[1]]);
        }
        self.bytes = &self.bytes[2 * n..];
        n
    }
}

/// A busy pin with nothing attached.
pub struct NoPin;

impl embedded_hal::digital::ErrorType for NoPin {
    type Error = Infallible;
}

impl embedded_hal::digital::OutputPin for NoPin {
    fn set_low(&mut self) -> Result<(), Infallible> {
        Ok(())
    }
    fn set_high(&mut self) -> Result<(), Infallible> {
        Ok(())
    }
}

/// Host console through semihosting.
pub struct Console(hio::HostStream);

impl Console {
    /// Opens stdout on the host; exits with failure when semihosting is absent.
    pub fn open() -> Console {
        match hio::hstdout() {
            Ok(s) => Console(s),
            Err(()) => fail(),
        }
    }
}

impl Write for Console {
    fn write_str(&mut self, s: &str) -> core::fmt::Result {
        self.0.write_all(s.as_bytes()).map_err(|_| core::fmt::Error)
    }
}

/// Ends the emulation with exit status 0.
pub fn succeed() -> ! {
    debug::exit(debug::EXIT_SUCCESS);
    loop {
        cortex_m::asm::bkpt();
    }
}

/// Ends the emulation with exit status 1.
pub fn fail() -> ! {
    debug::exit(debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::bkpt();
    }
}

/// SysTick as a free-running 24-bit down-counter. Under `qemu -icount
/// shift=0` it advances in proportion to executed instructions.
pub struct Ticks {
    syst: SYST,
}

impl Ticks {
    /// Starts SysTick from the processor clock, reload 2^24 − 1.
    pub fn start(mut syst: SYST) -> Ticks {
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(0x00FF_FFFF);
        syst.clear_current();
        syst.enable_counter();
        Ticks { syst }
    }

    /// The counter now.
    #[inline(always)]
    pub fn now(&self) -> u32 {
        let _ = &self.syst;
        SYST::get_current()
    }

    /// Ticks from `earlier` to `later` (the counter counts down and wraps at 2^24).
    #[inline(always)]
    pub fn elapsed(earlier: u32, later: u32) -> u32 {
        earlier.wrapping_sub(later) & 0x00FF_FFFF
    }

    /// Instructions per 1000 ticks, from a loop of known length: `subs` and a
    /// taken `bne` are two instructions per turn.
    pub fn instructions_per_kilotick(&self) -> u32 {
        let turns: u32 = 100_000;
        let t0 = self.now();
        let mut n = turns;
        // SAFETY: a register-only countdown loop; touches no memory.
        unsafe {
            core::arch::asm!("2:", "subs {0}, #1", "bne 2b", inout(reg) n, options(nomem, nostack));
        }
        let t1 = self.now();
        let _ = n;
        let ticks = Self::elapsed(t0, t1).max(1);
        ((2 * turns as u64 * 1000) / ticks as u64) as u32
    }
}

const PAINT: u32 = 0xA5A5_A5A5;
/// How far below the stack pointer [`paint_stack`] paints.
const PAINT_DEPTH: usize = 8 * 1024;

unsafe extern "C" {
    static mut __sheap: u32;
}

/// A painted stack region: `[low, high)`.
pub struct Painted {
    low: usize,
    high: usize,
}

/// Fills up to 8 KB of free stack below the caller's frame with a pattern
/// (from 8 bytes below the stack pointer: this function is inlined, so
/// nothing live lies lower).
#[inline(always)]
pub fn paint_stack() -> Painted {
    let sp = cortex_m::register::msp::read() as usize;
    let high = (sp - 8) & !3;
    let floor = core::ptr::addr_of_mut!(__sheap) as usize;
    let low = high.saturating_sub(PAINT_DEPTH).max(floor);
    // SAFETY: between the end of .bss/.uninit and 8 bytes below the stack
    // pointer, memory is unused by anything live (no heap in this program).
    unsafe {
        let mut p = low;
        while p < high {
            core::ptr::write_volatile(p as *mut u32, PAINT);
            p += 4;
        }
    }
    Painted { low, high }
}

/// Bytes of the painted region used since it was painted (the stack depth
/// reached below the painting frame).
pub fn stack_used(region: Painted) -> usize {
    let mut p = region.low;
    // SAFETY: reads the painted region only.
    while p < region.high && unsafe { core::ptr::read_volatile(p as *const u32) } == PAINT {
        p += 4;
    }
    region.high - p
}

#[exception]
unsafe fn HardFault(frame: &ExceptionFrame) -> ! {
    let mut c = Console::open();
    let _ = writeln!(c, "STAPES-FAULT pc={:#010x}", frame.pc());
    fail()
}
