//! Every invalid configuration is rejected with an error naming the field,
//! the value, the allowed range and a fix.

use stapes_core::config::{BandGain, ConfigError, FeatureConfig, TrianglePlacement};
use stapes_core::presets::{DSR8K_23, SPEECH16K_40};
use stapes_sim::config_source::ConfigArgs;

fn rejected(c: FeatureConfig) -> (ConfigError, String) {
    let e = c.validate().expect_err("configuration should be rejected");
    let text = e.to_string();
    (e, text)
}

fn assert_mentions(text: &str, parts: &[&str]) {
    for p in parts {
        assert!(text.contains(p), "message {text:?} lacks {p:?}");
    }
}

#[test]
fn presets_are_valid() {
    for (name, c) in stapes_tests::all_presets() {
        c.validate().unwrap_or_else(|e| panic!("{name}: {e}"));
        // The stages travel in their own bytes (the blob's stage section).
        let back = FeatureConfig::from_bytes(&c.to_bytes()).map(|b| FeatureConfig {
            stages: stapes_core::config::StageConfig::from_bytes(&c.stages.to_bytes())
                .expect("stage bytes"),
            ..b
        });
        assert_eq!(back, Some(c), "{name}: bytes round trip");
    }
}

#[test]
fn band_edge_above_nyquist() {
    let (e, t) = rejected(FeatureConfig {
        high_edge_hz: 8500.0,
        ..SPEECH16K_40
    });
    assert_eq!(e.field(), "high_edge_hz");
    assert_mentions(&t, &["high_edge_hz", "8500", "8000", "lower it"]);
}

#[test]
fn fft_smaller_than_window() {
    let (e, t) = rejected(FeatureConfig {
        fft_points: 256,
        ..SPEECH16K_40
    });
    assert_eq!(e.field(), "fft_points");
    assert_mentions(
        &t,
        &["fft_points", "256", "512 or more", "use fft_points = 512"],
    );
}

#[test]
fn fft_not_a_power_of_two() {
    let (e, t) = rejected(FeatureConfig {
        fft_points: 600,
        ..SPEECH16K_40
    });
    assert_eq!(e.field(), "fft_points");
    assert_mentions(&t, &["600", "power of two", "512", "1024"]);
}

#[test]
fn hop_zero_or_beyond_the_window() {
    for hop in [0, 513] {
        let (e, t) = rejected(FeatureConfig {
            hop_samples: hop,
            ..SPEECH16K_40
        });
        assert_eq!(e.field(), "hop_samples");
        assert_mentions(
            &t,
            &[
                "hop_samples",
                &hop.to_string(),
                "allowed 1 to 512",
                "use a hop",
            ],
        );
    }
}

#[test]
fn a_band_without_a_bin_is_named() {
    // 128 bands over 20 Hz – 8 kHz at 31.25 Hz per bin: the lowest bands are
    // narrower than a bin.
    let (e, t) = rejected(FeatureConfig {
        bands: 128,
        ..SPEECH16K_40
    });
    let ConfigError::EmptyBand { band, .. } = e else {
        panic!("{e:?}")
    };
    assert!(band < 10, "one of the lowest bands is empty: {band}");
    assert_mentions(
        &t,
        &[
            &format!("band {band} ("),
            "Hz",
            "no FFT bin",
            "31.25 Hz per bin",
            "fewer `bands`",
            "larger `fft_points`",
        ],
    );
}

#[test]
fn rounded_bins_that_collide_are_named() {
    let (e, t) = rejected(FeatureConfig {
        bands: 60,
        ..DSR8K_23
    });
    assert!(matches!(e, ConfigError::SharedCentreBin { .. }), "{e:?}");
    assert_mentions(&t, &["same centre bin", "fewer `bands`"]);
}

