//! What the fixed-point path reads besides the Q15 table view: the FFT's
//! twiddle factors and the constants that would otherwise need float work on
//! the board. The generator computes all of them; the board only reads them.

use core::fmt;

use fixed::types::{I1F15, I1F31, I8F8, I16F16};

use crate::config::{FeatureConfig, LogKind};
use crate::table::{TableError, TableView};

/// Constants of the fixed path, each in a visible Q format.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct FixedParams {
    /// DC removal pole `p` (0 when DC removal is off), Q31: a recursive
    /// filter's pole needs the precision (Q15 would shift 0.999 by 1e-5 and
    /// change its decay by 0.35 dB within half a second).
    pub dc_pole: I1F31,
    /// Pre-emphasis coefficient `a` (0 when off).
    pub pre_emphasis: I1F15,
    /// Output floor in output units (dB or natural log), 1/256 per LSB.
    pub floor: I8F8,
    /// Output units per unit of `log2`: `10·log10(2)` for dB, `ln 2` for natural log.
    pub log2_to_output: I16F16,
}

/// `log2_to_output` in Q16 for a log kind: `round(10·log10(2) · 2^16)` for
/// dB and `round(ln 2 · 2^16)` for the natural log. The generator computes
/// them in `f64`; a test keeps the two in step.
pub const fn log2_to_output_q16(kind: LogKind) -> i32 {
    match kind {
        LogKind::Decibel => 197_283,
        LogKind::Natural => 45_426,
    }
}

impl FixedParams {
    /// The raw words stored in a blob: `[dc_pole, pre_emphasis, floor, log2_to_output]`.
    pub fn to_words(&self) -> [i32; 4] {
        [
            self.dc_pole.to_bits(),
            self.pre_emphasis.to_bits() as i32,
            self.floor.to_bits() as i32,
            self.log2_to_output.to_bits(),
        ]
    }

    /// Decodes [`FixedParams::to_words`]; `None` when a word is out of its format's range.
    pub fn from_words(w: &[i32]) -> Option<FixedParams> {
        let [dc, pre, floor, k] = *w else { return None };
        let q15 = |v: i32| i16::try_from(v).ok().map(I1F15::from_bits);
        Some(FixedParams {
            dc_pole: I1F31::from_bits(dc),
            pre_emphasis: q15(pre)?,
            floor: I8F8::from_bits(i16::try_from(floor).ok()?),
            log2_to_output: I16F16::from_bits(k),
        })
    }
}

/// Everything the fixed path reads.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FixedTables<'a> {
    /// Q15 window and filterbank; gains are log offsets in output units (1/256).
    pub table: TableView<'a, i16>,
    /// Quarter-wave cosine `cos(2πj/N)`, `j = 0 ..= N/4`, Q15 (1.0 as 32767).
    pub twiddles_q15: &'a [i16],
    /// The same in Q31 (1.0 as 2^31 − 1).
    pub twiddles_q31: &'a [i32],
    /// The window in Q31 (1.0 as 2^31 − 1), read by the 32-bit path: a Q15
    /// window's rounding error leaks a strong low-frequency component (DC
    /// offset, hum) into weak high bands at about 100 dB below it, which the
    /// 32-bit path would otherwise resolve.
    pub window_q31: &'a [i32],
    /// The Q15 window's DFT `W(k) = Σ w[n]·e^(−2πikn/N)` in Q16, as `(re, im)`
    /// pairs for `k = 0 .. K`, where beyond `K` every `|W(k)|` stays below
    /// `2^-17·W(0)`: the 16-bit path takes the frame's offset out before the
    /// FFT and adds `d·W(k)` back to these bins. Empty for windows the core
    /// knows exactly (a periodic raised cosine or a rectangle filling the
    /// FFT: only bins 0 and 1) and for windows whose DFT falls too slowly
    /// (then the offset stays in the frame); optional in a blob.
    pub window_spectrum: &'a [i32],
    /// Constants.
    pub params: FixedParams,
}

