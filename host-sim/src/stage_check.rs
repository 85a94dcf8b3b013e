//! `check` for the stages after the filterbank: each configured stage of
//! the core against its float64 reference, per output value, with a stated
//! tolerance per stage × arithmetic.
//!
//! The tolerances, and where they come from:
//! * **range floor**: the arithmetic's log-mel tolerance at 60 dB of range
//!   (f32 0.01, fixed32 0.05, fixed16 1.0, in the log's unit; the log itself
//!   is checked by the log-mel check). `max` is 1-Lipschitz, so a floored
//!   value errs by at most its band's error or the peak's, as long as no
//!   band from beyond the 60 dB the tolerance covers rises above the floor:
//!   that holds for a floor at most 40 dB below the peak (a 20 dB margin).
//!   Measured on the speech corpus, fixed16 with a floor of 60 dB errs by up
//!   to 3.3 dB (bands just beyond 60 dB lifted above the floor), with 40 or
//!   50 dB by 0.76 dB.
//! * **MFCC**: the level stage's tolerance × √bands × the largest lifter
//!   factor. The DCT is orthonormal, so `max|ΔC| ≤ ‖ΔC‖₂ = ‖Δx‖₂ ≤
//!   √B·max|Δx|` (common practice: an orthonormal map keeps the 2-norm);
//!   the lifter scales coefficient `k` by its factor. Measured errors sit
//!   well inside this bound (README, "Model input").
//! * **PCEN**: f32 5e-4, fixed32 2e-3, fixed16 0.2, in PCEN's own units,
//!   over the bands the log-mel check compares (measured on the speech
//!   corpus through speech16k-40, dsr8k-23 and the kws16k framing: at most
//!   6.4e-5, 4.2e-4 and 0.079; margins of 2.5× or more).
//! * **normalise**: the previous stage's tolerance ÷ the smallest deviation.
//! * **quantise**: `max |Δq| ≤ ⌈tolerance / (scale · deviation)⌉` codes,
//!   from the previous stage's tolerance (rounding moves a value by at most
//!   one code more than its error spans; a value on the other side of a
//!   rounding tie is one code off even when the error is tiny, so f32 is
//!   held to 1); the share of codes equal to the reference's is reported.
//!
//! Frames whose every reference band lies below the 16-bit input's
//! resolution (silence) are counted, not compared. A stage whose values are
//! the bands one for one (PCEN, and normalise or quantise without MFCC)
//! compares the bands the log-mel check compares: within 60 dB of the
//! frame's loudest band and above the input's resolution (the fixed paths'
//! energies are stated only there, and PCEN's output inherits their error).

use anyhow::Result;

use crate::check::{Arith, CoreTables, reference_input};
use crate::reference::Reference;
use crate::run::Samples;
use crate::stages::{
    StageRun, fixed_energies, float_energies, reference_stages, run_fixed_stages, run_float_stages,
};
use stapes_core::FeatureConfig;
use stapes_core::fft::{Fixed16, Fixed32};
use stapes_core::stage_tables::StageTables;

/// One stage's comparison with its reference.
#[derive(Debug, Clone)]
pub struct StageComparison {
    /// The stage's name.
    pub name: &'static str,
    /// The stated tolerance (codes for `quantise`).
    pub tolerance: f64,
    /// Largest |error| over the compared frames.
    pub max_error: f64,
    /// Largest |error| per output value.
    pub per_value: Vec<f64>,
    /// Share of values equal to the reference (codes only).
    pub exact_share: Option<f64>,
    /// Frames compared.
    pub frames: usize,
    /// Frames skipped as below the input's resolution.
    pub skipped: usize,
}

impl StageComparison {
    /// Whether the tolerance holds.
    pub fn passed(&self) -> bool {
        self.max_error <= self.tolerance
    }
}

/// The log-mel tolerance at 60 dB of range for `arith` (in dB; natural-log
/// configurations scale it).
fn level_tolerance(arith: Arith, config: &FeatureConfig) -> f64 {
    let db = arith
        .tolerances()
        .iter()
        .find(|t| t.range_db == 60.0)
        .map_or(1.0, |t| t.max_error_db);
    match config.log {
        stapes_core::config::LogKind::Decibel => db,
        stapes_core::config::LogKind::Natural => db * std::f64::consts::LN_10 / 10.0,
    }
}

