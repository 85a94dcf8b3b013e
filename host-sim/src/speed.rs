//! The core's speed on the host: how many frames per second each arithmetic
//! computes over the demo clip, one thread, the board's own code.
//!
//! This is the host benchmark `stapes speed` prints. The board's figures
//! (QEMU instructions per frame) come from `tests/firmware-figures.sh`; host
//! throughput matters for training-side work that runs the same core over
//! whole datasets.

use std::time::{Duration, Instant};

use anyhow::Result;
use stapes_core::config::FeatureConfig;
use stapes_core::table::FilterbankForm;

use crate::check::{Arith, CoreTables, run_core};
use crate::generate::GeneratedTables;
use crate::run::Samples;

/// One arithmetic's measured speed.
#[derive(Debug, Clone, Copy)]
pub struct Speed {
    /// The arithmetic.
    pub arith: Arith,
    /// Frames computed in the measurement.
    pub frames: usize,
    /// Wall time of the measurement.
    pub elapsed: Duration,
    /// Seconds of audio those frames cover, at the configuration's hop.
    pub audio_seconds: f64,
}

impl Speed {
    /// Microseconds per frame.
    pub fn micros_per_frame(&self) -> f64 {
        self.elapsed.as_secs_f64() * 1e6 / self.frames.max(1) as f64
    }

    /// Audio seconds computed per second of wall time.
    pub fn times_real_time(&self) -> f64 {
        self.audio_seconds / self.elapsed.as_secs_f64().max(1e-9)
    }
}

/// Runs every arithmetic over the demo clip, repeatedly, for at least
/// `seconds_each` of wall time each (the clip fed whole, sparse filterbank).
pub fn measure(config: &FeatureConfig, seconds_each: f64) -> Result<Vec<Speed>> {
    let tables = GeneratedTables::new(config);
    let clip = crate::synth::demo_clip(config.sample_rate_hz, crate::synth::DEMO_SEED).samples;
    let samples = Samples::I16(clip);
    let hop_seconds = config.hop_samples as f64 / config.sample_rate_hz as f64;
    let mut out = Vec::new();
    for arith in Arith::ALL {
        let core_tables = || match arith {
            Arith::F32 => Some(CoreTables::Float(tables.view_f32(FilterbankForm::Sparse))),
            _ => tables
                .fixed_tables(FilterbankForm::Sparse)
                .map(CoreTables::Fixed),
        };
        let Some(first) = core_tables() else {
            continue;
        };
        // One warm-up run, then whole runs until the time is spent.
        run_core(arith, config, first, &samples, 0)?;
        let (mut frames, start) = (0usize, Instant::now());
        while start.elapsed().as_secs_f64() < seconds_each {
            if let Some(t) = core_tables() {
                frames += run_core(arith, config, t, &samples, 0)?.len();
            }
        }
        out.push(Speed {
            arith,
            frames,
            elapsed: start.elapsed(),
            audio_seconds: frames as f64 * hop_seconds,
        });
    }
    Ok(out)
}

/// The printed table.
pub fn report(name: &str, speeds: &[Speed]) -> String {
    let mut s = format!(
        "host speed, {name}, demo clip, one thread (frames include every stage; the board's own code):\n  arith      frames   µs/frame   × real time\n"
    );
    for v in speeds {
        s.push_str(&format!(
            "  {:<8} {:>8} {:>10.2} {:>13.0}\n",
            v.arith.name(),
            v.frames,
            v.micros_per_frame(),
            v.times_real_time()
        ));
    }
    s
}
