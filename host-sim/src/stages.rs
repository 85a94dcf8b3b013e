//! The stages after the filterbank on the host: the core's own stage types,
//! chosen at run time from the configuration (the board chains the same
//! types at compile time with `Then`, so the values are the same bits),
//! and their float64 reference.
//!
//! The stages themselves run in [`crate::chain`]; here every stage's
//! output is recorded, so `check` compares each stage with its
//! reference and `features` writes whichever stage a user asks for.

use anyhow::Result;
use stapes_core::FixedArithmetic;
use stapes_core::config::{FeatureConfig, LogKind};
use stapes_core::fixed_tables::FixedTables;
use stapes_core::quantise::CodeRange;
use stapes_core::stage::Unchanged;
use stapes_core::stage_tables::StageTables;
use stapes_core::table::TableView;

use crate::chain::{FixedChain, FloatChain, StageOut};
use crate::run::Samples;

pub use crate::chain::{HOST_VALUES, range_floor_units, stage_names};

/// One stage's output over a clip.
#[derive(Clone, Debug, PartialEq)]
pub struct StageFrames {
    /// The stage's name: `log`, `pcen`, `range_floor`, `mfcc`, `normalise`,
    /// `quantise`.
    pub name: &'static str,
    /// Each frame's values in the stage's units (codes for `quantise`).
    pub values: Vec<Vec<f64>>,
    /// The raw integers the fixed path holds (1/256 or 1/65536 units, or
    /// codes), if any.
    pub raw: Option<Vec<Vec<i64>>>,
}

/// The outputs of every configured stage, in chain order.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct StageRun {
    /// Stages in order; the last is what the model reads.
    pub stages: Vec<StageFrames>,
    /// Values the quantiser clamped (or found NaN).
    pub clamped: u64,
}

impl StageRun {
    /// The output of the stage called `name`.
    pub fn stage(&self, name: &str) -> Option<&StageFrames> {
        self.stages.iter().find(|s| s.name == name)
    }

    /// The last stage's output.
    pub fn last(&self) -> &StageFrames {
        self.stages
            .last()
            .expect("a run has at least its level stage")
    }
}

/// Records every stage of every frame the chain hands over.
struct Recorder {
    run: StageRun,
}

impl Recorder {
    fn new(config: &FeatureConfig) -> Self {
        Recorder {
            run: StageRun {
                stages: stage_names(config)
                    .into_iter()
                    .map(|name| StageFrames {
                        name,
                        values: Vec::new(),
                        raw: None,
                    })
                    .collect(),
                clamped: 0,
            },
        }
    }

    fn frame(&mut self) -> impl FnMut(StageOut<'_>) + '_ {
        let mut k = 0;
        move |out: StageOut<'_>| {
            let s = &mut self.run.stages[k];
            k += 1;
            s.values
                .push((0..out.len()).map(|i| out.value(i)).collect());
            if out.is_integer() {
                s.raw
                    .get_or_insert_with(Vec::new)
                    .push((0..out.len()).filter_map(|i| out.raw(i)).collect());
            }
        }
    }
}

/// The f32 core's linear band energies over `samples`.
pub fn float_energies(
    config: &FeatureConfig,
    table: TableView<'_, f32>,
    samples: &Samples,
    chunk: usize,
) -> Result<Vec<Vec<f32>>> {
    crate::run::run_float_with(config, table, Unchanged, samples, chunk)
}

/// The fixed core's energy words (`int_log::energy_word`) over `samples`.
pub fn fixed_energies<P>(
    config: &FeatureConfig,
    tables: FixedTables<'_>,
    samples: &[i16],
    chunk: usize,
) -> Result<Vec<Vec<i32>>>
where
    P: FixedArithmetic,
{
    crate::run::run_fixed_with::<P, _>(config, tables, Unchanged, samples, chunk)
}

/// The f32 stages over linear band `energies` (from [`float_energies`]).
pub fn run_float_stages(
    config: &FeatureConfig,
    stages: &StageTables<'_>,
    energies: &[Vec<f32>],
) -> Result<StageRun> {
    let mut chain = FloatChain::new(config, stages)?;
    let mut rec = Recorder::new(config);
    let mut frame = Vec::new();
    for e in energies {
        frame.clear();
        frame.extend_from_slice(e);
        chain.process(&mut frame, &mut rec.frame());
    }
    rec.run.clamped = chain.clamped();
    Ok(rec.run)
}

/// The fixed stages over energy words (from [`fixed_energies`]); `tables`
/// give the log.
pub fn run_fixed_stages(
    config: &FeatureConfig,
    tables: &FixedTables<'_>,
    stages: &StageTables<'_>,
    energies: &[Vec<i32>],
) -> Result<StageRun> {
    let mut chain = FixedChain::new(config, tables, stages)?;
    let mut rec = Recorder::new(config);
    let mut frame = Vec::new();
    for e in energies {
        frame.clear();
        frame.extend_from_slice(e);
        chain.process(&mut frame, &mut rec.frame());
    }
    rec.run.clamped = chain.clamped();
    Ok(rec.run)
}

