//! The front end: samples in, frames out, in any arithmetic.
//!
//! ```text
//! samples ─► intake ─► window ─► FFT ─► spectrum ─► filterbank ─► stages ─► frame
//! ```
//!
//! One type, [`FrontEnd`], runs that path in the arithmetic its first
//! parameter names: [`F32`] (`f32`, microfft, for cores with an FPU),
//! [`Fixed16`] or [`Fixed32`] (integers only, 16- or 32-bit data through
//! the project's block-floating-point FFT). Each stage is one module
//! holding every arithmetic of it ([`crate::conditioning`],
//! [`crate::window`], [`crate::fft`], [`crate::spectrum`],
//! [`crate::filterbank`], then the [stages](crate::stage) after the
//! filterbank: [`crate::log`] by default, and whatever a model reads). The
//! arithmetic decides only what a value is; the front end calls the stages
//! in the same order for each, and marks the same [`Stage`]s for a probe.
//! [`FloatFrontEnd`] and [`FixedFrontEnd`] are shorter names for the same
//! type.
//!
//! | arithmetic | tables | energies handed to the stages | default output |
//! |---|---|---|---|
//! | [`F32`] | [`TableView<f32>`](crate::table::TableView) | linear `f32` | `f32` dB (or ln) |
//! | [`Fixed16`], [`Fixed32`] | [`FixedTables`] | [`energy_word`] `i32` | `I8F8`, 1/256 dB per LSB |
//!
//! # Fixed-point numerics
//! * **Stream**: raw `i16` samples are stored (frame assembly and overlap,
//!   as in the `f32` path). DC removal and pre-emphasis are run at frame
//!   time from the filter state saved at the frame's first sample, in `i32`
//!   with 13 extra fraction bits (`i64` products), so the stored stream
//!   stays exact ([`crate::conditioning::IntConditioner`]).
//! * **Offset compensation** (16-bit data): the frame's window-weighted
//!   mean `d` is taken out before the FFT and `d·W(k)` added back to the
//!   bins where the window's DFT `W` lives: bins 0 and 1 exactly for a
//!   window whose DFT has only those
//!   ([`offset_spectrum`](crate::spectrum::offset_spectrum): a periodic
//!   raised cosine or a rectangle filling the FFT), or the first bins the
//!   generator lists for any other window whose DFT falls below
//!   `2^-17·W(0)` within `N/8` bins ([`FixedTables::window_spectrum`], for
//!   example a periodic Hann zero-padded to the FFT). Without it a DC
//!   offset takes the 16-bit FFT's range from the speech on it.
//! * **Normalisation before windowing**: the conditioned frame is shifted
//!   so its largest sample uses the FFT's full range (15 bits for
//!   [`Fixed16`], 29 for [`Fixed32`]; 16-bit data bound the *windowed*
//!   frame, see [`NORMALISATION_SEGMENTS`](crate::window::NORMALISATION_SEGMENTS));
//!   quiet frames keep their precision.
//! * **Window**: Q15 (16-bit data) or Q31 (32-bit data), rounded product.
//! * **FFT**: one-pass block floating point ([`crate::fft`]), exponent tracked.
//! * **Spectrum**: `re² + im²` exactly (`u32` for 16-bit data; `u64`
//!   shifted right just enough that no band sum can overflow, for 32-bit
//!   data), or an integer square root of it for magnitude configurations.
//! * **Filterbank**: Q15 weights, `u64` accumulators. A band's sum is at
//!   most `(Σ w) · max S`; the constructor computes `Σ w` of every band from
//!   the table and picks the spectrum shift so that bound stays below
//!   `2^64`. Each band's sum leaves as one 32-bit energy word (mantissa and
//!   exponent, the frame's exponent included).
//! * **Log** ([`FixedLog`], the default stage): `log2` of the energy by
//!   [`crate::int_log`], times `log2_to_output`, rounded to 1/256; then the
//!   band's gain offset, the floor, and saturation to the `i16` range.
//!
//! No value can wrap: normalised samples and windowed values fit by
//! construction, the FFT's shifts are chosen from a bound so no value can
//! overflow, and the output saturates (±128 output units). Digital silence
//! gives exactly the floor. No float operation anywhere on the fixed path
//! (with `i16` samples).
//!
//! # Example
//! A shipped table, included as Rust source:
//! ```
//! mod tiny {
//!     include!("../../tables/tiny16k-10.rs");
//! }
//! use stapes_core::{FixedFrontEnd, FloatFrontEnd, Fixed16};
//!
//! // Buffers sized exactly: FFT 256, overlap 256 − 160, 10 bands.
//! let mut float = FloatFrontEnd::<256, 96, 10>::new(tiny::CONFIG, tiny::TABLE_F32_SPARSE)?;
//! let mut fixed =
//!     FixedFrontEnd::<Fixed16, 256, 96, 10>::new(tiny::CONFIG, tiny::FIXED16_SPARSE)?;
//! // A 1 kHz tone at half scale, in one DMA-sized chunk.
//! let chunk: Vec<i16> = (0..800)
//!     .map(|n| (16384.0 * (2.0 * core::f32::consts::PI * n as f32 / 16.0).sin()) as i16)
//!     .collect();
//! let (mut a, mut b) = (&chunk[..], &chunk[..]);
//! while let Some(f) = float.next_frame(&mut a) {
//!     let g = fixed.next_frame(&mut b).expect("the same framing");
//!     assert_eq!(f.index, g.index);
//!     // dB against 1/256 dB: the two arithmetics agree closely on every
//!     // band within 40 dB of the loudest (far below it, the 16-bit data's
//!     // resolution sets the fixed path's floor).
//!     let peak = f.bands.iter().copied().fold(f32::MIN, f32::max);
//!     for (x, y) in f.bands.iter().zip(g.bands).filter(|(x, _)| **x > peak - 40.0) {
//!         assert!((x - y.to_num::<f32>()).abs() < 0.05, "{x} vs {y}");
//!     }
//! }
//! # Ok::<(), stapes_core::FrontEndError>(())
//! ```

