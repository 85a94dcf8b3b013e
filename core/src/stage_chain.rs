//! The stages after the filterbank chosen at run time from a configuration:
//! the same stage types a board chains at compile time with
//! [`Then`](crate::stage::Then), held in enums instead (no `dyn`, no
//! allocation), so one build runs whatever stages a configuration or a
//! table blob names. The host tools and the C API run their stages through
//! this chain; the values are the same bits as the compile-time chain's.
//!
//! A front end built with the [`Unchanged`](crate::stage::Unchanged) stage
//! hands out the filterbank's energies; [`FloatStageChain::process`] (or
//! [`FixedStageChain::process`]) runs them through every configured stage
//! and hands each stage's output, in chain order, to a visitor.
//!
//! ```
//! mod kws {
//!     include!("../../tables/kws16k-mel40.rs");
//! }
//! use stapes_core::stage::Unchanged;
//! use stapes_core::stage_chain::{FixedStageChain, StageValues};
//! use stapes_core::{FixedFrontEnd, Fixed16};
//!
//! let tables = kws::FIXED16_SPARSE;
//! let mut fe = FixedFrontEnd::<Fixed16, 1024, 320, 40, Unchanged>::with_stages(
//!     kws::CONFIG,
//!     tables,
//!     Unchanged,
//! )?;
//! let mut chain =
//!     FixedStageChain::<40>::new(&kws::CONFIG, &tables, &kws::STAGE_TABLES).unwrap();
//! let samples = [0i16; 1600];
//! let mut rest = &samples[..];
//! let mut words = [0i32; 40];
//! while let Some(frame) = fe.next_frame(&mut rest) {
//!     words.copy_from_slice(frame.bands);
//!     let mut codes = 0;
//!     chain.process(&mut words, &mut |out: StageValues<'_>| {
//!         if let StageValues::Int8(c) = out {
//!             codes = c.len();
//!         }
//!     });
//!     assert_eq!(codes, 40);
//! }
//! # Ok::<(), stapes_core::FrontEndError>(())
//! ```

use core::fmt;

use crate::config::{FeatureConfig, LogKind};
use crate::fixed::types::{I8F8, I16F16, I24F8};
use crate::fixed_tables::FixedTables;
use crate::level_map::{FixedLevelMap, FloatLevelMap};
use crate::log::{FixedLog, FloatLog};
use crate::mfcc::{FixedMfcc, FloatMfcc, MfccError};
use crate::normalise::{FixedNormalisedQuantise, Normalise, NormaliseError, NormalisedQuantise};
use crate::pcen::{FloatPcen, PcenError};
use crate::pcen_fixed::FixedPcen;
use crate::quantise::{
    AffineQuantiser, Code, CodeRange, FixedQuantiseStage, QuantiseStage, QuantiserError, RawUnits,
};
use crate::range_floor::RangeFloor;
use crate::stage::FrameStage;
use crate::stage_tables::StageTables;

/// One stage of a chain, as a configuration names it.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum StageKind {
    /// The log of each band's energy.
    Log,
    /// Per-channel energy normalisation (instead of the log).
    Pcen,
    /// Each frame's values kept within a range below its peak.
    RangeFloor,
    /// An affine map of the log with added energy and bounds.
    LevelMap,
    /// The DCT-II of the levels (cepstral coefficients).
    Mfcc,
    /// Per-value mean and deviation (f32 output).
    Normalise,
    /// The model's integer codes (normalised first when configured).
    Quantise,
}

impl StageKind {
    /// The stage's name (as configuration files and tools spell it).
    pub fn name(self) -> &'static str {
        match self {
            StageKind::Log => "log",
            StageKind::Pcen => "pcen",
            StageKind::RangeFloor => "range_floor",
            StageKind::LevelMap => "level_map",
            StageKind::Mfcc => "mfcc",
            StageKind::Normalise => "normalise",
            StageKind::Quantise => "quantise",
        }
    }
}

/// Most stages a chain has.
pub const MAX_STAGES: usize = 5;

/// The stages a configuration names, in chain order.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct StageList {
    kinds: [StageKind; MAX_STAGES],
    len: usize,
}

