//! The board's front end and stage chain on the host, built once and run
//! over many clips (or streamed a chunk at a time): what `export` and the
//! Python module use. One stage's output is kept, in the dtype a training
//! pipeline reads.
//!
//! The front end is the core's own (the `f32`, fixed16 or fixed32 path,
//! with the host's capacities) and the stages are [`crate::chain`], so every
//! value is the board's bits.

use anyhow::{Result, anyhow, bail};
use stapes_core::config::FeatureConfig;
use stapes_core::fft::{Fixed16, Fixed32};
use stapes_core::stage::Unchanged;
use stapes_core::stage_tables::StageTables;
use stapes_core::{FixedArithmetic, FixedFrontEnd, FloatFrontEnd};

use crate::chain::{FixedChain, FloatChain, StageOut, stage_names};
use crate::check::{Arith, CoreTables};
use crate::run::Samples;

type HostFloat<'t> = FloatFrontEnd<'t, 4096, 4096, 256, Unchanged>;
type HostFixed<'t, P> = FixedFrontEnd<'t, P, 4096, 4096, 256, Unchanged>;

/// The element type of the values kept.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum OutputKind {
    /// `float32` in the stage's units (codes as numbers).
    Float32,
    /// The fixed log's exact `int16` (1/256 dB or ln per LSB).
    Int16,
    /// A fixed stage's exact `int32` (1/256 units; PCEN 1/65536).
    Int32,
    /// int8 codes.
    Int8,
    /// uint8 codes.
    Uint8,
}

impl OutputKind {
    /// NumPy's name of the dtype.
    pub fn numpy_name(self) -> &'static str {
        match self {
            OutputKind::Float32 => "float32",
            OutputKind::Int16 => "int16",
            OutputKind::Int32 => "int32",
            OutputKind::Int8 => "int8",
            OutputKind::Uint8 => "uint8",
        }
    }

    /// Bytes per value.
    pub fn size(self) -> usize {
        match self {
            OutputKind::Float32 | OutputKind::Int32 => 4,
            OutputKind::Int16 => 2,
            OutputKind::Int8 | OutputKind::Uint8 => 1,
        }
    }

    /// An empty buffer of this kind.
    pub fn empty(self) -> FlatValues {
        match self {
            OutputKind::Float32 => FlatValues::F32(Vec::new()),
            OutputKind::Int16 => FlatValues::I16(Vec::new()),
            OutputKind::Int32 => FlatValues::I32(Vec::new()),
            OutputKind::Int8 => FlatValues::I8(Vec::new()),
            OutputKind::Uint8 => FlatValues::U8(Vec::new()),
        }
    }
}

/// Values of one [`OutputKind`], frames one after another.
#[derive(Clone, Debug, PartialEq)]
pub enum FlatValues {
    /// `float32`.
    F32(Vec<f32>),
    /// `int16`.
    I16(Vec<i16>),
    /// `int32`.
    I32(Vec<i32>),
    /// `int8`.
    I8(Vec<i8>),
    /// `uint8`.
    U8(Vec<u8>),
}

