//! The table view: borrowed slices of a precomputed front end.
//!
//! A [`TableView`] is what the core reads on every frame: the window, the
//! filterbank in one of two forms and optional per-band gains. It borrows its
//! slices, so the same core code runs with a table compiled in as Rust
//! source (`&'static` arrays in flash), linked from C, or parsed from a blob
//! at run time ([`crate::blob`]).
//!
//! # Filterbank forms
//!
//! * [`Filterbank::Sparse`]: per band, the first bin and the number of bins,
//!   followed by that many weights; bands are stored in order and their weights
//!   concatenated.
//! * [`Filterbank::Compact`]: one weight per bin. The bins between consecutive
//!   edges form segments; in segment `s`, bin `k` adds `w[k]·P[k]` to band `s`
//!   (its rising side) and `(1 - w[k])·P[k]` to band `s - 1` (its falling
//!   side), because adjacent peak-one triangles sum to one. It exists for
//!   [`TrianglePlacement::ExactFrequency`](crate::config::TrianglePlacement)
//!   only.
//!
//! Weights always describe peak-one shapes; [`BandGain::EqualArea`] is carried
//! by the separate per-band gains.
//!
//! # Weight types
//! * `f32`: weights and gains as plain floats (gains multiply the energy).
//! * `i16`: weights in Q15 (`w = raw / 32768`); gains as offsets added to the
//!   log output, in the fixed path's output units.

use core::fmt;

use crate::config::{BandGain, FeatureConfig, TrianglePlacement};

/// Element types a table can hold. Implemented for `f32` and `i16` (Q15).
pub trait WeightType: Copy + bytemuck::Pod + PartialEq + fmt::Debug + 'static {
    /// Per-band gain representation for this weight type.
    type Gain: Copy + bytemuck::Pod + PartialEq + fmt::Debug + 'static;
    /// Whether a window coefficient or filterbank weight lies in `[0, 1]`
    /// (integer work only, also for `f32`: its bits are compared).
    fn is_unit(self) -> bool;
    /// Whether a band gain is legal.
    fn is_gain(g: Self::Gain) -> bool;
}

impl WeightType for f32 {
    type Gain = f32;
    #[inline]
    fn is_unit(self) -> bool {
        // +0.0 ..= 1.0 are the bit patterns 0 ..= 0x3f80_0000 (subnormals
        // included); −0.0 is 0x8000_0000. NaN and ∞ are outside.
        let b = self.to_bits();
        b <= 0x3f80_0000 || b == 0x8000_0000
    }
    #[inline]
    fn is_gain(g: f32) -> bool {
        // Finite and positive: 1 ..< 0x7f80_0000 (∞).
        (1..0x7f80_0000).contains(&g.to_bits())
    }
}

impl WeightType for i16 {
    /// A log offset in 1/256 of the output unit (the fixed log adds it
    /// saturating, so every value is legal).
    type Gain = i16;
    #[inline]
    fn is_unit(self) -> bool {
        // Q15: 0 ..= 32767.
        self >= 0
    }
    #[inline]
    fn is_gain(_: i16) -> bool {
        true
    }
}

/// `[first_bin, bin_count]` of one band in the sparse form.
pub type BinSpan = [u16; 2];

/// Which filterbank form a table or blob view uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FilterbankForm {
    /// Per-band first bin, count and weights.
    Sparse,
    /// One weight per bin plus segment starts.
    Compact,
}

impl FilterbankForm {
    /// Lower-case name ("sparse", "compact").
    pub fn name(self) -> &'static str {
        match self {
            FilterbankForm::Sparse => "sparse",
            FilterbankForm::Compact => "compact",
        }
    }
}

impl<W: WeightType> Filterbank<'_, W> {
    /// The first bin of the lowest band (its span's first bin, or the
    /// compact form's first segment start): where the frame's log-energy
    /// starts summing.
    pub fn first_bin(&self) -> usize {
        match *self {
            Filterbank::Sparse { spans, .. } => spans.first().map_or(0, |s| s[0] as usize),
            Filterbank::Compact { segment_starts, .. } => {
                segment_starts.first().map_or(0, |&s| s as usize)
            }
        }
    }
}

/// The filterbank in one of its two forms (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Filterbank<'a, W> {
    /// Per-band spans and their concatenated weights.
    Sparse {
        /// One `[first_bin, bin_count]` per band.
        spans: &'a [BinSpan],
        /// `Σ bin_count` weights, band after band.
        weights: &'a [W],
    },
    /// One rising-side weight per bin.
    Compact {
        /// `bands + 2` bin indices; segment `s` is bins
        /// `segment_starts[s] .. segment_starts[s + 1]`.
        segment_starts: &'a [u16],
        /// One weight per bin from `segment_starts[0]` to the last start.
        weights: &'a [W],
    },
}

impl<W> Filterbank<'_, W> {
    /// The form of this filterbank.
    pub fn form(&self) -> FilterbankForm {
        match self {
            Filterbank::Sparse { .. } => FilterbankForm::Sparse,
            Filterbank::Compact { .. } => FilterbankForm::Compact,
        }
    }
}

/// A precomputed front end, borrowed.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TableView<'a, W: WeightType> {
    /// [`FeatureConfig::fingerprint`] of the configuration it was made for.
    pub fingerprint: u32,
    /// `window_samples` window coefficients.
    pub window: &'a [W],
    /// The filterbank.
    pub filterbank: Filterbank<'a, W>,
    /// One gain per band when the configuration asks for
    /// [`BandGain::EqualArea`]; `None` for peak-one bands.
    pub band_gains: Option<&'a [W::Gain]>,
}

