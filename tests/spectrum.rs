//! The core's f32 real FFT and spectrum against rustfft in f64 (a
//! general-purpose reference library), and Parseval's theorem.

use rustfft::FftPlanner;
use rustfft::num_complex::Complex64;
use stapes_core::config::SpectrumKind;
use stapes_core::fft::{COMPILED_FFT_SIZES, real_fft_in_place};
use stapes_core::spectrum::spectrum_in_place;
use stapes_tests::{noise, rng};

fn reference_dft(x: &[f64]) -> Vec<Complex64> {
    let mut buf: Vec<Complex64> = x.iter().map(|&v| Complex64::new(v, 0.0)).collect();
    FftPlanner::new()
        .plan_fft_forward(x.len())
        .process(&mut buf);
    buf
}

#[test]
fn every_compiled_size_matches_rustfft() {
    assert_eq!(
        COMPILED_FFT_SIZES,
        &[16, 32, 64, 128, 256, 512, 1024, 2048, 4096]
    );
    let mut r = rng(1);
    for &n in COMPILED_FFT_SIZES {
        for _ in 0..5 {
            let x = noise(&mut r, n, 1.0);
            let mut buf: Vec<f32> = x.iter().map(|&v| v as f32).collect();
            let xf: Vec<f64> = buf.iter().map(|&v| v as f64).collect();
            let want = reference_dft(&xf);
            assert!(real_fft_in_place(&mut buf));
            let scale = want.iter().map(|z| z.norm()).fold(0.0, f64::max);
            // Packed layout: buf[0] = DC, buf[1] = Nyquist, then re/im pairs.
            let mut worst = (buf[0] as f64 - want[0].re)
                .abs()
                .max((buf[1] as f64 - want[n / 2].re).abs());
            for k in 1..n / 2 {
                let got = Complex64::new(buf[2 * k] as f64, buf[2 * k + 1] as f64);
                worst = worst.max((got - want[k]).norm());
            }
            // f32 radix-2: error grows like ε·log2(N); 1e-5 of the peak bin is ample.
            assert!(
                worst / scale < 1e-5,
                "N = {n}: relative error {}",
                worst / scale
            );
        }
    }
}

#[test]
fn power_and_magnitude_match_rustfft() {
    let mut r = rng(2);
    for &n in &[256usize, 512] {
        let x = noise(&mut r, n, 0.5);
        let xf: Vec<f64> = x.iter().map(|&v| v as f32 as f64).collect();
        let want = reference_dft(&xf);
        for kind in [SpectrumKind::Power, SpectrumKind::Magnitude] {
            let mut buf: Vec<f32> = xf.iter().map(|&v| v as f32).collect();
            real_fft_in_place(&mut buf);
            let got = spectrum_in_place(&mut buf, kind).to_vec();
            assert_eq!(got.len(), n / 2 + 1);
            let expect: Vec<f64> = want[..=n / 2]
                .iter()
                .map(|z| {
                    if kind == SpectrumKind::Power {
                        z.norm_sqr()
                    } else {
                        z.norm()
                    }
                })
                .collect();
            let scale = expect.iter().copied().fold(0.0, f64::max);
            for (k, (&g, &e)) in got.iter().zip(&expect).enumerate() {
                assert!(
                    (g as f64 - e).abs() / scale < 2e-5,
                    "N = {n} {kind:?} bin {k}: {g} vs {e}"
                );
            }
        }
    }
}

#[test]
fn parseval_holds_for_the_power_spectrum() {
    // Parseval's theorem for the DFT without 1/N: Σ|X[k]|² over all N bins =
    // N·Σx[n]²; with the one-sided spectrum, bins 1..N/2-1 count twice.
    let mut r = rng(3);
    for &n in COMPILED_FFT_SIZES {
        let x = noise(&mut r, n, 0.7);
        let mut buf: Vec<f32> = x.iter().map(|&v| v as f32).collect();
        let energy: f64 = buf.iter().map(|&v| (v as f64).powi(2)).sum::<f64>() * n as f64;
        real_fft_in_place(&mut buf);
        let p = spectrum_in_place(&mut buf, SpectrumKind::Power);
        let total: f64 = p[0] as f64
            + p[n / 2] as f64
            + 2.0 * p[1..n / 2].iter().map(|&v| v as f64).sum::<f64>();
        assert!(
            (total - energy).abs() / energy < 1e-5,
            "N = {n}: {total} vs {energy}"
        );
    }
}
