//! The level map: the conventions a desktop pipeline wraps around its log,
//! after the log and the range floor (see
//! [`LevelMapConfig`](crate::stage_config::LevelMapConfig)):
//!
//! `y = clamp(gain · k·ln(max(E, floor) + added_energy) + offset, lower, upper)`
//!
//! The added energy is taken in the log domain: with `x = k·ln(max(E,
//! floor))` and `a = k·ln(added_energy)`, `k·ln(e^(x/k) + e^(a/k)) = max(x,
//! a) + k·ln(1 + e^(−|x − a|/k))` (the log-add of logarithmic number
//! systems, common practice), so the stage needs only the log values. The
//! `f32` path evaluates it with libm; the fixed path with a table of
//! `log2(1 + 2^−t)` in octaves, and reads the configuration's floats
//! through their bits (no float operation).
//!
//! ```
//! use stapes_core::level_map::FloatLevelMap;
//! use stapes_core::presets::SPEECH16K_40;
//! use stapes_core::stage::FrameStage;
//! use stapes_core::stage_config::LevelMapConfig;
//!
//! let mut config = SPEECH16K_40;
//! // dB against a reference of 1e-3 (+30 dB), clipped at 0.
//! config.stages.level_map = Some(LevelMapConfig {
//!     offset: 30.0,
//!     lower: Some(0.0),
//!     ..LevelMapConfig::IDENTITY
//! });
//! let mut map = FloatLevelMap::for_config(&config).unwrap();
//! assert_eq!(map.process(&mut [-10.0, -45.0]), &[20.0, 0.0]);
//! ```

use fixed::types::I8F8;

use crate::config::{FeatureConfig, LogKind};
use crate::fixed_tables::{f32_to_fixed, log2_to_output_q16};
use crate::int_log::log2_q16;
use crate::log::LogCoefficients;

/// Output units per natural-log unit of a log kind (`10/ln 10` or 1).
fn log_scale(kind: LogKind) -> f32 {
    match kind {
        LogKind::Decibel => (10.0 / core::f64::consts::LN_10) as f32,
        LogKind::Natural => 1.0,
    }
}

/// The `f32` level map.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FloatLevelMap {
    scale: f32,
    added: Option<f32>,
    gain: f32,
    offset: f32,
    lower: f32,
    upper: f32,
}

impl FloatLevelMap {
    /// The map `config.stages.level_map` describes, if any.
    pub fn for_config(config: &FeatureConfig) -> Option<Self> {
        let m = config.stages.level_map?;
        let added = (m.added_energy > 0.0)
            .then(|| LogCoefficients::for_kind(config.log).log(m.added_energy));
        Some(FloatLevelMap {
            scale: log_scale(config.log),
            added,
            gain: m.gain,
            offset: m.offset,
            lower: m.lower.unwrap_or(f32::NEG_INFINITY),
            upper: m.upper.unwrap_or(f32::INFINITY),
        })
    }

    #[inline]
    fn map(&self, v: f32) -> f32 {
        let x = match self.added {
            Some(a) => {
                let (hi, lo) = if v >= a { (v, a) } else { (a, v) };
                hi + self.scale * libm::log1pf(libm::expf((lo - hi) / self.scale))
            }
            None => v,
        };
        let y = x * self.gain + self.offset;
        if y < self.lower {
            self.lower
        } else if y > self.upper {
            self.upper
        } else {
            y
        }
    }
}

impl crate::stage::FrameStage<f32> for FloatLevelMap {
    type Out = f32;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [f32]) -> &'a mut [f32] {
        for v in input.iter_mut() {
            *v = self.map(*v);
        }
        input
    }
}

/// `round(log2(1 + 2^(−j/8)) · 2^16)` for `j = 0 ..= 192` (24 octaves;
/// beyond, the term is below half a Q16 step). Computed in f64 by the
/// generator's author; `tests/level_map.rs` recomputes every entry.
pub const LOG2_ONE_PLUS_TABLE: [u32; 193] = [
    65536, 61529, 57698, 54044, 50565, 47257, 44119, 41146, 38336, 35684, 33184, 30832, 28623,
    26551, 24610, 22794, 21098, 19515, 18040, 16667, 15391, 14204, 13103, 12082, 11136, 10260,
    9450, 8700, 8008, 7369, 6778, 6234, 5732, 5269, 4843, 4450, 4089, 3756, 3450, 3168, 2909, 2671,
    2452, 2251, 2066, 1897, 1741, 1597, 1466, 1345, 1234, 1132, 1039, 953, 874, 802, 736, 675, 619,
    568, 521, 478, 438, 402, 369, 338, 310, 284, 261, 239, 219, 201, 184, 169, 155, 142, 130, 120,
    110, 101, 92, 85, 78, 71, 65, 60, 55, 50, 46, 42, 39, 36, 33, 30, 27, 25, 23, 21, 19, 18, 16,
    15, 14, 13, 12, 11, 10, 9, 8, 7, 7, 6, 6, 5, 5, 4, 4, 4, 3, 3, 3, 3, 2, 2, 2, 2, 2, 2, 1, 1, 1,
    1, 1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0,
    0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0,
];

