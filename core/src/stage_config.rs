//! The configuration of the stages after the filterbank: one sub-structure
//! per stage, gathered in [`StageConfig`] (the `stages` field of
//! [`FeatureConfig`](crate::config::FeatureConfig)).
//!
//! The chain they describe, in data-flow order:
//!
//! ```text
//! band energies ─► log (or PCEN) ─► range floor ─► MFCC ─► normalise + quantise ─► model window
//! ```
//!
//! Every stage but the level (log or PCEN) is optional; [`StageConfig::NONE`]
//! is the plain log-mel front end. Arrays (the DCT matrix, the per-value
//! statistics) are not configuration: the host generator derives them and
//! ships them with the tables ([`crate::stage_tables`]).
//!
//! ```
//! use stapes_core::config::FeatureConfig;
//! use stapes_core::presets::SPEECH16K_40;
//! use stapes_core::stage_config::{MfccConfig, StageConfig};
//!
//! let mut config = SPEECH16K_40;
//! config.stages.mfcc = Some(MfccConfig { coefficients: 13, lifter: Some(22), log_energy: false });
//! assert!(config.validate().is_ok());
//! assert_eq!(config.stage_values(), 13);
//! config.stages.mfcc = Some(MfccConfig { coefficients: 41, lifter: None, log_energy: false });
//! assert_eq!(config.validate().unwrap_err().field(), "stages.mfcc.coefficients");
//! ```

use crate::pcen::PcenParams;
use crate::quantise::CodeRange;

/// The MFCC stage: the orthonormal DCT-II of the log-mel values to
/// `coefficients` values, optionally liftered.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct MfccConfig {
    /// Coefficients kept, `1 ..= bands` (c0 first).
    pub coefficients: u32,
    /// Sinusoidal lifter parameter `L` (`1 + (L/2)·sin(πk/L)`), or none.
    pub lifter: Option<u32>,
    /// The frame's log-energy in place of c0, as ES 201 108 carries the
    /// frame's energy instead of c0: the log (the configuration's, with its
    /// floor) of `E = Σ c_k·P[k] / N` over the bins from the lowest any band
    /// reads to `N/2` (`c_k = 2`, or 1 at bins 0 and `N/2`), which by
    /// Parseval is the windowed frame's energy `Σ (x·w)²` less what lies
    /// below the filterbank (a DC offset's). Power spectra only.
    pub log_energy: bool,
}

/// The per-frame range floor: every value is raised to at least the frame's
/// loudest value minus `below_peak_db` (in the log's own unit: dB, or
/// `below_peak_db · ln(10)/10` for a natural log).
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RangeFloorConfig {
    /// How far below the frame's loudest value the floor sits, in dB (> 0).
    pub below_peak_db: f32,
}

/// Affine quantisation to the model's input codes: `q = clamp(round(x / scale)
/// + zero_point)`, ties away from zero.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct QuantiseConfig {
    /// The input tensor's scale (> 0).
    pub scale: f32,
    /// The input tensor's zero point, within the code range.
    pub zero_point: i32,
    /// `int8` or `uint8` codes.
    pub codes: CodeRange,
}

/// The window of frames the model reads.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ModelWindowConfig {
    /// Frames in the window (`F`, 1 ..= 1024).
    pub frames: u32,
    /// The model runs every `stride` frames (1 ..= `frames`).
    pub stride: u32,
}

