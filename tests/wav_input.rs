//! WAV input: what is accepted, and the errors for everything else.

use std::path::Path;

use hound::{SampleFormat, WavSpec, WavWriter};
use stapes_sim::run::Samples;
use stapes_sim::wav::{ChannelChoice, read_wav, read_wav_for};

fn write(path: &Path, channels: u16, bits: u16, format: SampleFormat, rate: u32, frames: usize) {
    let spec = WavSpec {
        channels,
        sample_rate: rate,
        bits_per_sample: bits,
        sample_format: format,
    };
    let mut w = WavWriter::create(path, spec).unwrap();
    for i in 0..frames * channels as usize {
        match (format, bits) {
            (SampleFormat::Float, _) => w.write_sample(i as f32 / 1e4).unwrap(),
            (_, 8) => w.write_sample((i % 100) as i8).unwrap(),
            (_, 16) => w.write_sample(i as i16).unwrap(),
            _ => w.write_sample(i as i32).unwrap(),
        }
    }
    w.finalize().unwrap();
}

fn err_text(r: anyhow::Result<impl std::fmt::Debug>) -> String {
    format!("{:#}", r.expect_err("should be an error"))
}

#[test]
fn mono_pcm16_and_float32_are_read() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("a.wav");
    write(&p, 1, 16, SampleFormat::Int, 16000, 100);
    let w = read_wav(&p, None).unwrap();
    assert_eq!(w.sample_rate_hz, 16000);
    assert_eq!(w.samples, Samples::I16((0..100).collect()));
    write(&p, 1, 32, SampleFormat::Float, 8000, 50);
    let Samples::F32(v) = read_wav_for(&p, None, 8000).unwrap() else {
        panic!("float expected")
    };
    assert_eq!(v.len(), 50);
}

#[test]
fn stereo_needs_a_channel_choice() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("s.wav");
    write(&p, 2, 16, SampleFormat::Int, 16000, 4);
    assert!(err_text(read_wav(&p, None)).contains("--channel left, right or mix"));
    // Interleaved samples 0,1 | 2,3 | 4,5 | 6,7.
    assert_eq!(
        read_wav(&p, Some(ChannelChoice::Left)).unwrap().samples,
        Samples::I16(vec![0, 2, 4, 6])
    );
    assert_eq!(
        read_wav(&p, Some(ChannelChoice::Right)).unwrap().samples,
        Samples::I16(vec![1, 3, 5, 7])
    );
    assert_eq!(
        read_wav(&p, Some(ChannelChoice::Mix)).unwrap().samples,
        Samples::I16(vec![0, 2, 4, 6])
    );
    write(&p, 3, 16, SampleFormat::Int, 16000, 4);
    assert!(err_text(read_wav(&p, Some(ChannelChoice::Mix))).contains("3 channels"));
}

#[test]
fn other_formats_rates_and_broken_files_are_clear_errors() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("x.wav");
    for bits in [8, 24, 32] {
        write(&p, 1, bits, SampleFormat::Int, 16000, 10);
        let e = err_text(read_wav(&p, None));
        assert!(
            e.contains(&format!("{bits}-bit integer")) && e.contains("16-bit PCM or 32-bit float"),
            "{e}"
        );
    }
    write(&p, 1, 16, SampleFormat::Int, 44100, 10);
    let e = err_text(read_wav_for(&p, None, 16000));
    assert!(
        e.contains("44100 Hz") && e.contains("16000 Hz") && e.contains("nothing is resampled"),
        "{e}"
    );

    std::fs::write(&p, b"this is not a wave file at all, just text").unwrap();
    assert!(err_text(read_wav(&p, None)).contains("not a readable WAV file"));
    std::fs::write(&p, b"").unwrap();
    assert!(err_text(read_wav(&p, None)).contains("x.wav"));
    assert!(err_text(read_wav(&dir.path().join("missing.wav"), None)).contains("missing.wav"));

    write(&p, 1, 16, SampleFormat::Int, 16000, 1000);
    let bytes = std::fs::read(&p).unwrap();
    std::fs::write(&p, &bytes[..bytes.len() - 501]).unwrap();
    let e = err_text(read_wav(&p, None));
    assert!(e.contains("truncated"), "{e}");
}