use crate::conditioning::FloatConditioner;
use crate::config::FeatureConfig;
use crate::error::FrontEndError;
use crate::fft::{BfpSample, Fixed16, Fixed32, Precision};
use crate::filterbank::{BinWeights, fixed_energies};
use crate::fixed_data::FrameData;
use crate::fixed_tables::FixedTables;
use crate::frame::Frame;
use crate::framer::Framer;
use crate::int_log::{EMPTY_ENERGY, energy_word};
use crate::log::{FixedLog, FloatLog};
use crate::probe::{Stage, StageProbe};
use crate::sample::{Sample, SampleCounts};
use crate::spectrum::{FixedSpectrum, SpectrumData};
use crate::stage::FrameStage;
use crate::table::{Filterbank, TableView};
use crate::window::{FixedWindowing, WindowCoefficients};
use crate::{fft, filterbank, spectrum, window};

/// The `f32` arithmetic: microfft, IEEE-754 single precision throughout.
#[derive(Clone, Copy, Debug)]
pub struct F32;

/// An arithmetic a [`FrontEnd`] runs in: [`F32`], [`Fixed16`] or
/// [`Fixed32`]. Sealed: the front end's stages know exactly these three.
pub trait Arithmetic: crate::sealed::Sealed + Copy + core::fmt::Debug + 'static {
    /// The tables this arithmetic reads.
    type Tables<'t>: Copy + core::fmt::Debug;
    /// One band's filterbank output, as the stages receive it: a linear
    /// `f32` energy, or an [`energy_word`].
    type Energy: Copy + core::fmt::Debug;
    /// The default stages: the log.
    type Log<'t, const BANDS: usize>: FrameStage<Self::Energy> + Clone + core::fmt::Debug;
    #[doc(hidden)]
    type Data: Copy + Default + core::fmt::Debug;
    #[doc(hidden)]
    type Stored: Copy + Default + core::fmt::Debug;
    #[doc(hidden)]
    type Path<'t>: Clone + core::fmt::Debug;
    #[doc(hidden)]
    const EMPTY: Self::Energy;
    #[doc(hidden)]
    fn log<'t, const BANDS: usize>(
        config: &FeatureConfig,
        tables: &Self::Tables<'t>,
    ) -> Self::Log<'t, BANDS>;
    #[doc(hidden)]
    fn path<'t>(
        config: &FeatureConfig,
        tables: Self::Tables<'t>,
    ) -> Result<Self::Path<'t>, FrontEndError>;
    #[doc(hidden)]
    fn reset_path(path: &mut Self::Path<'_>);
    #[doc(hidden)]
    fn counts(path: &Self::Path<'_>) -> SampleCounts;
    #[doc(hidden)]
    fn intake<X: Sample, const F: usize, const O: usize>(
        path: &mut Self::Path<'_>,
        framer: &mut Framer<Self::Data, Self::Stored, F, O>,
        input: &mut &[X],
    ) -> bool;
    #[doc(hidden)]
    fn frame<P: StageProbe, const F: usize, const O: usize>(
        path: &mut Self::Path<'_>,
        config: &FeatureConfig,
        framer: &mut Framer<Self::Data, Self::Stored, F, O>,
        energies: &mut [Self::Energy],
        probe: &mut P,
    );
}

/// The fixed-point arithmetics ([`Fixed16`], [`Fixed32`]), for code generic
/// over both: they read [`FixedTables`] and hand the stages energy words.
pub trait FixedArithmetic:
    Precision + for<'t> Arithmetic<Tables<'t> = FixedTables<'t>, Energy = i32>
{
    /// Whether this precision reads the tables' Q31 arrays.
    const WIDE: bool;
}

/// Streaming front end in the arithmetic `A`, with buffers sized at
/// compile time: `FFT` is the FFT buffer (≥ `fft_points`), `OVERLAP` the
/// carried samples (≥ `window_samples - hop_samples`), `BANDS` the
/// filterbank's output (≥ `bands`, one more with MFCC's log-energy). A host
/// tool may use larger capacities than the configuration needs. `S` is the
/// chain of [stages](crate::stage) after the filterbank: the log by default.
#[derive(Clone, Debug)]
pub struct FrontEnd<
    't,
    A: Arithmetic,
    const FFT: usize,
    const OVERLAP: usize,
    const BANDS: usize,
    S = <A as Arithmetic>::Log<'t, BANDS>,
> {
    config: FeatureConfig,
    framer: Framer<A::Data, A::Stored, FFT, OVERLAP>,
    path: A::Path<'t>,
    energies: [A::Energy; BANDS],
    stages: S,
    next_index: u64,
}

/// The `f32` front end: [`FrontEnd`] in [`F32`].
pub type FloatFrontEnd<
    't,
    const FFT: usize,
    const OVERLAP: usize,
    const BANDS: usize,
    S = FloatLog,
> = FrontEnd<'t, F32, FFT, OVERLAP, BANDS, S>;

/// A fixed-point front end: [`FrontEnd`] in `P` ([`Fixed16`] or [`Fixed32`]).
pub type FixedFrontEnd<
    't,
    P,
    const FFT: usize,
    const OVERLAP: usize,
    const BANDS: usize,
    S = FixedLog<'t, BANDS>,
> = FrontEnd<'t, P, FFT, OVERLAP, BANDS, S>;

impl<'t, A: Arithmetic, const FFT: usize, const OVERLAP: usize, const BANDS: usize>
    FrontEnd<'t, A, FFT, OVERLAP, BANDS>
{
    /// A front end for `config` reading `tables`, its frames the log-mel
    /// levels.
    ///
    /// Checks, with integer work only, that the tables fit the
    /// configuration, that the buffers are large enough and (for [`F32`])
    /// that the FFT size is compiled in. It does not re-run
    /// [`FeatureConfig::validate`] (`f64` band placement): tables only come
    /// from validated configurations.
    pub fn new(config: FeatureConfig, tables: A::Tables<'t>) -> Result<Self, FrontEndError> {
        let log = A::log::<BANDS>(&config, &tables);
        Self::with_stages(config, tables, log)
    }
}

impl<'t, A: Arithmetic, const FFT: usize, const OVERLAP: usize, const BANDS: usize, S>
    FrontEnd<'t, A, FFT, OVERLAP, BANDS, S>
where
    S: FrameStage<A::Energy>,
{
    /// A front end whose filterbank energies go through `stages` (instead
    /// of the log alone); checks as [`FrontEnd::new`].
    pub fn with_stages(
        config: FeatureConfig,
        tables: A::Tables<'t>,
        stages: S,
    ) -> Result<Self, FrontEndError> {
        crate::error::check_shape(&config, FFT, OVERLAP, BANDS)?;
        let path = A::path(&config, tables)?;
        Ok(FrontEnd {
            config,
            framer: Framer::new(config.window_samples as usize, config.hop_samples as usize),
            path,
            energies: [A::EMPTY; BANDS],
            stages,
            next_index: 0,
        })
    }

    /// The configuration in use.
    pub fn config(&self) -> &FeatureConfig {
        &self.config
    }

    /// Returns to the state of a new front end (no samples, zero filter
    /// state, the stages' carried state cleared).
    pub fn reset(&mut self) {
        self.framer.reset();
        A::reset_path(&mut self.path);
        self.stages.reset();
        self.next_index = 0;
    }

    /// Non-finite `f32` samples seen since the start (each was taken as 0).
    pub fn non_finite_samples(&self) -> u64 {
        A::counts(&self.path).non_finite
    }

    /// Finite `f32` samples outside `[-1, 1]` seen since the start (each
    /// was clamped to ±1).
    pub fn clamped_samples(&self) -> u64 {
        A::counts(&self.path).clamped
    }

    /// Consumes samples from the front of `input` until a frame completes, and
    /// returns it; returns `None` once `input` is empty without a new frame.
    /// Call it in a loop until `None` to drain a chunk.
    ///
    /// `f32` samples reach the fixed path rounded to 16 bits. Non-finite
    /// samples are taken as 0, finite ones outside `[-1, 1]` clamped, both
    /// counted ([`crate::sample`]).
    pub fn next_frame<X: Sample>(&mut self, input: &mut &[X]) -> Option<Frame<'_, S::Out>> {
        self.next_frame_probed(input, &mut ())
    }

    /// [`FrontEnd::next_frame`] with a [`StageProbe`] told when each stage ends.
    pub fn next_frame_probed<X: Sample, P: StageProbe>(
        &mut self,
        input: &mut &[X],
        probe: &mut P,
    ) -> Option<Frame<'_, S::Out>> {
        if !A::intake(&mut self.path, &mut self.framer, input) {
            return None;
        }
        A::frame(
            &mut self.path,
            &self.config,
            &mut self.framer,
            &mut self.energies,
            probe,
        );
        let index = self.next_index;
        self.next_index += 1;
        let bands = self
            .stages
            .process(&mut self.energies[..self.config.stage_inputs()]);
        probe.mark(Stage::Log);
        Some(Frame { index, bands })
    }
}

