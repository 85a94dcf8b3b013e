//! `check --corpus DIR`: every clip of a folder of WAVs through every
//! arithmetic and every filterbank form of each configuration whose sample
//! rate matches, against the reference and the stated tolerances.
//!
//! Without a configuration option every shipped preset runs (each over the
//! clips at its rate); with `--preset`, `--config` or a field override, only
//! that configuration. The report has one row per configuration ×
//! arithmetic × form: clips passing, the worst clip, its worst band and
//! frame, and the tolerance it was judged against. Exit status 1 if any clip
//! fails any tolerance.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, bail};
use rayon::prelude::*;
use stapes_core::config::FeatureConfig;
use stapes_core::presets;
use stapes_core::table::FilterbankForm;

use crate::check::{Arith, CoreTables, check};
use crate::commands::Outcome;
use crate::config_source::ConfigArgs;
use crate::generate::GeneratedTables;
use crate::run::Samples;
use crate::wav::read_wav;

/// One clip of the corpus, decoded.
pub struct Clip {
    /// Path relative to the corpus folder.
    pub name: String,
    /// Sample rate in Hz.
    pub rate_hz: u32,
    /// The samples.
    pub samples: Samples,
}

/// Every `.wav` under `dir` (sorted by path), decoded. A file that cannot be
/// read is an error naming it.
pub fn load_clips(dir: &Path) -> Result<Vec<Clip>> {
    let mut paths = Vec::new();
    collect_wavs(dir, &mut paths)?;
    paths.sort();
    if paths.is_empty() {
        bail!(
            "{} holds no .wav files: point --corpus at a folder of WAV clips \
             (tests/corpus/make_corpus.py builds one)",
            dir.display()
        );
    }
    paths
        .par_iter()
        .map(|p| {
            let wav = read_wav(p, None)?;
            let name = p
                .strip_prefix(dir)
                .unwrap_or(p)
                .to_string_lossy()
                .into_owned();
            Ok(Clip {
                name,
                rate_hz: wav.sample_rate_hz,
                samples: wav.samples,
            })
        })
        .collect()
}

fn collect_wavs(dir: &Path, out: &mut Vec<PathBuf>) -> Result<()> {
    let entries =
        std::fs::read_dir(dir).with_context(|| format!("cannot read folder {}", dir.display()))?;
    for entry in entries {
        let path = entry?.path();
        if path.is_dir() {
            collect_wavs(&path, out)?;
        } else if path
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("wav"))
        {
            out.push(path);
        }
    }
    Ok(())
}

/// The result of one clip in one arithmetic and form.
#[derive(Debug, Clone)]
pub struct ClipResult {
    /// Clip name.
    pub clip: String,
    /// Whether every tolerance held.
    pub passed: bool,
    /// Worst |error| at the tightest-range tolerance, dB.
    pub worst_db: f64,
    /// Its band and frame.
    pub worst_band: usize,
    /// Its frame.
    pub worst_frame: usize,
    /// Worst excess over any tolerance (error − tolerance, dB; ≤ 0 when passing),
    /// and the range of that tolerance.
    pub excess: (f64, f64),
    /// Values compared at the tightest range.
    pub values: usize,
    /// 99th percentile of |error| at the tightest range, dB.
    pub p99_db: f64,
}

/// One row of the corpus table.
#[derive(Debug, Clone)]
pub struct CorpusRow {
    /// Configuration name.
    pub config: String,
    /// Arithmetic.
    pub arith: Arith,
    /// Filterbank form.
    pub form: FilterbankForm,
    /// Per clip.
    pub clips: Vec<ClipResult>,
}

impl CorpusRow {
    /// Clips passing.
    pub fn passing(&self) -> usize {
        self.clips.iter().filter(|c| c.passed).count()
    }

    /// The clip with the largest excess over its tolerance.
    pub fn worst(&self) -> Option<&ClipResult> {
        self.clips
            .iter()
            .max_by(|a, b| a.excess.0.total_cmp(&b.excess.0))
    }
}

fn worst_cell(map: &[Vec<f64>]) -> (f64, usize, usize) {
    let mut worst = (0.0, 0, 0);
    for (f, row) in map.iter().enumerate() {
        for (b, &e) in row.iter().enumerate() {
            if e.is_finite() && e > worst.0 {
                worst = (e, b, f);
            }
        }
    }
    worst
}

