//! `stapes export`: a labelled dataset folder → the board's features, ready
//! for training.
//!
//! Output, in `--output-dir`:
//! * `export-plan.toml`: everything that decides the output (configuration
//!   and its fingerprint, arithmetic, stage, dtype, length policy, shard
//!   size, augmentation, and a digest of the clip list with sizes and
//!   modification times). A rerun with the same plan resumes; another plan
//!   is refused.
//! * `labels.txt`: label names, one per line; a label's index is its line
//!   number from 0.
//! * per split (`train`, `validation`, `test`, …): `features.npy`, one
//!   packed array `[clips × frames × values]` in the stage's dtype, built
//!   as `features.npy.partial` a shard of `--shard-clips` clips at a time
//!   (the shard's rows written at their place and flushed to the disk), and
//!   `labels.npy` (`int32`); per shard, `manifest-NNNNN.csv` (one row per
//!   clip), `failed-NNNNN.csv` (clips that could not be read, with the
//!   error), and for the training split `sums-NNNNN.txt` (the statistics'
//!   partial sums). With `--per-clip`, one `.npy` per clip under
//!   `<split>/clips/` instead of the packed array. A shard is finished when
//!   its manifest exists: it is written last.
//! * when a split is done: its array renamed to `features.npy` with the
//!   final count in its header, `labels.npy`, and `manifest.csv` (every
//!   shard's rows); when all are done:
//!   `statistics.toml` (the `[stages.normalise]` table from the training
//!   split, in the board's arithmetic), the tables of the configuration
//!   with that normaliser under `board-tables/`, and `summary.txt`.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use anyhow::{Context, Result, anyhow, bail};
use rayon::prelude::*;
use stapes_core::config::FeatureConfig;
use stapes_core::stage_config::StageConfig;

use crate::augment::{AugmentPlan, NoiseBank, Span};
use crate::check::Arith;
use crate::cli::ExportArgs;
use crate::clip_runner::{ClipRunner, FlatValues, SampleSlice};
use crate::commands::Outcome;
use crate::dataset::{Dataset, HashSplit};
use crate::run::Samples;
use crate::table_source::LoadedTables;

/// Where a clip goes in its fixed number of frames.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Align {
    /// The clip starts at frame 0; padding (or trimming) at the end.
    Start,
    /// The clip is centred; padding (or trimming) split between both ends.
    Centre,
    /// The clip ends at the last frame; padding (or trimming) at the start.
    End,
}

impl Align {
    /// Its name on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Align::Start => "start",
            Align::Centre => "centre",
            Align::End => "end",
        }
    }
}

/// One unit of work: a clip, or an augmented copy of it.
#[derive(Clone, Copy, Debug)]
struct Item {
    clip: usize,
    copy: u32,
}

/// A finished item.
struct Done {
    values: FlatValues,
    row: ManifestRow,
    sums: Option<Sums>,
}

/// Per-value sums of the statistics' stage over real (not padding) frames.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Sums {
    /// Frames counted.
    pub frames: u64,
    /// Σ v per value.
    pub sum: Vec<f64>,
    /// Σ v² per value.
    pub square: Vec<f64>,
}

impl Sums {
    fn add(&mut self, other: &Sums) {
        if self.sum.is_empty() {
            self.sum = vec![0.0; other.sum.len()];
            self.square = vec![0.0; other.sum.len()];
        }
        self.frames += other.frames;
        for (a, b) in self.sum.iter_mut().zip(&other.sum) {
            *a += b;
        }
        for (a, b) in self.square.iter_mut().zip(&other.square) {
            *a += b;
        }
    }

    fn to_text(&self) -> String {
        let mut s = format!("{}\n", self.frames);
        for (a, b) in self.sum.iter().zip(&self.square) {
            let _ = writeln!(s, "{a:?} {b:?}");
        }
        s
    }

    fn from_text(text: &str, path: &Path) -> Result<Sums> {
        let bad = || {
            anyhow!(
                "{} is not a partial-sums file: delete its shard to redo it",
                path.display()
            )
        };
        let mut lines = text.lines();
        let frames = lines.next().ok_or_else(bad)?.parse().map_err(|_| bad())?;
        let mut s = Sums {
            frames,
            ..Sums::default()
        };
        for l in lines {
            let (a, b) = l.split_once(' ').ok_or_else(bad)?;
            s.sum.push(a.parse().map_err(|_| bad())?);
            s.square.push(b.parse().map_err(|_| bad())?);
        }
        Ok(s)
    }

    /// Means and population deviations (1 where a value never varies, as
    /// `stapes statistics` gives).
    pub fn statistics(&self) -> (Vec<f32>, Vec<f32>) {
        let n = self.frames as f64;
        let mean: Vec<f64> = self.sum.iter().map(|s| s / n).collect();
        let dev = self
            .square
            .iter()
            .zip(&mean)
            .map(|(q, m)| {
                let d = (q / n - m * m).max(0.0).sqrt();
                if d > 0.0 { d as f32 } else { 1.0 }
            })
            .collect();
        (mean.iter().map(|&m| m as f32).collect(), dev)
    }
}

#[derive(Clone, Debug)]
struct ManifestRow {
    path: String,
    label: String,
    label_index: usize,
    split: String,
    copy: u32,
    clip_frames: usize,
    frames: usize,
    padding_frames: usize,
    peak_dbfs: f64,
    saturated: u64,
    augmentation: String,
    file: String,
}

const MANIFEST_HEADER: [&str; 17] = [
    "row",
    "path",
    "label",
    "label_index",
    "split",
    "copy",
    "clip_frames",
    "frames",
    "padding_frames",
    "peak_dbfs",
    "saturated_samples",
    "fingerprint",
    "stage",
    "arithmetic",
    "dtype",
    "augmentation",
    "features_file",
];

/// The run's fixed settings, shared by every item.
struct Setup<'a> {
    data: &'a Dataset,
    config: FeatureConfig,
    arith: Arith,
    stage: &'static str,
    dtype: &'static str,
    fingerprint: u32,
    frames: Option<usize>,
    align: Align,
    augment: AugmentPlan,
    augment_splits: Vec<String>,
    channel: Option<crate::wav::ChannelChoice>,
    statistics_stage: Option<usize>,
    per_clip: bool,
}

