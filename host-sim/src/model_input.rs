//! The host's side of the model-input stages: the fixed quantiser's
//! integer parts derived from a model's scale, and per-band statistics
//! computed from frames.

use anyhow::{Result, bail};
use stapes_core::quantise::{CodeRange, FixedQuantiser};

/// `(M, k)` with `M / 2^k` the nearest to `1 / (256·scale)` for the largest
/// `k ≤ 62` that keeps `M` below 2^31 (a relative error under 2^-30), for
/// values in 1/256 units.
pub fn quantiser_parts(scale: f32) -> Result<(i32, u32)> {
    quantiser_parts_for(scale, 8)
}

/// [`quantiser_parts`] for values with `fraction_bits` fraction bits (8 for
/// log and MFCC values, 16 for PCEN's `I16F16`).
pub fn quantiser_parts_for(scale: f32, fraction_bits: u32) -> Result<(i32, u32)> {
    if !(scale.is_normal() && scale > 0.0) {
        bail!(
            "quantiser scale {scale} is not a positive finite number: give the model input tensor's scale"
        );
    }
    let ratio = 1.0 / (2f64.powi(fraction_bits as i32) * scale as f64);
    let mut best = None;
    for k in (0..=62u32).rev() {
        let m = (ratio * 2f64.powi(k as i32)).round();
        if m >= 1.0 && m < 2_147_483_648.0 {
            best = Some((m as i32, k));
            break;
        }
    }
    best.ok_or_else(|| {
        anyhow::anyhow!(
            "quantiser scale {scale} is beyond the fixed path's reach (1/(256·scale) must lie between 2^-62 and 2^31)"
        )
    })
}

/// The fixed-path quantiser for a model's `scale` and `zero_point`.
pub fn fixed_quantiser(scale: f32, zero_point: i32, range: CodeRange) -> Result<FixedQuantiser> {
    let (m, k) = quantiser_parts(scale)?;
    FixedQuantiser::from_parts(m, k, zero_point, range).map_err(|e| anyhow::anyhow!("{e}"))
}

/// Per-value means and (population) standard deviations over `frames`, in
/// f64, returned as f32; a value that never varies gets deviation 1 (so the
/// normalisation leaves it centred, not divided by zero).
pub fn band_statistics(frames: &[Vec<f32>]) -> Result<(Vec<f32>, Vec<f32>)> {
    let Some(first) = frames.first() else {
        bail!(
            "no frames to compute statistics from: give at least one clip long enough for a frame"
        );
    };
    let n = first.len();
    let mut sum = vec![0.0f64; n];
    let mut sq = vec![0.0f64; n];
    for f in frames {
        if f.len() != n {
            bail!(
                "frames of {} and {} values: every frame must have as many values",
                n,
                f.len()
            );
        }
        for (i, &v) in f.iter().enumerate() {
            sum[i] += v as f64;
            sq[i] += v as f64 * v as f64;
        }
    }
    let count = frames.len() as f64;
    let mean: Vec<f64> = sum.iter().map(|s| s / count).collect();
    let deviation = sq
        .iter()
        .zip(&mean)
        .map(|(q, m)| {
            let d = (q / count - m * m).max(0.0).sqrt();
            if d > 0.0 { d as f32 } else { 1.0 }
        })
        .collect();
    Ok((mean.iter().map(|&m| m as f32).collect(), deviation))
}

/// A positive f64 as the fixed path's [`Soft`](stapes_core::pcen_fixed::Soft).
pub fn soft(value: f64) -> stapes_core::pcen_fixed::Soft {
    if !(value > 0.0 && value.is_finite()) {
        return stapes_core::pcen_fixed::Soft::ZERO;
    }
    let e = value.log2().floor() as i32;
    // value = m·2^(e − 31) with m in [2^31, 2^32).
    let m = (value * 2f64.powi(31 - e)).round().min(u32::MAX as f64) as u64;
    stapes_core::pcen_fixed::Soft::from_parts(m, e - 31)
}

/// The fixed PCEN stage's integer parameters for `params` at a hop of
/// `hop_s` seconds.
pub fn fixed_pcen_params(
    params: &stapes_core::pcen::PcenParams,
    hop_s: f32,
) -> stapes_core::pcen_fixed::FixedPcenParams {
    let (alpha, root) = (params.alpha as f64, params.root as f64);
    let s = params.smoothing(hop_s) as f64;
    stapes_core::pcen_fixed::FixedPcenParams {
        alpha_q16: (alpha * 65536.0).round() as i32,
        root_q16: (root * 65536.0).round() as i32,
        smoothing_q31: (s * 2f64.powi(31)).round() as u32,
        epsilon: soft(params.epsilon as f64),
        delta: soft(params.delta as f64),
        delta_root: soft((params.delta as f64).powf(root)),
    }
}

