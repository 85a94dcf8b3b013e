//! The stages after the filterbank on the host: the core's own stage types,
//! chosen at run time from the configuration (the board chains the same
//! types at compile time with `Then`, so the values are the same bits),
//! and their float64 reference.
//!
//! Every stage's output is recorded, so `check` compares each stage with its
//! reference and `features` writes whichever stage a user asks for.

use anyhow::{Result, anyhow, bail};
use stapes_core::FixedArithmetic;
use stapes_core::config::{FeatureConfig, LogKind};
use stapes_core::fixed::types::I8F8;
use stapes_core::fixed_tables::FixedTables;
use stapes_core::quantise::{AffineQuantiser, CodeRange, FixedQuantiseStage};
use stapes_core::stage::{FrameStage, Unchanged};
use stapes_core::stage_tables::StageTables;
use stapes_core::table::TableView;
use stapes_core::{
    FixedLog, FixedMfcc, FixedPcen, FloatLog, FloatMfcc, FloatPcen, Normalise, NormalisedQuantise,
    QuantiseStage, RangeFloor,
};

use crate::run::Samples;

/// Largest stage output the host handles (the validator's band limit).
pub const HOST_VALUES: usize = 256;

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

/// Names of the configured stages, in chain order.
pub fn stage_names(config: &FeatureConfig) -> Vec<&'static str> {
    let s = &config.stages;
    let mut names = vec![if s.pcen.is_some() { "pcen" } else { "log" }];
    if s.range_floor.is_some() {
        names.push("range_floor");
    }
    if s.mfcc.is_some() {
        names.push("mfcc");
    }
    if s.normalise && s.quantise.is_none() {
        names.push("normalise");
    }
    if s.quantise.is_some() {
        names.push("quantise");
    }
    names
}

/// The range floor in the log's own units.
pub fn range_floor_units(config: &FeatureConfig) -> Option<f64> {
    config.stages.range_floor.map(|r| match config.log {
        LogKind::Decibel => r.below_peak_db as f64,
        LogKind::Natural => r.below_peak_db as f64 * std::f64::consts::LN_10 / 10.0,
    })
}

fn record<T: Copy>(
    name: &'static str,
    frames: &[Vec<T>],
    value: impl Fn(T) -> f64,
    raw: Option<&dyn Fn(T) -> i64>,
) -> StageFrames {
    StageFrames {
        name,
        values: frames
            .iter()
            .map(|f| f.iter().map(|&v| value(v)).collect())
            .collect(),
        raw: raw.map(|r| {
            frames
                .iter()
                .map(|f| f.iter().map(|&v| r(v)).collect())
                .collect()
        }),
    }
}