fn frames_of(config: &FeatureConfig, samples: usize) -> usize {
    crate::run::frame_count(config, samples)
}

/// The samples of a clip laid into `target` samples with `align` (zeros
/// where there is no clip), and where the clip starts in them (negative
/// when trimmed at the start).
pub fn laid_out(samples: &Samples, target: usize, align: Align) -> (Samples, i64) {
    let len = samples.len() as i64;
    let t = target as i64;
    let start = match align {
        Align::Start => 0,
        Align::End => t - len,
        Align::Centre => (t - len).div_euclid(2),
    };
    fn lay<T: Copy + Default>(x: &[T], target: usize, start: i64) -> Vec<T> {
        // Output [a, b) holds input [a - start, b - start).
        let a = start.clamp(0, target as i64) as usize;
        let b = (start + x.len() as i64).clamp(0, target as i64) as usize;
        let mut out = vec![T::default(); target];
        if a < b {
            let from = (a as i64 - start) as usize;
            out[a..b].copy_from_slice(&x[from..from + (b - a)]);
        }
        out
    }
    let laid = match samples {
        Samples::I16(x) => Samples::I16(lay(x, target, start)),
        Samples::F32(x) => Samples::F32(lay(x, target, start)),
    };
    (laid, start)
}

fn peak_dbfs(samples: &Samples) -> f64 {
    let peak = match samples {
        Samples::I16(x) => x.iter().map(|&v| (v as f64).abs()).fold(0.0, f64::max) / 32768.0,
        Samples::F32(x) => x
            .iter()
            .filter(|v| v.is_finite())
            .map(|&v| (v as f64).abs())
            .fold(0.0, f64::max),
    };
    if peak > 0.0 {
        20.0 * peak.log10()
    } else {
        f64::NEG_INFINITY
    }
}

impl Setup<'_> {
    fn process(&self, runner: &mut ClipRunner<'_>, item: Item, with_sums: bool) -> Result<Done> {
        let clip = &self.data.clips[item.clip];
        let samples =
            crate::wav::read_wav_for(&clip.path, self.channel, self.config.sample_rate_hz)?;
        let (samples, saturated, augmentation) = if item.copy == 0 {
            (samples, 0, "none".to_string())
        } else {
            let rate = self.config.sample_rate_hz;
            let a = self.augment.draw(&clip.relative, item.copy, rate);
            let (x, saturated) = self.augment.apply(&samples, &a);
            (Samples::I16(x), saturated, self.augment.label(&a, rate))
        };
        let clip_len = samples.len() as i64;
        let clip_frames = frames_of(&self.config, samples.len());
        let peak = peak_dbfs(&samples);
        let (w, h) = (
            self.config.window_samples as usize,
            self.config.hop_samples as usize,
        );
        let (input, start, frames) = match self.frames {
            Some(n) if w + (n - 1) * h == samples.len() => (samples, 0, n),
            Some(n) => {
                let target = w + (n - 1) * h;
                let (laid, start) = laid_out(&samples, target, self.align);
                (laid, start, n)
            }
            None => {
                if clip_frames == 0 {
                    bail!(
                        "{} holds {} samples, fewer than one window ({w}): it has no frame; \
                         give --frames N to pad every clip to N frames",
                        clip.path.display(),
                        samples.len()
                    );
                }
                (samples, 0, clip_frames)
            }
        };
        // Frames that hold some of the clip (not padding alone).
        let real = move |i: usize| {
            let (a, b) = ((i * h) as i64, (i * h + w) as i64);
            a < start + clip_len && b > start
        };
        let mut values = runner.kind().empty();
        let mut sums = Sums::default();
        let stats = self.statistics_stage.filter(|_| with_sums);
        let mut observe = |i: usize, o: crate::chain::StageOut<'_>| {
            if !real(i) {
                return;
            }
            if sums.sum.is_empty() {
                sums.sum = vec![0.0; o.len()];
                sums.square = vec![0.0; o.len()];
            }
            sums.frames += 1;
            for j in 0..o.len().min(sums.sum.len()) {
                let v = o.value(j);
                sums.sum[j] += v;
                sums.square[j] += v * v;
            }
        };
        let observer = stats.map(|stage| crate::clip_runner::Observer {
            stage,
            call: &mut observe,
        });
        let got = runner.run_clip_observed(SampleSlice::from(&input), &mut values, observer);
        if got != frames {
            bail!("internal: {got} frames where {frames} were laid out");
        }
        let padding_frames = (0..frames).filter(|&i| !real(i)).count();
        let file = if self.per_clip {
            let stem = clip
                .relative
                .strip_suffix(".wav")
                .or_else(|| clip.relative.strip_suffix(".WAV"))
                .unwrap_or(&clip.relative);
            format!("clips/{stem}.{}.npy", item.copy)
        } else {
            String::new()
        };
        Ok(Done {
            values,
            row: ManifestRow {
                path: clip.relative.clone(),
                label: clip.label.clone(),
                label_index: self.data.label_index(&clip.label),
                split: clip.split.clone(),
                copy: item.copy,
                clip_frames,
                frames,
                padding_frames,
                peak_dbfs: peak,
                saturated,
                augmentation,
                file,
            },
            sums: stats.map(|_| sums),
        })
    }

    fn copies_for(&self, split: &str) -> u32 {
        if self.augment.active() && self.augment_splits.iter().any(|s| s == split) {
            self.augment.copies
        } else {
            0
        }
    }

    /// The items of `split`: each clip, then its copies.
    fn items(&self, split: &str) -> Vec<Item> {
        let copies = self.copies_for(split);
        self.data
            .clips
            .iter()
            .enumerate()
            .filter(|(_, c)| c.split == split)
            .flat_map(|(i, _)| (0..=copies).map(move |copy| Item { clip: i, copy }))
            .collect()
    }

    fn manifest_csv(&self, rows: &[ManifestRow]) -> Result<Vec<u8>> {
        let mut w = csv::Writer::from_writer(Vec::new());
        w.write_record(MANIFEST_HEADER)?;
        for (i, r) in rows.iter().enumerate() {
            w.write_record([
                i.to_string(),
                r.path.clone(),
                r.label.clone(),
                r.label_index.to_string(),
                r.split.clone(),
                r.copy.to_string(),
                r.clip_frames.to_string(),
                r.frames.to_string(),
                r.padding_frames.to_string(),
                if r.peak_dbfs.is_finite() {
                    format!("{:.2}", r.peak_dbfs)
                } else {
                    "-inf".into()
                },
                r.saturated.to_string(),
                format!("0x{:08x}", self.fingerprint),
                self.stage.to_string(),
                self.arith.name().to_string(),
                self.dtype.to_string(),
                r.augmentation.clone(),
                r.file.clone(),
            ])?;
        }
        Ok(w.into_inner().map_err(|e| anyhow!("{e}"))?)
    }
}

