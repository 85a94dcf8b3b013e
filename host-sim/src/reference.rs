//! The independent `f64` reference.
//!
//! Nothing here is shared with the core path or the table generator except the
//! configuration type: the mel formulas, band edges, window and filterbank are
//! written out again straight from their definitions, the filterbank is a dense
//! `bands × bins` matrix, and the DFT is rustfft's in `f64`.

use std::f64::consts::PI;
use std::sync::Arc;

use rustfft::num_complex::Complex64;
use rustfft::{Fft, FftPlanner};
use stapes_core::config::{
    BandGain, FeatureConfig, LogKind, MelScale, SpectrumKind, TrianglePlacement, WindowShape,
};

/// A reference front end for one configuration.
pub struct Reference {
    config: FeatureConfig,
    window: Vec<f64>,
    /// Row-major `bands × bins`.
    matrix: Vec<f64>,
    fft: Arc<dyn Fft<f64>>,
}

/// Hz to mels, written out independently of the core's scale module.
pub fn to_mel(scale: MelScale, f: f64) -> f64 {
    match scale {
        MelScale::OShaughnessy => 2595.0 * (f / 700.0).ln_1p() / std::f64::consts::LN_10,
        MelScale::Slaney if f < 1000.0 => 3.0 * f / 200.0,
        MelScale::Slaney => 15.0 + 27.0 * (f / 1000.0).ln() / 6.4f64.ln(),
    }
}

/// Mels to Hz, written out independently of the core's scale module.
pub fn from_mel(scale: MelScale, m: f64) -> f64 {
    match scale {
        MelScale::OShaughnessy => 700.0 * (10f64.powf(m / 2595.0) - 1.0),
        MelScale::Slaney if m < 15.0 => 200.0 * m / 3.0,
        MelScale::Slaney => 1000.0 * (6.4f64.ln() * (m - 15.0) / 27.0).exp(),
    }
}

/// The reference window, straight from its formula.
pub fn reference_window(shape: WindowShape, len: usize) -> Vec<f64> {
    (0..len)
        .map(|n| {
            let (a, d) = match shape {
                WindowShape::Hann => (0.5, len - 1),
                WindowShape::HannPeriodic => (0.5, len),
                WindowShape::Hamming => (0.54, len - 1),
                WindowShape::HammingPeriodic => (0.54, len),
                WindowShape::Rectangular => return 1.0,
            };
            a - (1.0 - a) * (2.0 * PI * n as f64 / d as f64).cos()
        })
        .collect()
}

/// The dense `bands × bins` filterbank (gains included), row-major.
pub fn reference_matrix(c: &FeatureConfig) -> Vec<f64> {
    let bins = c.fft_points as usize / 2 + 1;
    let n = c.bands as usize;
    let fs = c.sample_rate_hz as f64;
    let mut m = vec![0.0; n * bins];
    match c.triangles {
        TrianglePlacement::ExactFrequency => {
            let (m_lo, m_hi) = (
                to_mel(c.mel_scale, c.low_edge_hz as f64),
                to_mel(c.mel_scale, c.high_edge_hz as f64),
            );
            let edge = |i: usize| match i {
                0 => c.low_edge_hz as f64,
                i if i == n + 1 => c.high_edge_hz as f64,
                i => from_mel(
                    c.mel_scale,
                    m_lo + (m_hi - m_lo) * i as f64 / (n + 1) as f64,
                ),
            };
            for b in 0..n {
                let (lo, mid, hi) = (edge(b), edge(b + 1), edge(b + 2));
                let gain = match c.band_gain {
                    BandGain::PeakOne => 1.0,
                    BandGain::EqualArea => 2.0 / (hi - lo),
                };
                for k in 0..bins {
                    let f = k as f64 * fs / c.fft_points as f64;
                    let w = ((f - lo) / (mid - lo)).min((hi - f) / (hi - mid)).max(0.0);
                    m[b * bins + k] = gain * w;
                }
            }
        }
        TrianglePlacement::RoundedCentreBins => {
            // ETSI ES 201 108 §4.2.9, from memory of the standard's text.
            let (m_lo, m_hi) = (
                to_mel(c.mel_scale, c.low_edge_hz as f64),
                to_mel(c.mel_scale, c.high_edge_hz as f64),
            );
            let cbin: Vec<i64> = (0..=n + 1)
                .map(|i| {
                    let f = match i {
                        0 => c.low_edge_hz as f64,
                        i if i == n + 1 => c.high_edge_hz as f64,
                        i => from_mel(
                            c.mel_scale,
                            m_lo + (m_hi - m_lo) * i as f64 / (n + 1) as f64,
                        ),
                    };
                    (f / fs * c.fft_points as f64).round() as i64
                })
                .collect();
            for k in 1..=n {
                for i in 0..bins as i64 {
                    let w = if i >= cbin[k - 1] && i <= cbin[k] {
                        (i - cbin[k - 1] + 1) as f64 / (cbin[k] - cbin[k - 1] + 1) as f64
                    } else if i > cbin[k] && i <= cbin[k + 1] {
                        1.0 - (i - cbin[k]) as f64 / (cbin[k + 1] - cbin[k] + 1) as f64
                    } else {
                        0.0
                    };
                    m[(k - 1) * bins + i as usize] = w;
                }
            }
        }
    }
    m
}

/// The output's log of a band energy, with the floor.
fn log_of(log: LogKind, e: f64, floor: f64) -> f64 {
    match log {
        LogKind::Decibel => 10.0 * e.max(floor).log10(),
        LogKind::Natural => e.max(floor).ln(),
    }
}