/// Applies `stage` to each frame in turn (its state carried across frames).
fn apply<In: Copy, S: FrameStage<In>>(stage: &mut S, frames: &mut [Vec<In>]) -> Vec<Vec<S::Out>> {
    frames
        .iter_mut()
        .map(|f| stage.process(f).to_vec())
        .collect()
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

fn quantise_f32<T: stapes_core::quantise::Code + Into<i32>>(
    config: &FeatureConfig,
    stages: &StageTables<'_>,
    frames: &mut [Vec<f32>],
) -> Result<(Vec<Vec<i32>>, u64)> {
    let q = config.stages.quantise.expect("called with a quantiser");
    let aq = AffineQuantiser::new(q.scale, q.zero_point, q.codes).map_err(|e| anyhow!("{e}"))?;
    Ok(match stages.statistics(config) {
        Some(stats) => {
            let mut stage =
                NormalisedQuantise::<T, HOST_VALUES>::new(stats, aq).map_err(|e| anyhow!("{e}"))?;
            let codes = apply(&mut stage, frames);
            (to_i32(&codes), stage.clamped())
        }
        None => {
            let mut stage = QuantiseStage::<T, HOST_VALUES>::new(aq).map_err(|e| anyhow!("{e}"))?;
            let codes = apply(&mut stage, frames);
            (to_i32(&codes), stage.clamped())
        }
    })
}

fn to_i32<T: Copy + Into<i32>>(frames: &[Vec<T>]) -> Vec<Vec<i32>> {
    frames
        .iter()
        .map(|f| f.iter().map(|&v| v.into()).collect())
        .collect()
}

fn codes_stage(codes: &[Vec<i32>]) -> StageFrames {
    record("quantise", codes, |v| v as f64, Some(&|v: i32| v as i64))
}

/// The f32 stages over linear band `energies` (from [`float_energies`]).
pub fn run_float_stages(
    config: &FeatureConfig,
    stages: &StageTables<'_>,
    energies: &[Vec<f32>],
) -> Result<StageRun> {
    let st = &config.stages;
    let mut run = StageRun::default();
    let mut frames: Vec<Vec<f32>> = energies.to_vec();
    let f = |v: f32| v as f64;
    frames = match st.pcen {
        Some(p) => {
            let hop_s = config.hop_samples as f32 / config.sample_rate_hz as f32;
            let mut pcen =
                FloatPcen::<HOST_VALUES>::new(p, p.smoothing(hop_s)).map_err(|e| anyhow!("{e}"))?;
            let out = apply(&mut pcen, &mut frames);
            run.stages.push(record("pcen", &out, f, None));
            out
        }
        None => {
            let out = apply(&mut FloatLog::for_config(config), &mut frames);
            run.stages.push(record("log", &out, f, None));
            out
        }
    };
    let bands = config.bands as usize;
    let log_energy = st.mfcc.is_some_and(|m| m.log_energy);
    if let Some(r) = range_floor_units(config) {
        frames = apply(&mut RangeFloor::new(r as f32).on_first(bands), &mut frames);
        run.stages.push(record("range_floor", &frames, f, None));
    }
    if st.mfcc.is_some() {
        let table = stages.dct_f32(config).expect("mfcc configured");
        let mut mfcc = FloatMfcc::<HOST_VALUES>::new(table)
            .map_err(|e| anyhow!("{e}"))?
            .with_log_energy(log_energy);
        frames = apply(&mut mfcc, &mut frames);
        run.stages.push(record("mfcc", &frames, f, None));
    }
    match (st.quantise, stages.statistics(config)) {
        (None, Some(stats)) => {
            frames = apply(&mut Normalise::new(stats), &mut frames);
            run.stages.push(record("normalise", &frames, f, None));
        }
        (Some(q), _) => {
            let (codes, clamped) = match q.codes {
                CodeRange::Int8 => quantise_f32::<i8>(config, stages, &mut frames)?,
                CodeRange::Uint8 => quantise_f32::<u8>(config, stages, &mut frames)?,
            };
            run.clamped = clamped;
            run.stages.push(codes_stage(&codes));
        }
        (None, None) => {}
    }
    Ok(run)
}

fn fixed_quantise<In: stapes_core::quantise::RawUnits, T>(
    config: &FeatureConfig,
    stages: &StageTables<'_>,
    frames: &mut [Vec<In>],
) -> Result<(Vec<Vec<i32>>, u64)>
where
    T: stapes_core::quantise::Code + Into<i32>,
{
    if config.stages.normalise {
        let mut stage = stages
            .fixed_normalised_quantiser::<T, HOST_VALUES>(config)
            .ok_or_else(|| {
                anyhow!("the stage tables hold no fixed normalising quantiser: regenerate them")
            })?;
        let codes = apply(&mut stage, frames);
        return Ok((to_i32(&codes), stage.clamped()));
    }
    let q = stages
        .fixed_quantiser(config)
        .ok_or_else(|| anyhow!("the stage tables hold no fixed quantiser: regenerate them"))?;
    let mut stage = FixedQuantiseStage::<T, HOST_VALUES>::new(q).map_err(|e| anyhow!("{e}"))?;
    let codes = apply(&mut stage, frames);
    Ok((to_i32(&codes), stage.clamped()))
}

/// The fixed path's codes of `frames` in the configuration's code range
/// (and the values clamped), or `None` without a quantiser.
fn fixed_codes<In: stapes_core::quantise::RawUnits>(
    config: &FeatureConfig,
    stages: &StageTables<'_>,
    frames: &mut [Vec<In>],
) -> Result<Option<(Vec<Vec<i32>>, u64)>> {
    Ok(match config.stages.quantise.map(|q| q.codes) {
        Some(CodeRange::Int8) => Some(fixed_quantise::<_, i8>(config, stages, frames)?),
        Some(CodeRange::Uint8) => Some(fixed_quantise::<_, u8>(config, stages, frames)?),
        None => None,
    })
}

/// The fixed stages over energy words (from [`fixed_energies`]); `tables`
/// give the log.
pub fn run_fixed_stages(
    config: &FeatureConfig,
    tables: &FixedTables<'_>,
    stages: &StageTables<'_>,
    energies: &[Vec<i32>],
) -> Result<StageRun> {
    let st = &config.stages;
    if st.normalise && st.quantise.is_none() {
        bail!(
            "the fixed-point arithmetics normalise only folded into the quantiser: add \
             [stages.quantise] (the model's int8 or uint8 input), or use --arith f32"
        );
    }
    let mut run = StageRun::default();
    let mut words = energies.to_vec();
    let unit8 = |v: i64| v as f64 / 256.0;
    let codes = if let Some(_p) = st.pcen {
        let params = stages
            .fixed_pcen(config)
            .ok_or_else(|| anyhow!("the stage tables hold no fixed PCEN parameters"))?;
        let mut pcen = FixedPcen::<HOST_VALUES>::new(params);
        let mut out = apply(&mut pcen, &mut words);
        run.stages.push(record(
            "pcen",
            &out,
            |v| v.to_bits() as f64 / 65536.0,
            Some(&|v: stapes_core::fixed::types::I16F16| v.to_bits() as i64),
        ));
        fixed_codes(config, stages, &mut out)?
    } else {
        let mut levels: Vec<Vec<I8F8>> =
            apply(&mut FixedLog::<HOST_VALUES>::for_tables(tables), &mut words);
        let bits = |v: I8F8| v.to_bits() as i64;
        run.stages
            .push(record("log", &levels, |v| unit8(bits(v)), Some(&bits)));
        let bands = config.bands as usize;
        if let Some(floor) = stages.fixed_range_floor(config) {
            levels = apply(&mut floor.on_first(bands), &mut levels);
            run.stages.push(record(
                "range_floor",
                &levels,
                |v| unit8(bits(v)),
                Some(&bits),
            ));
        }
        if st.mfcc.is_some() {
            let table = stages.dct_q15(config).expect("mfcc configured");
            let mut mfcc = FixedMfcc::<HOST_VALUES>::new(table)
                .map_err(|e| anyhow!("{e}"))?
                .with_log_energy(st.mfcc.is_some_and(|m| m.log_energy));
            let mut c = apply(&mut mfcc, &mut levels);
            let cbits = |v: stapes_core::fixed::types::I24F8| v.to_bits() as i64;
            run.stages
                .push(record("mfcc", &c, |v| unit8(cbits(v)), Some(&cbits)));
            fixed_codes(config, stages, &mut c)?
        } else {
            fixed_codes(config, stages, &mut levels)?
        }
    };
    if let Some((codes, clamped)) = codes {
        run.clamped = clamped;
        run.stages.push(codes_stage(&codes));
    }
    Ok(run)
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
