//! The stage configuration: its encoding, validation, configuration file,
//! the blob's stage sections (format version 3), and `check` and
//! `features` on the kws16k presets.

use stapes_core::blob::{BlobError, SectionKind, TableBlob, blob_crc};
use stapes_core::config::{
    FeatureConfig, MfccConfig, ModelWindowConfig, QuantiseConfig, RangeFloorConfig,
    STAGE_CONFIG_BYTES, StageConfig,
};
use stapes_core::pcen::PcenParams;
use stapes_core::presets::{KWS16K_MEL40, KWS16K_MFCC10, SPEECH16K_40};
use stapes_core::quantise::CodeRange;
use stapes_sim::emit::{BlobContents, blob};
use stapes_sim::generate::GeneratedTables;
use stapes_tests::AlignedBytes as Aligned;

fn every_stage() -> StageConfig {
    StageConfig {
        pcen: None,
        range_floor: Some(RangeFloorConfig {
            below_peak_db: 55.5,
        }),
        level_map: None,
        mfcc: Some(MfccConfig {
            coefficients: 13,
            lifter: Some(22),
            log_energy: false,
        }),
        normalise: true,
        quantise: Some(QuantiseConfig {
            scale: 0.75,
            zero_point: 130,
            codes: CodeRange::Uint8,
        }),
        model_window: Some(ModelWindowConfig {
            frames: 98,
            stride: 3,
        }),
    }
}

#[test]
fn the_encoding_round_trips_and_is_canonical() {
    let pcen = StageConfig {
        pcen: Some(PcenParams::DEFAULT),
        ..StageConfig::NONE
    };
    for st in [
        StageConfig::NONE,
        every_stage(),
        pcen,
        KWS16K_MEL40.stages,
        KWS16K_MFCC10.stages,
    ] {
        assert_eq!(StageConfig::from_bytes(&st.to_bytes()), Some(st));
    }
    // A value without its flag, an unknown flag, a reserved byte: refused.
    let mut b = StageConfig::NONE.to_bytes();
    b[4 + 6 * 4] = 13; // MFCC coefficients without the MFCC flag
    assert_eq!(StageConfig::from_bytes(&b), None);
    let mut b = every_stage().to_bytes();
    b[0] |= 0x80;
    assert_eq!(StageConfig::from_bytes(&b), None);
    let mut b = every_stage().to_bytes();
    b[STAGE_CONFIG_BYTES - 1] = 1;
    assert_eq!(StageConfig::from_bytes(&b), None);
}

#[test]
fn a_configuration_without_stages_keeps_its_fingerprint() {
    // The fingerprints the committed tables carried before stages existed.
    assert_eq!(SPEECH16K_40.fingerprint(), 0x7e15_9e0d);
    assert_ne!(KWS16K_MEL40.fingerprint(), {
        let mut plain = KWS16K_MEL40;
        plain.stages = StageConfig::NONE;
        plain.fingerprint()
    });
}

#[test]
fn impossible_stage_configurations_are_refused_with_the_field() {
    let with = |st: StageConfig| FeatureConfig {
        stages: st,
        ..SPEECH16K_40
    };
    let cases: [(StageConfig, &str); 6] = [
        (
            StageConfig {
                mfcc: Some(MfccConfig {
                    coefficients: 41,
                    lifter: None,
                    log_energy: false,
                }),
                ..StageConfig::NONE
            },
            "stages.mfcc.coefficients",
        ),
        (
            StageConfig {
                pcen: Some(PcenParams::DEFAULT),
                mfcc: Some(MfccConfig {
                    coefficients: 10,
                    lifter: None,
                    log_energy: false,
                }),
                ..StageConfig::NONE
            },
            "stages.mfcc",
        ),
        (
            StageConfig {
                quantise: Some(QuantiseConfig {
                    scale: 1.0,
                    zero_point: 200,
                    codes: CodeRange::Int8,
                }),
                ..StageConfig::NONE
            },
            "stages.quantise.zero_point",
        ),
        (
            StageConfig {
                quantise: Some(QuantiseConfig {
                    scale: f32::NAN,
                    zero_point: 0,
                    codes: CodeRange::Int8,
                }),
                ..StageConfig::NONE
            },
            "stages.quantise.scale",
        ),
        (
            StageConfig {
                model_window: Some(ModelWindowConfig {
                    frames: 49,
                    stride: 50,
                }),
                ..StageConfig::NONE
            },
            "stages.model_window.stride",
        ),
        (
            StageConfig {
                pcen: Some(PcenParams {
                    alpha: 1.5,
                    ..PcenParams::DEFAULT
                }),
                ..StageConfig::NONE
            },
            "stages.pcen.alpha",
        ),
    ];
    for (st, field) in cases {
        let err = with(st).validate().unwrap_err();
        assert_eq!(err.field(), field, "{err}");
        assert!(err.to_string().contains(field.rsplit('.').next().unwrap()));
    }
    assert!(with(every_stage()).validate().is_ok());
}

