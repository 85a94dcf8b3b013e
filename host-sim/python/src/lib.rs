//! `stapes` for Python: the board's exact features from numpy arrays.
//!
//! The values come from the same code as `stapes features` and `stapes
//! export` (the core's front end and the host's stage chain), so they are
//! the board's bits. Every arithmetic (`f32`, `fixed16`, `fixed32`) and
//! every stage of a configuration is available.

use numpy::{PyArray1, PyArrayMethods, PyReadonlyArray1, PyUntypedArrayMethods};
use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::prelude::*;
use rayon::prelude::*;
use stapes_sim::check::{Arith, CoreTables};
use stapes_sim::cli::{FormChoice, InputArgs};
use stapes_sim::clip_runner::{ClipRunner, FlatValues, SampleSlice};
use stapes_sim::config_source::ConfigArgs;
use stapes_sim::export::{Align, laid_out};
use stapes_sim::run::Samples;
use stapes_sim::table_source::LoadedTables;

fn value_error(e: impl std::fmt::Display) -> PyErr {
    PyValueError::new_err(e.to_string())
}

fn arith(name: &str) -> PyResult<Arith> {
    match name {
        "f32" => Ok(Arith::F32),
        "fixed16" => Ok(Arith::Fixed16),
        "fixed32" => Ok(Arith::Fixed32),
        other => Err(value_error(format!(
            "arithmetic {other:?} is not one of the core's: give \"f32\", \"fixed16\" or \"fixed32\""
        ))),
    }
}

fn align(name: &str) -> PyResult<Align> {
    match name {
        "start" => Ok(Align::Start),
        "centre" | "center" => Ok(Align::Centre),
        "end" => Ok(Align::End),
        other => Err(value_error(format!(
            "align {other:?}: give \"start\", \"centre\" or \"end\""
        ))),
    }
}

/// The tables of a preset, a TOML configuration file or a table blob.
fn load_tables(
    preset: Option<String>,
    config: Option<String>,
    table_blob: Option<String>,
) -> PyResult<LoadedTables> {
    let args = ConfigArgs {
        preset,
        config: config.map(Into::into),
        ..ConfigArgs::default()
    };
    if args.preset.is_some() && args.config.is_some() {
        return Err(value_error(
            "give a preset or a configuration file, not both",
        ));
    }
    let input = InputArgs {
        channel: None,
        chunk_samples: 0,
        form: FormChoice::Sparse,
        table_blob: table_blob.map(Into::into),
    };
    LoadedTables::load(&args, &input).map_err(|e| value_error(format!("{e:#}")))
}

/// What a runner is built from, checked once.
struct Settings {
    arith: Arith,
    stage: Option<String>,
    raw: bool,
}

fn runner<'t>(
    loaded: &'t LoadedTables,
    stage_tables: &stapes_core::StageTables<'t>,
    s: &Settings,
) -> PyResult<ClipRunner<'t>> {
    let config = loaded.config().map_err(value_error)?;
    let tables: CoreTables<'t> = loaded
        .core_tables(s.arith, stapes_core::table::FilterbankForm::Sparse)
        .map_err(value_error)?;
    ClipRunner::new(
        &config,
        s.arith,
        tables,
        stage_tables,
        s.stage.as_deref(),
        s.raw,
    )
    .map_err(|e| value_error(format!("{e:#}")))
}

/// A 1-D, C-contiguous int16 or float32 array as samples.
fn samples_of(array: &Bound<'_, PyAny>) -> PyResult<Samples> {
    fn contiguous<T: numpy::Element + Copy>(a: PyReadonlyArray1<'_, T>) -> PyResult<Vec<T>> {
        a.as_slice().map(|s| s.to_vec()).map_err(|_| {
            PyValueError::new_err(
                "samples must be a C-contiguous array: pass numpy.ascontiguousarray(samples)",
            )
        })
    }
    if let Ok(a) = array.extract::<PyReadonlyArray1<'_, i16>>() {
        return Ok(Samples::I16(contiguous(a)?));
    }
    if let Ok(a) = array.extract::<PyReadonlyArray1<'_, f32>>() {
        return Ok(Samples::F32(contiguous(a)?));
    }
    let what = match array.cast::<numpy::PyUntypedArray>() {
        Ok(a) => format!("a {}-D array of {}", a.ndim(), a.dtype()),
        Err(_) => format!("a {}", array.get_type().name()?),
    };
    Err(PyTypeError::new_err(format!(
        "samples must be a 1-D numpy array of int16 (16-bit PCM) or float32 (full scale ±1), \
         not {what}: convert with samples.astype(numpy.int16) or numpy.float32"
    )))
}

fn check_rate(loaded: &LoadedTables, rate: u32) -> PyResult<()> {
    let config = loaded.config().map_err(value_error)?;
    if config.sample_rate_hz != rate {
        return Err(value_error(format!(
            "the samples are at {rate} Hz but the configuration expects {} Hz: resample \
             them, or choose a configuration for {rate} Hz (nothing is resampled here)",
            config.sample_rate_hz
        )));
    }
    Ok(())
}

