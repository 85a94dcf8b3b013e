//! `stapes match`: find the configuration that reproduces the features a
//! user's own desktop pipeline computed for some clips, and name what a
//! streaming board cannot reproduce.
//!
//! The search models the front end in f64 from the formulas: each
//! candidate's frame spectra (rustfft) times the reference's filterbank
//! matrix ([`crate::reference::reference_matrix`]). From every framing the
//! frame counts allow, it alternates a grid over the filterbank's
//! conventions (mel formula, band gain, triangle placement, band edges)
//! with the spectral ones one at a time (window, pre-emphasis, power or
//! magnitude), ranking candidates by one least-squares fit on the loud half
//! of the values; the best then gets the full fit of the log's conventions
//! (log kind, gain, offset, added energy or floor, bounds: least squares
//! for each added energy tried) and golden-section refinement of its edges.
//! Clip-relative conventions (an offset per clip, a floor relative to the
//! clip's maximum, per-clip mean removal) are allowed for while searching
//! and then reported, with their measured effect. The
//! verdict comes from the board's own `f32` core run on the clips with the
//! configuration found, against the user's features.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow, bail};
use stapes_core::config::{
    BandGain, FeatureConfig, LogKind, MelScale, SpectrumKind, TrianglePlacement, WindowShape,
};
use stapes_core::stage_config::{LevelMapConfig, StageConfig};

use crate::check::{Arith, CoreTables};
use crate::clip_runner::{ClipRunner, FlatValues, SampleSlice};
use crate::generate::GeneratedTables;
use crate::run::Samples;

/// How the features' array is laid out.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum Orientation {
    /// Decide from the frame counts.
    Auto,
    /// `[frames, values]`.
    FramesFirst,
    /// `[values, frames]`.
    ValuesFirst,
}

/// `stapes match`.
#[derive(clap::Args, Debug)]
pub struct MatchArgs {
    /// A clip the user's pipeline computed features for (WAV); give as many
    /// as --features, in the same order.
    #[arg(long = "clip", value_name = "FILE.wav", required = true)]
    pub clips: Vec<PathBuf>,
    /// The user's features for the clip at the same position (.npy, 2-D,
    /// float or integer, either orientation).
    #[arg(long = "features", value_name = "FILE.npy", required = true)]
    pub features: Vec<PathBuf>,
    /// How the feature arrays are laid out.
    #[arg(long, value_enum, default_value = "auto")]
    pub orientation: Orientation,
    /// Where the configuration, the report and the figure go.
    #[arg(long, value_name = "DIR", default_value = "match-out")]
    pub output_dir: PathBuf,
}

/// One clip and the user's features for it.
struct Pair {
    name: String,
    rate: u32,
    samples: Samples,
    unit: Vec<f64>,
    /// `[frame][value]`.
    user: Vec<Vec<f64>>,
}

/// How the user's frames sit on the clip: frame `t`'s window starts at
/// `t·hop − lead` (a lead > 0 means frames centred with padding).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Framing {
    window: u32,
    fft: u32,
    hop: u32,
    lead: usize,
}

/// The discrete and continuous conventions before the log.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Candidate {
    framing: Framing,
    shape: WindowShape,
    pre_emphasis: Option<f32>,
    spectrum: SpectrumKind,
    scale: MelScale,
    triangles: TrianglePlacement,
    gain: BandGain,
    low: f32,
    high: f32,
}

/// What may differ per clip (found before the search, or allowed for in it).
#[derive(Clone, Copy, Debug, PartialEq, Default)]
struct ClipRelative {
    /// Each band's mean over the clip removed.
    mean_removed: bool,
    /// And divided by its deviation over the clip.
    variance_scaled: bool,
}

/// The log's conventions fitted to the user's values.
#[derive(Clone, Debug, PartialEq)]
struct LogFit {
    /// Output units per natural-log unit.
    gain_ln: f64,
    /// Offset, one for all clips.
    offset: f64,
    /// Energy added before the log (0: none).
    added: f64,
    /// Lower bound (a floor on the output), if values pile up there.
    lower: Option<f64>,
    /// Upper bound.
    upper: Option<f64>,
    /// Offsets per clip when they differ (a clip-relative reference).
    per_clip_offsets: Vec<f64>,
    /// Lower bounds per clip when they differ.
    per_clip_lower: Vec<Option<f64>>,
    /// RMS and max residual over the compared cells, with per-clip offsets.
    rms: f64,
    max: f64,
}

fn config_of(c: &Candidate, rate: u32, bands: u32) -> FeatureConfig {
    FeatureConfig {
        sample_rate_hz: rate,
        window_samples: c.framing.window,
        fft_points: c.framing.fft,
        hop_samples: c.framing.hop,
        window: c.shape,
        dc_removal_pole: None,
        pre_emphasis: c.pre_emphasis,
        bands,
        low_edge_hz: c.low,
        high_edge_hz: c.high,
        mel_scale: c.scale,
        triangles: c.triangles,
        band_gain: c.gain,
        spectrum: c.spectrum,
        log: LogKind::Decibel,
        floor_db: -300.0,
        stages: StageConfig::NONE,
    }
}

/// Reads a 2-D `.npy` of any real dtype as f64, in C order.
fn read_any(path: &Path) -> Result<(Vec<usize>, Vec<f64>)> {
    let bytes = std::fs::read(path).with_context(|| format!("cannot read {}", path.display()))?;
    let open = || {
        npyz::NpyFile::new(&bytes[..]).map_err(|e| {
            anyhow!(
                "{} is not a readable .npy file ({e}): save it with numpy.save",
                path.display()
            )
        })
    };
    let npy = open()?;
    let shape: Vec<usize> = npy.shape().iter().map(|&d| d as usize).collect();
    let fortran = npy.order() == npyz::Order::Fortran;
    if shape.len() != 2 {
        bail!(
            "{} has shape {shape:?}: give one clip's features as a 2-D array (frames x values)",
            path.display()
        );
    }
    let descr = npy.dtype().descr();
    macro_rules! try_as {
        ($($t:ty),*) => {
            $(if let Ok(v) = open()?.into_vec::<$t>() {
                Some(v.into_iter().map(|x| x as f64).collect::<Vec<f64>>())
            } else)* { None }
        };
    }
    let mut data = try_as!(f64, f32, i64, i32, i16, i8, u8, u16, u32).ok_or_else(|| {
        anyhow!(
            "{} holds {descr}: give float or integer features",
            path.display()
        )
    })?;
    if fortran {
        // Column-major: transpose to C order.
        let (r, c) = (shape[0], shape[1]);
        let mut t = vec![0.0; r * c];
        for i in 0..r {
            for j in 0..c {
                t[i * c + j] = data[j * r + i];
            }
        }
        data = t;
    }
    if let Some(i) = data.iter().position(|v| !v.is_finite()) {
        bail!(
            "{} holds a non-finite value at flat index {i}: the board's features are always finite; give finite features",
            path.display()
        );
    }
    Ok((shape, data))
}

fn common_hops(rate: u32) -> Vec<u32> {
    let mut v: Vec<u32> = [
        5.0, 8.0, 10.0, 12.5, 15.0, 16.0, 20.0, 25.0, 30.0, 32.0, 40.0, 50.0,
    ]
    .iter()
    .map(|ms| (rate as f64 * ms / 1000.0).round() as u32)
    .chain([64, 80, 128, 160, 256, 320, 512])
    .collect();
    v.sort_unstable();
    v.dedup();
    v
}