/// PCEN in f64 (the checks' model, Wang et al. 2017): per band the smoother
/// `M = (1 − s)·M + s·E`, started at the first frame's energies, and
/// `P = (E/(ε + M)^α + δ)^r − δ^r`, for linear band energies `frames`.
pub fn pcen_f64(
    frames: &[Vec<f64>],
    params: &stapes_core::pcen::PcenParams,
    smoothing: f64,
) -> Vec<Vec<f64>> {
    let Some(first) = frames.first() else {
        return Vec::new();
    };
    let (a, d, r, e) = (
        params.alpha as f64,
        params.delta as f64,
        params.root as f64,
        params.epsilon as f64,
    );
    let mut m = first.clone();
    frames
        .iter()
        .map(|row| {
            row.iter()
                .zip(m.iter_mut())
                .map(|(&x, mi)| {
                    *mi = (1.0 - smoothing) * *mi + smoothing * x;
                    (x / (e + *mi).powf(a) + d).powf(r) - d.powf(r)
                })
                .collect()
        })
        .collect()
}

/// The stage tables of one configuration, owned (the generator's output for
/// the stages after the filterbank; [`GeneratedStageTables::view`] gives the
/// core's [`StageTables`](stapes_core::StageTables)).
#[derive(Clone, Debug, PartialEq)]
pub struct GeneratedStageTables {
    /// The MFCC's DCT matrix and lifter, if the configuration has MFCC.
    pub dct: Option<crate::dct::DctTables>,
    /// Per-value means (empty without normalisation).
    pub mean: Vec<f32>,
    /// Per-value standard deviations (empty without normalisation).
    pub deviation: Vec<f32>,
    /// The fixed normalising quantiser's offsets (empty unless the
    /// configuration normalises and quantises).
    pub norm_offsets: Vec<i32>,
    /// Its multipliers.
    pub norm_multipliers: Vec<i32>,
    /// The fixed path's integer parameters.
    pub fixed: stapes_core::stage_tables::FixedStageParams,
}

impl GeneratedStageTables {
    /// The stage tables of a validated `config`, with `statistics` (means and
    /// deviations, one per output value) when it normalises.
    pub fn new(
        config: &stapes_core::FeatureConfig,
        statistics: Option<(Vec<f32>, Vec<f32>)>,
    ) -> Result<Self> {
        let s = &config.stages;
        let dct = s.mfcc.map(|m| {
            crate::dct::DctTables::new(config.bands as usize, m.coefficients as usize, m.lifter)
        });
        let (mean, deviation) = match (s.normalise, statistics) {
            (false, _) => (Vec::new(), Vec::new()),
            (true, Some((m, d))) => {
                let n = config.stage_values();
                if m.len() != n || d.len() != n {
                    bail!(
                        "normalisation statistics hold {} means and {} deviations but the \
                         configuration's frames have {n} values: give one of each per value",
                        m.len(),
                        d.len()
                    );
                }
                if let Some(i) = d.iter().position(|v| !(v.is_finite() && *v > 0.0)) {
                    bail!(
                        "normalisation deviation {i} = {} is not a positive finite number: \
                         give positive deviations",
                        d[i]
                    );
                }
                if let Some(i) = m.iter().position(|v| !v.is_finite()) {
                    bail!("normalisation mean {i} is not finite: give finite means");
                }
                (m, d)
            }
            (true, None) => bail!(
                "the configuration normalises but no statistics were given: add `mean` and \
                 `deviation` under [stages.normalise] in the configuration file, or compute \
                 them from clips with --statistics-from DIR"
            ),
        };
        let mut fixed = stapes_core::stage_tables::FixedStageParams::NONE;
        let hop_s = config.hop_samples as f32 / config.sample_rate_hz as f32;
        if let Some(p) = &s.pcen {
            fixed.pcen = fixed_pcen_params(p, hop_s);
        }
        if let Some(units) = crate::stages::range_floor_units(config) {
            // The log's output units in 1/256, as the fixed path's I8F8.
            fixed.range_floor_q8 = (units * 256.0).round().clamp(1.0, i16::MAX as f64) as i32;
        }
        if let Some(q) = s.quantise {
            let bits = if s.pcen.is_some() { 16 } else { 8 };
            let (m, k) = quantiser_parts_for(q.scale, bits)?;
            fixed.quantise_multiplier = m;
            fixed.quantise_shift = k;
            fixed.quantise_fraction_bits = bits;
        }
        let (mut norm_offsets, mut norm_multipliers) = (Vec::new(), Vec::new());
        if let (true, Some(q)) = (s.normalise, s.quantise) {
            let bits = fixed.quantise_fraction_bits;
            let unit = 2f64.powi(bits as i32);
            let (offsets, multipliers, shift) =
                normalised_quantiser_parts(&mean, &deviation, q.scale, unit)?;
            norm_offsets = offsets;
            norm_multipliers = multipliers;
            fixed.norm_shift = shift;
        }
        Ok(GeneratedStageTables {
            dct,
            mean,
            deviation,
            norm_offsets,
            norm_multipliers,
            fixed,
        })
    }