/// A flat buffer as a numpy array of `shape`.
fn to_numpy<'py>(
    py: Python<'py>,
    values: FlatValues,
    shape: &[usize],
) -> PyResult<Bound<'py, PyAny>> {
    fn make<'py, T: numpy::Element>(
        py: Python<'py>,
        v: Vec<T>,
        shape: &[usize],
    ) -> PyResult<Bound<'py, PyAny>> {
        Ok(PyArray1::from_vec(py, v).reshape(shape)?.into_any())
    }
    match values {
        FlatValues::F32(v) => make(py, v, shape),
        FlatValues::I16(v) => make(py, v, shape),
        FlatValues::I32(v) => make(py, v, shape),
        FlatValues::I8(v) => make(py, v, shape),
        FlatValues::U8(v) => make(py, v, shape),
    }
}

self_cell::self_cell!(
    struct RunnerCell {
        owner: LoadedTables,
        #[not_covariant]
        dependent: OwnedRunner,
    }
);

/// A runner and the stage tables it reads (both borrow the loaded tables).
struct OwnedRunner<'t> {
    runner: ClipRunner<'t>,
}

/// The board's front end, streaming: push chunks of samples as they
/// arrive, get the frames they complete, as a board would.
///
/// >>> fe = stapes.StreamingFrontEnd(16000, preset="speech16k-40", arithmetic="fixed16")
/// >>> frames = fe.push(chunk)            # [frames, values], possibly 0 frames
#[pyclass(module = "stapes")]
struct StreamingFrontEnd {
    cell: RunnerCell,
    values: usize,
}

#[pymethods]
impl StreamingFrontEnd {
    /// `sample_rate_hz` must be the configuration's rate. The configuration
    /// is a `preset` name, a TOML `config` file or a `table_blob`; the
    /// default is the speech16k-40 preset. `stage` picks the output
    /// (default: the last, the model's input); `raw` gives the board's
    /// exact integers (fixed arithmetics; codes for the quantise stage).
    #[new]
    #[pyo3(signature = (sample_rate_hz, *, preset=None, config=None, table_blob=None, arithmetic="f32", stage=None, raw=false))]
    #[allow(clippy::too_many_arguments)]
    fn new(
        sample_rate_hz: u32,
        preset: Option<String>,
        config: Option<String>,
        table_blob: Option<String>,
        arithmetic: &str,
        stage: Option<String>,
        raw: bool,
    ) -> PyResult<Self> {
        let loaded = load_tables(preset, config, table_blob)?;
        check_rate(&loaded, sample_rate_hz)?;
        let settings = Settings {
            arith: arith(arithmetic)?,
            stage,
            raw,
        };
        let cell = RunnerCell::try_new(loaded, |loaded| -> PyResult<OwnedRunner<'_>> {
            let stage_tables = loaded.stage_tables().map_err(value_error)?;
            Ok(OwnedRunner {
                runner: runner(loaded, &stage_tables, &settings)?,
            })
        })?;
        let values = cell.with_dependent(|_, d| d.runner.values_per_frame());
        Ok(StreamingFrontEnd { cell, values })
    }

    /// Feeds `samples` (1-D int16 or float32); returns the frames they
    /// complete as a `[frames, values]` array (0 frames until a window
    /// fills).
    fn push<'py>(
        &mut self,
        py: Python<'py>,
        samples: &Bound<'py, PyAny>,
    ) -> PyResult<Bound<'py, PyAny>> {
        let x = samples_of(samples)?;
        let values = self.values;
        let out = self.cell.with_dependent_mut(|_, d| {
            let mut out = d.runner.kind().empty();
            d.runner.push(SampleSlice::from(&x), &mut out);
            out
        });
        let frames = out.len() / values.max(1);
        to_numpy(py, out, &[frames, values])
    }

    /// Returns to the state of a new front end.
    fn reset(&mut self) {
        self.cell.with_dependent_mut(|_, d| d.runner.reset());
    }

    /// Values per frame.
    #[getter]
    fn values_per_frame(&self) -> usize {
        self.values
    }

    /// The stage written.
    #[getter]
    fn stage(&self) -> &'static str {
        self.cell.with_dependent(|_, d| d.runner.stage())
    }

    /// NumPy's name of the output dtype.
    #[getter]
    fn dtype(&self) -> &'static str {
        self.cell
            .with_dependent(|_, d| d.runner.kind().numpy_name())
    }

    /// The configuration's fingerprint (the tables' CRC-32 tie).
    #[getter]
    fn fingerprint(&self) -> PyResult<u32> {
        Ok(self
            .cell
            .borrow_owner()
            .config()
            .map_err(value_error)?
            .fingerprint())
    }

    /// Values the quantiser clamped since the last reset.
    #[getter]
    fn clamped(&self) -> u64 {
        self.cell.with_dependent(|_, d| d.runner.clamped())
    }
}

