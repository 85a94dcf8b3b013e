//! Blob contents that pass the frame checks (magic, lengths, CRC) but hold
//! impossible values: each one found by fuzzing or crafted by hand (issue 9)
//! is refused by name, before any front end reads it.

use stapes_core::blob::{BlobError, SectionKind, TableBlob, blob_crc};
use stapes_core::config::BandGain;
use stapes_core::fixed_tables::FixedTableError;
use stapes_core::table::{FilterbankForm, TableError};
use stapes_sim::emit::{BlobContents, blob};
use stapes_sim::generate::GeneratedTables;
use stapes_tests::AlignedBytes as Aligned;

/// A generated blob with section `kind`'s value `index` (of `size` bytes)
/// replaced by `value`, and the CRC repaired.
fn patched(
    config: &stapes_core::FeatureConfig,
    kind: SectionKind,
    index: usize,
    value: &[u8],
) -> Aligned {
    let mut bytes = blob(&GeneratedTables::new(config), BlobContents::ALL);
    let sections = u16::from_le_bytes([bytes[10], bytes[11]]) as usize;
    let entry = (0..sections)
        .map(|e| 32 + 12 * e)
        .find(|&at| u16::from_le_bytes([bytes[at], bytes[at + 1]]) == kind as u16)
        .unwrap_or_else(|| panic!("no {kind:?} section"));
    let offset = u32::from_le_bytes(bytes[entry + 4..entry + 8].try_into().unwrap()) as usize;
    let at = offset + index * value.len();
    bytes[at..at + value.len()].copy_from_slice(value);
    let crc = blob_crc(&bytes);
    bytes[28..32].copy_from_slice(&crc.to_le_bytes());
    Aligned::new(&bytes)
}

fn fixed_error(b: &Aligned) -> BlobError {
    TableBlob::parse(b.bytes())
        .expect("the frame is intact")
        .fixed_tables(FilterbankForm::Sparse)
        .expect_err("refused")
}

fn f32_error(b: &Aligned) -> BlobError {
    TableBlob::parse(b.bytes())
        .expect("the frame is intact")
        .view::<f32>(FilterbankForm::Sparse)
        .expect_err("refused")
}

#[test]
fn a_twiddle_at_the_negative_limit_is_refused() {
    // Found: −1.0 overflowed the FFT's twiddle negation (a panic under
    // overflow checks, 10.6 dB instead of −96.8 dB in release).
    let c = stapes_core::presets::SPEECH16K_40;
    let b = patched(&c, SectionKind::TwiddlesQ15, 5, &i16::MIN.to_le_bytes());
    assert_eq!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadTwiddle {
            precision: "Q15",
            index: 5
        })
    );
    let b = patched(&c, SectionKind::TwiddlesQ31, 7, &i32::MIN.to_le_bytes());
    assert_eq!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadTwiddle {
            precision: "Q31",
            index: 7
        })
    );
    // One step off the cosine is within rounding; a real change is not.
    let good = GeneratedTables::new(&c);
    let q = good.twiddles_q15[40];
    let b = patched(&c, SectionKind::TwiddlesQ15, 40, &(q - 300).to_le_bytes());
    assert!(matches!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadTwiddle { .. })
    ));
}

#[test]
fn all_zero_twiddles_are_refused() {
    let c = stapes_core::presets::TINY16K_10;
    let mut b = blob(&GeneratedTables::new(&c), BlobContents::ALL);
    let good = GeneratedTables::new(&c);
    // Zero every Q15 twiddle: find them by their values.
    let pattern: Vec<u8> = good
        .twiddles_q15
        .iter()
        .flat_map(|v| v.to_le_bytes())
        .collect();
    let at = b
        .windows(pattern.len())
        .position(|w| w == pattern.as_slice())
        .expect("the Q15 twiddles are in the blob");
    b[at..at + pattern.len()].fill(0);
    let crc = blob_crc(&b);
    b[28..32].copy_from_slice(&crc.to_le_bytes());
    let b = Aligned::new(&b);
    assert_eq!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadTwiddle {
            precision: "Q15",
            index: 0
        })
    );
}

