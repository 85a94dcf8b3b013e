//! What each subcommand does: the dispatch, and `tables`, `check`,
//! `features`, `budget` and `speed`. Where tables come from is
//! [`crate::table_source`]; the demo is [`crate::demo`].

use std::path::Path;

use anyhow::{Result, anyhow};
use stapes_core::config::{FeatureConfig, LogKind};
use stapes_core::presets;
use stapes_core::table::FilterbankForm;

use crate::check::{Arith, CoreTables, check, report};
use crate::cli::{CheckArgs, Cli, Command, FeaturesArgs, FormChoice, InputArgs, TablesArgs};
use crate::emit::{BlobContents, size_report, write_all};
use crate::generate::GeneratedTables;
use crate::run::Samples;
use crate::synth::{DEMO_SEED, demo_clip};
pub use crate::table_source::LoadedTables;
use crate::wav::read_wav_for;

/// How a command ended when it did not fail outright.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything passed.
    Success,
    /// A check ran and its tolerance was exceeded.
    CheckFailed,
    /// A batch finished, but some of its inputs failed (listed).
    SomeFailed,
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Tables(a) => tables(&a),
        Command::Check(a) => check_command(&a),
        Command::Features(a) => features(&a),
        Command::Demo(a) => crate::demo::demo(&a),
        Command::Export(a) => crate::export::export(&a),
        Command::Match(a) => crate::pipeline_match::run(&a),
        Command::Statistics(a) => {
            let named = a.config.resolve()?;
            let (mean, deviation, frames, clips) =
                crate::statistics::statistics(&named.config, &a.corpus)?;
            let text = crate::statistics::toml_table(
                &named.name,
                &mean,
                &deviation,
                frames,
                clips,
                &a.corpus,
            );
            crate::output::write_atomic(&a.output, text.as_bytes())?;
            crate::say!(
                "statistics: {} values over {frames} frames of {clips} clips; wrote {}",
                mean.len(),
                a.output.display()
            );
            Ok(Outcome::Success)
        }
        Command::Speed(a) => {
            let named = a.config.resolve()?;
            if !(a.seconds.is_finite() && a.seconds > 0.0 && a.seconds <= 600.0) {
                anyhow::bail!(
                    "--seconds {} is not a measuring time: give a number of seconds between 0 and 600",
                    a.seconds
                );
            }
            let speeds = crate::speed::measure(&named.config, a.seconds)?;
            crate::say_text!(crate::speed::report(&named.name, &speeds));
            Ok(Outcome::Success)
        }
        Command::Budget(a) => {
            let named = a.config.resolve()?;
            crate::say_text!(crate::budget::report(
                &named.name,
                &named.config,
                a.arith,
                a.core,
                form(a.form),
                a.clock_mhz
            )?);
            for line in crate::predict::report_lines(&named.config)? {
                crate::say!("{line}");
            }
            Ok(Outcome::Success)
        }
    }
}

pub(crate) fn form(choice: FormChoice) -> FilterbankForm {
    match choice {
        FormChoice::Sparse => FilterbankForm::Sparse,
        FormChoice::Compact => FilterbankForm::Compact,
    }
}

pub(crate) fn band_centres(config: &FeatureConfig) -> Vec<f64> {
    crate::design::design(config).centres_hz
}

fn load_input(
    input: Option<&Path>,
    input_args: &InputArgs,
    config: &FeatureConfig,
) -> Result<(String, Samples)> {
    match input {
        Some(path) => {
            let samples = read_wav_for(path, input_args.channel, config.sample_rate_hz)?;
            at_least_one_frame(path, &samples, config)?;
            Ok((path.display().to_string(), samples))
        }
        None => {
            let clip = demo_clip(config.sample_rate_hz, DEMO_SEED);
            Ok(("the demo clip".into(), Samples::I16(clip.samples)))
        }
    }
}

