//! The demo clip: a battery-powered irrigation valve node in an orchard hears
//! a few command words ("open", "close", "report") over its pump and the
//! mains hum, at several distances (levels). Everything is synthesised from a
//! fixed seed, so the clip is identical on every machine. Invented data, for
//! the demo only.
//!
//! Vowels are a glottal pulse train through three formant resonators, with
//! formant frequencies from Peterson & Barney (JASA 1952) average values for
//! men (from memory); plosives are filtered noise bursts; fricatives are
//! band-limited noise.

use std::f64::consts::PI;

use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64Mcg;

/// One word placed in the clip.
#[derive(Debug, Clone, PartialEq)]
pub struct WordMark {
    /// The command word.
    pub word: &'static str,
    /// Start time in s.
    pub start_s: f64,
    /// End time in s.
    pub end_s: f64,
    /// Peak level of the word in dBFS.
    pub peak_dbfs: f64,
}

/// The synthesised clip.
#[derive(Debug, Clone)]
pub struct DemoClip {
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// 16-bit samples.
    pub samples: Vec<i16>,
    /// Where the words are.
    pub words: Vec<WordMark>,
}

/// Seed of the shipped demo clip.
pub const DEMO_SEED: u64 = 0x0a7c_4a2d;

#[derive(Clone, Copy)]
enum Seg {
    /// Voiced, formants F1..F3 in Hz, duration in s.
    Vowel(f64, f64, f64, f64),
    /// Noise burst: centre Hz, bandwidth Hz, duration s.
    Burst(f64, f64, f64),
    /// Fricative noise: centre Hz, bandwidth Hz, duration s, voiced.
    Fricative(f64, f64, f64, bool),
    /// Silence (closure), duration s.
    Gap(f64),
}

// Peterson & Barney (1952) average formants of men, Hz (from memory).
const AA: (f64, f64, f64) = (730.0, 1090.0, 2440.0); // "hod"
const AW: (f64, f64, f64) = (570.0, 840.0, 2410.0); // "hawed"
const UH_HOOD: (f64, f64, f64) = (440.0, 1020.0, 2240.0); // "hood"
const IH: (f64, f64, f64) = (390.0, 1990.0, 2550.0); // "hid"
const AH: (f64, f64, f64) = (640.0, 1190.0, 2390.0); // "hud"
const ER: (f64, f64, f64) = (490.0, 1350.0, 1690.0); // "heard"
/// Nasal murmur and lateral approximations (not from the table).
const NASAL: (f64, f64, f64) = (250.0, 1700.0, 2600.0);
const LATERAL: (f64, f64, f64) = (360.0, 1050.0, 2600.0);

fn v(f: (f64, f64, f64), dur: f64) -> Seg {
    Seg::Vowel(f.0, f.1, f.2, dur)
}

fn word(name: &str) -> Vec<Seg> {
    match name {
        "open" => vec![
            v(AW, 0.12),
            v(UH_HOOD, 0.08),
            Seg::Gap(0.05),
            Seg::Burst(900.0, 1500.0, 0.015),
            v(AH, 0.10),
            v(NASAL, 0.09),
        ],
        "close" => vec![
            Seg::Burst(1800.0, 800.0, 0.025),
            Seg::Gap(0.02),
            v(LATERAL, 0.06),
            v(AW, 0.14),
            v(UH_HOOD, 0.06),
            Seg::Fricative(5000.0, 3000.0, 0.14, true),
        ],
        _ => vec![
            v(ER, 0.07),
            v(IH, 0.09),
            Seg::Gap(0.05),
            Seg::Burst(900.0, 1500.0, 0.015),
            v(AA, 0.06),
            v(AW, 0.12),
            v(ER, 0.06),
            Seg::Gap(0.04),
            Seg::Burst(4000.0, 2000.0, 0.02),
        ],
    }
}

/// Two-pole resonator (unity gain at DC), as in formant synthesisers.
#[derive(Clone, Copy, Default)]
struct Resonator {
    y1: f64,
    y2: f64,
}

impl Resonator {
    fn step(&mut self, x: f64, freq: f64, bw: f64, fs: f64) -> f64 {
        let r = (-PI * bw / fs).exp();
        let a1 = 2.0 * r * (2.0 * PI * freq / fs).cos();
        let a2 = -r * r;
        let y = (1.0 - a1 - a2) * x + a1 * self.y1 + a2 * self.y2;
        self.y2 = self.y1;
        self.y1 = y;
        y
    }
}

fn envelope(i: usize, len: usize, ramp: usize) -> f64 {
    let ramp = ramp.min(len / 2).max(1);
    let edge = i.min(len - 1 - i);
    if edge >= ramp {
        1.0
    } else {
        0.5 - 0.5 * (PI * edge as f64 / ramp as f64).cos()
    }
}

