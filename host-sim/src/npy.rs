//! NumPy `.npy` output (C order, little-endian), written atomically.

use std::io::BufWriter;
use std::path::Path;

use anyhow::Result;
use npyz::{AutoSerialize, Deserialize, WriterBuilder};

use crate::output::write_atomic_with;

/// Writes a `rows × cols` array (`<f4` for `f32`, `<i2` for `i16`).
pub fn write<T: AutoSerialize>(
    path: &Path,
    rows: usize,
    cols: usize,
    data: impl IntoIterator<Item = T>,
) -> Result<()> {
    write_atomic_with(path, |file| {
        let mut w = npyz::WriteOptions::new()
            .default_dtype()
            .shape(&[rows as u64, cols as u64])
            .writer(BufWriter::new(file))
            .begin_nd()?;
        w.extend(data)?;
        w.finish()?;
        Ok(())
    })
}

/// Writes an array of any `shape` (C order).
pub fn write_shaped<T: AutoSerialize>(
    path: &Path,
    shape: &[usize],
    data: impl IntoIterator<Item = T>,
) -> Result<()> {
    let shape: Vec<u64> = shape.iter().map(|&d| d as u64).collect();
    write_atomic_with(path, |file| {
        let mut w = npyz::WriteOptions::new()
            .default_dtype()
            .shape(&shape)
            .writer(BufWriter::new(file))
            .begin_nd()?;
        w.extend(data)?;
        w.finish()?;
        Ok(())
    })
}

/// Writes a `rows × cols` array of `f32`.
pub fn write_f32(
    path: &Path,
    rows: usize,
    cols: usize,
    data: impl IntoIterator<Item = f32>,
) -> Result<()> {
    write(path, rows, cols, data)
}

/// Writes a `rows × cols` array of `i16`.
pub fn write_i16(
    path: &Path,
    rows: usize,
    cols: usize,
    data: impl IntoIterator<Item = i16>,
) -> Result<()> {
    write(path, rows, cols, data)
}

/// Reads a 2-D array: `(rows, cols, data)`.
pub fn read<T: Deserialize>(path: &Path) -> Result<(usize, usize, Vec<T>)> {
    let bytes = std::fs::read(path)?;
    let npy = npyz::NpyFile::new(&bytes[..])?;
    let shape = npy.shape().to_vec();
    anyhow::ensure!(shape.len() == 2, "{} is not a 2-D array", path.display());
    let data = npy.into_vec::<T>()?;
    Ok((shape[0] as usize, shape[1] as usize, data))
}

/// Reads a 2-D `f32` array.
pub fn read_f32(path: &Path) -> Result<(usize, usize, Vec<f32>)> {
    read(path)
}

/// Reads a 2-D `i16` array.
pub fn read_i16(path: &Path) -> Result<(usize, usize, Vec<i16>)> {
    read(path)
}

