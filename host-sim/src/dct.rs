//! The MFCC stage's tables: the orthonormal DCT-II matrix and the
//! sinusoidal lifter, built in f64 and rounded to f32 and Q15 (Q11 for the
//! lifter), and the f64 transform the checks compare with.
//!
//! `C[k][b] = s_k·cos(π·k·(2b + 1) / (2B))`, `s_0 = √(1/B)`, `s_k = √(2/B)`
//! (DCT-II, orthonormal: common practice; `scipy.fft.dct(type=2,
//! norm="ortho")`); lifter `1 + (L/2)·sin(π·k / L)` (Juang, Rabiner &
//! Wilpon, IEEE TASSP 1987).

use std::f64::consts::PI;

use stapes_core::mfcc::{DctTable, LIFTER_FRACTION_BITS};

/// The tables of one MFCC configuration.
#[derive(Clone, Debug, PartialEq)]
pub struct DctTables {
    /// Bands in.
    pub bands: usize,
    /// Coefficients out.
    pub coefficients: usize,
    /// The matrix in f64, row-major.
    pub matrix_f64: Vec<f64>,
    /// Rounded to f32.
    pub matrix_f32: Vec<f32>,
    /// Rounded to Q15.
    pub matrix_q15: Vec<i16>,
    /// The lifter in f64, f32 and Q11, if any.
    pub lifter_f64: Option<Vec<f64>>,
    /// The lifter in f32.
    pub lifter_f32: Option<Vec<f32>>,
    /// The lifter in Q11.
    pub lifter_q11: Option<Vec<i16>>,
}

impl DctTables {
    /// The tables for `coefficients` of `bands` (1 ≤ coefficients ≤ bands),
    /// liftered with parameter `lifter` (`L ≥ 1`) if given.
    pub fn new(bands: usize, coefficients: usize, lifter: Option<u32>) -> Self {
        let b = bands as f64;
        let matrix_f64: Vec<f64> = (0..coefficients)
            .flat_map(|k| {
                let s = if k == 0 {
                    (1.0 / b).sqrt()
                } else {
                    (2.0 / b).sqrt()
                };
                (0..bands)
                    .map(move |n| s * (PI * k as f64 * (2.0 * n as f64 + 1.0) / (2.0 * b)).cos())
            })
            .collect();
        let lifter_f64 = lifter.map(|l| {
            let l = l as f64;
            (0..coefficients)
                .map(|k| 1.0 + l / 2.0 * (PI * k as f64 / l).sin())
                .collect::<Vec<f64>>()
        });
        DctTables {
            bands,
            coefficients,
            matrix_f32: matrix_f64.iter().map(|&v| v as f32).collect(),
            matrix_q15: matrix_f64
                .iter()
                .map(|&v| (v * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
                .collect(),
            lifter_f32: lifter_f64
                .as_ref()
                .map(|l| l.iter().map(|&v| v as f32).collect()),
            lifter_q11: lifter_f64.as_ref().map(|l| {
                l.iter()
                    .map(|&v| (v * (1u32 << LIFTER_FRACTION_BITS) as f64).round() as i16)
                    .collect()
            }),
            matrix_f64,
            lifter_f64,
        }
    }

    /// The f32 table view.
    pub fn view_f32(&self) -> DctTable<'_, f32> {
        DctTable {
            bands: self.bands,
            coefficients: self.coefficients,
            matrix: &self.matrix_f32,
            lifter: self.lifter_f32.as_deref(),
        }
    }

    /// The Q15 table view (lifter in Q11).
    pub fn view_q15(&self) -> DctTable<'_, i16> {
        DctTable {
            bands: self.bands,
            coefficients: self.coefficients,
            matrix: &self.matrix_q15,
            lifter: self.lifter_q11.as_deref(),
        }
    }

    /// The f64 transform of one frame of `bands` values (the reference).
    pub fn apply_f64(&self, x: &[f64]) -> Vec<f64> {
        (0..self.coefficients)
            .map(|k| {
                let row = &self.matrix_f64[k * self.bands..(k + 1) * self.bands];
                let c: f64 = row.iter().zip(x).map(|(w, v)| w * v).sum();
                c * self.lifter_f64.as_ref().map_or(1.0, |l| l[k])
            })
            .collect()
    }
}