/// An input shorter than one window has no frame: nothing to compare or
/// write, which is an error, not a pass.
fn at_least_one_frame(path: &Path, samples: &Samples, config: &FeatureConfig) -> Result<()> {
    if samples.len() < config.window_samples as usize {
        anyhow::bail!(
            "{} holds {} samples, fewer than one window ({} samples at {} Hz): it has no \
             frame; give a recording of at least {:.3} s",
            path.display(),
            samples.len(),
            config.window_samples,
            config.sample_rate_hz,
            config.window_samples as f64 / config.sample_rate_hz as f64
        );
    }
    Ok(())
}

fn tables(a: &TablesArgs) -> Result<Outcome> {
    type Statistics = Option<(Vec<f32>, Vec<f32>)>;
    let configs: Vec<(String, FeatureConfig, String, Statistics)> = if a.all_presets {
        presets::ALL
            .iter()
            .map(|(n, c)| {
                (
                    n.to_string(),
                    *c,
                    format!("stapes tables --preset {n}"),
                    None,
                )
            })
            .collect()
    } else {
        let named = a.config.resolve()?;
        let command = match (&a.config.preset, &a.config.config) {
            (None, Some(path)) if !named.name.ends_with("-custom") => {
                format!("stapes tables --config {}", path.display())
            }
            _ if named.name.ends_with("-custom") => "stapes tables with custom options".to_string(),
            _ => format!("stapes tables --preset {}", named.name),
        };
        vec![(named.name.clone(), named.config, command, named.statistics)]
    };
    for (name, config, command, statistics) in configs {
        let t = GeneratedTables::with_statistics(&config, statistics)?;
        let written = write_all(&t, &name, &a.out_dir, &command, BlobContents::ALL)?;
        crate::say_text!(size_report(&t, &name, Some(written.blob_bytes)));
        for line in crate::predict::report_lines(&config)? {
            crate::say!("{line}");
        }
        crate::say!(
            "  wrote {}, {}, {}\n",
            written.rust.display(),
            written.header.display(),
            written.blob.display()
        );
    }
    Ok(Outcome::Success)
}

fn check_command(a: &CheckArgs) -> Result<Outcome> {
    if let Some(dir) = &a.corpus {
        return crate::corpus::corpus_command(dir, &a.config, a.arith, a.list_failures);
    }
    let arith = a.arith.unwrap_or(Arith::F32);
    let loaded = LoadedTables::load(&a.config, &a.input_args)?;
    let config = loaded.config()?;
    if a.sweep {
        return crate::sweep::sweep(&loaded, &config, form(a.input_args.form), &a.out_dir);
    }
    let (input_name, samples) = load_input(a.input.as_deref(), &a.input_args, &config)?;
    let tables = loaded.core_tables(arith, form(a.input_args.form))?;
    crate::say!(
        "check: {} ({} core, {} filterbank) on {input_name}: {} samples, {:.2} s at {} Hz",
        loaded.name(),
        arith.name(),
        form(a.input_args.form).name(),
        samples.len(),
        samples.len() as f64 / config.sample_rate_hz as f64,
        config.sample_rate_hz
    );
    crate::say!(
        "  {}",
        InputReport::of(&samples, &config, std::iter::empty()).range_line()
    );
    for w in crate::predict::warnings(&config, arith)? {
        eprintln!("{w}");
    }
    let run = check(arith, &config, tables, &samples, a.input_args.chunk_samples)?;
    crate::say_text!(report(&run, &band_centres(&config), !a.worst_bands));
    let mut stages_passed = true;
    if config.stages.any() {
        let stage_tables = loaded.stage_tables()?;
        let (comparisons, clamped) = crate::stage_check::check_stages(
            arith,
            &config,
            tables,
            &stage_tables,
            &samples,
            a.input_args.chunk_samples,
        )?;
        stages_passed = comparisons.iter().all(|c| c.passed());
        let clamped = config.stages.quantise.map(|_| clamped);
        crate::say_text!(crate::stage_check::stage_report(
            arith,
            &comparisons,
            clamped
        ));
    }
    Ok(if run.passed() && stages_passed {
        Outcome::Success
    } else {
        Outcome::CheckFailed
    })
}

