//! `stapes statistics`: the per-value means and standard deviations a
//! normalising configuration needs, computed from a folder of clips.
//!
//! Each clip at the configuration's rate runs through the float64
//! reference of the configuration's stages up to the normaliser (log or
//! PCEN, range floor, MFCC); every frame counts. The result is written as a
//! `[stages.normalise]` table to add to a configuration file.

use std::fmt::Write as _;
use std::path::Path;

use anyhow::{Result, bail};
use stapes_core::config::FeatureConfig;
use stapes_core::stage_config::StageConfig;

use crate::corpus::load_clips;
use crate::reference::Reference;
use crate::stages::reference_stages;

/// Means and deviations of the values the normaliser would see, over every
/// frame of the clips at `config`'s rate; also the frames and clips used.
pub fn statistics(
    config: &FeatureConfig,
    dir: &Path,
) -> Result<(Vec<f32>, Vec<f32>, usize, usize)> {
    let before = FeatureConfig {
        stages: StageConfig {
            normalise: false,
            quantise: None,
            model_window: None,
            ..config.stages
        },
        ..*config
    };
    let clips = load_clips(dir)?;
    let mine: Vec<_> = clips
        .iter()
        .filter(|c| c.rate_hz == config.sample_rate_hz)
        .collect();
    if mine.is_empty() {
        bail!(
            "{} holds no clip at {} Hz: give clips at the configuration's sample rate",
            dir.display(),
            config.sample_rate_hz
        );
    }
    let reference = Reference::new(&before);
    let tables = crate::model_input::GeneratedStageTables::new(&before, None)?;
    let mut frames: Vec<Vec<f32>> = Vec::new();
    for clip in &mine {
        let energies = reference.energies(&clip.samples.to_f64());
        let run = reference_stages(&before, &tables.view(), &energies);
        let last = &run.stages.last().expect("the level stage").values;
        frames.extend(
            last.iter()
                .map(|f| f.iter().map(|&v| v as f32).collect::<Vec<f32>>()),
        );
    }
    let (mean, deviation) = crate::model_input::band_statistics(&frames)?;
    Ok((mean, deviation, frames.len(), mine.len()))
}

/// The `[stages.normalise]` table for `mean` and `deviation`.
pub fn toml_table(
    name: &str,
    mean: &[f32],
    deviation: &[f32],
    frames: usize,
    clips: usize,
    dir: &Path,
) -> String {
    let list = |v: &[f32]| {
        v.iter()
            .map(|x| format!("{x:?}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut s = String::new();
    let _ = writeln!(
        s,
        "# Per-value statistics for {name}: {frames} frames of {clips} clips in {}, from the \
         float64 reference of the stages before the normaliser (`stapes statistics`).",
        dir.display()
    );
    let _ = writeln!(s, "[stages.normalise]");
    let _ = writeln!(s, "mean = [{}]", list(mean));
    let _ = writeln!(s, "deviation = [{}]", list(deviation));
    s
}
