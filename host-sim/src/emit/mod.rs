//! Emitters: Rust source, C header and blob, and the size report.

mod blob_writer;
mod c_header;
mod rust_source;

use std::fmt::Write;
use std::path::{Path, PathBuf};

use anyhow::Result;
pub use blob_writer::{BlobContents, blob, sections};
pub use c_header::c_header;
pub use rust_source::rust_source;

use crate::generate::GeneratedTables;
use crate::output::write_set_atomic;

/// The files written for one configuration.
#[derive(Debug, Clone)]
pub struct WrittenTables {
    /// Rust source.
    pub rust: PathBuf,
    /// C header.
    pub header: PathBuf,
    /// Blob.
    pub blob: PathBuf,
    /// Blob length in bytes.
    pub blob_bytes: usize,
}

/// C identifier prefix for a configuration name.
pub fn c_prefix(name: &str) -> String {
    let ident: String = name
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() {
                c.to_ascii_lowercase()
            } else {
                '_'
            }
        })
        .collect();
    format!("stapes_{ident}")
}

/// Writes `<name>.rs`, `<name>.h` and `<name>.bin` into `dir`.
pub fn write_all(
    tables: &GeneratedTables,
    name: &str,
    dir: &Path,
    command: &str,
    contents: BlobContents,
) -> Result<WrittenTables> {
    write_all_with(tables, name, dir, command, contents, true)
}

/// [`write_all`], flushed to the disk only when `durable` (a command that
/// rewrites them on every run, as `export` does, need not wait).
pub fn write_all_with(
    tables: &GeneratedTables,
    name: &str,
    dir: &Path,
    command: &str,
    contents: BlobContents,
    durable: bool,
) -> Result<WrittenTables> {
    let rust = dir.join(format!("{name}.rs"));
    let header = dir.join(format!("{name}.h"));
    let blob_path = dir.join(format!("{name}.bin"));
    let bytes = blob(tables, contents);
    // The three describe one configuration: all of them, or none.
    let source = rust_source(tables, command);
    let c = c_header(tables, &c_prefix(name), command);
    let files: [(&Path, &[u8]); 3] = [
        (&rust, source.as_bytes()),
        (&header, c.as_bytes()),
        (&blob_path, &bytes),
    ];
    if durable {
        write_set_atomic(&files)?;
    } else {
        crate::output::write_set_atomic_unsynced(&files)?;
    }
    Ok(WrittenTables {
        rust,
        header,
        blob: blob_path,
        blob_bytes: bytes.len(),
    })
}

/// Bytes of each part, for the size report and the budget.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PartSizes {
    /// Window, f32.
    pub window_f32: usize,
    /// Window, Q15.
    pub window_q15: usize,
    /// Sparse spans.
    pub sparse_spans: usize,
    /// Sparse weights, f32.
    pub sparse_weights_f32: usize,
    /// Sparse weights, Q15.
    pub sparse_weights_q15: usize,
    /// Compact segment starts (0 when absent).
    pub compact_segments: usize,
    /// Compact weights, f32.
    pub compact_weights_f32: usize,
    /// Compact weights, Q15.
    pub compact_weights_q15: usize,
    /// Gains, f32.
    pub gains_f32: usize,
    /// Gains, Q15.
    pub gains_q15: usize,
    /// The dense f32 matrix a naive implementation would store.
    pub dense_f32: usize,
    /// Quarter-wave twiddles, Q15 (for the 16-bit integer FFT).
    pub twiddles_q15: usize,
    /// Quarter-wave twiddles, Q31 (for the 32-bit integer FFT).
    pub twiddles_q31: usize,
    /// Window, Q31 (for the 32-bit fixed path).
    pub window_q31: usize,
}

impl PartSizes {
    /// Sizes of the parts of `tables`.
    pub fn of(tables: &GeneratedTables) -> PartSizes {
        let c = &tables.config;
        PartSizes {
            window_f32: tables.window_f32.len() * 4,
            window_q15: tables.window_q15.len() * 2,
            sparse_spans: tables.spans.len() * 4,
            sparse_weights_f32: tables.sparse_f32.len() * 4,
            sparse_weights_q15: tables.sparse_q15.len() * 2,
            compact_segments: tables.segment_starts.len() * 2,
            compact_weights_f32: tables.compact_f32.len() * 4,
            compact_weights_q15: tables.compact_q15.len() * 2,
            gains_f32: tables.gains_f32.as_ref().map_or(0, |g| g.len() * 4),
            gains_q15: tables.gains_q15.as_ref().map_or(0, |g| g.len() * 2),
            dense_f32: c.bands as usize * c.spectrum_bins() * 4,
            twiddles_q15: tables.twiddles_q15.len() * 2,
            twiddles_q31: tables.twiddles_q31.len() * 4,
            window_q31: tables.window_q31.len() * 4,
        }
    }

