//! The subcommands end to end, through the same entry point as the binary.

use std::path::Path;

use clap::Parser;
use stapes_core::table::FilterbankForm;
use stapes_sim::cli::Cli;
use stapes_sim::commands::{Outcome, run};
use stapes_sim::generate::GeneratedTables;
use stapes_sim::run::{Samples, frame_count, run_float};
use stapes_sim::wav::write_wav_i16;
use stapes_tests::{noise_i16, rng};

fn stapes(args: &[&str]) -> anyhow::Result<Outcome> {
    let mut all = vec!["stapes"];
    all.extend_from_slice(args);
    run(Cli::try_parse_from(all)?)
}

fn is_png(p: &Path) -> bool {
    std::fs::read(p)
        .map(|b| b.starts_with(b"\x89PNG\r\n\x1a\n") && b.len() > 5000)
        .unwrap_or(false)
}

#[test]
fn the_demo_passes_its_check_and_writes_everything() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    assert_eq!(
        stapes(&["demo", "--out-dir", out.to_str().unwrap()]).unwrap(),
        Outcome::Success
    );
    for png in [
        "log-mel-core.png",
        "log-mel-reference.png",
        "log-mel-error.png",
        "filterbank.png",
    ] {
        assert!(is_png(&out.join(png)), "{png}");
    }
    for f in [
        "demo-clip.wav",
        "tables/speech16k-40.rs",
        "tables/speech16k-40.h",
        "tables/speech16k-40.bin",
    ] {
        assert!(out.join(f).is_file(), "{f}");
    }
    let (rows, cols, data) = stapes_sim::npy::read_f32(&out.join("features.npy")).unwrap();
    let clip = stapes_sim::synth::demo_clip(16000, stapes_sim::synth::DEMO_SEED);
    assert_eq!(
        (rows, cols),
        (
            frame_count(&stapes_core::presets::SPEECH16K_40, clip.samples.len()),
            40
        )
    );
    assert_eq!(data.len(), rows * cols);
    // No temporary files are left behind.
    let leftovers: Vec<_> = std::fs::read_dir(&out)
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with(".tmp"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

#[test]
fn check_passes_for_every_preset_form_and_chunking() {
    for (name, c) in stapes_tests::all_presets() {
        let t = GeneratedTables::new(&c);
        for form in t.forms() {
            let f = if form == FilterbankForm::Sparse {
                "sparse"
            } else {
                "compact"
            };
            for chunk in ["0", "33"] {
                let outcome = stapes(&[
                    "check",
                    "--preset",
                    name,
                    "--form",
                    f,
                    "--chunk-samples",
                    chunk,
                ])
                .unwrap();
                assert_eq!(outcome, Outcome::Success, "{name} {f} chunk {chunk}");
            }
        }
    }
}

#[test]
fn check_fails_with_a_wrong_table() {
    // A blob whose weights are doubled for one band (CRC made consistent, so
    // it parses): the check must catch the 3 dB error and report failure.
    let dir = tempfile::tempdir().unwrap();
    let c = stapes_core::presets::TINY16K_10;
    let mut t = GeneratedTables::new(&c);
    let n = t.spans[4][1] as usize;
    let start: usize = t.spans[..4].iter().map(|s| s[1] as usize).sum();
    // Legal weights (within [0, 1]) that put band 4 −6 dB off.
    for w in &mut t.sparse_f32[start..start + n] {
        *w *= 0.5;
    }
    let path = dir.path().join("wrong.bin");
    std::fs::write(
        &path,
        stapes_sim::emit::blob(&t, stapes_sim::emit::BlobContents::ALL),
    )
    .unwrap();
    let outcome = stapes(&["check", "--table-blob", path.to_str().unwrap()]).unwrap();
    assert_eq!(outcome, Outcome::CheckFailed);
}

#[test]
fn features_writes_the_cores_frames_or_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let c = stapes_core::presets::SPEECH16K_40;
    let mut r = rng(30);
    let x = noise_i16(&mut r, 16000, 0.25);
    let wav = dir.path().join("in.wav");
    write_wav_i16(&wav, 16000, &x).unwrap();
    let npy = dir.path().join("out/feat.npy");
    let outcome = stapes(&[
        "features",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        npy.to_str().unwrap(),
        "--chunk-samples",
        "160",
    ])
    .unwrap();
    assert_eq!(outcome, Outcome::Success);
    let (rows, cols, data) = stapes_sim::npy::read_f32(&npy).unwrap();
    let t = GeneratedTables::new(&c);
    let want = run_float(
        &c,
        t.view_f32(FilterbankForm::Sparse),
        &Samples::I16(x),
        16000,
    )
    .unwrap();
    assert_eq!((rows, cols), (want.len(), 40));
    assert_eq!(data, want.concat());

    // A bad input leaves no output file.
    let bad = dir.path().join("bad.wav");
    std::fs::write(&bad, b"RIFF....nonsense").unwrap();
    let npy2 = dir.path().join("never.npy");
    assert!(
        stapes(&[
            "features",
            "--input",
            bad.to_str().unwrap(),
            "--output",
            npy2.to_str().unwrap()
        ])
        .is_err()
    );
    assert!(!npy2.exists());
    // A rate mismatch is an error, not a resample.
    let e = stapes(&[
        "features",
        "--preset",
        "dsr8k-23",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        npy2.to_str().unwrap(),
    ])
    .unwrap_err();
    assert!(format!("{e:#}").contains("8000 Hz"));
    assert!(!npy2.exists());
}

