//! Mel filterbank accumulation from a table view: `E[b] = Σ w·S` over each
//! band's bins, then the optional per-band gain.

use crate::table::Filterbank;

/// Accumulates `spectrum` (`N/2 + 1` values) into `out` (one per band) with an
/// `f32` filterbank that [`TableView::check`](crate::table::TableView::check)
/// accepted for this configuration.
#[inline]
pub fn accumulate_f32(filterbank: &Filterbank<'_, f32>, spectrum: &[f32], out: &mut [f32]) {
    match *filterbank {
        Filterbank::Sparse { spans, weights } => {
            let mut offset = 0usize;
            for (energy, &[first, count]) in out.iter_mut().zip(spans) {
                let (first, count) = (first as usize, count as usize);
                let w = &weights[offset..offset + count];
                let s = &spectrum[first..first + count];
                *energy = dot(w, s);
                offset += count;
            }
        }
        Filterbank::Compact {
            segment_starts,
            weights,
        } => {
            let base = segment_starts[0] as usize;
            let bands = out.len();
            out.fill(0.0);
            for seg in 0..=bands {
                let lo = segment_starts[seg] as usize;
                let hi = segment_starts[seg + 1] as usize;
                let w = &weights[lo - base..hi - base];
                let s = &spectrum[lo..hi];
                let (mut rising, mut falling) = (0.0f32, 0.0f32);
                for (&w, &s) in w.iter().zip(s) {
                    let part = w * s;
                    rising += part;
                    falling += s - part;
                }
                if seg < bands {
                    out[seg] += rising;
                }
                if seg > 0 {
                    out[seg - 1] += falling;
                }
            }
        }
    }
}

/// `Σ w[i]·s[i]`, summed strictly left to right (four products per turn, so
/// the loop costs less without changing a single rounding).
#[inline]
fn dot(w: &[f32], s: &[f32]) -> f32 {
    let mut acc = 0.0f32;
    let (mut wq, mut sq) = (w.chunks_exact(4), s.chunks_exact(4));
    for (a, b) in (&mut wq).zip(&mut sq) {
        acc += a[0] * b[0];
        acc += a[1] * b[1];
        acc += a[2] * b[2];
        acc += a[3] * b[3];
    }
    for (&a, &b) in wq.remainder().iter().zip(sq.remainder()) {
        acc += a * b;
    }
    acc
}

/// Multiplies each band energy by its gain.
#[inline]
pub fn apply_gains_f32(gains: &[f32], out: &mut [f32]) {
    for (e, &g) in out.iter_mut().zip(gains) {
        *e *= g;
    }
}
