//! What each subcommand does.

use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow};
use stapes_core::blob::TableBlob;
use stapes_core::config::{FeatureConfig, LogKind};
use stapes_core::fixed_tables::FixedTables;
use stapes_core::presets;
use stapes_core::table::{FilterbankForm, TableView};

use crate::check::{Arith, CoreTables, check, check_f32, report, run_core};
use crate::cli::{
    CheckArgs, Cli, Command, DemoArgs, FeaturesArgs, FormChoice, InputArgs, TablesArgs,
};
use crate::config_source::{ConfigArgs, NamedConfig};
use crate::emit::{BlobContents, size_report, write_all};
use crate::generate::GeneratedTables;
use crate::plots::{self, HeatMap};
use crate::run::Samples;
use crate::synth::{DEMO_SEED, demo_clip};
use crate::wav::{read_wav_for, write_wav_i16};

/// How a command ended when it did not fail outright.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Outcome {
    /// Everything passed.
    Success,
    /// A check ran and its tolerance was exceeded.
    CheckFailed,
}

/// Runs a parsed command line.
pub fn run(cli: Cli) -> Result<Outcome> {
    match cli.command {
        Command::Tables(a) => tables(&a),
        Command::Check(a) => check_command(&a),
        Command::Features(a) => features(&a),
        Command::Demo(a) => demo(&a),
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

fn form(choice: FormChoice) -> FilterbankForm {
    match choice {
        FormChoice::Sparse => FilterbankForm::Sparse,
        FormChoice::Compact => FilterbankForm::Compact,
    }
}

/// Tables for a command: generated from a configuration, or read from a blob.
pub enum LoadedTables {
    /// Generated in memory.
    Generated(String, Box<GeneratedTables>),
    /// A blob's bytes in 4-byte-aligned storage, and its length.
    Blob(String, Vec<u32>, usize),
}

impl LoadedTables {
    /// Resolves the configuration options (or `--table-blob`).
    pub fn load(config: &ConfigArgs, input: &InputArgs) -> Result<LoadedTables> {
        match &input.table_blob {
            Some(path) => {
                let bytes = std::fs::read(path)
                    .with_context(|| format!("cannot read table blob {}", path.display()))?;
                let mut words = vec![0u32; bytes.len().div_ceil(4)];
                bytemuck::cast_slice_mut::<u32, u8>(&mut words)[..bytes.len()]
                    .copy_from_slice(&bytes);
                let loaded = LoadedTables::Blob(path.display().to_string(), words, bytes.len());
                let cfg = loaded.config()?;
                cfg.validate().map_err(|e| {
                    anyhow!(
                        "table blob {}: its configuration is invalid: {e}",
                        path.display()
                    )
                })?;
                Ok(loaded)
            }
            None => {
                let NamedConfig { name, config } = config.resolve()?;
                Ok(LoadedTables::Generated(
                    name,
                    Box::new(GeneratedTables::new(&config)),
                ))
            }
        }
    }

    fn blob(&self) -> Result<Option<TableBlob<'_>>> {
        match self {
            LoadedTables::Blob(path, words, len) => {
                let bytes = &bytemuck::cast_slice::<u32, u8>(words)[..*len];
                TableBlob::parse(bytes)
                    .map(Some)
                    .map_err(|e| anyhow!("{path}: {e}"))
            }
            LoadedTables::Generated(..) => Ok(None),
        }
    }

    /// Name for reports.
    pub fn name(&self) -> &str {
        match self {
            LoadedTables::Generated(n, _) | LoadedTables::Blob(n, ..) => n,
        }
    }

    /// The configuration.
    pub fn config(&self) -> Result<FeatureConfig> {
        match self {
            LoadedTables::Generated(_, t) => Ok(t.config),
            LoadedTables::Blob(..) => Ok(self.blob()?.expect("blob").config()),
        }
    }

    /// An `f32` view in `form`.
    pub fn view_f32(&self, form: FilterbankForm) -> Result<TableView<'_, f32>> {
        match self {
            LoadedTables::Generated(name, t) => {
                if form == FilterbankForm::Compact && !t.has_compact() {
                    return Err(anyhow!(
                        "{name} has no compact filterbank (rounded-centre-bin triangles): use --form sparse"
                    ));
                }
                Ok(t.view_f32(form))
            }
            LoadedTables::Blob(path, ..) => self
                .blob()?
                .expect("blob")
                .view::<f32>(form)
                .map_err(|e| anyhow!("{path}: {e}")),
        }
    }
}