impl FlatValues {
    /// Number of values.
    pub fn len(&self) -> usize {
        match self {
            FlatValues::F32(v) => v.len(),
            FlatValues::I16(v) => v.len(),
            FlatValues::I32(v) => v.len(),
            FlatValues::I8(v) => v.len(),
            FlatValues::U8(v) => v.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Removes every value.
    pub fn clear(&mut self) {
        self.truncate(0)
    }

    /// Keeps the first `n` values.
    pub fn truncate(&mut self, n: usize) {
        match self {
            FlatValues::F32(v) => v.truncate(n),
            FlatValues::I16(v) => v.truncate(n),
            FlatValues::I32(v) => v.truncate(n),
            FlatValues::I8(v) => v.truncate(n),
            FlatValues::U8(v) => v.truncate(n),
        }
    }

    /// Appends values `range` of `other` (of the same kind).
    pub fn extend_from(&mut self, other: &FlatValues, range: std::ops::Range<usize>) {
        match (self, other) {
            (FlatValues::F32(a), FlatValues::F32(b)) => a.extend_from_slice(&b[range]),
            (FlatValues::I16(a), FlatValues::I16(b)) => a.extend_from_slice(&b[range]),
            (FlatValues::I32(a), FlatValues::I32(b)) => a.extend_from_slice(&b[range]),
            (FlatValues::I8(a), FlatValues::I8(b)) => a.extend_from_slice(&b[range]),
            (FlatValues::U8(a), FlatValues::U8(b)) => a.extend_from_slice(&b[range]),
            _ => unreachable!("buffers of one run share their kind"),
        }
    }

    /// The values as little-endian bytes (what a `.npy` body holds).
    pub fn as_bytes(&self) -> &[u8] {
        match self {
            FlatValues::F32(v) => bytemuck::cast_slice(v),
            FlatValues::I16(v) => bytemuck::cast_slice(v),
            FlatValues::I32(v) => bytemuck::cast_slice(v),
            FlatValues::I8(v) => bytemuck::cast_slice(v),
            FlatValues::U8(v) => v,
        }
    }

    /// Value `i` as `f64`.
    pub fn get_f64(&self, i: usize) -> f64 {
        match self {
            FlatValues::F32(v) => v[i] as f64,
            FlatValues::I16(v) => v[i] as f64,
            FlatValues::I32(v) => v[i] as f64,
            FlatValues::I8(v) => v[i] as f64,
            FlatValues::U8(v) => v[i] as f64,
        }
    }

    fn push(&mut self, out: StageOut<'_>) {
        match (self, out) {
            (FlatValues::F32(d), StageOut::Float(v)) => d.extend_from_slice(v),
            (FlatValues::F32(d), StageOut::Level(v)) => {
                d.extend(v.iter().map(|x| x.to_bits() as f32 / 256.0))
            }
            (FlatValues::F32(d), StageOut::Int8(v)) => d.extend(v.iter().map(|&x| x as f32)),
            (FlatValues::F32(d), StageOut::Uint8(v)) => d.extend(v.iter().map(|&x| x as f32)),
            (FlatValues::F32(d), out) => d.extend((0..out.len()).map(|i| out.value(i) as f32)),
            (FlatValues::I16(d), StageOut::Level(v)) => d.extend(v.iter().map(|x| x.to_bits())),
            (FlatValues::I8(d), StageOut::Int8(v)) => d.extend_from_slice(v),
            (FlatValues::U8(d), StageOut::Uint8(v)) => d.extend_from_slice(v),
            (FlatValues::I32(d), out) => d.extend(
                (0..out.len())
                    .filter_map(|i| out.raw(i) as Option<i64>)
                    .map(|r| r as i32),
            ),
            _ => unreachable!("the kind is chosen from the stage's output"),
        }
    }
}

/// Input samples for one push.
#[derive(Clone, Copy, Debug)]
pub enum SampleSlice<'a> {
    /// 16-bit PCM.
    I16(&'a [i16]),
    /// Float samples, full scale ±1.
    F32(&'a [f32]),
}

impl<'a> From<&'a Samples> for SampleSlice<'a> {
    fn from(s: &'a Samples) -> Self {
        match s {
            Samples::I16(v) => SampleSlice::I16(v),
            Samples::F32(v) => SampleSlice::F32(v),
        }
    }
}

enum Engine<'t> {
    Float(Box<HostFloat<'t>>, FloatChain<'t>),
    Fixed16(Box<HostFixed<'t, Fixed16>>, FixedChain<'t>),
    Fixed32(Box<HostFixed<'t, Fixed32>>, FixedChain<'t>),
}

/// The board's front end and stages, keeping one stage's output.
pub struct ClipRunner<'t> {
    config: FeatureConfig,
    arith: Arith,
    engine: Engine<'t>,
    stage_index: usize,
    stage_name: &'static str,
    kind: OutputKind,
    values: usize,
    scratch: Vec<i16>,
}

