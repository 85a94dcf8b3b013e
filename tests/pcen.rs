//! PCEN (Wang et al., ICASSP 2017) on the f32 path against its float64
//! model on the float64 reference's band energies.

use stapes_core::pcen::{FloatPcen, PcenParams};
use stapes_core::stage::{FrameStage, Unchanged};
use stapes_core::table::FilterbankForm;
use stapes_sim::generate::GeneratedTables;
use stapes_sim::reference::Reference;
use stapes_sim::run::Samples;

/// On the demo clip through every preset: the f32 stage chained after the
/// filterbank equals the stage applied to the front end's own energies
/// (bit for bit), and stays within 1e-5 (absolute, PCEN units) of the f64
/// model on the f64 reference's energies, measured 1.9e-6 at most
/// (speech16k-40).
#[test]
fn float_pcen_matches_its_f64_model() {
    let p = PcenParams::DEFAULT;
    for (name, c) in stapes_tests::all_presets() {
        let t = GeneratedTables::new(&c);
        let table = t.view_f32(FilterbankForm::Sparse);
        let s = p.smoothing(c.hop_samples as f32 / c.sample_rate_hz as f32);
        let mut chained = Box::new(
            stapes_core::FloatFrontEnd::<4096, 4096, 64, FloatPcen<64>>::with_stages(
                c,
                table,
                FloatPcen::new(p, s).unwrap(),
            )
            .unwrap(),
        );
        let mut energies = Box::new(
            stapes_core::FloatFrontEnd::<4096, 4096, 64, Unchanged>::with_stages(
                c, table, Unchanged,
            )
            .unwrap(),
        );
        let mut alone = FloatPcen::<64>::new(p, s).unwrap();
        let clip =
            stapes_sim::synth::demo_clip(c.sample_rate_hz, stapes_sim::synth::DEMO_SEED).samples;
        let reference = stapes_sim::model_input::pcen_f64(
            &Reference::new(&c).energies(&Samples::I16(clip.clone()).to_f64()),
            &p,
            s as f64,
        );
        let (mut a, mut b) = (&clip[..], &clip[..]);
        let mut worst = 0.0f64;
        while let Some(frame) = chained.next_frame(&mut a) {
            let got = frame.bands.to_vec();
            let mut e = energies.next_frame(&mut b).unwrap().bands.to_vec();
            assert_eq!(
                got,
                alone.process(&mut e).to_vec(),
                "{name} frame {}",
                frame.index
            );
            for (g, w) in got.iter().zip(&reference[frame.index as usize]) {
                worst = worst.max((*g as f64 - w).abs());
            }
        }
        println!("{name}: f32 PCEN worst |error| {worst:.2e}");
        assert!(worst <= 1e-5, "{name}: {worst:.2e}");
    }
}

/// Out-of-range parameters are refused with the field named.
#[test]
fn pcen_refuses_impossible_parameters() {
    let mut p = PcenParams::DEFAULT;
    p.alpha = 1.5;
    let e = FloatPcen::<4>::new(p, 0.025).unwrap_err();
    assert!(e.to_string().contains("alpha"), "{e}");
    let e = FloatPcen::<4>::new(PcenParams::DEFAULT, 0.0).unwrap_err();
    assert!(e.to_string().contains("smoothing"), "{e}");
}

/// The fixed stage (integers only) on the fixed16 front end's own energy
/// words, against the f64 model on the same energies (the stage's own
/// error: the log2 table, the 2^x table, 32-bit mantissas), and the whole
/// fixed16 chain against the f64 model on the f64 reference's energies, for
/// every preset on the demo clip. Measured: own error at most 1.7e-4
/// (speech16k-40), whole chain at most 5.5e-3 (fixed16's energies through
/// PCEN's compression); held within 5e-4 and 2e-2.
#[test]
fn fixed_pcen_matches_its_f64_model() {
    use stapes_core::fft::Fixed16;
    use stapes_core::pcen_fixed::FixedPcen;
    let p = PcenParams::DEFAULT;
    for (name, c) in stapes_tests::all_presets() {
        let t = GeneratedTables::new(&c);
        let fixed = t.fixed_tables(FilterbankForm::Sparse).unwrap();
        let hop_s = c.hop_samples as f32 / c.sample_rate_hz as f32;
        let fp = stapes_sim::model_input::fixed_pcen_params(&p, hop_s);
        let mut chained = Box::new(
            stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 64, FixedPcen<64>>::with_stages(
                c,
                fixed,
                FixedPcen::new(fp),
            )
            .unwrap(),
        );
        let mut words = Box::new(
            stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 64, Unchanged>::with_stages(
                c, fixed, Unchanged,
            )
            .unwrap(),
        );
        let clip =
            stapes_sim::synth::demo_clip(c.sample_rate_hz, stapes_sim::synth::DEMO_SEED).samples;
        // The fixed front end's own energies, as f64.
        let mut own_energies = Vec::new();
        let mut b = &clip[..];
        while let Some(f) = words.next_frame(&mut b) {
            own_energies.push(
                f.bands
                    .iter()
                    .map(|&w| {
                        if w == stapes_core::int_log::EMPTY_ENERGY {
                            0.0
                        } else {
                            let e = (w >> 22) as f64;
                            let frac = (w & 0x3F_FFFF) as f64 / (1u64 << 22) as f64;
                            2f64.powf(e) * (1.0 + frac)
                        }
                    })
                    .collect::<Vec<f64>>(),
            );
        }
        let s = p.smoothing(hop_s) as f64;
        let own_model = stapes_sim::model_input::pcen_f64(&own_energies, &p, s);
        let reference = stapes_sim::model_input::pcen_f64(
            &Reference::new(&c).energies(&Samples::I16(clip.clone()).to_f64()),
            &p,
            s,
        );
        let (mut own, mut whole) = (0.0f64, 0.0f64);
        let mut a = &clip[..];
        while let Some(frame) = chained.next_frame(&mut a) {
            let i = frame.index as usize;
            for (bnd, v) in frame.bands.iter().enumerate() {
                let got = v.to_num::<f64>();
                own = own.max((got - own_model[i][bnd]).abs());
                whole = whole.max((got - reference[i][bnd]).abs());
            }
        }
        println!("{name}: fixed16 PCEN own error {own:.2e}, whole chain {whole:.2e}");
        assert!(own <= 5e-4, "{name}: own {own:.2e}");
        assert!(whole <= 2e-2, "{name}: whole {whole:.2e}");
    }
}

/// The fixed path's 2^x table: `round(2^(k/256)·2^31)` within one unit for
/// every k (2^(k/256) from f64, a fact of arithmetic).
#[test]
fn exp2_table_is_exact_to_rounding() {
    for (k, &v) in stapes_core::pcen_fixed::EXP2_TABLE.iter().enumerate() {
        let want = (2f64.powf(k as f64 / 256.0) * 2f64.powi(31)).round();
        assert!((v as f64 - want).abs() <= 1.0, "k {k}: {v} against {want}");
    }
}
