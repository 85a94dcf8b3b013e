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

/// The model-input stages on the corpus's 16 kHz speech (speech16k-40, every
/// clip): MFCC (13 coefficients, lifter L = 22) and PCEN (the paper's
/// parameters) of each arithmetic's chain against the f64 transform of the
/// f64 reference. MFCC mixes every band into every coefficient, the bands
/// far below a frame's loudest too, which no log-mel tolerance covers (R
/// selects bands), so it is compared on frames clipped 60 dB below their
/// loudest band (both sides), and the unclipped figure is printed beside it;
/// the chains with a `RangeFloor` stage (60 dB) before the MFCC do that
/// clipping on the board. Measured: MFCC clipped f32 2.4e-3, fixed16 3.3
/// (unclipped 0.63 and 435, from bands at the floor on one side only), with
/// the stage 2.4e-3 and 3.3; PCEN f32 1.6e-4, fixed16 0.19. Held within
/// 5e-3, 5, 5e-4 and 0.4.
#[test]
fn model_input_stages_on_speech() {
    use stapes_core::fft::Fixed16;
    use stapes_core::fixed::types::I8F8;
    use stapes_core::pcen::{FloatPcen, PcenParams};
    use stapes_core::pcen_fixed::FixedPcen;
    use stapes_core::stage::Then;
    use stapes_core::table::FilterbankForm;
    use stapes_core::{FixedLog, FixedMfcc, FloatLog, FloatMfcc, RangeFloor};
    use stapes_sim::dct::DctTables;
    use stapes_sim::generate::GeneratedTables;
    use stapes_sim::reference::Reference;
    use stapes_sim::run::{HostFloatFrontEnd, Samples};
    let dir = corpus_dir();
    let c = stapes_core::presets::SPEECH16K_40;
    let t = GeneratedTables::new(&c);
    let fixed = t.fixed_tables(FilterbankForm::Sparse).unwrap();
    let dct = DctTables::new(40, 13, Some(22));
    let p = PcenParams::DEFAULT;
    let hop_s = c.hop_samples as f32 / c.sample_rate_hz as f32;
    let (s, fp) = (
        p.smoothing(hop_s),
        stapes_sim::model_input::fixed_pcen_params(&p, hop_s),
    );
    let clip = |v: &[f64], top: f64| -> Vec<f64> { v.iter().map(|&x| x.max(top - 60.0)).collect() };
    // [f32 clipped, fixed16 clipped, f32 unclipped, fixed16 unclipped, PCEN f32, PCEN fixed16,
    //  f32 and fixed16 chains with a RangeFloor of 60 dB before the MFCC]
    let mut worst = [0.0f64; 8];
    let mut clips = 0;
    for entry in std::fs::read_dir(dir.join("16000")).unwrap() {
        let path = entry.unwrap().path();
        if !path
            .file_name()
            .unwrap()
            .to_string_lossy()
            .starts_with("speech-")
        {
            continue;
        }
        clips += 1;
        let Samples::I16(x) = stapes_sim::wav::read_wav_for(&path, None, 16000).unwrap() else {
            panic!("16-bit corpus clip");
        };
        let reference = Reference::new(&c);
        let input = Samples::I16(x.clone()).to_f64();
        let logs = reference.run(&input);
        let pcen_ref = stapes_sim::model_input::pcen_f64(&reference.energies(&input), &p, s as f64);
        let mut mfcc = |levels: Vec<f64>, i: usize, slot: usize| {
            let r = &logs[i];
            let top = r.iter().cloned().fold(f64::MIN, f64::max);
            let pairs = [
                (
                    dct.apply_f64(&clip(&levels, top)),
                    dct.apply_f64(&clip(r, top)),
                    slot,
                ),
                (dct.apply_f64(&levels), dct.apply_f64(r), slot + 2),
            ];
            for (g, w, k) in pairs {
                for (g, w) in g.iter().zip(&w) {
                    worst[k] = worst[k].max((g - w).abs());
                }
            }
        };
        let mut f32_fe =
            Box::new(HostFloatFrontEnd::new(c, t.view_f32(FilterbankForm::Sparse)).unwrap());
        let mut rest = &x[..];
        while let Some(f) = f32_fe.next_frame(&mut rest) {
            mfcc(
                f.bands[..40].iter().map(|&v| v as f64).collect(),
                f.index as usize,
                0,
            );
        }
        let mut fx =
            Box::new(stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40>::new(c, fixed).unwrap());
        let mut rest = &x[..];
        while let Some(f) = fx.next_frame(&mut rest) {
            mfcc(
                f.bands.iter().map(|v| v.to_num::<f64>()).collect(),
                f.index as usize,
                1,
            );
        }
        // The chains with the relative floor as a stage, against the
        // reference clipped 60 dB below its own loudest band.
        let want = |i: usize| {
            let r = &logs[i];
            dct.apply_f64(&clip(r, r.iter().cloned().fold(f64::MIN, f64::max)))
        };
        let mut m32 = Box::new(
            stapes_core::FloatFrontEnd::<4096, 4096, 40, _>::with_stages(
                c,
                t.view_f32(FilterbankForm::Sparse),
                Then(
                    FloatLog::for_config(&c),
                    Then(
                        RangeFloor::new(60.0f32),
                        FloatMfcc::<13>::new(dct.view_f32()).unwrap(),
                    ),
                ),
            )
            .unwrap(),
        );
        let mut rest = &x[..];
        while let Some(f) = m32.next_frame(&mut rest) {
            for (g, w) in f.bands.iter().zip(want(f.index as usize)) {
                worst[6] = worst[6].max((*g as f64 - w).abs());
            }
        }
        let mut m16 = Box::new(
            stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40, _>::with_stages(
                c,
                fixed,
                Then(
                    FixedLog::<40>::for_tables(&fixed),
                    Then(
                        RangeFloor::new(I8F8::from_num(60)),
                        FixedMfcc::<13>::new(dct.view_q15()).unwrap(),
                    ),
                ),
            )
            .unwrap(),
        );
        let mut rest = &x[..];
        while let Some(f) = m16.next_frame(&mut rest) {
            for (g, w) in f.bands.iter().zip(want(f.index as usize)) {
                worst[7] = worst[7].max((g.to_num::<f64>() - w).abs());
            }
        }
        let mut p32 = Box::new(
            stapes_core::FloatFrontEnd::<4096, 4096, 40, _>::with_stages(
                c,
                t.view_f32(FilterbankForm::Sparse),
                FloatPcen::<40>::new(p, s).unwrap(),
            )
            .unwrap(),
        );
        let mut rest = &x[..];
        while let Some(f) = p32.next_frame(&mut rest) {
            for (g, w) in f.bands.iter().zip(&pcen_ref[f.index as usize]) {
                worst[4] = worst[4].max((*g as f64 - w).abs());
            }
        }
        let mut p16 = Box::new(
            stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40, _>::with_stages(
                c,
                fixed,
                FixedPcen::<40>::new(fp),
            )
            .unwrap(),
        );
        let mut rest = &x[..];
        while let Some(f) = p16.next_frame(&mut rest) {
            for (g, w) in f.bands.iter().zip(&pcen_ref[f.index as usize]) {
                worst[5] = worst[5].max((g.to_num::<f64>() - w).abs());
            }
        }
    }
    println!(
        "{clips} clips: MFCC clipped 60 dB f32 {:.2e}, fixed16 {:.3} (unclipped {:.2e}, {:.1}; with a RangeFloor stage {:.2e}, {:.3}); PCEN f32 {:.2e}, fixed16 {:.3}",
        worst[0], worst[1], worst[2], worst[3], worst[6], worst[7], worst[4], worst[5]
    );
    assert!(clips >= 150, "{clips} clips");
    assert!(worst[0] <= 5e-3, "f32 MFCC {:.2e}", worst[0]);
    assert!(worst[1] <= 5.0, "fixed16 MFCC {:.3}", worst[1]);
    assert!(
        worst[6] <= 5e-3,
        "f32 MFCC after RangeFloor {:.2e}",
        worst[6]
    );
    assert!(
        worst[7] <= 5.0,
        "fixed16 MFCC after RangeFloor {:.3}",
        worst[7]
    );
    assert!(worst[4] <= 5e-4, "f32 PCEN {:.2e}", worst[4]);
    assert!(worst[5] <= 0.4, "fixed16 PCEN {:.3}", worst[5]);
}

/// The stages after the log of every preset that has them (the kws16k
/// presets) hold their stated tolerance per stage × arithmetic on every
/// clip (`host-sim/src/stage_check.rs` states them; the same table as
/// `stapes check --corpus`).
#[test]
fn every_stage_holds_its_tolerance_on_every_clip() {
    use stapes_sim::corpus::{run_config_stages, stage_report};
    use stapes_sim::generate::GeneratedTables;
    let dir = corpus_dir();
    let clips = load_clips(&dir).unwrap();
    let mut rows = Vec::new();
    for (name, config) in all_presets() {
        if !config.stages.any() {
            continue;
        }
        let tables = GeneratedTables::new(&config);
        rows.extend(run_config_stages(name, &config, &tables, &clips, &Arith::ALL).unwrap());
    }
    println!("{}", stage_report(&rows));
    assert!(rows.len() >= 12, "{} rows", rows.len());
    for r in &rows {
        assert!(
            r.clips.len() >= 150,
            "{} {} {}",
            r.config,
            r.arith.name(),
            r.stage
        );
        assert_eq!(
            r.passing(),
            r.clips.len(),
            "{} {} {}: a clip exceeds the stage's tolerance",
            r.config,
            r.arith.name(),
            r.stage
        );
    }
}
