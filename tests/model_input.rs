//! The model's input: the frame window a keyword model reads and the affine
//! int8/uint8 quantiser of its input tensor.

use std::collections::VecDeque;

use rand::Rng;
use stapes_core::frame_window::FrameWindow;
use stapes_core::quantise::{AffineQuantiser, CodeRange, QuantiserError};
use stapes_tests::rng;

/// The window equals a naive queue of the last F frames, in time order, at
/// every push, for several shapes and strides; it is handed out exactly on
/// pushes F, F + stride, F + 2·stride, …
#[test]
fn frame_window_is_the_last_frames_in_time_order() {
    fn run<const F: usize, const C: usize>(stride: u32, pushes: usize, seed: u64) {
        let mut r = rng(seed);
        let mut w = FrameWindow::<i16, F, C>::new(stride);
        let mut naive: VecDeque<Vec<i16>> = VecDeque::new();
        for k in 1..=pushes {
            let frame: Vec<i16> = (0..C).map(|_| r.random()).collect();
            naive.push_back(frame.clone());
            if naive.len() > F {
                naive.pop_front();
            }
            let handed = w.push(&frame).map(<[i16]>::to_vec);
            let expected: Vec<i16> = naive.iter().flatten().copied().collect();
            let due = k >= F && (k - F) % stride.max(1) as usize == 0;
            assert_eq!(handed.is_some(), due, "push {k}, F {F}, stride {stride}");
            if let Some(h) = handed {
                assert_eq!(h, expected, "push {k}");
            }
            assert_eq!(w.ready(), k >= F);
            match w.window() {
                Some(win) => assert_eq!(win, &expected[..], "push {k}"),
                None => assert!(k < F),
            }
        }
    }
    run::<49, 10>(1, 200, 1);
    run::<49, 10>(3, 200, 2);
    run::<1, 4>(1, 10, 3);
    run::<5, 1>(2, 40, 4);
    run::<98, 40>(49, 500, 5);
}

/// A frame shorter than C is padded with zeros, a longer one truncated;
/// reset forgets everything.
#[test]
fn frame_window_pads_truncates_and_resets() {
    let mut w = FrameWindow::<f32, 2, 3>::new(1);
    w.push(&[1.0]);
    assert_eq!(
        w.push(&[2.0, 2.0, 2.0, 9.0]),
        Some(&[1.0, 0.0, 0.0, 2.0, 2.0, 2.0][..])
    );
    w.reset();
    assert!(!w.ready());
    assert_eq!(w.window(), None);
    assert_eq!(w.frames_pushed(), 0);
}

/// Affine quantisation r = S·(q − Z) (Jacob et al., CVPR 2018): every code
/// equals the exact rounded quotient (computed in f64, ties away from zero),
/// clamped into the code range, for random values and scales, both ranges.
#[test]
fn quantiser_matches_the_exact_rounding() {
    let mut r = rng(8);
    for range in [CodeRange::Int8, CodeRange::Uint8] {
        let (lo, hi) = range.limits();
        for _ in 0..200 {
            let scale: f32 = 10f32.powf(r.random_range(-3.0..1.0));
            let zero_point = r.random_range(lo..=hi);
            let q = AffineQuantiser::new(scale, zero_point, range).unwrap();
            for _ in 0..200 {
                let x: f32 = r.random_range(-300.0..300.0) * scale;
                // The quotient as the core computes it (one f32 division),
                // then rounded exactly in f64: ties away from zero.
                let v = (x / scale) as f64;
                let rounded = v.round() as i64 + zero_point as i64;
                let expected = rounded.clamp(lo as i64, hi as i64) as i32;
                let (code, clamped) = q.code(x);
                assert_eq!(code, expected, "x {x} scale {scale} zero {zero_point}");
                assert_eq!(clamped, rounded != expected as i64);
            }
        }
    }
}

/// Ties go away from zero; values just below a tie go down (no `+ 0.5`
/// shortcut, which rounds 0.49999997 up); NaN and infinities clamp and count.
#[test]
fn quantiser_rounds_ties_away_from_zero_and_counts_saturation() {
    let q = AffineQuantiser::new(1.0, 0, CodeRange::Int8).unwrap();
    let below_half = f32::from_bits(0.5f32.to_bits() - 1);
    let cases = [
        (0.5, 1),
        (-0.5, -1),
        (1.5, 2),
        (2.5, 3),
        (-2.5, -3),
        (below_half, 0),
        (-below_half, 0),
        (126.5, 127),
        (-127.5, -128),
    ];
    for (x, want) in cases {
        assert_eq!(q.code(x), (want, false), "{x}");
    }
    let mut out = [0i32; 5];
    let n = q.quantise(&[127.5, -128.5, f32::NAN, f32::INFINITY, 3e38], &mut out);
    assert_eq!(out, [127, -128, 0, 127, 127]);
    assert_eq!(n, 5);
}