fn synth_word(name: &str, fs: f64, rng: &mut Pcg64Mcg) -> Vec<f64> {
    let mut out = Vec::new();
    let mut formants = [Resonator::default(); 3];
    let mut noise_res = Resonator::default();
    let mut tilt = Resonator::default();
    let mut phase = 0.0f64;
    let (mut f1, mut f2, mut f3) = (500.0, 1500.0, 2500.0);
    let segs = word(name);
    let total: f64 = segs
        .iter()
        .map(|s| match *s {
            Seg::Vowel(.., d) | Seg::Burst(.., d) | Seg::Gap(d) => d,
            Seg::Fricative(_, _, d, _) => d,
        })
        .sum();
    let mut t = 0.0;
    for seg in segs {
        let dur = match seg {
            Seg::Vowel(.., d) | Seg::Burst(.., d) | Seg::Gap(d) => d,
            Seg::Fricative(_, _, d, _) => d,
        };
        let len = (dur * fs) as usize;
        for i in 0..len {
            // Falling pitch contour, 125 Hz to 95 Hz over the word.
            let f0 = 125.0 - 30.0 * (t / total);
            t += 1.0 / fs;
            phase += f0 / fs;
            let pulse = if phase >= 1.0 {
                phase -= 1.0;
                1.0
            } else {
                0.0
            };
            let glottal = tilt.step(pulse, 0.0, 400.0, fs) * 60.0;
            let noise = rng.random::<f64>() * 2.0 - 1.0;
            let env = envelope(i, len, (0.012 * fs) as usize);
            let s = match seg {
                Seg::Vowel(a, b, c, _) => {
                    // Glide formants towards the segment's targets (≈ 10 ms).
                    let k = 1.0 - (-1.0 / (0.010 * fs)).exp();
                    f1 += k * (a - f1);
                    f2 += k * (b - f2);
                    f3 += k * (c - f3);
                    let x = formants[0].step(glottal, f1, 80.0, fs);
                    let x = formants[1].step(x, f2, 100.0, fs);
                    formants[2].step(x, f3, 150.0, fs) * env
                }
                Seg::Burst(centre, bw, _) => {
                    noise_res.step(noise, centre, bw, fs)
                        * 3.0
                        * env
                        * (1.0 - i as f64 / len as f64)
                }
                Seg::Fricative(centre, bw, _, voiced) => {
                    let hiss = noise_res.step(noise, centre, bw, fs) * 0.8;
                    let buzz = if voiced { glottal * 0.05 } else { 0.0 };
                    (hiss + buzz) * env
                }
                Seg::Gap(_) => 0.0,
            };
            out.push(s);
        }
    }
    out
}

fn peak(x: &[f64]) -> f64 {
    x.iter().fold(0.0f64, |m, v| m.max(v.abs()))
}

/// Synthesises the demo clip at `sample_rate_hz`.
pub fn demo_clip(sample_rate_hz: u32, seed: u64) -> DemoClip {
    let fs = sample_rate_hz as f64;
    let mut rng = Pcg64Mcg::seed_from_u64(seed);
    let seconds = 4.0;
    let n = (seconds * fs) as usize;
    let mut mix = vec![0.0f64; n];

    // Pump: shaft at 24.5 Hz with harmonics and a blade tone, plus broadband
    // flow noise low-passed at about 1.2 kHz.
    let mut flow = 0.0f64;
    let a = (-2.0 * PI * 1200.0 / fs).exp();
    for (i, m) in mix.iter_mut().enumerate() {
        let t = i as f64 / fs;
        let shaft: f64 = (1..=6)
            .map(|h| (2.0 * PI * 24.5 * h as f64 * t + h as f64).sin() / h as f64)
            .sum();
        let blade = (2.0 * PI * 147.0 * t).sin() * 0.6;
        let white = rng.random::<f64>() * 2.0 - 1.0;
        flow = a * flow + (1.0 - a) * white;
        // Mains hum at 50 Hz with odd harmonics.
        let hum = (2.0 * PI * 50.0 * t).sin()
            + 0.5 * (2.0 * PI * 150.0 * t).sin()
            + 0.25 * (2.0 * PI * 250.0 * t).sin();
        *m = 0.003 * (shaft + blade) + 0.012 * flow + 0.0015 * hum;
    }

    let plan: [(&'static str, f64, f64); 4] = [
        ("open", 0.30, -6.0),
        ("close", 1.20, -16.0),
        ("report", 2.10, -26.0),
        ("open", 3.15, -36.0),
    ];
    let mut words = Vec::new();
    for (name, start_s, peak_dbfs) in plan {
        let w = synth_word(name, fs, &mut rng);
        let gain = 10f64.powf(peak_dbfs / 20.0) / peak(&w);
        let start = (start_s * fs) as usize;
        for (i, s) in w.iter().enumerate() {
            if let Some(m) = mix.get_mut(start + i) {
                *m += s * gain;
            }
        }
        words.push(WordMark {
            word: name,
            start_s,
            end_s: start_s + w.len() as f64 / fs,
            peak_dbfs,
        });
    }
    let samples = mix
        .iter()
        .map(|&x| (x * 32768.0).round().clamp(-32768.0, 32767.0) as i16)
        .collect();
    DemoClip {
        sample_rate_hz,
        samples,
        words,
    }
}