/// Ties-away-from-zero rounding of `x / scale` plus the zero point, clamped:
/// the quantiser's f64 model.
pub fn quantise_f64(x: f64, scale: f64, zero_point: i32, codes: CodeRange) -> f64 {
    let (lo, hi) = codes.limits();
    let q = (x / scale).round() + zero_point as f64; // f64::round: ties away from zero
    q.clamp(lo as f64, hi as f64)
}

/// The f64 reference of every configured stage over f64 band `energies`
/// (`crate::reference::Reference::energies`).
pub fn reference_stages(
    config: &FeatureConfig,
    stages: &StageTables<'_>,
    energies: &[Vec<f64>],
) -> StageRun {
    let st = &config.stages;
    let mut run = StageRun::default();
    let push = |run: &mut StageRun, name, frames: &Vec<Vec<f64>>| {
        run.stages.push(StageFrames {
            name,
            values: frames.clone(),
            raw: None,
        })
    };
    let mut frames = match st.pcen {
        Some(p) => {
            let hop_s = config.hop_samples as f64 / config.sample_rate_hz as f64;
            let s = 1.0 - (-hop_s / p.time_constant_s as f64).exp();
            let out = crate::model_input::pcen_f64(energies, &p, s);
            push(&mut run, "pcen", &out);
            out
        }
        None => {
            let floor = 10f64.powf(config.floor_db as f64 / 10.0);
            let out: Vec<Vec<f64>> = energies
                .iter()
                .map(|f| {
                    f.iter()
                        .map(|&e| {
                            let e = e.max(floor);
                            match config.log {
                                LogKind::Decibel => 10.0 * e.log10(),
                                LogKind::Natural => e.ln(),
                            }
                        })
                        .collect()
                })
                .collect();
            push(&mut run, "log", &out);
            out
        }
    };
    let bands = config.bands as usize;
    if let Some(r) = range_floor_units(config) {
        for f in &mut frames {
            let n = f.len().min(bands);
            let top = f[..n].iter().copied().fold(f64::NEG_INFINITY, f64::max);
            f[..n].iter_mut().for_each(|v| *v = v.max(top - r));
        }
        push(&mut run, "range_floor", &frames);
    }
    if let Some(m) = st.level_map {
        // Straight from the formula on the energies (not the stage's
        // log-add): y = clamp(g·k·ln(max(E, floor) + a) + b, lower, upper).
        let floor = 10f64.powf(config.floor_db as f64 / 10.0);
        let k = match config.log {
            LogKind::Decibel => 10.0 / std::f64::consts::LN_10,
            LogKind::Natural => 1.0,
        };
        let map = |v: f64| {
            let y = m.gain as f64 * k * (v + m.added_energy as f64).ln() + m.offset as f64;
            y.max(m.lower.map_or(f64::NEG_INFINITY, |l| l as f64))
                .min(m.upper.map_or(f64::INFINITY, |u| u as f64))
        };
        for (f, e) in frames.iter_mut().zip(energies) {
            for (i, v) in f.iter_mut().enumerate() {
                // Energy behind this value: the band's (raised by the range
                // floor when it acted) or, after the bands, the frame's.
                let floored = (*v / k).exp();
                let energy = if range_floor_units(config).is_some() {
                    floored
                } else {
                    e.get(i).copied().unwrap_or(floored).max(floor)
                };
                *v = map(energy);
            }
        }
        push(&mut run, "level_map", &frames);
    }
    if let Some(m) = st.mfcc {
        let dct =
            crate::dct::DctTables::new(config.bands as usize, m.coefficients as usize, m.lifter);
        frames = frames
            .iter()
            .map(|f| {
                let mut c = dct.apply_f64(&f[..bands.min(f.len())]);
                if m.log_energy {
                    c[0] = f[bands];
                }
                c
            })
            .collect();
        push(&mut run, "mfcc", &frames);
    }
    if st.normalise {
        for f in &mut frames {
            for ((v, &m), &d) in f.iter_mut().zip(stages.mean).zip(stages.deviation) {
                *v = (*v - m as f64) / d as f64;
            }
        }
        if st.quantise.is_none() {
            push(&mut run, "normalise", &frames);
        }
    }
    if let Some(q) = st.quantise {
        let codes: Vec<Vec<f64>> = frames
            .iter()
            .map(|f| {
                f.iter()
                    .map(|&v| quantise_f64(v, q.scale as f64, q.zero_point, q.codes))
                    .collect()
            })
            .collect();
        push(&mut run, "quantise", &codes);
    }
    run
}

/// The model's windows over the last stage's frames: every `stride`-th
/// frame once `frames` exist, each `frames × values` in time order (the
/// core's `FrameWindow` gives the same on the board).
pub fn model_windows(config: &FeatureConfig, last: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let Some(w) = config.stages.model_window else {
        return Vec::new();
    };
    let (f, k) = (w.frames as usize, w.stride as usize);
    let mut out = Vec::new();
    for end in f..=last.len() {
        // The core's window is handed out at pushes F, F + stride, …
        if (end - f) % k == 0 {
            out.push(last[end - f..end].iter().flatten().copied().collect());
        }
    }
    out
}