/// The level map: the conventions a desktop pipeline may wrap around its log,
/// applied after the log and the range floor, before MFCC:
///
/// `y = clamp(gain · k·ln(max(E, floor) + added_energy) + offset, lower, upper)`
///
/// with `k·ln` the configuration's log (`10·log10` or `ln`). It reproduces
/// `ln(E + ε)`, dB against a fixed reference (`offset = −10·log10(ref)`),
/// samples scaled other than to ±1 or an FFT scaled by `1/N` or `1/√N` (an
/// offset, since a scale on the energies is an offset on their log), another
/// log base (`gain`), a fixed output scale and offset, and clipping to a
/// fixed range. The added energy is in the board's energy units (samples at
/// ±1, no `1/N`). On the fixed paths the values stay `i16` in 1/256 units,
/// so a mapped value beyond ±128 saturates.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct LevelMapConfig {
    /// Energy added to every band before the log (≥ 0; 0 for none).
    pub added_energy: f32,
    /// Multiplies the log's values (> 0).
    pub gain: f32,
    /// Added after the gain, in the output's unit.
    pub offset: f32,
    /// Lowest output value, or none.
    pub lower: Option<f32>,
    /// Highest output value, or none.
    pub upper: Option<f32>,
}

impl LevelMapConfig {
    /// The map that changes nothing.
    pub const IDENTITY: LevelMapConfig = LevelMapConfig {
        added_energy: 0.0,
        gain: 1.0,
        offset: 0.0,
        lower: None,
        upper: None,
    };

    /// Canonical little-endian encoding: which bounds are present (bit 0
    /// lower, bit 1 upper) in byte 0, bytes 1–3 zero, then `added_energy`,
    /// `gain`, `offset`, `lower`, `upper` (0 when absent).
    pub fn to_bytes(&self) -> [u8; LEVEL_MAP_BYTES] {
        let mut out = [0u8; LEVEL_MAP_BYTES];
        out[0] = self.lower.is_some() as u8 | (self.upper.is_some() as u8) << 1;
        let values = [
            self.added_energy,
            self.gain,
            self.offset,
            self.lower.unwrap_or(0.0),
            self.upper.unwrap_or(0.0),
        ];
        for (i, v) in values.iter().enumerate() {
            out[4 + 4 * i..8 + 4 * i].copy_from_slice(&v.to_bits().to_le_bytes());
        }
        out
    }

    /// Decodes [`LevelMapConfig::to_bytes`]; `None` for a reserved bit or
    /// byte, or a bound's value without its flag.
    pub fn from_bytes(b: &[u8; LEVEL_MAP_BYTES]) -> Option<LevelMapConfig> {
        let float = |i: usize| {
            let at = 4 + 4 * i;
            f32::from_bits(u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]]))
        };
        if b[0] > 3 || b[1..4].iter().any(|&x| x != 0) {
            return None;
        }
        let bound = |bit: u8, i: usize| {
            if b[0] & bit != 0 {
                Some(Some(float(i)))
            } else if float(i).to_bits() == 0 {
                Some(None)
            } else {
                None
            }
        };
        Some(LevelMapConfig {
            added_energy: float(0),
            gain: float(1),
            offset: float(2),
            lower: bound(1, 3)?,
            upper: bound(2, 4)?,
        })
    }
}

/// Length in bytes of [`LevelMapConfig::to_bytes`].
pub const LEVEL_MAP_BYTES: usize = 24;

/// The stages after the filterbank. See the module docs for their order.
#[derive(Clone, Copy, Debug, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StageConfig {
    /// PCEN in place of the static log (the energies' level stage).
    pub pcen: Option<PcenParams>,
    /// A floor relative to each frame's loudest log value.
    pub range_floor: Option<RangeFloorConfig>,
    /// The log's conventions beyond its floor (added energy, gain, offset,
    /// fixed bounds); after the range floor.
    pub level_map: Option<LevelMapConfig>,
    /// MFCC from the log-mel values.
    pub mfcc: Option<MfccConfig>,
    /// Per-value normalisation `(x − mean) / deviation`, with the statistics
    /// shipped in the tables; folded into the quantiser when there is one.
    pub normalise: bool,
    /// Quantisation to int8 or uint8 codes.
    pub quantise: Option<QuantiseConfig>,
    /// The window of frames the model reads.
    pub model_window: Option<ModelWindowConfig>,
}

impl StageConfig {
    /// No stage after the log: the plain log-mel front end.
    pub const NONE: StageConfig = StageConfig {
        pcen: None,
        range_floor: None,
        level_map: None,
        mfcc: None,
        normalise: false,
        quantise: None,
        model_window: None,
    };

