//! Committed golden outputs: the exact bits every arithmetic of the core
//! gives on a few short inputs, for every shipped preset and both filterbank
//! forms. Any change to the numerics — a planted off-by-one in a loop, a
//! dropped rounding, a sample skipped by the window — changes some bits and
//! fails here, however far below a tolerance its error lies.
//!
//! When a change to the numerics is intended, rerun with
//! `STAPES_BLESS_GOLDEN=1 cargo test -p stapes-tests --test golden_outputs`,
//! look at the diff of `tests/golden/outputs.txt`, and explain it in the
//! commit message (with the accuracy figures before and after).

use std::f64::consts::PI;
use std::fmt::Write as _;

use stapes_core::fft::{Fixed16, Fixed32};
use stapes_core::table::FilterbankForm;
use stapes_sim::generate::GeneratedTables;
use stapes_sim::run::{Samples, run_fixed, run_float};
use stapes_tests::{all_presets, noise, repo_root, rng};

const GOLDEN: &str = "tests/golden/outputs.txt";

/// The short inputs: 0.25 s each at the preset's rate.
fn inputs(rate: u32) -> Vec<(&'static str, Vec<i16>)> {
    let n = rate as usize / 4;
    let fs = rate as f64;
    let to_i16 = |x: Vec<f64>| -> Vec<i16> {
        x.iter()
            .map(|v| (v * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
            .collect()
    };
    let mut r = rng(77);
    let hiss = noise(&mut r, n, 0.01);
    // Linear chirp 100 Hz → 0.45·fs over the clip, at −6 dBFS, plus hiss.
    let chirp: Vec<f64> = (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            let dur = n as f64 / fs;
            let f1 = 0.45 * fs;
            0.5 * (2.0 * PI * (100.0 * t + (f1 - 100.0) * t * t / (2.0 * dur))).sin() + hiss[i]
        })
        .collect();
    // DC offset with a 40 Hz tone and a weak 3 kHz tone.
    let dc_low: Vec<f64> = (0..n)
        .map(|i| {
            let t = i as f64 / fs;
            0.2 + 0.3 * (2.0 * PI * 40.0 * t).sin() + 0.001 * (2.0 * PI * 3000.0 * t).sin()
        })
        .collect();
    // A click, then a decaying tone, then silence.
    let click: Vec<f64> = (0..n)
        .map(|i| {
            if i == n / 8 {
                0.9
            } else if i > n / 4 && i < n / 2 {
                let t = (i - n / 4) as f64 / fs;
                0.3 * (-t * 20.0).exp() * (2.0 * PI * 700.0 * t).sin()
            } else {
                0.0
            }
        })
        .collect();
    vec![
        ("chirp-hiss", to_i16(chirp)),
        ("dc-low-tone", to_i16(dc_low)),
        ("click-decay", to_i16(click)),
    ]
}

/// FNV-1a over the little-endian bytes: a compact fingerprint of every value.
fn fnv(bytes: impl IntoIterator<Item = u8>) -> u64 {
    let mut h = 0xcbf29ce484222325u64;
    for b in bytes {
        h ^= b as u64;
        h = h.wrapping_mul(0x100000001b3);
    }
    h
}

fn current() -> String {
    let mut out = String::new();
    let _ = writeln!(
        out,
        "# preset arith form input frames fnv1a-of-all-bits first-frame's-first-four-values"
    );
    for (name, config) in all_presets() {
        let tables = GeneratedTables::new(&config);
        let mut forms = vec![FilterbankForm::Sparse];
        if tables.has_compact() {
            forms.push(FilterbankForm::Compact);
        }
        for (input, samples) in inputs(config.sample_rate_hz) {
            for &form in &forms {
                let f32_frames = run_float(
                    &config,
                    tables.view_f32(form),
                    &Samples::I16(samples.clone()),
                    97,
                )
                .unwrap();
                let bits: Vec<u8> = f32_frames
                    .iter()
                    .flatten()
                    .flat_map(|v| v.to_bits().to_le_bytes())
                    .collect();
                let first: Vec<String> = f32_frames[0][..4]
                    .iter()
                    .map(|v| format!("{:08x}", v.to_bits()))
                    .collect();
                let _ = writeln!(
                    out,
                    "{name} f32 {} {input} {} {:016x} {}",
                    form.name(),
                    f32_frames.len(),
                    fnv(bits),
                    first.join(",")
                );
                let fixed = tables.fixed_tables(form).unwrap();
                for (arith, frames) in [
                    (
                        "fixed32",
                        run_fixed::<Fixed32>(&config, fixed, &samples, 97).unwrap(),
                    ),
                    (
                        "fixed16",
                        run_fixed::<Fixed16>(&config, fixed, &samples, 97).unwrap(),
                    ),
                ] {
                    let bits: Vec<u8> = frames
                        .iter()
                        .flatten()
                        .flat_map(|v| v.to_bits().to_le_bytes())
                        .collect();
                    let first: Vec<String> = frames[0][..4]
                        .iter()
                        .map(|v| v.to_bits().to_string())
                        .collect();
                    let _ = writeln!(
                        out,
                        "{name} {arith} {} {input} {} {:016x} {}",
                        form.name(),
                        frames.len(),
                        fnv(bits),
                        first.join(",")
                    );
                }
            }
        }
    }
    out
}

#[test]
fn every_arithmetic_gives_its_committed_bits() {
    let path = repo_root().join(GOLDEN);
    let now = current();
    if std::env::var_os("STAPES_BLESS_GOLDEN").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, &now).unwrap();
        return;
    }
    let committed = std::fs::read_to_string(&path).unwrap_or_else(|_| {
        panic!("{GOLDEN} is missing: run with STAPES_BLESS_GOLDEN=1 once and commit it")
    });
    let differ: Vec<String> = committed
        .lines()
        .zip(now.lines())
        .filter(|(a, b)| a != b)
        .map(|(a, b)| format!("  committed: {a}\n  now:       {b}"))
        .collect();
    assert!(
        differ.is_empty() && committed.lines().count() == now.lines().count(),
        "the core's output bits changed ({} lines differ; rerun with STAPES_BLESS_GOLDEN=1 \
         only if the change is intended):\n{}",
        differ.len(),
        differ.join("\n")
    );
}