#[test]
fn non_finite_float_samples_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("nan.wav");
    let spec = WavSpec {
        channels: 1,
        sample_rate: 16000,
        bits_per_sample: 32,
        sample_format: SampleFormat::Float,
    };
    let mut w = WavWriter::create(&p, spec).unwrap();
    for i in 0..100 {
        w.write_sample(if i == 42 { f32::NAN } else { 0.1 })
            .unwrap();
    }
    w.finalize().unwrap();
    let e = err_text(read_wav(&p, None));
    assert!(e.contains("non-finite") && e.contains("sample 42"), "{e}");
}

/// Found (issue 9): finite float samples beyond full scale were accepted
/// (±1e30 gave 385 dB), and a stereo mix of two large values overflowed to
/// ∞ after the finiteness check.
#[test]
fn float_samples_beyond_full_scale_are_refused_and_mixing_cannot_overflow() {
    let dir = tempfile::tempdir().unwrap();
    let float_wav = |name: &str, channels: u16, values: &[f32]| {
        let p = dir.path().join(name);
        let spec = WavSpec {
            channels,
            sample_rate: 16000,
            bits_per_sample: 32,
            sample_format: SampleFormat::Float,
        };
        let mut w = WavWriter::create(&p, spec).unwrap();
        for &v in values {
            w.write_sample(v).unwrap();
        }
        w.finalize().unwrap();
        p
    };
    for bad in [1e30f32, -3e38, 1.0001, -1.5] {
        let mut v = vec![0.1f32; 100];
        v[17] = bad;
        let p = float_wav("loud.wav", 1, &v);
        let e = err_text(read_wav(&p, None));
        assert!(
            e.contains("outside the full-scale range [-1, 1]")
                && e.contains("sample 17")
                && e.contains("loud.wav"),
            "{e}"
        );
    }
    // The extremes of the range mix without overflow.
    let p = float_wav("edges.wav", 2, &[1.0, 1.0, -1.0, -1.0, 1.0, -1.0]);
    let wav = read_wav(&p, Some(stapes_sim::wav::ChannelChoice::Mix)).unwrap();
    let stapes_sim::run::Samples::F32(x) = wav.samples else {
        panic!("float samples")
    };
    assert_eq!(x, [1.0, -1.0, 0.0]);
}

#[test]
fn cut_or_scrambled_files_are_errors_not_panics() {
    use rand::Rng;
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("good.wav");
    write(&p, 2, 16, SampleFormat::Int, 16000, 500);
    let good = std::fs::read(&p).unwrap();
    let bad = dir.path().join("bad.wav");
    let mut r = stapes_tests::rng(78);
    for round in 0..400 {
        let mut b = good.clone();
        if round % 2 == 0 {
            b.truncate(r.random_range(0..good.len()));
        } else {
            for _ in 0..r.random_range(1..8) {
                let i = r.random_range(0..b.len().min(64));
                b[i] = r.random();
            }
        }
        std::fs::write(&bad, &b).unwrap();
        // Either a clear error naming the file, or samples.
        if let Err(e) = read_wav(&bad, Some(ChannelChoice::Mix)) {
            assert!(format!("{e:#}").contains("bad.wav"), "{e:#}");
        }
    }
}