fn common_windows(rate: u32) -> Vec<u32> {
    let mut v: Vec<u32> = [16.0, 20.0, 25.0, 30.0, 32.0, 40.0, 50.0, 64.0]
        .iter()
        .map(|ms| (rate as f64 * ms / 1000.0).round() as u32)
        .chain([128, 256, 512, 1024, 2048])
        .collect();
    v.sort_unstable();
    v.dedup();
    v
}

/// Every framing whose frame counts equal the user's for every clip.
fn framings(pairs: &[Pair]) -> Vec<Framing> {
    let rate = pairs[0].rate;
    let mut out = Vec::new();
    for &hop in &common_hops(rate) {
        for &window in &common_windows(rate) {
            if window < hop || window > 4096 {
                continue;
            }
            let pow = window.next_power_of_two();
            for fft in [pow, pow * 2] {
                if fft > 4096 {
                    continue;
                }
                // Frames only where complete: no lead.
                let valid = pairs.iter().all(|p| {
                    let l = p.unit.len();
                    l >= window as usize && (l - window as usize) / hop as usize + 1 == p.user.len()
                });
                if valid {
                    out.push(Framing {
                        window,
                        fft,
                        hop,
                        lead: 0,
                    });
                }
                // Centred frames (padding at both edges): 1 + L / hop.
                let centred = pairs
                    .iter()
                    .all(|p| p.unit.len() / hop as usize + 1 == p.user.len());
                if centred {
                    for lead in [window as usize / 2, fft as usize / 2] {
                        let f = Framing {
                            window,
                            fft,
                            hop,
                            lead,
                        };
                        if !out.contains(&f) {
                            out.push(f);
                        }
                    }
                }
            }
        }
    }
    out
}

/// The frames of a clip whose windows lie wholly inside it.
fn interior(f: &Framing, len: usize, frames: usize) -> std::ops::Range<usize> {
    let first = f.lead.div_ceil(f.hop as usize);
    let last = (len + f.lead)
        .checked_sub(f.window as usize)
        .map_or(0, |v| v / f.hop as usize + 1);
    first.min(frames)..last.min(frames).max(first.min(frames))
}

/// The spectra of the user's frames for the candidate's spectral
/// conventions (framing, window, pre-emphasis, power or magnitude): per
/// clip, `[frame][bin]`, with zero samples outside the clip and the
/// pre-emphasis run from zero state over that stream, as the board runs it.
/// Straight from the formulas in f64 (rustfft); the filterbanks tried are
/// then one sparse product each.
struct Spectra {
    per_clip: Vec<Vec<Vec<f64>>>,
}

fn spectra(pairs: &[Pair], c: &Candidate) -> Spectra {
    use rustfft::num_complex::Complex64;
    let f = &c.framing;
    let window = crate::reference::reference_window(c.shape, f.window as usize);
    let n = f.fft as usize;
    let fft = rustfft::FftPlanner::<f64>::new().plan_fft_forward(n);
    let bins = n / 2 + 1;
    let mut buf = vec![Complex64::new(0.0, 0.0); n];
    let per_clip = pairs
        .iter()
        .map(|p| {
            let need = (p.user.len() - 1) * f.hop as usize + f.window as usize;
            let mut x = vec![0.0; f.lead];
            x.extend_from_slice(&p.unit);
            x.resize(need.max(x.len()), 0.0);
            if let Some(a) = c.pre_emphasis {
                let (a, mut last) = (a as f64, 0.0);
                for v in x.iter_mut() {
                    let out = *v - a * last;
                    last = *v;
                    *v = out;
                }
            }
            (0..p.user.len())
                .map(|t| {
                    let s = t * f.hop as usize;
                    for (i, z) in buf.iter_mut().enumerate() {
                        let v = window.get(i).map_or(0.0, |w| x[s + i] * w);
                        *z = Complex64::new(v, 0.0);
                    }
                    fft.process(&mut buf);
                    buf[..bins]
                        .iter()
                        .map(|z| match c.spectrum {
                            SpectrumKind::Power => z.norm_sqr(),
                            SpectrumKind::Magnitude => z.norm(),
                        })
                        .collect()
                })
                .collect()
        })
        .collect();
    Spectra { per_clip }
}

/// A candidate's filterbank (the reference's dense matrix), kept as each
/// band's first bin and its weights up to its last nonzero one; `None` for
/// a configuration the validator refuses.
struct Bank {
    rows: Vec<(usize, Vec<f64>)>,
}

fn bank(c: &Candidate, rate: u32, bands: u32) -> Option<Bank> {
    let config = config_of(c, rate, bands);
    config.validate().ok()?;
    let m = crate::reference::reference_matrix(&config);
    let bins = c.framing.fft as usize / 2 + 1;
    let rows = m
        .chunks(bins)
        .map(|r| {
            let first = r.iter().position(|&w| w != 0.0).unwrap_or(0);
            let last = r.iter().rposition(|&w| w != 0.0).map_or(first, |l| l + 1);
            (first, r[first..last].to_vec())
        })
        .collect();
    Some(Bank { rows })
}

/// Band energies `[clip][frame][band]`.
fn mel(s: &Spectra, b: &Bank) -> Vec<Vec<Vec<f64>>> {
    s.per_clip
        .iter()
        .map(|clip| {
            clip.iter()
                .map(|row| {
                    b.rows
                        .iter()
                        .map(|(first, w)| w.iter().zip(&row[*first..]).map(|(a, b)| a * b).sum())
                        .collect()
                })
                .collect()
        })
        .collect()
}

/// Removes each band's clip mean (and scales by its deviation) in place.
fn clip_normalise(rows: &mut [Vec<f64>], rel: ClipRelative) {
    if !rel.mean_removed || rows.is_empty() {
        return;
    }
    let n = rows.len() as f64;
    for b in 0..rows[0].len() {
        let mean = rows.iter().map(|r| r[b]).sum::<f64>() / n;
        let sd = (rows.iter().map(|r| (r[b] - mean).powi(2)).sum::<f64>() / n).sqrt();
        for r in rows.iter_mut() {
            r[b] -= mean;
            if rel.variance_scaled && sd > 0.0 {
                r[b] /= sd;
            }
        }
    }
}

/// Values at a clip's extreme that repeat: a bound.
fn pile(values: impl Iterator<Item = f64>, lowest: bool) -> Option<f64> {
    let v: Vec<f64> = values.collect();
    if v.is_empty() {
        return None;
    }
    let ext = if lowest {
        v.iter().copied().fold(f64::INFINITY, f64::min)
    } else {
        v.iter().copied().fold(f64::NEG_INFINITY, f64::max)
    };
    let tol = 1e-6 * ext.abs().max(1e-3);
    let count = v.iter().filter(|&&x| (x - ext).abs() <= tol).count();
    // Three values equal to the extreme are a bound: measured values do not
    // repeat their extreme exactly by chance.
    (count >= 3).then_some(ext)
}

/// Cells compared by the fit: interior frames, values off the bounds.
struct Cells {
    /// Per clip: (frame, band) pairs.
    per_clip: Vec<Vec<(usize, usize)>>,
    lower: Vec<Option<f64>>,
    upper: Vec<Option<f64>>,
}