impl LoadedTables {
    /// Fixed-point tables in `form`.
    pub fn fixed_tables(&self, form: FilterbankForm) -> Result<FixedTables<'_>> {
        match self {
            LoadedTables::Generated(name, t) => {
                if form == FilterbankForm::Compact && !t.has_compact() {
                    return Err(anyhow!(
                        "{name} has no compact filterbank (rounded-centre-bin triangles): use --form sparse"
                    ));
                }
                t.fixed_tables(form).ok_or_else(|| {
                    anyhow!(
                        "{name}: the fixed path cannot represent floor_db = {} (its output spans +-128 dB or +-128 ln units); raise floor_db",
                        t.config.floor_db
                    )
                })
            }
            LoadedTables::Blob(path, ..) => self
                .blob()?
                .expect("blob")
                .fixed_tables(form)
                .map_err(|e| anyhow!("{path}: {e}")),
        }
    }

    /// The tables `arith` reads, in `form`.
    pub fn core_tables(&self, arith: Arith, form: FilterbankForm) -> Result<CoreTables<'_>> {
        Ok(match arith {
            Arith::F32 => CoreTables::Float(self.view_f32(form)?),
            Arith::Fixed16 | Arith::Fixed32 => CoreTables::Fixed(self.fixed_tables(form)?),
        })
    }
}

fn band_centres(config: &FeatureConfig) -> Vec<f64> {
    crate::design::design(config).centres_hz
}

fn load_input(
    input: Option<&Path>,
    input_args: &InputArgs,
    config: &FeatureConfig,
) -> Result<(String, Samples)> {
    match input {
        Some(path) => Ok((
            path.display().to_string(),
            read_wav_for(path, input_args.channel, config.sample_rate_hz)?,
        )),
        None => {
            let clip = demo_clip(config.sample_rate_hz, DEMO_SEED);
            Ok(("the demo clip".into(), Samples::I16(clip.samples)))
        }
    }
}

