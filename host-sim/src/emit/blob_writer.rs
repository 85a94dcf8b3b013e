//! Writes the checked table blob read by [`stapes_core::blob::TableBlob`].

use stapes_core::blob::{
    CRC_OFFSET, DIRECTORY_ENTRY_BYTES, FORMAT_VERSION, HEADER_BYTES, MAGIC, SectionKind, blob_crc,
};

use crate::generate::GeneratedTables;

/// Which parts go into a blob.
#[derive(Debug, Clone, Copy)]
pub struct BlobContents {
    /// Include f32 sections.
    pub f32: bool,
    /// Include Q15 sections.
    pub q15: bool,
    /// Include the sparse filterbank.
    pub sparse: bool,
    /// Include the compact filterbank (when the configuration has one).
    pub compact: bool,
}

impl BlobContents {
    /// Everything.
    pub const ALL: BlobContents = BlobContents {
        f32: true,
        q15: true,
        sparse: true,
        compact: true,
    };
}

/// Little-endian bytes of a table element.
trait LeBytes {
    fn put_le(&self, out: &mut Vec<u8>);
}

macro_rules! le_bytes {
    ($($t:ty),*) => {$(
        impl LeBytes for $t {
            fn put_le(&self, out: &mut Vec<u8>) {
                out.extend(self.to_le_bytes());
            }
        }
    )*};
}
le_bytes!(f32, i16, u16, i32);

impl LeBytes for [u16; 2] {
    fn put_le(&self, out: &mut Vec<u8>) {
        self[0].put_le(out);
        self[1].put_le(out);
    }
}

fn bytes_of<T: LeBytes>(items: &[T]) -> Vec<u8> {
    let mut out = Vec::new();
    for v in items {
        v.put_le(&mut out);
    }
    out
}

/// The sections of `tables` selected by `contents`, in blob order.
pub fn sections(tables: &GeneratedTables, contents: BlobContents) -> Vec<(SectionKind, Vec<u8>)> {
    let mut out = vec![(SectionKind::Config, tables.config.to_bytes().to_vec())];
    if tables.config.stages.any() {
        let (bytes, len) = tables.config.stages.to_section();
        out.push((SectionKind::StageConfig, bytes[..len].to_vec()));
        let v = tables.stages.view();
        let optional: [(SectionKind, Vec<u8>); 8] = [
            (SectionKind::DctF32, bytes_of(v.dct_f32)),
            (SectionKind::DctQ15, bytes_of(v.dct_q15)),
            (SectionKind::LifterF32, bytes_of(v.lifter_f32)),
            (SectionKind::LifterQ11, bytes_of(v.lifter_q11)),
            (SectionKind::NormaliseMean, bytes_of(v.mean)),
            (SectionKind::NormaliseDeviation, bytes_of(v.deviation)),
            (SectionKind::NormaliseOffsets, bytes_of(v.norm_offsets)),
            (
                SectionKind::NormaliseMultipliers,
                bytes_of(v.norm_multipliers),
            ),
        ];
        out.extend(optional.into_iter().filter(|(_, b)| !b.is_empty()));
        if v.fixed != stapes_core::stage_tables::FixedStageParams::NONE {
            out.push((SectionKind::FixedStageParams, bytes_of(&v.fixed.to_words())));
        }
    }
    let compact = contents.compact && tables.has_compact();
    if contents.f32 {
        out.push((SectionKind::WindowF32, bytes_of(&tables.window_f32)));
    }
    if contents.q15 {
        out.push((SectionKind::WindowQ15, bytes_of(&tables.window_q15)));
    }
    if contents.sparse {
        out.push((SectionKind::SparseSpans, bytes_of(&tables.spans)));
        if contents.f32 {
            out.push((SectionKind::SparseWeightsF32, bytes_of(&tables.sparse_f32)));
        }
        if contents.q15 {
            out.push((SectionKind::SparseWeightsQ15, bytes_of(&tables.sparse_q15)));
        }
    }
    if compact {
        out.push((
            SectionKind::CompactSegments,
            bytes_of(&tables.segment_starts),
        ));
        if contents.f32 {
            out.push((
                SectionKind::CompactWeightsF32,
                bytes_of(&tables.compact_f32),
            ));
        }
        if contents.q15 {
            out.push((
                SectionKind::CompactWeightsQ15,
                bytes_of(&tables.compact_q15),
            ));
        }
    }
    if let (true, Some(g)) = (contents.f32, &tables.gains_f32) {
        out.push((SectionKind::GainsF32, bytes_of(g)));
    }
    if let (true, Some(g)) = (contents.q15, &tables.gains_q15) {
        out.push((SectionKind::GainsQ15, bytes_of(g)));
    }
    if let (true, Some(p)) = (contents.q15, &tables.fixed_params) {
        out.push((SectionKind::TwiddlesQ15, bytes_of(&tables.twiddles_q15)));
        out.push((SectionKind::TwiddlesQ31, bytes_of(&tables.twiddles_q31)));
        out.push((SectionKind::WindowQ31, bytes_of(&tables.window_q31)));
        out.push((SectionKind::FixedParams, bytes_of(&p.to_words())));
        if !tables.window_spectrum.is_empty() {
            out.push((
                SectionKind::WindowSpectrum,
                bytes_of(&tables.window_spectrum),
            ));
        }
    }
    out
}

/// The complete blob.
pub fn blob(tables: &GeneratedTables, contents: BlobContents) -> Vec<u8> {
    let sections = sections(tables, contents);
    let mut offset = HEADER_BYTES + sections.len() * DIRECTORY_ENTRY_BYTES;
    let mut directory = Vec::new();
    for (kind, bytes) in &sections {
        offset = offset.next_multiple_of(4);
        directory.extend((*kind as u16).to_le_bytes());
        directory.extend(0u16.to_le_bytes());
        directory.extend((offset as u32).to_le_bytes());
        directory.extend((bytes.len() as u32).to_le_bytes());
        offset += bytes.len();
    }
    let mut blob = Vec::with_capacity(offset);
    blob.extend(MAGIC);
    blob.extend(FORMAT_VERSION.to_le_bytes());
    blob.extend((sections.len() as u16).to_le_bytes());
    blob.extend(0u32.to_le_bytes()); // total length, patched below
    blob.extend(tables.config.fingerprint().to_le_bytes());
    blob.extend([0u8; 8]);
    blob.extend(0u32.to_le_bytes()); // CRC, patched below
    blob.extend(directory);
    for (_, bytes) in &sections {
        blob.resize(blob.len().next_multiple_of(4), 0);
        blob.extend(bytes);
    }
    blob.resize(blob.len().next_multiple_of(4), 0);
    let total = blob.len() as u32;
    blob[12..16].copy_from_slice(&total.to_le_bytes());
    let crc = blob_crc(&blob);
    blob[CRC_OFFSET..CRC_OFFSET + 4].copy_from_slice(&crc.to_le_bytes());
    blob
}
