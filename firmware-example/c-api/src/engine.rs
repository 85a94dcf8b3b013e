//! One front end and its run-time stage chain in caller-owned memory: the
//! state behind each arithmetic's C functions.
//!
//! The front end runs with the [`Unchanged`] stage, so each frame hands out
//! the filterbank's energies; the core's run-time chain
//! ([`stapes_core::stage_chain`], the one the host tools run) takes them
//! through the configuration's stages up to the one the caller asked for.

use core::mem::MaybeUninit;

use stapes_core::config::FeatureConfig;
use stapes_core::stage::Unchanged;
use stapes_core::stage_chain::{FixedStageChain, FloatStageChain, StageList, StageValues};
use stapes_core::stage_tables::StageTables;
use stapes_core::{Arithmetic, F32, FixedTables, FrontEnd, TableView};

use crate::status::*;
use crate::{StapesFrame, capacity};

/// What an arithmetic adds to the engine: its stage chain and how its
/// filterbank output looks to C.
pub trait CArithmetic: Arithmetic {
    /// The run-time chain of this arithmetic.
    type Chain: 'static;
    /// The value type code of the filterbank's output.
    const ENERGY_TYPE: i32;
    /// The chain `config` names up to position `last`.
    fn chain(
        config: &FeatureConfig,
        tables: &Self::Tables<'static>,
        stages: &StageTables<'static>,
        last: usize,
    ) -> Result<Self::Chain, i32>;
    /// Runs one frame through the chain.
    fn run(chain: &mut Self::Chain, energies: &mut [Self::Energy], visit: &mut dyn FnMut(Out));
    /// Clears the chain's carried state.
    fn reset(chain: &mut Self::Chain);
}

/// A stage output as C sees it.
#[derive(Clone, Copy)]
pub struct Out {
    pub values: *const core::ffi::c_void,
    pub count: usize,
    pub value_type: i32,
}

impl Out {
    fn of(v: StageValues<'_>) -> Out {
        let (values, value_type) = match v {
            StageValues::Float(s) => (s.as_ptr().cast(), STAPES_VALUE_F32),
            StageValues::Level(s) => (s.as_ptr().cast(), STAPES_VALUE_Q8_8),
            StageValues::Pcen(s) => (s.as_ptr().cast(), STAPES_VALUE_Q16_16),
            StageValues::Cepstrum(s) => (s.as_ptr().cast(), STAPES_VALUE_Q24_8),
            StageValues::Int8(s) => (s.as_ptr().cast(), STAPES_VALUE_INT8),
            StageValues::Uint8(s) => (s.as_ptr().cast(), STAPES_VALUE_UINT8),
        };
        Out {
            values,
            count: v.len(),
            value_type,
        }
    }
}

fn chain_status(e: stapes_core::stage_chain::StageChainError) -> i32 {
    use stapes_core::stage_chain::StageChainError as E;
    match e {
        E::Capacity { .. } => STAPES_ERROR_CAPACITY,
        E::MissingTable(_) => STAPES_ERROR_STAGE_TABLES,
        _ => STAPES_ERROR_STAGE_PARAMETERS,
    }
}

impl CArithmetic for F32 {
    type Chain = FloatStageChain<'static, { capacity::VALUES }>;
    const ENERGY_TYPE: i32 = STAPES_VALUE_F32;
    fn chain(
        config: &FeatureConfig,
        _tables: &TableView<'static, f32>,
        stages: &StageTables<'static>,
        last: usize,
    ) -> Result<Self::Chain, i32> {
        FloatStageChain::up_to(config, stages, last).map_err(chain_status)
    }
    fn run(chain: &mut Self::Chain, energies: &mut [f32], visit: &mut dyn FnMut(Out)) {
        chain.process(energies, &mut |v| visit(Out::of(v)));
    }
    fn reset(chain: &mut Self::Chain) {
        chain.reset();
    }
}