/// Runs `clips` (those at the configuration's rate) through every arithmetic
/// and form of `config`.
pub fn run_config(
    name: &str,
    config: &FeatureConfig,
    clips: &[Clip],
    ariths: &[Arith],
) -> Result<Vec<CorpusRow>> {
    let tables = GeneratedTables::new(config);
    let mine: Vec<&Clip> = clips
        .iter()
        .filter(|c| c.rate_hz == config.sample_rate_hz)
        .collect();
    let mut forms = vec![FilterbankForm::Sparse];
    if tables.has_compact() {
        forms.push(FilterbankForm::Compact);
    }
    let mut rows = Vec::new();
    for &arith in ariths {
        for &form in &forms {
            let core_tables = match arith {
                Arith::F32 => CoreTables::Float(tables.view_f32(form)),
                Arith::Fixed16 | Arith::Fixed32 => match tables.fixed_tables(form) {
                    Some(t) => CoreTables::Fixed(t),
                    None => bail!(
                        "{name}: the fixed path cannot represent floor_db = {}",
                        config.floor_db
                    ),
                },
            };
            let results: Vec<ClipResult> = mine
                .par_iter()
                .map(|clip| {
                    let run = check(arith, config, core_tables, &clip.samples, 0)
                        .with_context(|| format!("{}: {}", clip.name, arith.name()))?;
                    let (worst_db, worst_band, worst_frame) = worst_cell(&run.primary().error_map);
                    let excess = run
                        .comparisons
                        .iter()
                        .map(|(t, c)| (c.overall.max - t.max_error_db, t.range_db))
                        .max_by(|a, b| a.0.total_cmp(&b.0))
                        .unwrap_or((0.0, 0.0));
                    Ok(ClipResult {
                        clip: clip.name.clone(),
                        passed: run.passed(),
                        worst_db,
                        worst_band,
                        worst_frame,
                        excess,
                        values: run.primary().overall.count,
                        p99_db: run.primary().overall.p99,
                    })
                })
                .collect::<Result<_>>()?;
            rows.push(CorpusRow {
                config: name.to_string(),
                arith,
                form,
                clips: results,
            });
        }
    }
    Ok(rows)
}

/// One stage of one configuration × arithmetic over the corpus.
#[derive(Debug, Clone)]
pub struct StageCorpusRow {
    /// Configuration name.
    pub config: String,
    /// Arithmetic.
    pub arith: Arith,
    /// The stage.
    pub stage: &'static str,
    /// The stated tolerance.
    pub tolerance: f64,
    /// Per clip: name, max |error|, share of exact codes (quantise only).
    pub clips: Vec<(String, f64, Option<f64>)>,
    /// Values the quantiser clamped, over every clip.
    pub clamped: u64,
}

impl StageCorpusRow {
    /// Clips within the tolerance.
    pub fn passing(&self) -> usize {
        self.clips.iter().filter(|c| c.1 <= self.tolerance).count()
    }
}

/// Runs the stages of `config` (sparse filterbank) over the clips at its
/// rate in every arithmetic, each stage against its reference.
pub fn run_config_stages(
    name: &str,
    config: &FeatureConfig,
    tables: &GeneratedTables,
    clips: &[Clip],
    ariths: &[Arith],
) -> Result<Vec<StageCorpusRow>> {
    let mine: Vec<&Clip> = clips
        .iter()
        .filter(|c| c.rate_hz == config.sample_rate_hz)
        .collect();
    let stage_tables = tables.stages.view();
    let form = FilterbankForm::Sparse;
    let mut rows = Vec::new();
    for &arith in ariths {
        if arith != Arith::F32 && config.stages.normalise && config.stages.quantise.is_none() {
            continue; // the fixed paths normalise only folded into a quantiser
        }
        let core_tables = match arith {
            Arith::F32 => CoreTables::Float(tables.view_f32(form)),
            _ => match tables.fixed_tables(form) {
                Some(t) => CoreTables::Fixed(t),
                None => continue,
            },
        };
        let per_clip: Vec<(String, Vec<crate::stage_check::StageComparison>, u64)> = mine
            .par_iter()
            .map(|clip| {
                let (c, clamped) = crate::stage_check::check_stages(
                    arith,
                    config,
                    core_tables,
                    &stage_tables,
                    &clip.samples,
                    0,
                )
                .with_context(|| format!("{}: {}", clip.name, arith.name()))?;
                Ok((clip.name.clone(), c, clamped))
            })
            .collect::<Result<_>>()?;
        for (stage, tolerance) in crate::stage_check::tolerances(arith, config, &stage_tables) {
            let clips = per_clip
                .iter()
                .filter_map(|(clip, comps, _)| {
                    comps
                        .iter()
                        .find(|c| c.name == stage)
                        .map(|c| (clip.clone(), c.max_error, c.exact_share))
                })
                .collect();
            rows.push(StageCorpusRow {
                config: name.to_string(),
                arith,
                stage,
                tolerance,
                clips,
                clamped: per_clip.iter().map(|c| c.2).sum(),
            });
        }
    }
    Ok(rows)
}