impl<A: Arithmetic, const FFT: usize, const OVERLAP: usize, const BANDS: usize, S>
    crate::frame::StreamingFrontEnd for FrontEnd<'_, A, FFT, OVERLAP, BANDS, S>
where
    S: FrameStage<A::Energy>,
{
    type Value = S::Out;

    fn configuration(&self) -> &FeatureConfig {
        &self.config
    }

    fn restart(&mut self) {
        self.reset();
    }

    #[inline]
    fn next_frame_with<P: StageProbe>(
        &mut self,
        input: &mut &[i16],
        probe: &mut P,
    ) -> Option<Frame<'_, S::Out>> {
        self.next_frame_probed(input, probe)
    }
}

// ---- f32 ----

/// The `f32` path's tables and state.
#[doc(hidden)]
#[derive(Clone, Debug)]
pub struct FloatPath<'t> {
    table: TableView<'t, f32>,
    conditioner: FloatConditioner,
    counts: SampleCounts,
}

impl Arithmetic for F32 {
    type Tables<'t> = TableView<'t, f32>;
    type Energy = f32;
    type Log<'t, const BANDS: usize> = FloatLog;
    type Data = f32;
    type Stored = f32;
    type Path<'t> = FloatPath<'t>;
    const EMPTY: f32 = 0.0;