/// The board's features of one clip: a `[frames, values]` array.
///
/// `samples` is a 1-D int16 or float32 array at `sample_rate_hz`; the
/// other arguments are those of `StreamingFrontEnd`.
#[pyfunction]
#[pyo3(signature = (samples, sample_rate_hz, *, preset=None, config=None, table_blob=None, arithmetic="f32", stage=None, raw=false))]
#[allow(clippy::too_many_arguments)]
fn features<'py>(
    py: Python<'py>,
    samples: &Bound<'py, PyAny>,
    sample_rate_hz: u32,
    preset: Option<String>,
    config: Option<String>,
    table_blob: Option<String>,
    arithmetic: &str,
    stage: Option<String>,
    raw: bool,
) -> PyResult<Bound<'py, PyAny>> {
    let x = samples_of(samples)?;
    let loaded = load_tables(preset, config, table_blob)?;
    check_rate(&loaded, sample_rate_hz)?;
    let settings = Settings {
        arith: arith(arithmetic)?,
        stage,
        raw,
    };
    let stage_tables = loaded.stage_tables().map_err(value_error)?;
    let mut r = runner(&loaded, &stage_tables, &settings)?;
    let values = r.values_per_frame();
    let mut out = r.kind().empty();
    py.detach(|| r.run_clip(SampleSlice::from(&x), &mut out));
    let frames = out.len() / values.max(1);
    to_numpy(py, out, &[frames, values])
}

/// The board's features of many clips, on every core, without the GIL.
///
/// `clips` is a list of 1-D int16 or float32 arrays at `sample_rate_hz`.
/// With `frames=N` each clip is padded with zero samples or trimmed to N
/// frames (`align`: where the clip sits, "start", "centre" or "end") and
/// the result is one `[clips, N, values]` array; without it, a list of
/// `[frames, values]` arrays. `threads` limits the cores used.
#[pyfunction]
#[pyo3(signature = (clips, sample_rate_hz, *, preset=None, config=None, table_blob=None, arithmetic="f32", stage=None, raw=false, frames=None, align="start", threads=None))]
#[allow(clippy::too_many_arguments)]
fn features_batch<'py>(
    py: Python<'py>,
    clips: Vec<Bound<'py, PyAny>>,
    sample_rate_hz: u32,
    preset: Option<String>,
    config: Option<String>,
    table_blob: Option<String>,
    arithmetic: &str,
    stage: Option<String>,
    raw: bool,
    frames: Option<usize>,
    align: &str,
    threads: Option<usize>,
) -> PyResult<Bound<'py, PyAny>> {
    let inputs: Vec<Samples> = clips
        .iter()
        .enumerate()
        .map(|(i, c)| {
            samples_of(c).map_err(|e| {
                let kind = e.get_type(py);
                PyErr::from_type(kind, format!("clip {i}: {}", e.value(py)))
            })
        })
        .collect::<PyResult<_>>()?;
    let loaded = load_tables(preset, config, table_blob)?;
    check_rate(&loaded, sample_rate_hz)?;
    let config = loaded.config().map_err(value_error)?;
    let align = align_choice(align)?;
    if frames == Some(0) {
        return Err(value_error("frames=0 keeps no frame: give at least 1"));
    }
    let settings = Settings {
        arith: arith(arithmetic)?,
        stage,
        raw,
    };
    let stage_tables = loaded.stage_tables().map_err(value_error)?;
    let probe = runner(&loaded, &stage_tables, &settings)?;
    let (values, kind) = (probe.values_per_frame(), probe.kind());
    drop(probe);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()
        .map_err(value_error)?;
    let (w, h) = (config.window_samples as usize, config.hop_samples as usize);
    let results: Vec<FlatValues> = py.detach(|| {
        pool.install(|| {
            inputs
                .par_iter()
                .map_init(
                    || runner(&loaded, &stage_tables, &settings).ok(),
                    |r, x| {
                        let r = r.as_mut().expect("built once already");
                        let mut out = kind.empty();
                        match frames {
                            Some(n) if w + (n - 1) * h != x.len() => {
                                let (laid, _) = laid_out(x, w + (n - 1) * h, align);
                                r.run_clip(SampleSlice::from(&laid), &mut out);
                            }
                            _ => {
                                r.run_clip(SampleSlice::from(x), &mut out);
                            }
                        }
                        out
                    },
                )
                .collect()
        })
    });
    match frames {
        Some(n) => {
            let mut all = kind.empty();
            for r in &results {
                all.extend_from(r, 0..r.len());
            }
            to_numpy(py, all, &[results.len(), n, values])
        }
        None => {
            let list = pyo3::types::PyList::empty(py);
            for r in results {
                let f = r.len() / values.max(1);
                list.append(to_numpy(py, r, &[f, values])?)?;
            }
            Ok(list.into_any())
        }
    }
}

fn align_choice(name: &str) -> PyResult<Align> {
    align(name)
}

/// Names of the shipped presets.
#[pyfunction]
fn presets() -> Vec<&'static str> {
    stapes_core::presets::ALL.iter().map(|(n, _)| *n).collect()
}

/// The board's exact features for training keyword models.
#[pymodule]
fn stapes(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<StreamingFrontEnd>()?;
    m.add_function(wrap_pyfunction!(features, m)?)?;
    m.add_function(wrap_pyfunction!(features_batch, m)?)?;
    m.add_function(wrap_pyfunction!(presets, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
