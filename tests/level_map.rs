//! The level map (`stages.level_map`): its table, its integer reading of
//! floats, its encoding in the blob, and every arithmetic against the f64
//! formula `clamp(g·k·ln(max(E, floor) + a) + b, lower, upper)`.

use stapes_core::blob::TableBlob;
use stapes_core::config::{FeatureConfig, LogKind, StageConfig};
use stapes_core::fixed_tables::f32_to_fixed;
use stapes_core::level_map::{LOG2_ONE_PLUS_TABLE, log2_one_plus_q16};
use stapes_core::presets::{KWS16K_MFCC10, SPEECH16K_40};
use stapes_core::stage_config::LevelMapConfig;
use stapes_sim::check::{Arith, CoreTables};
use stapes_sim::emit::{BlobContents, blob};
use stapes_sim::generate::GeneratedTables;
use stapes_tests::AlignedBytes as Aligned;

fn with_map(base: FeatureConfig, log: LogKind, map: LevelMapConfig) -> FeatureConfig {
    let mut c = FeatureConfig { log, ..base };
    c.stages.level_map = Some(map);
    c
}

#[test]
fn the_log_add_table_is_the_formula_rounded() {
    // log2(1 + 2^−t): the log-add of logarithmic number systems (common practice).
    for (j, &v) in LOG2_ONE_PLUS_TABLE.iter().enumerate() {
        let want = ((1.0 + 2f64.powf(-(j as f64) / 8.0)).log2() * 65536.0).round();
        assert_eq!(v as f64, want, "entry {j}");
    }
    // Between entries, linear interpolation stays within h²/8 · max f'' =
    // (1/64)/8 · ln2/4 ≈ 3.4e-4 octaves plus rounding
    // (1e-3 dB; largest near t = 0, where the curve bends most).
    for t in (0..(24 << 16)).step_by(977) {
        let want = (1.0 + 2f64.powf(-(t as f64) / 65536.0)).log2();
        let got = log2_one_plus_q16(t as u32) as f64 / 65536.0;
        assert!((got - want).abs() < 3.5e-4, "t {t}: {got} vs {want}");
    }
}

#[test]
fn floats_are_read_from_their_bits_with_rounding_half_away() {
    let mut rng = stapes_tests::rng(31);
    use rand::Rng;
    for _ in 0..20_000 {
        let v: f32 = rng.random_range(-1e4f32..1e4) * 10f32.powi(rng.random_range(-6..2));
        for frac in [0u32, 8, 16] {
            let want = (v as f64 * 2f64.powi(frac as i32)).round(); // f64::round: ties away
            assert_eq!(f32_to_fixed(v, frac), Some(want as i64), "{v} {frac}");
        }
    }
    assert_eq!(f32_to_fixed(f32::NAN, 8), None);
    assert_eq!(f32_to_fixed(f32::INFINITY, 8), None);
    assert_eq!(f32_to_fixed(0.5f32, 0), Some(1));
    assert_eq!(f32_to_fixed(-0.5f32, 0), Some(-1));
}

#[test]
fn the_encoding_round_trips_and_keeps_old_fingerprints() {
    let map = LevelMapConfig {
        added_energy: 1e-6,
        gain: 0.1,
        offset: 90.0,
        lower: Some(-8.0),
        upper: None,
    };
    assert_eq!(LevelMapConfig::from_bytes(&map.to_bytes()), Some(map));
    let mut b = map.to_bytes();
    b[0] = 4; // an unknown bound flag
    assert_eq!(LevelMapConfig::from_bytes(&b), None);
    let mut b = map.to_bytes();
    b[4 * 5 + 1] = 1; // an upper value without its flag
    assert_eq!(LevelMapConfig::from_bytes(&b), None);
    let st = StageConfig {
        level_map: Some(map),
        ..KWS16K_MFCC10.stages
    };
    let (bytes, len) = st.to_section();
    assert_eq!(StageConfig::from_section(&bytes[..len]), Some(st));
    // Without its level-map bytes, the flag makes the section wrong.
    assert_eq!(StageConfig::from_section(&bytes[..64]), None);
    // Configurations without a map keep the fingerprint they had.
    let (plain, n) = KWS16K_MFCC10.stages.to_section();
    assert_eq!(&plain[..n], &KWS16K_MFCC10.stages.to_bytes()[..]);
    // A blob carries the map and its fingerprint.
    let c = with_map(SPEECH16K_40, LogKind::Decibel, map);
    c.validate().unwrap();
    let t = GeneratedTables::new(&c);
    let bytes = Aligned::new(&blob(&t, BlobContents::ALL));
    let parsed = TableBlob::parse(bytes.bytes()).unwrap();
    assert_eq!(parsed.config().stages.level_map, Some(map));
    assert_ne!(c.fingerprint(), SPEECH16K_40.fingerprint());
}