impl Reference {
    /// A reference for `config` (validated).
    pub fn new(config: &FeatureConfig) -> Reference {
        Reference {
            config: *config,
            window: reference_window(config.window, config.window_samples as usize),
            matrix: reference_matrix(config),
            fft: FftPlanner::new().plan_fft_forward(config.fft_points as usize),
        }
    }

    /// Runs the whole stream (full-scale-normalised samples) and returns one
    /// row of `bands` log values per complete frame.
    pub fn run(&self, samples: &[f64]) -> Vec<Vec<f64>> {
        let c = &self.config;
        let floor = 10f64.powf(c.floor_db as f64 / 10.0);
        let bands = c.bands as usize;
        self.energies(samples)
            .into_iter()
            .map(|row| {
                row.into_iter()
                    .take(bands)
                    .map(|e| log_of(c.log, e, floor))
                    .collect()
            })
            .collect()
    }

    /// The band energies (linear, the gains applied, no floor) of every
    /// complete frame: what the filterbank hands the stages after it (and,
    /// when the MFCC takes the log-energy, the frame's energy last).
    pub fn energies(&self, samples: &[f64]) -> Vec<Vec<f64>> {
        let c = &self.config;
        let conditioned = self.condition(samples);
        let (w, hop, n) = (
            c.window_samples as usize,
            c.hop_samples as usize,
            c.fft_points as usize,
        );
        let bins = n / 2 + 1;
        let mut frames = Vec::new();
        let mut buf = vec![Complex64::new(0.0, 0.0); n];
        let mut start = 0;
        while start + w <= conditioned.len() {
            buf.iter_mut().for_each(|z| *z = Complex64::new(0.0, 0.0));
            for i in 0..w {
                buf[i].re = conditioned[start + i] * self.window[i];
            }
            self.fft.process(&mut buf);
            let spectrum: Vec<f64> = buf[..bins]
                .iter()
                .map(|z| match c.spectrum {
                    SpectrumKind::Power => z.norm_sqr(),
                    SpectrumKind::Magnitude => z.norm(),
                })
                .collect();
            let mut row: Vec<f64> = self
                .matrix
                .chunks(bins)
                .map(|weights| weights.iter().zip(&spectrum).map(|(w, s)| w * s).sum())
                .collect();
            if c.stage_inputs() > c.bands as usize {
                // The frame's energy, by Parseval from this FFT: Σ c_k·|X_k|²
                // / N from the lowest band's first bin (c_k = 2 but at 0 and
                // N/2).
                let from = self.matrix[..bins]
                    .iter()
                    .position(|&w| w > 0.0)
                    .unwrap_or(0);
                let sum: f64 = (from..bins)
                    .map(|k| {
                        let p = buf[k].norm_sqr();
                        if k == 0 || k == bins - 1 { p } else { 2.0 * p }
                    })
                    .sum();
                row.push(sum / n as f64);
            }
            frames.push(row);
            start += hop;
        }
        frames
    }

    /// Per band, in output units: the value that the rounding noise of a
    /// 16-bit input alone gives the band (white noise of variance
    /// `LSB²/12`, LSB = 2^-15 of full scale: Bennett 1948, Widrow & Kollár
    /// 2008), through the configuration's DC removal and pre-emphasis, the
    /// window (`σ²·Σw²` per bin) and the band's weights; for a magnitude
    /// spectrum the mean of a Rayleigh magnitude, `√(π·P)/2`. A band below
    /// it carries nothing a 16-bit source can represent.
    pub fn input_noise_floor(&self) -> Vec<f64> {
        let c = &self.config;
        let n = c.fft_points as usize;
        let bins = n / 2 + 1;
        let lsb = 2f64.powi(-15);
        let variance = lsb * lsb / 12.0;
        let window_energy: f64 = self.window.iter().map(|w| w * w).sum();
        let per_bin: Vec<f64> = (0..bins)
            .map(|k| {
                let z = Complex64::from_polar(1.0, -2.0 * PI * k as f64 / n as f64); // e^{-jω}
                let mut h2 = 1.0;
                if let Some(p) = c.dc_removal_pole {
                    h2 *= ((1.0 - z) / (1.0 - p as f64 * z)).norm_sqr();
                }
                if let Some(a) = c.pre_emphasis {
                    h2 *= (1.0 - a as f64 * z).norm_sqr();
                }
                let power = variance * window_energy * h2;
                match c.spectrum {
                    SpectrumKind::Power => power,
                    SpectrumKind::Magnitude => (PI * power).sqrt() / 2.0,
                }
            })
            .collect();
        let floor = 10f64.powf(c.floor_db as f64 / 10.0);
        self.matrix
            .chunks(bins)
            .map(|weights| {
                log_of(
                    c.log,
                    weights.iter().zip(&per_bin).map(|(w, s)| w * s).sum(),
                    floor,
                )
            })
            .collect()
    }

    fn condition(&self, x: &[f64]) -> Vec<f64> {
        let c = &self.config;
        let mut y = x.to_vec();
        if let Some(p) = c.dc_removal_pole {
            let p = p as f64;
            let (mut last_in, mut last_out) = (0.0, 0.0);
            for v in y.iter_mut() {
                let out = *v - last_in + p * last_out;
                last_in = *v;
                last_out = out;
                *v = out;
            }
        }
        if let Some(a) = c.pre_emphasis {
            let a = a as f64;
            let mut last = 0.0;
            for v in y.iter_mut() {
                let out = *v - a * last;
                last = *v;
                *v = out;
            }
        }
        y
    }
}