/// Why fixed tables do not fit a configuration.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum FixedTableError {
    /// The Q15 view does not fit.
    Table(TableError),
    /// A twiddle table has the wrong length.
    Twiddles {
        /// Entries found.
        found: usize,
        /// Entries needed (`fft_points / 4 + 1`).
        expected: usize,
    },
    /// The Q31 window has the wrong length.
    WindowQ31 {
        /// Entries found.
        found: usize,
        /// Entries needed (`window_samples`).
        expected: usize,
    },
    /// The window's spectrum holds an odd count or more bins than an eighth
    /// of the FFT.
    WindowSpectrum {
        /// Values found.
        found: usize,
        /// The most allowed (two per bin).
        most: usize,
    },
    /// The log scale constant is not the configuration's.
    LogScale {
        /// Q16 value found.
        found: i32,
        /// Q16 value the configuration's log kind needs.
        expected: i32,
    },
    /// A twiddle is not a quarter-wave cosine of the FFT's size: out of
    /// `[0, 1]` (the negative limit, −1.0, would overflow the FFT's
    /// negation), not falling, or off `cos² + sin² = 1`.
    BadTwiddle {
        /// `"Q15"` or `"Q31"`.
        precision: &'static str,
        /// Index in the quarter-wave table.
        index: usize,
    },
    /// A Q31 window coefficient is negative or disagrees with the Q15 window.
    BadWindowQ31 {
        /// Index.
        index: usize,
    },
    /// A window-spectrum value exceeds the window's own sum (`|W(k)| ≤ W(0)`).
    BadWindowSpectrum {
        /// Index.
        index: usize,
    },
    /// A constant disagrees with the configuration (DC pole, pre-emphasis,
    /// floor), or the configuration's own value is outside its range.
    Constant {
        /// Which constant.
        name: &'static str,
        /// Raw bits found.
        found: i32,
        /// Raw bits the configuration needs (its rounding).
        expected: i32,
    },
}

impl From<TableError> for FixedTableError {
    fn from(e: TableError) -> Self {
        FixedTableError::Table(e)
    }
}

impl fmt::Display for FixedTableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            FixedTableError::Table(e) => write!(f, "{e}"),
            FixedTableError::Twiddles { found, expected } => write!(
                f,
                "twiddle table has {found} entries where the FFT needs {expected}: regenerate the table"
            ),
            FixedTableError::WindowQ31 { found, expected } => write!(
                f,
                "Q31 window has {found} entries where the configuration needs {expected}: regenerate the table"
            ),
            FixedTableError::WindowSpectrum { found, most } => write!(
                f,
                "window spectrum has {found} values where an even count up to {most} is allowed: \
                 regenerate the table"
            ),
            FixedTableError::LogScale { found, expected } => write!(
                f,
                "log scale constant is {found} (Q16) where the configuration's log needs {expected}: \
                 the table is corrupt or for another configuration, regenerate it"
            ),
            FixedTableError::BadTwiddle { precision, index } => write!(
                f,
                "{precision} twiddle {index} is not the quarter-wave cosine of this FFT size \
                 (out of [0, 1], not falling, or off cos² + sin² = 1): the table is corrupt, \
                 regenerate it"
            ),
            FixedTableError::BadWindowQ31 { index } => write!(
                f,
                "Q31 window coefficient {index} is negative or disagrees with the Q15 window: \
                 the table is corrupt, regenerate it"
            ),
            FixedTableError::BadWindowSpectrum { index } => write!(
                f,
                "window spectrum value {index} exceeds the window's sum: the table is corrupt, \
                 regenerate it"
            ),
            FixedTableError::Constant {
                name,
                found,
                expected,
            } => write!(
                f,
                "fixed-point constant `{name}` is {found} (raw) where the configuration needs \
                 {expected}: the table is corrupt or for another configuration, regenerate it"
            ),
        }
    }
}

impl core::error::Error for FixedTableError {}