    /// Whether any stage beyond the plain log is configured.
    pub fn any(&self) -> bool {
        *self != StageConfig::NONE
    }
}

/// Length in bytes of [`StageConfig::to_bytes`].
pub const STAGE_CONFIG_BYTES: usize = 64;

const HAS_PCEN: u8 = 1;
const HAS_RANGE_FLOOR: u8 = 2;
const HAS_MFCC: u8 = 4;
const HAS_NORMALISE: u8 = 8;
const HAS_QUANTISE: u8 = 16;
const HAS_MODEL_WINDOW: u8 = 32;
const HAS_LIFTER: u8 = 64;
const HAS_LEVEL_MAP: u8 = 128;

/// Length in bytes of [`StageConfig::to_section`] with a level map.
pub const STAGE_SECTION_MAX_BYTES: usize = STAGE_CONFIG_BYTES + LEVEL_MAP_BYTES;

impl StageConfig {
    /// Canonical little-endian encoding (the fingerprint's extension and the
    /// blob's stage section).
    pub fn to_bytes(&self) -> [u8; STAGE_CONFIG_BYTES] {
        let mut out = [0u8; STAGE_CONFIG_BYTES];
        let mut at = 4;
        let mut put = |bytes: [u8; 4]| {
            out[at..at + 4].copy_from_slice(&bytes);
            at += 4;
        };
        let mut flags = 0u8;
        let mut codes = 0u8;
        let p = self.pcen.unwrap_or(PcenParams {
            alpha: 0.0,
            delta: 0.0,
            root: 0.0,
            epsilon: 0.0,
            time_constant_s: 0.0,
        });
        flags |= if self.pcen.is_some() { HAS_PCEN } else { 0 };
        for v in [p.alpha, p.delta, p.root, p.epsilon, p.time_constant_s] {
            put(v.to_bits().to_le_bytes());
        }
        flags |= if self.range_floor.is_some() {
            HAS_RANGE_FLOOR
        } else {
            0
        };
        put(self
            .range_floor
            .map_or(0.0f32, |r| r.below_peak_db)
            .to_bits()
            .to_le_bytes());
        if let Some(m) = self.mfcc {
            flags |= HAS_MFCC;
            if m.lifter.is_some() {
                flags |= HAS_LIFTER;
            }
        }
        put(self.mfcc.map_or(0, |m| m.coefficients).to_le_bytes());
        put(self.mfcc.and_then(|m| m.lifter).unwrap_or(0).to_le_bytes());
        if self.normalise {
            flags |= HAS_NORMALISE;
        }
        if let Some(q) = self.quantise {
            flags |= HAS_QUANTISE;
            codes = match q.codes {
                CodeRange::Int8 => 0,
                CodeRange::Uint8 => 1,
            };
        }
        put(self
            .quantise
            .map_or(0.0f32, |q| q.scale)
            .to_bits()
            .to_le_bytes());
        put(self.quantise.map_or(0, |q| q.zero_point).to_le_bytes());
        if self.model_window.is_some() {
            flags |= HAS_MODEL_WINDOW;
        }
        put(self.model_window.map_or(0, |w| w.frames).to_le_bytes());
        put(self.model_window.map_or(0, |w| w.stride).to_le_bytes());
        // 4 + 12·4 = 52 bytes used; the rest is reserved and stays zero.
        if self.level_map.is_some() {
            flags |= HAS_LEVEL_MAP;
        }
        out[0] = flags;
        out[1] = codes;
        out[2] = self.mfcc.is_some_and(|m| m.log_energy) as u8;
        out
    }

