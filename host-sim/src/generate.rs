//! Quantised tables ready to emit: the [`Design`] turned into `f32` and Q15
//! arrays, with a report of what quantisation cost.
//!
//! Q15 weights keep each band's designed gain: within each group (a sparse
//! band, or a compact segment), weights are rounded so that their sum equals
//! the rounded designed sum, by the largest-remainder rule. A compact band's
//! sum is then within one LSB of its design (its rising and falling segments
//! each round once).

use stapes_core::config::{FeatureConfig, LogKind};
use stapes_core::fixed::types::{I1F15, I1F31, I8F8, I16F16};
use stapes_core::fixed_tables::{FixedParams, FixedTables};
use stapes_core::table::{BinSpan, Filterbank, FilterbankForm, TableView};

use crate::design::{Design, design};

/// Q15 full scale.
pub const Q15_ONE: f64 = 32768.0;
/// Q15 gains are log offsets in 1/256 of the output unit (dB or natural log).
pub const GAIN_OFFSET_STEPS_PER_UNIT: f64 = 256.0;

/// Every array a front end may need, in both weight types and both forms.
#[derive(Debug, Clone)]
pub struct GeneratedTables {
    /// The configuration.
    pub config: FeatureConfig,
    /// The `f64` design the arrays came from.
    pub design: Design,
    /// Window, f32.
    pub window_f32: Vec<f32>,
    /// Window, Q15.
    pub window_q15: Vec<i16>,
    /// Window, Q31 (the 32-bit fixed path: a Q15 window's rounding leaks a
    /// strong low-frequency component into weak high bands).
    pub window_q31: Vec<i32>,
    /// Sparse spans.
    pub spans: Vec<BinSpan>,
    /// Sparse weights, f32.
    pub sparse_f32: Vec<f32>,
    /// Sparse weights, Q15.
    pub sparse_q15: Vec<i16>,
    /// Compact segment starts (empty when the placement has no compact form).
    pub segment_starts: Vec<u16>,
    /// Compact weights, f32.
    pub compact_f32: Vec<f32>,
    /// Compact weights, Q15.
    pub compact_q15: Vec<i16>,
    /// Gains, f32 (linear multipliers).
    pub gains_f32: Option<Vec<f32>>,
    /// Gains for Q15 tables: log offsets in 1/256 output units.
    pub gains_q15: Option<Vec<i16>>,
    /// Quarter-wave cosine `cos(2πj/N)`, `j = 0 ..= N/4`, Q15.
    pub twiddles_q15: Vec<i16>,
    /// The same in Q31.
    pub twiddles_q31: Vec<i32>,
    /// Fixed-path constants; `None` when the floor is outside the fixed
    /// output's range (±128 output units).
    pub fixed_params: Option<FixedParams>,
    /// The tables of the stages after the filterbank (DCT, statistics, the
    /// fixed path's stage parameters).
    pub stages: crate::model_input::GeneratedStageTables,
    /// The Q15 window's DFT on its first bins (`FixedTables::window_spectrum`),
    /// or empty.
    pub window_spectrum: Vec<i32>,
    /// What quantisation cost.
    pub quantisation: QuantisationReport,
}

/// Worst errors introduced by quantisation.
#[derive(Debug, Clone, Copy, Default)]
pub struct QuantisationReport {
    /// Largest |Q15 weight − designed weight| in the sparse form.
    pub sparse_q15_weight: f64,
    /// Largest |band sum − designed sum| / designed sum, sparse Q15.
    pub sparse_q15_band_gain: f64,
    /// Largest |Q15 weight − designed weight| in the compact form.
    pub compact_q15_weight: f64,
    /// Largest relative band-sum error in the compact Q15 form.
    pub compact_q15_band_gain: f64,
    /// Largest |f32 weight − designed weight|, either form.
    pub f32_weight: f64,
    /// Largest |Q15 window − designed window|.
    pub window_q15: f64,
}

