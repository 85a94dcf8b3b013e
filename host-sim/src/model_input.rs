//! The host's side of the model-input stages: the fixed quantiser's
//! integer parts derived from a model's scale, and per-band statistics
//! computed from frames.

use anyhow::{Result, bail};
use stapes_core::quantise::{CodeRange, FixedQuantiser};

/// `(M, k)` with `M / 2^k` the nearest to `1 / (256·scale)` for the largest
/// `k ≤ 62` that keeps `M` below 2^31 (a relative error under 2^-30).
pub fn quantiser_parts(scale: f32) -> Result<(i32, u32)> {
    if !(scale.is_normal() && scale > 0.0) {
        bail!(
            "quantiser scale {scale} is not a positive finite number: give the model input tensor's scale"
        );
    }
    let ratio = 1.0 / (256.0 * scale as f64);
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