#[test]
fn quantiser_refuses_impossible_parameters() {
    for scale in [0.0, -1.0, f32::NAN, f32::INFINITY, 1e-40] {
        assert!(matches!(
            AffineQuantiser::new(scale, 0, CodeRange::Int8),
            Err(QuantiserError::Scale { .. })
        ));
    }
    let e = AffineQuantiser::new(0.1, 300, CodeRange::Uint8).unwrap_err();
    assert!(e.to_string().contains("zero point 300"), "{e}");
}

/// The stage chain on the f32 path: log then int8 quantisation, fed into
/// the model's window, gives exactly the codes of quantising the plain
/// front end's log-mel frames, window by window.
#[test]
fn log_then_quantise_then_window_equals_the_plain_front_end() {
    use stapes_core::log::FloatLog;
    use stapes_core::quantise::QuantiseStage;
    use stapes_core::stage::Then;
    use stapes_sim::generate::GeneratedTables;
    use stapes_sim::run::HostFloatFrontEnd;
    type Chain = Then<FloatLog, QuantiseStage<i8, 40>>;
    let c = stapes_core::presets::SPEECH16K_40;
    let t = GeneratedTables::new(&c);
    let table = t.view_f32(stapes_core::table::FilterbankForm::Sparse);
    // A log-mel input scale of 0.5 dB per code around -40 dB (illustrative).
    let q = AffineQuantiser::new(0.5, 80, CodeRange::Int8).unwrap();
    let stages: Chain = Then(FloatLog::for_config(&c), QuantiseStage::new(q).unwrap());
    let mut chained = Box::new(
        stapes_core::FloatFrontEnd::<4096, 4096, 40, Chain>::with_stages(c, table, stages).unwrap(),
    );
    let mut plain = Box::new(HostFloatFrontEnd::new(c, table).unwrap());
    let clip = stapes_sim::synth::demo_clip(c.sample_rate_hz, 3).samples;
    let mut window = FrameWindow::<i8, 49, 40>::new(1);
    let mut expected = FrameWindow::<i8, 49, 40>::new(1);
    let (mut rest_a, mut rest_b) = (&clip[..], &clip[..]);
    let mut windows = 0;
    while let Some(frame) = chained.next_frame(&mut rest_a) {
        let codes = frame.bands.to_vec();
        let logs = plain.next_frame(&mut rest_b).unwrap().bands.to_vec();
        let mut want = [0i32; 40];
        q.quantise(&logs, &mut want);
        let want: Vec<i8> = want.iter().map(|&v| v as i8).collect();
        assert_eq!(codes, want, "frame {}", frame.index);
        let got = window.push(&codes).map(<[i8]>::to_vec);
        let exp = expected.push(&want).map(<[i8]>::to_vec);
        assert_eq!(got, exp);
        windows += got.is_some() as usize;
    }
    assert!(windows > 300, "{windows} windows");
}

/// Per-band normalisation: as a stage, `(x − μ)/σ` exactly as f32 computes
/// it; folded into the quantiser, every code equals the exact rounding (f64,
/// ties away from zero) of `(x − μ_b)/(σ_b·S)` with the f32 product `σ_b·S`,
/// plus the zero point, clamped. Impossible statistics are refused by band.
#[test]
fn normalisation_alone_and_folded_into_the_quantiser() {
    use stapes_core::normalise::{BandStatistics, Normalise, NormalisedQuantise};
    use stapes_core::stage::FrameStage;
    let mut r = rng(12);
    let mean: Vec<f32> = (0..40).map(|_| r.random_range(-80.0..0.0)).collect();
    let deviation: Vec<f32> = (0..40).map(|_| r.random_range(0.5..20.0)).collect();
    let stats = BandStatistics::new(&mean, &deviation).unwrap();
    let q = AffineQuantiser::new(0.1, -5, CodeRange::Int8).unwrap();
    let mut folded = NormalisedQuantise::<i8, 40>::new(stats, q).unwrap();
    let mut alone = Normalise::new(stats);
    for _ in 0..500 {
        let x: Vec<f32> = (0..40).map(|_| r.random_range(-120.0..20.0)).collect();
        let mut y = x.clone();
        let normalised = alone.process(&mut y).to_vec();
        for b in 0..40 {
            assert_eq!(normalised[b], (x[b] - mean[b]) / deviation[b]);
        }
        let mut x2 = x.clone();
        let codes = folded.process(&mut x2).to_vec();
        for b in 0..40 {
            let scale = deviation[b] * 0.1f32;
            let v = ((x[b] - mean[b]) / scale) as f64;
            let want = (v.round() as i64 - 5).clamp(-128, 127) as i8;
            assert_eq!(codes[b], want, "band {b}");
        }
    }
    let bad = [1.0f32, 0.0];
    let e = BandStatistics::new(&[0.0, 0.0], &bad).unwrap_err();
    assert!(e.to_string().contains("band 1"), "{e}");
    assert!(BandStatistics::new(&[0.0], &[1.0, 1.0]).is_err());
}

