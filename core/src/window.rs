//! Windowing: the window multiplies the `window_samples` frame, and the rest
//! of the FFT buffer (when the FFT is longer) is zero-filled.

/// Applies `window` to the first `window.len()` elements of `buf` and zeroes the rest.
#[inline]
pub fn apply_f32(buf: &mut [f32], window: &[f32]) {
    let (frame, padding) = buf.split_at_mut(window.len().min(buf.len()));
    for (x, &w) in frame.iter_mut().zip(window) {
        *x *= w;
    }
    padding.fill(0.0);
}