/// The printed table of the stages over the corpus.
pub fn stage_report(rows: &[StageCorpusRow]) -> String {
    let mut s = String::new();
    if rows.is_empty() {
        return s;
    }
    let _ = writeln!(
        s,
        "\nstages after the log, against their float64 reference (sparse filterbank):"
    );
    let _ = writeln!(
        s,
        "{:<14} {:<8} {:<12} {:>13}  {:<48} {:>10} {:>10}  exact codes (worst clip)",
        "configuration", "arith", "stage", "clips passing", "worst clip", "max", "tolerance"
    );
    for r in rows {
        let worst = r.clips.iter().max_by(|a, b| a.1.total_cmp(&b.1));
        let exact = r
            .clips
            .iter()
            .filter_map(|c| c.2)
            .fold(None, |m: Option<f64>, v| Some(m.map_or(v, |m| m.min(v))));
        let _ = writeln!(
            s,
            "{:<14} {:<8} {:<12} {:>13}  {:<48} {:>10.3e} {:>10.3e}  {}",
            r.config,
            r.arith.name(),
            r.stage,
            format!("{} / {}", r.passing(), r.clips.len()),
            worst.map_or("-", |w| w.0.as_str()),
            worst.map_or(0.0, |w| w.1),
            r.tolerance,
            match exact {
                Some(e) => format!("{:.2} % ({} values clamped in all)", 100.0 * e, r.clamped),
                None => String::new(),
            }
        );
    }
    s
}

/// The printed corpus table, and the failing clips (at most `list` per row).
pub fn report(rows: &[CorpusRow], list: usize) -> String {
    let mut s = String::new();
    let _ = writeln!(
        s,
        "{:<14} {:<8} {:<8} {:>13}  {:<48} {:>9} {:>5} {:>6} {:>9}  tolerance",
        "configuration",
        "arith",
        "form",
        "clips passing",
        "worst clip",
        "max dB",
        "band",
        "frame",
        "worst p99"
    );
    for row in rows {
        let tol: Vec<String> = row
            .arith
            .tolerances()
            .iter()
            .map(|t| format!("<= {} dB at R = {}", t.max_error_db, t.range_db))
            .collect();
        match row.worst() {
            Some(w) => {
                let p99 = row.clips.iter().map(|c| c.p99_db).fold(0.0, f64::max);
                let _ = writeln!(
                    s,
                    "{:<14} {:<8} {:<8} {:>13}  {:<48} {:>9.2e} {:>5} {:>6} {:>9.2e}  {}",
                    row.config,
                    row.arith.name(),
                    row.form.name(),
                    format!("{} / {}", row.passing(), row.clips.len()),
                    w.clip,
                    w.worst_db,
                    w.worst_band,
                    w.worst_frame,
                    p99,
                    tol.join(", ")
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    "{:<14} {:<8} {:<8} {:>13}  (no clip at {} Hz)",
                    row.config,
                    row.arith.name(),
                    row.form.name(),
                    "0 / 0",
                    ""
                );
            }
        }
    }
    for row in rows {
        let mut failing: Vec<&ClipResult> = row.clips.iter().filter(|c| !c.passed).collect();
        if failing.is_empty() {
            continue;
        }
        failing.sort_by(|a, b| b.excess.0.total_cmp(&a.excess.0));
        let _ = writeln!(
            s,
            "\n{} {} {}: {} clips fail (worst first):",
            row.config,
            row.arith.name(),
            row.form.name(),
            failing.len()
        );
        for c in failing.iter().take(list) {
            let _ = writeln!(
                s,
                "  {:<48} exceeds its tolerance at R = {} by {:.3} dB (worst {:.3e} dB, band {}, frame {})",
                c.clip, c.excess.1, c.excess.0, c.worst_db, c.worst_band, c.worst_frame
            );
        }
        if failing.len() > list {
            let _ = writeln!(s, "  … and {} more", failing.len() - list);
        }
    }
    s
}