/// A clip that could not be read: its path, split, copy and the error.
type FailedClip = (String, String, u32, String);

fn failed_csv(rows: &[FailedClip]) -> Result<Vec<u8>> {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(["path", "split", "copy", "error"])?;
    for (path, split, copy, error) in rows {
        w.write_record([path, split, &copy.to_string(), error])?;
    }
    Ok(w.into_inner().map_err(|e| anyhow!("{e}"))?)
}

/// Data lines of a CSV file written by this module (header excluded).
fn csv_rows(path: &Path) -> Result<usize> {
    let text =
        std::fs::read_to_string(path).with_context(|| format!("cannot read {}", path.display()))?;
    let mut r = csv::Reader::from_reader(text.as_bytes());
    Ok(r.records().count())
}

fn shard_name(kind: &str, k: usize, ext: &str) -> String {
    format!("{kind}-{k:05}.{ext}")
}

/// Temporary files a killed run left behind (`.tmp…` from the atomic
/// writer), removed before resuming.
fn remove_leftovers(dir: &Path) -> Result<usize> {
    let mut removed = 0;
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Ok(0);
    };
    for e in entries {
        let e = e?;
        let path = e.path();
        let name = e.file_name().to_string_lossy().into_owned();
        if e.file_type()?.is_dir() {
            removed += remove_leftovers(&path)?;
        } else if name.starts_with(".tmp") || name.starts_with(".previous") {
            std::fs::remove_file(&path)
                .with_context(|| format!("cannot remove {}", path.display()))?;
            removed += 1;
        }
    }
    Ok(removed)
}

/// A digest of the clip list: relative paths, labels, splits, sizes and
/// modification times (a changed clip changes the plan).
fn dataset_digest(data: &Dataset) -> Result<String> {
    let mut crc = stapes_core::crc32::Crc32::new();
    for c in &data.clips {
        let meta = std::fs::metadata(&c.path)
            .with_context(|| format!("cannot read {}", c.path.display()))?;
        let modified = meta
            .modified()
            .ok()
            .and_then(|t| t.duration_since(std::time::UNIX_EPOCH).ok())
            .map_or(0, |d| d.as_nanos());
        crc.update(
            format!(
                "{}\t{}\t{}\t{}\t{modified}\n",
                c.relative,
                c.label,
                c.split,
                meta.len()
            )
            .as_bytes(),
        );
    }
    Ok(format!(
        "0x{:08x} over {} clips",
        crc.finish(),
        data.clips.len()
    ))
}

/// The longest clip's frames, from the WAV headers alone.
fn longest_clip_frames(data: &Dataset, config: &FeatureConfig) -> Result<usize> {
    let lens: Vec<Option<usize>> = data
        .clips
        .par_iter()
        .map(|c| crate::wav::probe_length(&c.path).ok())
        .collect();
    let longest = lens.iter().flatten().copied().max().unwrap_or(0);
    let frames = frames_of(config, longest);
    if frames == 0 {
        bail!(
            "no clip of the dataset is as long as one window ({} samples): give --frames N to \
             pad every clip to N frames",
            config.window_samples
        );
    }
    Ok(frames)
}

fn parse_augment(a: &ExportArgs, config: &FeatureConfig) -> Result<AugmentPlan> {
    let copies = a.augment_copies;
    let any_draw = a.gain_db.is_some() || a.noise_dir.is_some() || a.shift_ms.is_some();
    if copies == 0 && any_draw {
        bail!(
            "--gain-db, --noise-dir and --shift-ms shape augmented copies, and --augment-copies \
             is 0: add --augment-copies K (K copies of each clip)"
        );
    }
    if copies > 0 && !any_draw {
        bail!(
            "--augment-copies {copies} makes copies that would all equal the clip: add \
             --gain-db LOW:HIGH, --noise-dir DIR (with --snr-db LOW:HIGH) or --shift-ms MS"
        );
    }
    if a.snr_db.is_some() && a.noise_dir.is_none() {
        bail!("--snr-db sets the level of background noise: add --noise-dir DIR");
    }
    let gain_db = a
        .gain_db
        .as_deref()
        .map(|t| Span::parse("--gain-db", t))
        .transpose()?;
    if let Some(g) = gain_db
        && (g.low < -60.0 || g.high > 40.0)
    {
        bail!(
            "--gain-db {}:{} is outside -60:40 dB: give a smaller range",
            g.low,
            g.high
        );
    }
    let noise = match &a.noise_dir {
        Some(dir) => {
            let snr = Span::parse("--snr-db", a.snr_db.as_deref().unwrap_or("0:20"))?;
            Some((NoiseBank::load(dir, config.sample_rate_hz)?, snr))
        }
        None => None,
    };
    let shift_s = match a.shift_ms {
        Some(ms) if !(ms.is_finite() && (0.0..=10_000.0).contains(&ms)) => bail!(
            "--shift-ms {ms} is not a shift: give the largest shift either way in \
             milliseconds, from 0 to 10000"
        ),
        Some(ms) => ms / 1000.0,
        None => 0.0,
    };
    Ok(AugmentPlan {
        copies,
        gain_db,
        noise,
        shift_s,
        seed: a.seed,
    })
}

