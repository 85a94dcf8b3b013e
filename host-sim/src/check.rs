//! The check: core against the independent reference, with stated tolerances.

use std::fmt::Write;

use anyhow::{Result, anyhow, bail};
use clap::ValueEnum;
use stapes_core::config::FeatureConfig;
use stapes_core::fft::{Fixed16, Fixed32};
use stapes_core::fixed_tables::FixedTables;
use stapes_core::table::TableView;

use crate::compare::{Comparison, Tolerance, compare};
use crate::reference::Reference;
use crate::run::{Samples, fixed_to_f32, run_fixed, run_float};

/// Which arithmetic of the core runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Arith {
    /// The `f32` path (boards with an FPU).
    F32,
    /// The fixed path with 16-bit FFT data (fast).
    Fixed16,
    /// The fixed path with 32-bit FFT data (accurate).
    Fixed32,
}

impl Arith {
    /// All arithmetics.
    pub const ALL: [Arith; 3] = [Arith::F32, Arith::Fixed32, Arith::Fixed16];

    /// Name in reports.
    pub fn name(self) -> &'static str {
        match self {
            Arith::F32 => "f32",
            Arith::Fixed16 => "fixed16",
            Arith::Fixed32 => "fixed32",
        }
    }

    /// The stated tolerances: max |error| over bands within `range_db` of each
    /// frame's loudest band. All must hold.
    pub fn tolerances(self) -> &'static [Tolerance] {
        match self {
            Arith::F32 => &[Tolerance {
                range_db: 60.0,
                max_error_db: 0.01,
            }],
            Arith::Fixed32 => &[Tolerance {
                range_db: 60.0,
                max_error_db: 0.05,
            }],
            Arith::Fixed16 => &[
                Tolerance {
                    range_db: 40.0,
                    max_error_db: 0.25,
                },
                Tolerance {
                    range_db: 60.0,
                    max_error_db: 1.0,
                },
            ],
        }
    }
}