fn tables(a: &TablesArgs) -> Result<Outcome> {
    let configs: Vec<(String, FeatureConfig, String)> = if a.all_presets {
        presets::ALL
            .iter()
            .map(|(n, c)| (n.to_string(), *c, format!("stapes tables --preset {n}")))
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
        vec![(named.name.clone(), named.config, command)]
    };
    for (name, config, command) in configs {
        let t = GeneratedTables::new(&config);
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
    for w in crate::predict::warnings(&config, arith)? {
        eprintln!("{w}");
    }
    let run = check(arith, &config, tables, &samples, a.input_args.chunk_samples)?;
    crate::say_text!(report(&run, &band_centres(&config), !a.worst_bands));
    Ok(if run.passed() {
        Outcome::Success
    } else {
        Outcome::CheckFailed
    })
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
    let samples = read_wav_for(&a.input, a.input_args.channel, config.sample_rate_hz)?;
    let chunk = if a.input_args.chunk_samples == 0 {
        samples.len().max(1)
    } else {
        a.input_args.chunk_samples
    };
    let bands = config.bands as usize;
    let tables = loaded.core_tables(a.arith, form(a.input_args.form))?;
    for w in crate::predict::warnings(&config, a.arith)? {
        eprintln!("{w}");
    }
    let (frames, what) = if a.raw {
        let CoreTables::Fixed(fixed) = tables else {
            return Err(anyhow!(
                "--raw writes the fixed path's integers: add --arith fixed16 or --arith fixed32"
            ));
        };
        let x = samples.to_i16();
        let ints = match a.arith {
            Arith::Fixed16 => {
                crate::run::run_fixed::<stapes_core::int_fft::Fixed16>(&config, fixed, &x, chunk)?
            }
            _ => crate::run::run_fixed::<stapes_core::int_fft::Fixed32>(&config, fixed, &x, chunk)?,
        };
        crate::npy::write_i16(
            &a.output,
            ints.len(),
            bands,
            ints.iter().flatten().map(|v| v.to_bits()),
        )?;
        (
            crate::run::fixed_to_f32(&ints),
            format!(
                "int16 (1/256 {} per LSB, the board's exact values)",
                unit(&config)
            ),
        )
    } else {
        let frames = run_core(a.arith, &config, tables, &samples, chunk)?;
        crate::npy::write_f32(
            &a.output,
            frames.len(),
            bands,
            frames.iter().flatten().copied(),
        )?;
        (frames, format!("float32, {}", unit(&config)))
    };
    let values: Vec<f32> = frames.iter().flatten().copied().collect();
    let (lo, hi) = values
        .iter()
        .fold((f32::INFINITY, f32::NEG_INFINITY), |(l, h), &v| {
            (l.min(v), h.max(v))
        });
    let mean = values.iter().map(|&v| v as f64).sum::<f64>() / values.len().max(1) as f64;
    crate::say!(
        "features: {} with {} ({} core)",
        a.input.display(),
        loaded.name(),
        a.arith.name()
    );
    crate::say!(
        "  input:  {} samples, {:.2} s at {} Hz",
        samples.len(),
        samples.len() as f64 / config.sample_rate_hz as f64,
        config.sample_rate_hz
    );
    crate::say!(
        "  frames: {} (window {}, hop {}; frame i covers samples [i*hop, i*hop + window))",
        frames.len(),
        config.window_samples,
        config.hop_samples
    );
    crate::say!(
        "  output: {} [{} frames x {} bands], {what}",
        a.output.display(),
        frames.len(),
        bands
    );
    if !values.is_empty() {
        crate::say!(
            "  values: min {lo:.2}, mean {mean:.2}, max {hi:.2} {}",
            unit(&config)
        );
    }
    let report = InputReport::of(&samples, &config, &values);
    for line in report.lines(&config) {
        crate::say!("  {line}");
    }
    Ok(Outcome::Success)
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
    pub fn of(samples: &Samples, config: &FeatureConfig, values: &[f32]) -> InputReport {
        let floor = floor_output(config) as f32;
        let at_floor = values.iter().filter(|&&v| v <= floor + 1e-3).count();
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
            values: values.len(),
            out_of_range,
            at_full_scale,
            constant_frames,
            frames,
        }
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
        out.push(format!(
            "range:  {} samples beyond full scale (float input; saturated for the fixed path), {} at 16-bit full scale (possibly clipped), 0 non-finite (refused on reading)",
            self.out_of_range, self.at_full_scale
        ));
        if self.constant_frames > 0 {
            out.push(format!(
                "note:   {} of {} frames are constant input: their values are the window's and the DC removal's response to a constant, not a signal",
                self.constant_frames, self.frames
            ));
        }
        out
    }
}

