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
    /// A Q15 filterbank weight is negative.
    NegativeWeight {
        /// Position in the weight array.
        index: usize,
    },
    /// The log scale constant is not the configuration's.
    LogScale {
        /// Q16 value found.
        found: i32,
        /// Q16 value the configuration's log kind needs.
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
            FixedTableError::NegativeWeight { index } => write!(
                f,
                "filterbank weight {index} is negative: the table is corrupt, regenerate it"
            ),
            FixedTableError::LogScale { found, expected } => write!(
                f,
                "log scale constant is {found} (Q16) where the configuration's log needs {expected}: \
                 the table is corrupt or for another configuration, regenerate it"
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
        // The mel loops read weights as unsigned.
        let weights = match self.table.filterbank {
            crate::table::Filterbank::Sparse { weights, .. }
            | crate::table::Filterbank::Compact { weights, .. } => weights,
        };
        if let Some(index) = weights.iter().position(|&w| w < 0) {
            return Err(FixedTableError::NegativeWeight { index });
        }
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