/// `features` for a configuration with stages: the chosen stage's output
/// (the last by default), per frame or as the model's windows.
fn stage_features(
    a: &FeaturesArgs,
    loaded: &LoadedTables,
    config: &FeatureConfig,
    tables: CoreTables<'_>,
    samples: &crate::run::Samples,
    chunk: usize,
) -> Result<Outcome> {
    let names = crate::stages::stage_names(config);
    let name = match &a.stage {
        Some(n) => names.iter().copied().find(|s| s == n).ok_or_else(|| {
            anyhow!(
                "--stage {n} is not a stage of this configuration: choose one of {}",
                names.join(", ")
            )
        })?,
        None => *names.last().expect("at least the level stage"),
    };
    let stage_tables = loaded.stage_tables()?;
    let run =
        crate::stage_check::run_arith(a.arith, config, tables, &stage_tables, samples, chunk)?;
    let out = run.stage(name).expect("a configured stage");
    let values = out.values.first().map_or(0, Vec::len);
    let (rows, shape, data): (usize, Vec<usize>, Vec<f64>) = if a.windows {
        let Some(w) = config.stages.model_window else {
            return Err(anyhow!(
                "--windows writes the model's windows, and this configuration has none: add \
                 [stages.model_window] or --model-window F"
            ));
        };
        if name != *names.last().expect("stages") {
            return Err(anyhow!(
                "--windows takes the model's input, the last stage ({}): drop --stage {name}",
                names.last().expect("stages")
            ));
        }
        let windows = crate::stages::model_windows(config, &out.values);
        let n = windows.len();
        (
            n,
            vec![n, w.frames as usize, values],
            windows.into_iter().flatten().collect(),
        )
    } else {
        let n = out.values.len();
        (
            n,
            vec![n, values],
            out.values.iter().flatten().copied().collect(),
        )
    };
    let what = if a.raw {
        let Some(raw) = &out.raw else {
            return Err(anyhow!(
                "--raw writes the board's exact integers, which {} stage in {} does not hold: \
                 use a fixed arithmetic, or --stage quantise",
                name,
                a.arith.name()
            ));
        };
        let raw_rows: Vec<i64> = if a.windows {
            let as_f64: Vec<Vec<f64>> = raw
                .iter()
                .map(|r| r.iter().map(|&v| v as f64).collect())
                .collect();
            crate::stages::model_windows(config, &as_f64)
                .into_iter()
                .flatten()
                .map(|v| v as i64)
                .collect()
        } else {
            raw.iter().flatten().copied().collect()
        };
        match (name, config.stages.quantise.map(|q| q.codes)) {
            ("quantise", Some(stapes_core::CodeRange::Int8)) => {
                crate::npy::write_shaped(&a.output, &shape, raw_rows.iter().map(|&v| v as i8))?;
                "int8 codes".to_string()
            }
            ("quantise", _) => {
                crate::npy::write_shaped(&a.output, &shape, raw_rows.iter().map(|&v| v as u8))?;
                "uint8 codes".to_string()
            }
            _ => {
                crate::npy::write_shaped(&a.output, &shape, raw_rows.iter().map(|&v| v as i32))?;
                "int32, the board's exact integers (1/256 units; PCEN 1/65536)".to_string()
            }
        }
    } else {
        crate::npy::write_shaped(&a.output, &shape, data.iter().map(|&v| v as f32))?;
        "float32".to_string()
    };
    crate::say!(
        "features: {} with {} ({} core), stage {name}",
        a.input.display(),
        loaded.name(),
        a.arith.name()
    );
    crate::say!(
        "  output: {} {what}, shape {:?}{}",
        a.output.display(),
        shape,
        if config.stages.quantise.is_some() {
            format!(", {} values clamped by the quantiser", run.clamped)
        } else {
            String::new()
        }
    );
    let _ = rows;
    Ok(Outcome::Success)
}

fn unit(config: &FeatureConfig) -> &'static str {
    match config.log {
        LogKind::Decibel => "dB",
        LogKind::Natural => "ln",
    }
}