#[test]
fn version_three_blobs_carry_the_stage_tables_and_refuse_bad_ones() {
    for c in [KWS16K_MEL40, KWS16K_MFCC10] {
        let t = GeneratedTables::new(&c);
        let stored = Aligned::new(&blob(&t, BlobContents::ALL));
        let parsed = TableBlob::parse(stored.bytes()).unwrap();
        assert_eq!(parsed.config(), c);
        assert_eq!(parsed.stage_tables().unwrap(), t.stages.view());
    }
    // Normalisation statistics through the blob.
    let c = FeatureConfig {
        stages: every_stage(),
        ..SPEECH16K_40
    };
    let stats = (vec![1.5f32; 13], vec![2.0f32; 13]);
    let t = GeneratedTables::with_statistics(&c, Some(stats.clone())).unwrap();
    let bytes = blob(&t, BlobContents::ALL);
    let parsed_tables = {
        let stored = Aligned::new(&bytes);
        let p = TableBlob::parse(stored.bytes()).unwrap();
        let s = p.stage_tables().unwrap();
        (s.mean.to_vec(), s.deviation.to_vec(), s.lifter_q11.len())
    };
    assert_eq!(parsed_tables, (stats.0.clone(), stats.1.clone(), 13));
    // Without statistics the generator says what to give.
    let err = GeneratedTables::with_statistics(&c, None).unwrap_err();
    assert!(err.to_string().contains("[stages.normalise]"), "{err}");
    // A DCT section cut short: refused, naming the table.
    let mut b = bytes.clone();
    let sections = u16::from_le_bytes([b[10], b[11]]) as usize;
    for entry in 0..sections {
        let at = 32 + entry * 12;
        if u16::from_le_bytes([b[at], b[at + 1]]) == SectionKind::DctF32 as u16 {
            let len = u32::from_le_bytes(b[at + 8..at + 12].try_into().unwrap());
            b[at + 8..at + 12].copy_from_slice(&(len - 4).to_le_bytes());
        }
    }
    let crc = blob_crc(&b);
    b[28..32].copy_from_slice(&crc.to_le_bytes());
    let stored = Aligned::new(&b);
    let err = TableBlob::parse(stored.bytes())
        .unwrap()
        .stage_tables()
        .unwrap_err();
    assert!(matches!(err, BlobError::StageTables(_)), "{err:?}");
    assert!(err.to_string().contains("dct_f32"), "{err}");
}

fn stapes(args: &[&str]) -> anyhow::Result<stapes_sim::commands::Outcome> {
    use clap::Parser;
    let mut all = vec!["stapes"];
    all.extend_from_slice(args);
    stapes_sim::commands::run(stapes_sim::cli::Cli::try_parse_from(all)?)
}