/// PCEN's stated tolerance for `arith`.
pub fn pcen_tolerance(arith: Arith) -> f64 {
    match arith {
        Arith::F32 => 5e-4,
        Arith::Fixed32 => 2e-3,
        Arith::Fixed16 => 0.2,
    }
}

/// The stated tolerance of each configured stage, in chain order.
pub fn tolerances(
    arith: Arith,
    config: &FeatureConfig,
    tables: &StageTables<'_>,
) -> Vec<(&'static str, f64)> {
    let st = &config.stages;
    let mut out = Vec::new();
    let mut tol = if st.pcen.is_some() {
        let t = pcen_tolerance(arith);
        out.push(("pcen", t));
        t
    } else {
        // The log itself is held by the log-mel check (its tolerances apply
        // within a range of each frame's peak); the stages after it start
        // from the same tolerance.
        level_tolerance(arith, config)
    };
    if st.range_floor.is_some() {
        out.push(("range_floor", tol));
    }
    if let Some(m) = st.level_map {
        // The gain scales the error (the log-add and the bounds only shrink
        // it); the fixed paths round the mapped value to 1/256 once more.
        tol = tol * m.gain as f64
            + if arith == Arith::F32 {
                0.0
            } else {
                1.0 / 512.0
            };
        out.push(("level_map", tol));
    }
    if let Some(m) = st.mfcc {
        let lifter = tables
            .lifter_f32
            .iter()
            .fold(1.0f64, |a, &l| a.max(l.abs() as f64));
        let _ = m;
        tol *= (config.bands as f64).sqrt() * lifter;
        out.push(("mfcc", tol));
    }
    let mut spread = 1.0f64;
    if st.normalise {
        spread = tables
            .deviation
            .iter()
            .fold(f64::INFINITY, |a, &d| a.min(d as f64));
        tol /= spread;
        if st.quantise.is_none() {
            out.push(("normalise", tol));
        }
    }
    if let Some(q) = st.quantise {
        let codes = if arith == Arith::F32 {
            1.0
        } else {
            (tol / q.scale as f64).ceil().max(1.0)
        };
        let _ = spread;
        out.push(("quantise", codes));
    }
    out
}

/// Runs the core's stages in `arith` and their reference over `samples`,
/// and compares them stage by stage; also returns the values the core's
/// quantiser clamped.
pub fn check_stages(
    arith: Arith,
    config: &FeatureConfig,
    core: CoreTables<'_>,
    stage_tables: &StageTables<'_>,
    samples: &Samples,
    chunk: usize,
) -> Result<(Vec<StageComparison>, u64)> {
    let got = run_arith(arith, config, core, stage_tables, samples, chunk)?;
    let reference = Reference::new(config);
    let input = reference_input(arith, samples);
    let energies = reference.energies(&input);
    let want = reference_stages(config, stage_tables, &energies);
    // Frames whose every band is below the 16-bit input's resolution, and
    // per band whether the log-mel check would compare it (within 60 dB of
    // the frame's loudest band, above the input's resolution).
    let floor = reference.input_noise_floor();
    let levels = reference.run(&input);
    let silent: Vec<bool> = levels
        .iter()
        .map(|f| f.iter().zip(&floor).all(|(e, n)| e <= n))
        .collect();
    let to_db = crate::compare::db_per_output_unit(config);
    let in_range: Vec<Vec<bool>> = levels
        .iter()
        .map(|f| {
            let top = f.iter().copied().fold(f64::NEG_INFINITY, f64::max) * to_db;
            f.iter()
                .zip(&floor)
                .map(|(&v, &n)| v * to_db >= top - COMPARED_RANGE_DB && v >= n)
                .collect()
        })
        .collect();
    Ok((
        compare(arith, config, stage_tables, &got, &want, &silent, &in_range),
        got.clamped,
    ))
}

