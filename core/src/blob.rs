//! The checked binary table blob: format and zero-copy parser.
//!
//! A blob carries a configuration and the tables generated for it, so a board
//! can take new tables (a new preset) without new code. All integers and floats
//! are little-endian; every section starts on a 4-byte boundary.
//!
//! ```text
//! offset  size  field
//!      0     8  magic  "STAPESTB"
//!      8     2  format version (1)
//!     10     2  section count S
//!     12     4  total length in bytes (header + directory + sections)
//!     16     4  configuration fingerprint (CRC-32 of the configuration bytes)
//!     20     8  reserved, zero
//!     28     4  CRC-32 of bytes 0..28 followed by bytes 32..total length
//!     32  12·S  directory: per section kind (u16), reserved (u16),
//!               offset (u32, from the blob start), length in bytes (u32)
//! ```
//!
//! Section kinds are the [`SectionKind`] values. The parser checks the magic,
//! version, length, CRC, directory bounds and alignment, that the
//! configuration decodes and matches the fingerprint, and (when a view is
//! taken) that the view fits the configuration ([`TableView::check`]).
//!
//! The blob must sit at a 4-byte-aligned address (flash sectors are; on the
//! host, copy it into a `Vec<u32>` or another 4-byte-aligned buffer).

use core::fmt;

use crate::config::{CONFIG_BYTES, FeatureConfig, StageConfig};
use crate::crc32::Crc32;
use crate::fixed_tables::{FixedParams, FixedTableError, FixedTables};
use crate::stage_tables::{FixedStageParams, StageTableError, StageTables};
use crate::table::{BinSpan, Filterbank, FilterbankForm, TableError, TableView, WeightType};

/// First eight bytes of every blob.
pub const MAGIC: [u8; 8] = *b"STAPESTB";
/// Format version the generator writes. Version 2 added the Q31 window
/// ([`SectionKind::WindowQ31`]) that the 32-bit fixed path reads; version 3
/// the optional sections of the stages after the filterbank
/// ([`SectionKind::StageConfig`] and the tables [`TableBlob::stage_tables`]
/// reads). Versions 1 and 2 still parse (their configurations have no stages).
pub const FORMAT_VERSION: u16 = 3;
/// Oldest format version this parser reads: a version-1 blob gives `f32` and
/// Q15 views, and its fixed-point tables are refused as missing the Q31
/// window (regenerate it).
pub const OLDEST_FORMAT_VERSION: u16 = 1;
/// Bytes before the directory.
pub const HEADER_BYTES: usize = 32;
/// Bytes per directory entry.
pub const DIRECTORY_ENTRY_BYTES: usize = 12;
/// Offset of the CRC field in the header.
pub const CRC_OFFSET: usize = 28;

/// What a section holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[repr(u16)]
pub enum SectionKind {
    /// [`FeatureConfig::to_bytes`].
    Config = 1,
    /// Window, f32.
    WindowF32 = 2,
    /// Window, Q15.
    WindowQ15 = 3,
    /// Sparse spans, `[u16; 2]` per band (shared by both weight types).
    SparseSpans = 4,
    /// Sparse weights, f32.
    SparseWeightsF32 = 5,
    /// Sparse weights, Q15.
    SparseWeightsQ15 = 6,
    /// Compact segment starts, u16.
    CompactSegments = 7,
    /// Compact weights, f32.
    CompactWeightsF32 = 8,
    /// Compact weights, Q15.
    CompactWeightsQ15 = 9,
    /// Per-band gains, f32.
    GainsF32 = 10,
    /// Per-band gains, Q15 tables (log offsets).
    GainsQ15 = 11,
    /// Quarter-wave cosine twiddles, Q15 (`i16`).
    TwiddlesQ15 = 12,
    /// Quarter-wave cosine twiddles, Q31 (`i32`).
    TwiddlesQ31 = 13,
    /// Fixed-path constants, [`FixedParams::to_words`](crate::fixed_tables::FixedParams::to_words).
    FixedParams = 14,
    /// Window, Q31 (`i32`), read by the 32-bit fixed path (format version 2).
    WindowQ31 = 15,
    /// [`StageConfig::to_section`](crate::stage_config::StageConfig::to_section)
    /// (format version 3; absent for a configuration without stages).
    StageConfig = 16,
    /// The MFCC's DCT matrix, f32.
    DctF32 = 17,
    /// The MFCC's DCT matrix, Q15.
    DctQ15 = 18,
    /// The MFCC's lifter, f32.
    LifterF32 = 19,
    /// The MFCC's lifter, Q11.
    LifterQ11 = 20,
    /// Normalisation means, f32.
    NormaliseMean = 21,
    /// Normalisation deviations, f32.
    NormaliseDeviation = 22,
    /// The fixed path's stage parameters,
    /// [`FixedStageParams::to_words`](crate::stage_tables::FixedStageParams::to_words).
    FixedStageParams = 23,
    /// The Q15 window's DFT on its first bins, `(re, im)` Q16 `i32` pairs
    /// ([`FixedTables::window_spectrum`]); optional (format version 3).
    WindowSpectrum = 24,
    /// The fixed normalising quantiser's offsets, `i32`.
    NormaliseOffsets = 25,
    /// The fixed normalising quantiser's multipliers, `i32`.
    NormaliseMultipliers = 26,
}

