//! PNG figures: log-mel spectrograms (time in s; band index on the left, band
//! centre in Hz on the right; a colour scale), the error between two runs, and
//! the filterbank's triangles.

use std::path::Path;
use std::sync::Once;

use anyhow::{Result, anyhow};
use plotters::prelude::*;
use plotters::style::FontStyle;

static FONT: Once = Once::new();
const FONT_NAME: &str = "stapes-sans";

fn font() -> &'static str {
    FONT.call_once(|| {
        // DejaVu Sans (Bitstream Vera licence, see assets/DejaVuSans-LICENSE.txt):
        // embedded so plots need no system font libraries.
        let _ = plotters::style::register_font(
            FONT_NAME,
            FontStyle::Normal,
            include_bytes!("../assets/DejaVuSans.ttf"),
        );
    });
    FONT_NAME
}

fn finish_png(tmp: tempfile::NamedTempFile, path: &Path) -> Result<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        tmp.as_file()
            .set_permissions(std::fs::Permissions::from_mode(0o644))
            .ok();
    }
    tmp.persist(path)
        .map_err(|e| anyhow!("cannot write {}: {e}", path.display()))?;
    Ok(())
}

/// A perceptually ordered palette (dark blue → teal → yellow), interpolated.
fn palette(t: f64) -> RGBColor {
    const STOPS: [(f64, (u8, u8, u8)); 5] = [
        (0.0, (20, 12, 60)),
        (0.3, (50, 70, 140)),
        (0.55, (30, 150, 140)),
        (0.8, (140, 210, 80)),
        (1.0, (250, 235, 40)),
    ];
    let t = if t.is_finite() {
        t.clamp(0.0, 1.0)
    } else {
        0.0
    };
    for pair in STOPS.windows(2) {
        let ((t0, c0), (t1, c1)) = (pair[0], pair[1]);
        if t <= t1 {
            let u = (t - t0) / (t1 - t0);
            let mix = |a: u8, b: u8| (a as f64 + (b as f64 - a as f64) * u).round() as u8;
            return RGBColor(mix(c0.0, c1.0), mix(c0.1, c1.1), mix(c0.2, c1.2));
        }
    }
    RGBColor(250, 235, 40)
}

fn err<E: std::fmt::Display>(path: &Path) -> impl Fn(E) -> anyhow::Error + '_ {
    move |e| anyhow!("cannot draw {}: {e}", path.display())
}

/// Draws the colour scale from `lo` to `hi` into `bar`.
fn colour_bar(
    bar: &DrawingArea<BitMapBackend<'_>, plotters::coord::Shift>,
    path: &Path,
    lo: f64,
    hi: f64,
    unit: &str,
    grey_means: Option<&str>,
) -> Result<()> {
    let f = font();
    let span = (hi - lo).max(1e-12);
    let (bar, swatch) = bar.split_vertically(bar.dim_in_pixel().1 as i32 - 70);
    if let Some(text) = grey_means {
        swatch
            .draw(&Rectangle::new(
                [(12, 8), (40, 30)],
                RGBColor(200, 200, 200).filled(),
            ))
            .map_err(err(path))?;
        for (i, line) in text.split('\n').enumerate() {
            swatch
                .draw(&Text::new(
                    line.to_string(),
                    (46, 8 + 15 * i as i32),
                    (f, 12),
                ))
                .map_err(err(path))?;
        }
    }
    let mut scale = ChartBuilder::on(&bar)
        .margin_top(40)
        .margin_bottom(10)
        .margin_right(10)
        .y_label_area_size(60)
        .caption(unit, (f, 14))
        .build_cartesian_2d(0f64..1f64, lo..hi)
        .map_err(err(path))?;
    scale
        .configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .y_label_formatter(&|v: &f64| {
            // Enough decimals to tell the labels (about ten of them) apart.
            if span < 0.1 {
                format!("{v:.1e}")
            } else if span < 10.0 {
                let decimals = (1.0 - (span / 10.0).log10().floor()).max(1.0) as usize;
                // No "-0.000" for a value that rounds to zero.
                let v = if v.abs() < 0.5 * 10f64.powi(-(decimals as i32)) {
                    0.0
                } else {
                    *v
                };
                format!("{v:.decimals$}")
            } else {
                format!("{v:.0}")
            }
        })
        .label_style((f, 12))
        .draw()
        .map_err(err(path))?;
    let steps = 100;
    scale
        .draw_series((0..steps).map(|s| {
            let v0 = lo + span * s as f64 / steps as f64;
            let v1 = lo + span * (s + 1) as f64 / steps as f64;
            Rectangle::new(
                [(0.0, v0), (1.0, v1)],
                palette(s as f64 / steps as f64).filled(),
            )
        }))
        .map_err(err(path))?;
    Ok(())
}