/// Index of the stage the normaliser reads (the last of log or PCEN, range
/// floor, MFCC).
fn statistics_stage(config: &FeatureConfig) -> usize {
    crate::chain::stage_names(config)
        .iter()
        .rposition(|s| matches!(*s, "log" | "pcen" | "range_floor" | "mfcc"))
        .expect("the level stage")
}

/// Seconds spent in each phase of a run.
#[derive(Clone, Copy, Debug, Default)]
struct Phases {
    /// Tables, dataset, plan: before the first clip.
    setup: f64,
    /// Running the clips (on every core).
    clips: f64,
    /// Waiting, after the clips, for the shards' flushes to the disk (one
    /// fsync per shard, on a thread of its own while the clips run).
    flush: f64,
    /// The whole run.
    total: f64,
}

/// The per-split tally for the summary.
#[derive(Default)]
struct Tally {
    done: usize,
    failed: usize,
    shards_written: usize,
    shards_kept: usize,
    shards_redone: usize,
    padded: usize,
    trimmed: usize,
    per_label: BTreeMap<String, usize>,
}

/// Runs `stapes export`.
pub fn export(a: &ExportArgs) -> Result<Outcome> {
    let started = Instant::now();
    let loaded = LoadedTables::load(&a.config, &a.input_args())?;
    let config = loaded.config()?;
    if a.frames == Some(0) {
        bail!("--frames 0 keeps no frame: give the number of frames per clip (at least 1)");
    }
    if a.shard_clips == 0 {
        bail!("--shard-clips 0 holds no clip: give the clips per output file (at least 1)");
    }
    let split = HashSplit {
        validation_percent: a.validation_percent,
        test_percent: a.test_percent,
    };
    let data = Dataset::discover(&a.input_dir, a.manifest.as_deref(), split)?;
    let augment = parse_augment(a, &config)?;
    let arith = a.arith;
    let tables = loaded.core_tables(arith, crate::commands::form(a.form))?;
    let stage_tables = loaded.stage_tables()?;
    // Built once: its stage, dtype and values per frame (and any error in
    // the choice) before anything is written.
    let probe = ClipRunner::new(
        &config,
        arith,
        tables,
        &stage_tables,
        a.stage.as_deref(),
        a.raw,
    )?;
    let (stage, kind, values) = (probe.stage(), probe.kind(), probe.values_per_frame());
    drop(probe);
    let frames = match (a.frames, a.per_clip) {
        (Some(n), _) => Some(n),
        (None, true) => None,
        (None, false) => Some(longest_clip_frames(&data, &config)?),
    };
    let augment_splits: Vec<String> = a
        .augment_splits
        .split(',')
        .map(|s| s.trim().to_string())
        .collect();
    let setup = Setup {
        data: &data,
        config,
        arith,
        stage,
        dtype: kind.numpy_name(),
        fingerprint: config.fingerprint(),
        frames,
        align: a.align,
        augment,
        augment_splits,
        channel: a.channel,
        statistics_stage: Some(statistics_stage(&config)),
        per_clip: a.per_clip,
    };
    let out = &a.output_dir;
    let plan = plan_text(a, &setup, &loaded, values)?;
    let resumed = prepare_output(out, &plan)?;
    let labels: String = data.labels.iter().map(|l| format!("{l}\n")).collect();
    crate::output::write_atomic_unsynced(&out.join("labels.txt"), labels.as_bytes())?;

    let splits = data.splits();
    let work: Vec<(String, Vec<Item>)> =
        splits.iter().map(|s| (s.clone(), setup.items(s))).collect();
    let total: usize = work.iter().map(|(_, w)| w.len()).sum();
    // Where the time goes, for the summary: what divides among the cores
    // (the clips) and what does not.
    let mut phases = Phases {
        setup: started.elapsed().as_secs_f64(),
        ..Phases::default()
    };
    let bar = progress_bar(total as u64, a.quiet);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(a.threads.unwrap_or(0))
        .build()
        .map_err(|e| anyhow!("cannot start the worker threads: {e}"))?;
    let mut tallies: Vec<(String, Tally)> = Vec::new();
    let mut train_sums = Sums::default();
    let mut statistics: Option<String> = None;
    let stop = AtomicBool::new(false);
    for (split_name, items) in &work {
        let dir = out.join(split_name);
        let mut tally = Tally::default();
        let with_sums = split_name == "train";
        let shards = items.len().div_ceil(a.shard_clips);
        // The split's one packed array, appended a shard at a time.
        let array = match (a.per_clip, frames) {
            (false, Some(n)) => Some(SplitArray::open(
                &dir,
                crate::npy::descr(&kind.empty()),
                items.len(),
                &[n, values],
                kind.size(),
            )?),
            _ => None,
        };
        let mut rows_before = 0;
        let mut invalid_from = None;
        // Each finished shard is committed in order on a thread of its own:
        // its rows flushed to the disk (the shard's one fsync), then its
        // files, the manifest last.
        std::thread::scope(|scope| -> Result<()> {
            let (commit, to_commit) =
                std::sync::mpsc::channel::<(usize, Vec<Done>, Vec<FailedClip>)>();
            let array = array.as_ref();
            let (setup, dir) = (&setup, &dir);
            let committer = scope.spawn(move || -> Result<()> {
                for (k, done, failed) in to_commit {
                    if let Some(array) = array {
                        array.sync()?;
                    }
                    write_shard(setup, dir, k, &done, &failed, with_sums)?;
                }
                Ok(())
            });
            for (k, shard) in items.chunks(a.shard_clips).enumerate() {
                let manifest = dir.join(shard_name("manifest", k, "csv"));
                if invalid_from.is_none()
                    && manifest.exists()
                    && !shard_is_whole(
                        &setup,
                        &dir,
                        k,
                        values,
                        kind,
                        with_sums,
                        array,
                        rows_before,
                    )?
                {
                    invalid_from = Some(k);
                }
                if let Some(first) = invalid_from
                    && manifest.exists()
                {
                    // Written before a power cut, say (or after such a shard in
                    // the split's array): done again.
                    std::fs::remove_file(&manifest)
                        .with_context(|| format!("cannot remove {}", manifest.display()))?;
                    tally.shards_redone += (k >= first) as usize;
                }
                if manifest.exists() {
                    let rows = csv_rows(&manifest)?;
                    rows_before += rows;
                    tally.shards_kept += 1;
                    tally.done += rows;
                    let failed = dir.join(shard_name("failed", k, "csv"));
                    if failed.exists() {
                        tally.failed += csv_rows(&failed)?;
                    }
                    if with_sums {
                        let p = dir.join(shard_name("sums", k, "txt"));
                        let text = std::fs::read_to_string(&p)
                            .with_context(|| format!("cannot read {}", p.display()))?;
                        train_sums.add(&Sums::from_text(&text, &p)?);
                    }
                    bar.inc(shard.len() as u64);
                    continue;
                }
                // Every clip of the shard runs on any core and puts its values
                // straight into its own slot of the shard's array (the clips of
                // a packed shard are all one size); the array is written once.
                let clips_started = Instant::now();
                let results: Vec<Result<Done>> = pool.install(|| {
                    let work = |runner: &mut Result<ClipRunner<'_>>, item: Item, slot: usize| {
                        if stop.load(Ordering::Relaxed) {
                            return Err(anyhow!("stopped"));
                        }
                        let r = match runner {
                            Ok(r) => setup.process(r, item, with_sums),
                            Err(e) => Err(anyhow!("{e}")),
                        };
                        let r = r.and_then(|mut d| {
                            match array {
                                // Its row, at its place in the split's array.
                                Some(array) => {
                                    array.write_row(rows_before + slot, d.values.as_bytes())?
                                }
                                None => write_clip_file(&dir, &d, values)?,
                            }
                            d.values = kind.empty();
                            Ok(d)
                        });
                        if r.is_err() && a.strict {
                            stop.store(true, Ordering::Relaxed);
                        }
                        bar.inc(1);
                        r
                    };
                    let init = || {
                        ClipRunner::new(&config, arith, tables, &stage_tables, Some(stage), a.raw)
                    };
                    shard
                        .par_iter()
                        .enumerate()
                        .map_init(init, |r, (i, &item)| work(r, item, i))
                        .collect()
                });
                phases.clips += clips_started.elapsed().as_secs_f64();
                let mut done = Vec::new();
                let mut failed = Vec::new();
                let mut kept = 0;
                for (i, (item, r)) in shard.iter().zip(results).enumerate() {
                    let clip = &data.clips[item.clip];
                    match r {
                        Ok(d) => {
                            // Close the gaps failed clips left.
                            if let Some(array) = array
                                && kept != i
                            {
                                array.move_row(rows_before + i, rows_before + kept)?;
                            }
                            kept += 1;
                            done.push(d);
                        }
                        Err(e) => {
                            if a.strict {
                                bar.finish_and_clear();
                                return Err(e.context(format!(
                                    "--strict: {} (copy {}) failed; the shards before it are kept \
                                     and a rerun resumes after them",
                                    clip.relative, item.copy
                                )));
                            }
                            failed.push((
                                clip.relative.clone(),
                                clip.split.clone(),
                                item.copy,
                                format!("{e:#}"),
                            ));
                        }
                    }
                }
                rows_before += kept;
                tally.shards_written += 1;
                tally.done += done.len();
                tally.failed += failed.len();
                for d in &done {
                    *tally.per_label.entry(d.row.label.clone()).or_default() += 1;
                    tally.padded += (d.row.frames > d.row.clip_frames) as usize;
                    tally.trimmed += (d.row.frames < d.row.clip_frames) as usize;
                    if let Some(s) = &d.sums {
                        train_sums.add(s);
                    }
                }
                // Flushed and marked finished on the committing thread while
                // the next shard runs.
                if commit.send((k, done, failed)).is_err() {
                    break; // the committer stopped on an error, reported below
                }
            }
            drop(commit);
            // The training split's statistics are complete: written while
            // the committing thread flushes the last shard.
            if with_sums && train_sums.frames > 0 {
                statistics = Some(write_statistics(
                    out,
                    &loaded,
                    &config,
                    stage,
                    arith,
                    &train_sums,
                )?);
            }
            // What the disk still owes once the clips are done.
            let waited = Instant::now();
            committer
                .join()
                .map_err(|_| anyhow!("the committing thread failed"))??;
            phases.flush += waited.elapsed().as_secs_f64();
            Ok(())
        })
        .inspect_err(|_| bar.finish_and_clear())?;
        let labels = join_manifests(&dir, shards)?;
        if let Some(array) = array {
            array.finish(rows_before)?;
            crate::npy::write_i32_vector(&dir.join("labels.npy"), &labels)?;
        }
        tallies.push((split_name.clone(), tally));
    }
    bar.finish_and_clear();
    let failed_total: usize = tallies.iter().map(|(_, t)| t.failed).sum();
    let summary = summary_text(
        &setup,
        &loaded,
        &tallies,
        resumed,
        frames,
        values,
        statistics.as_deref(),
        Phases {
            total: started.elapsed().as_secs_f64(),
            ..phases
        },
        out,
    );
    crate::output::write_atomic_unsynced(&out.join("summary.txt"), summary.as_bytes())?;
    crate::say_text!(summary);
    Ok(if failed_total > 0 {
        Outcome::SomeFailed
    } else {
        Outcome::Success
    })
}