    fn log<'t, const BANDS: usize>(
        config: &FeatureConfig,
        _: &Self::Tables<'t>,
    ) -> Self::Log<'t, BANDS> {
        FloatLog::for_config(config)
    }

    fn path<'t>(
        config: &FeatureConfig,
        table: Self::Tables<'t>,
    ) -> Result<Self::Path<'t>, FrontEndError> {
        if !fft::fft_compiled(config.fft_points as usize) {
            return Err(FrontEndError::FftNotCompiled {
                fft_points: config.fft_points,
            });
        }
        table.check(config)?;
        Ok(FloatPath {
            table,
            conditioner: FloatConditioner::new(config.dc_removal_pole, config.pre_emphasis),
            counts: SampleCounts::default(),
        })
    }

    fn reset_path(path: &mut FloatPath<'_>) {
        path.conditioner.reset();
        path.counts = SampleCounts::default();
    }

    fn counts(path: &FloatPath<'_>) -> SampleCounts {
        path.counts
    }

    #[inline]
    fn intake<X: Sample, const F: usize, const O: usize>(
        path: &mut FloatPath<'_>,
        framer: &mut Framer<f32, f32, F, O>,
        input: &mut &[X],
    ) -> bool {
        // Conditioning runs on the stream as it arrives.
        let conditioner = &mut path.conditioner;
        let counts = &mut path.counts;
        framer.fill_block_from(input, |src: &[X], dst: &mut [f32]| {
            let c = X::to_unit_f32_slice(src, dst);
            counts.non_finite += c.non_finite;
            counts.clamped += c.clamped;
            conditioner.run_in_place(dst);
        })
    }

    fn frame<P: StageProbe, const F: usize, const O: usize>(
        path: &mut FloatPath<'_>,
        config: &FeatureConfig,
        framer: &mut Framer<f32, f32, F, O>,
        energies: &mut [f32],
        probe: &mut P,
    ) {
        let n = config.fft_points as usize;
        let bands = config.bands as usize;
        let table = &path.table;
        probe.start();
        {
            // The shared samples go to the overlap store as they are windowed.
            let (buf, hop, overlap) = framer.frame_and_overlap_mut();
            let buf = &mut buf[..n];
            window::apply_saving_f32(buf, table.window, hop, overlap);
            probe.mark(Stage::Window);
            // `path` checked that this size is compiled in.
            fft::real_fft_in_place(buf);
            probe.mark(Stage::Fft);
            let spectrum = spectrum::spectrum_in_place(buf, config.spectrum);
            probe.mark(Stage::Spectrum);
            let out = &mut energies[..bands];
            // SAFETY: `path` checked the table against this configuration,
            // whose `bands` values `out` holds (`with_stages` checked the
            // capacity) and whose spectrum bins (`fft_points / 2 + 1`)
            // `spectrum` holds.
            #[allow(unsafe_code)]
            unsafe {
                filterbank::accumulate_checked_f32(&table.filterbank, spectrum, out)
            };
            if let Some(gains) = table.band_gains {
                filterbank::apply_gains_f32(gains, out);
            }
            if config.stage_inputs() > bands {
                energies[bands] =
                    spectrum::frame_energy_f32(spectrum, table.filterbank.first_bin());
            }
        }
        framer.end_frame_unconverted();
        probe.mark(Stage::Mel);
    }
}