/// The core's stage outputs in `arith`, fed `chunk` samples at a time (0:
/// the whole signal at once).
pub fn run_arith(
    arith: Arith,
    config: &FeatureConfig,
    core: CoreTables<'_>,
    stage_tables: &StageTables<'_>,
    samples: &Samples,
    chunk: usize,
) -> Result<StageRun> {
    let chunk = if chunk == 0 {
        samples.len().max(1)
    } else {
        chunk
    };
    match (arith, core) {
        (Arith::F32, CoreTables::Float(t)) => {
            let e = float_energies(config, t, samples, chunk)?;
            run_float_stages(config, stage_tables, &e)
        }
        (Arith::Fixed16, CoreTables::Fixed(t)) => {
            let e = fixed_energies::<Fixed16>(config, t, &samples.to_i16(), chunk)?;
            run_fixed_stages(config, &t, stage_tables, &e)
        }
        (Arith::Fixed32, CoreTables::Fixed(t)) => {
            let e = fixed_energies::<Fixed32>(config, t, &samples.to_i16(), chunk)?;
            run_fixed_stages(config, &t, stage_tables, &e)
        }
        _ => anyhow::bail!("tables do not match the arithmetic {}", arith.name()),
    }
}

/// The range of the log-mel check's widest tolerance: per-band stages after
/// the log (a quantiser or normaliser without MFCC) compare the values the
/// log-mel check compares.
const COMPARED_RANGE_DB: f64 = 60.0;

fn compare(
    arith: Arith,
    config: &FeatureConfig,
    tables: &StageTables<'_>,
    got: &StageRun,
    want: &StageRun,
    silent: &[bool],
    in_range: &[Vec<bool>],
) -> Vec<StageComparison> {
    // Stages whose values are the bands, one for one (log or PCEN levels,
    // without MFCC).
    let per_band = config.stages.mfcc.is_none();
    tolerances(arith, config, tables)
        .into_iter()
        .filter_map(|(name, tolerance)| {
            let g = got.stage(name)?;
            let w = want.stage(name)?;
            let values = g.values.first().map_or(0, Vec::len);
            let mut per_value = vec![0.0f64; values];
            let (mut frames, mut skipped, mut exact, mut total) = (0, 0, 0usize, 0usize);
            let masked = per_band && name != "range_floor";
            for (((gf, wf), &quiet), mask) in
                g.values.iter().zip(&w.values).zip(silent).zip(in_range)
            {
                if quiet {
                    skipped += 1;
                    continue;
                }
                frames += 1;
                for (((m, a), b), &inside) in per_value.iter_mut().zip(gf).zip(wf).zip(mask) {
                    if masked && !inside {
                        continue;
                    }
                    let e = (a - b).abs();
                    *m = m.max(e);
                    exact += (e == 0.0) as usize;
                    total += 1;
                }
            }
            Some(StageComparison {
                name,
                tolerance,
                max_error: per_value.iter().copied().fold(0.0, f64::max),
                per_value,
                exact_share: (name == "quantise" && total > 0).then(|| exact as f64 / total as f64),
                frames,
                skipped,
            })
        })
        .collect()
}

/// The report lines of a stage check.
pub fn stage_report(arith: Arith, comparisons: &[StageComparison], clamped: Option<u64>) -> String {
    let mut s = String::new();
    use std::fmt::Write;
    let _ = writeln!(
        s,
        "stages ({}) against their float64 reference, per output value:",
        arith.name()
    );
    for c in comparisons {
        let verdict = if c.passed() { "pass" } else { "FAIL" };
        match c.exact_share {
            Some(share) => {
                let _ = writeln!(
                    s,
                    "  {:<12} max |dq| {} codes, {:.2} % of codes exact, over {} frames ({} silent skipped); tolerance max |dq| <= {}: {verdict}",
                    c.name,
                    c.max_error,
                    100.0 * share,
                    c.frames,
                    c.skipped,
                    c.tolerance
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    "  {:<12} max {:.2e} over {} frames ({} silent skipped); tolerance max <= {:.2e}: {verdict}",
                    c.name, c.max_error, c.frames, c.skipped, c.tolerance
                );
            }
        }
        let cells: Vec<String> = c.per_value.iter().map(|v| format!("{v:.1e}")).collect();
        let _ = writeln!(s, "    per value: {}", cells.join(" "));
    }
    if let Some(n) = clamped {
        let _ = writeln!(s, "  quantiser clamped {n} values");
    }
    s
}