fn features(a: &FeaturesArgs) -> Result<Outcome> {
    let loaded = LoadedTables::load(&a.config, &a.input_args)?;
    let config = loaded.config()?;
    let tables = loaded.core_tables(a.arith, form(a.input_args.form))?;
    for w in crate::predict::warnings(&config, a.arith)? {
        eprintln!("{w}");
    }
    if a.windows {
        // The model's windows overlap: built from the whole clip in memory.
        let samples = read_wav_for(&a.input, a.input_args.channel, config.sample_rate_hz)?;
        at_least_one_frame(&a.input, &samples, &config)?;
        let chunk = match a.input_args.chunk_samples {
            0 => samples.len().max(1),
            n => n,
        };
        return stage_features(a, &loaded, &config, tables, &samples, chunk);
    }
    if a.raw && a.arith == Arith::F32 && !config.stages.any() {
        return Err(anyhow!(
            "--raw writes the fixed path's integers: add --arith fixed16 or --arith fixed32"
        ));
    }
    // Streamed: a block of samples read, run through the board's front end
    // and chain, and its frames written, then the next; a long recording
    // never sits in memory whole.
    let mut stream =
        crate::wav_stream::WavStream::open(&a.input, a.input_args.channel, config.sample_rate_hz)?;
    let total = stream.len() as usize;
    if total < config.window_samples as usize {
        let empty = Samples::I16(vec![0; total]);
        at_least_one_frame(&a.input, &empty, &config)?;
    }
    let stage_tables = loaded.stage_tables()?;
    let mut runner = crate::clip_runner::ClipRunner::new(
        &config,
        a.arith,
        tables,
        &stage_tables,
        a.stage.as_deref(),
        a.raw,
    )?;
    let values = runner.values_per_frame();
    let most = crate::run::frame_count(&config, total);
    let mut writer = crate::npy::PackedWriter::create(
        &a.output,
        crate::npy::descr(&runner.kind().empty()),
        most,
        &[values],
    )?;
    let chunk = match a.input_args.chunk_samples {
        0 => usize::MAX,
        n => n,
    };
    let plain = !config.stages.any();
    let mut tally = InputTally::new(&config);
    let mut summary = SummaryTally::default();
    let mut out = runner.kind().empty();
    let mut frames = 0;
    while let Some(block) = stream.next_block(1 << 16)? {
        tally.add_samples(&block);
        for piece in SampleChunks::new(&block, chunk) {
            out.clear();
            frames += runner.push(piece, &mut out);
            writer.append(out.as_bytes())?;
            // Statistics in output units (the plain log-mel's int16 are
            // 1/256 dB or ln).
            let scale = if matches!(out, crate::clip_runner::FlatValues::I16(_)) {
                1.0 / 256.0
            } else {
                1.0
            };
            for i in 0..out.len() {
                let v = (out.get_f64(i) * scale) as f32;
                summary.add(v);
                if plain {
                    tally.add_value(v);
                }
            }
        }
    }
    writer.finish_synced(frames)?;
    let kind = runner.kind();
    let what = match (plain, kind) {
        (true, crate::clip_runner::OutputKind::Int16) => format!(
            "int16 (1/256 {} per LSB, the board's exact values)",
            unit(&config)
        ),
        (true, _) => format!("float32, {}", unit(&config)),
        (false, crate::clip_runner::OutputKind::Int8) => "int8 codes".to_string(),
        (false, crate::clip_runner::OutputKind::Uint8) => "uint8 codes".to_string(),
        (false, crate::clip_runner::OutputKind::Float32) => "float32".to_string(),
        (false, _) => "int32, the board's exact integers (1/256 units; PCEN 1/65536)".to_string(),
    };
    if !plain {
        crate::say!(
            "features: {} with {} ({} core), stage {}",
            a.input.display(),
            loaded.name(),
            a.arith.name(),
            runner.stage()
        );
        crate::say!(
            "  output: {} {what}, shape {:?}{}",
            a.output.display(),
            [frames, values],
            if config.stages.quantise.is_some() {
                format!(", {} values clamped by the quantiser", runner.clamped())
            } else {
                String::new()
            }
        );
        return Ok(Outcome::Success);
    }
    let report = tally.finish();
    crate::say!(
        "features: {} with {} ({} core)",
        a.input.display(),
        loaded.name(),
        a.arith.name()
    );
    crate::say!(
        "  input:  {} samples, {:.2} s at {} Hz",
        total,
        total as f64 / config.sample_rate_hz as f64,
        config.sample_rate_hz
    );
    crate::say!(
        "  frames: {} (window {}, hop {}; frame i covers samples [i*hop, i*hop + window))",
        frames,
        config.window_samples,
        config.hop_samples
    );
    crate::say!(
        "  output: {} [{} frames x {} bands], {what}",
        a.output.display(),
        frames,
        values
    );
    if summary.count > 0 {
        crate::say!(
            "  values: min {:.2}, mean {:.2}, max {:.2} {}",
            summary.lo,
            summary.sum / summary.count as f64,
            summary.hi,
            unit(&config)
        );
    }
    for line in report.lines(&config) {
        crate::say!("  {line}");
    }
    Ok(Outcome::Success)
}

