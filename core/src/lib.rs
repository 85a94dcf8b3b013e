//! `stapes-core`: a `no_std`, allocation-free streaming log-mel front end.
//!
//! ```text
//! samples ─► conditioning ─► framer ─► window ─► real FFT ─► spectrum
//!         ─► filterbank (table view) ─► stages (log, then a model's input) ─► frame
//! ```
//!
//! One front end, [`FrontEnd`], runs that path in the arithmetic its first
//! parameter names: [`F32`] (microfft, for cores with an FPU), [`Fixed16`]
//! or [`Fixed32`] (integers only: the project's block-floating-point FFT in
//! [`fft`], 16- or 32-bit data; `I8F8` log output, 1/256 dB per LSB).
//! [`FloatFrontEnd`] and [`FixedFrontEnd`] name the same type. Each stage
//! is one module holding every arithmetic of it: [`conditioning`],
//! [`window`], [`fft`], [`spectrum`], [`filterbank`], and after the
//! filterbank the [stages](stage) chained at compile time: [`log`] by
//! default, [`pcen`], [`range_floor`], [`mfcc`], [`normalise`],
//! [`quantise`], and the model's window of frames ([`frame_window`]).
//!
//! One [`config::FeatureConfig`] describes a front end. The host generator
//! turns it into a [`table::TableView`] (plus, for the fixed path,
//! [`fixed_tables::FixedTables`], and for the stages after the log
//! [`stage_tables::StageTables`]) as Rust source, a C header, or a checked
//! [`blob`]; the front ends read only the tables on the per-frame path, and
//! [`probe`] lets a board time each stage.
//!
//! # Conventions (other tools rely on them)
//! * **Samples**: `i16` (32768 = 1.0) or `f32` in `[-1, 1]`; non-finite `f32`
//!   samples are taken as 0 and counted ([`sample`]).
//! * **Framing**: frame `i` covers samples `[i·hop, i·hop + window)`; a frame is
//!   emitted only when complete, no padding at the start or the end. The window
//!   multiplies the `window_samples` frame, which is zero-padded to
//!   `fft_points`. DC removal and pre-emphasis run on the continuous stream
//!   with zero initial state ([`conditioning`], [`framer`]).
//! * **Spectrum**: `X[k]` is the DFT of the windowed frame with no `1/N`
//!   factor; `P[k] = |X[k]|²` (or `|X[k]|` for a magnitude configuration), for
//!   `k = 0 ..= N/2` ([`spectrum`]).
//! * **Mel**: `E[b] = Σ w·P` over band `b`'s bins, times the band gain
//!   ([`filterbank`]); band edges are equally spaced in mels and each triangle is
//!   evaluated at the bin's exact frequency `k·fs/N` ([`scale`]), except where
//!   a preset follows a standard's own construction.
//! * **Log**: `10·log10(max(E, floor))` or `ln(max(E, floor))` ([`log`]).
//!
//! # Example
//! A shipped table, included as Rust source:
//! ```
//! mod speech {
//!     include!("../../tables/speech16k-40.rs");
//! }
//! use stapes_core::FloatFrontEnd;
//!
//! let mut fe = FloatFrontEnd::<512, 352, 40>::new(speech::CONFIG, speech::TABLE_F32_SPARSE)?;
//! let chunk = [0i16; 800];
//! let mut rest = &chunk[..];
//! let mut frames = 0;
//! while let Some(frame) = fe.next_frame(&mut rest) {
//!     assert_eq!(frame.bands.len(), 40);
//!     frames += 1;
//! }
//! assert_eq!(frames, 2); // 800 samples: 512-sample frames every 160.
//! # Ok::<(), stapes_core::FrontEndError>(())
//! ```
#![no_std]
// The only `unsafe` is Cortex-M inline assembly, each piece with a portable
// twin that gives the same bits: on Cortex-M4 behind `cfg(stapes_arm_dsp)`
// (`fft::mul_high`, `dsp16`, the FFT loops in `fft`, the window stage's
// passes in `window`, the bins' weighted sums in `filterbank`); on
// hard-float cores behind
// `cfg(stapes_arm_fpu)` the f32 stages' loops (`sample`, `window`,
// `spectrum`, `filterbank`, `log`; the sparse band loop in `filterbank` relies on the
// table check the front end's constructor made, an `unsafe fn` contract);
// and the framer's block copy (`block_copy`) on every Cortex-M, whose twin
// is `copy_from_slice`.
#![deny(unsafe_code)]
#![deny(missing_docs)]

pub mod blob;
pub mod block_copy;
pub mod conditioning;
pub mod config;
pub mod crc32;
pub mod dsp16;
pub mod error;
pub mod fft;
pub mod filterbank;
mod fixed_data;
pub mod fixed_tables;
pub mod frame;
pub mod frame_window;
pub mod framer;
pub mod front_end;
pub mod int_log;
pub mod int_root;
pub mod level_map;
pub mod log;
pub mod mfcc;
pub mod normalise;
pub mod pcen;
pub mod pcen_fixed;
pub mod presets;
pub mod probe;
pub mod quantise;
pub mod range_floor;
pub mod sample;
pub mod scale;
pub mod spectrum;
pub mod stage;
pub mod stage_chain;
pub mod stage_config;
pub mod stage_tables;
pub mod table;
pub mod window;

/// Sealed traits' common supertrait: the crate's plumbing traits are
/// implemented for its own types only.
pub(crate) mod sealed {
    /// Implemented by the crate's arithmetics and data types only.
    pub trait Sealed {}
    impl Sealed for i16 {}
    impl Sealed for i32 {}
    impl Sealed for f32 {}
    impl Sealed for crate::fft::Fixed16 {}
    impl Sealed for crate::fft::Fixed32 {}
    impl Sealed for crate::front_end::F32 {}
}

/// The `fixed` crate, whose types name the fixed path's Q formats.
pub use fixed;

// The small public API, at the crate root.
pub use config::FeatureConfig;
pub use error::FrontEndError;
pub use fft::{Fixed16, Fixed32};
pub use fixed_tables::FixedTables;
pub use frame::{Frame, StreamingFrontEnd};
pub use frame_window::FrameWindow;
pub use front_end::{Arithmetic, F32, FixedArithmetic, FixedFrontEnd, FloatFrontEnd, FrontEnd};
pub use level_map::{FixedLevelMap, FloatLevelMap};
pub use log::{FixedLog, FloatLog};
pub use mfcc::{DctTable, FixedMfcc, FloatMfcc};
pub use normalise::{BandStatistics, Normalise, NormalisedQuantise};
pub use pcen::{FloatPcen, PcenParams};
pub use pcen_fixed::{FixedPcen, FixedPcenParams};
pub use quantise::{AffineQuantiser, CodeRange, FixedQuantiseStage, FixedQuantiser, QuantiseStage};
pub use range_floor::RangeFloor;
pub use stage::{FrameStage, Then, Unchanged};
pub use stage_chain::{FixedStageChain, FloatStageChain, StageKind, StageValues};
pub use stage_config::StageConfig;
pub use stage_tables::StageTables;
pub use table::{FilterbankForm, TableView};