/// Tables for one run of the core.
#[derive(Clone, Copy)]
pub enum CoreTables<'a> {
    /// `f32` view.
    Float(TableView<'a, f32>),
    /// Fixed-point tables.
    Fixed(FixedTables<'a>),
}

/// Runs the core in `arith` and returns its frames in output units (`f32`).
/// The fixed paths take `i16`: float input is rounded to 16 bits first.
pub fn run_core(
    arith: Arith,
    config: &FeatureConfig,
    tables: CoreTables<'_>,
    samples: &Samples,
    chunk: usize,
) -> Result<Vec<Vec<f32>>> {
    let chunk = if chunk == 0 {
        samples.len().max(1)
    } else {
        chunk
    };
    match (arith, tables) {
        (Arith::F32, CoreTables::Float(t)) => run_float(config, t, samples, chunk),
        (Arith::Fixed16, CoreTables::Fixed(t)) => Ok(fixed_to_f32(&run_fixed::<Fixed16>(
            config,
            t,
            &samples.to_i16(),
            chunk,
        )?)),
        (Arith::Fixed32, CoreTables::Fixed(t)) => Ok(fixed_to_f32(&run_fixed::<Fixed32>(
            config,
            t,
            &samples.to_i16(),
            chunk,
        )?)),
        _ => Err(anyhow!(
            "tables do not match the arithmetic {}",
            arith.name()
        )),
    }
}

/// The samples the reference must see for `arith` (the fixed paths' 16-bit input).
pub fn reference_input(arith: Arith, samples: &Samples) -> Vec<f64> {
    match arith {
        Arith::F32 => samples.to_f64(),
        _ => samples
            .to_i16()
            .iter()
            .map(|&v| v as f64 / 32768.0)
            .collect(),
    }
}

/// A finished check.
#[derive(Debug, Clone)]
pub struct CheckRun {
    /// The arithmetic checked.
    pub arith: Arith,
    /// The configuration.
    pub config: FeatureConfig,
    /// The core's frames (output units).
    pub core: Vec<Vec<f32>>,
    /// The reference's frames.
    pub reference: Vec<Vec<f64>>,
    /// One comparison per stated tolerance.
    pub comparisons: Vec<(Tolerance, Comparison)>,
}

impl CheckRun {
    /// Whether every tolerance holds.
    pub fn passed(&self) -> bool {
        self.comparisons
            .iter()
            .all(|(t, c)| c.overall.max <= t.max_error_db)
    }

    /// The comparison at the first (tightest-range) tolerance.
    pub fn primary(&self) -> &Comparison {
        &self.comparisons[0].1
    }
}

/// Runs core and reference over `samples` and compares them.
pub fn check(
    arith: Arith,
    config: &FeatureConfig,
    tables: CoreTables<'_>,
    samples: &Samples,
    chunk: usize,
) -> Result<CheckRun> {
    let core = run_core(arith, config, tables, samples, chunk)?;
    let reference_fe = Reference::new(config);
    let reference = reference_fe.run(&reference_input(arith, samples));
    // 16-bit input (every fixed check, and 16-bit files in f32): values below
    // the input's resolution are counted, not compared (see `compare`).
    let resolution = match (arith, samples) {
        (Arith::F32, Samples::F32(_)) => None,
        _ => Some(reference_fe.input_noise_floor()),
    };
    if core.len() != reference.len() {
        bail!(
            "the core gave {} frames and the reference {}: framing differs",
            core.len(),
            reference.len()
        );
    }
    let comparisons = arith
        .tolerances()
        .iter()
        .map(|t| {
            (
                *t,
                compare(&core, &reference, config, t.range_db, resolution.as_deref()),
            )
        })
        .collect();
    Ok(CheckRun {
        arith,
        config: *config,
        core,
        reference,
        comparisons,
    })
}

/// The `f32` check (kept for callers that have an `f32` view).
pub fn check_f32(
    config: &FeatureConfig,
    table: TableView<'_, f32>,
    samples: &Samples,
    chunk: usize,
) -> Result<CheckRun> {
    check(Arith::F32, config, CoreTables::Float(table), samples, chunk)
}

/// The printed report: per-band table (worst ten bands, or all) and verdicts.
pub fn report(run: &CheckRun, centres_hz: &[f64], all_bands: bool) -> String {
    let c = run.primary();
    let mut s = String::new();
    let _ = writeln!(
        s,
        "frames compared: {}; bands within {} dB of each frame's loudest band",
        c.frames, c.range_db
    );
    let mut order: Vec<usize> = (0..c.per_band.len()).collect();
    if !all_bands {
        order.sort_by(|&a, &b| c.per_band[b].max.total_cmp(&c.per_band[a].max));
        order.truncate(10);
        order.sort();
        let _ = writeln!(s, "worst ten bands, |error| in dB:");
    } else {
        let _ = writeln!(s, "per band, |error| in dB:");
    }
    let _ = writeln!(
        s,
        "  {:>4} {:>10} {:>10} {:>10} {:>10} {:>8}",
        "band", "centre Hz", "max", "mean", "p99", "values"
    );
    for b in order {
        let e = &c.per_band[b];
        let centre = centres_hz.get(b).copied().unwrap_or(f64::NAN);
        let _ = writeln!(
            s,
            "  {:>4} {:>10.1} {:>10.2e} {:>10.2e} {:>10.2e} {:>8}",
            b, centre, e.max, e.mean, e.p99, e.count
        );
    }
    for (t, c) in &run.comparisons {
        let o = &c.overall;
        let verdict = if o.max <= t.max_error_db {
            "PASS"
        } else {
            "FAIL"
        };
        let _ = writeln!(
            s,
            "{} within {} dB: max {:.2e} dB, mean {:.2e} dB, p99 {:.2e} dB over {} values; tolerance max <= {} dB: {verdict}",
            run.arith.name(),
            t.range_db,
            o.max,
            o.mean,
            o.p99,
            o.count,
            t.max_error_db
        );
        if c.below_resolution > 0 {
            let _ = writeln!(
                s,
                "  ({} values within {} dB lie below the 16-bit input's resolution and are not compared)",
                c.below_resolution, t.range_db
            );
        }
    }
    s
}