// ---- Fixed point ----

/// One fixed-point frame: window (with conditioning), FFT, spectrum,
/// filterbank, each stage from its module.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn fixed_frame<P, Pr: StageProbe, const F: usize, const O: usize>(
    window: &mut FixedWindowing<'_, P>,
    spectrum: &FixedSpectrum<'_>,
    filterbank: &Filterbank<'_, i16>,
    twiddles: &[<P::Data as BfpSample>::Twiddle],
    config: &FeatureConfig,
    framer: &mut Framer<P::Data, i16, F, O>,
    energies: &mut [i32],
    probe: &mut Pr,
) where
    P: WindowCoefficients,
    P::Data: SpectrumData + BinWeights,
{
    let n = config.fft_points as usize;
    let hop = config.hop_samples as usize;
    let bands = config.bands as usize;
    probe.start();
    <P::Data as FrameData>::save_shared(framer);
    let buf = &mut framer.buffer_mut()[..n];
    let Some(windowed) = window.apply(buf, hop) else {
        // Digital silence: no band has energy (its log is the floor).
        energies[..config.stage_inputs()].fill(EMPTY_ENERGY);
        <P::Data as FrameData>::restore_shared(framer);
        for stage in [Stage::Window, Stage::Fft, Stage::Spectrum, Stage::Mel] {
            probe.mark(stage);
        }
        return;
    };
    probe.mark(Stage::Window);
    let fft_exponent = fft::real_fft::<P>(buf, twiddles);
    probe.mark(Stage::Fft);
    let bins = spectrum.apply::<P::Data>(buf, windowed, fft_exponent);
    probe.mark(Stage::Spectrum);
    let buf = &*buf;
    let exponent = bins.energy_exponent;
    let out = &mut energies[..bands];
    fixed_energies::<P::Data>(filterbank, buf, bins.last, bands, |b, e| {
        out[b] = energy_word(e, exponent)
    });
    if config.stage_inputs() > bands {
        energies[bands] = bins.frame_energy::<P::Data>(buf, filterbank.first_bin());
    }
    <P::Data as FrameData>::restore_shared(framer);
    probe.mark(Stage::Mel);
}