impl SectionKind {
    /// Human-readable name of the section.
    pub fn name(self) -> &'static str {
        match self {
            SectionKind::Config => "configuration",
            SectionKind::WindowF32 => "window f32",
            SectionKind::WindowQ15 => "window q15",
            SectionKind::SparseSpans => "sparse spans",
            SectionKind::SparseWeightsF32 => "sparse weights f32",
            SectionKind::SparseWeightsQ15 => "sparse weights q15",
            SectionKind::CompactSegments => "compact segment starts",
            SectionKind::CompactWeightsF32 => "compact weights f32",
            SectionKind::CompactWeightsQ15 => "compact weights q15",
            SectionKind::GainsF32 => "band gains f32",
            SectionKind::GainsQ15 => "band gains q15",
            SectionKind::TwiddlesQ15 => "twiddles q15",
            SectionKind::TwiddlesQ31 => "twiddles q31",
            SectionKind::FixedParams => "fixed-point constants",
            SectionKind::WindowQ31 => "window q31",
            SectionKind::StageConfig => "stage configuration",
            SectionKind::DctF32 => "dct f32",
            SectionKind::DctQ15 => "dct q15",
            SectionKind::LifterF32 => "lifter f32",
            SectionKind::LifterQ11 => "lifter q11",
            SectionKind::NormaliseMean => "normalisation means",
            SectionKind::NormaliseDeviation => "normalisation deviations",
            SectionKind::FixedStageParams => "fixed-point stage constants",
            SectionKind::WindowSpectrum => "window spectrum",
            SectionKind::NormaliseOffsets => "normalisation offsets",
            SectionKind::NormaliseMultipliers => "normalisation multipliers",
        }
    }
}

/// Weight types that have blob sections.
pub trait BlobWeight: WeightType {
    /// Window section of this type.
    const WINDOW: SectionKind;
    /// Sparse weight section of this type.
    const SPARSE_WEIGHTS: SectionKind;
    /// Compact weight section of this type.
    const COMPACT_WEIGHTS: SectionKind;
    /// Gain section of this type.
    const GAINS: SectionKind;
}

impl BlobWeight for f32 {
    const WINDOW: SectionKind = SectionKind::WindowF32;
    const SPARSE_WEIGHTS: SectionKind = SectionKind::SparseWeightsF32;
    const COMPACT_WEIGHTS: SectionKind = SectionKind::CompactWeightsF32;
    const GAINS: SectionKind = SectionKind::GainsF32;
}

impl BlobWeight for i16 {
    const WINDOW: SectionKind = SectionKind::WindowQ15;
    const SPARSE_WEIGHTS: SectionKind = SectionKind::SparseWeightsQ15;
    const COMPACT_WEIGHTS: SectionKind = SectionKind::CompactWeightsQ15;
    const GAINS: SectionKind = SectionKind::GainsQ15;
}

/// Why a blob was rejected.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum BlobError {
    /// Fewer bytes than a header.
    TooShort {
        /// Bytes given.
        len: usize,
    },
    /// The first bytes are not the magic.
    BadMagic,
    /// A format version this parser does not read.
    UnsupportedVersion {
        /// Version in the blob.
        found: u16,
    },
    /// The header's length disagrees with the bytes given (truncated or padded).
    LengthMismatch {
        /// Length the header states.
        stated: usize,
        /// Bytes given.
        actual: usize,
    },
    /// The CRC does not match the contents.
    BadCrc {
        /// CRC in the header.
        stored: u32,
        /// CRC computed over the contents.
        computed: u32,
    },
    /// A directory entry points outside the blob or is misaligned.
    BadDirectory {
        /// Entry index.
        entry: usize,
    },
    /// A section the requested view needs is absent.
    MissingSection {
        /// The section.
        kind: SectionKind,
    },
    /// A section's length is not a whole number of its elements.
    BadSectionLength {
        /// The section.
        kind: SectionKind,
    },
    /// The configuration section does not decode, or does not match the
    /// header's fingerprint.
    BadConfig,
    /// The blob does not start on a 4-byte boundary.
    Misaligned,
    /// This parser reads little-endian data in place and runs on a big-endian target.
    BigEndianTarget,
    /// The tables do not fit the configuration.
    Table(TableError),
    /// The fixed-point sections hold values no generator writes.
    FixedContents(FixedTableError),
    /// The stage sections do not fit the configuration's stages.
    StageTables(StageTableError),
}