/// The configuration without its stages after the filterbank: the plain
/// log-mel front end's (the energies are the same; only the chain differs).
fn without_stages(config: &FeatureConfig) -> FeatureConfig {
    FeatureConfig {
        stages: stapes_core::StageConfig::NONE,
        ..*config
    }
}

/// Which output a stage and `raw` give in `arith`, or why none.
fn output_kind(config: &FeatureConfig, arith: Arith, name: &str, raw: bool) -> Result<OutputKind> {
    use stapes_core::CodeRange;
    let codes = config.stages.quantise.map(|q| q.codes);
    Ok(match (raw, name, codes) {
        (false, _, _) => OutputKind::Float32,
        (true, "quantise", Some(CodeRange::Int8)) => OutputKind::Int8,
        (true, "quantise", _) => OutputKind::Uint8,
        (true, _, _) if arith == Arith::F32 => bail!(
            "raw output is the board's exact integers, which the {name} stage in f32 does not \
             hold: use a fixed arithmetic (fixed16 or fixed32), or the quantise stage"
        ),
        // The plain log-mel front end's integers are int16, as `features`
        // writes them.
        (true, "log", _) if !config.stages.any() => OutputKind::Int16,
        (true, _, _) => OutputKind::Int32,
    })
}

fn frame_values(config: &FeatureConfig, stage: &str) -> usize {
    let bands = config.bands as usize;
    let inputs = config.stage_inputs();
    match stage {
        "log" | "pcen" | "range_floor" => inputs,
        _ => match config.stages.mfcc {
            Some(m) => m.coefficients as usize,
            None => bands,
        },
    }
}

fn fixed_engine<'t, P: FixedArithmetic>(
    config: &FeatureConfig,
    chain_config: &FeatureConfig,
    tables: stapes_core::fixed_tables::FixedTables<'t>,
    stages: &StageTables<'t>,
    last: usize,
) -> Result<(Box<HostFixed<'t, P>>, FixedChain<'t>)> {
    let chain = FixedChain::up_to(chain_config, &tables, stages, last)?;
    let fe = Box::new(
        HostFixed::<P>::with_stages(*config, tables, Unchanged).map_err(|e| anyhow!("{e}"))?,
    );
    Ok((fe, chain))
}

impl<'t> ClipRunner<'t> {
    /// The front end of `arith` over `tables` with the chain `config` names;
    /// keeps `stage` (the last, the model's input, when `None`), as `float32`
    /// or (`raw`) the board's exact integers.
    pub fn new(
        config: &FeatureConfig,
        arith: Arith,
        tables: CoreTables<'t>,
        stages: &StageTables<'t>,
        stage: Option<&str>,
        raw: bool,
    ) -> Result<Self> {
        Self::with_chain_config(config, config, arith, tables, stages, stage, raw)
    }

