//! The error a configuration can expect, before it is used: a short internal
//! sweep through every arithmetic against the f64 reference.
//!
//! The shipped presets are the *verified region*: their tolerances hold on
//! every clip of the speech corpus (`stapes check --corpus`). Any other
//! configuration is outside it. For those, `tables` and `budget` print the
//! error this sweep measures, and `check` and `features` warn on stderr when
//! it exceeds a stated tolerance, so a configuration that breaks the fixed
//! path is never used silently.
//!
//! The sweep (0.4 s per signal, at the configuration's rate): the project's
//! speech-like synthesized clip; a log chirp over the band range plus white
//! noise, at 0, −12 and −30 dBFS; a linear chirp over the whole spectrum
//! with hiss; a loud high tone over faint hiss, above the band range and
//! near the Nyquist frequency; a low tone on a 20 % DC offset; a
//! constant; noise at −60 dBFS; a step. An error above 80 % of a tolerance on
//! the sweep counts as a warning (other material goes further). These are the
//! material on which custom configurations were seen to fail (pre-emphasis
//! near 1, magnitude spectra, offsets, near-silence).

use std::f64::consts::PI;

use anyhow::Result;
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64Mcg;
use stapes_core::config::FeatureConfig;
use stapes_core::presets;
use stapes_core::table::FilterbankForm;

use crate::check::{Arith, CoreTables, check};
use crate::compare::Tolerance;
use crate::generate::GeneratedTables;
use crate::run::Samples;

/// Whether the configuration is one of the shipped presets, verified on the
/// speech corpus.
pub fn verified(config: &FeatureConfig) -> Option<&'static str> {
    presets::ALL
        .iter()
        .find(|(_, c)| c == config)
        .map(|(name, _)| *name)
}

/// The sweep's worst error of one arithmetic at one tolerance.
#[derive(Debug, Clone, Copy)]
pub struct Predicted {
    /// The arithmetic.
    pub arith: Arith,
    /// The stated tolerance.
    pub tolerance: Tolerance,
    /// Largest |error| over the sweep, dB (or ln units ×10/ln10).
    pub max_error_db: f64,
}

impl Predicted {
    /// Whether the sweep stays within 80 % of the tolerance. The sweep is a
    /// sample of material, so an error above 80 % of the tolerance there is
    /// taken as one that other material will exceed.
    pub fn within(&self) -> bool {
        self.max_error_db <= 0.8 * self.tolerance.max_error_db
    }

    /// Whether the sweep itself exceeds the tolerance.
    pub fn exceeds(&self) -> bool {
        self.max_error_db > self.tolerance.max_error_db
    }

    /// One word for the report.
    pub fn verdict(&self) -> &'static str {
        if self.exceeds() {
            "EXCEEDS"
        } else if !self.within() {
            "MARGINAL (above 80 % of the tolerance)"
        } else {
            "within"
        }
    }
}

/// The sweep's signals for `config`.
pub fn signals(config: &FeatureConfig) -> Vec<(&'static str, Vec<i16>)> {
    let fs = config.sample_rate_hz as f64;
    let len = ((fs * 0.4) as usize).max(config.window_samples as usize * 3);
    let lo = (config.low_edge_hz as f64).max(fs / config.fft_points as f64 * 2.0);
    let hi = (config.high_edge_hz as f64 * 0.95).max(lo * 1.5);
    let mut rng = Pcg64Mcg::seed_from_u64(0x0bad_c0de);
    let to_i16 = crate::sweep::to_i16;
    let duration = len as f64 / fs;
    let chirp_noise: Vec<f64> = crate::sweep::log_chirp(lo, hi, fs, len)
        .into_iter()
        .map(|v| v + 0.05 * (rng.random::<f64>() * 2.0 - 1.0))
        .collect();
    let f_low = (lo * 2.0).min(hi);
    let tone_offset: Vec<f64> = (0..len)
        .map(|n| 0.2 + 0.3 * (2.0 * PI * f_low * n as f64 / fs).sin())
        .collect();
    let quiet: Vec<f64> = (0..len).map(|_| rng.random::<f64>() * 2.0 - 1.0).collect();
    let step: Vec<f64> = (0..len)
        .map(|n| if n < len / 2 { 0.0 } else { 0.5 })
        .collect();
    // A linear chirp over the whole spectrum with hiss 26 dB down.
    let linear: Vec<f64> = (0..len)
        .map(|n| {
            let t = n as f64 / fs;
            let f = 50.0 + (fs / 2.0 - 100.0) * t / duration;
            (PI * f * t).sin() + 0.05 * (rng.random::<f64>() * 2.0 - 1.0)
        })
        .collect();
    // A loud high tone with faint hiss: the low bands hold only
    // the hiss, where a conditioning filter's rounding (lifted by its gain at
    // low frequencies) shows.
    // Above the band range where there is room (the bands then see only
    // its leakage and the hiss), else at its top.
    let edge = config.high_edge_hz as f64;
    let f_high = if edge < 0.8 * fs / 2.0 {
        0.5 * (edge + fs / 2.0)
    } else {
        hi * 0.9
    };
    let high_tone: Vec<f64> = (0..len)
        .map(|n| {
            (2.0 * PI * f_high * n as f64 / fs).sin() + 0.001 * (rng.random::<f64>() * 2.0 - 1.0)
        })
        .collect();
    // The same near the Nyquist frequency, where pre-emphasis lifts it most
    // (a chirp's last frames): a 16-bit frame's scale is then set far above
    // every band.
    let f_nyquist = 0.97 * fs / 2.0;
    let nyquist_tone: Vec<f64> = (0..len)
        .map(|n| {
            (2.0 * PI * f_nyquist * n as f64 / fs).sin() + 0.001 * (rng.random::<f64>() * 2.0 - 1.0)
        })
        .collect();
    let mut speech =
        crate::synth::demo_clip(config.sample_rate_hz, crate::synth::DEMO_SEED).samples;
    speech.truncate(len.max(config.window_samples as usize * 3));
    vec![
        ("speech-like synthesized clip", speech),
        ("chirp and noise, -12 dBFS", to_i16(&chirp_noise, 0.25)),
        (
            "full-band linear chirp and hiss, -12 dBFS",
            to_i16(&linear, 0.25),
        ),
        (
            "high tone over hiss 60 dB down, -6 dBFS",
            to_i16(&high_tone, 0.5),
        ),
        (
            "tone near Nyquist over hiss 60 dB down, -6 dBFS",
            to_i16(&nyquist_tone, 0.5),
        ),
        ("chirp and noise, 0 dBFS", to_i16(&chirp_noise, 1.0)),
        ("chirp and noise, -30 dBFS", to_i16(&chirp_noise, 0.0316)),
        ("low tone on a 20 % offset", to_i16(&tone_offset, 0.5)),
        ("constant 1000", vec![1000; len]),
        ("noise, -60 dBFS", to_i16(&quiet, 0.001)),
        ("step to -6 dBFS", to_i16(&step, 0.5)),
    ]
}

