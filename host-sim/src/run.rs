//! Runs the core front end on the host, over a whole signal or in chunks.

use anyhow::{Result, anyhow};
use stapes_core::FloatFrontEnd;
use stapes_core::config::FeatureConfig;
use stapes_core::fixed::types::I8F8;
use stapes_core::fixed_tables::FixedTables;
use stapes_core::sample::Sample;
use stapes_core::stage::FrameStage;
use stapes_core::table::TableView;
use stapes_core::{FixedArithmetic, FixedFrontEnd};
use stapes_core::{FixedLog, FloatLog};

/// Host capacities: the largest configuration the validator accepts.
pub type HostFloatFrontEnd<'t> = FloatFrontEnd<'t, 4096, 4096, 256>;

/// Decoded input samples, in the type the file held.
#[derive(Debug, Clone, PartialEq)]
pub enum Samples {
    /// 16-bit PCM.
    I16(Vec<i16>),
    /// 32-bit float.
    F32(Vec<f32>),
}

impl Samples {
    /// Number of samples.
    pub fn len(&self) -> usize {
        match self {
            Samples::I16(v) => v.len(),
            Samples::F32(v) => v.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The samples as `i16`, as the fixed path takes them: 16-bit input as it
    /// is, float input rounded to the nearest 16-bit value (saturating at full
    /// scale). Compare the fixed path against the reference on these.
    pub fn to_i16(&self) -> Vec<i16> {
        match self {
            Samples::I16(v) => v.clone(),
            Samples::F32(v) => v
                .iter()
                .map(|&s| (s as f64 * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
                .collect(),
        }
    }

    /// Full-scale-normalised `f64` copies, for the reference.
    pub fn to_f64(&self) -> Vec<f64> {
        match self {
            Samples::I16(v) => v.iter().map(|&s| s as f64 / 32768.0).collect(),
            Samples::F32(v) => v.iter().map(|&s| s as f64).collect(),
        }
    }
}

/// Frames the stream yields: `floor((len - window) / hop) + 1`, or 0.
pub fn frame_count(config: &FeatureConfig, samples: usize) -> usize {
    let w = config.window_samples as usize;
    if samples < w {
        0
    } else {
        (samples - w) / config.hop_samples as usize + 1
    }
}

fn drive<X: Sample, S: FrameStage<f32>>(
    fe: &mut FloatFrontEnd<'_, 4096, 4096, 256, S>,
    samples: &[X],
    chunk: usize,
    out: &mut Vec<Vec<S::Out>>,
) {
    for piece in samples.chunks(chunk.max(1)) {
        let mut rest = piece;
        while let Some(frame) = fe.next_frame(&mut rest) {
            out.push(frame.bands.to_vec());
        }
    }
}

/// Runs the `f32` core over `samples`, fed `chunk` samples at a time.
pub fn run_float(
    config: &FeatureConfig,
    table: TableView<'_, f32>,
    samples: &Samples,
    chunk: usize,
) -> Result<Vec<Vec<f32>>> {
    let mut frames = run_float_with(config, table, FloatLog::for_config(config), samples, chunk)?;
    // The log-mel bands (without the frame's log-energy an MFCC may take).
    frames
        .iter_mut()
        .for_each(|f| f.truncate(config.bands as usize));
    Ok(frames)
}

/// [`run_float`] with `stages` after the filterbank instead of the log.
pub fn run_float_with<S: FrameStage<f32>>(
    config: &FeatureConfig,
    table: TableView<'_, f32>,
    stages: S,
    samples: &Samples,
    chunk: usize,
) -> Result<Vec<Vec<S::Out>>> {
    let mut fe = Box::new(
        FloatFrontEnd::<4096, 4096, 256, S>::with_stages(*config, table, stages)
            .map_err(|e| anyhow!("{e}"))?,
    );
    let mut out = Vec::with_capacity(frame_count(config, samples.len()));
    match samples {
        Samples::I16(v) => drive(&mut fe, v, chunk, &mut out),
        Samples::F32(v) => drive(&mut fe, v, chunk, &mut out),
    }
    Ok(out)
}

/// Runs the fixed-point core (precision `P`) over 16-bit samples, fed `chunk`
/// at a time; frames hold the board's exact `I8F8` values.
pub fn run_fixed<P>(
    config: &FeatureConfig,
    tables: FixedTables<'_>,
    samples: &[i16],
    chunk: usize,
) -> Result<Vec<Vec<I8F8>>>
where
    P: FixedArithmetic,
{
    let log = FixedLog::<256>::for_tables(&tables);
    let mut frames = run_fixed_with::<P, _>(config, tables, log, samples, chunk)?;
    frames
        .iter_mut()
        .for_each(|f| f.truncate(config.bands as usize));
    Ok(frames)
}

/// [`run_fixed`] with `stages` after the filterbank instead of the log.
pub fn run_fixed_with<P, S: FrameStage<i32>>(
    config: &FeatureConfig,
    tables: FixedTables<'_>,
    stages: S,
    samples: &[i16],
    chunk: usize,
) -> Result<Vec<Vec<S::Out>>>
where
    P: FixedArithmetic,
{
    let mut fe = Box::new(
        FixedFrontEnd::<P, 4096, 4096, 256, S>::with_stages(*config, tables, stages)
            .map_err(|e| anyhow!("{e}"))?,
    );
    let mut out = Vec::with_capacity(frame_count(config, samples.len()));
    for piece in samples.chunks(chunk.max(1)) {
        let mut rest = piece;
        while let Some(frame) = fe.next_frame(&mut rest) {
            out.push(frame.bands.to_vec());
        }
    }
    Ok(out)
}

/// `I8F8` output units as `f32` (exact: the values are multiples of 1/256).
pub fn fixed_to_f32(frames: &[Vec<I8F8>]) -> Vec<Vec<f32>> {
    frames
        .iter()
        .map(|r| r.iter().map(|v| v.to_bits() as f32 / 256.0).collect())
        .collect()
}