/// Rounds `values · Q15_ONE` to integers in `0 ..= 32767` whose sum is the
/// rounded designed sum (largest remainder first), as far as the clamp allows.
pub fn quantise_group(values: &[f64]) -> Vec<i16> {
    let scaled: Vec<f64> = values.iter().map(|v| v * Q15_ONE).collect();
    let target = scaled.iter().sum::<f64>().round() as i64;
    let mut q: Vec<i64> = scaled
        .iter()
        .map(|v| (v.floor() as i64).clamp(0, 32767))
        .collect();
    let mut order: Vec<usize> = (0..q.len()).collect();
    let mut diff = target - q.iter().sum::<i64>();
    // Add to the largest fractional parts; take from the smallest.
    order.sort_by(|&a, &b| {
        let fa = scaled[a] - scaled[a].floor();
        let fb = scaled[b] - scaled[b].floor();
        fb.total_cmp(&fa).then(a.cmp(&b))
    });
    let mut i = 0;
    while diff > 0 && i < 2 * order.len() {
        let k = order[i % order.len()];
        if q[k] < 32767 {
            q[k] += 1;
            diff -= 1;
        }
        i += 1;
    }
    i = 0;
    while diff < 0 && i < 2 * order.len() {
        let k = order[order.len() - 1 - i % order.len()];
        if q[k] > 0 {
            q[k] -= 1;
            diff += 1;
        }
        i += 1;
    }
    q.into_iter().map(|v| v as i16).collect()
}

fn q15_round(v: f64) -> i16 {
    (v * Q15_ONE).round().clamp(-32768.0, 32767.0) as i16
}

/// Q31 with 1.0 as `i32::MAX`.
fn q31_round(v: f64) -> i32 {
    (v * 2f64.powi(31))
        .round()
        .clamp(i32::MIN as f64, i32::MAX as f64) as i32
}

fn max_abs_diff(a: impl Iterator<Item = f64>, b: impl Iterator<Item = f64>) -> f64 {
    a.zip(b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max)
}

impl GeneratedTables {
    /// Designs and quantises the tables of a validated configuration, with
    /// the normalisation statistics it needs (one mean and deviation per
    /// output value) when it normalises.
    pub fn with_statistics(
        config: &FeatureConfig,
        statistics: Option<(Vec<f32>, Vec<f32>)>,
    ) -> anyhow::Result<GeneratedTables> {
        let stages = crate::model_input::GeneratedStageTables::new(config, statistics)?;
        let mut tables = Self::filterbank(config);
        tables.stages = stages;
        Ok(tables)
    }

    /// Designs and quantises the tables of a validated configuration that
    /// does not normalise (a normalising one needs
    /// [`GeneratedTables::with_statistics`]; here its statistics stay empty
    /// and its stage tables fail their check).
    pub fn new(config: &FeatureConfig) -> GeneratedTables {
        let mut tables = Self::filterbank(config);
        if let Ok(stages) = crate::model_input::GeneratedStageTables::new(config, None) {
            tables.stages = stages;
        }
        tables
    }