fn cells(pairs: &[Pair], f: &Framing) -> Cells {
    let mut out = Cells {
        per_clip: Vec::new(),
        lower: Vec::new(),
        upper: Vec::new(),
    };
    // Bounds from every frame of each clip (the edge frames reach them
    // too); one that two or more clips agree on holds for every clip, even
    // one with fewer than three values at it.
    let piles = |lowest: bool| -> Vec<Option<f64>> {
        let each: Vec<Option<f64>> = pairs
            .iter()
            .map(|p| pile(p.user.iter().flatten().copied(), lowest))
            .collect();
        let found: Vec<f64> = each.iter().flatten().copied().collect();
        let agree = found
            .iter()
            .all(|v| (v - found[0]).abs() <= 1e-6 * found[0].abs().max(1.0));
        match found.first() {
            Some(&common) if agree && found.len() >= 2 => vec![Some(common); pairs.len()],
            _ => each,
        }
    };
    let (mut lows, highs) = (piles(true), piles(false));
    // Without a bound, the lowest value of all may still be one floored
    // value: it is left out of the fit, and the run decides on it.
    if lows.iter().all(Option::is_none) {
        let lowest = global_min(pairs);
        lows = vec![Some(lowest); pairs.len()];
    }
    let tol = |b: f64| 1e-6 * b.abs().max(1e-3);
    for ((p, lo), hi) in pairs.iter().zip(lows).zip(highs) {
        let range = interior(f, p.unit.len(), p.user.len());
        let mut keep = Vec::new();
        for t in range {
            for (b, &y) in p.user[t].iter().enumerate() {
                let off_lo = lo.is_none_or(|l| y > l + tol(l));
                let off_hi = hi.is_none_or(|h| y < h - tol(h));
                if off_lo && off_hi {
                    keep.push((t, b));
                }
            }
        }
        out.per_clip.push(keep);
        out.lower.push(lo);
        out.upper.push(hi);
    }
    out
}

/// The lowest value of every clip's features.
fn global_min(pairs: &[Pair]) -> f64 {
    pairs
        .iter()
        .flat_map(|p| p.user.iter().flatten())
        .copied()
        .fold(f64::INFINITY, f64::min)
}

/// Least squares of the user's values on `ln(E + added)` with one gain and
/// an offset per clip; residuals with per-clip offsets.
fn fit_log(
    pairs: &[Pair],
    e: &[Vec<Vec<f64>>],
    cells: &Cells,
    added: f64,
    rel: ClipRelative,
) -> Option<LogFit> {
    // The board's log values, clip-normalised as the user's were.
    let xs: Vec<Vec<Vec<f64>>> = e
        .iter()
        .map(|clip| {
            let mut rows: Vec<Vec<f64>> = clip
                .iter()
                .map(|r| r.iter().map(|&v| (v + added).max(1e-300).ln()).collect())
                .collect();
            clip_normalise(&mut rows, rel);
            rows
        })
        .collect();
    let (mut sxy, mut sxx) = (0.0, 0.0);
    let mut means = Vec::new();
    for (c, keep) in cells.per_clip.iter().enumerate() {
        if keep.is_empty() {
            means.push((0.0, 0.0));
            continue;
        }
        let n = keep.len() as f64;
        let mx = keep.iter().map(|&(t, b)| xs[c][t][b]).sum::<f64>() / n;
        let my = keep.iter().map(|&(t, b)| pairs[c].user[t][b]).sum::<f64>() / n;
        for &(t, b) in keep {
            let (dx, dy) = (xs[c][t][b] - mx, pairs[c].user[t][b] - my);
            sxy += dx * dy;
            sxx += dx * dx;
        }
        means.push((mx, my));
    }
    if sxx <= 0.0 {
        return None;
    }
    let g = sxy / sxx;
    let offsets: Vec<f64> = means.iter().map(|(mx, my)| my - g * mx).collect();
    let (mut ss, mut n, mut max) = (0.0, 0usize, 0.0f64);
    for (c, keep) in cells.per_clip.iter().enumerate() {
        for &(t, b) in keep {
            let r = pairs[c].user[t][b] - (g * xs[c][t][b] + offsets[c]);
            ss += r * r;
            max = max.max(r.abs());
            n += 1;
        }
    }
    if n == 0 {
        return None;
    }
    let weights: Vec<usize> = cells.per_clip.iter().map(Vec::len).collect();
    let total: usize = weights.iter().sum();
    let offset = offsets
        .iter()
        .zip(&weights)
        .map(|(o, &w)| o * w as f64)
        .sum::<f64>()
        / total.max(1) as f64;
    Some(LogFit {
        gain_ln: g,
        offset,
        added,
        lower: None,
        upper: None,
        per_clip_offsets: offsets,
        per_clip_lower: cells.lower.clone(),
        rms: (ss / n as f64).sqrt(),
        max,
    })
}

/// The best added energy (0, a grid of powers of ten, then golden section).
fn best_log_fit(
    pairs: &[Pair],
    e: &[Vec<Vec<f64>>],
    cells: &Cells,
    rel: ClipRelative,
) -> Option<LogFit> {
    let fit = |a: f64| fit_log(pairs, e, cells, a, rel);
    let mut best = fit(0.0)?;
    let mut best_exp = None;
    for k in -30..=8 {
        let a = 10f64.powf(k as f64 / 2.0);
        if let Some(f) = fit(a)
            && f.rms < best.rms * 0.999
        {
            best = f;
            best_exp = Some(k as f64 / 2.0);
        }
    }
    if let Some(mid) = best_exp {
        let score = |x: f64| fit(10f64.powf(x)).map_or(f64::INFINITY, |f| f.rms);
        let x = golden_min(score, mid - 0.5, mid + 0.5, 1e-9);
        if let Some(f) = fit(10f64.powf(x))
            && f.rms <= best.rms
        {
            best = f;
        }
    }
    Some(best)
}

/// The minimum of a unimodal `f` on `[lo, hi]` by golden-section search
/// (common practice), to within `tol`.
fn golden_min(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, tol: f64) -> f64 {
    let phi = 0.5 * (5f64.sqrt() - 1.0);
    let (mut x1, mut x2) = (hi - phi * (hi - lo), lo + phi * (hi - lo));
    let (mut f1, mut f2) = (f(x1), f(x2));
    for _ in 0..200 {
        if hi - lo <= tol {
            break;
        }
        if f1 < f2 {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - phi * (hi - lo);
            f1 = f(x1);
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + phi * (hi - lo);
            f2 = f(x2);
        }
    }
    0.5 * (lo + hi)
}

/// Everything the search found for one candidate.
#[derive(Clone, Debug)]
struct Scored {
    candidate: Candidate,
    fit: LogFit,
}

/// One framing's search: the clips, the cells compared, and the loud half
/// of them (where an added energy or a floor does not act), on which
/// candidates are ranked with one least-squares fit each.
struct Search<'a> {
    pairs: &'a [Pair],
    bands: u32,
    rel: ClipRelative,
    cells: Cells,
    loud: Cells,
}

