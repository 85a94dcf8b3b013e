//! Augmented copies of a clip, made in the sample domain and rounded to the
//! 16-bit samples a board's converter delivers, so that each copy then runs
//! through the board's own arithmetic (the fixed path's error depends on
//! level: scaling features afterwards is not the same thing).
//!
//! A copy draws, from a generator seeded by the run's seed, the clip's path
//! and the copy's number (so the draws never depend on the thread count or
//! the order clips are processed in):
//! * a gain in dB, uniform in the range given;
//! * a background recording from the noise folder, a start point in it, and
//!   a signal-to-noise ratio uniform in the range given (the noise is
//!   scaled so that clip power / noise power over the clip is that ratio;
//!   a silent clip gets no noise);
//! * a time shift uniform in ±the maximum: positive delays the clip
//!   (zeros in front), negative advances it; the length is kept.

use std::path::Path;

use anyhow::{Result, bail};
use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64;

use crate::run::Samples;

/// A closed range of a drawn quantity.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Span {
    /// Lowest value.
    pub low: f64,
    /// Highest value.
    pub high: f64,
}

impl Span {
    /// Parses `LOW:HIGH` (or a single value) for `flag`.
    pub fn parse(flag: &str, text: &str) -> Result<Span> {
        let parts: Vec<&str> = text.split(':').collect();
        let num = |s: &str| -> Result<f64> {
            match s.trim().parse::<f64>() {
                Ok(v) if v.is_finite() => Ok(v),
                _ => bail!(
                    "{flag} {text}: {s:?} is not a number: give LOW:HIGH (for example -6:6) \
                     or one value"
                ),
            }
        };
        let (low, high) = match parts.as_slice() {
            [one] => (num(one)?, num(one)?),
            [a, b] => (num(a)?, num(b)?),
            _ => bail!("{flag} {text} is not a range: give LOW:HIGH, for example -6:6"),
        };
        if low > high {
            bail!(
                "{flag} {text}: the low end is above the high end: give LOW:HIGH with LOW ≤ HIGH"
            );
        }
        Ok(Span { low, high })
    }

    fn draw(&self, rng: &mut Pcg64) -> f64 {
        if self.low == self.high {
            self.low
        } else {
            rng.random_range(self.low..=self.high)
        }
    }
}

/// Background recordings, as full-scale `f64` at the configuration's rate.
#[derive(Clone, Debug, Default)]
pub struct NoiseBank {
    /// Each recording's file name and samples.
    pub recordings: Vec<(String, Vec<f64>)>,
}

impl NoiseBank {
    /// Every WAV under `dir` at `rate_hz`, sorted by path; a recording at
    /// another rate, unreadable or silent is an error naming it.
    pub fn load(dir: &Path, rate_hz: u32) -> Result<NoiseBank> {
        let clips = crate::corpus::load_clips(dir)?;
        let mut recordings = Vec::new();
        for c in clips {
            if c.rate_hz != rate_hz {
                bail!(
                    "noise recording {} is sampled at {} Hz, not the configuration's {rate_hz} \
                     Hz: resample it or remove it from the noise folder",
                    c.name,
                    c.rate_hz
                );
            }
            let x = c.samples.to_f64();
            if x.iter().all(|&v| v == 0.0) {
                bail!(
                    "noise recording {} is silent: remove it from the noise folder",
                    c.name
                );
            }
            recordings.push((c.name, x));
        }
        if recordings.is_empty() {
            bail!(
                "--noise-dir {} holds no WAV recording: give a folder of background recordings",
                dir.display()
            );
        }
        Ok(NoiseBank { recordings })
    }
}

/// What augmented copies draw from.
#[derive(Clone, Debug, Default)]
pub struct AugmentPlan {
    /// Augmented copies per clip (beside the clip itself).
    pub copies: u32,
    /// Gain range, dB.
    pub gain_db: Option<Span>,
    /// Background recordings and the signal-to-noise range, dB.
    pub noise: Option<(NoiseBank, Span)>,
    /// Largest shift either way, seconds.
    pub shift_s: f64,
    /// The run's seed.
    pub seed: u64,
}

/// One copy's draws.
#[derive(Clone, Debug, PartialEq)]
pub struct Augmentation {
    /// Gain, dB.
    pub gain_db: f64,
    /// Recording index, start sample and SNR in dB.
    pub noise: Option<(usize, usize, f64)>,
    /// Shift, samples (positive delays).
    pub shift: i64,
}

