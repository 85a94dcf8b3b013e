//! Blob round trip and rejection of corrupt blobs.

use stapes_core::FloatFrontEnd;
use stapes_core::blob::{BlobError, SectionKind, TableBlob, blob_crc};
use stapes_core::crc32::Crc32;
use stapes_core::presets::{SPEECH16K_40, TINY16K_10};
use stapes_core::table::{FilterbankForm, TableError};
use stapes_sim::emit::{BlobContents, blob};
use stapes_sim::generate::GeneratedTables;

use stapes_tests::AlignedBytes as Aligned;

fn patch_crc(b: &mut [u8]) {
    let crc = blob_crc(b);
    b[28..32].copy_from_slice(&crc.to_le_bytes());
}

#[test]
fn crc32_matches_the_standard_check_value_and_crc32fast() {
    // CRC-32/ISO-HDLC check value of "123456789" is 0xCBF43926 (the CRC
    // catalogue's standard check, common practice); crc32fast is a
    // general-purpose implementation from the registry.
    let mut c = Crc32::new();
    c.update(b"123456789");
    assert_eq!(c.finish(), 0xCBF4_3926);
    let data: Vec<u8> = (0..10_000u32).map(|i| (i * 7 + i / 13) as u8).collect();
    let mut c = Crc32::new();
    c.update(&data[..5000]);
    c.update(&data[5000..]);
    assert_eq!(c.finish(), crc32fast::hash(&data));
}

#[test]
fn round_trip_every_preset_form_and_weight_type() {
    for (name, c) in stapes_tests::all_presets() {
        let t = GeneratedTables::new(&c);
        let stored = Aligned::new(&blob(&t, BlobContents::ALL));
        let parsed = TableBlob::parse(stored.bytes()).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert_eq!(parsed.config(), c, "{name}");
        for form in t.forms() {
            assert_eq!(
                parsed.view::<f32>(form).unwrap(),
                t.view_f32(form),
                "{name} {form:?} f32"
            );
            assert_eq!(
                parsed.view::<i16>(form).unwrap(),
                t.view_q15(form),
                "{name} {form:?} q15"
            );
        }
        if !t.has_compact() {
            assert_eq!(
                parsed.view::<f32>(FilterbankForm::Compact).unwrap_err(),
                BlobError::MissingSection {
                    kind: SectionKind::CompactSegments
                }
            );
        }
    }
}

#[test]
fn corrupt_blobs_are_rejected() {
    let t = GeneratedTables::new(&SPEECH16K_40);
    let good = blob(&t, BlobContents::ALL);

    let mut b = good.clone();
    b[0] = b'X';
    assert_eq!(
        TableBlob::parse(Aligned::new(&b).bytes()).unwrap_err(),
        BlobError::BadMagic
    );

    let mut b = good.clone();
    b[8] = 9;
    patch_crc(&mut b);
    assert_eq!(
        TableBlob::parse(Aligned::new(&b).bytes()).unwrap_err(),
        BlobError::UnsupportedVersion { found: 9 }
    );

    let mut b = good.clone();
    let last = b.len() - 9;
    b[last] ^= 0x40;
    assert!(matches!(
        TableBlob::parse(Aligned::new(&b).bytes()).unwrap_err(),
        BlobError::BadCrc { .. }
    ));

    for cut in [good.len() - 1, good.len() / 2, 40] {
        let e = TableBlob::parse(Aligned::new(&good[..cut]).bytes()).unwrap_err();
        assert_eq!(
            e,
            BlobError::LengthMismatch {
                stated: good.len(),
                actual: cut
            },
            "cut at {cut}"
        );
    }
    assert_eq!(
        TableBlob::parse(Aligned::new(&good[..20]).bytes()).unwrap_err(),
        BlobError::TooShort { len: 20 }
    );
    assert_eq!(
        TableBlob::parse(b"").unwrap_err(),
        BlobError::TooShort { len: 0 }
    );

    // A directory entry pointing past the end (CRC made consistent).
    let mut b = good.clone();
    b[32 + 4..32 + 8].copy_from_slice(&(good.len() as u32).to_le_bytes());
    patch_crc(&mut b);
    assert_eq!(
        TableBlob::parse(Aligned::new(&b).bytes()).unwrap_err(),
        BlobError::BadDirectory { entry: 0 }
    );

    // One byte off a 4-byte boundary.
    let mut words = vec![0u32; good.len() / 4 + 2];
    let bytes: &mut [u8] = bytemuck::cast_slice_mut(&mut words);
    bytes[1..1 + good.len()].copy_from_slice(&good);
    assert_eq!(
        TableBlob::parse(&bytes[1..1 + good.len()]).unwrap_err(),
        BlobError::Misaligned
    );

    // Every message says what to do.
    for e in [
        BlobError::BadMagic,
        BlobError::Misaligned,
        BlobError::BadCrc {
            stored: 1,
            computed: 2,
        },
        BlobError::LengthMismatch {
            stated: 9,
            actual: 4,
        },
    ] {
        let text = e.to_string();
        assert!(text.contains("table blob"), "{text}");
    }
}