/// What a heat map shows.
pub struct HeatMap<'a> {
    /// Title line.
    pub title: &'a str,
    /// Rows are frames, columns bands; NaN cells are drawn grey.
    pub values: &'a [Vec<f64>],
    /// Seconds between frames.
    pub hop_s: f64,
    /// Band centre frequencies in Hz, for the right axis.
    pub centres_hz: &'a [f64],
    /// Colour scale range.
    pub range: (f64, f64),
    /// Colour scale label.
    pub unit: &'a str,
    /// What a grey (NaN) cell means, shown beside a grey swatch under the
    /// colour scale when there is one.
    pub grey_means: Option<&'a str>,
}

/// A band-index label at integer positions (cell centres) only.
fn band_label(v: f64, bands: usize) -> String {
    let r = v.round();
    if (v - r).abs() < 1e-6 && r >= 0.0 && (r as usize) < bands {
        format!("{r:.0}")
    } else {
        String::new()
    }
}

/// The centre frequency of the band whose cell centre is at `v`.
fn centre_label(v: f64, centres: &[f64]) -> String {
    let r = v.round();
    if (v - r).abs() < 1e-6 && r >= 0.0 && (r as usize) < centres.len() {
        format!("{:.0}", centres[r as usize])
    } else {
        String::new()
    }
}