#[test]
fn fixed_constants_must_match_the_configuration() {
    // Found: a DC pole of −1.0 in a dsr8k-23 blob whose configuration says
    // 0.999 overflowed the conditioner.
    let c = stapes_core::presets::DSR8K_23;
    let params =
        |word: usize, v: i32| patched(&c, SectionKind::FixedParams, word, &v.to_le_bytes());
    let e = fixed_error(&params(0, i32::MIN));
    assert!(
        matches!(e, BlobError::FixedContents(FixedTableError::Constant { name: "dc_pole", found, .. }) if found == i32::MIN),
        "{e:?}"
    );
    // Pre-emphasis and floor, one step off.
    let good = GeneratedTables::new(&c).fixed_params.unwrap();
    let e = fixed_error(&params(1, good.pre_emphasis.to_bits() as i32 + 1));
    assert!(
        matches!(
            e,
            BlobError::FixedContents(FixedTableError::Constant {
                name: "pre_emphasis",
                ..
            })
        ),
        "{e:?}"
    );
    let e = fixed_error(&params(2, good.floor.to_bits() as i32 + 1));
    assert!(
        matches!(
            e,
            BlobError::FixedContents(FixedTableError::Constant { name: "floor", .. })
        ),
        "{e:?}"
    );
    // Found: an output scale of 0 gave 0.00 dB everywhere.
    let e = fixed_error(&params(3, 0));
    assert!(
        matches!(
            e,
            BlobError::FixedContents(FixedTableError::LogScale { found: 0, .. })
        ),
        "{e:?}"
    );
}

#[test]
fn non_finite_or_out_of_range_f32_values_are_refused() {
    let c = stapes_core::presets::SPEECH16K_40;
    // Found: one NaN window value gave the floor everywhere.
    let b = patched(&c, SectionKind::WindowF32, 100, &f32::NAN.to_le_bytes());
    assert_eq!(
        f32_error(&b),
        BlobError::Table(TableError::BadValue {
            part: "window",
            index: 100
        })
    );
    // Found: one +∞ weight gave 385 dB.
    let b = patched(
        &c,
        SectionKind::SparseWeightsF32,
        9,
        &f32::INFINITY.to_le_bytes(),
    );
    assert_eq!(
        f32_error(&b),
        BlobError::Table(TableError::BadValue {
            part: "sparse weights",
            index: 9
        })
    );
    for bad in [-0.25f32, 1.5, f32::NEG_INFINITY] {
        let b = patched(&c, SectionKind::SparseWeightsF32, 2, &bad.to_le_bytes());
        assert_eq!(
            f32_error(&b),
            BlobError::Table(TableError::BadValue {
                part: "sparse weights",
                index: 2
            }),
            "{bad}"
        );
    }
    // Q15: a negative window value.
    let b = patched(&c, SectionKind::WindowQ15, 3, &(-1i16).to_le_bytes());
    assert_eq!(
        fixed_error(&b),
        BlobError::Table(TableError::BadValue {
            part: "window",
            index: 3
        })
    );
    // Q31 window: negative, or off the Q15 window.
    let b = patched(&c, SectionKind::WindowQ31, 11, &(-5i32).to_le_bytes());
    assert_eq!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadWindowQ31 { index: 11 })
    );
    let b = patched(&c, SectionKind::WindowQ31, 200, &(1i32 << 20).to_le_bytes());
    assert_eq!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadWindowQ31 { index: 200 })
    );
}

#[test]
fn band_gains_must_be_finite_and_positive() {
    let mut c = stapes_core::presets::TINY16K_10;
    c.band_gain = BandGain::EqualArea;
    for bad in [0.0f32, -1.0, f32::NAN, f32::INFINITY] {
        let b = patched(&c, SectionKind::GainsF32, 4, &bad.to_le_bytes());
        assert_eq!(
            f32_error(&b),
            BlobError::Table(TableError::BadValue {
                part: "band gains",
                index: 4
            }),
            "{bad}"
        );
    }
}

#[test]
fn a_window_spectrum_beyond_the_window_sum_is_refused() {
    let c = stapes_core::presets::KWS16K_MEL40;
    let b = patched(&c, SectionKind::WindowSpectrum, 1, &i32::MAX.to_le_bytes());
    assert_eq!(
        fixed_error(&b),
        BlobError::FixedContents(FixedTableError::BadWindowSpectrum { index: 1 })
    );
}

#[test]
fn every_shipped_blob_still_validates() {
    for (name, c) in stapes_tests::all_presets() {
        let b = Aligned::new(&blob(&GeneratedTables::new(&c), BlobContents::ALL));
        let parsed = TableBlob::parse(b.bytes()).unwrap();
        for form in GeneratedTables::new(&c).forms() {
            parsed
                .view::<f32>(form)
                .unwrap_or_else(|e| panic!("{name}: {e}"));
            parsed
                .fixed_tables(form)
                .unwrap_or_else(|e| panic!("{name}: {e}"));
        }
    }
    for entry in std::fs::read_dir(stapes_tests::repo_root().join("tables")).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|e| e == "bin") {
            let b = Aligned::new(&std::fs::read(&path).unwrap());
            let parsed = TableBlob::parse(b.bytes()).unwrap();
            parsed
                .fixed_tables(FilterbankForm::Sparse)
                .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            parsed
                .view::<f32>(FilterbankForm::Sparse)
                .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        }
    }
}
