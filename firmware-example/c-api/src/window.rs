//! The model's window of frames in caller-owned storage: the last `frames`
//! frames, oldest first, as one contiguous block, handed out every `stride`
//! frames once full. The same ring written twice as the core's
//! `FrameWindow` (frame `k` goes to rows `k mod F` and `k mod F + F`), with
//! its sizes chosen at run time and its rows as bytes, so it holds any
//! stage's values.

use crate::status::*;

/// A window of frames over caller storage (fields are private: use the
/// `stapes_window_*` functions).
#[repr(C)]
pub struct stapes_window {
    storage: *mut u8,
    storage_bytes: usize,
    frames: u32,
    stride: u32,
    /// Bytes per frame, fixed by the first push (0 before it).
    frame_bytes: u32,
    values_per_frame: u32,
    value_type: i32,
    next: u32,
    pushed: u64,
}

/// The window a push handed out.
#[repr(C)]
pub struct stapes_window_view {
    /// `frames × values_per_frame` values of `value_type`, oldest frame first.
    pub values: *const core::ffi::c_void,
    /// Frames in the window.
    pub frames: u32,
    /// Values per frame.
    pub values_per_frame: u32,
    /// A `STAPES_VALUE_*` code.
    pub value_type: i32,
}

/// Bytes of one value of a `STAPES_VALUE_*` type.
pub fn value_bytes(value_type: i32) -> u32 {
    match value_type {
        STAPES_VALUE_INT8 | STAPES_VALUE_UINT8 => 1,
        STAPES_VALUE_Q8_8 => 2,
        _ => 4,
    }
}

impl stapes_window {
    pub(crate) fn init(&mut self, storage: *mut u8, bytes: usize, frames: u32, stride: u32) -> i32 {
        if frames == 0 {
            return STAPES_ERROR_WINDOW_FRAMES;
        }
        *self = stapes_window {
            storage,
            storage_bytes: bytes,
            frames,
            stride: stride.max(1),
            frame_bytes: 0,
            values_per_frame: 0,
            value_type: 0,
            next: 0,
            pushed: 0,
        };
        STAPES_OK
    }

    pub(crate) fn reset(&mut self) {
        self.next = 0;
        self.pushed = 0;
        self.frame_bytes = 0;
    }

    /// Adds a frame of `count` values of `value_type` at `values`.
    ///
    /// # Safety
    /// `values` points to `count` values of that type; the storage given to
    /// `init` is valid for its stated bytes.
    pub(crate) unsafe fn push(
        &mut self,
        values: *const u8,
        count: u32,
        value_type: i32,
        view: &mut stapes_window_view,
    ) -> i32 {
        let frame_bytes = count.saturating_mul(value_bytes(value_type));
        if self.frame_bytes == 0 {
            let needed = 2u64 * self.frames as u64 * frame_bytes as u64;
            if needed > self.storage_bytes as u64 || frame_bytes == 0 {
                return STAPES_ERROR_WINDOW_STORAGE;
            }
            self.frame_bytes = frame_bytes;
            self.values_per_frame = count;
            self.value_type = value_type;
        } else if frame_bytes != self.frame_bytes || value_type != self.value_type {
            return STAPES_ERROR_WINDOW_FRAME;
        }
        let fb = frame_bytes as usize;
        let rows = self.frames as usize;
        let at = self.next as usize;
        // SAFETY: `at < rows`, and the storage holds `2 · rows · fb` bytes
        // (checked at the first push); `values` holds `fb` bytes.
        unsafe {
            core::ptr::copy_nonoverlapping(values, self.storage.add(at * fb), fb);
            core::ptr::copy_nonoverlapping(values, self.storage.add((at + rows) * fb), fb);
        }
        self.next = if self.next + 1 == self.frames {
            0
        } else {
            self.next + 1
        };
        self.pushed = self.pushed.saturating_add(1);
        let Some(since_full) = self.pushed.checked_sub(self.frames as u64) else {
            return STAPES_OK;
        };
        if since_full % self.stride as u64 != 0 {
            return STAPES_OK;
        }
        *view = stapes_window_view {
            // SAFETY: `next < rows`: rows `[next, next + rows)` lie in the storage.
            values: unsafe { self.storage.add(self.next as usize * fb) }.cast(),
            frames: self.frames,
            values_per_frame: self.values_per_frame,
            value_type: self.value_type,
        };
        STAPES_WINDOW_READY
    }
}