/// Count, range and sum of output values, one value at a time.
#[derive(Default)]
struct SummaryTally {
    count: usize,
    lo: f32,
    hi: f32,
    sum: f64,
}

impl SummaryTally {
    fn add(&mut self, v: f32) {
        if self.count == 0 {
            (self.lo, self.hi) = (v, v);
        }
        self.lo = self.lo.min(v);
        self.hi = self.hi.max(v);
        self.sum += v as f64;
        self.count += 1;
    }
}

/// [`InputReport`] built a block of samples at a time.
struct InputTally {
    floor: f32,
    window: usize,
    hop: usize,
    at_floor: usize,
    values: usize,
    at_full_scale: usize,
    constant_frames: usize,
    /// Samples seen, the last one, and where its run of equal samples began.
    seen: usize,
    last: i16,
    run_start: usize,
}

impl InputTally {
    fn new(config: &FeatureConfig) -> Self {
        InputTally {
            floor: floor_output(config) as f32,
            window: config.window_samples as usize,
            hop: config.hop_samples as usize,
            at_floor: 0,
            values: 0,
            at_full_scale: 0,
            constant_frames: 0,
            seen: 0,
            last: 0,
            run_start: 0,
        }
    }

    fn add_value(&mut self, v: f32) {
        self.at_floor += (v <= self.floor + 1e-3) as usize;
        self.values += 1;
    }

    /// The samples as the fixed path takes them (float rounded to 16 bits,
    /// as [`Samples::to_i16`]).
    fn add_samples(&mut self, block: &Samples) {
        let x = match block {
            Samples::I16(v) => std::borrow::Cow::Borrowed(v),
            Samples::F32(_) => std::borrow::Cow::Owned(block.to_i16()),
        };
        for &s in x.iter() {
            self.at_full_scale += (s == i16::MIN || s == i16::MAX) as usize;
            if self.seen == 0 || s != self.last {
                self.run_start = self.seen;
                self.last = s;
            }
            let t = self.seen;
            self.seen += 1;
            // Sample t ends frame i when t + 1 = i·hop + window.
            if t + 1 >= self.window && (t + 1 - self.window) % self.hop == 0 {
                let start = t + 1 - self.window;
                self.constant_frames += (self.run_start <= start) as usize;
            }
        }
    }

    fn finish(&self) -> InputReport {
        InputReport {
            at_floor: self.at_floor,
            values: self.values,
            out_of_range: 0,
            at_full_scale: self.at_full_scale,
            constant_frames: self.constant_frames,
            frames: if self.seen < self.window {
                0
            } else {
                (self.seen - self.window) / self.hop + 1
            },
        }
    }
}

/// `samples` in pieces of `chunk` (the DMA chunks a board receives).
struct SampleChunks<'a> {
    samples: crate::clip_runner::SampleSlice<'a>,
    chunk: usize,
    at: usize,
}

impl<'a> SampleChunks<'a> {
    fn new(samples: &'a Samples, chunk: usize) -> Self {
        SampleChunks {
            samples: samples.into(),
            chunk: chunk.max(1),
            at: 0,
        }
    }
}

