//! The seam where a real board plugs in.
//!
//! * Samples arrive through [`SampleSource`], the project's own trait for a
//!   microphone behind DMA: each call hands over one filled half-buffer.
//! * A digital output (any `embedded_hal::digital::OutputPin`) is high while a
//!   frame is being computed, so the timing can be taken with a scope or a
//!   logic analyser on hardware.

use embedded_hal::digital::OutputPin;

/// A source of 16-bit samples delivered in DMA-sized blocks.
pub trait SampleSource {
    /// Fills `block` with the next samples and returns how many it wrote;
    /// 0 means the stream has ended.
    fn read(&mut self, block: &mut [i16]) -> usize;
}

/// Raises `pin` for the duration of `work` (pin errors are ignored: timing
/// output must never stop the audio path).
#[inline(always)]
pub fn while_high<P: OutputPin, T>(pin: &mut P, work: impl FnOnce() -> T) -> T {
    let _ = pin.set_high();
    let result = work();
    let _ = pin.set_low();
    result
}