#[test]
fn a_configuration_file_sets_every_stage_and_check_holds_each() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("mine.toml");
    let mean: Vec<String> = (0..13).map(|i| format!("{}.0", i)).collect();
    let dev: Vec<String> = (0..13).map(|i| format!("{}.5", i + 5)).collect();
    std::fs::write(
        &file,
        format!(
            "base_preset = \"kws16k-mel40\"\n[stages.range_floor]\nbelow_peak_db = 60.0\n\
             [stages.mfcc]\ncoefficients = 13\nlifter = 22\n\
             [stages.normalise]\nmean = [{}]\ndeviation = [{}]\n\
             [stages.quantise]\nscale = 0.1\nzero_point = -3\ncodes = \"int8\"\n",
            mean.join(", "),
            dev.join(", ")
        ),
    )
    .unwrap();
    // Every arithmetic: the fixed ones fold the normalisation into the quantiser.
    for arith in ["f32", "fixed32", "fixed16"] {
        let out = stapes(&[
            "check",
            "--config",
            file.to_str().unwrap(),
            "--arith",
            arith,
        ]);
        assert_eq!(
            out.unwrap(),
            stapes_sim::commands::Outcome::Success,
            "{arith}"
        );
    }
    let named = stapes_sim::config_source::ConfigArgs {
        config: Some(file.clone()),
        ..Default::default()
    }
    .resolve()
    .unwrap();
    let t = GeneratedTables::with_statistics(&named.config, named.statistics).unwrap();
    let names: Vec<&str> = stapes_sim::stage_check::tolerances(
        stapes_sim::check::Arith::F32,
        &named.config,
        &t.stages.view(),
    )
    .iter()
    .map(|(n, _)| *n)
    .collect();
    assert_eq!(names, ["range_floor", "mfcc", "quantise"]);
    // An unknown key under a stage is named.
    std::fs::write(
        &file,
        "base_preset = \"kws16k-mel40\"\n[stages.mfcc]\ncoeffs = 3\n",
    )
    .unwrap();
    let err = stapes(&["check", "--config", file.to_str().unwrap()]).unwrap_err();
    assert!(err.to_string().contains("coeffs"), "{err}");
}

#[test]
fn features_writes_the_model_windows_and_any_stage() {
    let dir = tempfile::tempdir().unwrap();
    let wav = dir.path().join("clip.wav");
    let x = stapes_tests::noise_i16(&mut stapes_tests::rng(8), 24_000, 0.2);
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: 16_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    let mut w = hound::WavWriter::create(&wav, spec).unwrap();
    for v in &x {
        w.write_sample(*v).unwrap();
    }
    w.finalize().unwrap();
    let npy = dir.path().join("windows.npy");
    let out = stapes(&[
        "features",
        "--preset",
        "kws16k-mfcc10",
        "--arith",
        "fixed16",
        "--raw",
        "--windows",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        npy.to_str().unwrap(),
    ]);
    assert_eq!(out.unwrap(), stapes_sim::commands::Outcome::Success);
    // 24 000 samples: (24000 - 640) / 320 + 1 = 74 frames, 74 - 49 + 1 = 26 windows.
    let bytes = std::fs::read(&npy).unwrap();
    let header = String::from_utf8_lossy(&bytes[..128]);
    assert!(header.contains("'descr': '|i1'"), "{header}");
    assert!(header.contains("(26, 49, 10"), "{header}");
    let out = stapes(&[
        "features",
        "--preset",
        "kws16k-mfcc10",
        "--stage",
        "cepstrum",
        "--input",
        wav.to_str().unwrap(),
        "--output",
        npy.to_str().unwrap(),
    ]);
    let err = out.unwrap_err().to_string();
    assert!(err.contains("range_floor, mfcc, quantise"), "{err}");
}