impl<'a> Iterator for SampleChunks<'a> {
    type Item = crate::clip_runner::SampleSlice<'a>;

    fn next(&mut self) -> Option<Self::Item> {
        use crate::clip_runner::SampleSlice;
        let len = match self.samples {
            SampleSlice::I16(v) => v.len(),
            SampleSlice::F32(v) => v.len(),
        };
        if self.at >= len {
            return None;
        }
        let r = self.at..(self.at + self.chunk).min(len);
        self.at = r.end;
        Some(match self.samples {
            SampleSlice::I16(v) => SampleSlice::I16(&v[r]),
            SampleSlice::F32(v) => SampleSlice::F32(&v[r]),
        })
    }
}

/// The floor in output units (dB, or natural-log units).
fn floor_output(config: &FeatureConfig) -> f64 {
    match config.log {
        LogKind::Decibel => config.floor_db as f64,
        LogKind::Natural => config.floor_db as f64 * std::f64::consts::LN_10 / 10.0,
    }
}

/// What `features` says about its input and output beyond the numbers: how
/// many values sit at the floor, how many samples were out of range, and how
/// many frames were constant (their values are the conditioning's residue
/// or the floor, not speech).
#[derive(Debug, Clone, PartialEq)]
pub struct InputReport {
    /// Output values at the configured floor.
    pub at_floor: usize,
    /// Output values in all.
    pub values: usize,
    /// Float samples beyond ±1.0 (the fixed path saturates them).
    pub out_of_range: usize,
    /// Samples at 16-bit full scale (−32768 or 32767): possibly clipped.
    pub at_full_scale: usize,
    /// Frames whose samples are all the same value.
    pub constant_frames: usize,
    /// Frames in all.
    pub frames: usize,
}

impl InputReport {
    /// Counts for `samples` and the output `values` they gave.
    pub fn of(
        samples: &Samples,
        config: &FeatureConfig,
        values: impl IntoIterator<Item = f32>,
    ) -> InputReport {
        let floor = floor_output(config) as f32;
        let (mut at_floor, mut count) = (0, 0);
        for v in values {
            at_floor += (v <= floor + 1e-3) as usize;
            count += 1;
        }
        let out_of_range = match samples {
            Samples::F32(v) => v.iter().filter(|s| s.abs() > 1.0).count(),
            Samples::I16(_) => 0,
        };
        let x = samples.to_i16();
        let at_full_scale = x
            .iter()
            .filter(|&&s| s == i16::MIN || s == i16::MAX)
            .count();
        let (w, hop) = (config.window_samples as usize, config.hop_samples as usize);
        let frames = crate::run::frame_count(config, x.len());
        let constant_frames = (0..frames)
            .filter(|&i| {
                let f = &x[i * hop..i * hop + w];
                f.iter().all(|&s| s == f[0])
            })
            .count();
        InputReport {
            at_floor,
            values: count,
            out_of_range,
            at_full_scale,
            constant_frames,
            frames,
        }
    }

    /// The input's sample counts.
    pub fn range_line(&self) -> String {
        format!(
            "range:  {} samples beyond full scale and 0 non-finite (float input: refused on reading; a board clamps or zeroes them and counts them), {} at 16-bit full scale (possibly clipped)",
            self.out_of_range, self.at_full_scale
        )
    }

    /// The report's lines.
    pub fn lines(&self, config: &FeatureConfig) -> Vec<String> {
        let pct = |n: usize, of: usize| 100.0 * n as f64 / of.max(1) as f64;
        let mut out = vec![format!(
            "floor:  {} of {} values ({:.1} %) at the floor ({:.2} {})",
            self.at_floor,
            self.values,
            pct(self.at_floor, self.values),
            floor_output(config),
            unit(config)
        )];
        out.push(self.range_line());
        if self.constant_frames > 0 {
            out.push(format!(
                "note:   {} of {} frames are constant input: their values are the window's and the DC removal's response to a constant, not a signal",
                self.constant_frames, self.frames
            ));
        }
        out
    }
}