impl Search<'_> {
    fn new<'p>(pairs: &'p [Pair], framing: &Framing, bands: u32, rel: ClipRelative) -> Search<'p> {
        let cells = cells(pairs, framing);
        let loud_cells = cells
            .per_clip
            .iter()
            .zip(pairs)
            .map(|(keep, p)| {
                let mut v: Vec<f64> = keep.iter().map(|&(t, b)| p.user[t][b]).collect();
                v.sort_by(f64::total_cmp);
                let median = v.get(v.len() / 2).copied().unwrap_or(0.0);
                keep.iter()
                    .copied()
                    .filter(|&(t, b)| p.user[t][b] >= median)
                    .collect()
            })
            .collect();
        let loud = Cells {
            per_clip: loud_cells,
            lower: cells.lower.clone(),
            upper: cells.upper.clone(),
        };
        Search {
            pairs,
            bands,
            rel,
            cells,
            loud,
        }
    }

    /// The ranking score: RMS of one fit without an added energy, over the
    /// loud cells.
    fn quick(&self, sp: &Spectra, c: &Candidate) -> f64 {
        bank(c, self.pairs[0].rate, self.bands)
            .and_then(|b| fit_log(self.pairs, &mel(sp, &b), &self.loud, 0.0, self.rel))
            .map_or(f64::INFINITY, |f| f.rms)
    }

    /// The full fit (added energy searched) over every compared cell.
    fn full(&self, sp: &Spectra, c: &Candidate) -> Option<Scored> {
        let b = bank(c, self.pairs[0].rate, self.bands)?;
        let fit = best_log_fit(self.pairs, &mel(sp, &b), &self.cells, self.rel)?;
        Some(Scored { candidate: *c, fit })
    }

    /// The full fit of a candidate whose spectral conventions may differ
    /// from `sp`'s (`same`: they do not).
    fn full_any(&self, sp: &Spectra, same: bool, c: &Candidate) -> Option<Scored> {
        if same {
            self.full(sp, c)
        } else {
            self.full(&spectra(self.pairs, c), c)
        }
    }
}

fn same_spectra(a: &Candidate, b: &Candidate) -> bool {
    a.framing == b.framing
        && a.shape == b.shape
        && a.pre_emphasis == b.pre_emphasis
        && a.spectrum == b.spectrum
}

const LOW_EDGES: [f32; 13] = [
    0.0, 20.0, 25.0, 30.0, 40.0, 50.0, 60.0, 64.0, 80.0, 100.0, 125.0, 133.33, 300.0,
];
const HIGH_EDGES: [f32; 10] = [
    3400.0, 3800.0, 4000.0, 5500.0, 7000.0, 7600.0, 7800.0, 8000.0, 11025.0, 22050.0,
];

const SHAPES: [WindowShape; 5] = [
    WindowShape::Hann,
    WindowShape::HannPeriodic,
    WindowShape::Hamming,
    WindowShape::HammingPeriodic,
    WindowShape::Rectangular,
];
const PRE_EMPHASES: [Option<f32>; 3] = [None, Some(0.95), Some(0.97)];