#[test]
fn validation_names_the_field() {
    let bad = |m: LevelMapConfig| {
        with_map(SPEECH16K_40, LogKind::Decibel, m)
            .validate()
            .unwrap_err()
            .field()
    };
    let id = LevelMapConfig::IDENTITY;
    assert_eq!(
        bad(LevelMapConfig { gain: 0.0, ..id }),
        "stages.level_map.gain"
    );
    assert_eq!(
        bad(LevelMapConfig {
            added_energy: -1.0,
            ..id
        }),
        "stages.level_map.added_energy"
    );
    assert_eq!(
        bad(LevelMapConfig {
            offset: f32::NAN,
            ..id
        }),
        "stages.level_map.offset"
    );
    assert_eq!(
        bad(LevelMapConfig {
            lower: Some(3.0),
            upper: Some(2.0),
            ..id
        }),
        "stages.level_map.lower"
    );
    let mut pcen = with_map(SPEECH16K_40, LogKind::Decibel, id);
    pcen.stages.pcen = Some(stapes_core::PcenParams::DEFAULT);
    assert_eq!(pcen.validate().unwrap_err().field(), "stages.level_map");
}

/// Every arithmetic's level map against the f64 formula on speech-like noise,
/// within the stage's stated tolerance (`stage_check::tolerances`).
#[test]
fn every_arithmetic_holds_its_tolerance() {
    let maps = [
        // ln(E + 1e-6): a common offset log.
        (
            LogKind::Natural,
            LevelMapConfig {
                added_energy: 1e-6,
                ..LevelMapConfig::IDENTITY
            },
        ),
        // dB of raw 16-bit samples against a 1e-3 reference, clipped to [−20, 100].
        (
            LogKind::Decibel,
            LevelMapConfig {
                offset: 90.309 + 30.0 - 100.0,
                lower: Some(-20.0),
                upper: Some(100.0),
                ..LevelMapConfig::IDENTITY
            },
        ),
        // log10(E + 1e-4), scaled by 2.
        (
            LogKind::Decibel,
            LevelMapConfig {
                added_energy: 1e-4,
                gain: 0.2,
                ..LevelMapConfig::IDENTITY
            },
        ),
    ];
    let mut rng = stapes_tests::rng(5);
    let clip: Vec<i16> = stapes_tests::noise_i16(&mut rng, 16_000, 0.05)
        .iter()
        .enumerate()
        .map(|(n, &v)| (v as f32 * (0.02 + (n as f32 / 3000.0).sin().abs())) as i16)
        .collect();
    for (log, map) in maps {
        let c = with_map(SPEECH16K_40, log, map);
        c.validate().unwrap();
        let t = GeneratedTables::new(&c);
        for arith in Arith::ALL {
            let core = match arith {
                Arith::F32 => CoreTables::Float(t.view_f32(stapes_core::FilterbankForm::Sparse)),
                _ => {
                    CoreTables::Fixed(t.fixed_tables(stapes_core::FilterbankForm::Sparse).unwrap())
                }
            };
            let (cmp, _) = stapes_sim::stage_check::check_stages(
                arith,
                &c,
                core,
                &t.stages.view(),
                &stapes_sim::run::Samples::I16(clip.clone()),
                0,
            )
            .unwrap();
            let m = cmp.iter().find(|s| s.name == "level_map").unwrap();
            println!(
                "level map {log:?} {map:?}, {}: max {:.2e} (tolerance {:.2e})",
                arith.name(),
                m.max_error,
                m.tolerance
            );
            assert!(m.frames > 90, "{arith:?}");
            assert!(
                m.passed(),
                "{log:?} {map:?} {arith:?}: max {} > {}",
                m.max_error,
                m.tolerance
            );
        }
    }
}

/// A natural-log floor beyond ±256 dB (the floor `stapes match` writes when
/// the user's pipeline has none) passes the fixed tables' check: the check
/// once refused it for want of integer range.
#[test]
fn a_natural_log_floor_far_below_passes_the_fixed_check() {
    let c = FeatureConfig {
        log: LogKind::Natural,
        floor_db: -300.0,
        ..SPEECH16K_40
    };
    c.validate().unwrap();
    let t = GeneratedTables::new(&c);
    let fixed = t.fixed_tables(stapes_core::FilterbankForm::Sparse).unwrap();
    fixed.check(&c).unwrap();
}
