//! The `f32` front end: samples in, log-mel frames out.
//!
//! ```
//! use stapes_core::float_path::FloatFrontEnd;
//! # use stapes_core::{presets::TINY16K_10, table::{TableView, Filterbank}};
//! # fn table() -> TableView<'static, f32> { unimplemented!() }
//! // A board sizes the buffers exactly: FFT 256, overlap 256 - 160, 10 bands.
//! type Board = FloatFrontEnd<'static, 256, 96, 10>;
//! # fn demo(t: TableView<'static, f32>) {
//! let mut fe = Board::new(TINY16K_10, t).expect("table fits the configuration");
//! let dma_half_buffer = [0i16; 100];
//! let mut input = &dma_half_buffer[..];
//! while let Some(frame) = fe.next_frame(&mut input) {
//!     // frame.bands: 10 values in dB; frame.index counts from 0.
//!     let _ = (frame.index, frame.bands);
//! }
//! # }
//! ```

use crate::conditioning::FloatConditioner;
use crate::config::FeatureConfig;
use crate::error::FrontEndError;
use crate::frame::Frame;
use crate::framer::Framer;
use crate::log::FloatLog;
use crate::probe::{Stage, StageProbe};
use crate::sample::Sample;
use crate::stage::FrameStage;
use crate::table::TableView;
use crate::{mel, spectrum_f32, window};

/// Streaming `f32` front end with buffers sized at compile time: `FFT` is the
/// FFT buffer (≥ `fft_points`), `OVERLAP` the carried samples
/// (≥ `window_samples - hop_samples`), `BANDS` the output (≥ `bands`).
/// A host tool may use larger capacities than the configuration needs.
/// `S` is the chain of [stages](crate::stage) after the filterbank (which
/// receives one linear energy per band): the log by default.
#[derive(Clone, Debug)]
pub struct FloatFrontEnd<
    't,
    const FFT: usize,
    const OVERLAP: usize,
    const BANDS: usize,
    S = FloatLog,
> {
    config: FeatureConfig,
    table: TableView<'t, f32>,
    conditioner: FloatConditioner,
    framer: Framer<f32, f32, FFT, OVERLAP>,
    energies: [f32; BANDS],
    stages: S,
    next_index: u64,
    non_finite: u64,
}

impl<'t, const FFT: usize, const OVERLAP: usize, const BANDS: usize>
    FloatFrontEnd<'t, FFT, OVERLAP, BANDS>
{
    /// A front end for `config` reading `table`.
    ///
    /// Checks, with integer work only, that the table fits the configuration,
    /// that the buffers are large enough and that the FFT size is compiled in.
    /// It does not re-run [`FeatureConfig::validate`] (`f64` band placement):
    /// tables only come from validated configurations.
    pub fn new(config: FeatureConfig, table: TableView<'t, f32>) -> Result<Self, FrontEndError> {
        Self::with_stages(config, table, FloatLog::for_config(&config))
    }
}

