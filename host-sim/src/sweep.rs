//! The quantisation sweep: tones across the band range, white and pink
//! noise, and log chirps at 0, −20, −40 and −60 dBFS, through every
//! arithmetic, against the reference. Prints max / mean / p99 |error| per
//! arithmetic and level, draws a band × level heat map per arithmetic, and
//! fails (exit 1) when a stated tolerance is exceeded.

use std::f64::consts::PI;
use std::path::Path;

use anyhow::Result;
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64Mcg;
use stapes_core::config::FeatureConfig;
use stapes_core::table::FilterbankForm;

use crate::check::{Arith, run_core};
use crate::commands::{LoadedTables, Outcome};
use crate::compare::{Tolerance, compare};
use crate::reference::Reference;
use crate::run::Samples;

/// Input levels of the sweep, dBFS (peak).
pub const LEVELS_DBFS: [f64; 4] = [0.0, -20.0, -40.0, -60.0];

/// One test signal.
pub struct SweepSignal {
    /// What it is.
    pub name: String,
    /// 16-bit samples.
    pub samples: Vec<i16>,
}

/// `x` scaled so its largest magnitude is `peak` of full scale, as 16-bit samples.
pub(crate) fn to_i16(x: &[f64], peak: f64) -> Vec<i16> {
    let m = x.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-300);
    x.iter()
        .map(|&v| (v / m * peak * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
        .collect()
}

/// A unit-amplitude chirp whose frequency rises exponentially from `lo` to
/// `hi` Hz over `len` samples at `fs` (phase = 2π∫f dt, common practice).
pub(crate) fn log_chirp(lo: f64, hi: f64, fs: f64, len: usize) -> Vec<f64> {
    let duration = len as f64 / fs;
    let k = hi / lo;
    (0..len)
        .map(|n| {
            let t = n as f64 / fs;
            (2.0 * PI * lo * duration / k.ln() * (k.powf(t / duration) - 1.0)).sin()
        })
        .collect()
}

/// The sweep's signals at `level_dbfs` (peak level) for `config`'s rate and band range.
pub fn signals(config: &FeatureConfig, level_dbfs: f64) -> Vec<SweepSignal> {
    let fs = config.sample_rate_hz as f64;
    let len = (fs * 0.5) as usize;
    let peak = 10f64.powf(level_dbfs / 20.0).min(32767.0 / 32768.0);
    let lo = (config.low_edge_hz as f64).max(fs / config.fft_points as f64 * 2.0);
    let hi = config.high_edge_hz as f64 * 0.95;
    let mut out = Vec::new();
    let tones = 8;
    for i in 0..tones {
        let f = lo * (hi / lo).powf((i as f64 + 0.5) / tones as f64);
        let x: Vec<f64> = (0..len)
            .map(|n| (2.0 * PI * f * n as f64 / fs + 0.3).sin())
            .collect();
        out.push(SweepSignal {
            name: format!("tone {f:.0} Hz"),
            samples: to_i16(&x, peak),
        });
    }
    let mut rng = Pcg64Mcg::seed_from_u64(0x5eed + level_dbfs.abs() as u64);
    let white: Vec<f64> = (0..len).map(|_| rng.random::<f64>() * 2.0 - 1.0).collect();
    out.push(SweepSignal {
        name: "white noise".into(),
        samples: to_i16(&white, peak),
    });
    // Pink noise: white noise through a sum of first-order low-passes whose
    // poles are spread in octaves (a -3 dB/octave approximation, common practice).
    let poles = [0.99765, 0.96300, 0.57000, 0.0];
    let gains = [0.0990460, 0.2965164, 1.0526913, 0.1848];
    let mut state = [0.0f64; 4];
    let pink: Vec<f64> = white
        .iter()
        .map(|&w| {
            let mut sum = 0.0;
            for i in 0..4 {
                state[i] = poles[i] * state[i] + gains[i] * w;
                sum += state[i];
            }
            sum
        })
        .collect();
    out.push(SweepSignal {
        name: "pink noise".into(),
        samples: to_i16(&pink, peak),
    });
    let chirp = log_chirp(lo, hi, fs, len);
    out.push(SweepSignal {
        name: "log chirp".into(),
        samples: to_i16(&chirp, peak),
    });
    out
}

/// Errors of one arithmetic at one level, pooled over the signals.
#[derive(Debug, Clone)]
pub struct LevelResult {
    /// The level, dBFS.
    pub level_dbfs: f64,
    /// Per tolerance: (tolerance, max, mean, p99, values).
    pub summaries: Vec<(Tolerance, f64, f64, f64, usize)>,
    /// Per band: largest |error| at the first tolerance's range.
    pub band_max: Vec<f64>,
}

fn summarise(mut e: Vec<f64>) -> (f64, f64, f64, usize) {
    if e.is_empty() {
        return (0.0, 0.0, 0.0, 0);
    }
    e.sort_by(f64::total_cmp);
    let n = e.len();
    let p99 = e[((0.99 * n as f64).ceil() as usize).clamp(1, n) - 1];
    (e[n - 1], e.iter().sum::<f64>() / n as f64, p99, n)
}

/// Runs the sweep for one arithmetic.
pub fn sweep_arith(
    arith: Arith,
    loaded: &LoadedTables,
    config: &FeatureConfig,
    form: FilterbankForm,
) -> Result<Vec<LevelResult>> {
    let reference = Reference::new(config);
    let bands = config.bands as usize;
    let mut results = Vec::new();
    for level in LEVELS_DBFS {
        let mut pooled: Vec<Vec<f64>> = vec![Vec::new(); arith.tolerances().len()];
        let mut band_max = vec![0.0f64; bands];
        for signal in signals(config, level) {
            let samples = Samples::I16(signal.samples);
            let core = run_core(arith, config, loaded.core_tables(arith, form)?, &samples, 0)?;
            let refs = reference.run(&samples.to_f64());
            let resolution = reference.input_noise_floor();
            for (i, t) in arith.tolerances().iter().enumerate() {
                let c = compare(&core, &refs, config, t.range_db, Some(&resolution));
                for row in &c.error_map {
                    for (b, &e) in row.iter().enumerate() {
                        if !e.is_nan() {
                            pooled[i].push(e);
                            if i == 0 {
                                band_max[b] = band_max[b].max(e);
                            }
                        }
                    }
                }
            }
        }
        let summaries = arith
            .tolerances()
            .iter()
            .zip(pooled)
            .map(|(t, e)| {
                let (max, mean, p99, n) = summarise(e);
                (*t, max, mean, p99, n)
            })
            .collect();
        results.push(LevelResult {
            level_dbfs: level,
            summaries,
            band_max,
        });
    }
    Ok(results)
}

/// `stapes check --sweep`.
pub fn sweep(
    loaded: &LoadedTables,
    config: &FeatureConfig,
    form: FilterbankForm,
    out_dir: &Path,
) -> Result<Outcome> {
    crate::say!(
        "sweep: {} ({} filterbank); 8 tones, white noise, pink noise and a log chirp, 0.5 s each, at {:?} dBFS peak",
        loaded.name(),
        form.name(),
        LEVELS_DBFS
    );
    crate::say!("|error| in dB over bands within R dB of each frame's loudest band");
    crate::say!(
        "  {:<8} {:>5} {:>7} {:>10} {:>10} {:>10} {:>8} {:>9}  verdict",
        "arith",
        "R dB",
        "dBFS",
        "max",
        "mean",
        "p99",
        "values",
        "tolerance"
    );
    let mut all_pass = true;
    let centres = crate::design::design(config).centres_hz;
    std::fs::create_dir_all(out_dir)?;
    let mut written = Vec::new();
    for arith in Arith::ALL {
        let results = sweep_arith(arith, loaded, config, form)?;
        for (ti, t) in arith.tolerances().iter().enumerate() {
            for r in &results {
                let (_, max, mean, p99, n) = r.summaries[ti];
                let pass = max <= t.max_error_db;
                all_pass &= pass;
                crate::say!(
                    "  {:<8} {:>5} {:>7} {:>10.2e} {:>10.2e} {:>10.2e} {:>8} {:>9}  {}",
                    arith.name(),
                    t.range_db,
                    r.level_dbfs,
                    max,
                    mean,
                    p99,
                    n,
                    t.max_error_db,
                    if pass { "PASS" } else { "FAIL" }
                );
            }
        }
        let png = out_dir.join(format!("sweep-{}.png", arith.name()));
        let levels: Vec<f64> = results.iter().map(|r| r.level_dbfs).collect();
        let values: Vec<Vec<f64>> = results.iter().map(|r| r.band_max.clone()).collect();
        let title = format!(
            "{}: max |error| (dB) per band and input level, R = {} dB",
            arith.name(),
            arith.tolerances()[0].range_db
        );
        crate::plots::band_level_map(&png, &title, &levels, &values, &centres)?;
        written.push(png);
    }
    crate::say!(
        "verdict: {}",
        if all_pass {
            "PASS (every tolerance holds at every level)"
        } else {
            "FAIL"
        }
    );
    for p in written {
        crate::say!("wrote {}", p.display());
    }
    Ok(if all_pass {
        Outcome::Success
    } else {
        Outcome::CheckFailed
    })
}