/// The `.npy` (format 1.0) header of a C-order array of `descr` (`<f4`,
/// `<i2`, `<i4`, `|i1`, `|u1`) and `shape`: magic, version, length, and
/// the dictionary padded with spaces to a multiple of 64 bytes, as NumPy's
/// format description sets out.
pub fn header(descr: &str, shape: &[usize]) -> Vec<u8> {
    let dims = match shape {
        [one] => format!("({one},)"),
        _ => format!(
            "({})",
            shape
                .iter()
                .map(|d| d.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    };
    let mut dict = format!("{{'descr': '{descr}', 'fortran_order': False, 'shape': {dims}, }}");
    // 6 magic + 2 version + 2 length bytes, then the dictionary and '\n'.
    let unpadded = 10 + dict.len() + 1;
    dict.push_str(&" ".repeat(unpadded.next_multiple_of(64) - unpadded));
    dict.push('\n');
    let mut out = b"\x93NUMPY\x01\x00".to_vec();
    out.extend_from_slice(&(dict.len() as u16).to_le_bytes());
    out.extend_from_slice(dict.as_bytes());
    out
}

/// [`header`] padded with spaces to `len` bytes (the format allows any
/// padding before the final newline), for a header rewritten in the room an
/// earlier one took.
pub fn header_padded(descr: &str, shape: &[usize], len: usize) -> Result<Vec<u8>> {
    let mut h = header(descr, shape);
    anyhow::ensure!(h.len() <= len, "the header outgrew its room");
    let extra = len - h.len();
    h.pop();
    h.extend(std::iter::repeat_n(b' ', extra));
    h.push(b'\n');
    let dict_len = (h.len() - 10) as u16;
    h[8..10].copy_from_slice(&dict_len.to_le_bytes());
    Ok(h)
}

/// The NumPy type string of a buffer's values.
pub fn descr(values: &crate::clip_runner::FlatValues) -> &'static str {
    use crate::clip_runner::FlatValues;
    match values {
        FlatValues::F32(_) => "<f4",
        FlatValues::I16(_) => "<i2",
        FlatValues::I32(_) => "<i4",
        FlatValues::I8(_) => "|i1",
        FlatValues::U8(_) => "|u1",
    }
}

/// Writes `int32` `values` as a 1-D array, atomically, without waiting
/// for the disk ([`crate::output::write_atomic_unsynced`]).
pub fn write_i32_vector(path: &Path, values: &[i32]) -> Result<()> {
    let mut bytes = header("<i4", &[values.len()]);
    bytes.extend_from_slice(bytemuck::cast_slice(values));
    crate::output::write_atomic_unsynced(path, &bytes)
}

/// The size in bytes of a `.npy` file written by [`header`] for `shape`
/// and values of `size` bytes.
pub fn file_size(descr: &str, shape: &[usize], size: usize) -> usize {
    header(descr, shape).len() + shape.iter().product::<usize>() * size
}

/// An array written a block of rows at a time: its header is reserved for
/// `most_rows` and rewritten with the rows actually written (padded with
/// spaces to the same length, which the format allows) when it is
/// finished; the file appears at its path only then.
pub struct PackedWriter {
    staged: crate::output::Staged,
    buffer: Vec<u8>,
    descr: &'static str,
    row_shape: Vec<usize>,
    header_len: usize,
}

impl PackedWriter {
    /// Starts `path` for at most `most_rows` rows of `row_shape` (`descr`
    /// values).
    pub fn create(
        path: &Path,
        descr: &'static str,
        most_rows: usize,
        row_shape: &[usize],
    ) -> Result<PackedWriter> {
        use std::io::Write as _;
        let mut shape = vec![most_rows];
        shape.extend_from_slice(row_shape);
        let header = header(descr, &shape);
        let mut staged = crate::output::Staged::new(path)?;
        staged.file().write_all(&header)?;
        Ok(PackedWriter {
            staged,
            buffer: Vec::with_capacity(1 << 20),
            descr,
            row_shape: row_shape.to_vec(),
            header_len: header.len(),
        })
    }

    /// Appends rows' values (little-endian bytes).
    pub fn append(&mut self, bytes: &[u8]) -> Result<()> {
        use std::io::Write as _;
        if self.buffer.len() + bytes.len() > self.buffer.capacity() {
            self.staged.file().write_all(&self.buffer)?;
            self.buffer.clear();
        }
        if bytes.len() > self.buffer.capacity() {
            self.staged.file().write_all(bytes)?;
        } else {
            self.buffer.extend_from_slice(bytes);
        }
        Ok(())
    }

    /// Writes the header for `rows` rows, flushes the file to the disk and
    /// moves it into place.
    pub fn finish_synced(mut self, rows: usize) -> Result<()> {
        use std::io::{Seek, SeekFrom, Write as _};
        self.staged.file().write_all(&self.buffer)?;
        let mut shape = vec![rows];
        shape.extend_from_slice(&self.row_shape);
        let h = header_padded(self.descr, &shape, self.header_len)?;
        let f = self.staged.file();
        f.seek(SeekFrom::Start(0))?;
        f.write_all(&h)?;
        self.staged.commit()
    }
}