fn demo(a: &DemoArgs) -> Result<Outcome> {
    let name = presets::DEFAULT_NAME;
    let config = presets::SPEECH16K_40;
    let dir = &a.out_dir;
    let mut wrote: Vec<(PathBuf, &str)> = Vec::new();

    let clip = demo_clip(config.sample_rate_hz, DEMO_SEED);
    let wav = dir.join("demo-clip.wav");
    write_wav_i16(&wav, clip.sample_rate_hz, &clip.samples)?;
    wrote.push((
        wav.clone(),
        "the synthesised clip: valve commands over pump noise and mains hum",
    ));
    crate::say!(
        "demo: irrigation valve node, {:.1} s clip at {} Hz; words:",
        clip.samples.len() as f64 / clip.sample_rate_hz as f64,
        clip.sample_rate_hz
    );
    for w in &clip.words {
        crate::say!(
            "  {:<7} {:.2}-{:.2} s, peak {:.0} dBFS",
            w.word,
            w.start_s,
            w.end_s,
            w.peak_dbfs
        );
    }

    let table_dir = dir.join("tables");
    let generated = GeneratedTables::new(&config);
    let written = write_all(
        &generated,
        name,
        &table_dir,
        &format!("stapes tables --preset {name}"),
        BlobContents::ALL,
    )?;
    crate::say_text!(size_report(&generated, name, Some(written.blob_bytes)));
    wrote.push((written.rust.clone(), "tables as Rust source"));
    wrote.push((written.header.clone(), "tables as a C header"));
    wrote.push((
        written.blob.clone(),
        "tables as a checked blob (the core below reads this one)",
    ));

    // The core reads the blob just written, and the WAV just written, as a user would.
    let inputs = InputArgs {
        channel: None,
        chunk_samples: 97,
        form: FormChoice::Sparse,
        table_blob: Some(written.blob.clone()),
    };
    let loaded = LoadedTables::load(&ConfigArgs::default(), &inputs)?;
    let samples = read_wav_for(&wav, None, config.sample_rate_hz)?;
    let view = loaded.view_f32(FilterbankForm::Sparse)?;
    crate::say!(
        "check: core (f32, sparse table from the blob, fed 97 samples per call) against the f64 reference"
    );
    let run = check_f32(&config, view, &samples, inputs.chunk_samples)?;
    let centres = band_centres(&config);
    crate::say_text!(report(&run, &centres, false));
    // The fixed-point cores, from the same blob, for boards without an FPU.
    let mut all_passed = run.passed();
    for arith in [Arith::Fixed32, Arith::Fixed16] {
        let fixed = check(
            arith,
            &config,
            loaded.core_tables(arith, FilterbankForm::Sparse)?,
            &samples,
            inputs.chunk_samples,
        )?;
        for (t, c) in &fixed.comparisons {
            let pass = c.overall.max <= t.max_error_db;
            crate::say!(
                "{} within {} dB: max {:.2e} dB, mean {:.2e} dB; tolerance max <= {} dB: {}",
                arith.name(),
                t.range_db,
                c.overall.max,
                c.overall.mean,
                t.max_error_db,
                if pass { "PASS" } else { "FAIL" }
            );
        }
        all_passed &= fixed.passed();
    }

    let npy = dir.join("features.npy");
    crate::npy::write_f32(
        &npy,
        run.core.len(),
        config.bands as usize,
        run.core.iter().flatten().copied(),
    )?;
    wrote.push((
        npy,
        "the core's log-mel frames, float32 [frames x bands], dB",
    ));

    let hop_s = config.hop_samples as f64 / config.sample_rate_hz as f64;
    let core_f64: Vec<Vec<f64>> = run
        .core
        .iter()
        .map(|r| r.iter().map(|&v| v as f64).collect())
        .collect();
    let top = run
        .reference
        .iter()
        .flatten()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max)
        .ceil();
    let range = (top - 80.0, top);
    let png = dir.join("log-mel-core.png");
    plots::heat_map(
        &png,
        &HeatMap {
            title: "log-mel, stapes core (f32)",
            values: &core_f64,
            hop_s,
            centres_hz: &centres,
            range,
            unit: "dB",
        },
    )?;
    wrote.push((png, "core log-mel spectrogram"));
    let png = dir.join("log-mel-reference.png");
    plots::heat_map(
        &png,
        &HeatMap {
            title: "log-mel, f64 reference",
            values: &run.reference,
            hop_s,
            centres_hz: &centres,
            range,
            unit: "dB",
        },
    )?;
    wrote.push((png, "reference log-mel spectrogram"));
    let emax = run.primary().overall.max.max(1e-9);
    let png = dir.join("log-mel-error.png");
    plots::heat_map(
        &png,
        &HeatMap {
            title: "|core - reference| (grey: more than 60 dB below the frame's loudest band)",
            values: &run.primary().error_map,
            hop_s,
            centres_hz: &centres,
            range: (0.0, emax),
            unit: "dB",
        },
    )?;
    wrote.push((png, "error between them"));
    let bin_hz = config.sample_rate_hz as f64 / config.fft_points as f64;
    let mut offset = 0;
    let triangles: Vec<Vec<(f64, f64)>> = generated
        .spans
        .iter()
        .map(|&[first, count]| {
            let (first, count) = (first as usize, count as usize);
            let mut pts = vec![((first as f64 - 1.0).max(0.0) * bin_hz, 0.0)];
            pts.extend((0..count).map(|j| {
                (
                    (first + j) as f64 * bin_hz,
                    generated.sparse_f32[offset + j] as f64,
                )
            }));
            pts.push(((first + count) as f64 * bin_hz, 0.0));
            offset += count;
            pts
        })
        .collect();
    let png = dir.join("filterbank.png");
    plots::filterbank(
        &png,
        "speech16k-40 filterbank (f32 table weights at each FFT bin)",
        &triangles,
        config.sample_rate_hz as f64 / 2.0,
    )?;
    wrote.push((png, "the filterbank's triangles"));

    crate::say!("wrote:");
    for (path, what) in &wrote {
        crate::say!("  {:<40} {what}", path.display());
    }
    Ok(if all_passed {
        Outcome::Success
    } else {
        Outcome::CheckFailed
    })
}