macro_rules! fixed_arithmetic {
    ($p:ident, $path:ident, $data:ty, $twiddles:ident, $wide:expr, $doc:literal) => {
        #[doc = $doc]
        #[doc(hidden)]
        #[derive(Clone, Debug)]
        pub struct $path<'t> {
            filterbank: Filterbank<'t, i16>,
            twiddles: &'t [<$data as BfpSample>::Twiddle],
            window: FixedWindowing<'t, $p>,
            spectrum: FixedSpectrum<'t>,
            counts: SampleCounts,
        }

        impl Arithmetic for $p {
            type Tables<'t> = FixedTables<'t>;
            type Energy = i32;
            type Log<'t, const BANDS: usize> = FixedLog<'t, BANDS>;
            type Data = $data;
            type Stored = i16;
            type Path<'t> = $path<'t>;
            const EMPTY: i32 = EMPTY_ENERGY;

            fn log<'t, const BANDS: usize>(
                _: &FeatureConfig,
                tables: &Self::Tables<'t>,
            ) -> Self::Log<'t, BANDS> {
                FixedLog::for_tables(tables)
            }

            fn path<'t>(
                config: &FeatureConfig,
                tables: Self::Tables<'t>,
            ) -> Result<Self::Path<'t>, FrontEndError> {
                tables.check(config).map_err(FrontEndError::Fixed)?;
                tables
                    .check_precision(config, $wide)
                    .map_err(FrontEndError::Fixed)?;
                let spectrum = FixedSpectrum::new::<$data>(config, &tables);
                let window = FixedWindowing::new(config, &tables, spectrum.offset_compensated());
                Ok($path {
                    filterbank: tables.table.filterbank,
                    twiddles: tables.$twiddles,
                    window,
                    spectrum,
                    counts: SampleCounts::default(),
                })
            }

            fn reset_path(path: &mut $path<'_>) {
                path.window.reset();
                path.counts = SampleCounts::default();
            }

            fn counts(path: &$path<'_>) -> SampleCounts {
                path.counts
            }

            #[inline]
            fn intake<X: Sample, const F: usize, const O: usize>(
                path: &mut $path<'_>,
                framer: &mut Framer<$data, i16, F, O>,
                input: &mut &[X],
            ) -> bool {
                // Raw samples are stored; conditioning runs at frame time.
                let counts = &mut path.counts;
                framer.fill_from(input, |x: X| {
                    counts.clamped += x.out_of_range() as u64;
                    <$data as FrameData>::from_raw(x.to_q15().unwrap_or_else(|| {
                        counts.non_finite += 1;
                        0
                    }))
                })
            }

            fn frame<Pr: StageProbe, const F: usize, const O: usize>(
                path: &mut $path<'_>,
                config: &FeatureConfig,
                framer: &mut Framer<$data, i16, F, O>,
                energies: &mut [i32],
                probe: &mut Pr,
            ) {
                fixed_frame::<$p, Pr, F, O>(
                    &mut path.window,
                    &path.spectrum,
                    &path.filterbank,
                    path.twiddles,
                    config,
                    framer,
                    energies,
                    probe,
                )
            }
        }

        impl FixedArithmetic for $p {
            const WIDE: bool = $wide;
        }
    };
}

fixed_arithmetic!(
    Fixed16,
    Fixed16Path,
    i16,
    twiddles_q15,
    false,
    "The 16-bit fixed path's tables and state."
);
fixed_arithmetic!(
    Fixed32,
    Fixed32Path,
    i32,
    twiddles_q31,
    true,
    "The 32-bit fixed path's tables and state."
);
