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

use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use serde::Deserialize;
use stapes_core::config::{
    BandGain, FeatureConfig, LogKind, MelScale, SpectrumKind, TrianglePlacement, WindowShape,
};
use stapes_core::presets;

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
    #[arg(long, value_name = "HZ")]
    pub sample_rate_hz: Option<u32>,
    /// Override: samples per frame.
    #[arg(long, value_name = "N")]
    pub window_samples: Option<u32>,
    /// Override: FFT length (power of two, at least the window).
    #[arg(long, value_name = "N")]
    pub fft_points: Option<u32>,
    /// Override: samples between frame starts.
    #[arg(long, value_name = "N")]
    pub hop_samples: Option<u32>,
    /// Override: window shape (hann, hann-periodic, hamming, hamming-periodic, rectangular).
    #[arg(long, value_name = "SHAPE")]
    pub window: Option<String>,
    /// Override: DC removal pole in [0, 1); "off" disables.
    #[arg(long, value_name = "POLE|off")]
    pub dc_removal_pole: Option<String>,
    /// Override: pre-emphasis coefficient in [0, 1); "off" disables.
    #[arg(long, value_name = "COEF|off")]
    pub pre_emphasis: Option<String>,
    /// Override: number of mel bands.
    #[arg(long, value_name = "N")]
    pub bands: Option<u32>,
    /// Override: lower edge of the first band in Hz.
    #[arg(long, value_name = "HZ")]
    pub low_edge_hz: Option<f32>,
    /// Override: upper edge of the last band in Hz.
    #[arg(long, value_name = "HZ")]
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
}

/// A configuration and the name it goes by in reports and file names.
#[derive(Debug, Clone)]
pub struct NamedConfig {
    /// Preset name, or the config file's stem, with "-custom" when flags changed it.
    pub name: String,
    /// The validated configuration.
    pub config: FeatureConfig,
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
    dc_removal_pole: Option<f32>,
    pre_emphasis: Option<f32>,
    bands: Option<u32>,
    low_edge_hz: Option<f32>,
    high_edge_hz: Option<f32>,
    mel_scale: Option<String>,
    triangles: Option<String>,
    band_gain: Option<String>,
    spectrum: Option<String>,
    log: Option<String>,
    floor_db: Option<f32>,
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
    ]
}

fn on_off(field: &str, text: &str) -> Result<Option<f32>> {
    if text == "off" {
        return Ok(None);
    }
    text.parse::<f32>().map(Some).map_err(|_| {
        anyhow!("`{field}` = \"{text}\" is not a number: give a value such as 0.97, or off")
    })
}

fn from_file(path: &Path) -> Result<(String, FeatureConfig)> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read configuration file {}", path.display()))?;
    let file: ConfigFile = toml::from_str(&text).map_err(|e| {
        anyhow!(
            "configuration file {} is not valid: {}",
            path.display(),
            e.message()
        )
    })?;
    let stem = path
        .file_stem()
        .map_or("custom".into(), |s| s.to_string_lossy().into_owned());
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
                    path.display(),
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
        c.dc_removal_pole = Some(v);
    }
    if let Some(v) = file.pre_emphasis {
        c.pre_emphasis = Some(v);
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
    Ok((stem, c))
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
        let (mut name, mut c) = match (&self.preset, &self.config) {
            (Some(p), _) => (p.clone(), preset(p)?),
            (None, Some(path)) => from_file(path)?,
            (None, None) => (presets::DEFAULT_NAME.to_string(), presets::SPEECH16K_40),
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
        if c != before {
            name.push_str("-custom");
        }
        c.validate()
            .map_err(|e| anyhow!("invalid configuration: {e}"))?;
        Ok(NamedConfig { name, config: c })
    }

    /// Arguments selecting a named preset and nothing else.
    pub fn for_preset(name: &str) -> Self {
        ConfigArgs {
            preset: Some(name.to_string()),
            ..Default::default()
        }
    }
}