/// Draws a frames × bands heat map to a PNG, written whole or not at all.
pub fn heat_map(path: &Path, map: &HeatMap<'_>) -> Result<()> {
    let tmp = tempfile::Builder::new()
        .suffix(".png")
        .tempfile_in(path.parent().unwrap_or(Path::new(".")))?;
    {
        let root = BitMapBackend::new(tmp.path(), (1100, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(err(path))?;
        draw_heat_map(&root, path, map)?;
        root.present().map_err(err(path))?;
    }
    finish_png(tmp, path)
}

/// A heat map drawn into `area` (its colour bar on the right).
fn draw_heat_map(
    area: &DrawingArea<BitMapBackend<'_>, plotters::coord::Shift>,
    path: &Path,
    map: &HeatMap<'_>,
) -> Result<()> {
    let f = font();
    {
        let (main, bar) = area.split_horizontally(960);
        let frames = map.values.len();
        let bands = map.centres_hz.len();
        let t_max = (frames.max(1) as f64) * map.hop_s;
        let centres = map.centres_hz.to_vec();
        let mut chart = ChartBuilder::on(&main)
            .caption(map.title, (f, 20))
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(55)
            .right_y_label_area_size(65)
            // Band b's cell spans [b - 0.5, b + 0.5]: a label at b is at
            // the cell's centre, and no label names a band that is not
            // there.
            .build_cartesian_2d(0f64..t_max, -0.5f64..bands as f64 - 0.5)
            .map_err(err(path))?
            .set_secondary_coord(0f64..t_max, -0.5f64..bands as f64 - 0.5);
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc("time (s)")
            .y_desc("band index")
            .y_label_formatter(&|b: &f64| band_label(*b, bands))
            .label_style((f, 13))
            .axis_desc_style((f, 14))
            .draw()
            .map_err(err(path))?;
        chart
            .configure_secondary_axes()
            .y_desc("band centre (Hz), at the cell's centre")
            .y_labels(8)
            .y_label_formatter(&|b: &f64| centre_label(*b, &centres))
            .label_style((f, 13))
            .axis_desc_style((f, 14))
            .draw()
            .map_err(err(path))?;
        let (lo, hi) = map.range;
        let span = (hi - lo).max(1e-12);
        chart
            .draw_series(map.values.iter().enumerate().flat_map(|(i, row)| {
                row.iter().enumerate().map(move |(b, &v)| {
                    let t0 = i as f64 * map.hop_s;
                    let colour = if v.is_nan() {
                        RGBColor(200, 200, 200)
                    } else {
                        palette((v - lo) / span)
                    };
                    Rectangle::new(
                        [(t0, b as f64 - 0.5), (t0 + map.hop_s, b as f64 + 0.5)],
                        colour.filled(),
                    )
                })
            }))
            .map_err(err(path))?;

        let grey = map
            .values
            .iter()
            .flatten()
            .any(|v| v.is_nan())
            .then_some(map.grey_means);
        colour_bar(&bar, path, lo, hi, map.unit, grey.flatten())?;
    }
    Ok(())
}

/// Draws each band's weights against frequency.
///
/// With `mel_axis` the x axis is mel-scaled (O'Shaughnessy's formula,
/// 2595·log10(1 + f/700)), labelled in Hz: triangles equally spaced in mel
/// then look equally wide, and the low bands are not crowded together.
pub fn filterbank(
    path: &Path,
    title: &str,
    bands: &[Vec<(f64, f64)>],
    max_hz: f64,
    mel_axis: bool,
) -> Result<()> {
    let mel = |hz: f64| 2595.0 * (1.0 + hz / 700.0).log10();
    let x_of = |hz: f64| if mel_axis { mel(hz) } else { hz };
    let f = font();
    let tmp = tempfile::Builder::new()
        .suffix(".png")
        .tempfile_in(path.parent().unwrap_or(Path::new(".")))?;
    {
        let root = BitMapBackend::new(tmp.path(), (1100, 420)).into_drawing_area();
        root.fill(&WHITE).map_err(err(path))?;
        let peak = bands
            .iter()
            .flatten()
            .map(|p| p.1)
            .fold(0.0f64, f64::max)
            .max(1e-12)
            * 1.05;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, (f, 20))
            .margin(12)
            .margin_right(36)
            .x_label_area_size(40)
            .y_label_area_size(55)
            .build_cartesian_2d(0f64..x_of(max_hz), 0f64..peak)
            .map_err(err(path))?;
        // On the mel axis, ticks at round frequencies.
        let ticks: Vec<f64> = [
            0.0, 100.0, 250.0, 500.0, 1000.0, 1500.0, 2000.0, 3000.0, 4000.0, 5000.0, 6000.0,
            8000.0, 10000.0, 12000.0, 16000.0, 20000.0, 24000.0,
        ]
        .into_iter()
        .filter(|&t| t <= max_hz)
        .collect();
        let mut mesh = chart.configure_mesh();
        mesh.x_desc(if mel_axis {
            "frequency (Hz), mel-scaled axis"
        } else {
            "frequency (Hz)"
        })
        .y_desc("weight");
        if mel_axis {
            mesh.x_labels(0).disable_x_mesh();
        } else {
            mesh.x_label_formatter(&|x: &f64| format!("{x:.0}"));
        }
        mesh.label_style((f, 13))
            .axis_desc_style((f, 14))
            .draw()
            .map_err(err(path))?;
        if mel_axis {
            // Tick marks and labels drawn by hand at round frequencies.
            for &t in &ticks {
                let x = x_of(t);
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        [(x, 0.0), (x, peak)],
                        RGBColor(225, 225, 225).stroke_width(1),
                    )))
                    .map_err(err(path))?;
                chart
                    .draw_series(std::iter::once(Text::new(
                        format!("{t:.0}"),
                        (x, -peak * 0.02),
                        (f, 12),
                    )))
                    .map_err(err(path))?;
            }
        }
        for (b, points) in bands.iter().enumerate() {
            let colour = palette(b as f64 / bands.len().max(2) as f64 * 0.85);
            chart
                .draw_series(LineSeries::new(
                    points.iter().map(|&(hz, w)| (x_of(hz), w)),
                    colour.stroke_width(2),
                ))
                .map_err(err(path))?;
        }
        root.present().map_err(err(path))?;
    }
    finish_png(tmp, path)
}

