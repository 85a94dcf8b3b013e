//! MFCC: the orthonormal DCT-II tables and both stages, against facts of the
//! DCT and the float64 transform of the float64 reference's log-mel frames.

use stapes_core::mfcc::{FixedMfcc, FloatMfcc};
use stapes_core::stage::{FrameStage, Then};
use stapes_core::table::FilterbankForm;
use stapes_core::{FixedLog, FloatLog};
use stapes_sim::dct::DctTables;
use stapes_sim::generate::GeneratedTables;
use stapes_sim::reference::Reference;
use stapes_sim::run::{HostFloatFrontEnd, Samples};

/// C·Cᵀ = I for the orthonormal DCT-II (common practice; scipy.fft.dct with
/// norm="ortho" is this matrix): exact to 1e-12 in f64, 1e-6 rounded to f32,
/// 2e-4 rounded to Q15; c0 of a constant frame is √B times it and every
/// other coefficient 0 (common practice).
#[test]
fn dct_tables_are_orthonormal() {
    for bands in [10, 23, 40, 64] {
        let t = DctTables::new(bands, bands, None);
        let gram = |m: &dyn Fn(usize) -> f64| {
            let mut worst = 0.0f64;
            for i in 0..bands {
                for j in 0..bands {
                    let dot: f64 = (0..bands)
                        .map(|b| m(i * bands + b) * m(j * bands + b))
                        .sum();
                    let want = if i == j { 1.0 } else { 0.0 };
                    worst = worst.max((dot - want).abs());
                }
            }
            worst
        };
        assert!(gram(&|i| t.matrix_f64[i]) < 1e-12, "{bands} f64");
        assert!(gram(&|i| t.matrix_f32[i] as f64) < 1e-6, "{bands} f32");
        assert!(
            gram(&|i| t.matrix_q15[i] as f64 / 32768.0) < 2e-4,
            "{bands} q15"
        );
        let c = t.apply_f64(&vec![3.0; bands]);
        assert!((c[0] - 3.0 * (bands as f64).sqrt()).abs() < 1e-12);
        assert!(c[1..].iter().all(|v| v.abs() < 1e-12));
    }
    // The lifter 1 + (L/2)·sin(πk/L) (Juang, Rabiner & Wilpon 1987): 1 at
    // k = 0 and 1 + L/2 at k = L/2.
    let t = DctTables::new(40, 13, Some(22));
    let l = t.lifter_f64.as_ref().unwrap();
    assert_eq!(l[0], 1.0);
    assert!((l[11] - 12.0).abs() < 1e-12);
}

/// The f32 stage after the f32 log, chained in the front end, gives the
/// f32 MFCC of the plain front end's frames bit for bit, and stays within
/// 5e-4 (dB units) of the f64 DCT of the f64 reference's log-mel frames on
/// the demo clip: measured 2.4e-4 for speech16k-40, 13 coefficients,
/// liftered (the log-mel error of 3.6e-5 dB, mixed over 40 bands and
/// multiplied by the lifter, up to 12).
#[test]
fn float_mfcc_matches_the_f64_transform() {
    let c = stapes_core::presets::SPEECH16K_40;
    let t = GeneratedTables::new(&c);
    let dct = DctTables::new(40, 13, Some(22));
    let table = t.view_f32(FilterbankForm::Sparse);
    type Chain<'t> = Then<FloatLog, FloatMfcc<'t, 13>>;
    let stages: Chain = Then(
        FloatLog::for_config(&c),
        FloatMfcc::new(dct.view_f32()).unwrap(),
    );
    let mut chained = Box::new(
        stapes_core::FloatFrontEnd::<4096, 4096, 40, Chain>::with_stages(c, table, stages).unwrap(),
    );
    let mut plain = Box::new(HostFloatFrontEnd::new(c, table).unwrap());
    let mut alone = FloatMfcc::<13>::new(dct.view_f32()).unwrap();
    let clip = stapes_sim::synth::demo_clip(c.sample_rate_hz, stapes_sim::synth::DEMO_SEED).samples;
    let reference = Reference::new(&c).run(&Samples::I16(clip.clone()).to_f64());
    let (mut a, mut b) = (&clip[..], &clip[..]);
    let mut worst = 0.0f64;
    let mut frames = 0;
    while let Some(frame) = chained.next_frame(&mut a) {
        let got = frame.bands.to_vec();
        let mut logs = plain.next_frame(&mut b).unwrap().bands[..40].to_vec();
        assert_eq!(
            got,
            alone.process(&mut logs).to_vec(),
            "frame {}",
            frame.index
        );
        let want = dct.apply_f64(&reference[frame.index as usize]);
        for (g, w) in got.iter().zip(&want) {
            worst = worst.max((*g as f64 - w).abs());
        }
        frames += 1;
    }
    println!("f32 MFCC: {frames} frames, worst |error| {worst:.2e} against the f64 transform");
    assert!(frames > 300);
    assert!(worst <= 5e-4, "worst {worst:.2e}");
}

