//! Property tests (proptest): any valid configuration gives tables that
//! validate and whose every band holds a bin; streaming in any chunking
//! equals the whole buffer; blobs round-trip.

use proptest::prelude::*;
use stapes_core::FeatureConfig;
use stapes_core::blob::TableBlob;
use stapes_core::config::{
    BandGain, LogKind, MelScale, SpectrumKind, TrianglePlacement, WindowShape,
};
use stapes_core::presets::SPEECH16K_40;
use stapes_core::table::Filterbank;
use stapes_sim::emit::{BlobContents, blob};
use stapes_sim::generate::GeneratedTables;
use stapes_tests::AlignedBytes;

/// Configurations across the whole space `validate` may accept (it decides;
/// the strategy only keeps the sizes a test can afford).
fn configuration() -> impl Strategy<Value = FeatureConfig> {
    (
        prop::sample::select(vec![8_000u32, 11_025, 16_000, 22_050, 44_100, 48_000]),
        6u32..=11,
        0.3f64..=1.0,
        0.05f64..=1.0,
        1u32..=80,
        0.0f32..=0.2,
        0.3f32..=1.0,
        prop::sample::select(vec![
            WindowShape::Hann,
            WindowShape::HannPeriodic,
            WindowShape::Hamming,
            WindowShape::HammingPeriodic,
            WindowShape::Rectangular,
        ]),
        (
            prop::sample::select(vec![MelScale::OShaughnessy, MelScale::Slaney]),
            prop::sample::select(vec![
                TrianglePlacement::ExactFrequency,
                TrianglePlacement::RoundedCentreBins,
            ]),
            prop::sample::select(vec![BandGain::PeakOne, BandGain::EqualArea]),
            prop::sample::select(vec![SpectrumKind::Power, SpectrumKind::Magnitude]),
            prop::sample::select(vec![LogKind::Decibel, LogKind::Natural]),
            prop::option::of(0.9f32..0.9999),
            prop::option::of(0.5f32..=0.99),
        ),
    )
        .prop_map(
            |(
                rate,
                log2n,
                win,
                hop,
                bands,
                low,
                high,
                window,
                (mel, tri, gain, spec, log, dc, pre),
            )| {
                let n = 1u32 << log2n;
                let w = ((n as f64 * win) as u32).max(16);
                let nyquist = rate as f32 / 2.0;
                FeatureConfig {
                    sample_rate_hz: rate,
                    window_samples: w,
                    fft_points: n,
                    hop_samples: ((w as f64 * hop) as u32).max(1),
                    window,
                    dc_removal_pole: dc,
                    pre_emphasis: pre,
                    bands,
                    low_edge_hz: low * nyquist,
                    high_edge_hz: high * nyquist,
                    mel_scale: mel,
                    triangles: tri,
                    band_gain: gain,
                    spectrum: spec,
                    log,
                    ..SPEECH16K_40
                }
            },
        )
}

/// Positions of each sparse band's weights.
fn each_band_has_a_positive_weight<W: Copy + PartialOrd + Default>(
    fb: &Filterbank<'_, W>,
) -> Option<usize> {
    let Filterbank::Sparse { spans, weights } = *fb else {
        return None;
    };
    let mut at = 0;
    for (b, &[_, count]) in spans.iter().enumerate() {
        let ws = &weights[at..at + count as usize];
        at += count as usize;
        if !ws.iter().any(|&w| w > W::default()) {
            return Some(b);
        }
    }
    None
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, .. ProptestConfig::default() })]

    #[test]
    fn every_valid_configuration_gives_tables_that_validate_and_bands_that_hold_a_bin(c in configuration()) {
        prop_assume!(c.validate().is_ok());
        let t = GeneratedTables::new(&c);
        for form in t.forms() {
            let view = t.view_f32(form);
            prop_assert!(view.check(&c).is_ok(), "{:?}: {:?}", form, view.check(&c));
            if let Some(fixed) = t.fixed_tables(form) {
                prop_assert!(fixed.check(&c).is_ok(), "{:?}: {:?}", form, fixed.check(&c));
            }
        }
        let sparse = t.view_f32(stapes_core::table::FilterbankForm::Sparse);
        prop_assert_eq!(each_band_has_a_positive_weight(&sparse.filterbank), None);
        let q15 = t.view_q15(stapes_core::table::FilterbankForm::Sparse);
        prop_assert_eq!(each_band_has_a_positive_weight(&q15.filterbank), None);
    }

    #[test]
    fn a_blob_round_trips(c in configuration()) {
        prop_assume!(c.validate().is_ok());
        let t = GeneratedTables::new(&c);
        let stored = AlignedBytes::new(&blob(&t, BlobContents::ALL));
        let parsed = TableBlob::parse(stored.bytes()).unwrap();
        prop_assert_eq!(parsed.config(), c);
        for form in t.forms() {
            prop_assert_eq!(parsed.view::<f32>(form).unwrap(), t.view_f32(form));
            prop_assert_eq!(parsed.view::<i16>(form).unwrap(), t.view_q15(form));
            if let Some(fixed) = t.fixed_tables(form) {
                prop_assert_eq!(parsed.fixed_tables(form).unwrap().params, fixed.params);
            }
        }
    }

    #[test]
    fn streaming_in_any_chunking_equals_the_whole_buffer(
        preset in 0u8..6,
        chunks in prop::collection::vec(1u8..=255, 8),
        samples in prop::collection::vec(any::<i16>(), 0..3000),
    ) {
        let mut data = vec![preset];
        data.extend(chunks);
        data.extend(samples.iter().flat_map(|s| s.to_le_bytes()));
        // Asserts chunked == whole for f32, fixed16 and fixed32.
        stapes_tests::fuzzing::exercise_streaming(&data);
    }
}
