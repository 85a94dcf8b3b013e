//! The check: core against the independent reference, with a stated tolerance.

use std::fmt::Write;

use anyhow::{Result, bail};
use stapes_core::config::FeatureConfig;
use stapes_core::table::TableView;

use crate::compare::{Comparison, Tolerance, compare};
use crate::reference::Reference;
use crate::run::{Samples, run_float};

/// The stated tolerance of the `f32` path: max |error| ≤ 0.01 dB over bands
/// within 60 dB of each frame's loudest band.
pub const F32_TOLERANCE: Tolerance = Tolerance {
    range_db: 60.0,
    max_error_db: 0.01,
};

/// A finished check.
#[derive(Debug, Clone)]
pub struct CheckRun {
    /// The configuration.
    pub config: FeatureConfig,
    /// The core's frames (output units).
    pub core: Vec<Vec<f32>>,
    /// The reference's frames.
    pub reference: Vec<Vec<f64>>,
    /// Error statistics.
    pub comparison: Comparison,
    /// The tolerance applied.
    pub tolerance: Tolerance,
}

impl CheckRun {
    /// Whether the check passed.
    pub fn passed(&self) -> bool {
        self.comparison.overall.max <= self.tolerance.max_error_db
    }
}

/// Runs core and reference over `samples` and compares them.
pub fn check_f32(
    config: &FeatureConfig,
    table: TableView<'_, f32>,
    samples: &Samples,
    chunk: usize,
) -> Result<CheckRun> {
    let core = run_float(
        config,
        table,
        samples,
        if chunk == 0 {
            samples.len().max(1)
        } else {
            chunk
        },
    )?;
    let reference = Reference::new(config).run(&samples.to_f64());
    if core.len() != reference.len() {
        bail!(
            "the core gave {} frames and the reference {}: framing differs",
            core.len(),
            reference.len()
        );
    }
    let tolerance = F32_TOLERANCE;
    let comparison = compare(&core, &reference, config.log, tolerance.range_db);
    Ok(CheckRun {
        config: *config,
        core,
        reference,
        comparison,
        tolerance,
    })
}

/// The printed report: per-band table (worst `rows` bands, or all) and verdict.
pub fn report(run: &CheckRun, centres_hz: &[f64], all_bands: bool) -> String {
    let c = &run.comparison;
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
        let _ = writeln!(s, "worst ten bands (all with --all-bands), |error| in dB:");
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
        let _ = writeln!(
            s,
            "  {:>4} {:>10.1} {:>10.2e} {:>10.2e} {:>10.2e} {:>8}",
            b,
            centres_hz.get(b).copied().unwrap_or(f64::NAN),
            e.max,
            e.mean,
            e.p99,
            e.count
        );
    }
    let o = &c.overall;
    let _ = writeln!(
        s,
        "overall: max {:.2e} dB, mean {:.2e} dB, p99 {:.2e} dB over {} values",
        o.max, o.mean, o.p99, o.count
    );
    let verdict = if run.passed() { "PASS" } else { "FAIL" };
    let _ = writeln!(
        s,
        "tolerance (f32): max |error| <= {} dB within {} dB: {verdict}",
        run.tolerance.max_error_db, run.tolerance.range_db
    );
    s
}
