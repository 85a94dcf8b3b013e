//! PCEN (Wang et al., ICASSP 2017) on the f32 path against its float64
//! model on the float64 reference's band energies.

use stapes_core::pcen::{FloatPcen, PcenParams};
use stapes_core::stage::{FrameStage, Unchanged};
use stapes_core::table::FilterbankForm;
use stapes_sim::generate::GeneratedTables;
use stapes_sim::reference::Reference;
use stapes_sim::run::Samples;

/// The paper's formula in f64: smoother from the first frame's energies,
/// `M = (1 − s)·M + s·E`, `P = (E/(ε + M)^α + δ)^r − δ^r`.
fn pcen_f64(frames: &[Vec<f64>], p: PcenParams, s: f64) -> Vec<Vec<f64>> {
    let (a, d, r, e) = (
        p.alpha as f64,
        p.delta as f64,
        p.root as f64,
        p.epsilon as f64,
    );
    let mut m = frames[0].clone();
    frames
        .iter()
        .map(|row| {
            row.iter()
                .zip(m.iter_mut())
                .map(|(&x, mi)| {
                    *mi = (1.0 - s) * *mi + s * x;
                    (x / (e + *mi).powf(a) + d).powf(r) - d.powf(r)
                })
                .collect()
        })
        .collect()
}

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
        let reference = pcen_f64(
            &Reference::new(&c).energies(&Samples::I16(clip.clone()).to_f64()),
            p,
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