    /// Filterbank bytes (spans or segments, weights, gains) of one choice.
    pub fn filterbank(&self, q15: bool, compact: bool) -> usize {
        match (q15, compact) {
            (false, false) => self.sparse_spans + self.sparse_weights_f32 + self.gains_f32,
            (true, false) => self.sparse_spans + self.sparse_weights_q15 + self.gains_q15,
            (false, true) => self.compact_segments + self.compact_weights_f32 + self.gains_f32,
            (true, true) => self.compact_segments + self.compact_weights_q15 + self.gains_q15,
        }
    }
}

/// The printed size report.
pub fn size_report(tables: &GeneratedTables, name: &str, blob_bytes: Option<usize>) -> String {
    let p = PartSizes::of(tables);
    let q = &tables.quantisation;
    let c = &tables.config;
    let mut s = String::new();
    let _ = writeln!(
        s,
        "tables for {name} (fingerprint {:#010x}): {} bands, {} bins",
        c.fingerprint(),
        c.bands,
        c.spectrum_bins()
    );
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10}",
        "part", "f32 bytes", "q15 bytes"
    );
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10}",
        format!("window ({} coefficients)", c.window_samples),
        p.window_f32,
        p.window_q15
    );
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10}",
        format!("sparse spans ({} x 2 u16)", tables.spans.len()),
        p.sparse_spans,
        p.sparse_spans
    );
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10}",
        format!("sparse weights ({})", tables.sparse_f32.len()),
        p.sparse_weights_f32,
        p.sparse_weights_q15
    );
    if tables.has_compact() {
        let _ = writeln!(
            s,
            "  {:<34} {:>10} {:>10}",
            format!(
                "compact segment starts ({} u16)",
                tables.segment_starts.len()
            ),
            p.compact_segments,
            p.compact_segments
        );
        let _ = writeln!(
            s,
            "  {:<34} {:>10} {:>10}",
            format!("compact weights ({})", tables.compact_f32.len()),
            p.compact_weights_f32,
            p.compact_weights_q15
        );
    }
    if tables.gains_f32.is_some() {
        let _ = writeln!(
            s,
            "  {:<34} {:>10} {:>10}",
            "band gains", p.gains_f32, p.gains_q15
        );
    }
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10}",
        "filterbank total, sparse",
        p.filterbank(false, false),
        p.filterbank(true, false)
    );
    if tables.has_compact() {
        let _ = writeln!(
            s,
            "  {:<34} {:>10} {:>10}",
            "filterbank total, compact",
            p.filterbank(false, true),
            p.filterbank(true, true)
        );
    } else {
        let _ = writeln!(
            s,
            "  compact form: not available (rounded-centre-bin triangles do not sum to one)"
        );
    }
    let _ = writeln!(
        s,
        "  {:<34} {:>10}",
        format!("dense f32 matrix ({} x {} x 4)", c.bands, c.spectrum_bins()),
        p.dense_f32
    );
    let _ = writeln!(
        s,
        "  {:<34} {:>10} {:>10}",
        format!(
            "fixed FFT twiddles ({}: q31 | q15)",
            tables.twiddles_q15.len()
        ),
        p.twiddles_q31,
        p.twiddles_q15
    );
    let _ = writeln!(s, "  {:<34} {:>10}", "fixed32 window (q31)", p.window_q31);
    if c.stages.any() {
        let v = tables.stages.view();
        if !v.dct_f32.is_empty() {
            let _ = writeln!(
                s,
                "  {:<34} {:>10} {:>10}",
                format!("MFCC DCT ({} x {}) + lifter", c.stage_values(), c.bands),
                4 * (v.dct_f32.len() + v.lifter_f32.len()),
                2 * (v.dct_q15.len() + v.lifter_q11.len())
            );
        }
        if !v.mean.is_empty() {
            let _ = writeln!(
                s,
                "  {:<34} {:>10}",
                format!("normalisation ({} x 2 f32)", v.mean.len()),
                4 * (v.mean.len() + v.deviation.len())
            );
        }
        let _ = writeln!(
            s,
            "  {:<34} {:>10}",
            "fixed stage constants",
            4 * stapes_core::stage_tables::FIXED_STAGE_WORDS
        );
    }
    if tables.fixed_params.is_none() {
        let _ = writeln!(
            s,
            "  fixed path: not available (the floor lies outside the +-128-unit fixed output)"
        );
    }
    if let Some(b) = blob_bytes {
        let _ = writeln!(s, "  {:<34} {:>10}", "blob (all sections, with header)", b);
    }
    let compact = |v: f64| {
        if tables.has_compact() {
            format!("{v:.2e}")
        } else {
            "n/a".into()
        }
    };
    let _ = writeln!(
        s,
        "  worst weight error: q15 sparse {:.2e}, q15 compact {}, f32 {:.2e}, q15 window {:.2e}",
        q.sparse_q15_weight,
        compact(q.compact_q15_weight),
        q.f32_weight,
        q.window_q15
    );
    let _ = writeln!(
        s,
        "  worst band-gain error (relative): q15 sparse {:.2e}, q15 compact {}",
        q.sparse_q15_band_gain,
        compact(q.compact_q15_band_gain)
    );
    s
}
