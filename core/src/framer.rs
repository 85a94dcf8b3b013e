//! Streaming frame assembly.
//!
//! Frame `i` covers stream samples `[i·hop, i·hop + window)`. A frame is
//! emitted only when complete: no padding at the start or the end of the
//! stream. Samples may arrive in chunks of any size (1 sample, an odd DMA
//! half-buffer, a whole second); the frames are the same as for the whole
//! buffer at once.
//!
//! The frame is assembled directly in the FFT buffer. When it is complete, the
//! `window - hop` samples the next frame shares are saved to a small overlap
//! store, the buffer is transformed in place, and the overlap is put back. RAM
//! is `FRAME + OVERLAP` elements, not a separate history ring plus FFT buffer.

// Both buffers lie on a 4-byte boundary: the integer FFT reads pairs of
// 16-bit values as words, and the block copy moves whole words.
use crate::table::WordAligned;

/// Frame assembly over an FFT-sized buffer of `T`, with the shared samples
/// kept as `O` between frames (the fixed path keeps raw `i16` samples there
/// even when its FFT works in `i32`).
#[derive(Clone, Debug)]
pub struct Framer<T, O, const FRAME: usize, const OVERLAP: usize> {
    frame: WordAligned<[T; FRAME]>,
    overlap: WordAligned<[O; OVERLAP]>,
    fill: usize,
    window: usize,
    hop: usize,
}

impl<T: Copy + Default, O: Copy + Default, const FRAME: usize, const OVERLAP: usize>
    Framer<T, O, FRAME, OVERLAP>
{
    /// A framer for `window` samples per frame and `hop` between frames.
    /// The caller guarantees `1 <= hop <= window <= FRAME` and
    /// `window - hop <= OVERLAP` (the front ends check this once).
    pub fn new(window: usize, hop: usize) -> Self {
        Framer {
            frame: WordAligned([T::default(); FRAME]),
            overlap: WordAligned([O::default(); OVERLAP]),
            fill: 0,
            window,
            hop,
        }
    }

    /// Forgets all samples.
    pub fn reset(&mut self) {
        self.fill = 0;
    }

    /// Moves samples from the front of `input` into the frame, converting each
    /// with `convert`, until the frame is complete or `input` is empty.
    /// Returns `true` when the frame is complete.
    #[inline]
    pub fn fill_from<S: Copy>(
        &mut self,
        input: &mut &[S],
        mut convert: impl FnMut(S) -> T,
    ) -> bool {
        let want = self.window - self.fill;
        let take = want.min(input.len());
        let (now, rest) = input.split_at(take);
        for (slot, &s) in self.frame.0[self.fill..self.fill + take]
            .iter_mut()
            .zip(now)
        {
            *slot = convert(s);
        }
        self.fill += take;
        *input = rest;
        self.fill == self.window
    }

    /// [`Framer::fill_from`] a block at a time: `convert(src, dst)` fills
    /// `dst` (the frame's next free slots) from `src` (as many samples from
    /// the front of `input`).
    #[inline]
    pub fn fill_block_from<S: Copy>(
        &mut self,
        input: &mut &[S],
        convert: impl FnOnce(&[S], &mut [T]),
    ) -> bool {
        let want = self.window - self.fill;
        let take = want.min(input.len());
        let (now, rest) = input.split_at(take);
        convert(now, &mut self.frame.0[self.fill..self.fill + take]);
        self.fill += take;
        *input = rest;
        self.fill == self.window
    }

    /// The whole buffer, for in-place processing of a complete frame. Call
    /// [`Framer::begin_frame`] before changing it and [`Framer::end_frame`] after.
    #[inline]
    pub fn buffer_mut(&mut self) -> &mut [T; FRAME] {
        &mut self.frame.0
    }

    /// Saves the samples the next frame shares, converted by `store`.
    #[inline]
    pub fn begin_frame(&mut self, store: impl Fn(T) -> O) {
        let keep = self.window - self.hop;
        for (o, &v) in self.overlap.0[..keep]
            .iter_mut()
            .zip(&self.frame.0[self.hop..self.window])
        {
            *o = store(v);
        }
    }

    /// Restores the shared samples at the start of the buffer, converted by `load`.
    #[inline]
    pub fn end_frame(&mut self, load: impl Fn(O) -> T) {
        let keep = self.window - self.hop;
        for (v, &o) in self.frame.0[..keep].iter_mut().zip(&self.overlap.0[..keep]) {
            *v = load(o);
        }
        self.fill = keep;
    }
}

impl<T: Copy + Default, const FRAME: usize, const OVERLAP: usize> Framer<T, T, FRAME, OVERLAP> {
    /// [`Framer::begin_frame`] when the shared samples are kept as they are:
    /// a block copy ([`crate::block_copy`]).
    #[inline]
    pub fn begin_frame_unconverted(&mut self) {
        let keep = self.window - self.hop;
        crate::block_copy::copy(
            &mut self.overlap.0[..keep],
            &self.frame.0[self.hop..self.window],
        );
    }

    /// The frame buffer, the hop, and the overlap store's first
    /// `window - hop` slots, for a stage that saves the shared samples
    /// (`frame[hop..window]`) itself in place of
    /// [`Framer::begin_frame_unconverted`].
    #[inline]
    pub fn frame_and_overlap_mut(&mut self) -> (&mut [T; FRAME], usize, &mut [T]) {
        let keep = self.window - self.hop;
        (&mut self.frame.0, self.hop, &mut self.overlap.0[..keep])
    }

    /// [`Framer::end_frame`] when the shared samples are kept as they are.
    #[inline]
    pub fn end_frame_unconverted(&mut self) {
        let keep = self.window - self.hop;
        crate::block_copy::copy(&mut self.frame.0[..keep], &self.overlap.0[..keep]);
        self.fill = keep;
    }
}
