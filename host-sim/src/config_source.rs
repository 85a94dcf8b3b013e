//! Where a configuration comes from: a named preset, a TOML file, and CLI flags
//! that override single fields. The result is always validated.
//!
//! A TOML file may start from a preset (`base_preset = "speech16k-40"`) and
//! change any field; every key is optional when a base is given:
//!
//! ```toml
//! base_preset = "speech16k-40"
//! bands = 32
//! window = "hamming"
//! pre_emphasis = 0.97
//! ```
//!
//! The stages after the filterbank each have a table under `[stages]`;
//! a table's presence turns its stage on:
//!
//! ```toml
//! [stages.range_floor]
//! below_peak_db = 60.0
//! [stages.level_map]     # y = clamp(gain·log(max(E, floor) + added_energy) + offset, lower, upper)
//! added_energy = 1e-6    # every key optional: 0, 1, 0, none, none
//! gain = 1.0
//! offset = 0.0
//! lower = -80.0
//! upper = 40.0
//! [stages.mfcc]
//! coefficients = 10
//! lifter = 22            # optional
//! log_energy = true      # optional: the frame's log-energy in place of c0
//! [stages.normalise]     # one mean and deviation per output value
//! mean = [0.0, 0.0]
//! deviation = [1.0, 1.0]
//! [stages.quantise]
//! scale = 2.0
//! zero_point = 0
//! codes = "int8"         # or "uint8"
//! [stages.model_window]
//! frames = 49
//! stride = 1             # optional
//! [stages.pcen]          # in place of the log; every key optional
//! alpha = 0.98
//! ```

use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use serde::Deserialize;
use stapes_core::config::{
    BandGain, FeatureConfig, LogKind, MelScale, MfccConfig, ModelWindowConfig, QuantiseConfig,
    RangeFloorConfig, SpectrumKind, TrianglePlacement, WindowShape,
};
use stapes_core::pcen::PcenParams;
use stapes_core::presets;
use stapes_core::quantise::CodeRange;
use stapes_core::stage_config::LevelMapConfig;

/// Configuration selection shared by every subcommand.
#[derive(Args, Debug, Clone, Default)]
pub struct ConfigArgs {
    /// Named preset (speech16k-40, dsr8k-23, tiny16k-10); the default is speech16k-40.
    #[arg(long, value_name = "NAME", conflicts_with = "config")]
    pub preset: Option<String>,
    /// TOML configuration file (see README: "Configuration file").
    #[arg(long, value_name = "FILE")]
    pub config: Option<PathBuf>,
    /// Override: sample rate in Hz.
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub sample_rate_hz: Option<u32>,
    /// Override: samples per frame.
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub window_samples: Option<u32>,
    /// Override: FFT length (power of two, at least the window).
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub fft_points: Option<u32>,
    /// Override: samples between frame starts.
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub hop_samples: Option<u32>,
    /// Override: window shape (hann, hann-periodic, hamming, hamming-periodic, rectangular).
    #[arg(long, value_name = "SHAPE")]
    pub window: Option<String>,
    /// Override: DC removal pole in [0, 1); "off" disables.
    #[arg(long, value_name = "POLE|off", allow_hyphen_values = true)]
    pub dc_removal_pole: Option<String>,
    /// Override: pre-emphasis coefficient in [0, 1); "off" disables.
    #[arg(long, value_name = "COEF|off", allow_hyphen_values = true)]
    pub pre_emphasis: Option<String>,
    /// Override: number of mel bands.
    #[arg(long, value_name = "N", allow_negative_numbers = true)]
    pub bands: Option<u32>,
    /// Override: lower edge of the first band in Hz.
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub low_edge_hz: Option<f32>,
    /// Override: upper edge of the last band in Hz.
    #[arg(long, value_name = "HZ", allow_negative_numbers = true)]
    pub high_edge_hz: Option<f32>,
    /// Override: mel formula (oshaughnessy, slaney).
    #[arg(long, value_name = "FORMULA")]
    pub mel_scale: Option<String>,
    /// Override: triangle placement (exact-frequency, rounded-centre-bins).
    #[arg(long, value_name = "PLACEMENT")]
    pub triangles: Option<String>,
    /// Override: band gain (peak-one, equal-area).
    #[arg(long, value_name = "GAIN")]
    pub band_gain: Option<String>,
    /// Override: spectrum (power, magnitude).
    #[arg(long, value_name = "KIND")]
    pub spectrum: Option<String>,
    /// Override: log (decibel, natural).
    #[arg(long, value_name = "KIND")]
    pub log: Option<String>,
    /// Override: energy floor in dB.
    #[arg(long, value_name = "DB", allow_hyphen_values = true)]
    pub floor_db: Option<f32>,
    /// Stage: PCEN in place of the log, with its default parameters ("on"), or "off".
    #[arg(long, value_name = "on|off")]
    pub pcen: Option<String>,
    /// Stage: floor each frame this many dB below its loudest value; "off" disables.
    #[arg(long, value_name = "DB|off", allow_hyphen_values = true)]
    pub range_floor_db: Option<String>,
    /// Stage: MFCC with this many coefficients; "off" disables.
    #[arg(long, value_name = "K|off")]
    pub mfcc: Option<String>,
    /// Stage: the MFCC's sinusoidal lifter parameter; "off" disables.
    #[arg(long, value_name = "L|off")]
    pub lifter: Option<String>,
    /// Stage: quantise to codes, as SCALE,ZERO_POINT[,int8|uint8]; "off" disables.
    #[arg(long, value_name = "S,Z[,CODES]|off", allow_hyphen_values = true)]
    pub quantise: Option<String>,
    /// Stage: the model's window, as FRAMES[,STRIDE]; "off" disables.
    #[arg(long, value_name = "F[,K]|off")]
    pub model_window: Option<String>,
}