impl FixedTables<'_> {
    /// Checks the tables against `config` (integer work only). A precision's
    /// own arrays may be empty (tables emitted for the other precision only,
    /// so a board links only what it reads); the front end of a precision
    /// then refuses them ([`FixedTables::check_precision`]).
    pub fn check(&self, config: &FeatureConfig) -> Result<(), FixedTableError> {
        self.table.check(config)?;
        let expected = config.fft_points as usize / 4 + 1;
        for found in [self.twiddles_q15.len(), self.twiddles_q31.len()] {
            if found != 0 && found != expected {
                return Err(FixedTableError::Twiddles { found, expected });
            }
        }
        let expected = config.window_samples as usize;
        let found = self.window_q31.len();
        if found != 0 && found != expected {
            return Err(FixedTableError::WindowQ31 { found, expected });
        }
        let pairs = self.window_spectrum.len() / 2;
        if self.window_spectrum.len() % 2 != 0 || pairs > config.fft_points as usize / 8 {
            return Err(FixedTableError::WindowSpectrum {
                found: self.window_spectrum.len(),
                most: config.fft_points as usize / 4,
            });
        }
        // (The view's check keeps every Q15 weight and window value in
        // [0, 1]: the filterbank reads weights as unsigned.)
        check_twiddles(self.twiddles_q15, "Q15", 32767)?;
        check_twiddles(self.twiddles_q31, "Q31", i32::MAX as i64)?;
        for (index, (&w31, &w15)) in self.window_q31.iter().zip(self.table.window).enumerate() {
            // round(w·2^31) against round(w·2^15): within one Q15 step.
            if w31 < 0 || ((w31 as i64 + (1 << 15)) >> 16).abs_diff(w15 as i64) > 1 {
                return Err(FixedTableError::BadWindowQ31 { index });
            }
        }
        // |W(k)| ≤ Σ w ≤ window_samples, in Q16: so d·W(k) fits i64 for any
        // offset the window stage can take out (|d| < 2^30).
        let bound = (config.window_samples as i64) << 16;
        if let Some(index) = self
            .window_spectrum
            .iter()
            .position(|&v| (v as i64).abs() > bound)
        {
            return Err(FixedTableError::BadWindowSpectrum { index });
        }
        self.check_constants(config)?;
        // The log stage's arithmetic relies on this exact constant.
        let (found, expected) = (
            self.params.log2_to_output.to_bits(),
            log2_to_output_q16(config.log),
        );
        if found != expected {
            return Err(FixedTableError::LogScale { found, expected });
        }
        Ok(())
    }

    /// The DC pole, pre-emphasis and floor against the configuration's
    /// values, rounded as the generator rounds them (integer work: the
    /// configuration's `f32` values are decoded from their bits).
    fn check_constants(&self, config: &FeatureConfig) -> Result<(), FixedTableError> {
        let p = self.params;
        let wrong = |name, found: i32, expected: i32| FixedTableError::Constant {
            name,
            found,
            expected,
        };
        // A pole and a coefficient in [0, 1] (stored below 1) keep the
        // conditioner within its proven bounds (|out| < 2^30).
        let expect = |v: Option<f32>, frac: u32, top: i64| -> Option<i32> {
            match v {
                None => Some(0),
                // 1.0 is stored as the largest code, as the generator does.
                Some(v) => f32_to_fixed(v, frac)
                    .filter(|q| (0..=top).contains(q))
                    .map(|q| q.min(top - 1) as i32),
            }
        };
        let (found, name) = (p.dc_pole.to_bits(), "dc_pole");
        match expect(config.dc_removal_pole, 31, 1 << 31) {
            Some(e) if e == found => {}
            e => return Err(wrong(name, found, e.unwrap_or(-1))),
        }
        let (found, name) = (p.pre_emphasis.to_bits() as i32, "pre_emphasis");
        match expect(config.pre_emphasis, 15, 1 << 15) {
            Some(e) if e == found => {}
            e => return Err(wrong(name, found, e.unwrap_or(-1))),
        }
        // The floor in 1/256 output units: round(floor_db·256) for dB,
        // round(floor_db·256·ln(10)/10) for the natural log (ln(10)/10 in
        // Q62, exact to 2^-63; the generator rounds the same product in f64).
        const LN10_OVER_10_Q62: i128 = 1_061_879_947_959_996_725;
        let found = p.floor.to_bits() as i32;
        let expected = match config.log {
            LogKind::Decibel => f32_to_fixed(config.floor_db, 8),
            LogKind::Natural => {
                // 32 fraction bits, or 24 for a floor beyond ±256 dB (whose
                // f32 has no bits below 2^-15 to lose).
                let (x, frac) = match f32_to_fixed(config.floor_db, 32) {
                    Some(x) => (Some(x), 32),
                    None => (f32_to_fixed(config.floor_db, 24), 24),
                };
                x.map(|x| {
                    let product = x as i128 * LN10_OVER_10_Q62;
                    // × 2^-(frac + 62 - 8), halves away from zero.
                    let shift = frac + 62 - 8;
                    let magnitude = (product.abs() + (1i128 << (shift - 1))) >> shift;
                    (if product < 0 { -magnitude } else { magnitude }) as i64
                })
            }
        };
        match expected {
            Some(e) if e == found as i64 => Ok(()),
            e => Err(wrong(
                "floor",
                found,
                e.map_or(-1, |e| e.clamp(i32::MIN as i64, i32::MAX as i64) as i32),
            )),
        }
    }

    /// Checks that the arrays one precision reads are present: the Q15
    /// twiddles for 16-bit data (`wide == false`), the Q31 twiddles and
    /// window for 32-bit data.
    pub fn check_precision(
        &self,
        config: &FeatureConfig,
        wide: bool,
    ) -> Result<(), FixedTableError> {
        let twiddles = config.fft_points as usize / 4 + 1;
        if !wide {
            if self.twiddles_q15.len() != twiddles {
                return Err(FixedTableError::Twiddles {
                    found: self.twiddles_q15.len(),
                    expected: twiddles,
                });
            }
            return Ok(());
        }
        if self.twiddles_q31.len() != twiddles {
            return Err(FixedTableError::Twiddles {
                found: self.twiddles_q31.len(),
                expected: twiddles,
            });
        }
        if self.window_q31.len() != config.window_samples as usize {
            return Err(FixedTableError::WindowQ31 {
                found: self.window_q31.len(),
                expected: config.window_samples as usize,
            });
        }
        Ok(())
    }
}