/// Runs the sweep for every arithmetic with `config`'s generated tables
/// (sparse filterbank; the compact form gives the same values).
pub fn predict(config: &FeatureConfig) -> Result<Vec<Predicted>> {
    let tables = GeneratedTables::new(config);
    let signals = signals(config);
    let mut out = Vec::new();
    for arith in Arith::ALL {
        let mut worst = vec![0.0f64; arith.tolerances().len()];
        for (_, x) in &signals {
            let core_tables = match arith {
                Arith::F32 => CoreTables::Float(tables.view_f32(FilterbankForm::Sparse)),
                _ => match tables.fixed_tables(FilterbankForm::Sparse) {
                    Some(t) => CoreTables::Fixed(t),
                    // The fixed path cannot represent this configuration (for
                    // example its floor); `tables` says why.
                    None => continue,
                },
            };
            let run = check(arith, config, core_tables, &Samples::I16(x.clone()), 0)?;
            for (w, (_, c)) in worst.iter_mut().zip(&run.comparisons) {
                *w = w.max(c.overall.max);
            }
        }
        for (t, w) in arith.tolerances().iter().zip(worst) {
            out.push(Predicted {
                arith,
                tolerance: *t,
                max_error_db: w,
            });
        }
    }
    Ok(out)
}

/// The report lines `tables` and `budget` print.
pub fn report_lines(config: &FeatureConfig) -> Result<Vec<String>> {
    let mut lines = Vec::new();
    match verified(config) {
        Some(name) => lines.push(format!(
            "accuracy: preset {name}, verified on the speech corpus (stapes check --corpus); internal sweep:"
        )),
        None => lines.push(
            "accuracy: not a shipped preset, so outside the corpus-verified region; predicted by the internal sweep (a speech-like clip, chirp + noise at 0, -12 and -30 dBFS, a full-band chirp with hiss, a high tone and a near-Nyquist tone over faint hiss, a tone on an offset, a constant, -60 dBFS noise, a step):"
                .to_string(),
        ),
    }
    for p in predict(config)? {
        lines.push(format!(
            "  {:<8} max {:>9.2e} dB within {} dB of the loudest band (tolerance {} dB): {}",
            p.arith.name(),
            p.max_error_db,
            p.tolerance.range_db,
            p.tolerance.max_error_db,
            p.verdict()
        ));
    }
    Ok(lines)
}

/// The stderr warnings `check` and `features` give for `arith`: none inside
/// the verified region; outside it, one line, and one more per tolerance the
/// sweep exceeds.
pub fn warnings(config: &FeatureConfig, arith: Arith) -> Result<Vec<String>> {
    if verified(config).is_some() {
        return Ok(Vec::new());
    }
    let mut out = vec![format!(
        "warning: this configuration is not a shipped preset, so the speech corpus has not verified it; the internal sweep predicts {}'s error (run `stapes tables` or `stapes budget` with the same options for every arithmetic)",
        arith.name()
    )];
    for p in predict(config)?.into_iter().filter(|p| p.arith == arith) {
        if !p.within() {
            out.push(format!(
                "warning: {} errs by up to {:.2e} dB within {} dB of the loudest band on the sweep, {} its tolerance of {} dB: use another arithmetic, or move the options that differ from a preset back towards it",
                arith.name(),
                p.max_error_db,
                p.tolerance.range_db,
                if p.exceeds() { "beyond" } else { "more than 80 % of" },
                p.tolerance.max_error_db
            ));
        }
    }
    Ok(out)
}