#[allow(clippy::too_many_arguments)]
fn write_shard(
    setup: &Setup<'_>,
    dir: &Path,
    k: usize,
    done: &[Done],
    failed: &[(String, String, u32, String)],
    with_sums: bool,
) -> Result<()> {
    if !failed.is_empty() {
        crate::output::write_atomic_unsynced(
            &dir.join(shard_name("failed", k, "csv")),
            &failed_csv(failed)?,
        )?;
    }
    if with_sums {
        let mut sums = Sums::default();
        for d in done {
            if let Some(s) = &d.sums {
                sums.add(s);
            }
        }
        crate::output::write_atomic_unsynced(
            &dir.join(shard_name("sums", k, "txt")),
            sums.to_text().as_bytes(),
        )?;
    }
    // Last: the manifest marks the shard finished. A packed shard's rows
    // were flushed to the disk with the split's array (the shard's one
    // fsync); with --per-clip the manifest is the file flushed. A resumed
    // export checks the sizes of what the manifest lists.
    let rows: Vec<ManifestRow> = done.iter().map(|d| d.row.clone()).collect();
    let path = dir.join(shard_name("manifest", k, "csv"));
    let text = setup.manifest_csv(&rows)?;
    if setup.per_clip {
        crate::output::write_atomic(&path, &text)
    } else {
        crate::output::write_atomic_unsynced(&path, &text)
    }
}