/// The fixed normalising quantiser equals exact rounding of
/// `(x − o)·M / 2^k + Z` (ties away from zero, clamped) computed in i128
/// from the same parts, on random values, means, deviations and scales, and
/// stays within one code of the f64 formula `(x − μ)/(σ·S) + Z`.
#[test]
fn the_fixed_normalising_quantiser_rounds_exactly() {
    use rand::Rng;
    use stapes_core::fixed::types::I8F8;
    use stapes_core::normalise::FixedNormalisedQuantise;
    use stapes_core::stage::FrameStage;
    let mut r = stapes_tests::rng(91);
    let mut worst_vs_f64 = 0i64;
    for _ in 0..200 {
        let n = 16;
        let mean: Vec<f32> = (0..n).map(|_| r.random_range(-60.0..20.0)).collect();
        let deviation: Vec<f32> = (0..n).map(|_| r.random_range(0.2..30.0)).collect();
        let scale: f32 = r.random_range(0.01..2.0);
        let zero: i32 = r.random_range(-128..=127);
        let (offsets, multipliers, k) =
            stapes_sim::model_input::normalised_quantiser_parts(&mean, &deviation, scale, 256.0)
                .unwrap();
        let mut stage = FixedNormalisedQuantise::<i8, 16>::new(
            &offsets,
            &multipliers,
            k,
            zero,
            CodeRange::Int8,
        )
        .unwrap();
        let mut x: Vec<I8F8> = (0..n)
            .map(|_| I8F8::from_bits(r.random_range(-32768..=32767i32) as i16))
            .collect();
        let values: Vec<i32> = x.iter().map(|v| v.to_bits() as i32).collect();
        let codes = stage.process(&mut x).to_vec();
        for i in 0..n {
            let p = (values[i] as i128 - offsets[i] as i128) * multipliers[i] as i128;
            let den = 1i128 << k;
            let mag = (2 * p.abs() + den) / (2 * den);
            let q = (if p < 0 { -mag } else { mag } + zero as i128).clamp(-128, 127);
            assert_eq!(codes[i] as i128, q, "value {i}");
            let ideal = ((values[i] as f64 / 256.0 - mean[i] as f64)
                / (deviation[i] as f64 * scale as f64))
                .round()
                + zero as f64;
            let ideal = ideal.clamp(-128.0, 127.0) as i64;
            worst_vs_f64 = worst_vs_f64.max((codes[i] as i64 - ideal).abs());
        }
    }
    assert!(
        worst_vs_f64 <= 1,
        "{worst_vs_f64} codes from the f64 formula"
    );
}

/// `stapes statistics` measures a folder of clips and writes a
/// `[stages.normalise]` table that a configuration file takes as it is; the
/// normalised configuration then holds every stage's tolerance in every
/// arithmetic.
#[test]
fn statistics_from_clips_feed_a_normalising_configuration() {
    let dir = tempfile::tempdir().unwrap();
    let clips = dir.path().join("clips");
    std::fs::create_dir(&clips).unwrap();
    let spec = hound::WavSpec {
        channels: 1,
        sample_rate: 16_000,
        bits_per_sample: 16,
        sample_format: hound::SampleFormat::Int,
    };
    for (i, amp) in [0.05, 0.3].into_iter().enumerate() {
        let mut w = hound::WavWriter::create(clips.join(format!("c{i}.wav")), spec).unwrap();
        for v in stapes_tests::noise_i16(&mut stapes_tests::rng(i as u64 + 3), 16_000, amp) {
            w.write_sample(v).unwrap();
        }
        w.finalize().unwrap();
    }
    let stats = dir.path().join("stats.toml");
    let out = stapes(&[
        "statistics",
        "--corpus",
        clips.to_str().unwrap(),
        "--preset",
        "kws16k-mfcc10",
        "--output",
        stats.to_str().unwrap(),
    ]);
    assert_eq!(out.unwrap(), stapes_sim::commands::Outcome::Success);
    let table = std::fs::read_to_string(&stats).unwrap();
    assert!(table.contains("[stages.normalise]") && table.contains("deviation = ["));
    let config = dir.path().join("normalised.toml");
    std::fs::write(
        &config,
        format!("base_preset = \"kws16k-mfcc10\"\n{table}[stages.quantise]\nscale = 0.03\nzero_point = 0\n"),
    )
    .unwrap();
    let named = stapes_sim::config_source::ConfigArgs {
        config: Some(config.clone()),
        ..Default::default()
    }
    .resolve()
    .unwrap();
    let (mean, deviation) = named.statistics.clone().unwrap();
    assert_eq!((mean.len(), deviation.len()), (10, 10));
    assert!(deviation.iter().all(|&d| d > 0.0));
    for arith in ["f32", "fixed32", "fixed16"] {
        let out = stapes(&[
            "check",
            "--config",
            config.to_str().unwrap(),
            "--arith",
            arith,
        ]);
        assert_eq!(
            out.unwrap(),
            stapes_sim::commands::Outcome::Success,
            "{arith}"
        );
    }
}