/// A configuration and the name it goes by in reports and file names.
#[derive(Debug, Clone)]
pub struct NamedConfig {
    /// Preset name, or the config file's stem, with "-custom" when flags changed it.
    pub name: String,
    /// The validated configuration.
    pub config: FeatureConfig,
    /// Normalisation statistics (means, deviations) from the configuration
    /// file, when it normalises.
    pub statistics: Option<(Vec<f32>, Vec<f32>)>,
}

/// The TOML file layout: every field of [`FeatureConfig`] under its own name.
#[derive(Deserialize, Debug, Default)]
#[serde(deny_unknown_fields)]
struct ConfigFile {
    base_preset: Option<String>,
    sample_rate_hz: Option<u32>,
    window_samples: Option<u32>,
    fft_points: Option<u32>,
    hop_samples: Option<u32>,
    window: Option<String>,
    dc_removal_pole: Option<NumberOrOff>,
    pre_emphasis: Option<NumberOrOff>,
    bands: Option<u32>,
    low_edge_hz: Option<f32>,
    high_edge_hz: Option<f32>,
    mel_scale: Option<String>,
    triangles: Option<String>,
    band_gain: Option<String>,
    spectrum: Option<String>,
    log: Option<String>,
    floor_db: Option<f32>,
    stages: Option<StagesFile>,
}

/// `[stages]`: one table per stage.
#[derive(Deserialize, Debug, Default)]
#[serde(deny_unknown_fields)]
struct StagesFile {
    pcen: Option<PcenFile>,
    range_floor: Option<RangeFloorFile>,
    level_map: Option<LevelMapFile>,
    mfcc: Option<MfccFile>,
    normalise: Option<NormaliseFile>,
    quantise: Option<QuantiseFile>,
    model_window: Option<ModelWindowFile>,
}

#[derive(Deserialize, Debug, Default)]
#[serde(deny_unknown_fields)]
struct PcenFile {
    alpha: Option<f32>,
    delta: Option<f32>,
    root: Option<f32>,
    epsilon: Option<f32>,
    time_constant_s: Option<f32>,
}

#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
struct RangeFloorFile {
    below_peak_db: f32,
}

#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
struct LevelMapFile {
    added_energy: Option<f32>,
    gain: Option<f32>,
    offset: Option<f32>,
    lower: Option<f32>,
    upper: Option<f32>,
}

#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
struct MfccFile {
    coefficients: u32,
    lifter: Option<u32>,
    log_energy: Option<bool>,
}

#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
struct NormaliseFile {
    mean: Vec<f32>,
    deviation: Vec<f32>,
}

#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
struct QuantiseFile {
    scale: f32,
    zero_point: i32,
    codes: Option<String>,
}