impl StageList {
    /// The stages of `config`, in chain order: the log (or PCEN) first.
    pub fn of(config: &FeatureConfig) -> Self {
        let s = &config.stages;
        let mut list = StageList {
            kinds: [StageKind::Log; MAX_STAGES],
            len: 0,
        };
        let mut add = |k: StageKind| {
            list.kinds[list.len] = k;
            list.len += 1;
        };
        add(if s.pcen.is_some() {
            StageKind::Pcen
        } else {
            StageKind::Log
        });
        if s.range_floor.is_some() {
            add(StageKind::RangeFloor);
        }
        if s.level_map.is_some() {
            add(StageKind::LevelMap);
        }
        if s.mfcc.is_some() {
            add(StageKind::Mfcc);
        }
        if s.normalise && s.quantise.is_none() {
            add(StageKind::Normalise);
        }
        if s.quantise.is_some() {
            add(StageKind::Quantise);
        }
        list
    }

    /// The stages as a slice.
    pub fn as_slice(&self) -> &[StageKind] {
        &self.kinds[..self.len]
    }

    /// The position of `kind` in the chain, if it is there.
    pub fn position(&self, kind: StageKind) -> Option<usize> {
        self.as_slice().iter().position(|&k| k == kind)
    }
}

/// `config` with the stages after position `last` of its [`StageList`]
/// removed (the model's window of frames is not a per-frame stage and is
/// kept as it is).
pub fn truncated(config: &FeatureConfig, last: usize) -> FeatureConfig {
    let list = StageList::of(config);
    let keep = |k: StageKind| list.position(k).is_some_and(|i| i <= last);
    let mut c = *config;
    let s = &mut c.stages;
    if !keep(StageKind::RangeFloor) {
        s.range_floor = None;
    }
    if !keep(StageKind::LevelMap) {
        s.level_map = None;
    }
    if !keep(StageKind::Mfcc) {
        s.mfcc = None;
    }
    if !keep(StageKind::Quantise) {
        s.quantise = None;
        if !keep(StageKind::Normalise) {
            s.normalise = false;
        }
    }
    c
}

/// The range floor in the log's own units (dB, or nepers for a natural log).
pub fn range_floor_units(config: &FeatureConfig) -> Option<f64> {
    config.stages.range_floor.map(|r| match config.log {
        LogKind::Decibel => r.below_peak_db as f64,
        LogKind::Natural => r.below_peak_db as f64 * core::f64::consts::LN_10 / 10.0,
    })
}

/// One stage's output for one frame, in the arithmetic's own type.
#[derive(Clone, Copy, Debug)]
pub enum StageValues<'a> {
    /// An `f32` stage (the float path before the quantiser).
    Float(&'a [f32]),
    /// Fixed log levels, range floor or level map: 1/256 per LSB.
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

impl StageValues<'_> {
    /// Number of values.
    pub fn len(&self) -> usize {
        match self {
            StageValues::Float(v) => v.len(),
            StageValues::Level(v) => v.len(),
            StageValues::Pcen(v) => v.len(),
            StageValues::Cepstrum(v) => v.len(),
            StageValues::Int8(v) => v.len(),
            StageValues::Uint8(v) => v.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The first `n` values (all when there are fewer).
    pub fn head(self, n: usize) -> Self {
        match self {
            StageValues::Float(v) => StageValues::Float(&v[..n.min(v.len())]),
            StageValues::Level(v) => StageValues::Level(&v[..n.min(v.len())]),
            StageValues::Pcen(v) => StageValues::Pcen(&v[..n.min(v.len())]),
            StageValues::Cepstrum(v) => StageValues::Cepstrum(&v[..n.min(v.len())]),
            StageValues::Int8(v) => StageValues::Int8(&v[..n.min(v.len())]),
            StageValues::Uint8(v) => StageValues::Uint8(&v[..n.min(v.len())]),
        }
    }

    /// Whether the values are the board's exact integers (fixed stages and
    /// codes), not `f32`.
    pub fn is_integer(&self) -> bool {
        !matches!(self, StageValues::Float(_))
    }

    /// Value `i` in the stage's units (codes as they are).
    pub fn value(&self, i: usize) -> f64 {
        match self {
            StageValues::Float(v) => v[i] as f64,
            StageValues::Level(v) => v[i].to_bits() as f64 / 256.0,
            StageValues::Pcen(v) => v[i].to_bits() as f64 / 65536.0,
            StageValues::Cepstrum(v) => v[i].to_bits() as f64 / 256.0,
            StageValues::Int8(v) => v[i] as f64,
            StageValues::Uint8(v) => v[i] as f64,
        }
    }

    /// Value `i`'s raw integer (its bits, or the code), if it is one.
    pub fn raw(&self, i: usize) -> Option<i64> {
        Some(match self {
            StageValues::Float(_) => return None,
            StageValues::Level(v) => v[i].to_bits() as i64,
            StageValues::Pcen(v) => v[i].to_bits() as i64,
            StageValues::Cepstrum(v) => v[i].to_bits() as i64,
            StageValues::Int8(v) => v[i] as i64,
            StageValues::Uint8(v) => v[i] as i64,
        })
    }
}

/// Why a chain could not be built from a configuration and its tables.
#[derive(Clone, Copy, Debug, PartialEq)]
#[non_exhaustive]
pub enum StageChainError {
    /// PCEN's parameters are out of range.
    Pcen(PcenError),
    /// The DCT table does not fit.
    Mfcc(MfccError),
    /// The quantiser's parameters are out of range.
    Quantiser(QuantiserError),
    /// The normalisation statistics do not fit.
    Normalise(NormaliseError),
    /// The stage tables lack a table the configuration needs (named).
    MissingTable(&'static str),
    /// The fixed arithmetics normalise only inside the quantiser.
    FixedNormaliseWithoutQuantiser,
    /// The level map's parameters do not fit the fixed formats.
    LevelMapOutOfFixedRange,
    /// The chain's buffers hold fewer values than the configuration needs.
    Capacity {
        /// Values the configuration needs.
        needed: usize,
        /// Values the chain's type provides.
        capacity: usize,
    },
}

impl fmt::Display for StageChainError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            StageChainError::Pcen(e) => write!(f, "{e}"),
            StageChainError::Mfcc(e) => write!(f, "{e}"),
            StageChainError::Quantiser(e) => write!(f, "{e}"),
            StageChainError::Normalise(e) => write!(f, "{e}"),
            StageChainError::MissingTable(what) => {
                write!(f, "the stage tables hold no {what}: regenerate them")
            }
            StageChainError::FixedNormaliseWithoutQuantiser => write!(
                f,
                "the fixed-point arithmetics normalise only folded into the quantiser: add \
                 [stages.quantise] (the model's int8 or uint8 input), or use --arith f32"
            ),
            StageChainError::LevelMapOutOfFixedRange => write!(
                f,
                "stages.level_map does not fit the fixed formats: use --arith f32"
            ),
            StageChainError::Capacity { needed, capacity } => write!(
                f,
                "the stage chain holds {capacity} values per frame but the configuration needs \
                 {needed}: raise the chain's value capacity"
            ),
        }
    }
}