/// `log2(1 + 2^−t)` in Q16 for `t ≥ 0` in Q16 octaves: the table step and
/// its linear interpolation.
#[inline]
pub fn log2_one_plus_q16(t_q16: u32) -> u32 {
    let j = (t_q16 >> 13) as usize;
    if j >= LOG2_ONE_PLUS_TABLE.len() - 1 {
        return 0;
    }
    let r = t_q16 & 0x1FFF;
    let (a, b) = (LOG2_ONE_PLUS_TABLE[j], LOG2_ONE_PLUS_TABLE[j + 1]);
    // The table falls: a ≥ b.
    a - (((a - b) * r + (1 << 12)) >> 13)
}

/// The fixed paths' level map, on the log's `I8F8` values (1/256 units),
/// in place; every result within `i16`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FixedLevelMap {
    /// `k·ln(added_energy)` in 1/256 units, if there is an added energy.
    added: Option<i32>,
    /// Output units per octave in Q16 (the log's `log2_to_output`).
    per_octave_q16: i32,
    /// `2^40 / per_octave_q16`: a distance in 1/256 units to Q16 octaves.
    octaves_per_unit: i64,
    gain_q16: i64,
    offset: i64,
    lower: i16,
    upper: i16,
}

impl FixedLevelMap {
    /// The map `config.stages.level_map` describes, if any; `None` too for
    /// a map whose numbers do not fit the fixed formats (validation keeps
    /// them within reach).
    pub fn for_config(config: &FeatureConfig) -> Option<Self> {
        let m = config.stages.level_map?;
        let per_octave_q16 = log2_to_output_q16(config.log);
        let units = |v: f32| f32_to_fixed(v, 8);
        let bound = |v: Option<f32>, none: i16| match v {
            Some(v) => units(v).map(|u| u.clamp(i16::MIN as i64, i16::MAX as i64) as i16),
            None => Some(none),
        };
        let added = if m.added_energy.to_bits() == 0 {
            None
        } else {
            // log2 of the added energy from its bits: exponent and mantissa.
            let bits = m.added_energy.to_bits();
            let exponent = ((bits >> 23) & 0xFF) as i32;
            if exponent == 0 {
                return None; // subnormal: validation refuses it
            }
            let mantissa = (bits & 0x7F_FFFF) as u64 | 1 << 23;
            let log2 = log2_q16(mantissa)? + ((exponent - 127 - 23) << 16);
            Some(((log2 as i64 * per_octave_q16 as i64 + (1 << 23)) >> 24) as i32)
        };
        Some(FixedLevelMap {
            added,
            per_octave_q16,
            octaves_per_unit: (1i64 << 40) / per_octave_q16 as i64,
            gain_q16: f32_to_fixed(m.gain, 16)?,
            offset: units(m.offset)?,
            lower: bound(m.lower, i16::MIN)?,
            upper: bound(m.upper, i16::MAX)?,
        })
    }

    #[inline]
    fn map(&self, v: I8F8) -> I8F8 {
        let u = v.to_bits() as i32;
        let x = match self.added {
            Some(a) => {
                let (hi, d) = if u >= a { (u, u - a) } else { (a, a - u) };
                let t = ((d as i64 * self.octaves_per_unit) >> 16).min(u32::MAX as i64) as u32;
                let c = log2_one_plus_q16(t) as i64;
                hi as i64 + ((c * self.per_octave_q16 as i64 + (1 << 23)) >> 24)
            }
            None => u as i64,
        };
        let y = ((x * self.gain_q16 + (1 << 15)) >> 16) + self.offset;
        I8F8::from_bits(y.clamp(self.lower as i64, self.upper as i64) as i16)
    }
}

impl crate::stage::FrameStage<I8F8> for FixedLevelMap {
    type Out = I8F8;

    #[inline]
    fn process<'a>(&'a mut self, input: &'a mut [I8F8]) -> &'a mut [I8F8] {
        for v in input.iter_mut() {
            *v = self.map(*v);
        }
        input
    }
}