/// One axis of the search: its name and the candidates it offers from `c`.
type Axis = (&'static str, fn(&Candidate, f32) -> Vec<Candidate>);

fn axes() -> Vec<Axis> {
    vec![
        ("window shape", |c, _| {
            SHAPES.map(|shape| Candidate { shape, ..*c }).to_vec()
        }),
        ("spectrum", |c, _| {
            [SpectrumKind::Power, SpectrumKind::Magnitude]
                .map(|spectrum| Candidate { spectrum, ..*c })
                .to_vec()
        }),
        ("pre-emphasis", |c, _| {
            PRE_EMPHASES
                .map(|pre_emphasis| Candidate { pre_emphasis, ..*c })
                .to_vec()
        }),
        ("mel formula", |c, _| {
            [MelScale::OShaughnessy, MelScale::Slaney]
                .map(|scale| Candidate { scale, ..*c })
                .to_vec()
        }),
        ("band gain", |c, _| {
            [BandGain::PeakOne, BandGain::EqualArea]
                .map(|gain| Candidate { gain, ..*c })
                .to_vec()
        }),
        ("triangle placement", |c, _| {
            [
                TrianglePlacement::ExactFrequency,
                TrianglePlacement::RoundedCentreBins,
            ]
            .map(|triangles| Candidate {
                triangles,
                gain: BandGain::PeakOne,
                ..*c
            })
            .to_vec()
        }),
        ("lower edge", |c, _| {
            LOW_EDGES.map(|low| Candidate { low, ..*c }).to_vec()
        }),
        ("upper edge", |c, nyquist| {
            HIGH_EDGES
                .into_iter()
                .chain([nyquist])
                .filter(|&h| h <= nyquist)
                .map(|high| Candidate { high, ..*c })
                .collect()
        }),
    ]
}

/// Every filterbank of the grid (mel formula × band gain × placement ×
/// edges) on the spectra `sp`, ranked; the best.
fn best_filterbank(search: &Search<'_>, sp: &Spectra, c: &Candidate, nyquist: f32) -> Candidate {
    let mut best = (search.quick(sp, c), *c);
    for scale in [MelScale::OShaughnessy, MelScale::Slaney] {
        for (triangles, gain) in [
            (TrianglePlacement::ExactFrequency, BandGain::PeakOne),
            (TrianglePlacement::ExactFrequency, BandGain::EqualArea),
            (TrianglePlacement::RoundedCentreBins, BandGain::PeakOne),
        ] {
            for low in LOW_EDGES {
                for high in HIGH_EDGES.into_iter().chain([nyquist]) {
                    if high > nyquist {
                        continue;
                    }
                    let cand = Candidate {
                        scale,
                        triangles,
                        gain,
                        low,
                        high,
                        ..*c
                    };
                    let q = search.quick(sp, &cand);
                    if q < best.0 * 0.999 {
                        best = (q, cand);
                    }
                }
            }
        }
    }
    best.1
}

/// Golden-section refinement of one edge.
fn refine_edge(search: &Search<'_>, sp: &Spectra, best: &Scored, upper: bool) -> Scored {
    let c0 = best.candidate;
    let nyquist = search.pairs[0].rate as f32 / 2.0;
    let at = |v: f64| {
        let mut c = c0;
        if upper {
            c.high = (v as f32).min(nyquist);
        } else {
            c.low = (v as f32).max(0.0);
        }
        c
    };
    let v0 = if upper { c0.high } else { c0.low } as f64;
    let step = (v0 * 0.05).max(5.0);
    let eval = |v: f64| search.full(sp, &at(v)).map_or(f64::INFINITY, |s| s.fit.rms);
    let x = golden_min(eval, v0 - step, v0 + step, 1e-3);
    match search.full(sp, &at(x)) {
        Some(s) if s.fit.rms < best.fit.rms * 0.999 => s,
        _ => best.clone(),
    }
}

/// A runner-up: one convention changed from the best, and its residual.
struct RunnerUp {
    axis: &'static str,
    change: String,
    rms: f64,
}

fn describe(axis: &str, c: &Candidate) -> String {
    match axis {
        "window shape" => format!("{:?}", c.shape),
        "spectrum" => format!("{:?}", c.spectrum),
        "mel formula" => format!("{:?}", c.scale),
        "band gain" => format!("{:?}", c.gain),
        "triangle placement" => format!("{:?}", c.triangles),
        "pre-emphasis" => c.pre_emphasis.map_or("none".into(), |a| a.to_string()),
        "lower edge" => format!("{} Hz", c.low),
        "upper edge" => format!("{} Hz", c.high),
        _ => format!(
            "window {} fft {} hop {} lead {}",
            c.framing.window, c.framing.fft, c.framing.hop, c.framing.lead
        ),
    }
}

/// The search from one framing: the filterbank grid on the current spectra,
/// then the spectral conventions one at a time with that filterbank,
/// alternating until neither changes; then the full fit, the edges refined,
/// and the runners-up.
fn descend(
    pairs: &[Pair],
    framing: Framing,
    bands: u32,
    rel: ClipRelative,
) -> Option<(Scored, Vec<RunnerUp>)> {
    let nyquist = pairs[0].rate as f32 / 2.0;
    let search = Search::new(pairs, &framing, bands, rel);
    let mut c = Candidate {
        framing,
        shape: WindowShape::HannPeriodic,
        pre_emphasis: None,
        spectrum: SpectrumKind::Power,
        scale: MelScale::OShaughnessy,
        triangles: TrianglePlacement::ExactFrequency,
        gain: BandGain::PeakOne,
        low: 0.0,
        high: nyquist,
    };
    let mut sp = spectra(pairs, &c);
    for _round in 0..4 {
        let before = c;
        c = best_filterbank(&search, &sp, &c, nyquist);
        // Every spectral convention at once (window × pre-emphasis ×
        // spectrum) with that filterbank.
        let mut here = search.quick(&sp, &c);
        for shape in SHAPES {
            for pre_emphasis in PRE_EMPHASES {
                for spectrum in [SpectrumKind::Power, SpectrumKind::Magnitude] {
                    let alt = Candidate {
                        shape,
                        pre_emphasis,
                        spectrum,
                        ..c
                    };
                    if alt == c {
                        continue;
                    }
                    let alt_sp = spectra(pairs, &alt);
                    let q = search.quick(&alt_sp, &alt);
                    if q < here * 0.999 {
                        (c, sp, here) = (alt, alt_sp, q);
                    }
                }
            }
        }
        if c == before {
            break;
        }
    }
    let mut best = search.full(&sp, &c)?;
    // Continuous refinement of the edges that are not already exact.
    if best.fit.rms > 1e-6 {
        for upper in [false, true] {
            best = refine_edge(&search, &sp, &best, upper);
        }
    }
    // Runners-up: the best alternative along each axis.
    let mut runners = Vec::new();
    for (axis, offer) in axes() {
        let alt = offer(&best.candidate, nyquist)
            .into_iter()
            .filter(|a| *a != best.candidate)
            .filter_map(|a| search.full_any(&sp, same_spectra(&a, &best.candidate), &a))
            .min_by(|a, b| a.fit.rms.total_cmp(&b.fit.rms));
        if let Some(a) = alt {
            runners.push(RunnerUp {
                axis,
                change: describe(axis, &a.candidate),
                rms: a.fit.rms,
            });
        }
    }
    Some((best, runners))
}

/// Whether the user's values have each band's clip mean removed (every
/// band's mean within 1e-4 of its spread, in every clip) and, if so,
/// whether their deviation is one.
fn clip_relative(pairs: &[Pair]) -> ClipRelative {
    let mut mean_removed = true;
    let mut unit_variance = true;
    for p in pairs {
        let n = p.user.len() as f64;
        if p.user.len() < 3 {
            return ClipRelative::default();
        }
        for b in 0..p.user[0].len() {
            let mean = p.user.iter().map(|r| r[b]).sum::<f64>() / n;
            let sd = (p.user.iter().map(|r| (r[b] - mean).powi(2)).sum::<f64>() / n).sqrt();
            if mean.abs() > 1e-4 * sd.max(1e-9) {
                mean_removed = false;
            }
            if (sd - 1.0).abs() > 1e-3 {
                unit_variance = false;
            }
        }
    }
    ClipRelative {
        mean_removed,
        variance_scaled: mean_removed && unit_variance,
    }
}

/// A finding about what a streaming board cannot reproduce.
struct Finding {
    what: String,
    effect: String,
    instead: String,
}

/// Snaps a fitted number to a round one when that is within `rel` of it.
fn snap(v: f64, nice: &[f64], rel: f64) -> f64 {
    nice.iter()
        .copied()
        .find(|n| (v - n).abs() <= rel * n.abs().max(1e-3))
        .unwrap_or(v)
}

/// The configuration the board runs: the candidate plus the fitted log.
fn board_config(
    c: &Candidate,
    fit: &LogFit,
    rate: u32,
    bands: u32,
    lower: Option<f64>,
    upper: Option<f64>,
) -> FeatureConfig {
    let db = 10.0 / std::f64::consts::LN_10;
    let mut config = config_of(c, rate, bands);
    // The log kind whose unit makes the gain round.
    let as_db = fit.gain_ln / db;
    let (log, gain) = if [0.1, 1.0, 2.0, 0.2, 20.0]
        .iter()
        .any(|n| (as_db - n).abs() < 1e-3 * n)
    {
        (
            LogKind::Decibel,
            snap(as_db, &[0.1, 1.0, 2.0, 0.2, 20.0], 1e-4),
        )
    } else {
        (LogKind::Natural, snap(fit.gain_ln, &[1.0, 2.0, 0.5], 1e-4))
    };
    config.log = log;
    config.floor_db = -300.0;
    let offset = if fit.offset.abs() < 1e-6 {
        0.0
    } else {
        fit.offset
    };
    let plain = gain == 1.0 && offset.abs() < 1e-9 && fit.added == 0.0 && upper.is_none();
    if plain {
        // A floor on the output is the log's own floor.
        if let Some(l) = lower {
            let floor_db = match log {
                LogKind::Decibel => l,
                LogKind::Natural => l * db,
            };
            config.floor_db = floor_db as f32;
        }
    } else {
        config.stages.level_map = Some(LevelMapConfig {
            added_energy: fit.added as f32,
            gain: gain as f32,
            offset: offset as f32,
            lower: lower.map(|v| v as f32),
            upper: upper.map(|v| v as f32),
        });
    }
    config
}

/// The board's core in `arith` on a clip with `config`, aligned with the user's
/// frames: `(frame index in the user's array, values)`.
fn board_frames(
    config: &FeatureConfig,
    arith: Arith,
    pair: &Pair,
    lead: usize,
) -> Result<Vec<(usize, Vec<f64>)>> {
    let t = GeneratedTables::new(config);
    let form = stapes_core::FilterbankForm::Sparse;
    let core = match arith {
        Arith::F32 => CoreTables::Float(t.view_f32(form)),
        _ => CoreTables::Fixed(t.fixed_tables(form).ok_or_else(|| {
            anyhow!(
                "the fixed path cannot represent floor_db = {} (its output spans ±128 units)",
                config.floor_db
            )
        })?),
    };
    let mut runner = ClipRunner::new(config, arith, core, &t.stages.view(), None, false)?;
    let hop = config.hop_samples as usize;
    // Frame t of the user's starts at t·hop − lead: feed lead mod hop zero
    // samples first, and board frame k is the user's k + lead / hop.
    let z = lead % hop;
    let skip = lead / hop;
    let mut out = FlatValues::F32(Vec::new());
    let values = runner.values_per_frame();
    match &pair.samples {
        Samples::I16(x) => {
            let mut v = vec![0i16; z];
            v.extend_from_slice(x);
            runner.run_clip(SampleSlice::I16(&v), &mut out);
        }
        Samples::F32(x) => {
            let mut v = vec![0f32; z];
            v.extend_from_slice(x);
            runner.run_clip(SampleSlice::F32(&v), &mut out);
        }
    }
    let frames = out.len() / values.max(1);
    Ok((0..frames)
        .map(|k| {
            (
                k + skip,
                (0..values).map(|i| out.get_f64(k * values + i)).collect(),
            )
        })
        .filter(|(t, _)| *t < pair.user.len())
        .collect())
}

/// The clip-relative steps found, applied to the board's values only to
/// measure what else differs.
struct ClipSteps {
    rel: ClipRelative,
    /// Per clip: its offset from the common one.
    shifts: Vec<f64>,
    /// Per clip: its floor relative to its maximum.
    floors: Vec<Option<f64>>,
}

/// The board's residual against the user's features.
struct Measured {
    /// Per value over the interior frames: max, mean, p99.
    band_stats: Vec<(f64, f64, f64)>,
    /// Frames reading padding: clip, frame, largest difference (NaN: a
    /// frame the board does not compute).
    edge_frames: Vec<(String, usize, f64)>,
    /// The first clip's board values at the user's frames (NaN where none).
    board_first: Vec<Vec<f64>>,
}

impl Measured {
    fn worst(&self) -> f64 {
        self.band_stats.iter().map(|s| s.0).fold(0.0, f64::max)
    }
}

fn measure(
    config: &FeatureConfig,
    arith: Arith,
    pairs: &[Pair],
    framing: &Framing,
    steps: &ClipSteps,
) -> Result<Measured> {
    let bands = pairs[0].user[0].len();
    let mut per_band: Vec<Vec<f64>> = vec![Vec::new(); bands];
    let mut edge_frames = Vec::new();
    let mut board_first = Vec::new();
    for (i, p) in pairs.iter().enumerate() {
        let frames = board_frames(config, arith, p, framing.lead)?;
        let inner = interior(framing, p.unit.len(), p.user.len());
        let mut rows: Vec<Vec<f64>> = frames.iter().map(|(_, v)| v.clone()).collect();
        if steps.rel.mean_removed {
            clip_normalise(&mut rows, steps.rel);
        }
        for r in rows.iter_mut() {
            for v in r.iter_mut() {
                *v += steps.shifts[i];
                if let Some(l) = steps.floors[i] {
                    *v = v.max(l);
                }
            }
        }
        if i == 0 {
            let mut full = vec![vec![f64::NAN; bands]; p.user.len()];
            for ((t, _), r) in frames.iter().zip(&rows) {
                full[*t] = r.clone();
            }
            board_first = full;
        }
        for ((t, _), r) in frames.iter().zip(&rows) {
            let worst = r
                .iter()
                .zip(&p.user[*t])
                .map(|(b, u)| (b - u).abs())
                .fold(0.0, f64::max);
            if inner.contains(t) {
                for (b, (bv, u)) in r.iter().zip(&p.user[*t]).enumerate() {
                    per_band[b].push((bv - u).abs());
                }
            } else {
                edge_frames.push((p.name.clone(), *t, worst));
            }
        }
        // Frames the board never produces (their windows start before the clip).
        for t in 0..(framing.lead / framing.hop as usize).min(p.user.len()) {
            if !frames.iter().any(|(k, _)| *k == t) {
                edge_frames.push((p.name.clone(), t, f64::NAN));
            }
        }
    }
    let stats = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        let n = v.len().max(1);
        let max = v.last().copied().unwrap_or(0.0);
        let mean = v.iter().sum::<f64>() / n as f64;
        let p99 = v
            .get(((n as f64 * 0.99) as usize).min(n - 1))
            .copied()
            .unwrap_or(0.0);
        (max, mean, p99)
    };
    Ok(Measured {
        band_stats: per_band.iter_mut().map(stats).collect(),
        edge_frames,
        board_first,
    })
}