#[derive(Deserialize, Debug)]
#[serde(deny_unknown_fields)]
struct ModelWindowFile {
    frames: u32,
    stride: Option<u32>,
}

const CODES: &[(&str, CodeRange)] = &[("int8", CodeRange::Int8), ("uint8", CodeRange::Uint8)];

/// Applies a configuration file's `[stages]` to `c`; returns its statistics.
fn apply_stages_file(
    c: &mut FeatureConfig,
    file: StagesFile,
) -> Result<Option<(Vec<f32>, Vec<f32>)>> {
    let st = &mut c.stages;
    if let Some(p) = file.pcen {
        let d = PcenParams::DEFAULT;
        st.pcen = Some(PcenParams {
            alpha: p.alpha.unwrap_or(d.alpha),
            delta: p.delta.unwrap_or(d.delta),
            root: p.root.unwrap_or(d.root),
            epsilon: p.epsilon.unwrap_or(d.epsilon),
            time_constant_s: p.time_constant_s.unwrap_or(d.time_constant_s),
        });
    }
    if let Some(r) = file.range_floor {
        st.range_floor = Some(RangeFloorConfig {
            below_peak_db: r.below_peak_db,
        });
    }
    if let Some(m) = file.level_map {
        let d = LevelMapConfig::IDENTITY;
        st.level_map = Some(LevelMapConfig {
            added_energy: m.added_energy.unwrap_or(d.added_energy),
            gain: m.gain.unwrap_or(d.gain),
            offset: m.offset.unwrap_or(d.offset),
            lower: m.lower,
            upper: m.upper,
        });
    }
    if let Some(m) = file.mfcc {
        st.mfcc = Some(MfccConfig {
            coefficients: m.coefficients,
            lifter: m.lifter,
            log_energy: m.log_energy.unwrap_or(false),
        });
    }
    if let Some(q) = file.quantise {
        st.quantise = Some(QuantiseConfig {
            scale: q.scale,
            zero_point: q.zero_point,
            codes: match q.codes.as_deref() {
                Some(t) => pick("stages.quantise.codes", t, CODES)?,
                None => CodeRange::Int8,
            },
        });
    }
    if let Some(w) = file.model_window {
        st.model_window = Some(ModelWindowConfig {
            frames: w.frames,
            stride: w.stride.unwrap_or(1),
        });
    }
    Ok(file.normalise.map(|n| {
        st.normalise = true;
        (n.mean, n.deviation)
    }))
}

fn parse_u32(field: &str, text: &str) -> Result<u32> {
    text.trim().parse::<u32>().map_err(|_| {
        anyhow!("`{field}` = \"{text}\" is not a whole number: give one such as 10, or off")
    })
}

/// Applies the stage flags to `c`.
fn apply_stage_flags(c: &mut FeatureConfig, a: &ConfigArgs) -> Result<()> {
    let st = &mut c.stages;
    if let Some(t) = &a.pcen {
        st.pcen = match t.as_str() {
            "on" => Some(PcenParams::DEFAULT),
            "off" => None,
            _ => bail!("`--pcen` = \"{t}\" is not known: give on or off"),
        };
    }
    if let Some(t) = &a.range_floor_db {
        st.range_floor =
            on_off("range_floor_db", t)?.map(|below_peak_db| RangeFloorConfig { below_peak_db });
    }
    if let Some(t) = &a.mfcc {
        st.mfcc = if t == "off" {
            None
        } else {
            Some(MfccConfig {
                coefficients: parse_u32("mfcc", t)?,
                lifter: st.mfcc.and_then(|m| m.lifter),
                log_energy: st.mfcc.is_some_and(|m| m.log_energy),
            })
        };
    }
    if let Some(t) = &a.lifter {
        let lifter = if t == "off" {
            None
        } else {
            Some(parse_u32("lifter", t)?)
        };
        match &mut st.mfcc {
            Some(m) => m.lifter = lifter,
            None => bail!("`--lifter` acts on the MFCC stage, which is off: add --mfcc K"),
        }
    }
    if let Some(t) = &a.quantise {
        st.quantise = if t == "off" {
            None
        } else {
            let parts: Vec<&str> = t.split(',').map(str::trim).collect();
            let usage = || {
                anyhow!(
                    "`--quantise` = \"{t}\" is not SCALE,ZERO_POINT[,int8|uint8]: give for \
                     example 0.5,-10,int8, or off"
                )
            };
            if parts.len() < 2 || parts.len() > 3 {
                return Err(usage());
            }
            Some(QuantiseConfig {
                scale: parts[0].parse().map_err(|_| usage())?,
                zero_point: parts[1].parse().map_err(|_| usage())?,
                codes: match parts.get(2) {
                    Some(c) => pick("quantise codes", c, CODES)?,
                    None => CodeRange::Int8,
                },
            })
        };
    }
    if let Some(t) = &a.model_window {
        st.model_window = if t == "off" {
            None
        } else {
            let mut parts = t.split(',');
            let frames = parse_u32("model_window", parts.next().unwrap_or(""))?;
            let stride = match parts.next() {
                Some(k) => parse_u32("model_window stride", k)?,
                None => 1,
            };
            Some(ModelWindowConfig { frames, stride })
        };
    }
    Ok(())
}