#[test]
fn a_blob_without_q15_sections_says_so() {
    let t = GeneratedTables::new(&TINY16K_10);
    let only_f32 = blob(
        &t,
        BlobContents {
            q15: false,
            ..BlobContents::ALL
        },
    );
    let stored = Aligned::new(&only_f32);
    let parsed = TableBlob::parse(stored.bytes()).unwrap();
    assert!(parsed.view::<f32>(FilterbankForm::Compact).is_ok());
    let e = parsed.view::<i16>(FilterbankForm::Sparse).unwrap_err();
    assert_eq!(
        e,
        BlobError::MissingSection {
            kind: SectionKind::SparseWeightsQ15
        }
    );
    assert!(e.to_string().contains("no sparse weights q15 section"));
}

#[test]
fn a_table_for_another_configuration_is_refused() {
    let t = GeneratedTables::new(&TINY16K_10);
    let other = stapes_core::config::FeatureConfig {
        bands: 9,
        ..TINY16K_10
    };
    let e =
        FloatFrontEnd::<256, 256, 16>::new(other, t.view_f32(FilterbankForm::Sparse)).unwrap_err();
    assert!(
        matches!(
            e,
            stapes_core::error::FrontEndError::Table(TableError::FingerprintMismatch { .. })
        ),
        "{e:?}"
    );
    assert!(e.to_string().contains("regenerate the table"));
    // A view whose slices were cut short is refused even with the right fingerprint.
    let mut v = t.view_f32(FilterbankForm::Sparse);
    v.window = &v.window[..100];
    let e = FloatFrontEnd::<256, 256, 16>::new(TINY16K_10, v).unwrap_err();
    assert!(
        matches!(
            e,
            stapes_core::error::FrontEndError::Table(TableError::WrongLength {
                part: "window",
                ..
            })
        ),
        "{e:?}"
    );
    // Buffers too small for the configuration.
    let e = FloatFrontEnd::<128, 256, 16>::new(TINY16K_10, t.view_f32(FilterbankForm::Sparse))
        .unwrap_err();
    assert!(e.to_string().contains("FFT buffer holds 128"), "{e}");
}

#[test]
fn random_corruption_never_panics() {
    // Flip random bytes, then (half of the time) repair the CRC so the parser's
    // deeper checks (directory, sections, configuration, view) are reached:
    // every outcome must be a clean error or a view that passes its check.
    use rand::Rng;
    let t = GeneratedTables::new(&SPEECH16K_40);
    let good = blob(&t, BlobContents::ALL);
    let mut r = stapes_tests::rng(77);
    let mut rejected = 0;
    for round in 0..3000 {
        let mut b = good.clone();
        for _ in 0..r.random_range(1..6) {
            let i = r.random_range(0..b.len());
            b[i] ^= 1 << r.random_range(0..8);
        }
        if round % 2 == 0 {
            patch_crc(&mut b);
        }
        let stored = Aligned::new(&b);
        match TableBlob::parse(stored.bytes()) {
            Err(e) => {
                rejected += 1;
                assert!(!e.to_string().is_empty());
            }
            Ok(parsed) => {
                for form in [FilterbankForm::Sparse, FilterbankForm::Compact] {
                    if let Ok(v) = parsed.view::<f32>(form) {
                        v.check(&parsed.config())
                            .expect("a view the parser hands out fits its configuration");
                    }
                    let _ = parsed.view::<i16>(form);
                    let _ = parsed.fixed_tables(form);
                }
            }
        }
    }
    assert!(
        rejected > 1500,
        "only {rejected} of 3000 corrupted blobs were rejected"
    );
}