/// The fixed path's quantiser, integers only: for random scales and every
/// 1/256-unit value of a wide range, its code equals the exact rounding (ties
/// away from zero, in i128) of `x_raw·M / 2^k`, and differs from the ideal
/// real quantiser `round(x / S)` nowhere on this data (M/2^k is within 2^-30
/// of 1/(256·S)). As a stage after the fixed log, it gives the codes of its
/// quantiser on each level.
#[test]
fn fixed_quantiser_is_the_exact_integer_rounding() {
    use stapes_core::quantise::FixedQuantiser;
    use stapes_sim::model_input::{fixed_quantiser, quantiser_parts};
    let mut r = rng(21);
    let mut differing = 0;
    for _ in 0..300 {
        let scale: f32 = 10f32.powf(r.random_range(-2.0..1.5));
        let zero = r.random_range(-128..=127);
        let (m, k) = quantiser_parts(scale).unwrap();
        assert!(m > (1 << 29) || k == 62, "{m} {k}");
        let q = fixed_quantiser(scale, zero, CodeRange::Int8).unwrap();
        for _ in 0..200 {
            let raw: i32 = r.random_range(-40_000..40_000);
            let p = raw as i128 * m as i128;
            let half = (1i128 << k) >> 1;
            let mag = (p.abs() + half) >> k;
            let exact = (p.signum() * mag + zero as i128).clamp(-128, 127) as i32;
            assert_eq!(q.code(raw).0, exact, "raw {raw} scale {scale}");
            let ideal = ((raw as f64 / 256.0) / scale as f64).round() as i64 + zero as i64;
            differing += (ideal.clamp(-128, 127) as i32 != exact) as usize;
        }
    }
    assert_eq!(differing, 0);
    assert!(FixedQuantiser::from_parts(0, 3, 0, CodeRange::Int8).is_err());
    assert!(quantiser_parts(0.0).is_err());
}

/// Per-band statistics from frames: population mean and deviation, a
/// constant band's deviation 1.
#[test]
fn band_statistics_from_frames() {
    use stapes_sim::model_input::band_statistics;
    let frames = vec![vec![1.0, 5.0], vec![3.0, 5.0]];
    let (mean, dev) = band_statistics(&frames).unwrap();
    assert_eq!(mean, vec![2.0, 5.0]);
    assert_eq!(dev, vec![1.0, 1.0]);
    assert!(band_statistics(&[]).is_err());
}

/// The fixed chain: log then the integer quantiser, in the fixed16 front
/// end, gives the quantiser's codes of the plain front end's levels.
#[test]
fn fixed_log_then_quantise_equals_the_plain_front_end() {
    use stapes_core::FixedLog;
    use stapes_core::fft::Fixed16;
    use stapes_core::quantise::FixedQuantiseStage;
    use stapes_core::stage::Then;
    use stapes_sim::generate::GeneratedTables;
    let c = stapes_core::presets::SPEECH16K_40;
    let t = GeneratedTables::new(&c);
    let fixed = t
        .fixed_tables(stapes_core::table::FilterbankForm::Sparse)
        .unwrap();
    let q = stapes_sim::model_input::fixed_quantiser(0.5, 80, CodeRange::Int8).unwrap();
    type Chain<'t> = Then<FixedLog<'t, 40>, FixedQuantiseStage<i8, 40>>;
    let stages: Chain = Then(
        FixedLog::for_tables(&fixed),
        FixedQuantiseStage::new(q).unwrap(),
    );
    let mut chained = Box::new(
        stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40, Chain>::with_stages(c, fixed, stages)
            .unwrap(),
    );
    let mut plain =
        Box::new(stapes_core::FixedFrontEnd::<Fixed16, 4096, 4096, 40>::new(c, fixed).unwrap());
    let clip = stapes_sim::synth::demo_clip(c.sample_rate_hz, 9).samples;
    let (mut a, mut b) = (&clip[..], &clip[..]);
    let mut frames = 0;
    while let Some(frame) = chained.next_frame(&mut a) {
        let levels = plain.next_frame(&mut b).unwrap().bands.to_vec();
        let want: Vec<i8> = levels
            .iter()
            .map(|l| q.code(l.to_bits() as i32).0 as i8)
            .collect();
        assert_eq!(frame.bands, &want[..], "frame {}", frame.index);
        frames += 1;
    }
    assert!(frames > 300);
}