/// Whether a finished shard's files are all there and of the sizes its
/// manifest implies.
fn shard_is_whole(
    setup: &Setup<'_>,
    dir: &Path,
    k: usize,
    values: usize,
    kind: crate::clip_runner::OutputKind,
    with_sums: bool,
    array: Option<&SplitArray>,
    rows_before: usize,
) -> Result<bool> {
    let size = |p: &Path| std::fs::metadata(p).map(|m| m.len() as usize).ok();
    let manifest = dir.join(shard_name("manifest", k, "csv"));
    let text = std::fs::read_to_string(&manifest)
        .with_context(|| format!("cannot read {}", manifest.display()))?;
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header = reader.headers()?.clone();
    if header.iter().collect::<Vec<_>>() != MANIFEST_HEADER {
        return Ok(false);
    }
    let rows: Vec<csv::StringRecord> = match reader.records().collect() {
        Ok(r) => r,
        Err(_) => return Ok(false),
    };
    let descr = crate::npy::descr(&kind.empty());
    let frames_col = MANIFEST_HEADER
        .iter()
        .position(|c| *c == "frames")
        .expect("column");
    let file_col = MANIFEST_HEADER
        .iter()
        .position(|c| *c == "features_file")
        .expect("column");
    if setup.per_clip {
        for r in &rows {
            let Ok(frames) = r[frames_col].parse::<usize>() else {
                return Ok(false);
            };
            let want = crate::npy::file_size(descr, &[frames, values], kind.size());
            if size(&dir.join(&r[file_col])) != Some(want) {
                return Ok(false);
            }
        }
    } else if let Some(array) = array
        && !array.holds(rows_before + rows.len())
    {
        return Ok(false);
    }
    if with_sums {
        let p = dir.join(shard_name("sums", k, "txt"));
        match std::fs::read_to_string(&p) {
            Ok(t) if Sums::from_text(&t, &p).is_ok() => {}
            _ => return Ok(false),
        }
    }
    Ok(true)
}

/// One clip's own `.npy` (`--per-clip`), written by the worker that ran it.
fn write_clip_file(dir: &Path, d: &Done, values: usize) -> Result<()> {
    let n = d.values.len() / values;
    let mut bytes = crate::npy::header(crate::npy::descr(&d.values), &[n, values]);
    bytes.extend_from_slice(d.values.as_bytes());
    crate::output::write_atomic_unsynced(&dir.join(&d.row.file), &bytes)
}

/// `<dir>/manifest.csv`: every shard's rows, in order (rows numbered
/// within their shard).
fn join_manifests(dir: &Path, shards: usize) -> Result<Vec<i32>> {
    let mut joined: Vec<u8> = Vec::new();
    for k in 0..shards {
        let p = dir.join(shard_name("manifest", k, "csv"));
        let text = std::fs::read(&p).with_context(|| format!("cannot read {}", p.display()))?;
        let body = if k == 0 {
            &text[..]
        } else {
            // Drop the header line of every shard after the first.
            let at = text
                .iter()
                .position(|&b| b == b'\n')
                .map_or(text.len(), |i| i + 1);
            &text[at..]
        };
        joined.extend_from_slice(body);
    }
    crate::output::write_atomic_unsynced(&dir.join("manifest.csv"), &joined)?;
    // Each row's label index, in row order.
    let column = MANIFEST_HEADER
        .iter()
        .position(|c| *c == "label_index")
        .expect("column");
    let mut reader = csv::Reader::from_reader(&joined[..]);
    reader
        .records()
        .map(|r| {
            let r = r?;
            r[column]
                .parse::<i32>()
                .map_err(|_| anyhow!("{}: a label index is not a number", dir.display()))
        })
        .collect()
}

/// A split's packed array, `features.npy`, built a shard at a time in
/// `features.npy.partial` (its header reserved for every clip of the
/// split) and renamed when the split is complete. A shard's rows go at
/// their place after the rows of the shards before it, so a resumed export
/// overwrites whatever a killed one left beyond them.
struct SplitArray {
    file: std::fs::File,
    partial: PathBuf,
    done: PathBuf,
    header_len: usize,
    row_bytes: usize,
    descr: &'static str,
    row_shape: Vec<usize>,
}

