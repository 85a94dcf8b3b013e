//! The stages after the filterbank as one streaming chain, chosen at run
//! time from the configuration: the core's own stage types, each fed the
//! frame before it, with their state carried from frame to frame (the board
//! chains the same types at compile time with `Then`, so the values are the
//! same bits).
//!
//! Every host path that runs stages goes through this chain: `check` and
//! `features` ([`crate::stages`]), `export` and the Python module
//! ([`crate::clip_runner`]). Each frame's stage outputs are handed to a
//! visitor in chain order, so a caller keeps the one stage it writes, or
//! records them all.

use anyhow::{Result, anyhow, bail};
use stapes_core::config::FeatureConfig;
use stapes_core::fixed::types::{I8F8, I16F16, I24F8};
use stapes_core::fixed_tables::FixedTables;
use stapes_core::normalise::FixedNormalisedQuantise;
use stapes_core::quantise::{AffineQuantiser, Code, CodeRange, FixedQuantiseStage, RawUnits};
use stapes_core::stage::FrameStage;
use stapes_core::stage_tables::StageTables;
use stapes_core::{
    FixedLevelMap, FixedLog, FixedMfcc, FixedPcen, FloatLevelMap, FloatLog, FloatMfcc, FloatPcen,
    Normalise, NormalisedQuantise, QuantiseStage, RangeFloor,
};

/// Largest stage output the host handles (the validator's band limit).
pub const HOST_VALUES: usize = 256;

