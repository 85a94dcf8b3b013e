//! Runs the core front end on the host, over a whole signal or in chunks.

use anyhow::{Result, anyhow};
use stapes_core::config::FeatureConfig;
use stapes_core::float_path::FloatFrontEnd;
use stapes_core::sample::Sample;
use stapes_core::table::TableView;

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

fn drive<S: Sample>(
    fe: &mut HostFloatFrontEnd<'_>,
    samples: &[S],
    chunk: usize,
    out: &mut Vec<Vec<f32>>,
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
    let mut fe = Box::new(HostFloatFrontEnd::new(*config, table).map_err(|e| anyhow!("{e}"))?);
    let mut out = Vec::with_capacity(frame_count(config, samples.len()));
    match samples {
        Samples::I16(v) => drive(&mut fe, v, chunk, &mut out),
        Samples::F32(v) => drive(&mut fe, v, chunk, &mut out),
    }
    Ok(out)
}