impl SplitArray {
    fn open(
        dir: &Path,
        descr: &'static str,
        most_rows: usize,
        row_shape: &[usize],
        size: usize,
    ) -> Result<SplitArray> {
        let done = dir.join("features.npy");
        let partial = dir.join("features.npy.partial");
        std::fs::create_dir_all(dir)
            .with_context(|| format!("cannot create folder {}", dir.display()))?;
        let mut shape = vec![most_rows];
        shape.extend_from_slice(row_shape);
        let header = crate::npy::header(descr, &shape);
        // A finished array goes back to being built, rows kept (the
        // shards' manifests say how many are good).
        if done.exists() && !partial.exists() {
            std::fs::rename(&done, &partial)
                .with_context(|| format!("cannot reopen {}", done.display()))?;
        }
        let file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&partial)
            .with_context(|| format!("cannot open {}", partial.display()))?;
        let len = file.metadata()?.len() as usize;
        let array = SplitArray {
            file,
            partial,
            done,
            header_len: header.len(),
            row_bytes: row_shape.iter().product::<usize>() * size,
            descr,
            row_shape: row_shape.to_vec(),
        };
        // The header's room: a finished array's header was padded to the
        // same length, so its rows stay where they are.
        if len < header.len() {
            array.write_at(0, &header)?;
        }
        Ok(array)
    }

    fn write_at(&self, at: usize, bytes: &[u8]) -> Result<()> {
        use std::os::unix::fs::FileExt;
        self.file
            .write_all_at(bytes, at as u64)
            .with_context(|| format!("cannot write {}", self.partial.display()))
    }

    /// Whether the file holds the first `rows` rows.
    fn holds(&self, rows: usize) -> bool {
        self.file
            .metadata()
            .is_ok_and(|m| m.len() as usize >= self.header_len + rows * self.row_bytes)
    }

    /// Writes row `row` (from any thread: each row has its own place).
    fn write_row(&self, row: usize, bytes: &[u8]) -> Result<()> {
        anyhow::ensure!(
            bytes.len() == self.row_bytes,
            "a row of {} bytes",
            bytes.len()
        );
        self.write_at(self.header_len + row * self.row_bytes, bytes)
    }

    /// Copies row `from` to row `to` (closing the gap a failed clip left).
    fn move_row(&self, from: usize, to: usize) -> Result<()> {
        use std::os::unix::fs::FileExt;
        let mut row = vec![0u8; self.row_bytes];
        self.file
            .read_exact_at(&mut row, (self.header_len + from * self.row_bytes) as u64)
            .with_context(|| format!("cannot read {}", self.partial.display()))?;
        self.write_row(to, &row)
    }

    /// Flushes the rows written so far to the disk.
    fn sync(&self) -> Result<()> {
        self.file
            .sync_data()
            .with_context(|| format!("cannot flush {} to the disk", self.partial.display()))
    }

    /// Writes the header for `rows` rows, keeps exactly those, and renames
    /// the file to `features.npy`.
    fn finish(self, rows: usize) -> Result<()> {
        let mut shape = vec![rows];
        shape.extend_from_slice(&self.row_shape);
        let header = crate::npy::header_padded(self.descr, &shape, self.header_len)?;
        self.write_at(0, &header)?;
        self.file
            .set_len((self.header_len + rows * self.row_bytes) as u64)?;
        self.file
            .sync_all()
            .with_context(|| format!("cannot flush {} to the disk", self.partial.display()))?;
        std::fs::rename(&self.partial, &self.done)
            .with_context(|| format!("cannot move {} into place", self.done.display()))
    }
}

fn plan_text(
    a: &ExportArgs,
    s: &Setup<'_>,
    loaded: &LoadedTables,
    values: usize,
) -> Result<String> {
    let mut t = String::new();
    let _ = writeln!(
        t,
        "# stapes export: what decides this folder's contents. A rerun with the same plan resumes."
    );
    let _ = writeln!(t, "configuration = {:?}", loaded.name());
    let _ = writeln!(t, "fingerprint = \"0x{:08x}\"", s.fingerprint);
    for (k, v) in crate::config_source::describe(&s.config) {
        let _ = writeln!(t, "# {k} = {v}");
    }
    let _ = writeln!(t, "arithmetic = {:?}", s.arith.name());
    let _ = writeln!(
        t,
        "filterbank_form = {:?}",
        format!("{:?}", a.form).to_lowercase()
    );
    let _ = writeln!(t, "stage = {:?}", s.stage);
    let _ = writeln!(t, "dtype = {:?}", s.dtype);
    let _ = writeln!(t, "values_per_frame = {values}");
    match s.frames {
        Some(n) => {
            let _ = writeln!(t, "frames = {n}");
        }
        None => {
            let _ = writeln!(t, "frames = \"each clip's own\"");
        }
    }
    let _ = writeln!(t, "align = {:?}", s.align.name());
    let _ = writeln!(t, "per_clip = {}", s.per_clip);
    let _ = writeln!(t, "shard_clips = {}", a.shard_clips);
    let _ = writeln!(
        t,
        "channel = {:?}",
        format!("{:?}", s.channel).to_lowercase()
    );
    let _ = writeln!(t, "augmentation = {:?}", s.augment.describe());
    let _ = writeln!(t, "augmented_splits = {:?}", s.augment_splits.join(","));
    let _ = writeln!(t, "dataset = {:?}", dataset_digest(s.data)?);
    let _ = writeln!(t, "labels = {:?}", s.data.labels);
    Ok(t)
}

/// Makes `out` ready: a new export (empty or absent folder) or a resumed
/// one (same plan); returns whether it resumes.
fn prepare_output(out: &Path, plan: &str) -> Result<bool> {
    let plan_path = out.join("export-plan.toml");
    if plan_path.exists() {
        let old = std::fs::read_to_string(&plan_path)
            .with_context(|| format!("cannot read {}", plan_path.display()))?;
        if old != plan {
            let diff = old
                .lines()
                .zip(plan.lines())
                .find(|(a, b)| a != b)
                .map(|(a, b)| format!("it holds `{a}`, this run would make `{b}`"))
                .unwrap_or_else(|| "the plans differ in length".into());
            bail!(
                "--output-dir {} holds an export with another plan ({diff}): give a new \
                 --output-dir, or delete that folder to start over",
                out.display()
            );
        }
        remove_leftovers(out)?;
        return Ok(true);
    }
    if out.exists() {
        let mut entries =
            std::fs::read_dir(out).with_context(|| format!("cannot read {}", out.display()))?;
        if entries.next().is_some() {
            bail!(
                "--output-dir {} is not empty and holds no export: give a new or empty folder",
                out.display()
            );
        }
    }
    crate::output::write_atomic(&plan_path, plan.as_bytes())?;
    Ok(false)
}

fn progress_bar(total: u64, quiet: bool) -> indicatif::ProgressBar {
    // indicatif draws nothing when stderr is not a terminal.
    let target = if quiet {
        indicatif::ProgressDrawTarget::hidden()
    } else {
        indicatif::ProgressDrawTarget::stderr()
    };
    let bar = indicatif::ProgressBar::with_draw_target(Some(total), target);
    bar.set_style(
        indicatif::ProgressStyle::with_template(
            "{bar:40} {pos}/{len} clips  {per_sec}  elapsed {elapsed}  left {eta}",
        )
        .expect("a valid template"),
    );
    bar
}