    /// The front end of `config` with the chain `chain_config` names.
    fn with_chain_config(
        config: &FeatureConfig,
        chain_config: &FeatureConfig,
        arith: Arith,
        tables: CoreTables<'t>,
        stages: &StageTables<'t>,
        stage: Option<&str>,
        raw: bool,
    ) -> Result<Self> {
        let names = stage_names(chain_config);
        let stage_index = match stage {
            Some(n) => names.iter().position(|s| *s == n).ok_or_else(|| {
                anyhow!(
                    "stage {n} is not a stage of this configuration: choose one of {}",
                    names.join(", ")
                )
            })?,
            None => names.len() - 1,
        };
        let stage_name = names[stage_index];
        let kind = output_kind(chain_config, arith, stage_name, raw)?;
        let engine = match (arith, tables) {
            (Arith::F32, CoreTables::Float(t)) => {
                let chain = FloatChain::up_to(chain_config, stages, stage_index)?;
                let fe = Box::new(
                    HostFloat::with_stages(*config, t, Unchanged).map_err(|e| anyhow!("{e}"))?,
                );
                Engine::Float(fe, chain)
            }
            (Arith::Fixed16, CoreTables::Fixed(t)) => {
                let (fe, chain) =
                    fixed_engine::<Fixed16>(config, chain_config, t, stages, stage_index)?;
                Engine::Fixed16(fe, chain)
            }
            (Arith::Fixed32, CoreTables::Fixed(t)) => {
                let (fe, chain) =
                    fixed_engine::<Fixed32>(config, chain_config, t, stages, stage_index)?;
                Engine::Fixed32(fe, chain)
            }
            _ => bail!("the tables do not match the arithmetic {}", arith.name()),
        };
        Ok(ClipRunner {
            config: *config,
            arith,
            engine,
            stage_index,
            stage_name,
            kind,
            values: frame_values(chain_config, stage_name).min(frame_values(config, stage_name)),
            scratch: Vec::new(),
        })
    }

    /// The plain log-mel bands of any configuration (its stages after the
    /// filterbank left out): what the board's default front end gives, as
    /// `float32` or (`raw`, fixed arithmetics) the exact `int16`.
    pub fn log_mel(
        config: &FeatureConfig,
        arith: Arith,
        tables: CoreTables<'t>,
        raw: bool,
    ) -> Result<Self> {
        let plain = without_stages(config);
        let mut runner =
            Self::with_chain_config(config, &plain, arith, tables, &StageTables::NONE, None, raw)?;
        runner.values = config.bands as usize;
        Ok(runner)
    }

    /// The configuration.
    pub fn config(&self) -> &FeatureConfig {
        &self.config
    }

    /// The arithmetic.
    pub fn arith(&self) -> Arith {
        self.arith
    }

    /// The stage kept.
    pub fn stage(&self) -> &'static str {
        self.stage_name
    }

    /// The element type of the values kept.
    pub fn kind(&self) -> OutputKind {
        self.kind
    }

    /// Values per frame.
    pub fn values_per_frame(&self) -> usize {
        self.values
    }

    /// Returns to the state of a new front end and chain.
    pub fn reset(&mut self) {
        match &mut self.engine {
            Engine::Float(fe, c) => {
                fe.reset();
                c.reset()
            }
            Engine::Fixed16(fe, c) => {
                fe.reset();
                c.reset()
            }
            Engine::Fixed32(fe, c) => {
                fe.reset();
                c.reset()
            }
        }
    }

    /// Values the quantiser clamped since the last reset (or NaN).
    pub fn clamped(&self) -> u64 {
        match &self.engine {
            Engine::Float(_, c) => c.clamped(),
            Engine::Fixed16(_, c) | Engine::Fixed32(_, c) => c.clamped(),
        }
    }

    /// Feeds `samples`, appending the kept stage of every frame they
    /// complete to `out` (of [`ClipRunner::kind`]); returns the frames.
    /// The fixed paths take float samples rounded to 16 bits, as
    /// [`Samples::to_i16`] does.
    pub fn push(&mut self, samples: SampleSlice<'_>, out: &mut FlatValues) -> usize {
        self.push_observed(samples, out, None)
    }

    /// [`ClipRunner::push`], also handing `observer` its stage of every frame.
    pub fn push_observed(
        &mut self,
        samples: SampleSlice<'_>,
        out: &mut FlatValues,
        observer: Option<Observer<'_>>,
    ) -> usize {
        let mut observer = observer;
        let keep = (self.stage_index, self.values);
        let mut scratch = std::mem::take(&mut self.scratch);
        let frames = match &mut self.engine {
            Engine::Float(fe, chain) => match samples {
                SampleSlice::I16(x) => drive_float(fe, chain, x, keep, out, &mut observer),
                SampleSlice::F32(x) => drive_float(fe, chain, x, keep, out, &mut observer),
            },
            Engine::Fixed16(fe, chain) => drive_fixed(
                fe,
                chain,
                as_i16(samples, &mut scratch),
                keep,
                out,
                &mut observer,
            ),
            Engine::Fixed32(fe, chain) => drive_fixed(
                fe,
                chain,
                as_i16(samples, &mut scratch),
                keep,
                out,
                &mut observer,
            ),
        };
        self.scratch = scratch;
        frames
    }

    /// Resets, then runs a whole clip; returns the frames appended to `out`.
    pub fn run_clip(&mut self, samples: SampleSlice<'_>, out: &mut FlatValues) -> usize {
        self.reset();
        self.push(samples, out)
    }

    /// [`ClipRunner::run_clip`] with an observer.
    pub fn run_clip_observed(
        &mut self,
        samples: SampleSlice<'_>,
        out: &mut FlatValues,
        observer: Option<Observer<'_>>,
    ) -> usize {
        self.reset();
        self.push_observed(samples, out, observer)
    }
}