#[test]
fn tables_writes_and_reports() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().to_str().unwrap();
    assert_eq!(
        stapes(&["tables", "--preset", "tiny16k-10", "--out-dir", out]).unwrap(),
        Outcome::Success
    );
    assert!(dir.path().join("tiny16k-10.bin").is_file());
    assert_eq!(
        stapes(&["tables", "--bands", "20", "--out-dir", out]).unwrap(),
        Outcome::Success
    );
    assert!(dir.path().join("speech16k-40-custom.h").is_file());
    let e = stapes(&["tables", "--bands", "300", "--out-dir", out]).unwrap_err();
    assert!(format!("{e:#}").contains("`bands` = 300"));
}

#[test]
fn features_reports_floor_values_range_and_constant_frames() {
    use stapes_sim::commands::InputReport;
    let c = stapes_core::presets::SPEECH16K_40;
    // 1 s: 0.25 s of digital silence, 0.25 s of a constant, then noise that
    // touches full scale at three samples; float input adds two beyond ±1.
    let mut r = rng(31);
    let mut x = vec![0i16; 4000];
    x.extend(std::iter::repeat_n(1234, 4000));
    x.extend(noise_i16(&mut r, 8000, 0.25));
    x[9000] = i16::MAX;
    x[9001] = i16::MIN;
    x[9002] = i16::MAX;
    let t = GeneratedTables::new(&c);
    let samples = Samples::I16(x.clone());
    let frames = run_float(&c, t.view_f32(FilterbankForm::Sparse), &samples, 4096).unwrap();
    let values: Vec<f32> = frames.concat();
    let report = InputReport::of(&samples, &c, values.iter().copied());
    // Frames entirely inside the silent or the constant stretch.
    let (w, hop) = (c.window_samples as usize, c.hop_samples as usize);
    let inside = |lo: usize, hi: usize| {
        (0..frames.len())
            .filter(|&i| i * hop >= lo && i * hop + w <= hi)
            .count()
    };
    assert_eq!(report.constant_frames, inside(0, 4000) + inside(4000, 8000));
    assert_eq!(report.at_full_scale, 3);
    assert_eq!(report.out_of_range, 0);
    // Digital silence gives exactly the floor in every band.
    assert!(report.at_floor >= inside(0, 4000) * c.bands as usize);
    assert_eq!(
        report.at_floor,
        values.iter().filter(|&&v| v <= c.floor_db + 1e-3).count()
    );
    let mut f: Vec<f32> = x.iter().map(|&s| s as f32 / 32768.0).collect();
    f[100] = 1.5;
    f[200] = -1.25;
    let report = InputReport::of(&Samples::F32(f), &c, values.iter().copied());
    assert_eq!(report.out_of_range, 2);
    // Both beyond-range samples saturate to 16-bit full scale.
    assert_eq!(report.at_full_scale, 5);
    let lines = report.lines(&c).join("\n");
    assert!(lines.contains("2 samples beyond full scale"), "{lines}");
    assert!(lines.contains("frames are constant input"), "{lines}");
}

/// `stapes speed` measures every arithmetic over the demo clip and refuses a
/// measuring time that is not one.
#[test]
fn speed_measures_every_arithmetic() {
    let c = stapes_core::presets::TINY16K_10;
    let speeds = stapes_sim::speed::measure(&c, 0.05).unwrap();
    assert_eq!(speeds.len(), 3);
    for s in &speeds {
        assert!(s.frames > 0 && s.micros_per_frame() > 0.0 && s.times_real_time() > 0.0);
    }
    assert_eq!(
        stapes(&["speed", "--preset", "tiny16k-10", "--seconds", "0.05"]).unwrap(),
        Outcome::Success
    );
    let err = stapes(&["speed", "--seconds", "0"])
        .unwrap_err()
        .to_string();
    assert!(err.contains("--seconds"), "{err}");
}

/// Found (issue 9): `tables` wrote `.rs`, `.h` and `.bin` one after another,
/// so a failure on the `.h` left a new `.rs` beside an old `.bin` of another
/// fingerprint. Now the set is written all or nothing.
#[test]
fn tables_are_written_all_or_nothing() {
    use stapes_sim::emit::{BlobContents, write_all};
    let dir = tempfile::tempdir().unwrap();
    let old = GeneratedTables::new(&stapes_core::presets::TINY16K_10);
    write_all(&old, "set", dir.path(), "test", BlobContents::ALL).unwrap();
    let before: Vec<Vec<u8>> = ["set.rs", "set.bin"]
        .iter()
        .map(|f| std::fs::read(dir.path().join(f)).unwrap())
        .collect();
    // The header's place is taken by a folder: its move must fail.
    std::fs::remove_file(dir.path().join("set.h")).unwrap();
    std::fs::create_dir(dir.path().join("set.h")).unwrap();
    std::fs::write(dir.path().join("set.h").join("keep"), b"x").unwrap();
    let new = GeneratedTables::new(&stapes_core::presets::SPEECH16K_40);
    let e = write_all(&new, "set", dir.path(), "test", BlobContents::ALL).unwrap_err();
    assert!(format!("{e:#}").contains("set.h"), "{e:#}");
    let after: Vec<Vec<u8>> = ["set.rs", "set.bin"]
        .iter()
        .map(|f| std::fs::read(dir.path().join(f)).unwrap())
        .collect();
    assert!(before == after, "a failed set changed the other files");
    // Nothing else is left behind.
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names.len(), 3, "{names:?}");
}