/// Runs `stapes match`.
pub fn run(a: &MatchArgs) -> Result<crate::commands::Outcome> {
    if a.clips.len() != a.features.len() {
        bail!(
            "{} --clip but {} --features: give one features file per clip, in the same order",
            a.clips.len(),
            a.features.len()
        );
    }
    let mut pairs = Vec::new();
    for (clip, feat) in a.clips.iter().zip(&a.features) {
        let wav = crate::wav::read_wav(clip, None)?;
        let unit: Vec<f64> = match &wav.samples {
            Samples::I16(x) => x.iter().map(|&v| v as f64 / 32768.0).collect(),
            Samples::F32(x) => x.iter().map(|&v| v as f64).collect(),
        };
        let (shape, data) = read_any(feat)?;
        pairs.push((
            clip.clone(),
            Pair {
                name: clip
                    .file_name()
                    .map_or("clip".into(), |n| n.to_string_lossy().into_owned()),
                rate: wav.sample_rate_hz,
                samples: wav.samples,
                unit,
                user: Vec::new(),
            },
            shape,
            data,
        ));
    }
    let rate = pairs[0].1.rate;
    if let Some((c, p, _, _)) = pairs.iter().find(|(_, p, _, _)| p.rate != rate) {
        bail!(
            "{} is at {} Hz and the first clip at {rate} Hz: give clips of one sample rate",
            c.display(),
            p.rate
        );
    }
    // Orientation: the layout under which a framing fits every clip.
    let orient = |p: &mut Pair, shape: &[usize], data: &[f64], frames_first: bool| {
        let (r, c) = (shape[0], shape[1]);
        p.user = if frames_first {
            (0..r).map(|i| data[i * c..(i + 1) * c].to_vec()).collect()
        } else {
            (0..c)
                .map(|j| (0..r).map(|i| data[i * c + j]).collect())
                .collect()
        };
    };
    let tries: &[bool] = match a.orientation {
        Orientation::FramesFirst => &[true],
        Orientation::ValuesFirst => &[false],
        Orientation::Auto => &[true, false],
    };
    let mut chosen = None;
    for &frames_first in tries {
        let mut ps: Vec<Pair> = Vec::new();
        for (_, p, shape, data) in &pairs {
            let mut q = Pair {
                name: p.name.clone(),
                rate: p.rate,
                samples: p.samples.clone(),
                unit: p.unit.clone(),
                user: Vec::new(),
            };
            orient(&mut q, shape, data, frames_first);
            ps.push(q);
        }
        let bands = ps[0].user.first().map_or(0, Vec::len);
        if ps
            .iter()
            .any(|p| p.user.first().map_or(0, Vec::len) != bands)
        {
            continue;
        }
        let f = framings(&ps);
        if !f.is_empty() {
            chosen = Some((ps, f, frames_first));
            break;
        }
    }
    let (pairs, framings, frames_first) = chosen.ok_or_else(|| {
        anyhow!(
            "no common framing gives the features' frame counts for these clips (hops of 5-50 ms, \
             windows of 16-64 ms or a power of two, frames only where complete or centred): \
             check that each features file belongs to the clip beside it, or give --orientation"
        )
    })?;
    let bands = pairs[0].user[0].len() as u32;
    let rel = clip_relative(&pairs);
    eprintln!(
        "match: {} clips at {rate} Hz, {bands} values per frame, {} framings to try",
        pairs.len(),
        framings.len()
    );
    // Every framing the counts allow, each descended in parallel.
    use rayon::prelude::*;
    let mut results: Vec<(Scored, Vec<RunnerUp>)> = framings
        .par_iter()
        .filter_map(|&f| descend(&pairs, f, bands, rel))
        .collect();
    results.sort_by(|a, b| a.0.fit.rms.total_cmp(&b.0.fit.rms));
    let Some((best, mut runners)) = results.first().map(|(s, r)| {
        (
            s.clone(),
            r.iter()
                .map(|x| RunnerUp {
                    axis: x.axis,
                    change: x.change.clone(),
                    rms: x.rms,
                })
                .collect::<Vec<_>>(),
        )
    }) else {
        bail!("no candidate configuration could be evaluated on these clips");
    };
    for (s, _) in results.iter().skip(1).take(3) {
        runners.push(RunnerUp {
            axis: "framing",
            change: describe("framing", &s.candidate),
            rms: s.fit.rms,
        });
    }
    let fit = &best.fit;
    let c = &best.candidate;
    let db = 10.0 / std::f64::consts::LN_10;
    // Findings: what differs per clip.
    let mut findings = Vec::new();
    let cells_best = cells(&pairs, &c.framing);
    let spread = |v: &[f64]| {
        v.iter().copied().fold(f64::NEG_INFINITY, f64::max)
            - v.iter().copied().fold(f64::INFINITY, f64::min)
    };
    let offset_spread = spread(&fit.per_clip_offsets);
    let unit_per_db = fit.gain_ln / db;
    let clip_offsets = pairs.len() > 1 && offset_spread > 1e-3 * unit_per_db.abs().max(1e-9);
    if rel.mean_removed {
        findings.push(Finding {
            what: format!(
                "each band's mean over the clip is removed{}: a streaming board has no clip",
                if rel.variance_scaled {
                    " and its deviation divided out"
                } else {
                    ""
                }
            ),
            effect: "the fitted board values equal the user's only after the same per-clip \
                     normalisation; without it they differ by each clip's band means"
                .into(),
            instead: "normalise with fixed statistics taken over the training set \
                      ([stages.normalise], `stapes statistics` or `stapes export`), and retrain \
                      on those features"
                .into(),
        });
    } else if clip_offsets {
        // The reference level follows the clip: to its maximum, or its mean?
        let maxima: Vec<f64> = pairs
            .iter()
            .map(|p| {
                p.user
                    .iter()
                    .flatten()
                    .copied()
                    .fold(f64::NEG_INFINITY, f64::max)
            })
            .collect();
        let means: Vec<f64> = pairs
            .iter()
            .map(|p| {
                let n = p.user.iter().map(Vec::len).sum::<usize>() as f64;
                p.user.iter().flatten().sum::<f64>() / n
            })
            .collect();
        let to_max = spread(&maxima) < 1e-3 * unit_per_db.abs();
        let to_mean = spread(&means) < 1e-3 * unit_per_db.abs();
        findings.push(Finding {
            what: format!(
                "the level is relative to each clip's {} (the offset differs per clip)",
                if to_max {
                    "maximum"
                } else if to_mean {
                    "mean"
                } else {
                    "own reference"
                }
            ),
            effect: format!(
                "with one fixed reference the board's values are off by up to {:.3} (in the \
                 features' unit; {:.2} dB) across these clips: per clip {}",
                offset_spread,
                offset_spread / unit_per_db.abs(),
                fit.per_clip_offsets
                    .iter()
                    .zip(&pairs)
                    .map(|(o, p)| format!("{} {:+.3}", p.name, o - fit.offset))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            instead: "use a fixed reference level (the offset in [stages.level_map], here the \
                      mean of the clips'), or retrain on the board's own features \
                      (`stapes export`)"
                .into(),
        });
    }
    // A lower bound that moves with the clip's maximum: clipping relative to it.
    // Clips whose values never reach a bound show no pile there: the bound
    // is taken from the clips that do.
    // A bound in the board's domain: with an offset per clip, each clip's
    // bound less its shift (a floor set before a per-clip reference moves
    // with it).
    let shift_of = |i: usize| {
        if clip_offsets && !rel.mean_removed {
            fit.per_clip_offsets[i] - fit.offset
        } else {
            0.0
        }
    };
    let lowers: Vec<f64> = cells_best
        .lower
        .iter()
        .enumerate()
        .filter_map(|(i, l)| l.map(|l| l - shift_of(i)))
        .collect();
    let mut lower = None;
    let mut moving_floor = false;
    if !lowers.is_empty() {
        if spread(&lowers) <= 1e-6 * lowers[0].abs().max(1.0) {
            lower = Some(lowers[0]);
        } else {
            moving_floor = true;
            let below: Vec<f64> = pairs
                .iter()
                .zip(&cells_best.lower)
                .filter_map(|(p, l)| l.map(|l| (p, l)))
                .map(|(p, l)| {
                    p.user
                        .iter()
                        .flatten()
                        .copied()
                        .fold(f64::NEG_INFINITY, f64::max)
                        - l
                })
                .collect();
            findings.push(Finding {
                what: format!(
                    "values are clipped at {:.3} below each clip's maximum (a range relative to \
                     the clip)",
                    below[0]
                ),
                effect: format!(
                    "the clip's floor moves with its loudest value: here from {:.3} to {:.3}",
                    lowers.iter().copied().fold(f64::INFINITY, f64::min),
                    lowers.iter().copied().fold(f64::NEG_INFINITY, f64::max)
                ),
                instead: "clip to a fixed floor ([stages.level_map] lower) or relative to each \
                          frame's peak ([stages.range_floor]), and retrain on those features"
                    .into(),
            });
        }
    }
    let uppers: Vec<f64> = cells_best.upper.iter().flatten().copied().collect();
    let upper = (!uppers.is_empty() && spread(&uppers) <= 1e-6 * uppers[0].abs().max(1.0))
        .then(|| uppers[0]);
    let config = board_config(c, fit, rate, bands, lower, upper);
    config.validate().map_err(|e| {
        anyhow!("the configuration found is refused by the validator ({e}): please report it")
    })?;
    let steps = ClipSteps {
        rel,
        shifts: (0..pairs.len()).map(shift_of).collect(),
        floors: (0..pairs.len())
            .map(|i| moving_floor.then_some(cells_best.lower[i]).flatten())
            .collect(),
    };
    // The verdict: the board's f32 core against the user's features. A
    // floor 120 dB down is kept when it changes nothing (the fixed paths'
    // levels reach ±128 units; -300 dB is beyond them).
    let mut config = config;
    let mut measured = measure(&config, Arith::F32, &pairs, &c.framing, &steps)?;
    // A lower bound at the lowest value alone (no value repeats there) is
    // kept only when it brings the board closer.
    let lowest_only = lower.is_some()
        && !pairs
            .iter()
            .any(|p| pile(p.user.iter().flatten().copied(), true).is_some());
    if lowest_only {
        let without = board_config(c, fit, rate, bands, None, upper);
        let m = measure(&without, Arith::F32, &pairs, &c.framing, &steps)?;
        if m.worst() <= measured.worst() {
            (config, measured) = (without, m);
        }
    }
    if config.floor_db == -300.0 {
        let near = FeatureConfig {
            floor_db: -120.0,
            ..config
        };
        let m = measure(&near, Arith::F32, &pairs, &c.framing, &steps)?;
        if m.worst() <= measured.worst() {
            (config, measured) = (near, m);
        }
    }
    let Measured {
        band_stats,
        edge_frames,
        board_first,
    } = measured;
    let worst = band_stats.iter().map(|s| s.0).fold(0.0, f64::max);
    let worst_db = worst / unit_per_db.abs().max(1e-12);
    if c.framing.lead > 0 {
        let padded = edge_frames
            .iter()
            .filter(|e| e.2.is_nan() || e.2 > 0.0)
            .count();
        let known: Vec<f64> = edge_frames
            .iter()
            .map(|e| e.2)
            .filter(|v| !v.is_nan())
            .collect();
        findings.push(Finding {
            what: format!(
                "frames are centred with padding at the clip's edges ({} samples before the \
                 first sample): the first {} and last frames of each clip read padding",
                c.framing.lead,
                c.framing.lead.div_ceil(c.framing.hop as usize)
            ),
            effect: format!(
                "{padded} edge frames over these clips; where the board computes the same \
                 position from zeros before the clip, they differ by up to {:.3} (the features' \
                 unit); the frames starting before the clip a streaming board never computes \
                 (e.g. {})",
                known.iter().copied().fold(0.0, f64::max),
                edge_frames
                    .iter()
                    .filter(|e| e.2.is_nan())
                    .take(4)
                    .map(|e| format!("{} frame {}", e.0, e.1))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            instead: "train without the edge frames (drop them), or on frames only where \
                      complete, or retrain on the board's own features (`stapes export`); the \
                      interior frames are compared above"
                .into(),
        });
    }
    let reproduced = worst_db <= 0.01 && !rel.mean_removed && !clip_offsets && !moving_floor;
    let verdict = if reproduced {
        format!(
            "REPRODUCED: the board's f32 core gives the user's features within {worst:.2e} \
             ({worst_db:.2e} dB) on every compared value{}",
            if findings.is_empty() {
                String::new()
            } else {
                " (see what a streaming board cannot reproduce, below)".into()
            }
        )
    } else if worst_db <= 0.01 {
        format!(
            "REPRODUCED ONLY WITH CLIP-RELATIVE STEPS: within {worst:.2e} ({worst_db:.2e} dB) \
             once the per-clip step below is applied; a streaming board cannot apply it"
        )
    } else if worst_db <= 0.5 {
        format!(
            "CLOSE: the best configuration leaves up to {worst:.3} ({worst_db:.3} dB); a \
             convention outside those searched remains"
        )
    } else {
        format!("NOT REPRODUCED: the best configuration leaves up to {worst:.3} ({worst_db:.2} dB)")
    };
    // Outputs.
    std::fs::create_dir_all(&a.output_dir)
        .with_context(|| format!("cannot create {}", a.output_dir.display()))?;
    let toml = crate::config_source::to_toml(&config);
    let toml = format!(
        "# Found by `stapes match` from {} clips; {verdict}\n{toml}",
        pairs.len()
    );
    let mut report = String::new();
    let _ = writeln!(report, "{verdict}");
    let _ = writeln!(
        report,
        "features: {} clips, {} layout, {bands} values per frame, at {rate} Hz",
        pairs.len(),
        if frames_first {
            "[frames, values]"
        } else {
            "[values, frames]"
        }
    );
    let _ = writeln!(
        report,
        "found: window {} ({:?}), FFT {}, hop {}, frames {}; pre-emphasis {}; {:?} spectrum; \
         {:?} mel from {} to {} Hz, {:?} triangles, {:?} bands; log: {}",
        c.framing.window,
        c.shape,
        c.framing.fft,
        c.framing.hop,
        if c.framing.lead == 0 {
            "only where complete".to_string()
        } else {
            format!(
                "centred ({} samples of padding before the clip)",
                c.framing.lead
            )
        },
        c.pre_emphasis.map_or("none".into(), |a| a.to_string()),
        c.spectrum,
        c.scale,
        c.low,
        c.high,
        c.triangles,
        c.gain,
        describe_log(&config)
    );
    let _ = writeln!(
        report,
        "residual of the board's f32 core against the features, per value over the interior \
         frames (features' unit):"
    );
    let _ = writeln!(report, "  value        max       mean        p99");
    for (b, (max, mean, p99)) in band_stats.iter().enumerate() {
        let _ = writeln!(report, "  {b:>5} {max:>10.3e} {mean:>10.3e} {p99:>10.3e}");
    }
    // The same configuration on the fixed-point cores, for boards without
    // an FPU (their levels are i16 in 1/256 units, their errors the
    // arithmetic's own).
    for arith in [Arith::Fixed32, Arith::Fixed16] {
        let line = match measure(&config, arith, &pairs, &c.framing, &steps) {
            Ok(m) => format!(
                "max residual {:.3e} ({:.3e} dB)",
                m.worst(),
                m.worst() / unit_per_db.abs().max(1e-12)
            ),
            Err(e) => format!("not run: {e:#}"),
        };
        let _ = writeln!(report, "the board's {} core: {line}", arith.name());
    }
    let _ = writeln!(
        report,
        "runners-up (one convention changed; RMS residual of the f64 search, the best is {:.3e}):",
        fit.rms
    );
    runners.sort_by(|a, b| a.rms.total_cmp(&b.rms));
    for r in &runners {
        let _ = writeln!(
            report,
            "  {:<20} {:<40} RMS {:.3e} ({:+.3e} from the best)",
            r.axis,
            r.change,
            r.rms,
            r.rms - fit.rms
        );
    }
    if findings.is_empty() {
        let _ = writeln!(
            report,
            "what a streaming board cannot reproduce: nothing found (no clip-relative level, \
             clipping or normalisation, no edge padding)"
        );
    } else {
        let _ = writeln!(report, "what a streaming board cannot reproduce:");
        for f in &findings {
            let _ = writeln!(report, "  - {}", f.what);
            let _ = writeln!(report, "    effect: {}", f.effect);
            let _ = writeln!(report, "    instead: {}", f.instead);
        }
    }
    let _ = writeln!(report, "the configuration (matched.toml):");
    for line in toml.lines().skip(1) {
        let _ = writeln!(report, "  {line}");
    }
    let _ = writeln!(
        report,
        "wrote {}, {}, {}",
        a.output_dir.join("matched.toml").display(),
        a.output_dir.join("match-report.txt").display(),
        a.output_dir.join("match.png").display()
    );
    crate::output::write_atomic(&a.output_dir.join("matched.toml"), toml.as_bytes())?;
    // The figure: the first clip's user features, the board's, the difference.
    let p = &pairs[0];
    let diff: Vec<Vec<f64>> = p
        .user
        .iter()
        .zip(&board_first)
        .map(|(u, b)| u.iter().zip(b).map(|(u, b)| b - u).collect())
        .collect();
    let centres = crate::commands::band_centres(&config);
    crate::plots::match_figure(
        &a.output_dir.join("match.png"),
        &p.user,
        &board_first,
        &diff,
        config.hop_samples as f64 / rate as f64,
        &centres,
        &p.name,
        if clip_offsets || rel.mean_removed || moving_floor {
            " (and the per-clip step)"
        } else {
            ""
        },
    )?;
    crate::output::write_atomic(&a.output_dir.join("match-report.txt"), report.as_bytes())?;
    crate::say_text!(report);
    Ok(if reproduced {
        crate::commands::Outcome::Success
    } else {
        crate::commands::Outcome::CheckFailed
    })
}

fn describe_log(c: &FeatureConfig) -> String {
    let base = match c.log {
        LogKind::Decibel => "10·log10",
        LogKind::Natural => "ln",
    };
    match c.stages.level_map {
        None => format!("{base}(max(E, {:e}))", 10f64.powf(c.floor_db as f64 / 10.0)),
        Some(m) => format!(
            "clamp({} · {base}(E + {:e}) + {}, {}, {})",
            m.gain,
            m.added_energy,
            m.offset,
            m.lower.map_or("-inf".into(), |v| v.to_string()),
            m.upper.map_or("inf".into(), |v| v.to_string())
        ),
    }
}