    fn filterbank(config: &FeatureConfig) -> GeneratedTables {
        let design = design(config);
        let mut report = QuantisationReport::default();

        let window_f32: Vec<f32> = design.window.iter().map(|&w| w as f32).collect();
        let window_q15: Vec<i16> = design.window.iter().map(|&w| q15_round(w)).collect();
        let window_q31: Vec<i32> = design.window.iter().map(|&w| q31_round(w)).collect();
        report.window_q15 = max_abs_diff(
            window_q15.iter().map(|&q| q as f64 / Q15_ONE),
            design.window.iter().copied(),
        );

        let mut spans = Vec::new();
        let (mut sparse_f32, mut sparse_q15) = (Vec::new(), Vec::new());
        for band in &design.bands {
            spans.push([band.first_bin as u16, band.weights.len() as u16]);
            let q = quantise_group(&band.weights);
            report.sparse_q15_weight = report.sparse_q15_weight.max(max_abs_diff(
                q.iter().map(|&v| v as f64 / Q15_ONE),
                band.weights.iter().copied(),
            ));
            let designed: f64 = band.weights.iter().sum();
            let got: f64 = q.iter().map(|&v| v as f64).sum::<f64>() / Q15_ONE;
            report.sparse_q15_band_gain = report
                .sparse_q15_band_gain
                .max((got - designed).abs() / designed);
            sparse_q15.extend(q);
            sparse_f32.extend(band.weights.iter().map(|&w| w as f32));
        }
        report.f32_weight = max_abs_diff(
            sparse_f32.iter().map(|&w| w as f64),
            design.bands.iter().flat_map(|b| b.weights.iter().copied()),
        );

        let (mut segment_starts, mut compact_f32, mut compact_q15) = (vec![], vec![], vec![]);
        if let Some(compact) = &design.compact {
            segment_starts = compact.segment_starts.iter().map(|&s| s as u16).collect();
            let base = compact.segment_starts[0];
            for pair in compact.segment_starts.windows(2) {
                compact_q15.extend(quantise_group(
                    &compact.weights[pair[0] - base..pair[1] - base],
                ));
            }
            compact_f32 = compact.weights.iter().map(|&w| w as f32).collect();
            report.compact_q15_weight = max_abs_diff(
                compact_q15.iter().map(|&q| q as f64 / Q15_ONE),
                compact.weights.iter().copied(),
            );
            report.f32_weight = report.f32_weight.max(max_abs_diff(
                compact_f32.iter().map(|&w| w as f64),
                compact.weights.iter().copied(),
            ));
            report.compact_q15_band_gain = compact_band_gain_error(&design, &compact_q15);
        }

        let gains_f32 = design
            .gains
            .as_ref()
            .map(|g| g.iter().map(|&v| v as f32).collect());
        let gains_q15 = design.gains.as_ref().map(|g| {
            g.iter()
                .map(|&v| {
                    let unit = match config.log {
                        LogKind::Decibel => 10.0 * v.log10(),
                        LogKind::Natural => v.ln(),
                    };
                    (unit * GAIN_OFFSET_STEPS_PER_UNIT)
                        .round()
                        .clamp(-32768.0, 32767.0) as i16
                })
                .collect()
        });

        let quarter = config.fft_points as usize / 4;
        let cosine =
            |j: usize| (2.0 * std::f64::consts::PI * j as f64 / config.fft_points as f64).cos();
        let twiddles_q15 = (0..=quarter).map(|j| q15_round(cosine(j))).collect();
        let twiddles_q31 = (0..=quarter).map(|j| q31_round(cosine(j))).collect();

        GeneratedTables {
            config: *config,
            twiddles_q15,
            twiddles_q31,
            fixed_params: fixed_params(config),
            window_spectrum: window_spectrum(config, &window_q15),
            stages: crate::model_input::GeneratedStageTables {
                dct: None,
                mean: Vec::new(),
                deviation: Vec::new(),
                norm_offsets: Vec::new(),
                norm_multipliers: Vec::new(),
                fixed: stapes_core::stage_tables::FixedStageParams::NONE,
            },
            design,
            window_f32,
            window_q15,
            window_q31,
            spans,
            sparse_f32,
            sparse_q15,
            segment_starts,
            compact_f32,
            compact_q15,
            gains_f32,
            gains_q15,
            quantisation: report,
        }
    }

    /// Tables for the fixed path, when it can represent this configuration.
    pub fn fixed_tables(&self, form: FilterbankForm) -> Option<FixedTables<'_>> {
        Some(FixedTables {
            table: self.view_q15(form),
            twiddles_q15: &self.twiddles_q15,
            twiddles_q31: &self.twiddles_q31,
            window_q31: &self.window_q31,
            window_spectrum: &self.window_spectrum,
            params: self.fixed_params?,
        })
    }

    /// Whether the compact form exists for this configuration.
    pub fn has_compact(&self) -> bool {
        !self.segment_starts.is_empty()
    }

    /// The forms this configuration has.
    pub fn forms(&self) -> Vec<FilterbankForm> {
        let mut forms = vec![FilterbankForm::Sparse];
        if self.has_compact() {
            forms.push(FilterbankForm::Compact);
        }
        forms
    }

    /// An `f32` view borrowing these tables.
    pub fn view_f32(&self, form: FilterbankForm) -> TableView<'_, f32> {
        TableView {
            fingerprint: self.config.fingerprint(),
            window: &self.window_f32,
            filterbank: match form {
                FilterbankForm::Sparse => Filterbank::Sparse {
                    spans: &self.spans,
                    weights: &self.sparse_f32,
                },
                FilterbankForm::Compact => Filterbank::Compact {
                    segment_starts: &self.segment_starts,
                    weights: &self.compact_f32,
                },
            },
            band_gains: self.gains_f32.as_deref(),
        }
    }

    /// A Q15 view borrowing these tables.
    pub fn view_q15(&self, form: FilterbankForm) -> TableView<'_, i16> {
        TableView {
            fingerprint: self.config.fingerprint(),
            window: &self.window_q15,
            filterbank: match form {
                FilterbankForm::Sparse => Filterbank::Sparse {
                    spans: &self.spans,
                    weights: &self.sparse_q15,
                },
                FilterbankForm::Compact => Filterbank::Compact {
                    segment_starts: &self.segment_starts,
                    weights: &self.compact_q15,
                },
            },
            band_gains: self.gains_q15.as_deref(),
        }
    }
}

