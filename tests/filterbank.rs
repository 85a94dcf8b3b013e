//! The generated filterbank against the reference's independent dense matrix,
//! the compact form against the sparse one, and where a tone lands.

use stapes_core::config::{BandGain, FeatureConfig, MelScale, SpectrumKind};
use stapes_core::presets::{SPEECH16K_40, TINY16K_10};
use stapes_core::table::FilterbankForm;
use stapes_sim::generate::GeneratedTables;
use stapes_sim::reference::reference_matrix;
use stapes_sim::run::{Samples, run_float};

fn configs() -> Vec<(String, FeatureConfig)> {
    let mut v: Vec<(String, FeatureConfig)> = stapes_tests::all_presets()
        .into_iter()
        .map(|(n, c)| (n.to_string(), c))
        .collect();
    v.push((
        "slaney".into(),
        FeatureConfig {
            mel_scale: MelScale::Slaney,
            bands: 64,
            fft_points: 1024,
            ..SPEECH16K_40
        },
    ));
    v.push((
        "equal-area".into(),
        FeatureConfig {
            band_gain: BandGain::EqualArea,
            ..SPEECH16K_40
        },
    ));
    v.push((
        "magnitude".into(),
        FeatureConfig {
            spectrum: SpectrumKind::Magnitude,
            low_edge_hz: 125.0,
            high_edge_hz: 7600.0,
            ..TINY16K_10
        },
    ));
    v
}

/// The sparse design expanded to a dense matrix, gains included.
fn dense_from_design(t: &GeneratedTables) -> Vec<f64> {
    let bins = t.config.spectrum_bins();
    let mut m = vec![0.0; t.config.bands as usize * bins];
    for (b, band) in t.design.bands.iter().enumerate() {
        let g = t.design.gains.as_ref().map_or(1.0, |g| g[b]);
        for (j, w) in band.weights.iter().enumerate() {
            m[b * bins + band.first_bin + j] = g * w;
        }
    }
    m
}

#[test]
fn generator_matches_the_independent_reference_matrix() {
    for (name, c) in configs() {
        c.validate().unwrap();
        let t = GeneratedTables::new(&c);
        let ours = dense_from_design(&t);
        let theirs = reference_matrix(&c);
        let scale = theirs.iter().copied().fold(0.0, f64::max);
        let worst = ours
            .iter()
            .zip(&theirs)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        assert!(worst <= 1e-12 * scale, "{name}: worst difference {worst}");
    }
}

#[test]
fn compact_form_equals_sparse_form() {
    for (name, c) in configs() {
        let t = GeneratedTables::new(&c);
        let Some(compact) = &t.design.compact else {
            continue;
        };
        let bins = c.spectrum_bins();
        let n = c.bands as usize;
        let mut m = vec![0.0; n * bins];
        let starts = &compact.segment_starts;
        for s in 0..=n {
            for k in starts[s]..starts[s + 1] {
                let w = compact.weights[k - starts[0]];
                if s < n {
                    m[s * bins + k] += w;
                }
                if s > 0 {
                    m[(s - 1) * bins + k] += 1.0 - w;
                }
            }
        }
        let sparse = dense_from_design(&GeneratedTables {
            design: stapes_sim::design::Design {
                gains: None,
                ..t.design.clone()
            },
            ..t.clone()
        });
        let worst = m
            .iter()
            .zip(&sparse)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        assert!(
            worst < 1e-12,
            "{name}: compact differs from sparse by {worst}"
        );
    }
}

#[test]
fn q15_weights_keep_each_band_gain() {
    // Largest-remainder rounding keeps each sparse band's sum within half an LSB
    // of the design, and each weight within one LSB (common practice for
    // sum-preserving quantisation).
    for (name, c) in configs() {
        let t = GeneratedTables::new(&c);
        let mut offset = 0;
        for (b, band) in t.design.bands.iter().enumerate() {
            let q = &t.sparse_q15[offset..offset + band.weights.len()];
            offset += band.weights.len();
            let designed: f64 = band.weights.iter().sum::<f64>() * 32768.0;
            let got: i64 = q.iter().map(|&v| v as i64).sum();
            assert!(
                (got as f64 - designed).abs() <= 0.5 + 1e-9,
                "{name} band {b}: {got} vs {designed}"
            );
            for (&qv, &w) in q.iter().zip(&band.weights) {
                assert!(
                    (qv as f64 - w * 32768.0).abs() <= 1.0 + 1e-9,
                    "{name} band {b}"
                );
            }
        }
        assert!(
            t.quantisation.sparse_q15_weight <= 1.0 / 32768.0 + 1e-12,
            "{name}"
        );
    }
}

#[test]
fn a_tone_lands_in_the_band_whose_centre_is_nearest() {
    // Common practice: a peak-one triangle filterbank puts a pure tone in the
    // band whose centre is nearest (crossovers sit halfway between centres).
    // Only bands at least two bins from both neighbours are tried, so the
    // window's main lobe (±2 bins for Hann) does not straddle several bands.
    for (name, c) in stapes_tests::all_presets() {
        let t = GeneratedTables::new(&c);
        let centres = &t.design.centres_hz;
        let bin_hz = c.sample_rate_hz as f64 / c.fft_points as f64;
        let mut tried = 0;
        for b in 1..centres.len() - 1 {
            let (lo_gap, hi_gap) = (centres[b] - centres[b - 1], centres[b + 1] - centres[b]);
            if lo_gap < 2.0 * bin_hz || hi_gap < 2.0 * bin_hz {
                continue;
            }
            for offset in [-0.2 * lo_gap, 0.0, 0.2 * hi_gap] {
                let f = centres[b] + offset;
                let len = c.window_samples as usize * 4;
                let tone: Vec<f32> = (0..len)
                    .map(|i| {
                        (0.5 * (2.0 * std::f64::consts::PI * f * i as f64
                            / c.sample_rate_hz as f64)
                            .sin()) as f32
                    })
                    .collect();
                let frames = run_float(
                    &c,
                    t.view_f32(FilterbankForm::Sparse),
                    &Samples::F32(tone),
                    1000,
                )
                .unwrap();
                let frame = &frames[frames.len() / 2];
                let loudest = (0..frame.len())
                    .max_by(|&i, &j| frame[i].total_cmp(&frame[j]))
                    .unwrap();
                assert_eq!(
                    loudest, b,
                    "{name}: tone at {f:.1} Hz landed in band {loudest}, nearest centre is band {b}"
                );
                tried += 1;
            }
        }
        assert!(tried >= 15, "{name}: only {tried} tones tried");
    }
}
