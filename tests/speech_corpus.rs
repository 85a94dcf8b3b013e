//! Accuracy on material the project did not design for the test: the speech
//! corpus of `tests/corpus/make_corpus.py` (espeak-ng voices and speaking
//! rates, sox resampling to 16 and 8 kHz, peaks from −1 to −40 dBFS, clean
//! or with noise, mains hum and DC offset, plus constant, near-constant,
//! step, click and low-tone signals), through every arithmetic and every
//! filterbank form of every shipped preset, against the independent f64
//! reference (rustfft in f64, dense filter matrix from the formulas).
//!
//! Needs espeak-ng and sox (Debian packages); installs them with apt-get when
//! missing and fails, never skips, when it still cannot run them.

use std::path::{Path, PathBuf};
use std::process::Command;

use stapes_sim::check::Arith;
use stapes_sim::corpus::{CorpusRow, load_clips, report, run_config};
use stapes_tests::{all_presets, repo_root};

fn have(tool: &str) -> bool {
    Command::new("sh")
        .args(["-c", &format!("command -v {tool}")])
        .output()
        .is_ok_and(|o| o.status.success())
}

fn ensure_tools() {
    if have("espeak-ng") && have("sox") {
        return;
    }
    eprintln!("espeak-ng or sox is missing: installing them with apt-get");
    let _ = Command::new("apt-get").args(["update", "-qq"]).status();
    let _ = Command::new("apt-get")
        .args(["install", "-y", "-qq", "espeak-ng", "sox"])
        .env("DEBIAN_FRONTEND", "noninteractive")
        .status();
    assert!(
        have("espeak-ng") && have("sox"),
        "espeak-ng and sox are needed for the speech corpus: install the Debian packages \
         espeak-ng and sox, and rerun"
    );
}

/// Builds the corpus once per version of the script (its CRC names the
/// folder); the tests of this file share it (one builder at a time).
fn corpus_dir() -> PathBuf {
    static BUILD: std::sync::Mutex<()> = std::sync::Mutex::new(());
    let _one_at_a_time = BUILD.lock().unwrap_or_else(|e| e.into_inner());
    ensure_tools();
    let script = repo_root().join("tests/corpus/make_corpus.py");
    let text = std::fs::read(&script).expect("read make_corpus.py");
    let dir = repo_root()
        .join("target")
        .join(format!("stapes-corpus-{:08x}", crc32fast::hash(&text)));
    if !dir.join("manifest.csv").exists() {
        let status = Command::new("python3")
            .arg(&script)
            .arg(&dir)
            .status()
            .expect("run python3 tests/corpus/make_corpus.py");
        assert!(status.success(), "make_corpus.py failed");
    }
    dir
}

fn speech_clips(dir: &Path, rate: u32) -> usize {
    std::fs::read_dir(dir.join(rate.to_string()))
        .unwrap()
        .filter(|e| {
            e.as_ref()
                .unwrap()
                .file_name()
                .to_string_lossy()
                .starts_with("speech-")
        })
        .count()
}

fn run(ariths: &[Arith]) -> Vec<CorpusRow> {
    let dir = corpus_dir();
    let clips = load_clips(&dir).unwrap();
    let mut rows = Vec::new();
    for (name, config) in all_presets() {
        rows.extend(run_config(name, &config, &clips, ariths).unwrap());
    }
    println!("{}", report(&rows, 20));
    rows
}

#[test]
fn corpus_is_large_and_varied() {
    let dir = corpus_dir();
    let speech = speech_clips(&dir, 16000) + speech_clips(&dir, 8000);
    assert!(speech >= 300, "only {speech} speech clips");
    let manifest = std::fs::read_to_string(dir.join("manifest.csv")).unwrap();
    for needle in [
        "en-gb-x-rp",
        "en+f3",
        "en+m7",
        ",120,",
        ",215,",
        ",-1.0,",
        ",-40.0,",
        "noise-5db",
        "hum",
        "dc-offset",
        "const-2lsb",
        "click-full-scale",
        "step-0-8000",
    ] {
        assert!(manifest.contains(needle), "manifest lacks {needle}");
    }
}

/// Every arithmetic meets its stated tolerances (shared/DESIGN.md §4: f32
/// ≤ 0.01 dB and fixed32 ≤ 0.05 dB at R = 60; fixed16 ≤ 0.25 dB at R = 40
/// and ≤ 1 dB at R = 60) on every clip, every preset and both filterbank
/// forms. (fixed16 did not until its normalisation bounded the windowed
/// frame per segment and its magnitude bins kept 15 fraction bits: 178, 173
/// and 180 of 181 clips passed before, 181 of 181 now.)
#[test]
fn every_arithmetic_holds_its_tolerances_on_every_clip() {
    let rows = run(&[Arith::F32, Arith::Fixed32, Arith::Fixed16]);
    for row in &rows {
        assert!(!row.clips.is_empty(), "{} has no clip", row.config);
        assert_eq!(
            row.passing(),
            row.clips.len(),
            "{} {} {}: {} of {} clips pass",
            row.config,
            row.arith.name(),
            row.form.name(),
            row.passing(),
            row.clips.len()
        );
    }
}

/// f32 held at the level it reaches, not only at its 0.01 dB tolerance, so
/// that a structural bug far below the tolerance still fails: over the whole
/// corpus, every preset and form, measured worst 9.0e-4 dB and worst
/// per-clip p99 5.1e-4 dB (dsr8k-23's constant at −20000 LSB); held within
/// 2e-3 and 1e-3 dB.
#[test]
fn f32_stays_at_its_measured_level_on_the_corpus() {
    let rows = run(&[Arith::F32]);
    for row in &rows {
        for clip in &row.clips {
            assert!(
                clip.worst_db <= 2e-3 && clip.p99_db <= 1e-3,
                "{} f32 {} {}: max {:.2e} dB, p99 {:.2e} dB (measured level 9.0e-4 / 5.1e-4)",
                row.config,
                row.form.name(),
                clip.clip,
                clip.worst_db,
                clip.p99_db
            );
        }
    }
}