fn preset(name: &str) -> Result<FeatureConfig> {
    presets::by_name(name).ok_or_else(|| {
        let names: Vec<&str> = presets::ALL.iter().map(|(n, _)| *n).collect();
        anyhow!(
            "unknown preset `{name}`: choose one of {}",
            names.join(", ")
        )
    })
}

fn pick<T: Copy>(field: &str, text: &str, choices: &[(&str, T)]) -> Result<T> {
    choices
        .iter()
        .find(|(n, _)| *n == text)
        .map(|(_, v)| *v)
        .ok_or_else(|| {
            let names: Vec<&str> = choices.iter().map(|(n, _)| *n).collect();
            anyhow!(
                "`{field}` = \"{text}\" is not known: choose one of {}",
                names.join(", ")
            )
        })
}

const WINDOWS: &[(&str, WindowShape)] = &[
    ("hann", WindowShape::Hann),
    ("hann-periodic", WindowShape::HannPeriodic),
    ("hamming", WindowShape::Hamming),
    ("hamming-periodic", WindowShape::HammingPeriodic),
    ("rectangular", WindowShape::Rectangular),
];
const SCALES: &[(&str, MelScale)] = &[
    ("oshaughnessy", MelScale::OShaughnessy),
    ("slaney", MelScale::Slaney),
];
const PLACEMENTS: &[(&str, TrianglePlacement)] = &[
    ("exact-frequency", TrianglePlacement::ExactFrequency),
    ("rounded-centre-bins", TrianglePlacement::RoundedCentreBins),
];
const GAINS: &[(&str, BandGain)] = &[
    ("peak-one", BandGain::PeakOne),
    ("equal-area", BandGain::EqualArea),
];
const SPECTRA: &[(&str, SpectrumKind)] = &[
    ("power", SpectrumKind::Power),
    ("magnitude", SpectrumKind::Magnitude),
];
const LOGS: &[(&str, LogKind)] = &[("decibel", LogKind::Decibel), ("natural", LogKind::Natural)];