    /// The core's view of these tables.
    pub fn view(&self) -> stapes_core::StageTables<'_> {
        let dct = self.dct.as_ref();
        stapes_core::StageTables {
            dct_f32: dct.map_or(&[][..], |d| &d.matrix_f32),
            dct_q15: dct.map_or(&[][..], |d| &d.matrix_q15),
            lifter_f32: dct.and_then(|d| d.lifter_f32.as_deref()).unwrap_or(&[]),
            lifter_q11: dct.and_then(|d| d.lifter_q11.as_deref()).unwrap_or(&[]),
            mean: &self.mean,
            deviation: &self.deviation,
            norm_offsets: &self.norm_offsets,
            norm_multipliers: &self.norm_multipliers,
            fixed: self.fixed,
        }
    }

    /// Bytes these tables take in flash (f32 and Q15 forms both).
    pub fn flash_bytes(&self) -> usize {
        let v = self.view();
        4 * (v.dct_f32.len()
            + v.lifter_f32.len()
            + v.mean.len()
            + v.deviation.len()
            + v.norm_offsets.len()
            + v.norm_multipliers.len())
            + 2 * (v.dct_q15.len() + v.lifter_q11.len())
            + 4 * stapes_core::stage_tables::FIXED_STAGE_WORDS
    }
}

/// The fixed normalising quantiser's parts for values in units of `1/unit`
/// (256 for log and MFCC values, 65536 for PCEN's): per value the offset
/// `round(μ·unit)` and a multiplier `M` with `M / 2^k` the nearest to
/// `1 / (σ·S·unit)`, for the largest shared `k ≤ 62` that keeps every `M`
/// below 2^31 (the largest multiplier keeps a relative error under 2^-30,
/// the others under `2^-30 · max M / M`).
pub fn normalised_quantiser_parts(
    mean: &[f32],
    deviation: &[f32],
    scale: f32,
    unit: f64,
) -> Result<(Vec<i32>, Vec<i32>, u32)> {
    let ratios: Vec<f64> = deviation
        .iter()
        .map(|&d| 1.0 / (d as f64 * scale as f64 * unit))
        .collect();
    let largest = ratios.iter().copied().fold(0.0f64, f64::max);
    let smallest = ratios.iter().copied().fold(f64::INFINITY, f64::min);
    let Some(k) = (0..=62u32)
        .rev()
        .find(|&k| (largest * 2f64.powi(k as i32)).round() < 2_147_483_648.0)
    else {
        bail!(
            "normalisation and scale {scale} are beyond the fixed path's reach: a deviation times the scale is too small"
        );
    };
    // A saturated difference (2^31) must still clamp: M / 2^k ≥ 2^-23.
    if smallest * 2f64.powi(23) < 1.0 || (smallest * 2f64.powi(k as i32)).round() < 1.0 {
        bail!(
            "a normalisation deviation times the scale {scale} is too large for the fixed \
             path (every code would be the zero point): check the statistics' units"
        );
    }
    let offsets = mean
        .iter()
        .map(|&m| {
            let v = (m as f64 * unit).round();
            if v.abs() < 2_147_483_647.0 {
                Ok(v as i32)
            } else {
                Err(anyhow::anyhow!(
                    "normalisation mean {m} is beyond the fixed path's range: check the statistics' units"
                ))
            }
        })
        .collect::<Result<Vec<i32>>>()?;
    let multipliers = ratios
        .iter()
        .map(|r| (r * 2f64.powi(k as i32)).round() as i32)
        .collect();
    Ok((offsets, multipliers, k))
}
