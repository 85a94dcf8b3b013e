//! Hooks between the stages of the per-frame path, for measuring on a board.
//!
//! The front ends call [`StageProbe::mark`] after each stage of a frame;
//! `()` is the no-op probe that [`next_frame`](crate::front_end::FrontEnd::next_frame)
//! uses, so an unmeasured build pays nothing.
//!
//! ```
//! use stapes_core::probe::{Stage, StageProbe};
//! struct Count(usize);
//! impl StageProbe for Count {
//!     fn mark(&mut self, _done: Stage) { self.0 += 1; }
//! }
//! let mut c = Count(0);
//! c.mark(Stage::Fft);
//! assert_eq!(c.0, 1);
//! ```

/// A stage of the per-frame path, in order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Stage {
    /// Frame start: overlap saved (and, in the fixed path, conditioning and
    /// normalisation), window applied, padding zeroed.
    Window = 0,
    /// The real FFT.
    Fft = 1,
    /// Power or magnitude, once per bin (the fixed path also adds back the
    /// frame's offset here).
    Spectrum = 2,
    /// Filterbank accumulation and gains, and the overlap's restore.
    Mel = 3,
    /// The stages after the filterbank: the log (and floor) by default,
    /// whatever chain the front end was built with otherwise.
    Log = 4,
}

impl Stage {
    /// Every stage, in order.
    pub const ALL: [Stage; 5] = [
        Stage::Window,
        Stage::Fft,
        Stage::Spectrum,
        Stage::Mel,
        Stage::Log,
    ];

    /// Short name.
    pub fn name(self) -> &'static str {
        match self {
            Stage::Window => "window",
            Stage::Fft => "fft",
            Stage::Spectrum => "spectrum",
            Stage::Mel => "mel",
            Stage::Log => "log",
        }
    }
}

/// Receives a mark after each stage of each frame.
pub trait StageProbe {
    /// Called once at the start of a frame's computation.
    #[inline(always)]
    fn start(&mut self) {}
    /// Called after `done` finished.
    fn mark(&mut self, done: Stage);
}

impl StageProbe for () {
    #[inline(always)]
    fn mark(&mut self, _done: Stage) {}
}
