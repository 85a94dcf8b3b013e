//! `stapes demo`: the whole job on the project's own demo clip.

use std::path::PathBuf;

use anyhow::Result;
use stapes_core::presets;
use stapes_core::table::FilterbankForm;

use crate::check::{Arith, check, check_f32, report};
use crate::cli::{DemoArgs, FormChoice, InputArgs};
use crate::commands::{LoadedTables, Outcome, band_centres};
use crate::config_source::ConfigArgs;
use crate::emit::{BlobContents, size_report, write_all};
use crate::generate::GeneratedTables;
use crate::plots::{self, HeatMap};
use crate::synth::{DEMO_SEED, demo_clip};
use crate::wav::{read_wav_for, write_wav_i16};

/// Synthesises the demo clip, writes its tables, runs and checks the core in
/// every arithmetic, writes the features and draws the figures.
pub fn demo(a: &DemoArgs) -> Result<Outcome> {
    let name = presets::DEFAULT_NAME;
    let config = presets::SPEECH16K_40;
    let dir = &a.out_dir;
    let mut wrote: Vec<(PathBuf, &str)> = Vec::new();

    let clip = demo_clip(config.sample_rate_hz, DEMO_SEED);
    let wav = dir.join("demo-clip.wav");
    write_wav_i16(&wav, clip.sample_rate_hz, &clip.samples)?;
    wrote.push((
        wav.clone(),
        "the synthesised clip: valve commands over pump noise and mains hum",
    ));
    crate::say!(
        "demo: irrigation valve node, {:.1} s clip at {} Hz; words:",
        clip.samples.len() as f64 / clip.sample_rate_hz as f64,
        clip.sample_rate_hz
    );
    for w in &clip.words {
        crate::say!(
            "  {:<7} {:.2}-{:.2} s, peak {:.0} dBFS",
            w.word,
            w.start_s,
            w.end_s,
            w.peak_dbfs
        );
    }

    let table_dir = dir.join("tables");
    let generated = GeneratedTables::new(&config);
    let written = write_all(
        &generated,
        name,
        &table_dir,
        &format!("stapes tables --preset {name}"),
        BlobContents::ALL,
    )?;
    crate::say_text!(size_report(&generated, name, Some(written.blob_bytes)));
    wrote.push((written.rust.clone(), "tables as Rust source"));
    wrote.push((written.header.clone(), "tables as a C header"));
    wrote.push((
        written.blob.clone(),
        "tables as a checked blob (the core below reads this one)",
    ));

    // The core reads the blob just written, and the WAV just written, as a user would.
    let inputs = InputArgs {
        channel: None,
        chunk_samples: 97,
        form: FormChoice::Sparse,
        table_blob: Some(written.blob.clone()),
    };
    let loaded = LoadedTables::load(&ConfigArgs::default(), &inputs)?;
    let samples = read_wav_for(&wav, None, config.sample_rate_hz)?;
    let view = loaded.view_f32(FilterbankForm::Sparse)?;
    crate::say!(
        "check: core (f32, sparse table from the blob, fed 97 samples per call) against the f64 reference"
    );
    let run = check_f32(&config, view, &samples, inputs.chunk_samples)?;
    let centres = band_centres(&config);
    crate::say_text!(report(&run, &centres, false));
    // The fixed-point cores, from the same blob, for boards without an FPU.
    let mut all_passed = run.passed();
    for arith in [Arith::Fixed32, Arith::Fixed16] {
        let fixed = check(
            arith,
            &config,
            loaded.core_tables(arith, FilterbankForm::Sparse)?,
            &samples,
            inputs.chunk_samples,
        )?;
        for (t, c) in &fixed.comparisons {
            let pass = c.overall.max <= t.max_error_db;
            crate::say!(
                "{} within {} dB: max {:.2e} dB, mean {:.2e} dB; tolerance max <= {} dB: {}",
                arith.name(),
                t.range_db,
                c.overall.max,
                c.overall.mean,
                t.max_error_db,
                if pass { "PASS" } else { "FAIL" }
            );
        }
        all_passed &= fixed.passed();
    }

    let npy = dir.join("features.npy");
    crate::npy::write_f32(
        &npy,
        run.core.len(),
        config.bands as usize,
        run.core.iter().flatten().copied(),
    )?;
    wrote.push((
        npy,
        "the core's log-mel frames, float32 [frames x bands], dB",
    ));

    // The same frames through the f32 MFCC stage (13 coefficients, no
    // lifter), for the numpy/scipy cross-check of the DCT.
    let dct = crate::dct::DctTables::new(config.bands as usize, 13, None);
    let mut mfcc =
        stapes_core::FloatMfcc::<13>::new(dct.view_f32()).map_err(|e| anyhow::anyhow!("{e}"))?;
    let mut coefficients = Vec::with_capacity(run.core.len() * 13);
    for frame in &run.core {
        let mut values = frame.clone();
        coefficients.extend_from_slice(stapes_core::FrameStage::process(&mut mfcc, &mut values));
    }
    let mfcc_npy = dir.join("mfcc.npy");
    crate::npy::write_f32(&mfcc_npy, run.core.len(), 13, coefficients.into_iter())?;
    wrote.push((
        mfcc_npy,
        "those frames' first 13 MFCC (orthonormal DCT-II, no lifter), float32 [frames x 13]",
    ));

    let hop_s = config.hop_samples as f64 / config.sample_rate_hz as f64;
    let core_f64: Vec<Vec<f64>> = run
        .core
        .iter()
        .map(|r| r.iter().map(|&v| v as f64).collect())
        .collect();
    // The colour scale spans the data (both maps share it).
    let finite = || {
        run.reference
            .iter()
            .chain(&core_f64)
            .flatten()
            .copied()
            .filter(|v| v.is_finite())
    };
    let top = finite().fold(f64::NEG_INFINITY, f64::max).ceil();
    let bottom = finite().fold(f64::INFINITY, f64::min).floor();
    let range = (bottom, top);
    let png = dir.join("log-mel-core.png");
    plots::heat_map(
        &png,
        &HeatMap {
            title: "log-mel, stapes core (f32): dB = 10·log10(band energy), samples at ±1 full scale",
            values: &core_f64,
            hop_s,
            centres_hz: &centres,
            range,
            unit: "dB",
            grey_means: None,
        },
    )?;
    wrote.push((png, "core log-mel spectrogram"));
    let png = dir.join("log-mel-reference.png");
    plots::heat_map(
        &png,
        &HeatMap {
            title: "log-mel, f64 reference: dB = 10·log10(band energy), samples at ±1 full scale",
            values: &run.reference,
            hop_s,
            centres_hz: &centres,
            range,
            unit: "dB",
            grey_means: None,
        },
    )?;
    wrote.push((png, "reference log-mel spectrogram"));
    let emax = run.primary().overall.max.max(1e-9);
    let png = dir.join("log-mel-error.png");
    plots::heat_map(
        &png,
        &HeatMap {
            title: "|core - reference| in dB",
            values: &run.primary().error_map,
            hop_s,
            centres_hz: &centres,
            range: (0.0, emax),
            unit: "dB",
            grey_means: Some("not compared:\nover 60 dB below\nthe frame's peak"),
        },
    )?;
    wrote.push((png, "error between them"));
    let bin_hz = config.sample_rate_hz as f64 / config.fft_points as f64;
    let mut offset = 0;
    let triangles: Vec<Vec<(f64, f64)>> = generated
        .spans
        .iter()
        .map(|&[first, count]| {
            let (first, count) = (first as usize, count as usize);
            let mut pts = vec![((first as f64 - 1.0).max(0.0) * bin_hz, 0.0)];
            pts.extend((0..count).map(|j| {
                (
                    (first + j) as f64 * bin_hz,
                    generated.sparse_f32[offset + j] as f64,
                )
            }));
            pts.push(((first + count) as f64 * bin_hz, 0.0));
            offset += count;
            pts
        })
        .collect();
    let png = dir.join("filterbank.png");
    plots::filterbank(
        &png,
        "speech16k-40 filterbank (f32 table weights at each FFT bin)",
        &triangles,
        config.sample_rate_hz as f64 / 2.0,
        false,
    )?;
    wrote.push((png, "the filterbank's triangles"));
    let png = dir.join("filterbank-mel-axis.png");
    plots::filterbank(
        &png,
        "speech16k-40 filterbank on a mel-scaled axis (equal spacing in mel)",
        &triangles,
        config.sample_rate_hz as f64 / 2.0,
        true,
    )?;
    wrote.push((png, "the same triangles against mel"));

    crate::say!("wrote:");
    for (path, what) in &wrote {
        crate::say!("  {:<40} {what}", path.display());
    }
    Ok(if all_passed {
        Outcome::Success
    } else {
        Outcome::CheckFailed
    })
}