impl<'t, const FFT: usize, const OVERLAP: usize, const BANDS: usize, S: FrameStage<f32>>
    FloatFrontEnd<'t, FFT, OVERLAP, BANDS, S>
{
    /// A front end whose filterbank energies go through `stages` (instead
    /// of the log alone); checks as [`FloatFrontEnd::new`].
    pub fn with_stages(
        config: FeatureConfig,
        table: TableView<'t, f32>,
        stages: S,
    ) -> Result<Self, FrontEndError> {
        crate::error::check_shape(&config, FFT, OVERLAP, BANDS)?;
        if !spectrum_f32::fft_compiled(config.fft_points as usize) {
            return Err(FrontEndError::FftNotCompiled {
                fft_points: config.fft_points,
            });
        }
        table.check(&config)?;
        Ok(FloatFrontEnd {
            config,
            table,
            conditioner: FloatConditioner::new(config.dc_removal_pole, config.pre_emphasis),
            framer: Framer::new(config.window_samples as usize, config.hop_samples as usize),
            energies: [0.0; BANDS],
            stages,
            next_index: 0,
            non_finite: 0,
        })
    }

    /// The configuration in use.
    pub fn config(&self) -> &FeatureConfig {
        &self.config
    }

    /// Returns to the state of a new front end (no samples, zero filter state).
    pub fn reset(&mut self) {
        self.framer.reset();
        self.conditioner.reset();
        self.stages.reset();
        self.next_index = 0;
        self.non_finite = 0;
    }

    /// Non-finite `f32` samples seen since the start (each was taken as 0).
    pub fn non_finite_samples(&self) -> u64 {
        self.non_finite
    }

    /// Consumes samples from the front of `input` until a frame completes, and
    /// returns it; returns `None` once `input` is empty without a new frame.
    /// Call it in a loop until `None` to drain a chunk.
    pub fn next_frame<X: Sample>(&mut self, input: &mut &[X]) -> Option<Frame<'_, S::Out>> {
        self.next_frame_probed(input, &mut ())
    }

    /// [`FloatFrontEnd::next_frame`] with a [`StageProbe`] told when each stage ends.
    pub fn next_frame_probed<X: Sample, P: StageProbe>(
        &mut self,
        input: &mut &[X],
        probe: &mut P,
    ) -> Option<Frame<'_, S::Out>> {
        let conditioner = &mut self.conditioner;
        let non_finite = &mut self.non_finite;
        let complete = self
            .framer
            .fill_block_from(input, |src: &[X], dst: &mut [f32]| {
                *non_finite += X::to_unit_f32_slice(src, dst);
                conditioner.run_in_place(dst);
            });
        if !complete {
            return None;
        }
        self.compute_frame(probe);
        let index = self.next_index;
        self.next_index += 1;
        let bands = self
            .stages
            .process(&mut self.energies[..self.config.stage_inputs()]);
        probe.mark(Stage::Log);
        Some(Frame { index, bands })
    }

    fn compute_frame<P: StageProbe>(&mut self, probe: &mut P) {
        let n = self.config.fft_points as usize;
        let bands = self.config.bands as usize;
        probe.start();
        {
            // The shared samples go to the overlap store as they are windowed.
            let (buf, hop, overlap) = self.framer.frame_and_overlap_mut();
            let buf = &mut buf[..n];
            window::apply_saving_f32(buf, self.table.window, hop, overlap);
            probe.mark(Stage::Window);
            // `new` checked that this size is compiled in.
            spectrum_f32::real_fft_in_place(buf);
            probe.mark(Stage::Fft);
            let spectrum = spectrum_f32::spectrum_in_place(buf, self.config.spectrum);
            probe.mark(Stage::Spectrum);
            let out = &mut self.energies[..bands];
            // SAFETY: `new` checked the table against this configuration,
            // whose `bands` values `out` holds and whose spectrum bins
            // (`fft_points / 2 + 1`) `spectrum` holds.
            #[allow(unsafe_code)]
            unsafe {
                mel::accumulate_checked_f32(&self.table.filterbank, spectrum, out)
            };
            if let Some(gains) = self.table.band_gains {
                mel::apply_gains_f32(gains, out);
            }
            if self.config.stage_inputs() > bands {
                // The frame's energy (Parseval): Σ c_k·P[k] / N from the
                // lowest band's first bin, c_k = 2 but at 0 and N/2.
                let from = self.table.filterbank.first_bin().min(n / 2);
                let mut sum = 0.0f32;
                for (k, &p) in spectrum[..=n / 2].iter().enumerate().skip(from) {
                    sum += if k == 0 || k == n / 2 { p } else { 2.0 * p };
                }
                self.energies[bands] = sum / n as f32;
            }
        }
        self.framer.end_frame_unconverted();
        probe.mark(Stage::Mel);
    }
}

impl<const FFT: usize, const OVERLAP: usize, const BANDS: usize, S: FrameStage<f32>>
    crate::frame::StreamingFrontEnd for FloatFrontEnd<'_, FFT, OVERLAP, BANDS, S>
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