fn name_of<T: PartialEq + Copy>(choices: &[(&'static str, T)], v: T) -> &'static str {
    choices
        .iter()
        .find(|(_, c)| *c == v)
        .map(|(n, _)| *n)
        .unwrap_or("?")
}

/// The configuration-file spelling of each enum value, for emitters and reports.
pub fn describe(config: &FeatureConfig) -> Vec<(&'static str, String)> {
    let opt = |v: Option<f32>| v.map_or("off".to_string(), |x| x.to_string());
    vec![
        ("sample_rate_hz", config.sample_rate_hz.to_string()),
        ("window_samples", config.window_samples.to_string()),
        ("fft_points", config.fft_points.to_string()),
        ("hop_samples", config.hop_samples.to_string()),
        ("window", name_of(WINDOWS, config.window).to_string()),
        ("dc_removal_pole", opt(config.dc_removal_pole)),
        ("pre_emphasis", opt(config.pre_emphasis)),
        ("bands", config.bands.to_string()),
        ("low_edge_hz", config.low_edge_hz.to_string()),
        ("high_edge_hz", config.high_edge_hz.to_string()),
        ("mel_scale", name_of(SCALES, config.mel_scale).to_string()),
        (
            "triangles",
            name_of(PLACEMENTS, config.triangles).to_string(),
        ),
        ("band_gain", name_of(GAINS, config.band_gain).to_string()),
        ("spectrum", name_of(SPECTRA, config.spectrum).to_string()),
        ("log", name_of(LOGS, config.log).to_string()),
        ("floor_db", config.floor_db.to_string()),
        (
            "stages.pcen",
            config.stages.pcen.map_or("off".into(), |p| {
                format!(
                    "alpha {} delta {} root {} epsilon {} time_constant_s {}",
                    p.alpha, p.delta, p.root, p.epsilon, p.time_constant_s
                )
            }),
        ),
        (
            "stages.range_floor",
            config.stages.range_floor.map_or("off".into(), |r| {
                format!("{} dB below the peak", r.below_peak_db)
            }),
        ),
        (
            "stages.level_map",
            config.stages.level_map.map_or("off".into(), |m| {
                format!(
                    "added energy {:e}, gain {}, offset {}, lower {}, upper {}",
                    m.added_energy,
                    m.gain,
                    m.offset,
                    m.lower.map_or("none".into(), |v| v.to_string()),
                    m.upper.map_or("none".into(), |v| v.to_string())
                )
            }),
        ),
        (
            "stages.mfcc",
            config.stages.mfcc.map_or("off".into(), |m| {
                format!(
                    "{} coefficients, lifter {}, log-energy in place of c0 {}",
                    m.coefficients,
                    m.lifter.map_or("off".into(), |l| l.to_string()),
                    if m.log_energy { "on" } else { "off" }
                )
            }),
        ),
        ("stages.normalise", config.stages.normalise.to_string()),
        (
            "stages.quantise",
            config.stages.quantise.map_or("off".into(), |q| {
                format!(
                    "scale {} zero_point {} {}",
                    q.scale,
                    q.zero_point,
                    name_of(CODES, q.codes)
                )
            }),
        ),
        (
            "stages.model_window",
            config.stages.model_window.map_or("off".into(), |w| {
                format!("{} frames, stride {}", w.frames, w.stride)
            }),
        ),
    ]
}

/// A coefficient in a configuration file: a number, or `"off"`.
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(untagged)]
enum NumberOrOff {
    Number(f32),
    Text(String),
}

impl NumberOrOff {
    fn value(&self, field: &str) -> Result<Option<f32>> {
        match self {
            NumberOrOff::Number(v) => Ok(Some(*v)),
            NumberOrOff::Text(t) => on_off(field, t),
        }
    }
}

fn on_off(field: &str, text: &str) -> Result<Option<f32>> {
    if text == "off" {
        return Ok(None);
    }
    text.parse::<f32>().map(Some).map_err(|_| {
        anyhow!("`{field}` = \"{text}\" is not a number: give a value such as 0.97, or off")
    })
}

fn from_file(path: &Path) -> Result<(String, FeatureConfig, Option<(Vec<f32>, Vec<f32>)>)> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read configuration file {}", path.display()))?;
    let stem = path
        .file_stem()
        .map_or("custom".into(), |s| s.to_string_lossy().into_owned());
    from_toml(&text, &path.display().to_string(), stem)
}

/// A configuration file's text (`source` names it in errors; `stem` names
/// the configuration): the configuration, not yet validated, and its
/// normalisation statistics if it gives them.
pub fn from_toml(
    text: &str,
    source: &str,
    stem: String,
) -> Result<(String, FeatureConfig, Option<(Vec<f32>, Vec<f32>)>)> {
    // The parser's own report names the line, the column and the key.
    let file: ConfigFile = toml::from_str(text)
        .map_err(|e| anyhow!("configuration file {source} is not valid: {e}"))?;
    let mut c = match &file.base_preset {
        Some(name) => preset(name)?,
        None => {
            let missing: Vec<&str> = [
                ("sample_rate_hz", file.sample_rate_hz.is_none()),
                ("window_samples", file.window_samples.is_none()),
                ("fft_points", file.fft_points.is_none()),
                ("hop_samples", file.hop_samples.is_none()),
                ("bands", file.bands.is_none()),
                ("low_edge_hz", file.low_edge_hz.is_none()),
                ("high_edge_hz", file.high_edge_hz.is_none()),
            ]
            .iter()
            .filter(|(_, m)| *m)
            .map(|(n, _)| *n)
            .collect();
            if !missing.is_empty() {
                bail!(
                    "configuration file {} lacks {}: give them, or start from a preset with \
                     base_preset = \"speech16k-40\"",
                    source,
                    missing.join(", ")
                );
            }
            presets::SPEECH16K_40
        }
    };
    macro_rules! set {
        ($f:ident) => {
            if let Some(v) = file.$f {
                c.$f = v;
            }
        };
    }
    set!(sample_rate_hz);
    set!(window_samples);
    set!(fft_points);
    set!(hop_samples);
    set!(bands);
    set!(low_edge_hz);
    set!(high_edge_hz);
    set!(floor_db);
    if file.base_preset.is_none() {
        // A file without a base describes everything it enables.
        c.dc_removal_pole = None;
        c.pre_emphasis = None;
    }
    if let Some(v) = file.dc_removal_pole {
        c.dc_removal_pole = v.value("dc_removal_pole")?;
    }
    if let Some(v) = file.pre_emphasis {
        c.pre_emphasis = v.value("pre_emphasis")?;
    }
    apply_names(
        &mut c,
        file.window.as_deref(),
        file.mel_scale.as_deref(),
        file.triangles.as_deref(),
        file.band_gain.as_deref(),
        file.spectrum.as_deref(),
        file.log.as_deref(),
    )?;
    let statistics = match file.stages {
        Some(st) => apply_stages_file(&mut c, st)?,
        None => None,
    };
    Ok((stem, c, statistics))
}

fn apply_names(
    c: &mut FeatureConfig,
    window: Option<&str>,
    mel_scale: Option<&str>,
    triangles: Option<&str>,
    band_gain: Option<&str>,
    spectrum: Option<&str>,
    log: Option<&str>,
) -> Result<()> {
    if let Some(t) = window {
        c.window = pick("window", t, WINDOWS)?;
    }
    if let Some(t) = mel_scale {
        c.mel_scale = pick("mel_scale", t, SCALES)?;
    }
    if let Some(t) = triangles {
        c.triangles = pick("triangles", t, PLACEMENTS)?;
    }
    if let Some(t) = band_gain {
        c.band_gain = pick("band_gain", t, GAINS)?;
    }
    if let Some(t) = spectrum {
        c.spectrum = pick("spectrum", t, SPECTRA)?;
    }
    if let Some(t) = log {
        c.log = pick("log", t, LOGS)?;
    }
    Ok(())
}

impl ConfigArgs {
    /// Resolves preset, file and flags into a validated configuration.
    pub fn resolve(&self) -> Result<NamedConfig> {
        let (mut name, mut c, statistics) = match (&self.preset, &self.config) {
            (Some(p), _) => (p.clone(), preset(p)?, None),
            (None, Some(path)) => from_file(path)?,
            (None, None) => (
                presets::DEFAULT_NAME.to_string(),
                presets::SPEECH16K_40,
                None,
            ),
        };
        let before = c;
        macro_rules! set {
            ($f:ident) => {
                if let Some(v) = self.$f {
                    c.$f = v;
                }
            };
        }
        set!(sample_rate_hz);
        set!(window_samples);
        set!(fft_points);
        set!(hop_samples);
        set!(bands);
        set!(low_edge_hz);
        set!(high_edge_hz);
        set!(floor_db);
        if let Some(t) = &self.dc_removal_pole {
            c.dc_removal_pole = on_off("dc_removal_pole", t)?;
        }
        if let Some(t) = &self.pre_emphasis {
            c.pre_emphasis = on_off("pre_emphasis", t)?;
        }
        apply_names(
            &mut c,
            self.window.as_deref(),
            self.mel_scale.as_deref(),
            self.triangles.as_deref(),
            self.band_gain.as_deref(),
            self.spectrum.as_deref(),
            self.log.as_deref(),
        )?;
        apply_stage_flags(&mut c, self)?;
        if c != before {
            name.push_str("-custom");
        }
        c.validate()
            .map_err(|e| anyhow!("invalid configuration: {e}"))?;
        if c.stages.normalise && statistics.is_none() {
            bail!(
                "the configuration normalises but gives no statistics: add `mean` and \
                 `deviation` under [stages.normalise] in the configuration file"
            );
        }
        Ok(NamedConfig {
            name,
            config: c,
            statistics,
        })
    }

    /// The flags given that change a configuration (`--preset` and
    /// `--config` included), as they are spelt on the command line.
    pub fn given(&self) -> Vec<&'static str> {
        let mut out = Vec::new();
        macro_rules! given {
            ($($f:ident => $flag:literal),* $(,)?) => {
                $(if self.$f.is_some() {
                    out.push($flag);
                })*
            };
        }
        given!(
            preset => "--preset", config => "--config",
            sample_rate_hz => "--sample-rate-hz", window_samples => "--window-samples",
            fft_points => "--fft-points", hop_samples => "--hop-samples", window => "--window",
            dc_removal_pole => "--dc-removal-pole", pre_emphasis => "--pre-emphasis",
            bands => "--bands", low_edge_hz => "--low-edge-hz", high_edge_hz => "--high-edge-hz",
            mel_scale => "--mel-scale", triangles => "--triangles", band_gain => "--band-gain",
            spectrum => "--spectrum", log => "--log", floor_db => "--floor-db", pcen => "--pcen",
            range_floor_db => "--range-floor-db", mfcc => "--mfcc", lifter => "--lifter",
            quantise => "--quantise", model_window => "--model-window",
        );
        out
    }

    /// Arguments selecting a named preset and nothing else.
    pub fn for_preset(name: &str) -> Self {
        ConfigArgs {
            preset: Some(name.to_string()),
            ..Default::default()
        }
    }
}