#[test]
fn non_finite_numbers() {
    for c in [
        FeatureConfig {
            low_edge_hz: f32::NAN,
            ..SPEECH16K_40
        },
        FeatureConfig {
            high_edge_hz: f32::INFINITY,
            ..SPEECH16K_40
        },
        FeatureConfig {
            floor_db: f32::NEG_INFINITY,
            ..SPEECH16K_40
        },
        FeatureConfig {
            pre_emphasis: Some(f32::NAN),
            ..SPEECH16K_40
        },
    ] {
        let (e, t) = rejected(c);
        assert!(matches!(e, ConfigError::NotFinite { .. }), "{e:?}");
        assert_mentions(&t, &["not a finite number", e.field()]);
    }
}

#[test]
fn other_ranges() {
    let cases: [(FeatureConfig, &str, &str); 8] = [
        (
            FeatureConfig {
                sample_rate_hz: 0,
                ..SPEECH16K_40
            },
            "sample_rate_hz",
            "allowed 1000 to 384000",
        ),
        (
            FeatureConfig {
                bands: 0,
                ..SPEECH16K_40
            },
            "bands",
            "allowed 1 to 256",
        ),
        (
            FeatureConfig {
                window_samples: 8,
                ..SPEECH16K_40
            },
            "window_samples",
            "allowed 16 to 4096",
        ),
        (
            FeatureConfig {
                fft_points: 8192,
                window_samples: 8192,
                hop_samples: 160,
                ..SPEECH16K_40
            },
            "window_samples",
            "allowed 16 to 4096",
        ),
        (
            FeatureConfig {
                pre_emphasis: Some(1.5),
                ..SPEECH16K_40
            },
            "pre_emphasis",
            "0.97",
        ),
        (
            FeatureConfig {
                dc_removal_pole: Some(-0.1),
                ..SPEECH16K_40
            },
            "dc_removal_pole",
            "0.999",
        ),
        (
            FeatureConfig {
                low_edge_hz: -5.0,
                ..SPEECH16K_40
            },
            "low_edge_hz",
            "allowed 0 to 8000",
        ),
        (
            FeatureConfig {
                floor_db: 10.0,
                ..SPEECH16K_40
            },
            "floor_db",
            "-100 dB",
        ),
    ];
    for (c, field, hint) in cases {
        let (e, t) = rejected(c);
        assert_eq!(e.field(), field, "{t}");
        assert_mentions(&t, &[field, hint]);
    }
    let (e, t) = rejected(FeatureConfig {
        low_edge_hz: 5000.0,
        high_edge_hz: 300.0,
        ..SPEECH16K_40
    });
    assert_eq!(e.field(), "high_edge_hz");
    assert_mentions(&t, &["5000", "300", "swap"]);
    let (e, t) = rejected(FeatureConfig {
        band_gain: BandGain::EqualArea,
        triangles: TrianglePlacement::RoundedCentreBins,
        ..DSR8K_23
    });
    assert_eq!(e.field(), "band_gain");
    assert_mentions(&t, &["peak-one"]);
}

fn from_toml(text: &str) -> anyhow::Result<stapes_sim::config_source::NamedConfig> {
    let dir = tempfile::tempdir()?;
    let path = dir.path().join("mine.toml");
    std::fs::write(&path, text)?;
    ConfigArgs {
        config: Some(path),
        ..Default::default()
    }
    .resolve()
}

#[test]
fn toml_files_and_their_errors() {
    let ok = from_toml(
        "base_preset = \"speech16k-40\"\nbands = 32\nwindow = \"hamming\"\npre_emphasis = 0.97\n",
    )
    .unwrap();
    assert_eq!(ok.name, "mine");
    assert_eq!((ok.config.bands, ok.config.pre_emphasis), (32, Some(0.97)));
    let full = "sample_rate_hz = 8000\nwindow_samples = 200\nfft_points = 256\nhop_samples = 80\nbands = 20\nlow_edge_hz = 100.0\nhigh_edge_hz = 3800.0\n";
    assert_eq!(from_toml(full).unwrap().config.sample_rate_hz, 8000);
    let cases = [
        ("bands = 32\n", "lacks sample_rate_hz"),
        (
            "base_preset = \"speech16k-40\"\nband_count = 3\n",
            "unknown field",
        ),
        (
            "base_preset = \"speech16k-40\"\nwindow = \"triangle\"\n",
            "choose one of hann, hann-periodic",
        ),
        ("base_preset = \"nope\"\n", "unknown preset `nope`"),
        (
            "base_preset = \"speech16k-40\"\nhop_samples = 0\n",
            "hop_samples",
        ),
        (
            "base_preset = \"speech16k-40\"\nbands = \"many\"\n",
            "invalid type",
        ),
    ];
    for (text, want) in cases {
        let e = format!("{:#}", from_toml(text).unwrap_err());
        assert!(e.contains(want), "{text:?}: {e}");
    }
}

