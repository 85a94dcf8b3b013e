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