/// Found (issue 9): a valid file with an odd-length unknown chunk (and the
/// pad byte RIFF requires after it) was refused with "Failed to read enough
/// bytes"; a zero-byte file and a rate of 0 got unhelpful messages.
#[test]
fn odd_length_chunks_are_skipped_with_their_pad_byte_and_empty_or_rateless_files_are_named() {
    let dir = tempfile::tempdir().unwrap();
    // RIFF layout (common practice): "RIFF" size "WAVE", then chunks of id,
    // little-endian size and body, an odd body followed by one pad byte.
    let wav = |chunks: &[(&[u8; 4], Vec<u8>)]| {
        let mut body = b"WAVE".to_vec();
        for (id, data) in chunks {
            body.extend_from_slice(*id);
            body.extend_from_slice(&(data.len() as u32).to_le_bytes());
            body.extend_from_slice(data);
            if data.len() % 2 == 1 {
                body.push(0);
            }
        }
        let mut out = b"RIFF".to_vec();
        out.extend_from_slice(&(body.len() as u32).to_le_bytes());
        out.extend_from_slice(&body);
        out
    };
    let fmt = |rate: u32| {
        let mut f = Vec::new();
        for v in [1u16, 1] {
            f.extend_from_slice(&v.to_le_bytes());
        }
        f.extend_from_slice(&rate.to_le_bytes());
        f.extend_from_slice(&(rate * 2).to_le_bytes());
        for v in [2u16, 16] {
            f.extend_from_slice(&v.to_le_bytes());
        }
        f
    };
    let samples: Vec<i16> = (0..200).map(|i| i * 37 - 3000).collect();
    let data: Vec<u8> = samples.iter().flat_map(|s| s.to_le_bytes()).collect();
    let p = dir.path().join("odd.wav");
    std::fs::write(
        &p,
        wav(&[
            (b"fmt ", fmt(16000)),
            (b"LIST", b"INFOabc".to_vec()),
            (b"data", data.clone()),
        ]),
    )
    .unwrap();
    let got = read_wav(&p, None).unwrap();
    assert_eq!(got.sample_rate_hz, 16000);
    let stapes_sim::run::Samples::I16(x) = got.samples else {
        panic!("16-bit samples")
    };
    assert_eq!(x, samples);
    // An odd chunk before the format chunk too.
    std::fs::write(
        &p,
        wav(&[
            (b"junk", vec![1, 2, 3]),
            (b"fmt ", fmt(16000)),
            (b"data", data.clone()),
        ]),
    )
    .unwrap();
    assert!(read_wav(&p, None).is_ok());
    let empty = dir.path().join("empty.wav");
    std::fs::write(&empty, b"").unwrap();
    let e = err_text(read_wav(&empty, None));
    assert!(e.contains("empty.wav is empty (0 bytes)"), "{e}");
    let rateless = dir.path().join("rate0.wav");
    std::fs::write(&rateless, wav(&[(b"fmt ", fmt(0)), (b"data", data)])).unwrap();
    let e = err_text(read_wav(&rateless, None));
    assert!(
        e.contains("rate0.wav") && e.contains("sample rate of 0 Hz"),
        "{e}"
    );
}

/// The whole-buffer decoding (16-bit PCM and 32-bit float) gives exactly the
/// values the WAV crate's per-sample reader gives (hound, from the
/// registries), stereo and mono.
#[test]
fn whole_buffer_decoding_matches_the_wav_crate() {
    use rand::Rng;
    let dir = tempfile::tempdir().unwrap();
    let mut r = stapes_tests::rng(77);
    for (format, bits) in [(SampleFormat::Int, 16u16), (SampleFormat::Float, 32)] {
        for channels in [1u16, 2] {
            let p = dir.path().join(format!("{bits}-{channels}.wav"));
            let spec = WavSpec {
                channels,
                sample_rate: 16000,
                bits_per_sample: bits,
                sample_format: format,
            };
            let mut w = WavWriter::create(&p, spec).unwrap();
            for _ in 0..2000 {
                if format == SampleFormat::Int {
                    w.write_sample(r.random::<i16>()).unwrap();
                } else {
                    w.write_sample(r.random_range(-1.0f32..=1.0)).unwrap();
                }
            }
            w.finalize().unwrap();
            let choice = (channels == 2).then_some(stapes_sim::wav::ChannelChoice::Right);
            let ours = read_wav(&p, choice).unwrap().samples;
            let mut reader = hound::WavReader::open(&p).unwrap();
            match ours {
                stapes_sim::run::Samples::I16(x) => {
                    let all: Vec<i16> = reader.samples::<i16>().map(|s| s.unwrap()).collect();
                    let want: Vec<i16> = all
                        .iter()
                        .skip(channels as usize - 1)
                        .step_by(channels as usize)
                        .copied()
                        .collect();
                    assert_eq!(x, want);
                }
                stapes_sim::run::Samples::F32(x) => {
                    let all: Vec<f32> = reader.samples::<f32>().map(|s| s.unwrap()).collect();
                    let want: Vec<f32> = all
                        .iter()
                        .skip(channels as usize - 1)
                        .step_by(channels as usize)
                        .copied()
                        .collect();
                    assert_eq!(x, want);
                }
            }
        }
    }
}