/// Why a table does not fit a configuration.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum TableError {
    /// The table was generated for another configuration.
    FingerprintMismatch {
        /// Fingerprint stored in the table.
        table: u32,
        /// Fingerprint of the configuration in use.
        config: u32,
    },
    /// A part has the wrong number of elements.
    WrongLength {
        /// Which part.
        part: &'static str,
        /// Elements found.
        found: usize,
        /// Elements expected.
        expected: usize,
    },
    /// A band reaches past the last spectrum bin, or segments go backwards.
    BadBinLayout {
        /// Band or segment index.
        index: usize,
    },
    /// The compact form cannot express this configuration's triangles.
    CompactNotAvailable,
    /// Gains are present when the configuration has none, or missing.
    GainsMismatch {
        /// Whether the configuration expects gains.
        expected: bool,
    },
    /// A value outside its legal range: a window coefficient or weight
    /// outside `[0, 1]` (or not finite), a gain not finite and positive.
    BadValue {
        /// Which part.
        part: &'static str,
        /// The value's index in it.
        index: usize,
    },
}

impl fmt::Display for TableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            TableError::FingerprintMismatch { table, config } => write!(
                f,
                "table fingerprint {table:#010x} does not match the configuration's \
                 {config:#010x}: regenerate the table with `stapes tables` for this configuration"
            ),
            TableError::WrongLength {
                part,
                found,
                expected,
            } => write!(
                f,
                "table part `{part}` has {found} elements where the configuration needs \
                 {expected}: regenerate the table"
            ),
            TableError::BadBinLayout { index } => write!(
                f,
                "table band or segment {index} lies outside the spectrum or out of order: \
                 regenerate the table"
            ),
            TableError::CompactNotAvailable => write!(
                f,
                "the compact filterbank form cannot express rounded-centre-bin triangles: \
                 use the sparse form"
            ),
            TableError::GainsMismatch { expected: true } => write!(
                f,
                "the configuration asks for equal-area gains but the table has none: \
                 regenerate the table"
            ),
            TableError::GainsMismatch { expected: false } => write!(
                f,
                "the table carries band gains but the configuration has peak-one bands: \
                 regenerate the table"
            ),
            TableError::BadValue { part, index } => write!(
                f,
                "table part `{part}` value {index} is outside its legal range (window and \
                 weights in [0, 1], gains finite and positive): the table is corrupt, \
                 regenerate it"
            ),
        }
    }
}

impl core::error::Error for TableError {}

fn expect_len(part: &'static str, found: usize, expected: usize) -> Result<(), TableError> {
    if found == expected {
        Ok(())
    } else {
        Err(TableError::WrongLength {
            part,
            found,
            expected,
        })
    }
}

impl<'a, W: WeightType> TableView<'a, W> {
    /// Checks that this table fits `config` in every index the per-frame path
    /// uses, so that path never reads out of bounds. Integer work only.
    pub fn check(&self, config: &FeatureConfig) -> Result<(), TableError> {
        let fp = config.fingerprint();
        if self.fingerprint != fp {
            return Err(TableError::FingerprintMismatch {
                table: self.fingerprint,
                config: fp,
            });
        }
        let bands = config.bands as usize;
        let bins = config.spectrum_bins();
        expect_len("window", self.window.len(), config.window_samples as usize)?;
        match self.filterbank {
            Filterbank::Sparse { spans, weights } => {
                expect_len("sparse spans", spans.len(), bands)?;
                let mut total = 0usize;
                for (i, &[first, count]) in spans.iter().enumerate() {
                    if count == 0 || first as usize + count as usize > bins {
                        return Err(TableError::BadBinLayout { index: i });
                    }
                    total += count as usize;
                }
                expect_len("sparse weights", weights.len(), total)?;
            }
            Filterbank::Compact {
                segment_starts,
                weights,
            } => {
                if config.triangles != TrianglePlacement::ExactFrequency {
                    return Err(TableError::CompactNotAvailable);
                }
                expect_len("compact segment starts", segment_starts.len(), bands + 2)?;
                for (i, pair) in segment_starts.windows(2).enumerate() {
                    if pair[1] < pair[0] {
                        return Err(TableError::BadBinLayout { index: i });
                    }
                }
                let first = segment_starts[0] as usize;
                let end = segment_starts[bands + 1] as usize;
                if end > bins {
                    return Err(TableError::BadBinLayout { index: bands + 1 });
                }
                expect_len("compact weights", weights.len(), end - first)?;
            }
        }
        let wants_gains = config.band_gain == BandGain::EqualArea;
        match self.band_gains {
            Some(g) if wants_gains => expect_len("band gains", g.len(), bands)?,
            None if !wants_gains => {}
            _ => {
                return Err(TableError::GainsMismatch {
                    expected: wants_gains,
                });
            }
        }
        // Values: what the per-frame path relies on (no overflow, no NaN).
        let unit = |part, values: &[W]| match values.iter().position(|&v| !v.is_unit()) {
            Some(index) => Err(TableError::BadValue { part, index }),
            None => Ok(()),
        };
        unit("window", self.window)?;
        match self.filterbank {
            Filterbank::Sparse { weights, .. } => unit("sparse weights", weights)?,
            Filterbank::Compact { weights, .. } => unit("compact weights", weights)?,
        }
        if let Some(gains) = self.band_gains
            && let Some(index) = gains.iter().position(|&g| !W::is_gain(g))
        {
            return Err(TableError::BadValue {
                part: "band gains",
                index,
            });
        }
        Ok(())
    }
}

/// A table on a 4-byte boundary (generated windows are: the Cortex-M4 front
/// end reads their 16-bit coefficients two per word).
#[derive(Clone, Copy, Debug, PartialEq)]
#[repr(C, align(4))]
pub struct WordAligned<T>(pub T);