macro_rules! fixed_arithmetic {
    ($t:ty) => {
        impl CArithmetic for $t {
            type Chain = FixedStageChain<'static, { capacity::VALUES }>;
            const ENERGY_TYPE: i32 = STAPES_VALUE_ENERGY_WORD;
            fn chain(
                config: &FeatureConfig,
                tables: &FixedTables<'static>,
                stages: &StageTables<'static>,
                last: usize,
            ) -> Result<Self::Chain, i32> {
                FixedStageChain::up_to(config, tables, stages, last).map_err(chain_status)
            }
            fn run(chain: &mut Self::Chain, energies: &mut [i32], visit: &mut dyn FnMut(Out)) {
                chain.process(energies, &mut |v| visit(Out::of(v)));
            }
            fn reset(chain: &mut Self::Chain) {
                chain.reset();
            }
        }
    };
}
fixed_arithmetic!(stapes_core::Fixed16);
fixed_arithmetic!(stapes_core::Fixed32);

/// Written at the start of an initialised state: a call on memory that was
/// never initialised (or belongs to another arithmetic) is refused.
pub(crate) const MAGIC: u32 = 0x5354_4150;

/// One front end, its stages and the frame it last handed out (`repr(C)`:
/// the magic is the first word whatever the rest holds).
#[repr(C)]
pub struct Engine<A: CArithmetic> {
    magic: u32,
    /// The stage whose output the frames carry (`STAPES_STAGE_*`).
    stage: i32,
    fe: Fe<A>,
    chain: Option<A::Chain>,
    energies: [A::Energy; capacity::BANDS],
}

/// The front end an engine runs.
type Fe<A> = FrontEnd<
    'static,
    A,
    { capacity::FFT_POINTS },
    { capacity::OVERLAP_SAMPLES },
    { capacity::BANDS },
    Unchanged,
>;

/// The configuration's stage at `stage` (a `STAPES_STAGE_*` code): its
/// position in the chain, `None` for the filterbank's output.
fn stage_position(config: &FeatureConfig, stage: i32) -> Result<Option<usize>, i32> {
    use stapes_core::StageKind as K;
    let list = StageList::of(config);
    let kind = match stage {
        STAPES_STAGE_FILTERBANK => return Ok(None),
        STAPES_STAGE_LAST => return Ok(Some(list.as_slice().len() - 1)),
        STAPES_STAGE_LOG => K::Log,
        STAPES_STAGE_PCEN => K::Pcen,
        STAPES_STAGE_RANGE_FLOOR => K::RangeFloor,
        STAPES_STAGE_LEVEL_MAP => K::LevelMap,
        STAPES_STAGE_MFCC => K::Mfcc,
        STAPES_STAGE_NORMALISE => K::Normalise,
        STAPES_STAGE_QUANTISE => K::Quantise,
        _ => return Err(STAPES_ERROR_UNKNOWN_STAGE),
    };
    list.position(kind)
        .map(Some)
        .ok_or(STAPES_ERROR_STAGE_NOT_CONFIGURED)
}

fn stage_code(config: &FeatureConfig, position: usize) -> i32 {
    use stapes_core::StageKind as K;
    match StageList::of(config).as_slice()[position] {
        K::Log => STAPES_STAGE_LOG,
        K::Pcen => STAPES_STAGE_PCEN,
        K::RangeFloor => STAPES_STAGE_RANGE_FLOOR,
        K::LevelMap => STAPES_STAGE_LEVEL_MAP,
        K::Mfcc => STAPES_STAGE_MFCC,
        K::Normalise => STAPES_STAGE_NORMALISE,
        K::Quantise => STAPES_STAGE_QUANTISE,
    }
}

fn front_end_status(e: stapes_core::FrontEndError) -> i32 {
    use stapes_core::FrontEndError as E;
    match e {
        E::Capacity { .. } => STAPES_ERROR_CAPACITY,
        E::FftNotCompiled { .. } => STAPES_ERROR_FFT_NOT_COMPILED,
        E::Config(_) => STAPES_ERROR_CONFIG,
        _ => STAPES_ERROR_TABLES,
    }
}