fn as_i16<'a>(samples: SampleSlice<'a>, scratch: &'a mut Vec<i16>) -> &'a [i16] {
    match samples {
        SampleSlice::I16(v) => v,
        SampleSlice::F32(v) => {
            scratch.clear();
            scratch.extend(
                v.iter()
                    .map(|&s| (s as f64 * 32768.0).round().clamp(-32768.0, 32767.0) as i16),
            );
            scratch
        }
    }
}

/// A stage other than the kept one, handed with its frame's number to a
/// callback (what `export` sums for the statistics).
pub struct Observer<'o> {
    /// The stage's position in the chain.
    pub stage: usize,
    /// Called with the frame's number (from the last reset) and the
    /// stage's output.
    pub call: &'o mut dyn FnMut(usize, StageOut<'_>),
}

/// Hands stage `keep` of each frame to `out`, and the observed stage to
/// its callback.
fn keeper<'a>(
    (keep, limit): (usize, usize),
    out: &'a mut FlatValues,
    observer: &'a mut Option<Observer<'_>>,
    frame: usize,
) -> impl FnMut(StageOut<'_>) + 'a {
    let mut k = 0;
    move |s| {
        if k == keep {
            out.push(s.head(limit));
        }
        if let Some(o) = observer.as_mut()
            && o.stage == k
        {
            (o.call)(frame, s);
        }
        k += 1;
    }
}

fn drive_float<X: stapes_core::sample::Sample>(
    fe: &mut HostFloat<'_>,
    chain: &mut FloatChain<'_>,
    mut rest: &[X],
    keep: (usize, usize),
    out: &mut FlatValues,
    observer: &mut Option<Observer<'_>>,
) -> usize {
    let mut energies = [0f32; 256];
    let mut frames = 0;
    while let Some(f) = fe.next_frame(&mut rest) {
        let n = f.bands.len();
        let index = f.index as usize;
        energies[..n].copy_from_slice(f.bands);
        chain.process(&mut energies[..n], &mut keeper(keep, out, observer, index));
        frames += 1;
    }
    frames
}

fn drive_fixed<P: FixedArithmetic>(
    fe: &mut HostFixed<'_, P>,
    chain: &mut FixedChain<'_>,
    mut rest: &[i16],
    keep: (usize, usize),
    out: &mut FlatValues,
    observer: &mut Option<Observer<'_>>,
) -> usize {
    let mut words = [0i32; 256];
    let mut frames = 0;
    while let Some(f) = fe.next_frame(&mut rest) {
        let n = f.bands.len();
        let index = f.index as usize;
        words[..n].copy_from_slice(f.bands);
        chain.process(&mut words[..n], &mut keeper(keep, out, observer, index));
        frames += 1;
    }
    frames
}
