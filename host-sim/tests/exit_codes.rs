//! The `stapes` binary's exit status: 0 on success, 1 when a check exceeds
//! its tolerance, 2 for unusable input, with the reason on stderr.

use std::process::Command;

use stapes_sim::emit::{BlobContents, blob};
use stapes_sim::generate::GeneratedTables;

fn stapes(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_stapes"))
        .args(args)
        .output()
        .expect("run stapes");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into(),
        String::from_utf8_lossy(&out.stderr).into(),
    )
}

#[test]
fn a_passing_check_exits_zero() {
    let (code, out, _) = stapes(&["check", "--preset", "tiny16k-10"]);
    assert_eq!(code, 0, "{out}");
    assert!(out.contains("PASS"));
    // The input's sample counts, as `features` reports them.
    assert!(
        out.contains("range:  0 samples beyond full scale and 0 non-finite"),
        "{out}"
    );
}

#[test]
fn a_failing_check_exits_one() {
    let dir = tempfile::tempdir().unwrap();
    let mut t = GeneratedTables::new(&stapes_core::presets::TINY16K_10);
    // Legal values (within [0, 1]) that change the first bands by −1.5 dB.
    for w in &mut t.sparse_f32[..20] {
        *w *= 0.7;
    }
    let path = dir.path().join("off.bin");
    std::fs::write(&path, blob(&t, BlobContents::ALL)).unwrap();
    let (code, out, _) = stapes(&["check", "--table-blob", path.to_str().unwrap()]);
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("FAIL"));
}

#[test]
fn unusable_input_exits_two_with_the_reason() {
    let dir = tempfile::tempdir().unwrap();
    let (code, _, err) = stapes(&["check", "--preset", "nope"]);
    assert_eq!(code, 2);
    assert!(err.contains("unknown preset `nope`"), "{err}");
    let bad = dir.path().join("corrupt.bin");
    std::fs::write(&bad, b"STAPESTB but nothing else of a blob").unwrap();
    let (code, _, err) = stapes(&["check", "--table-blob", bad.to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(err.contains("table blob"), "{err}");
    let (code, _, err) = stapes(&[
        "features",
        "--input",
        "/nonexistent.wav",
        "--output",
        dir.path().join("x.npy").to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("/nonexistent.wav"), "{err}");
    assert!(!dir.path().join("x.npy").exists());
}

/// Found (issue 9): overrides beside `--table-blob` were accepted and ignored;
/// negative numbers needed `=`.
#[test]
fn overrides_beside_a_table_blob_are_refused_and_negative_values_parse() {
    let dir = tempfile::tempdir().unwrap();
    let t = GeneratedTables::new(&stapes_core::presets::TINY16K_10);
    let path = dir.path().join("tiny.bin");
    std::fs::write(&path, blob(&t, BlobContents::ALL)).unwrap();
    let (code, _, err) = stapes(&[
        "check",
        "--table-blob",
        path.to_str().unwrap(),
        "--bands",
        "10",
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("--bands would be ignored"), "{err}");
    let (code, _, err) = stapes(&["check", "--preset", "tiny16k-10", "--low-edge-hz", "-5"]);
    assert_eq!(code, 2, "{err}");
    assert!(
        err.contains("low_edge_hz") && !err.contains("unexpected argument"),
        "{err}"
    );
}

/// Found (issue 9): `check` on an input shorter than one window reported
/// "over 0 values … PASS" and exited 0.
#[test]
fn an_input_shorter_than_one_window_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("short.wav");
    stapes_sim::wav::write_wav_i16(&wav, 16000, &[100i16; 300]).unwrap();
    let (code, out, err) = stapes(&[
        "check",
        "--preset",
        "speech16k-40",
        "--input",
        wav.to_str().unwrap(),
    ]);
    assert_eq!(code, 2, "{out}");
    assert!(
        err.contains("short.wav holds 300 samples, fewer than one window (512"),
        "{err}"
    );
    let npy = dir.path().join("f.npy");
    let (code, _, err) = stapes(&[
        "features",
        "--preset",
        "speech16k-40",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        npy.to_str().unwrap(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("fewer than one window"), "{err}");
    assert!(!npy.exists());
}