/// The fixed stage on the fixed log's I8F8 frames, 13 coefficients
/// liftered with L = 22: against the f64 DCT of the same frames (the
/// stage's own error: Q15 coefficients and two roundings, times the lifter
/// up to 12) within 0.08 units (dB), measured 0.043; and the whole fixed16
/// chain against the f64 transform of the f64 reference's log-mel within
/// 1.5 dB, measured 0.85. The latter mixes every band's log-mel error into
/// every coefficient, the weakest bands' too (no tolerance bounds those:
/// R selects bands), and the lifter multiplies it; the per-coefficient
/// tolerance `check` will state comes with the MFCC configuration.
#[test]
fn fixed_mfcc_matches_the_f64_transform() {
    use stapes_core::fft::Fixed16;
    let c = stapes_core::presets::SPEECH16K_40;
    let t = GeneratedTables::new(&c);
    let dct = DctTables::new(40, 13, Some(22));
    let fixed = t.fixed_tables(FilterbankForm::Sparse).unwrap();
    type Chain<'t> = Then<FixedLog<'t, 40>, FixedMfcc<'t, 13>>;
    let stages: Chain = Then(
        FixedLog::for_tables(&fixed),
        FixedMfcc::new(dct.view_q15()).unwrap(),
    );
    let mut chained = Box::new(
        stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40, Chain>::with_stages(c, fixed, stages)
            .unwrap(),
    );
    let mut plain =
        Box::new(stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40>::new(c, fixed).unwrap());
    let clip = stapes_sim::synth::demo_clip(c.sample_rate_hz, stapes_sim::synth::DEMO_SEED).samples;
    let reference = Reference::new(&c).run(&Samples::I16(clip.clone()).to_f64());
    let (mut a, mut b) = (&clip[..], &clip[..]);
    let (mut own, mut whole) = (0.0f64, 0.0f64);
    while let Some(frame) = chained.next_frame(&mut a) {
        let got: Vec<f64> = frame.bands.iter().map(|v| v.to_num::<f64>()).collect();
        let logs: Vec<f64> = plain
            .next_frame(&mut b)
            .unwrap()
            .bands
            .iter()
            .map(|v| v.to_num::<f64>())
            .collect();
        for (g, w) in got.iter().zip(dct.apply_f64(&logs)) {
            own = own.max((g - w).abs());
        }
        for (g, w) in got
            .iter()
            .zip(dct.apply_f64(&reference[frame.index as usize]))
        {
            whole = whole.max((g - w).abs());
        }
    }
    println!("fixed16 MFCC: stage's own worst {own:.3} dB, whole chain {whole:.3} dB");
    assert!(own <= 0.08, "own {own}");
    assert!(whole <= 1.5, "whole {whole}");
}
