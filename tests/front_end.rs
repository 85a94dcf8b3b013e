//! The one front end: a function generic over the arithmetic drives all
//! three, and every arithmetic takes both sample types.

use stapes_core::fixed::types::I8F8;
use stapes_core::{Arithmetic, F32, Fixed16, Fixed32, FrameStage, FrontEnd, Unchanged};

#[allow(dead_code)]
mod tiny {
    include!("../tables/tiny16k-10.rs");
}

/// A tone with a little noise, as 16-bit samples.
fn signal(n: usize) -> Vec<i16> {
    let mut state = 0x1234_5678u32;
    (0..n)
        .map(|i| {
            state ^= state << 13;
            state ^= state >> 17;
            state ^= state << 5;
            let noise = (state >> 24) as f64 - 128.0;
            let tone = 12000.0 * (2.0 * std::f64::consts::PI * 440.0 * i as f64 / 16000.0).sin();
            (tone + noise).round() as i16
        })
        .collect()
}

/// Every frame's filterbank energies, through any arithmetic: the code a
/// host tool or a board writes once for all of them.
fn energies<A: Arithmetic>(tables: A::Tables<'static>, samples: &[i16]) -> Vec<Vec<A::Energy>> {
    let mut fe =
        FrontEnd::<A, 256, 96, 10, Unchanged>::with_stages(tiny::CONFIG, tables, Unchanged)
            .expect("the shipped tables fit their configuration");
    let mut out = Vec::new();
    for chunk in samples.chunks(77) {
        let mut rest = chunk;
        while let Some(frame) = fe.next_frame(&mut rest) {
            out.push(frame.bands.to_vec());
        }
    }
    out
}

#[test]
fn one_generic_function_drives_every_arithmetic() {
    let x = signal(4000);
    let float = energies::<F32>(tiny::TABLE_F32_SPARSE, &x);
    let fixed16 = energies::<Fixed16>(tiny::FIXED16_SPARSE, &x);
    let fixed32 = energies::<Fixed32>(tiny::FIXED32_SPARSE, &x);
    // Frame i covers samples [160 i, 160 i + 256): 24 whole frames.
    assert_eq!(float.len(), 24);
    assert_eq!(fixed16.len(), 24);
    assert_eq!(fixed32.len(), 24);
    // The energy words carry the same energies: each within 0.01 dB of the
    // f32 path's on the bands holding the tone.
    for (f, (a, b)) in float.iter().zip(fixed16.iter().zip(&fixed32)) {
        let peak = f.iter().copied().fold(0.0f32, f32::max);
        for (band, &e) in f.iter().enumerate() {
            if e < peak * 1e-3 {
                continue;
            }
            for words in [a, b] {
                let db = 10.0 * word_log10(words[band]);
                let reference = 10.0 * (e as f64).log10();
                assert!(
                    (db - reference).abs() < 0.01,
                    "band {band}: {db} vs {reference}"
                );
            }
        }
    }
}

/// `log10` of an energy word (`int_log::energy_word`: a 32-bit word of
/// mantissa and exponent), read back through the fixed log in decibels.
fn word_log10(word: i32) -> f64 {
    let log = stapes_core::FixedLog::<'static, 1>::for_tables(&tiny::FIXED16_SPARSE);
    let mut log = log;
    let mut v = [word];
    let level: I8F8 = log.process(&mut v)[0];
    // The tiny preset's log is 10·log10 with peak-one gains (offset 0):
    // 1/256 dB per LSB.
    level.to_num::<f64>() / 10.0
}