/// Output units per dB-or-neper: the fixed path's log unit for `config`.
pub fn output_units_per_db(log: LogKind) -> f64 {
    match log {
        LogKind::Decibel => 1.0,
        LogKind::Natural => std::f64::consts::LN_10 / 10.0,
    }
}

/// The fixed path's constants for `config`, or `None` when its floor cannot
/// be represented in the `I8F8` output.
pub fn fixed_params(config: &FeatureConfig) -> Option<FixedParams> {
    let q15 = |v: Option<f32>| I1F15::from_bits(v.map_or(0, |v| q15_round(v as f64)));
    let floor = (config.floor_db as f64 * output_units_per_db(config.log) * 256.0).round();
    if floor < i16::MIN as f64 || floor > i16::MAX as f64 {
        return None;
    }
    let log2_to_output = match config.log {
        LogKind::Decibel => 10.0 * 2f64.log10(),
        LogKind::Natural => std::f64::consts::LN_2,
    };
    let q31 = |v: Option<f32>| {
        I1F31::from_bits(v.map_or(0, |v| {
            (v as f64 * 2f64.powi(31))
                .round()
                .clamp(i32::MIN as f64, i32::MAX as f64) as i32
        }))
    };
    Some(FixedParams {
        dc_pole: q31(config.dc_removal_pole),
        pre_emphasis: q15(config.pre_emphasis),
        floor: I8F8::from_bits(floor as i16),
        log2_to_output: I16F16::from_bits((log2_to_output * 65536.0).round() as i32),
    })
}

/// Per band, rising sum of its own segment plus falling sum of the next.
fn compact_band_gain_error(design: &Design, q: &[i16]) -> f64 {
    let compact = design.compact.as_ref().expect("compact design");
    let starts = &compact.segment_starts;
    let base = starts[0];
    let mut worst = 0.0f64;
    for (b, band) in design.bands.iter().enumerate() {
        let rising = starts[b] - base..starts[b + 1] - base;
        let falling = starts[b + 1] - base..starts[b + 2] - base;
        let got: f64 = q[rising].iter().map(|&v| v as f64 / Q15_ONE).sum::<f64>()
            + q[falling]
                .iter()
                .map(|&v| 1.0 - v as f64 / Q15_ONE)
                .sum::<f64>();
        let designed: f64 = band.weights.iter().sum();
        worst = worst.max((got - designed).abs() / designed);
    }
    worst
}

/// Largest `|W(k)| / W(0)` beyond the window spectrum's last bin: the
/// offset's leakage left out there stays 102 dB below the offset's own bin.
pub const WINDOW_SPECTRUM_TAIL: f64 = 1.0 / 131_072.0;

/// The Q15 window's DFT `W(k) = Σ w[n]·e^(−2πikn/N)` (f64, rounded to Q16)
/// as `(re, im)` pairs for the bins `k < K` beyond which every `|W(k)|`
/// stays below [`WINDOW_SPECTRUM_TAIL`]`·W(0)`, for the 16-bit fixed path's
/// offset compensation; empty where the core knows the window's DFT exactly
/// (`stapes_core::spectrum::offset_spectrum`) or where `K` would exceed
/// `N/8` (a window whose sidelobes fall slowly, such as Hamming's: the
/// add-back would cost more than it saves).
pub fn window_spectrum(config: &FeatureConfig, window_q15: &[i16]) -> Vec<i32> {
    if stapes_core::spectrum::offset_spectrum(config).is_some() {
        return Vec::new();
    }
    let n = config.fft_points as usize;
    let bins = n / 2 + 1;
    let w: Vec<f64> = window_q15.iter().map(|&c| c as f64 / 32768.0).collect();
    let dft: Vec<(f64, f64)> = (0..bins)
        .map(|k| {
            w.iter().enumerate().fold((0.0, 0.0), |(re, im), (i, &c)| {
                let a = -2.0 * std::f64::consts::PI * ((k * i) % n) as f64 / n as f64;
                (re + c * a.cos(), im + c * a.sin())
            })
        })
        .collect();
    let w0 = dft[0].0.abs();
    let k_end = dft
        .iter()
        .rposition(|&(re, im)| re.hypot(im) > WINDOW_SPECTRUM_TAIL * w0)
        .map_or(0, |k| k + 1);
    if k_end > n / 8 {
        return Vec::new();
    }
    dft[..k_end]
        .iter()
        .flat_map(|&(re, im)| [(re * 65536.0).round() as i32, (im * 65536.0).round() as i32])
        .collect()
}