/// One stage's output for one frame, in the arithmetic's own type.
#[derive(Clone, Copy, Debug)]
pub enum StageOut<'a> {
    /// An `f32` stage (the float path before the quantiser).
    Float(&'a [f32]),
    /// Fixed log levels or range floor: 1/256 dB (or ln) per LSB.
    Level(&'a [I8F8]),
    /// Fixed PCEN: 1/65536 per LSB.
    Pcen(&'a [I16F16]),
    /// Fixed MFCC: 1/256 per LSB.
    Cepstrum(&'a [I24F8]),
    /// int8 codes.
    Int8(&'a [i8]),
    /// uint8 codes.
    Uint8(&'a [u8]),
}

impl StageOut<'_> {
    /// Number of values.
    pub fn len(&self) -> usize {
        match self {
            StageOut::Float(v) => v.len(),
            StageOut::Level(v) => v.len(),
            StageOut::Pcen(v) => v.len(),
            StageOut::Cepstrum(v) => v.len(),
            StageOut::Int8(v) => v.len(),
            StageOut::Uint8(v) => v.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The first `n` values (all when there are fewer).
    pub fn head(self, n: usize) -> Self {
        match self {
            StageOut::Float(v) => StageOut::Float(&v[..n.min(v.len())]),
            StageOut::Level(v) => StageOut::Level(&v[..n.min(v.len())]),
            StageOut::Pcen(v) => StageOut::Pcen(&v[..n.min(v.len())]),
            StageOut::Cepstrum(v) => StageOut::Cepstrum(&v[..n.min(v.len())]),
            StageOut::Int8(v) => StageOut::Int8(&v[..n.min(v.len())]),
            StageOut::Uint8(v) => StageOut::Uint8(&v[..n.min(v.len())]),
        }
    }

    /// Whether the values are the board's exact integers (fixed stages and
    /// codes), not `f32`.
    pub fn is_integer(&self) -> bool {
        !matches!(self, StageOut::Float(_))
    }

    /// Value `i` in the stage's units (codes as they are).
    pub fn value(&self, i: usize) -> f64 {
        match self {
            StageOut::Float(v) => v[i] as f64,
            StageOut::Level(v) => v[i].to_bits() as f64 / 256.0,
            StageOut::Pcen(v) => v[i].to_bits() as f64 / 65536.0,
            StageOut::Cepstrum(v) => v[i].to_bits() as f64 / 256.0,
            StageOut::Int8(v) => v[i] as f64,
            StageOut::Uint8(v) => v[i] as f64,
        }
    }

    /// Value `i`'s raw integer (its bits, or the code), if it is one.
    pub fn raw(&self, i: usize) -> Option<i64> {
        Some(match self {
            StageOut::Float(_) => return None,
            StageOut::Level(v) => v[i].to_bits() as i64,
            StageOut::Pcen(v) => v[i].to_bits() as i64,
            StageOut::Cepstrum(v) => v[i].to_bits() as i64,
            StageOut::Int8(v) => v[i] as i64,
            StageOut::Uint8(v) => v[i] as i64,
        })
    }
}

/// `config` with the stages after position `last` of [`stage_names`]
/// removed (the window of frames is not a per-frame stage and goes too).
fn truncated(config: &FeatureConfig, last: usize) -> FeatureConfig {
    let names = stage_names(config);
    let keep = |name: &str| {
        names
            .iter()
            .position(|n| *n == name)
            .is_some_and(|i| i <= last)
    };
    let mut c = *config;
    let s = &mut c.stages;
    if !keep("range_floor") {
        s.range_floor = None;
    }
    if !keep("level_map") {
        s.level_map = None;
    }
    if !keep("mfcc") {
        s.mfcc = None;
    }
    if !keep("quantise") {
        s.quantise = None;
        if !keep("normalise") {
            s.normalise = false;
        }
    }
    c
}

/// Names of the configured stages, in chain order.
pub fn stage_names(config: &FeatureConfig) -> Vec<&'static str> {
    let s = &config.stages;
    let mut names = vec![if s.pcen.is_some() { "pcen" } else { "log" }];
    if s.range_floor.is_some() {
        names.push("range_floor");
    }
    if s.level_map.is_some() {
        names.push("level_map");
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
    use stapes_core::config::LogKind;
    config.stages.range_floor.map(|r| match config.log {
        LogKind::Decibel => r.below_peak_db as f64,
        LogKind::Natural => r.below_peak_db as f64 * std::f64::consts::LN_10 / 10.0,
    })
}

// ---- f32 ----

enum FloatLevel {
    Log(FloatLog),
    Pcen(Box<FloatPcen<HOST_VALUES>>),
}

enum FloatTail<'t> {
    None,
    Normalise(Normalise<'t>),
    Int8(QuantiseStage<i8, HOST_VALUES>),
    Uint8(QuantiseStage<u8, HOST_VALUES>),
    NormalisedInt8(NormalisedQuantise<'t, i8, HOST_VALUES>),
    NormalisedUint8(NormalisedQuantise<'t, u8, HOST_VALUES>),
}

/// The `f32` path's stages after the filterbank.
pub struct FloatChain<'t> {
    level: FloatLevel,
    floor: Option<RangeFloor<f32>>,
    map: Option<FloatLevelMap>,
    mfcc: Option<FloatMfcc<'t, HOST_VALUES>>,
    tail: FloatTail<'t>,
}

fn err(e: impl std::fmt::Display) -> anyhow::Error {
    anyhow!("{e}")
}

impl<'t> FloatChain<'t> {
    /// The chain `config` names, reading `stages`.
    pub fn new(config: &FeatureConfig, stages: &StageTables<'t>) -> Result<Self> {
        Self::up_to(config, stages, usize::MAX)
    }

    /// The chain's stages up to position `last` of [`stage_names`] (the
    /// later ones are neither built nor run).
    pub fn up_to(config: &FeatureConfig, stages: &StageTables<'t>, last: usize) -> Result<Self> {
        let config = &truncated(config, last);
        let st = &config.stages;
        let level = match st.pcen {
            Some(p) => {
                let hop_s = config.hop_samples as f32 / config.sample_rate_hz as f32;
                FloatLevel::Pcen(Box::new(
                    FloatPcen::new(p, p.smoothing(hop_s)).map_err(err)?,
                ))
            }
            None => FloatLevel::Log(FloatLog::for_config(config)),
        };
        let floor = range_floor_units(config)
            .map(|r| RangeFloor::new(r as f32).on_first(config.bands as usize));
        let mfcc = match st.mfcc {
            Some(m) => {
                let table = stages
                    .dct_f32(config)
                    .ok_or_else(|| anyhow!("the stage tables hold no DCT: regenerate them"))?;
                Some(
                    FloatMfcc::new(table)
                        .map_err(err)?
                        .with_log_energy(m.log_energy),
                )
            }
            None => None,
        };
        let tail = match (st.quantise, stages.statistics(config)) {
            (None, Some(stats)) => FloatTail::Normalise(Normalise::new(stats)),
            (None, None) => FloatTail::None,
            (Some(q), stats) => {
                let aq = AffineQuantiser::new(q.scale, q.zero_point, q.codes).map_err(err)?;
                match (q.codes, stats) {
                    (CodeRange::Int8, None) => {
                        FloatTail::Int8(QuantiseStage::new(aq).map_err(err)?)
                    }
                    (CodeRange::Uint8, None) => {
                        FloatTail::Uint8(QuantiseStage::new(aq).map_err(err)?)
                    }
                    (CodeRange::Int8, Some(s)) => {
                        FloatTail::NormalisedInt8(NormalisedQuantise::new(s, aq).map_err(err)?)
                    }
                    (CodeRange::Uint8, Some(s)) => {
                        FloatTail::NormalisedUint8(NormalisedQuantise::new(s, aq).map_err(err)?)
                    }
                }
            }
        };
        Ok(FloatChain {
            level,
            floor,
            map: FloatLevelMap::for_config(config),
            mfcc,
            tail,
        })
    }

    /// Runs one frame's band `energies` through every stage, handing each
    /// stage's output to `visit` in chain order.
    pub fn process(&mut self, energies: &mut [f32], visit: &mut impl FnMut(StageOut<'_>)) {
        let mut frame: &mut [f32] = match &mut self.level {
            FloatLevel::Log(s) => s.process(energies),
            FloatLevel::Pcen(s) => s.process(energies),
        };
        visit(StageOut::Float(frame));
        if let Some(s) = &mut self.floor {
            frame = s.process(frame);
            visit(StageOut::Float(frame));
        }
        if let Some(s) = &mut self.map {
            frame = s.process(frame);
            visit(StageOut::Float(frame));
        }
        if let Some(s) = &mut self.mfcc {
            frame = s.process(frame);
            visit(StageOut::Float(frame));
        }
        match &mut self.tail {
            FloatTail::None => {}
            FloatTail::Normalise(s) => visit(StageOut::Float(s.process(frame))),
            FloatTail::Int8(s) => visit(StageOut::Int8(s.process(frame))),
            FloatTail::Uint8(s) => visit(StageOut::Uint8(s.process(frame))),
            FloatTail::NormalisedInt8(s) => visit(StageOut::Int8(s.process(frame))),
            FloatTail::NormalisedUint8(s) => visit(StageOut::Uint8(s.process(frame))),
        }
    }

    /// Clears the carried state (PCEN's smoother), as a new chain.
    pub fn reset(&mut self) {
        match &mut self.level {
            FloatLevel::Log(s) => s.reset(),
            FloatLevel::Pcen(s) => s.reset(),
        }
        self.floor.iter_mut().for_each(|s| s.reset());
        self.mfcc.iter_mut().for_each(|s| s.reset());
    }

    /// Values the quantiser clamped (or found NaN) since the start.
    pub fn clamped(&self) -> u64 {
        match &self.tail {
            FloatTail::Int8(s) => s.clamped(),
            FloatTail::Uint8(s) => s.clamped(),
            FloatTail::NormalisedInt8(s) => s.clamped(),
            FloatTail::NormalisedUint8(s) => s.clamped(),
            FloatTail::None | FloatTail::Normalise(_) => 0,
        }
    }
}

// ---- fixed ----

enum FixedLevel<'t> {
    Log(Box<FixedLog<'t, HOST_VALUES>>),
    Pcen(Box<FixedPcen<HOST_VALUES>>),
}

enum FixedCodes<'t> {
    None,
    Int8(FixedQuantiseStage<i8, HOST_VALUES>),
    Uint8(FixedQuantiseStage<u8, HOST_VALUES>),
    NormalisedInt8(FixedNormalisedQuantise<'t, i8, HOST_VALUES>),
    NormalisedUint8(FixedNormalisedQuantise<'t, u8, HOST_VALUES>),
}

impl FixedCodes<'_> {
    fn process<In: RawUnits>(&mut self, frame: &mut [In], visit: &mut impl FnMut(StageOut<'_>)) {
        match self {
            FixedCodes::None => {}
            FixedCodes::Int8(s) => visit(StageOut::Int8(s.process(frame))),
            FixedCodes::Uint8(s) => visit(StageOut::Uint8(s.process(frame))),
            FixedCodes::NormalisedInt8(s) => visit(StageOut::Int8(s.process(frame))),
            FixedCodes::NormalisedUint8(s) => visit(StageOut::Uint8(s.process(frame))),
        }
    }

    fn clamped(&self) -> u64 {
        match self {
            FixedCodes::None => 0,
            FixedCodes::Int8(s) => s.clamped(),
            FixedCodes::Uint8(s) => s.clamped(),
            FixedCodes::NormalisedInt8(s) => s.clamped(),
            FixedCodes::NormalisedUint8(s) => s.clamped(),
        }
    }
}

fn fixed_codes<'t, T: Code>(
    config: &FeatureConfig,
    stages: &StageTables<'t>,
    normalised: fn(FixedNormalisedQuantise<'t, T, HOST_VALUES>) -> FixedCodes<'t>,
    plain: fn(FixedQuantiseStage<T, HOST_VALUES>) -> FixedCodes<'t>,
) -> Result<FixedCodes<'t>> {
    if config.stages.normalise {
        let stage = stages
            .fixed_normalised_quantiser::<T, HOST_VALUES>(config)
            .ok_or_else(|| {
                anyhow!("the stage tables hold no fixed normalising quantiser: regenerate them")
            })?;
        return Ok(normalised(stage));
    }
    let q = stages
        .fixed_quantiser(config)
        .ok_or_else(|| anyhow!("the stage tables hold no fixed quantiser: regenerate them"))?;
    Ok(plain(FixedQuantiseStage::new(q).map_err(err)?))
}

/// The fixed path's stages after the filterbank (both precisions share
/// them: they take energy words).
pub struct FixedChain<'t> {
    level: FixedLevel<'t>,
    floor: Option<RangeFloor<I8F8>>,
    map: Option<FixedLevelMap>,
    mfcc: Option<FixedMfcc<'t, HOST_VALUES>>,
    codes: FixedCodes<'t>,
}

impl<'t> FixedChain<'t> {
    /// The chain `config` names; `tables` give the log, `stages` the rest.
    pub fn new(
        config: &FeatureConfig,
        tables: &FixedTables<'t>,
        stages: &StageTables<'t>,
    ) -> Result<Self> {
        Self::up_to(config, tables, stages, usize::MAX)
    }

    /// The chain's stages up to position `last` of [`stage_names`].
    pub fn up_to(
        config: &FeatureConfig,
        tables: &FixedTables<'t>,
        stages: &StageTables<'t>,
        last: usize,
    ) -> Result<Self> {
        let full = config;
        let config = &truncated(config, last);
        let st = &config.stages;
        let _ = full;
        if st.normalise && st.quantise.is_none() {
            bail!(
                "the fixed-point arithmetics normalise only folded into the quantiser: add \
                 [stages.quantise] (the model's int8 or uint8 input), or use --arith f32"
            );
        }
        let level = match st.pcen {
            Some(_) => FixedLevel::Pcen(Box::new(FixedPcen::new(
                stages
                    .fixed_pcen(config)
                    .ok_or_else(|| anyhow!("the stage tables hold no fixed PCEN parameters"))?,
            ))),
            None => FixedLevel::Log(Box::new(FixedLog::for_tables(tables))),
        };
        let (floor, mfcc) = match level {
            // PCEN's output goes to the quantiser only (the validator
            // refuses a range floor or MFCC after it).
            FixedLevel::Pcen(_) => (None, None),
            FixedLevel::Log(_) => {
                let floor = stages
                    .fixed_range_floor(config)
                    .map(|f| f.on_first(config.bands as usize));
                let mfcc = match st.mfcc {
                    Some(m) => {
                        let table = stages.dct_q15(config).ok_or_else(|| {
                            anyhow!("the stage tables hold no Q15 DCT: regenerate them")
                        })?;
                        Some(
                            FixedMfcc::new(table)
                                .map_err(err)?
                                .with_log_energy(m.log_energy),
                        )
                    }
                    None => None,
                };
                (floor, mfcc)
            }
        };
        let codes = match st.quantise.map(|q| q.codes) {
            None => FixedCodes::None,
            Some(CodeRange::Int8) => {
                fixed_codes::<i8>(config, stages, FixedCodes::NormalisedInt8, FixedCodes::Int8)?
            }
            Some(CodeRange::Uint8) => fixed_codes::<u8>(
                config,
                stages,
                FixedCodes::NormalisedUint8,
                FixedCodes::Uint8,
            )?,
        };
        let map = match st.level_map {
            Some(_) => Some(FixedLevelMap::for_config(config).ok_or_else(|| {
                anyhow!("stages.level_map does not fit the fixed formats: use --arith f32")
            })?),
            None => None,
        };
        Ok(FixedChain {
            level,
            floor,
            map,
            mfcc,
            codes,
        })
    }

    /// Runs one frame's energy words through every stage, handing each
    /// stage's output to `visit` in chain order.
    pub fn process(&mut self, words: &mut [i32], visit: &mut impl FnMut(StageOut<'_>)) {
        match &mut self.level {
            FixedLevel::Pcen(s) => {
                let out = s.process(words);
                visit(StageOut::Pcen(out));
                self.codes.process(out, visit);
            }
            FixedLevel::Log(s) => {
                let mut levels = s.process(words);
                visit(StageOut::Level(levels));
                if let Some(f) = &mut self.floor {
                    levels = f.process(levels);
                    visit(StageOut::Level(levels));
                }
                if let Some(m) = &mut self.map {
                    levels = m.process(levels);
                    visit(StageOut::Level(levels));
                }
                match &mut self.mfcc {
                    Some(m) => {
                        let c = m.process(levels);
                        visit(StageOut::Cepstrum(c));
                        self.codes.process(c, visit);
                    }
                    None => self.codes.process(levels, visit),
                }
            }
        }
    }

    /// Clears the carried state (PCEN's smoother), as a new chain.
    pub fn reset(&mut self) {
        match &mut self.level {
            FixedLevel::Log(s) => s.reset(),
            FixedLevel::Pcen(s) => s.reset(),
        }
        self.floor.iter_mut().for_each(|s| s.reset());
        self.mfcc.iter_mut().for_each(|s| s.reset());
    }

    /// Values the quantiser clamped since the start.
    pub fn clamped(&self) -> u64 {
        self.codes.clamped()
    }
}