/// A version-1 blob (before the Q31 window) still parses: its f32 and Q15
/// views work, and its fixed-point tables are refused as missing the window.
#[test]
fn version_one_blobs_still_parse() {
    let t = GeneratedTables::new(&SPEECH16K_40);
    let v2 = blob(&t, BlobContents::ALL);
    // Rewrite as version 1: the same sections but the Q31 window, renamed to
    // a kind no version-1 parser asked for (its bytes stay, unused).
    let mut b = v2.clone();
    b[8..10].copy_from_slice(&1u16.to_le_bytes());
    let sections = u16::from_le_bytes([b[10], b[11]]) as usize;
    for entry in 0..sections {
        let at = 32 + entry * 12;
        if u16::from_le_bytes([b[at], b[at + 1]]) == SectionKind::WindowQ31 as u16 {
            b[at..at + 2].copy_from_slice(&0xfff0u16.to_le_bytes());
        }
    }
    patch_crc(&mut b);
    let stored = Aligned::new(&b);
    let parsed = TableBlob::parse(stored.bytes()).unwrap();
    parsed.view::<f32>(FilterbankForm::Sparse).unwrap();
    parsed.view::<i16>(FilterbankForm::Sparse).unwrap();
    assert_eq!(
        parsed.fixed_tables(FilterbankForm::Sparse).unwrap_err(),
        BlobError::MissingSection {
            kind: SectionKind::WindowQ31
        }
    );
    assert!(
        TableBlob::parse(Aligned::new(&v2).bytes())
            .unwrap()
            .fixed_tables(FilterbankForm::Sparse)
            .is_ok()
    );
}

#[test]
fn fixed_tables_refuse_a_negative_weight_and_a_foreign_log_constant() {
    use stapes_core::fixed_tables::{FixedTableError, log2_to_output_q16};
    use stapes_core::table::Filterbank;
    for (name, config) in stapes_core::presets::ALL {
        let generated = GeneratedTables::new(&config);
        let good = generated.fixed_tables(FilterbankForm::Sparse).unwrap();
        assert_eq!(good.check(&config), Ok(()), "{name}");
        // The generator's f64 constant and the core's literal agree.
        assert_eq!(
            good.params.log2_to_output.to_bits(),
            log2_to_output_q16(config.log),
            "{name}"
        );
        // A log constant off by one step is refused: the log stage's
        // 32-bit arithmetic relies on the exact value.
        let mut foreign = good;
        foreign.params.log2_to_output =
            stapes_core::fixed::types::I16F16::from_bits(log2_to_output_q16(config.log) + 1);
        assert!(matches!(
            foreign.check(&config),
            Err(FixedTableError::LogScale { .. })
        ));
        // A negative Q15 weight is refused (the mel loops read weights as unsigned).
        let Filterbank::Sparse { spans, weights } = good.table.filterbank else {
            unreachable!()
        };
        let mut bad_weights = weights.to_vec();
        bad_weights[3] = -1;
        let mut negative = good;
        negative.table.filterbank = Filterbank::Sparse {
            spans,
            weights: &bad_weights,
        };
        assert_eq!(
            negative.check(&config),
            Err(FixedTableError::Table(TableError::BadValue {
                part: "sparse weights",
                index: 3
            }))
        );
    }
}