fn write_statistics(
    out: &Path,
    loaded: &LoadedTables,
    config: &FeatureConfig,
    stage: &str,
    arith: Arith,
    sums: &Sums,
) -> Result<String> {
    let (mean, deviation) = sums.statistics();
    let list = |v: &[f32]| {
        v.iter()
            .map(|x| format!("{x:?}"))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let names = crate::chain::stage_names(config);
    let measured = names[statistics_stage(config)];
    let mut text = String::new();
    let _ = writeln!(
        text,
        "# Per-value statistics for {}: {} frames of the training split (padding frames \
         excluded), from the board's {} values of stage {measured} (`stapes export`; the \
         export wrote stage {stage}). Add this table to the configuration file.",
        loaded.name(),
        sums.frames,
        arith.name()
    );
    let _ = writeln!(text, "[stages.normalise]");
    let _ = writeln!(text, "mean = [{}]", list(&mean));
    let _ = writeln!(text, "deviation = [{}]", list(&deviation));
    crate::output::write_atomic_unsynced(&out.join("statistics.toml"), text.as_bytes())?;
    // The tables of the configuration with this normaliser: what the
    // board's normaliser and quantiser read.
    let normalised = FeatureConfig {
        stages: StageConfig {
            normalise: true,
            ..config.stages
        },
        ..*config
    };
    let name = format!("{}-normalised", loaded.name().trim_end_matches(".bin"));
    let name: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' {
                c
            } else {
                '-'
            }
        })
        .collect();
    let mut note = format!(
        "statistics.toml ({} values over {} frames)",
        mean.len(),
        sums.frames
    );
    match normalised.validate() {
        Ok(()) => {
            let t = crate::generate::GeneratedTables::with_statistics(
                &normalised,
                Some((mean.clone(), deviation.clone())),
            )?;
            let w = crate::emit::write_all_with(
                &t,
                &name,
                &out.join("board-tables"),
                "stapes export (statistics of the training split)",
                crate::emit::BlobContents::ALL,
                false,
            )?;
            let _ = write!(
                note,
                "; board tables with the normaliser: {} ({} B blob)",
                w.blob.display(),
                w.blob_bytes
            );
        }
        Err(e) => {
            let _ = write!(
                note,
                "; no board tables: the configuration with a normaliser is invalid ({e})"
            );
        }
    }
    Ok(note)
}

#[allow(clippy::too_many_arguments)]
fn summary_text(
    s: &Setup<'_>,
    loaded: &LoadedTables,
    tallies: &[(String, Tally)],
    resumed: bool,
    frames: Option<usize>,
    values: usize,
    statistics: Option<&str>,
    phases: Phases,
    out: &Path,
) -> String {
    let seconds = phases.total;
    let mut t = String::new();
    let _ = writeln!(
        t,
        "export: {} clips in {} labels, {} ({} core), stage {}, {} [{} x {values}]{}",
        s.data.clips.len(),
        s.data.labels.len(),
        loaded.name(),
        s.arith.name(),
        s.stage,
        s.dtype,
        frames.map_or("frames".to_string(), |n| n.to_string()),
        if resumed { ", resumed" } else { "" }
    );
    if let Some(n) = frames {
        let _ = writeln!(
            t,
            "  length: {n} frames per clip ({:.3} s), clip aligned at the {}; padding is digital \
             silence (zero samples) run through the front end (a streaming board never sees \
             padding)",
            (s.config.window_samples as f64 + (n as f64 - 1.0) * s.config.hop_samples as f64)
                / s.config.sample_rate_hz as f64,
            s.align.name()
        );
    }
    if s.augment.active() {
        let _ = writeln!(
            t,
            "  augmentation: {} (splits: {})",
            s.augment.describe(),
            s.augment_splits.join(",")
        );
    }
    let mut processed = 0;
    for (name, tally) in tallies {
        processed += tally.done + tally.failed;
        let labels = tally
            .per_label
            .iter()
            .map(|(l, n)| format!("{l} {n}"))
            .collect::<Vec<_>>()
            .join(", ");
        let _ = writeln!(
            t,
            "  {name}: {} rows, {} failed; shards written {}, kept from before {}{}; padded {}, \
             trimmed {}{}",
            tally.done,
            tally.failed,
            tally.shards_written,
            tally.shards_kept,
            if tally.shards_redone > 0 {
                format!(" ({} found incomplete and redone)", tally.shards_redone)
            } else {
                String::new()
            },
            tally.padded,
            tally.trimmed,
            if labels.is_empty() {
                String::new()
            } else {
                format!("; this run: {labels}")
            }
        );
        if tally.failed > 0 {
            let _ = writeln!(
                t,
                "    failed clips are listed with their errors in {}/failed-*.csv",
                out.join(name).display()
            );
        }
    }
    if !s.data.skipped.is_empty() {
        let _ = writeln!(t, "  skipped files: {}", s.data.skipped.len());
        for (p, why) in s.data.skipped.iter().take(10) {
            let _ = writeln!(t, "    {p}: {why}");
        }
    }
    match statistics {
        Some(note) => {
            let _ = writeln!(t, "  statistics: {note}");
        }
        None => {
            let _ = writeln!(t, "  statistics: none (no training split)");
        }
    }
    let _ = writeln!(
        t,
        "  time: {seconds:.3} s ({:.0} rows per second): setup {:.1} ms, clips {:.1} ms, \
         waiting for the disk after them {:.1} ms, the rest (shard files, statistics, \
         summary) {:.1} ms; output in {}",
        processed as f64 / seconds.max(1e-9),
        phases.setup * 1e3,
        phases.clips * 1e3,
        phases.flush * 1e3,
        (seconds - phases.setup - phases.clips - phases.flush).max(0.0) * 1e3,
        out.display()
    );
    t
}
