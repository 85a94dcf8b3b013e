//! `stapes features` streams a recording from disk to disk a block at a
//! time: the result must equal the whole clip run at once, across block
//! boundaries, for 16-bit and float input, mono and a stereo mix, and a bad
//! sample deep in the file is still named with its position.

use std::path::Path;
use std::process::Command;

use stapes_sim::check::{Arith, CoreTables};
use stapes_sim::clip_runner::{ClipRunner, SampleSlice};
use stapes_sim::generate::GeneratedTables;
use stapes_sim::run::Samples;

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

fn signal(n: usize, seed: u32) -> Vec<f64> {
    let mut state = seed.wrapping_mul(2654435761).max(1);
    (0..n)
        .map(|i| {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            let noise = (state as f64 / u32::MAX as f64 - 0.5) * 0.05;
            let t = i as f64 / 16000.0;
            0.3 * (2.0 * std::f64::consts::PI * (300.0 + 50.0 * t) * t).sin() + noise
        })
        .collect()
}

/// The `.npy` body (values after the header).
fn body(path: &Path) -> Vec<u8> {
    let b = std::fs::read(path).unwrap();
    let len = u16::from_le_bytes([b[8], b[9]]) as usize;
    b[10 + len..].to_vec()
}

fn whole_clip(samples: &Samples, arith: Arith, stage: Option<&str>, raw: bool) -> Vec<u8> {
    let config = stapes_core::presets::by_name("kws16k-mfcc10").unwrap();
    let t = GeneratedTables::new(&config);
    let tables = match arith {
        Arith::F32 => CoreTables::Float(t.view_f32(stapes_core::table::FilterbankForm::Sparse)),
        _ => CoreTables::Fixed(
            t.fixed_tables(stapes_core::table::FilterbankForm::Sparse)
                .unwrap(),
        ),
    };
    let stage_tables = t.stages.view();
    let mut r = ClipRunner::new(&config, arith, tables, &stage_tables, stage, raw).unwrap();
    let mut out = r.kind().empty();
    r.run_clip(SampleSlice::from(samples), &mut out);
    out.as_bytes().to_vec()
}

#[test]
fn a_streamed_recording_equals_the_whole_clip_run_at_once() {
    let dir = tempfile::tempdir().unwrap();
    // 200,000 samples: several read blocks of 65,536, not a multiple of one.
    let x: Vec<i16> = signal(200_000, 3)
        .iter()
        .map(|v| (v * 32768.0).round() as i16)
        .collect();
    let wav = dir.path().join("long.wav");
    stapes_sim::wav::write_wav_i16(&wav, 16000, &x).unwrap();
    for (arith, name, stage, raw) in [
        (Arith::Fixed16, "fixed16", None, true),
        (Arith::Fixed32, "fixed32", Some("mfcc"), false),
        (Arith::F32, "f32", Some("log"), false),
    ] {
        let out = dir.path().join(format!("{name}.npy"));
        let mut args = vec![
            "features",
            "--input",
            wav.to_str().unwrap(),
            "--output",
            out.to_str().unwrap(),
            "--preset",
            "kws16k-mfcc10",
            "--arith",
            name,
            "--chunk-samples",
            "333",
        ];
        if raw {
            args.push("--raw");
        }
        if let Some(s) = stage {
            args.extend(["--stage", s]);
        }
        let (code, o, e) = stapes(&args);
        assert_eq!(code, 0, "{o}{e}");
        assert_eq!(
            body(&out),
            whole_clip(&Samples::I16(x.clone()), arith, stage, raw),
            "{name}"
        );
    }
}

fn write_float_stereo(path: &Path, left: &[f32], right: &[f32]) {
    let spec = hound::WavSpec {
        channels: 2,
        sample_rate: 16000,
        bits_per_sample: 32,
        sample_format: hound::SampleFormat::Float,
    };
    let mut w = hound::WavWriter::create(path, spec).unwrap();
    for (l, r) in left.iter().zip(right) {
        w.write_sample(*l).unwrap();
        w.write_sample(*r).unwrap();
    }
    w.finalize().unwrap();
}

#[test]
fn a_streamed_float_stereo_mix_equals_the_whole_clip_and_bad_samples_are_named() {
    let dir = tempfile::tempdir().unwrap();
    let l: Vec<f32> = signal(150_000, 5).iter().map(|&v| v as f32).collect();
    let r: Vec<f32> = signal(150_000, 9).iter().map(|&v| v as f32).collect();
    let wav = dir.path().join("stereo.wav");
    write_float_stereo(&wav, &l, &r);
    let out = dir.path().join("mix.npy");
    let (code, o, e) = stapes(&[
        "features",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        out.to_str().unwrap(),
        "--preset",
        "kws16k-mfcc10",
        "--channel",
        "mix",
    ]);
    assert_eq!(code, 0, "{o}{e}");
    let mix: Vec<f32> = l.iter().zip(&r).map(|(a, b)| a * 0.5 + b * 0.5).collect();
    assert_eq!(
        body(&out),
        whole_clip(&Samples::F32(mix), Arith::F32, None, false)
    );

    // A sample beyond full scale in the third block is refused by position.
    let mut bad = l.clone();
    bad[140_001] = 1.5;
    let wav = dir.path().join("bad.wav");
    write_float_stereo(&wav, &bad, &r);
    let (code, _, err) = stapes(&[
        "features",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        dir.path().join("bad.npy").to_str().unwrap(),
        "--preset",
        "kws16k-mfcc10",
        "--channel",
        "left",
    ]);
    assert_eq!(code, 2);
    assert!(
        err.contains("float sample of 1.5 at sample 140001 (channel-interleaved index 280002)"),
        "{err}"
    );
    assert!(
        !dir.path().join("bad.npy").exists(),
        "no half-written output"
    );
}
