//! The per-frame stages after the filterbank, chained at compile time.
//!
//! A front end computes each frame's band energies (conditioning, framing,
//! window, FFT, spectrum, filterbank) and hands them to its stages: by
//! default the log ([`crate::log::FloatLog`] or [`crate::log::FixedLog`]),
//! and after it whatever a model reads. Stages are plain values chained
//! with [`Then`] (no `dyn`, no allocation), so a board compiles in, and
//! pays RAM for, only the stages it uses. A stage may work in place on the
//! buffer it is handed (the `f32` log does) or write a buffer of its own
//! (a stage that changes the value type or count must), and hands the next
//! stage a slice of one or the other.
//!
//! ```
//! use stapes_core::stage::{FrameStage, Then};
//! /// Doubles each value in place.
//! struct Double;
//! impl FrameStage<i32> for Double {
//!     type Out = i32;
//!     fn process<'a>(&'a mut self, input: &'a mut [i32]) -> &'a mut [i32] {
//!         input.iter_mut().for_each(|v| *v *= 2);
//!         input
//!     }
//! }
//! /// Narrows to `i8` into a buffer of its own (up to 4 values).
//! struct Narrow([i8; 4]);
//! impl FrameStage<i32> for Narrow {
//!     type Out = i8;
//!     fn process<'a>(&'a mut self, input: &'a mut [i32]) -> &'a mut [i8] {
//!         let n = input.len().min(4);
//!         for (o, &v) in self.0.iter_mut().zip(&input[..n]) {
//!             *o = v.clamp(-128, 127) as i8;
//!         }
//!         &mut self.0[..n]
//!     }
//! }
//! let mut chain = Then(Double, Then(Double, Narrow([0; 4])));
//! assert_eq!(chain.process(&mut [1, 2, 40]), &[4, 8, 127]);
//! ```

/// One per-frame stage: reads a frame's values, writes its own.
pub trait FrameStage<In: Copy> {
    /// The values this stage hands on.
    type Out: Copy;

    /// Processes one frame (`input` holds one value per band, or whatever
    /// the previous stage handed on; the stage may overwrite it) and returns
    /// this stage's values.
    fn process<'a>(&'a mut self, input: &'a mut [In]) -> &'a mut [Self::Out];

    /// Forgets the state carried from frame to frame, if any.
    fn reset(&mut self) {}
}

/// The stage `A`, then the stage `B` on `A`'s output.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Then<A, B>(pub A, pub B);

impl<In: Copy, A: FrameStage<In>, B: FrameStage<A::Out>> FrameStage<In> for Then<A, B> {
    type Out = B::Out;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [In]) -> &'a mut [B::Out] {
        let middle = self.0.process(input);
        self.1.process(middle)
    }

    fn reset(&mut self) {
        self.0.reset();
        self.1.reset();
    }
}

/// No stage: the values as they come (for example the filterbank's linear
/// energies, when a model reads them, or a host tool wants them).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Unchanged;

impl<T: Copy> FrameStage<T> for Unchanged {
    type Out = T;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [T]) -> &'a mut [T] {
        input
    }
}