/// The log-energy in place of c0 is the windowed frame's energy `Σ (x·w)²`
/// by Parseval's theorem (common practice) for a signal with nothing below
/// the filterbank: the f32 and fixed cores' c0 against that sum, computed
/// here in the time domain from the samples and the periodic Hann window
/// `0.5 − 0.5·cos(2πn/L)`.
#[test]
fn log_energy_in_place_of_c0_is_the_frames_energy() {
    use stapes_core::config::LogKind;
    let mut c = stapes_core::presets::KWS16K_MFCC10;
    c.stages.mfcc = Some(MfccConfig {
        coefficients: 10,
        lifter: None,
        log_energy: true,
    });
    c.stages.quantise = None;
    c.stages.model_window = None;
    c.validate().unwrap();
    assert_eq!(c.stage_inputs(), 41);
    assert_eq!(c.log, LogKind::Decibel);
    let x: Vec<i16> = (0..8000)
        .map(|i| {
            let t = i as f64 / 16_000.0;
            (6000.0 * (2.0 * std::f64::consts::PI * 1000.0 * t).sin()
                + 2000.0 * (2.0 * std::f64::consts::PI * 3100.0 * t).sin())
            .round() as i16
        })
        .collect();
    let (w, hop) = (c.window_samples as usize, c.hop_samples as usize);
    let want: Vec<f64> = (0..=(x.len() - w) / hop)
        .map(|f| {
            let e: f64 = (0..w)
                .map(|n| {
                    let win = 0.5 - 0.5 * (2.0 * std::f64::consts::PI * n as f64 / w as f64).cos();
                    let v = x[f * hop + n] as f64 / 32768.0 * win;
                    v * v
                })
                .sum();
            10.0 * e.log10()
        })
        .collect();
    let t = GeneratedTables::new(&c);
    for arith in stapes_sim::check::Arith::ALL {
        let core = match arith {
            stapes_sim::check::Arith::F32 => stapes_sim::check::CoreTables::Float(
                t.view_f32(stapes_core::FilterbankForm::Sparse),
            ),
            _ => stapes_sim::check::CoreTables::Fixed(
                t.fixed_tables(stapes_core::FilterbankForm::Sparse).unwrap(),
            ),
        };
        let run = stapes_sim::stage_check::run_arith(
            arith,
            &c,
            core,
            &t.stages.view(),
            &stapes_sim::run::Samples::I16(x.clone()),
            0,
        )
        .unwrap();
        let c0: Vec<f64> = run
            .stage("mfcc")
            .unwrap()
            .values
            .iter()
            .map(|f| f[0])
            .collect();
        assert_eq!(c0.len(), want.len());
        let worst = c0
            .iter()
            .zip(&want)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        // The level tolerance of each arithmetic at 60 dB of range.
        let tolerance = match arith {
            stapes_sim::check::Arith::F32 => 0.01,
            stapes_sim::check::Arith::Fixed32 => 0.05,
            stapes_sim::check::Arith::Fixed16 => 1.0,
        };
        println!(
            "{}: c0 against Σ(x·w)² in dB: worst {worst:.2e}",
            arith.name()
        );
        assert!(worst <= tolerance, "{}: {worst}", arith.name());
    }
    // Log-energy needs a power spectrum.
    let mut m = c;
    m.spectrum = stapes_core::config::SpectrumKind::Magnitude;
    assert_eq!(m.validate().unwrap_err().field(), "stages.mfcc.log_energy");
    // Its flag travels in the stage bytes.
    assert_eq!(
        StageConfig::from_bytes(&c.stages.to_bytes()),
        Some(c.stages)
    );
}