/// Draws a band × level heat map of values (rows = levels, columns = bands).
pub fn band_level_map(
    path: &Path,
    title: &str,
    levels_dbfs: &[f64],
    values: &[Vec<f64>],
    centres_hz: &[f64],
) -> Result<()> {
    let f = font();
    let tmp = tempfile::Builder::new()
        .suffix(".png")
        .tempfile_in(path.parent().unwrap_or(Path::new(".")))?;
    {
        let root = BitMapBackend::new(tmp.path(), (900, 520)).into_drawing_area();
        root.fill(&WHITE).map_err(err(path))?;
        let (main, bar) = root.split_horizontally(760);
        let bands = centres_hz.len();
        let cols = levels_dbfs.len();
        let hi = values
            .iter()
            .flatten()
            .copied()
            .fold(0.0f64, f64::max)
            .max(1e-9);
        let levels = levels_dbfs.to_vec();
        let centres = centres_hz.to_vec();
        let mut chart = ChartBuilder::on(&main)
            .caption(title, (f, 16))
            .margin(10)
            .x_label_area_size(40)
            .y_label_area_size(55)
            .right_y_label_area_size(65)
            .build_cartesian_2d(0f64..cols as f64, -0.5f64..bands as f64 - 0.5)
            .map_err(err(path))?
            .set_secondary_coord(0f64..cols as f64, -0.5f64..bands as f64 - 0.5);
        chart
            .configure_mesh()
            .disable_mesh()
            .x_desc("input level (dBFS, peak)")
            .y_desc("band index")
            .x_labels(cols * 2 + 1)
            .x_label_formatter(&|x: &f64| {
                let i = x.floor() as usize;
                if (x - x.floor() - 0.5).abs() < 0.01 && i < levels.len() {
                    format!("{:.0}", levels[i])
                } else {
                    String::new()
                }
            })
            .y_label_formatter(&|b: &f64| band_label(*b, bands))
            .label_style((f, 13))
            .axis_desc_style((f, 14))
            .draw()
            .map_err(err(path))?;
        chart
            .configure_secondary_axes()
            .y_desc("band centre (Hz), at the cell's centre")
            .y_labels(8)
            .y_label_formatter(&|b: &f64| centre_label(*b, &centres))
            .label_style((f, 13))
            .axis_desc_style((f, 14))
            .draw()
            .map_err(err(path))?;
        chart
            .draw_series(values.iter().enumerate().flat_map(|(c, row)| {
                row.iter().enumerate().map(move |(b, &v)| {
                    Rectangle::new(
                        [(c as f64, b as f64 - 0.5), (c as f64 + 1.0, b as f64 + 0.5)],
                        palette(v / hi).filled(),
                    )
                })
            }))
            .map_err(err(path))?;
        colour_bar(&bar, path, 0.0, hi, "dB", None)?;
        root.present().map_err(err(path))?;
    }
    finish_png(tmp, path)
}

/// `stapes match`'s figure: the user's features, the board's and their
/// difference (board − user) for one clip, stacked, each with its own
/// colour scale; frames the board does not compute are grey.
pub fn match_figure(
    path: &Path,
    user: &[Vec<f64>],
    board: &[Vec<f64>],
    difference: &[Vec<f64>],
    hop_s: f64,
    centres_hz: &[f64],
    clip: &str,
    board_note: &str,
) -> Result<()> {
    let finite = |v: &[Vec<f64>]| {
        let it = || v.iter().flatten().copied().filter(|x| x.is_finite());
        let lo = it().fold(f64::INFINITY, f64::min);
        let hi = it().fold(f64::NEG_INFINITY, f64::max);
        if lo.is_finite() && hi > lo {
            (lo, hi)
        } else {
            (lo.min(0.0) - 1.0, hi.max(0.0) + 1.0)
        }
    };
    let (ulo, uhi) = finite(user);
    let d = {
        let (lo, hi) = finite(difference);
        lo.abs().max(hi.abs()).max(1e-9)
    };
    let t1 = format!("{clip}: the user's features (their unit)");
    let t2 = format!("{clip}: the board's f32 core with the configuration found{board_note}");
    let t3 = format!("{clip}: board minus user (grey: a frame the board does not compute)");
    let maps = [
        HeatMap {
            title: &t1,
            values: user,
            hop_s,
            centres_hz,
            range: (ulo, uhi),
            unit: "features' unit",
            grey_means: None,
        },
        HeatMap {
            title: &t2,
            values: board,
            hop_s,
            centres_hz,
            range: (ulo, uhi),
            unit: "features' unit",
            grey_means: Some("not computed"),
        },
        HeatMap {
            title: &t3,
            values: difference,
            hop_s,
            centres_hz,
            range: (-d, d),
            unit: "difference",
            grey_means: Some("not computed"),
        },
    ];
    let tmp = tempfile::Builder::new()
        .suffix(".png")
        .tempfile_in(path.parent().unwrap_or(Path::new(".")))?;
    {
        let root = BitMapBackend::new(tmp.path(), (1100, 1560)).into_drawing_area();
        root.fill(&WHITE).map_err(err(path))?;
        for (area, m) in root.split_evenly((3, 1)).iter().zip(&maps) {
            draw_heat_map(area, path, m)?;
        }
        root.present().map_err(err(path))?;
    }
    finish_png(tmp, path)
}