impl From<TableError> for BlobError {
    fn from(e: TableError) -> Self {
        BlobError::Table(e)
    }
}

impl fmt::Display for BlobError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            BlobError::TooShort { len } => write!(
                f,
                "table blob is {len} bytes, shorter than its {HEADER_BYTES}-byte header: \
                 the file is truncated or not a table blob"
            ),
            BlobError::BadMagic => write!(
                f,
                "table blob does not start with \"STAPESTB\": not a table blob \
                 (generate one with `stapes tables`)"
            ),
            BlobError::UnsupportedVersion { found } => write!(
                f,
                "table blob format version {found} is not supported (this build reads \
                 versions {OLDEST_FORMAT_VERSION} to {FORMAT_VERSION}): regenerate it with \
                 this version's `stapes tables`"
            ),
            BlobError::LengthMismatch { stated, actual } => write!(
                f,
                "table blob header states {stated} bytes but {actual} were given: \
                 the file is truncated or has extra bytes; copy it again"
            ),
            BlobError::BadCrc { stored, computed } => write!(
                f,
                "table blob CRC-32 {computed:#010x} does not match the stored {stored:#010x}: \
                 the blob is corrupt; copy or regenerate it"
            ),
            BlobError::BadDirectory { entry } => write!(
                f,
                "table blob directory entry {entry} points outside the blob or to a \
                 misaligned offset: the blob is corrupt; regenerate it"
            ),
            BlobError::MissingSection { kind } => write!(
                f,
                "table blob has no {} section: regenerate it including that weight type \
                 and filterbank form",
                kind.name()
            ),
            BlobError::BadSectionLength { kind } => write!(
                f,
                "table blob section {} has a length that is not a whole number of \
                 elements: the blob is corrupt; regenerate it",
                kind.name()
            ),
            BlobError::BadConfig => write!(
                f,
                "table blob configuration section is unreadable or does not match its \
                 fingerprint: regenerate the blob"
            ),
            BlobError::Misaligned => write!(
                f,
                "table blob is not at a 4-byte-aligned address: place it on a 4-byte \
                 boundary (for example read it into a u32 buffer)"
            ),
            BlobError::BigEndianTarget => write!(
                f,
                "table blobs are little-endian and read in place; this target is big-endian"
            ),
            BlobError::Table(e) => write!(f, "table blob: {e}"),
            BlobError::FixedContents(e) => write!(f, "table blob: {e}"),
            BlobError::StageTables(e) => write!(f, "table blob: {e}"),
        }
    }
}

impl core::error::Error for BlobError {}

fn le_u16(b: &[u8], at: usize) -> u16 {
    u16::from_le_bytes([b[at], b[at + 1]])
}

fn le_u32(b: &[u8], at: usize) -> u32 {
    u32::from_le_bytes([b[at], b[at + 1], b[at + 2], b[at + 3]])
}

/// CRC-32 the header stores for `blob` (whose header is complete).
pub fn blob_crc(blob: &[u8]) -> u32 {
    let mut crc = Crc32::new();
    crc.update(&blob[..CRC_OFFSET]);
    crc.update(&blob[HEADER_BYTES..]);
    crc.finish()
}

/// A parsed, checked blob borrowing its bytes.
#[derive(Clone, Copy, Debug)]
pub struct TableBlob<'a> {
    bytes: &'a [u8],
    config: FeatureConfig,
    sections: usize,
}

