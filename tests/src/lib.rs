//! Helpers shared by the integration tests.

pub mod fuzzing;

use rand::{Rng, SeedableRng};
use rand_pcg::Pcg64Mcg;
use stapes_core::config::FeatureConfig;
use stapes_core::presets;

/// Every shipped preset.
pub fn all_presets() -> Vec<(&'static str, FeatureConfig)> {
    presets::ALL.to_vec()
}

/// Deterministic random generator for a test.
pub fn rng(seed: u64) -> Pcg64Mcg {
    Pcg64Mcg::seed_from_u64(seed)
}

/// Uniform noise in [-amplitude, amplitude).
pub fn noise(rng: &mut Pcg64Mcg, len: usize, amplitude: f64) -> Vec<f64> {
    (0..len)
        .map(|_| (rng.random::<f64>() * 2.0 - 1.0) * amplitude)
        .collect()
}

/// Noise as 16-bit samples.
pub fn noise_i16(rng: &mut Pcg64Mcg, len: usize, amplitude: f64) -> Vec<i16> {
    noise(rng, len, amplitude)
        .iter()
        .map(|&v| (v * 32767.0).round() as i16)
        .collect()
}

/// The repository root (the tests crate lives one level below it).
pub fn repo_root() -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("tests/ has a parent")
        .to_path_buf()
}

/// Blob bytes copied into 4-byte-aligned storage, as a board's flash holds them.
pub struct AlignedBytes {
    words: Vec<u32>,
    len: usize,
}

impl AlignedBytes {
    /// Copies `bytes`.
    pub fn new(bytes: &[u8]) -> Self {
        let mut words = vec![0u32; bytes.len().div_ceil(4) + 1];
        bytemuck::cast_slice_mut::<u32, u8>(&mut words)[..bytes.len()].copy_from_slice(bytes);
        AlignedBytes {
            words,
            len: bytes.len(),
        }
    }

    /// The bytes, 4-byte aligned.
    pub fn bytes(&self) -> &[u8] {
        &bytemuck::cast_slice::<u32, u8>(&self.words)[..self.len]
    }
}