/// A configuration as a TOML file [`from_toml`] reads back to the same
/// configuration: every key written, floats in their shortest round-trip
/// form. The stages' statistics are not configuration and are not written.
pub fn to_toml(config: &FeatureConfig) -> String {
    let opt = |v: Option<f32>| v.map_or("\"off\"".to_string(), |x| format!("{x:?}"));
    let mut s = String::new();
    use std::fmt::Write;
    let c = config;
    let _ = writeln!(s, "sample_rate_hz = {}", c.sample_rate_hz);
    let _ = writeln!(s, "window_samples = {}", c.window_samples);
    let _ = writeln!(s, "fft_points = {}", c.fft_points);
    let _ = writeln!(s, "hop_samples = {}", c.hop_samples);
    let _ = writeln!(s, "window = \"{}\"", name_of(WINDOWS, c.window));
    let _ = writeln!(s, "dc_removal_pole = {}", opt(c.dc_removal_pole));
    let _ = writeln!(s, "pre_emphasis = {}", opt(c.pre_emphasis));
    let _ = writeln!(s, "bands = {}", c.bands);
    let _ = writeln!(s, "low_edge_hz = {:?}", c.low_edge_hz);
    let _ = writeln!(s, "high_edge_hz = {:?}", c.high_edge_hz);
    let _ = writeln!(s, "mel_scale = \"{}\"", name_of(SCALES, c.mel_scale));
    let _ = writeln!(s, "triangles = \"{}\"", name_of(PLACEMENTS, c.triangles));
    let _ = writeln!(s, "band_gain = \"{}\"", name_of(GAINS, c.band_gain));
    let _ = writeln!(s, "spectrum = \"{}\"", name_of(SPECTRA, c.spectrum));
    let _ = writeln!(s, "log = \"{}\"", name_of(LOGS, c.log));
    let _ = writeln!(s, "floor_db = {:?}", c.floor_db);
    let st = &c.stages;
    if let Some(r) = st.range_floor {
        let _ = writeln!(
            s,
            "\n[stages.range_floor]\nbelow_peak_db = {:?}",
            r.below_peak_db
        );
    }
    if let Some(m) = st.level_map {
        let _ = writeln!(
            s,
            "\n[stages.level_map]\nadded_energy = {:?}\ngain = {:?}\noffset = {:?}",
            m.added_energy, m.gain, m.offset
        );
        if let Some(v) = m.lower {
            let _ = writeln!(s, "lower = {v:?}");
        }
        if let Some(v) = m.upper {
            let _ = writeln!(s, "upper = {v:?}");
        }
    }
    if let Some(m) = st.mfcc {
        let _ = writeln!(s, "\n[stages.mfcc]\ncoefficients = {}", m.coefficients);
        if let Some(l) = m.lifter {
            let _ = writeln!(s, "lifter = {l}");
        }
        let _ = writeln!(s, "log_energy = {}", m.log_energy);
    }
    s
}