#[test]
fn f32_samples_reach_the_fixed_path_rounded_to_16_bits_and_non_finite_ones_are_counted() {
    let x = signal(2000);
    // Exactly representable: k / 32768.
    let mut as_f32: Vec<f32> = x.iter().map(|&s| s as f32 / 32768.0).collect();
    let mut as_i16 = x.clone();
    // Three bad words, taken as 0.
    for (i, bad) in [
        (100, f32::NAN),
        (901, f32::INFINITY),
        (1500, f32::NEG_INFINITY),
    ] {
        as_f32[i] = bad;
        as_i16[i] = 0;
    }
    let mut a =
        stapes_core::FixedFrontEnd::<Fixed16, 256, 96, 10>::new(tiny::CONFIG, tiny::FIXED16_SPARSE)
            .unwrap();
    let mut b =
        stapes_core::FixedFrontEnd::<Fixed16, 256, 96, 10>::new(tiny::CONFIG, tiny::FIXED16_SPARSE)
            .unwrap();
    let (mut ra, mut rb) = (&as_f32[..], &as_i16[..]);
    let mut frames = 0;
    while let Some(fa) = a.next_frame(&mut ra) {
        let fa = fa.bands.to_vec();
        let fb = b.next_frame(&mut rb).expect("the same framing");
        assert_eq!(fa, fb.bands);
        frames += 1;
    }
    assert_eq!(frames, 11);
    assert_eq!(a.non_finite_samples(), 3);
    assert_eq!(b.non_finite_samples(), 0);
    // Out-of-range values saturate, and rounding is to the nearest.
    use stapes_core::sample::Sample;
    assert_eq!(1.5f32.to_q15(), Some(32767));
    assert_eq!((-2.0f32).to_q15(), Some(-32768));
    assert_eq!((0.4 / 32768.0f32).to_q15(), Some(0));
    assert_eq!((0.6 / 32768.0f32).to_q15(), Some(1));
    a.reset();
    assert_eq!(a.non_finite_samples(), 0);
}

/// Every frame's energies and the front end's repair counts, for `f32` input.
fn energies_f32<A: Arithmetic>(
    tables: A::Tables<'static>,
    samples: &[f32],
) -> (Vec<Vec<A::Energy>>, u64, u64) {
    let mut fe =
        FrontEnd::<A, 256, 96, 10, Unchanged>::with_stages(tiny::CONFIG, tables, Unchanged)
            .unwrap();
    let mut out = Vec::new();
    let mut rest = samples;
    while let Some(frame) = fe.next_frame(&mut rest) {
        out.push(frame.bands.to_vec());
    }
    (out, fe.non_finite_samples(), fe.clamped_samples())
}

#[test]
fn out_of_range_f32_samples_are_clamped_and_counted_in_every_arithmetic() {
    // Found (issue 9): ±1e30 gave 385 dB everywhere, ±3e38 the floor (the
    // loudest input read as silence). Now each reads as full scale.
    let x: Vec<f32> = signal(2000).iter().map(|&s| s as f32 / 32768.0).collect();
    let mut wild = x.clone();
    let mut limited = x.clone();
    for (i, v, l) in [
        (10, 1e30f32, 1.0f32),
        (500, -3e38, -1.0),
        (900, 1.000_001, 1.0),
    ] {
        wild[i] = v;
        limited[i] = l;
    }
    let check = |a: (Vec<Vec<f32>>, u64, u64), b: (Vec<Vec<f32>>, u64, u64)| {
        assert_eq!(a.0, b.0);
        assert_eq!((a.1, a.2), (0, 3));
        assert_eq!((b.1, b.2), (0, 0));
    };
    check(
        energies_f32::<F32>(tiny::TABLE_F32_SPARSE, &wild),
        energies_f32::<F32>(tiny::TABLE_F32_SPARSE, &limited),
    );
    for (a, b) in [
        (
            energies_f32::<Fixed16>(tiny::FIXED16_SPARSE, &wild),
            energies_f32::<Fixed16>(tiny::FIXED16_SPARSE, &limited),
        ),
        (
            energies_f32::<Fixed32>(tiny::FIXED32_SPARSE, &wild),
            energies_f32::<Fixed32>(tiny::FIXED32_SPARSE, &limited),
        ),
    ] {
        assert_eq!(a.0, b.0);
        assert_eq!((a.1, a.2), (0, 3));
        assert_eq!((b.1, b.2), (0, 0));
    }
}
