//! The stages after the filterbank as one streaming chain, chosen at run
//! time from the configuration: the core's own run-time chain
//! ([`stapes_core::stage_chain`], the one the C API runs too), with the
//! host's capacity and its errors as `anyhow` (the board chains the same
//! stage types at compile time with `Then`, so the values are the same
//! bits).
//!
//! Every host path that runs stages goes through this chain: `check` and
//! `features` ([`crate::stages`]), `export` and the Python module
//! ([`crate::clip_runner`]). Each frame's stage outputs are handed to a
//! visitor in chain order, so a caller keeps the one stage it writes, or
//! records them all.

use anyhow::{Result, anyhow};
use stapes_core::config::FeatureConfig;
use stapes_core::fixed_tables::FixedTables;
use stapes_core::stage_chain::{FixedStageChain, FloatStageChain, StageList};
use stapes_core::stage_tables::StageTables;

pub use stapes_core::stage_chain::StageValues as StageOut;
pub use stapes_core::stage_chain::range_floor_units;

/// Largest stage output the host handles (the validator's band limit).
pub const HOST_VALUES: usize = 256;

/// Names of the configured stages, in chain order.
pub fn stage_names(config: &FeatureConfig) -> Vec<&'static str> {
    StageList::of(config)
        .as_slice()
        .iter()
        .map(|k| k.name())
        .collect()
}

fn err(e: impl std::fmt::Display) -> anyhow::Error {
    anyhow!("{e}")
}

/// The `f32` path's stages after the filterbank.
pub struct FloatChain<'t>(Box<FloatStageChain<'t, HOST_VALUES>>);

impl<'t> FloatChain<'t> {
    /// The chain `config` names, reading `stages`.
    pub fn new(config: &FeatureConfig, stages: &StageTables<'t>) -> Result<Self> {
        Self::up_to(config, stages, usize::MAX)
    }

    /// The chain's stages up to position `last` of [`stage_names`] (the
    /// later ones are neither built nor run).
    pub fn up_to(config: &FeatureConfig, stages: &StageTables<'t>, last: usize) -> Result<Self> {
        Ok(FloatChain(Box::new(
            FloatStageChain::up_to(config, stages, last).map_err(err)?,
        )))
    }

    /// Runs one frame's band `energies` through every stage, handing each
    /// stage's output to `visit` in chain order.
    pub fn process(&mut self, energies: &mut [f32], visit: &mut impl FnMut(StageOut<'_>)) {
        self.0.process(energies, visit)
    }

    /// Clears the carried state (PCEN's smoother), as a new chain.
    pub fn reset(&mut self) {
        self.0.reset()
    }

    /// Values the quantiser clamped (or found NaN) since the start.
    pub fn clamped(&self) -> u64 {
        self.0.clamped()
    }
}

/// The fixed path's stages after the filterbank (both precisions share
/// them: they take energy words).
pub struct FixedChain<'t>(Box<FixedStageChain<'t, HOST_VALUES>>);

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
        Ok(FixedChain(Box::new(
            FixedStageChain::up_to(config, tables, stages, last).map_err(err)?,
        )))
    }

    /// Runs one frame's energy words through every stage, handing each
    /// stage's output to `visit` in chain order.
    pub fn process(&mut self, words: &mut [i32], visit: &mut impl FnMut(StageOut<'_>)) {
        self.0.process(words, visit)
    }

    /// Clears the carried state (PCEN's smoother), as a new chain.
    pub fn reset(&mut self) {
        self.0.reset()
    }

    /// Values the quantiser clamped since the start.
    pub fn clamped(&self) -> u64 {
        self.0.clamped()
    }
}