    /// The blob's stage section: [`StageConfig::to_bytes`], followed by
    /// [`LevelMapConfig::to_bytes`] when there is a level map (the flag in
    /// byte 0 says so). Returns the bytes and the length used.
    pub fn to_section(&self) -> ([u8; STAGE_SECTION_MAX_BYTES], usize) {
        let mut out = [0u8; STAGE_SECTION_MAX_BYTES];
        out[..STAGE_CONFIG_BYTES].copy_from_slice(&self.to_bytes());
        match self.level_map {
            Some(m) => {
                out[STAGE_CONFIG_BYTES..].copy_from_slice(&m.to_bytes());
                (out, STAGE_SECTION_MAX_BYTES)
            }
            None => (out, STAGE_CONFIG_BYTES),
        }
    }

    /// Decodes [`StageConfig::to_section`]; `None` for a wrong length for its
    /// flags or any bad byte.
    pub fn from_section(b: &[u8]) -> Option<StageConfig> {
        let head: &[u8; STAGE_CONFIG_BYTES] = b.get(..STAGE_CONFIG_BYTES)?.try_into().ok()?;
        let mut plain = *head;
        plain[0] &= !HAS_LEVEL_MAP;
        let mut stages = StageConfig::from_bytes(&plain)?;
        match (head[0] & HAS_LEVEL_MAP != 0, b.len()) {
            (false, STAGE_CONFIG_BYTES) => Some(stages),
            (true, STAGE_SECTION_MAX_BYTES) => {
                let tail: &[u8; LEVEL_MAP_BYTES] = b[STAGE_CONFIG_BYTES..].try_into().ok()?;
                stages.level_map = Some(LevelMapConfig::from_bytes(tail)?);
                Some(stages)
            }
            _ => None,
        }
    }

    /// Decodes [`StageConfig::to_bytes`] of a configuration without a level
    /// map ([`StageConfig::from_section`] reads one); `None` for an unknown
    /// flag or code range, a set reserved byte, or a value present without
    /// its flag.
    pub fn from_bytes(b: &[u8; STAGE_CONFIG_BYTES]) -> Option<StageConfig> {
        let word = |i: usize| {
            let at = 4 + 4 * i;
            u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]])
        };
        let float = |i: usize| f32::from_bits(word(i));
        let (flags, codes) = (b[0], b[1]);
        if flags & 0x80 != 0
            || codes > 1
            || b[2] > 1
            || b[3] != 0
            || b[52..].iter().any(|&x| x != 0)
        {
            return None;
        }
        let has = |bit: u8| flags & bit != 0;
        // A value without its flag would be a second spelling of the same
        // configuration: refuse it, so the encoding stays canonical.
        let zero = |range: core::ops::Range<usize>| range.into_iter().all(|i| word(i) == 0);
        let stages = StageConfig {
            pcen: has(HAS_PCEN).then(|| PcenParams {
                alpha: float(0),
                delta: float(1),
                root: float(2),
                epsilon: float(3),
                time_constant_s: float(4),
            }),
            range_floor: has(HAS_RANGE_FLOOR).then(|| RangeFloorConfig {
                below_peak_db: float(5),
            }),
            level_map: None,
            mfcc: has(HAS_MFCC).then(|| MfccConfig {
                coefficients: word(6),
                lifter: has(HAS_LIFTER).then(|| word(7)),
                log_energy: b[2] == 1,
            }),
            normalise: has(HAS_NORMALISE),
            quantise: has(HAS_QUANTISE).then(|| QuantiseConfig {
                scale: float(8),
                zero_point: word(9) as i32,
                codes: if codes == 1 {
                    CodeRange::Uint8
                } else {
                    CodeRange::Int8
                },
            }),
            model_window: has(HAS_MODEL_WINDOW).then(|| ModelWindowConfig {
                frames: word(10),
                stride: word(11),
            }),
        };
        let canonical = (has(HAS_PCEN) || zero(0..5))
            && (has(HAS_RANGE_FLOOR) || zero(5..6))
            && (has(HAS_MFCC) || (zero(6..8) && !has(HAS_LIFTER) && b[2] == 0))
            && (has(HAS_LIFTER) || zero(7..8))
            && (has(HAS_QUANTISE) || (zero(8..10) && codes == 0))
            && (has(HAS_MODEL_WINDOW) || zero(10..12));
        canonical.then_some(stages)
    }
}