/// Checks a quarter-wave cosine table `q[j] = round(cos(2πj/N)·2^k)` with
/// 1.0 clamped to `one = 2^k − 1` (empty: absent): `q[0] = one`,
/// `q[N/4] = 0`, every value in `[0, one]` and falling, and
/// `q[j]² + q[N/4 − j]²` within rounding of `2^2k` (common practice:
/// cos² + sin² = 1).
/// Integer work only.
fn check_twiddles<T: Copy + Into<i64>>(
    q: &[T],
    precision: &'static str,
    one: i64,
) -> Result<(), FixedTableError> {
    let bad = |index| Err(FixedTableError::BadTwiddle { precision, index });
    let Some(last) = q.len().checked_sub(1) else {
        return Ok(());
    };
    let v = |j: usize| -> i64 { q[j].into() };
    for j in 0..=last {
        let ok = (0..=one).contains(&v(j))
            && (j == 0 || v(j) <= v(j - 1))
            && (j != 0 || v(0) == one)
            && (j != last || last == 0 || v(j) == 0);
        // Each value is round(c·2^k) within ½ (1.0 clamped to one = 2^k − 1):
        // the sum of squares lies within 2·2^k + 1 of 2^2k.
        // With both values in [0, 2^31): the sum fits i64 (below 2^63).
        if !ok || !(0..=one).contains(&v(last - j)) {
            return bad(j);
        }
        let scale = one + 1;
        let sum = v(j) * v(j) + v(last - j) * v(last - j);
        if (sum - scale * scale).unsigned_abs() > (2 * scale + 1) as u64 {
            return bad(j);
        }
    }
    Ok(())
}

/// `round(v · 2^frac)` (halves away from zero) from an `f32`'s bits,
/// integer work only; `None` for a non-finite value or one beyond `2^40`.
pub fn f32_to_fixed(v: f32, frac: u32) -> Option<i64> {
    let bits = v.to_bits();
    let exp = ((bits >> 23) & 0xff) as i32;
    if exp == 0xff {
        return None;
    }
    let mantissa = (bits & 0x7f_ffff) as i64 | if exp == 0 { 0 } else { 1 << 23 };
    // value = mantissa · 2^(max(exp, 1) − 150); scaled by 2^frac.
    let shift = exp.max(1) - 150 + frac as i32;
    let magnitude = if shift >= 0 {
        if shift > 16 {
            return None;
        }
        mantissa << shift
    } else if shift <= -40 {
        0
    } else {
        (mantissa + (1 << (-shift - 1))) >> -shift
    };
    Some(if bits >> 31 == 1 {
        -magnitude
    } else {
        magnitude
    })
}