impl core::error::Error for StageChainError {}

fn check_capacity(config: &FeatureConfig, capacity: usize) -> Result<(), StageChainError> {
    let needed = config.stage_inputs().max(
        config
            .stages
            .mfcc
            .map_or(0, |m| m.coefficients as usize + 1),
    );
    if needed > capacity {
        return Err(StageChainError::Capacity { needed, capacity });
    }
    Ok(())
}

// ---- f32 ----

#[derive(Clone, Debug)]
enum FloatLevel<const V: usize> {
    Log(FloatLog),
    Pcen(FloatPcen<V>),
}

#[derive(Clone, Debug)]
enum FloatTail<'t, const V: usize> {
    None,
    Normalise(Normalise<'t>),
    Int8(QuantiseStage<i8, V>),
    Uint8(QuantiseStage<u8, V>),
    NormalisedInt8(NormalisedQuantise<'t, i8, V>),
    NormalisedUint8(NormalisedQuantise<'t, u8, V>),
}

/// The `f32` path's stages after the filterbank, for up to `V` values per
/// frame.
#[derive(Clone, Debug)]
pub struct FloatStageChain<'t, const V: usize> {
    level: FloatLevel<V>,
    floor: Option<RangeFloor<f32>>,
    map: Option<FloatLevelMap>,
    mfcc: Option<FloatMfcc<'t, V>>,
    tail: FloatTail<'t, V>,
}

impl<'t, const V: usize> FloatStageChain<'t, V> {
    /// The chain `config` names, reading `stages`.
    pub fn new(config: &FeatureConfig, stages: &StageTables<'t>) -> Result<Self, StageChainError> {
        Self::up_to(config, stages, usize::MAX)
    }

    /// The chain's stages up to position `last` of its [`StageList`] (the
    /// later ones are neither built nor run).
    pub fn up_to(
        config: &FeatureConfig,
        stages: &StageTables<'t>,
        last: usize,
    ) -> Result<Self, StageChainError> {
        let config = &truncated(config, last);
        check_capacity(config, V)?;
        let st = &config.stages;
        let level = match st.pcen {
            Some(p) => {
                let hop_s = config.hop_samples as f32 / config.sample_rate_hz as f32;
                FloatLevel::Pcen(
                    FloatPcen::new(p, p.smoothing(hop_s)).map_err(StageChainError::Pcen)?,
                )
            }
            None => FloatLevel::Log(FloatLog::for_config(config)),
        };
        let floor = range_floor_units(config)
            .map(|r| RangeFloor::new(r as f32).on_first(config.bands as usize));
        let mfcc = match st.mfcc {
            Some(m) => {
                let table = stages
                    .dct_f32(config)
                    .ok_or(StageChainError::MissingTable("DCT"))?;
                Some(
                    FloatMfcc::new(table)
                        .map_err(StageChainError::Mfcc)?
                        .with_log_energy(m.log_energy),
                )
            }
            None => None,
        };
        let q_err = StageChainError::Quantiser;
        let tail = match (st.quantise, stages.statistics(config)) {
            (None, Some(stats)) => FloatTail::Normalise(Normalise::new(stats)),
            (None, None) => FloatTail::None,
            (Some(q), stats) => {
                let aq = AffineQuantiser::new(q.scale, q.zero_point, q.codes).map_err(q_err)?;
                match (q.codes, stats) {
                    (CodeRange::Int8, None) => {
                        FloatTail::Int8(QuantiseStage::new(aq).map_err(q_err)?)
                    }
                    (CodeRange::Uint8, None) => {
                        FloatTail::Uint8(QuantiseStage::new(aq).map_err(q_err)?)
                    }
                    (CodeRange::Int8, Some(s)) => FloatTail::NormalisedInt8(
                        NormalisedQuantise::new(s, aq).map_err(StageChainError::Normalise)?,
                    ),
                    (CodeRange::Uint8, Some(s)) => FloatTail::NormalisedUint8(
                        NormalisedQuantise::new(s, aq).map_err(StageChainError::Normalise)?,
                    ),
                }
            }
        };
        Ok(FloatStageChain {
            level,
            floor,
            map: FloatLevelMap::for_config(config),
            mfcc,
            tail,
        })
    }

    /// Runs one frame's band `energies` through every stage, handing each
    /// stage's output to `visit` in chain order.
    pub fn process(&mut self, energies: &mut [f32], visit: &mut impl FnMut(StageValues<'_>)) {
        let mut frame: &mut [f32] = match &mut self.level {
            FloatLevel::Log(s) => s.process(energies),
            FloatLevel::Pcen(s) => s.process(energies),
        };
        visit(StageValues::Float(frame));
        if let Some(s) = &mut self.floor {
            frame = s.process(frame);
            visit(StageValues::Float(frame));
        }
        if let Some(s) = &mut self.map {
            frame = s.process(frame);
            visit(StageValues::Float(frame));
        }
        if let Some(s) = &mut self.mfcc {
            frame = s.process(frame);
            visit(StageValues::Float(frame));
        }
        match &mut self.tail {
            FloatTail::None => {}
            FloatTail::Normalise(s) => visit(StageValues::Float(s.process(frame))),
            FloatTail::Int8(s) => visit(StageValues::Int8(s.process(frame))),
            FloatTail::Uint8(s) => visit(StageValues::Uint8(s.process(frame))),
            FloatTail::NormalisedInt8(s) => visit(StageValues::Int8(s.process(frame))),
            FloatTail::NormalisedUint8(s) => visit(StageValues::Uint8(s.process(frame))),
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

#[derive(Clone, Debug)]
enum FixedLevel<'t, const V: usize> {
    Log(FixedLog<'t, V>),
    Pcen(FixedPcen<V>),
}

#[derive(Clone, Debug)]
enum FixedCodes<'t, const V: usize> {
    None,
    Int8(FixedQuantiseStage<i8, V>),
    Uint8(FixedQuantiseStage<u8, V>),
    NormalisedInt8(FixedNormalisedQuantise<'t, i8, V>),
    NormalisedUint8(FixedNormalisedQuantise<'t, u8, V>),
}

impl<const V: usize> FixedCodes<'_, V> {
    fn process<In: RawUnits>(&mut self, frame: &mut [In], visit: &mut impl FnMut(StageValues<'_>)) {
        match self {
            FixedCodes::None => {}
            FixedCodes::Int8(s) => visit(StageValues::Int8(s.process(frame))),
            FixedCodes::Uint8(s) => visit(StageValues::Uint8(s.process(frame))),
            FixedCodes::NormalisedInt8(s) => visit(StageValues::Int8(s.process(frame))),
            FixedCodes::NormalisedUint8(s) => visit(StageValues::Uint8(s.process(frame))),
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

fn fixed_codes<'t, T: Code, const V: usize>(
    config: &FeatureConfig,
    stages: &StageTables<'t>,
    normalised: fn(FixedNormalisedQuantise<'t, T, V>) -> FixedCodes<'t, V>,
    plain: fn(FixedQuantiseStage<T, V>) -> FixedCodes<'t, V>,
) -> Result<FixedCodes<'t, V>, StageChainError> {
    if config.stages.normalise {
        let stage = stages
            .fixed_normalised_quantiser::<T, V>(config)
            .ok_or(StageChainError::MissingTable("fixed normalising quantiser"))?;
        return Ok(normalised(stage));
    }
    let q = stages
        .fixed_quantiser(config)
        .ok_or(StageChainError::MissingTable("fixed quantiser"))?;
    Ok(plain(
        FixedQuantiseStage::new(q).map_err(StageChainError::Quantiser)?,
    ))
}

/// The fixed path's stages after the filterbank (both precisions share
/// them: they take energy words), for up to `V` values per frame.
#[derive(Clone, Debug)]
pub struct FixedStageChain<'t, const V: usize> {
    level: FixedLevel<'t, V>,
    floor: Option<RangeFloor<I8F8>>,
    map: Option<FixedLevelMap>,
    mfcc: Option<FixedMfcc<'t, V>>,
    codes: FixedCodes<'t, V>,
}

impl<'t, const V: usize> FixedStageChain<'t, V> {
    /// The chain `config` names; `tables` give the log, `stages` the rest.
    pub fn new(
        config: &FeatureConfig,
        tables: &FixedTables<'t>,
        stages: &StageTables<'t>,
    ) -> Result<Self, StageChainError> {
        Self::up_to(config, tables, stages, usize::MAX)
    }

    /// The chain's stages up to position `last` of its [`StageList`].
    pub fn up_to(
        config: &FeatureConfig,
        tables: &FixedTables<'t>,
        stages: &StageTables<'t>,
        last: usize,
    ) -> Result<Self, StageChainError> {
        let config = &truncated(config, last);
        check_capacity(config, V)?;
        let st = &config.stages;
        if st.normalise && st.quantise.is_none() {
            return Err(StageChainError::FixedNormaliseWithoutQuantiser);
        }
        let level = match st.pcen {
            Some(_) => FixedLevel::Pcen(FixedPcen::new(
                stages
                    .fixed_pcen(config)
                    .ok_or(StageChainError::MissingTable("fixed PCEN parameters"))?,
            )),
            None => FixedLevel::Log(FixedLog::for_tables(tables)),
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
                        let table = stages
                            .dct_q15(config)
                            .ok_or(StageChainError::MissingTable("Q15 DCT"))?;
                        Some(
                            FixedMfcc::new(table)
                                .map_err(StageChainError::Mfcc)?
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
                fixed_codes::<i8, V>(config, stages, FixedCodes::NormalisedInt8, FixedCodes::Int8)?
            }
            Some(CodeRange::Uint8) => fixed_codes::<u8, V>(
                config,
                stages,
                FixedCodes::NormalisedUint8,
                FixedCodes::Uint8,
            )?,
        };
        let map = match st.level_map {
            Some(_) => Some(
                FixedLevelMap::for_config(config)
                    .ok_or(StageChainError::LevelMapOutOfFixedRange)?,
            ),
            None => None,
        };
        Ok(FixedStageChain {
            level,
            floor,
            map,
            mfcc,
            codes,
        })
    }

    /// Runs one frame's energy words through every stage, handing each
    /// stage's output to `visit` in chain order.
    pub fn process(&mut self, words: &mut [i32], visit: &mut impl FnMut(StageValues<'_>)) {
        match &mut self.level {
            FixedLevel::Pcen(s) => {
                let out = s.process(words);
                visit(StageValues::Pcen(out));
                self.codes.process(out, visit);
            }
            FixedLevel::Log(s) => {
                let mut levels = s.process(words);
                visit(StageValues::Level(levels));
                if let Some(f) = &mut self.floor {
                    levels = f.process(levels);
                    visit(StageValues::Level(levels));
                }
                if let Some(m) = &mut self.map {
                    levels = m.process(levels);
                    visit(StageValues::Level(levels));
                }
                match &mut self.mfcc {
                    Some(m) => {
                        let c = m.process(levels);
                        visit(StageValues::Cepstrum(c));
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
