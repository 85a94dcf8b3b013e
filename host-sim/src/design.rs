//! `f64` design of a front end's tables, before quantisation: window,
//! peak-one triangle shapes per band (sparse), the compact rising-side weights,
//! and per-band gains.

use std::f64::consts::PI;

use stapes_core::config::{BandGain, FeatureConfig, TrianglePlacement, WindowShape};
use stapes_core::scale;

/// One band's non-zero weights.
#[derive(Debug, Clone, PartialEq)]
pub struct BandShape {
    /// First bin with a non-zero weight.
    pub first_bin: usize,
    /// Weights of bins `first_bin ..`.
    pub weights: Vec<f64>,
}

/// The compact form: segment starts and one rising-side weight per bin.
#[derive(Debug, Clone, PartialEq)]
pub struct CompactShape {
    /// `bands + 2` bin indices.
    pub segment_starts: Vec<usize>,
    /// One weight per bin from `segment_starts[0]`.
    pub weights: Vec<f64>,
}

/// The designed tables in `f64`.
#[derive(Debug, Clone)]
pub struct Design {
    /// The configuration designed for.
    pub config: FeatureConfig,
    /// Window coefficients.
    pub window: Vec<f64>,
    /// Band centre frequencies in Hz.
    pub centres_hz: Vec<f64>,
    /// Peak-one shapes, one per band.
    pub bands: Vec<BandShape>,
    /// The compact form, when the placement allows it.
    pub compact: Option<CompactShape>,
    /// Linear per-band gains for equal-area bands.
    pub gains: Option<Vec<f64>>,
}

/// Window coefficients of `shape` for `len` samples.
pub fn window(shape: WindowShape, len: usize) -> Vec<f64> {
    let cosine = |a0: f64, denom: f64| -> Vec<f64> {
        (0..len)
            .map(|n| a0 - (1.0 - a0) * (2.0 * PI * n as f64 / denom).cos())
            .collect()
    };
    match shape {
        WindowShape::Hann => cosine(0.5, (len - 1) as f64),
        WindowShape::HannPeriodic => cosine(0.5, len as f64),
        WindowShape::Hamming => cosine(0.54, (len - 1) as f64),
        WindowShape::HammingPeriodic => cosine(0.54, len as f64),
        WindowShape::Rectangular => vec![1.0; len],
    }
}

/// Designs the tables for a validated configuration.
pub fn design(config: &FeatureConfig) -> Design {
    let window = window(config.window, config.window_samples as usize);
    match config.triangles {
        TrianglePlacement::ExactFrequency => exact(config, window),
        TrianglePlacement::RoundedCentreBins => rounded(config, window),
    }
}

fn exact(config: &FeatureConfig, window: Vec<f64>) -> Design {
    let n_bands = config.bands as usize;
    let edges: Vec<f64> = (0..=config.bands + 1)
        .map(|i| scale::band_edge_hz(config, i))
        .collect();
    let bin_hz = config.sample_rate_hz as f64 / config.fft_points as f64;
    let bins = config.spectrum_bins();
    let freq = |k: usize| k as f64 * bin_hz;
    let bands = (0..n_bands)
        .map(|b| {
            let (lo, mid, hi) = (edges[b], edges[b + 1], edges[b + 2]);
            let weight = |f: f64| {
                let rising = (f - lo) / (mid - lo);
                let falling = (hi - f) / (hi - mid);
                rising.min(falling).max(0.0)
            };
            let nonzero: Vec<usize> = (0..bins).filter(|&k| weight(freq(k)) > 0.0).collect();
            let first_bin = nonzero[0];
            let last = *nonzero.last().expect("validated: every band holds a bin");
            BandShape {
                first_bin,
                weights: (first_bin..=last).map(|k| weight(freq(k))).collect(),
            }
        })
        .collect();
    // Segment s holds bins with edges[s] <= f < edges[s + 1]; its weight is the
    // rising side of band s, and 1 - weight the falling side of band s - 1.
    let segment_of = |f: f64| edges.iter().rposition(|&e| e <= f);
    let in_range: Vec<usize> = (0..bins)
        .filter(|&k| freq(k) >= edges[0] && freq(k) < edges[n_bands + 1])
        .collect();
    let mut segment_starts = Vec::with_capacity(n_bands + 2);
    let first = in_range[0];
    let end = in_range.last().map_or(first, |&k| k + 1);
    for s in 0..=n_bands + 1 {
        let start = in_range
            .iter()
            .copied()
            .find(|&k| segment_of(freq(k)).unwrap() >= s)
            .unwrap_or(end);
        segment_starts.push(start);
    }
    let compact_weights = (first..end)
        .map(|k| {
            let s = segment_of(freq(k)).unwrap();
            (freq(k) - edges[s]) / (edges[s + 1] - edges[s])
        })
        .collect();
    let gains = (config.band_gain == BandGain::EqualArea).then(|| {
        (0..n_bands)
            .map(|b| 2.0 / (edges[b + 2] - edges[b]))
            .collect()
    });
    Design {
        config: *config,
        window,
        centres_hz: edges[1..=n_bands].to_vec(),
        bands,
        compact: Some(CompactShape {
            segment_starts,
            weights: compact_weights,
        }),
        gains,
    }
}

/// ETSI ES 201 108 §4.2.9 (from memory of the standard's text): centre bins
/// `cbin_i = round(fc_i · N / fs)`; band `k` takes bins `cbin_{k-1} ..= cbin_k`
/// with weight `(i - cbin_{k-1} + 1) / (cbin_k - cbin_{k-1} + 1)` and bins
/// `cbin_k + 1 ..= cbin_{k+1}` with `1 - (i - cbin_k) / (cbin_{k+1} - cbin_k + 1)`.
fn rounded(config: &FeatureConfig, window: Vec<f64>) -> Design {
    let n_bands = config.bands as usize;
    let cbin: Vec<usize> = (0..=config.bands + 1)
        .map(|i| scale::rounded_centre_bin(config, i) as usize)
        .collect();
    let bands = (1..=n_bands)
        .map(|k| {
            let (a, c, d) = (cbin[k - 1], cbin[k], cbin[k + 1]);
            let mut weights = Vec::with_capacity(d - a + 1);
            for i in a..=c {
                weights.push((i - a + 1) as f64 / (c - a + 1) as f64);
            }
            for i in c + 1..=d {
                weights.push(1.0 - (i - c) as f64 / (d - c + 1) as f64);
            }
            BandShape {
                first_bin: a,
                weights,
            }
        })
        .collect();
    let bin_hz = config.sample_rate_hz as f64 / config.fft_points as f64;
    Design {
        config: *config,
        window,
        centres_hz: cbin[1..=n_bands]
            .iter()
            .map(|&b| b as f64 * bin_hz)
            .collect(),
        bands,
        compact: None,
        gains: None,
    }
}