impl<'a> TableBlob<'a> {
    /// Parses and checks `bytes` (see the module docs for what is checked).
    pub fn parse(bytes: &'a [u8]) -> Result<Self, BlobError> {
        if cfg!(target_endian = "big") {
            return Err(BlobError::BigEndianTarget);
        }
        if bytes.len() < HEADER_BYTES {
            return Err(BlobError::TooShort { len: bytes.len() });
        }
        if bytes[..8] != MAGIC {
            return Err(BlobError::BadMagic);
        }
        let version = le_u16(bytes, 8);
        if !(OLDEST_FORMAT_VERSION..=FORMAT_VERSION).contains(&version) {
            return Err(BlobError::UnsupportedVersion { found: version });
        }
        let sections = le_u16(bytes, 10) as usize;
        let stated = le_u32(bytes, 12) as usize;
        if stated != bytes.len() {
            return Err(BlobError::LengthMismatch {
                stated,
                actual: bytes.len(),
            });
        }
        let stored = le_u32(bytes, CRC_OFFSET);
        let computed = blob_crc(bytes);
        if stored != computed {
            return Err(BlobError::BadCrc { stored, computed });
        }
        if (bytes.as_ptr() as usize) % 4 != 0 {
            return Err(BlobError::Misaligned);
        }
        let dir_end = HEADER_BYTES + sections * DIRECTORY_ENTRY_BYTES;
        if dir_end > bytes.len() {
            return Err(BlobError::BadDirectory { entry: 0 });
        }
        for entry in 0..sections {
            let at = HEADER_BYTES + entry * DIRECTORY_ENTRY_BYTES;
            let offset = le_u32(bytes, at + 4) as usize;
            let len = le_u32(bytes, at + 8) as usize;
            let fits = offset >= dir_end
                && offset % 4 == 0
                && offset
                    .checked_add(len)
                    .is_some_and(|end| end <= bytes.len());
            if !fits {
                return Err(BlobError::BadDirectory { entry });
            }
        }
        let mut blob = TableBlob {
            bytes,
            config: crate::presets::SPEECH16K_40,
            sections,
        };
        let raw = blob.section_bytes(SectionKind::Config)?;
        let raw: &[u8; CONFIG_BYTES] = raw.try_into().map_err(|_| BlobError::BadConfig)?;
        let mut config = FeatureConfig::from_bytes(raw).ok_or(BlobError::BadConfig)?;
        if let Ok(raw) = blob.section_bytes(SectionKind::StageConfig) {
            config.stages = StageConfig::from_section(raw).ok_or(BlobError::BadConfig)?;
        }
        if config.fingerprint() != le_u32(bytes, 16) {
            return Err(BlobError::BadConfig);
        }
        blob.config = config;
        Ok(blob)
    }

    /// The configuration the blob was generated for (not yet validated: call
    /// [`FeatureConfig::validate`] where `f64` work is acceptable).
    pub fn config(&self) -> FeatureConfig {
        self.config
    }

    /// Whether the blob holds a section.
    pub fn has(&self, kind: SectionKind) -> bool {
        self.section_bytes(kind).is_ok()
    }