#[test]
fn flags_override_and_are_validated() {
    let a = ConfigArgs {
        preset: Some("tiny16k-10".into()),
        bands: Some(8),
        pre_emphasis: Some("0.9".into()),
        ..Default::default()
    };
    let named = a.resolve().unwrap();
    assert_eq!(named.name, "tiny16k-10-custom");
    assert_eq!(
        (named.config.bands, named.config.pre_emphasis),
        (8, Some(0.9))
    );
    let bad = ConfigArgs {
        high_edge_hz: Some(9000.0),
        ..Default::default()
    };
    assert!(format!("{:#}", bad.resolve().unwrap_err()).contains("Nyquist"));
    let bad = ConfigArgs {
        spectrum: Some("energy".into()),
        ..Default::default()
    };
    assert!(format!("{:#}", bad.resolve().unwrap_err()).contains("power, magnitude"));
}

/// Found (issue 9): a file based on dsr8k-23 could not switch its DC removal
/// or pre-emphasis off, and TOML errors named neither the key nor the line.
#[test]
fn toml_files_switch_conditioning_off_and_errors_name_key_and_line() {
    use stapes_sim::config_source::from_toml;
    let (_, c, _) = from_toml(
        "base_preset = \"dsr8k-23\"\ndc_removal_pole = \"off\"\npre_emphasis = \"off\"\n",
        "off.toml",
        "off".into(),
    )
    .unwrap();
    assert_eq!((c.dc_removal_pole, c.pre_emphasis), (None, None));
    let (_, c, _) = from_toml(
        "base_preset = \"speech16k-40\"\npre_emphasis = 0.9\n",
        "p.toml",
        "p".into(),
    )
    .unwrap();
    assert_eq!(c.pre_emphasis, Some(0.9));
    let e = from_toml(
        "base_preset = \"dsr8k-23\"\npre_emphasis = \"loud\"\n",
        "x.toml",
        "x".into(),
    )
    .unwrap_err()
    .to_string();
    assert!(e.contains("pre_emphasis") && e.contains("off"), "{e}");
    let e = from_toml(
        "base_preset = \"speech16k-40\"\nbands = 4294967296\n",
        "big.toml",
        "big".into(),
    )
    .unwrap_err()
    .to_string();
    assert!(
        e.contains("big.toml") && e.contains("line 2") && e.contains("bands"),
        "{e}"
    );
    let e = from_toml("bands = 40\nbands = 41\n", "dup.toml", "dup".into())
        .unwrap_err()
        .to_string();
    assert!(e.contains("line 2") && e.contains("bands"), "{e}");
}

/// Found (issue 9): the advice for an FFT size that is not a power of two
/// suggested sizes outside 16–4096 ("use 1 or 2" for 0).
#[test]
fn fft_size_advice_stays_within_the_allowed_range() {
    use stapes_core::presets::SPEECH16K_40;
    for (points, advice) in [
        (0u32, "use 16 (allowed"),
        (3, "use 16 (allowed"),
        (500, "use 256 or 512"),
        (5000, "use 4096 (allowed"),
        (u32::MAX, "use 4096 (allowed"),
    ] {
        let c = stapes_core::FeatureConfig {
            fft_points: points,
            ..SPEECH16K_40
        };
        let e = c.validate().unwrap_err().to_string();
        assert!(e.contains(advice), "{points}: {e}");
    }
}
