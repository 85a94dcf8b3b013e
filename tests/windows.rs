//! Window properties against Harris, "On the use of windows for harmonic
//! analysis with the discrete Fourier transform", Proc. IEEE 66(1), 1978,
//! Table 1: Hann coherent gain 0.50, ENBW 1.50 bins, highest side lobe
//! −31.5 dB; Hamming 0.54, 1.36 bins, −43 dB. Checked for the generator's
//! f64 design, its f32 table and the reference's own window.

use rustfft::FftPlanner;
use rustfft::num_complex::Complex64;
use stapes_core::config::WindowShape;
use stapes_sim::design::window;
use stapes_sim::reference::reference_window;

fn coherent_gain(w: &[f64]) -> f64 {
    w.iter().sum::<f64>() / w.len() as f64
}

fn enbw_bins(w: &[f64]) -> f64 {
    let s1: f64 = w.iter().sum();
    let s2: f64 = w.iter().map(|v| v * v).sum();
    w.len() as f64 * s2 / (s1 * s1)
}

/// Highest side lobe in dB relative to the main lobe, from a 64× zero-padded DFT.
fn highest_side_lobe_db(w: &[f64]) -> f64 {
    let n = w.len() * 64;
    let mut buf: Vec<Complex64> = (0..n)
        .map(|i| Complex64::new(w.get(i).copied().unwrap_or(0.0), 0.0))
        .collect();
    FftPlanner::new().plan_fft_forward(n).process(&mut buf);
    let mag: Vec<f64> = buf[..n / 2].iter().map(|z| z.norm()).collect();
    let edge = (1..mag.len() - 1)
        .find(|&k| mag[k] <= mag[k - 1] && mag[k] <= mag[k + 1])
        .expect("main lobe edge");
    let side = mag[edge..].iter().copied().fold(0.0, f64::max);
    20.0 * (side / mag[0]).log10()
}

/// The windows to check, each with the rounding its storage allows.
fn windows_of(shape: WindowShape, len: usize) -> Vec<(&'static str, Vec<f64>, f64)> {
    let design = window(shape, len);
    let table: Vec<f64> = design.iter().map(|&v| v as f32 as f64).collect();
    // f32 storage rounds each coefficient by up to 2^-24 relative.
    vec![
        ("design", design, 1e-12),
        ("f32 table", table, 1e-7),
        ("reference", reference_window(shape, len), 1e-12),
    ]
}

// Harris's gains are those of the periodic (DFT-even) window; the symmetric
// form of length N sums to N·a0 − (1 − a0), a finite-length offset of
// (1 − a0)/N in coherent gain that the checks below allow for exactly.

#[test]
fn hann_matches_harris_1978() {
    for (shape, offset) in [
        (WindowShape::HannPeriodic, 0.0),
        (WindowShape::Hann, 0.5 / 512.0),
    ] {
        for (who, w, storage) in windows_of(shape, 512) {
            let cg = coherent_gain(&w);
            assert!(
                (cg - (0.50 - offset)).abs() < storage,
                "{who} {shape:?}: CG {cg}"
            );
            assert!(
                (enbw_bins(&w) - 1.50).abs() < 5e-3,
                "{who} {shape:?}: ENBW {}",
                enbw_bins(&w)
            );
            let sl = highest_side_lobe_db(&w);
            assert!(
                (sl - -31.5).abs() < 0.3,
                "{who} {shape:?}: side lobe {sl} dB"
            );
        }
    }
}

#[test]
fn hamming_matches_harris_1978() {
    for (shape, offset) in [
        (WindowShape::HammingPeriodic, 0.0),
        (WindowShape::Hamming, 0.46 / 200.0),
    ] {
        for (who, w, storage) in windows_of(shape, 200) {
            let cg = coherent_gain(&w);
            assert!(
                (cg - (0.54 - offset)).abs() < storage,
                "{who} {shape:?}: CG {cg}"
            );
            assert!(
                (enbw_bins(&w) - 1.36).abs() < 0.01,
                "{who} {shape:?}: ENBW {}",
                enbw_bins(&w)
            );
            let sl = highest_side_lobe_db(&w);
            // Harris rounds to −43 dB; the exact 0.54/0.46 window peaks at ≈ −42.7 dB.
            assert!(
                (sl - -43.0).abs() < 0.7,
                "{who} {shape:?}: side lobe {sl} dB"
            );
        }
    }
}

#[test]
fn q15_window_is_the_rounded_design() {
    // Q15 rounding error is at most half an LSB (common practice), except the
    // clamp of an exact 1.0 to 32767/32768.
    for (name, c) in stapes_tests::all_presets() {
        let t = stapes_sim::generate::GeneratedTables::new(&c);
        for (&q, &d) in t.window_q15.iter().zip(&t.design.window) {
            let err = (q as f64 / 32768.0 - d).abs();
            assert!(
                err <= 0.5 / 32768.0 + 1e-12 || (d == 1.0 && q == 32767),
                "{name}: {q} vs {d}"
            );
        }
    }
}