    fn section_bytes(&self, kind: SectionKind) -> Result<&'a [u8], BlobError> {
        for entry in 0..self.sections {
            let at = HEADER_BYTES + entry * DIRECTORY_ENTRY_BYTES;
            if le_u16(self.bytes, at) == kind as u16 {
                let offset = le_u32(self.bytes, at + 4) as usize;
                let len = le_u32(self.bytes, at + 8) as usize;
                return Ok(&self.bytes[offset..offset + len]);
            }
        }
        Err(BlobError::MissingSection { kind })
    }

    fn section<T: bytemuck::Pod>(&self, kind: SectionKind) -> Result<&'a [T], BlobError> {
        let raw = self.section_bytes(kind)?;
        bytemuck::try_cast_slice(raw).map_err(|e| match e {
            bytemuck::PodCastError::TargetAlignmentGreaterAndInputNotAligned => {
                BlobError::Misaligned
            }
            _ => BlobError::BadSectionLength { kind },
        })
    }

    /// A checked table view of weight type `W` (`f32` or `i16` for Q15) in the
    /// given filterbank form.
    pub fn view<W: BlobWeight>(&self, form: FilterbankForm) -> Result<TableView<'a, W>, BlobError> {
        let filterbank = match form {
            FilterbankForm::Sparse => Filterbank::Sparse {
                spans: self.section::<BinSpan>(SectionKind::SparseSpans)?,
                weights: self.section::<W>(W::SPARSE_WEIGHTS)?,
            },
            FilterbankForm::Compact => Filterbank::Compact {
                segment_starts: self.section::<u16>(SectionKind::CompactSegments)?,
                weights: self.section::<W>(W::COMPACT_WEIGHTS)?,
            },
        };
        let band_gains = if self.has(W::GAINS) {
            Some(self.section::<W::Gain>(W::GAINS)?)
        } else {
            None
        };
        let view = TableView {
            fingerprint: self.config.fingerprint(),
            window: self.section::<W>(W::WINDOW)?,
            filterbank,
            band_gains,
        };
        view.check(&self.config)?;
        Ok(view)
    }

    /// Checked tables for the fixed-point path in the given filterbank form.
    pub fn fixed_tables(&self, form: FilterbankForm) -> Result<FixedTables<'a>, BlobError> {
        let words = self.section::<i32>(SectionKind::FixedParams)?;
        let params = FixedParams::from_words(words).ok_or(BlobError::BadSectionLength {
            kind: SectionKind::FixedParams,
        })?;
        let tables = FixedTables {
            table: self.view::<i16>(form)?,
            twiddles_q15: self.section::<i16>(SectionKind::TwiddlesQ15)?,
            twiddles_q31: self.section::<i32>(SectionKind::TwiddlesQ31)?,
            window_q31: self.section::<i32>(SectionKind::WindowQ31)?,
            window_spectrum: match self.section::<i32>(SectionKind::WindowSpectrum) {
                Ok(w) => w,
                Err(BlobError::MissingSection { .. }) => &[],
                Err(e) => return Err(e),
            },
            params,
        };
        tables.check(&self.config).map_err(|e| match e {
            FixedTableError::Table(t) => BlobError::Table(t),
            FixedTableError::Twiddles { .. } => BlobError::BadSectionLength {
                kind: SectionKind::TwiddlesQ15,
            },
            FixedTableError::WindowQ31 { .. } => BlobError::BadSectionLength {
                kind: SectionKind::WindowQ31,
            },
            FixedTableError::WindowSpectrum { .. } => BlobError::BadSectionLength {
                kind: SectionKind::WindowSpectrum,
            },
            other => BlobError::FixedContents(other),
        })?;
        Ok(tables)
    }

    /// The checked tables of the stages after the filterbank (empty where the
    /// configuration has no such stage; a blob older than version 3 has
    /// none).
    pub fn stage_tables(&self) -> Result<StageTables<'a>, BlobError> {
        let or_empty = |kind| -> Result<&'a [u8], BlobError> {
            match self.section_bytes(kind) {
                Ok(b) => Ok(b),
                Err(_) => Ok(&[]),
            }
        };
        // An absent section is an empty slice (whose address need not be
        // aligned, so it is not cast).
        let cast = |kind, raw: &'a [u8]| -> Result<&'a [f32], BlobError> {
            if raw.is_empty() {
                return Ok(&[]);
            }
            bytemuck::try_cast_slice(raw).map_err(|_| BlobError::BadSectionLength { kind })
        };
        let cast32 = |kind, raw: &'a [u8]| -> Result<&'a [i32], BlobError> {
            if raw.is_empty() {
                return Ok(&[]);
            }
            bytemuck::try_cast_slice(raw).map_err(|_| BlobError::BadSectionLength { kind })
        };
        let cast16 = |kind, raw: &'a [u8]| -> Result<&'a [i16], BlobError> {
            if raw.is_empty() {
                return Ok(&[]);
            }
            bytemuck::try_cast_slice(raw).map_err(|_| BlobError::BadSectionLength { kind })
        };
        let fixed = match self.section::<i32>(SectionKind::FixedStageParams) {
            Ok(words) => {
                FixedStageParams::from_words(words).ok_or(BlobError::BadSectionLength {
                    kind: SectionKind::FixedStageParams,
                })?
            }
            Err(BlobError::MissingSection { .. }) => FixedStageParams::NONE,
            Err(e) => return Err(e),
        };
        let tables = StageTables {
            dct_f32: cast(SectionKind::DctF32, or_empty(SectionKind::DctF32)?)?,
            dct_q15: cast16(SectionKind::DctQ15, or_empty(SectionKind::DctQ15)?)?,
            lifter_f32: cast(SectionKind::LifterF32, or_empty(SectionKind::LifterF32)?)?,
            lifter_q11: cast16(SectionKind::LifterQ11, or_empty(SectionKind::LifterQ11)?)?,
            mean: cast(
                SectionKind::NormaliseMean,
                or_empty(SectionKind::NormaliseMean)?,
            )?,
            deviation: cast(
                SectionKind::NormaliseDeviation,
                or_empty(SectionKind::NormaliseDeviation)?,
            )?,
            norm_offsets: cast32(
                SectionKind::NormaliseOffsets,
                or_empty(SectionKind::NormaliseOffsets)?,
            )?,
            norm_multipliers: cast32(
                SectionKind::NormaliseMultipliers,
                or_empty(SectionKind::NormaliseMultipliers)?,
            )?,
            fixed,
        };
        tables.check(&self.config).map_err(BlobError::StageTables)?;
        Ok(tables)
    }
}