impl AugmentPlan {
    /// Whether copies are made at all.
    pub fn active(&self) -> bool {
        self.copies > 0
    }

    /// A one-line description of the plan, for the export's record.
    pub fn describe(&self) -> String {
        if !self.active() {
            return "none".into();
        }
        let mut parts = vec![format!("{} copies, seed {}", self.copies, self.seed)];
        if let Some(g) = self.gain_db {
            parts.push(format!("gain {}:{} dB", g.low, g.high));
        }
        if let Some((bank, snr)) = &self.noise {
            parts.push(format!(
                "noise from {} recordings at {}:{} dB SNR",
                bank.recordings.len(),
                snr.low,
                snr.high
            ));
        }
        if self.shift_s > 0.0 {
            parts.push(format!("shift ±{} ms", self.shift_s * 1000.0));
        }
        parts.join(", ")
    }

    /// The draws of copy `copy` (from 1) of the clip at `relative`.
    pub fn draw(&self, relative: &str, copy: u32, rate_hz: u32) -> Augmentation {
        let mut crc = stapes_core::crc32::Crc32::new();
        crc.update(relative.as_bytes());
        let seed = self.seed ^ ((crc.finish() as u64) << 32) ^ copy as u64;
        let mut rng = Pcg64::seed_from_u64(seed);
        let gain_db = self.gain_db.map_or(0.0, |g| g.draw(&mut rng));
        let noise = self.noise.as_ref().map(|(bank, snr)| {
            let k = rng.random_range(0..bank.recordings.len());
            let start = rng.random_range(0..bank.recordings[k].1.len());
            (k, start, snr.draw(&mut rng))
        });
        let most = (self.shift_s * rate_hz as f64).round() as i64;
        let shift = if most > 0 {
            rng.random_range(-most..=most)
        } else {
            0
        };
        Augmentation {
            gain_db,
            noise,
            shift,
        }
    }

    /// How `a` reads in a manifest.
    pub fn label(&self, a: &Augmentation, rate_hz: u32) -> String {
        let mut parts = vec![format!("gain {:+.2} dB", a.gain_db)];
        if let (Some((k, start, snr)), Some((bank, _))) = (a.noise, &self.noise) {
            parts.push(format!(
                "noise {} from {:.3} s at {snr:.2} dB SNR",
                bank.recordings[k].0,
                start as f64 / rate_hz as f64
            ));
        }
        parts.push(format!(
            "shift {:+.1} ms",
            a.shift as f64 * 1000.0 / rate_hz as f64
        ));
        parts.join("; ")
    }

    /// The copy of `samples` under `a`, rounded to 16 bits with saturation;
    /// also the samples that saturated.
    pub fn apply(&self, samples: &Samples, a: &Augmentation) -> (Vec<i16>, u64) {
        let x = samples.to_f64();
        let n = x.len();
        let gain = 10f64.powf(a.gain_db / 20.0);
        // Shift, keeping the length.
        let mut y = vec![0.0f64; n];
        for (i, out) in y.iter_mut().enumerate() {
            let from = i as i64 - a.shift;
            if (0..n as i64).contains(&from) {
                *out = x[from as usize] * gain;
            }
        }
        if let (Some((k, start, snr)), Some((bank, _))) = (a.noise, &self.noise) {
            let power = y.iter().map(|v| v * v).sum::<f64>() / n.max(1) as f64;
            let noise = &bank.recordings[k].1;
            let noise_power = noise.iter().map(|v| v * v).sum::<f64>() / noise.len() as f64;
            if power > 0.0 && noise_power > 0.0 {
                let scale = (power / noise_power / 10f64.powf(snr / 10.0)).sqrt();
                for (i, v) in y.iter_mut().enumerate() {
                    *v += scale * noise[(start + i) % noise.len()];
                }
            }
        }
        let mut clipped = 0;
        let out = y
            .iter()
            .map(|&v| {
                let q = (v * 32768.0).round();
                if !(-32768.0..=32767.0).contains(&q) {
                    clipped += 1;
                }
                q.clamp(-32768.0, 32767.0) as i16
            })
            .collect();
        (out, clipped)
    }
}