/// Whether any configuration option was given (then only that configuration runs).
fn names_a_configuration(a: &ConfigArgs) -> bool {
    a.preset.is_some()
        || a.config.is_some()
        || a.sample_rate_hz.is_some()
        || a.window_samples.is_some()
        || a.fft_points.is_some()
        || a.hop_samples.is_some()
        || a.window.is_some()
        || a.dc_removal_pole.is_some()
        || a.pre_emphasis.is_some()
        || a.bands.is_some()
        || a.low_edge_hz.is_some()
        || a.high_edge_hz.is_some()
        || a.mel_scale.is_some()
        || a.triangles.is_some()
        || a.band_gain.is_some()
        || a.spectrum.is_some()
        || a.log.is_some()
        || a.floor_db.is_some()
        || a.pcen.is_some()
        || a.range_floor_db.is_some()
        || a.mfcc.is_some()
        || a.lifter.is_some()
        || a.quantise.is_some()
        || a.model_window.is_some()
}

/// `stapes check --corpus DIR`.
pub fn corpus_command(
    dir: &Path,
    config_args: &ConfigArgs,
    arith: Option<Arith>,
    list: usize,
) -> Result<Outcome> {
    let ariths: Vec<Arith> = match arith {
        Some(a) => vec![a],
        None => Arith::ALL.to_vec(),
    };
    let clips = load_clips(dir)?;
    type Statistics = Option<(Vec<f32>, Vec<f32>)>;
    let configs: Vec<(String, FeatureConfig, Statistics)> = if names_a_configuration(config_args) {
        let named = config_args.resolve()?;
        vec![(named.name, named.config, named.statistics)]
    } else {
        presets::ALL
            .iter()
            .map(|(n, c)| (n.to_string(), *c, None))
            .collect()
    };
    let mut rates: Vec<u32> = clips.iter().map(|c| c.rate_hz).collect();
    rates.sort();
    rates.dedup();
    crate::say!(
        "corpus {}: {} clips at {} Hz",
        dir.display(),
        clips.len(),
        rates
            .iter()
            .map(u32::to_string)
            .collect::<Vec<_>>()
            .join(", ")
    );
    let mut rows = Vec::new();
    let mut stage_rows = Vec::new();
    for (name, config, statistics) in &configs {
        if !clips.iter().any(|c| c.rate_hz == config.sample_rate_hz) {
            bail!(
                "{} has no clip at {} Hz for {name}: add clips at that rate, or choose a \
                 configuration for {} Hz",
                dir.display(),
                config.sample_rate_hz,
                rates
                    .iter()
                    .map(u32::to_string)
                    .collect::<Vec<_>>()
                    .join(" or ")
            );
        }
        rows.extend(run_config(name, config, &clips, &ariths)?);
        if config.stages.any() {
            let tables = GeneratedTables::with_statistics(config, statistics.clone())?;
            stage_rows.extend(run_config_stages(name, config, &tables, &clips, &ariths)?);
        }
    }
    crate::say_text!(report(&rows, list));
    crate::say_text!(stage_report(&stage_rows));
    let failed = rows.iter().any(|r| r.passing() < r.clips.len())
        || stage_rows.iter().any(|r| r.passing() < r.clips.len());
    crate::say!(
        "verdict: {}",
        if failed {
            "FAIL (a clip exceeds a stated tolerance)"
        } else {
            "PASS (every clip within every stated tolerance)"
        }
    );
    Ok(if failed {
        Outcome::CheckFailed
    } else {
        Outcome::Success
    })
}
