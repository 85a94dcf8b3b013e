//! The model's input window: the last `F` frames of `C` values, always
//! readable as one contiguous `[F × C]` slice, oldest frame first.
//!
//! A keyword model reads a window of frames (for example 49 frames × 10
//! MFCC: Zhang et al., "Hello Edge: Keyword Spotting on Microcontrollers",
//! 2017), not one frame. The window is a ring written twice: frame `k` goes
//! to rows `k mod F` and `k mod F + F` of `2·F` rows, so rows
//! `[next, next + F)` always hold the last `F` frames in time order. Each
//! push copies `2·C` values (O(C), no shifting), and reading never copies.
//!
//! ```
//! use stapes_core::frame_window::FrameWindow;
//! // 3 frames of 2 values, the model run on every second frame.
//! let mut w = FrameWindow::<i8, 3, 2>::new(2);
//! assert!(w.push(&[1, 1]).is_none()); // not ready: 1 frame
//! assert!(w.push(&[2, 2]).is_none()); // not ready: 2 frames
//! assert_eq!(w.push(&[3, 3]), Some(&[1, 1, 2, 2, 3, 3][..])); // ready
//! assert!(w.push(&[4, 4]).is_none()); // ready, but between strides
//! assert_eq!(w.push(&[5, 5]), Some(&[3, 3, 4, 4, 5, 5][..]));
//! assert_eq!(w.window(), Some(&[3, 3, 4, 4, 5, 5][..]));
//! ```

/// The last `F` frames of `C` values of type `T` (`2·F·C` values of RAM).
#[derive(Clone, Debug)]
pub struct FrameWindow<T, const F: usize, const C: usize> {
    /// Two copies of the ring, back to back.
    rows: [[[T; C]; F]; 2],
    /// The row the next frame goes to (`0 .. F`).
    next: usize,
    /// Frames pushed since the start, saturating.
    pushed: u64,
    /// The model runs every `stride` frames once the window is full.
    stride: u32,
}

impl<T: Copy + Default, const F: usize, const C: usize> FrameWindow<T, F, C> {
    /// An empty window whose [`FrameWindow::push`] hands out the window every
    /// `stride` frames once `F` frames exist (a stride of 0 counts as 1).
    pub fn new(stride: u32) -> Self {
        FrameWindow {
            rows: [[[T::default(); C]; F]; 2],
            next: 0,
            pushed: 0,
            stride: stride.max(1),
        }
    }

    /// Forgets every frame.
    pub fn reset(&mut self) {
        self.next = 0;
        self.pushed = 0;
    }

    /// Frames pushed since the start (or the last reset).
    pub fn frames_pushed(&self) -> u64 {
        self.pushed
    }

    /// Whether `F` frames exist, so that [`FrameWindow::window`] is complete.
    pub fn ready(&self) -> bool {
        F > 0 && self.pushed >= F as u64
    }

    /// Adds a frame: its first `C` values (missing values are taken as
    /// `T::default()`). Returns the window when it is ready and the push
    /// falls on the stride: pushes `F`, `F + stride`, `F + 2·stride`, …
    #[inline]
    pub fn push(&mut self, frame: &[T]) -> Option<&[T]> {
        if F == 0 {
            return None;
        }
        let mut row = [T::default(); C];
        for (slot, &v) in row.iter_mut().zip(frame) {
            *slot = v;
        }
        self.rows[0][self.next] = row;
        self.rows[1][self.next] = row;
        self.next = if self.next + 1 == F { 0 } else { self.next + 1 };
        self.pushed = self.pushed.saturating_add(1);
        let since_full = self.pushed.checked_sub(F as u64)?;
        if since_full % self.stride as u64 == 0 {
            self.window()
        } else {
            None
        }
    }

    /// The last `F` frames, oldest first, as one `[F × C]` slice (frame `i`
    /// at `[i·C, (i + 1)·C)`); `None` until `F` frames exist.
    #[inline]
    pub fn window(&self) -> Option<&[T]> {
        if !self.ready() {
            return None;
        }
        let rows = self.rows.as_flattened();
        Some(rows[self.next..self.next + F].as_flattened())
    }
}