impl<A: CArithmetic> Engine<A> {
    /// Builds an engine in `slot` (whose previous contents are ignored).
    pub fn init(
        slot: &mut MaybeUninit<Self>,
        config: FeatureConfig,
        tables: A::Tables<'static>,
        stages: StageTables<'static>,
        stage: i32,
    ) -> i32 {
        if stages.check(&config).is_err() {
            return STAPES_ERROR_STAGE_TABLES;
        }
        let position = match stage_position(&config, stage) {
            Ok(p) => p,
            Err(e) => return e,
        };
        let chain = match position {
            None => None,
            Some(last) => match A::chain(&config, &tables, &stages, last) {
                Ok(c) => Some(c),
                Err(e) => return e,
            },
        };
        // Field by field, so that no whole engine is built on the stack and
        // then copied (the front end is most of it, and a Cortex-M0's stack
        // is small).
        let p = slot.as_mut_ptr();
        match FrontEnd::with_stages(config, tables, Unchanged) {
            // SAFETY: `p` is valid for writes of an engine; each field is
            // written once, the magic last, so a failed init leaves it 0.
            Ok(fe) => unsafe { core::ptr::addr_of_mut!((*p).fe).write(fe) },
            Err(e) => return front_end_status(e),
        }
        // SAFETY: as above.
        unsafe {
            core::ptr::addr_of_mut!((*p).chain).write(chain);
            core::ptr::addr_of_mut!((*p).energies).write([A::EMPTY; capacity::BANDS]);
            core::ptr::addr_of_mut!((*p).stage)
                .write(position.map_or(STAPES_STAGE_FILTERBANK, |q| stage_code(&config, q)));
            core::ptr::addr_of_mut!((*p).magic).write(MAGIC);
        }
        STAPES_OK
    }

    /// Whether this memory holds an initialised engine (the magic, read as
    /// plain data: C memory always holds some bytes).
    pub fn is_initialised(slot: &MaybeUninit<Self>) -> bool {
        // SAFETY: `magic` is the first field of a `repr(C)` struct: an
        // aligned `u32` at the slot's start.
        unsafe { slot.as_ptr().cast::<u32>().read_volatile() == MAGIC }
    }

    /// Marks the memory as not initialised (before an init that may fail).
    pub fn forget(slot: &mut MaybeUninit<Self>) {
        // SAFETY: as in `is_initialised`; only that word is written.
        unsafe { slot.as_mut_ptr().cast::<u32>().write_volatile(0) }
    }

    /// The `STAPES_STAGE_*` the frames carry.
    pub fn stage(&self) -> i32 {
        self.stage
    }

    /// Back to the state of a newly initialised engine.
    pub fn reset(&mut self) {
        self.fe.reset();
        if let Some(c) = &mut self.chain {
            A::reset(c);
        }
    }

    /// The configuration in use.
    pub fn config(&self) -> &FeatureConfig {
        self.fe.config()
    }

    /// Consumes samples until a frame completes; fills `frame` and returns
    /// `STAPES_FRAME_READY`, or returns `STAPES_OK` with every sample
    /// consumed.
    pub fn next_frame(
        &mut self,
        samples: &[i16],
        consumed: &mut usize,
        frame: &mut StapesFrame,
    ) -> i32 {
        let mut rest = samples;
        let Some(f) = self.fe.next_frame(&mut rest) else {
            *consumed = samples.len();
            return STAPES_OK;
        };
        let index = f.index;
        let n = f.bands.len().min(capacity::BANDS);
        self.energies[..n].copy_from_slice(&f.bands[..n]);
        *consumed = samples.len() - rest.len();
        let out = match &mut self.chain {
            None => Out {
                values: self.energies.as_ptr().cast(),
                count: n,
                value_type: A::ENERGY_TYPE,
            },
            Some(chain) => {
                let mut last = Out {
                    values: core::ptr::null(),
                    count: 0,
                    value_type: A::ENERGY_TYPE,
                };
                A::run(chain, &mut self.energies[..n], &mut |o| last = o);
                last
            }
        };
        *frame = StapesFrame {
            index,
            values: out.values,
            count: out.count as u32,
            value_type: out.value_type,
            stage: self.stage,
        };
        STAPES_FRAME_READY
    }
}
