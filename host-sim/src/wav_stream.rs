//! A WAV file read a block at a time: the samples of a long recording go
//! through the front end and out to disk without the whole file in memory.
//! The header is read as [`crate::wav::read_wav`] reads it (the same
//! checks, the same messages); the samples are decoded from the data chunk
//! as they are read, with the same channel choice and float range checks.

use std::io::{Read, Seek, SeekFrom};
use std::path::{Path, PathBuf};

use anyhow::{Result, anyhow, bail};

use crate::run::Samples;
use crate::wav::ChannelChoice;

/// The layout a stream decodes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Encoding {
    Pcm16,
    Float32,
}

/// A WAV file's samples, a block at a time.
pub struct WavStream {
    path: PathBuf,
    file: std::io::BufReader<std::fs::File>,
    encoding: Encoding,
    channels: usize,
    pick: Option<ChannelChoice>,
    /// Bytes of the data chunk not read yet.
    left: u64,
    /// Sample frames (one per channel) read so far.
    read: u64,
    /// Sample frames in the file.
    frames: u64,
    rate_hz: u32,
    buffer: Vec<u8>,
}

impl WavStream {
    /// Opens `path`, checks its header (and its rate against `rate_hz`),
    /// and positions the stream at the first sample.
    pub fn open(path: &Path, channel: Option<ChannelChoice>, rate_hz: u32) -> Result<WavStream> {
        let info = crate::wav::header_info(path, channel)?;
        if info.rate_hz != rate_hz {
            bail!(
                "{} is sampled at {} Hz but the configuration expects {rate_hz} Hz: resample the \
                 file, or choose a configuration for {} Hz (nothing is resampled here)",
                path.display(),
                info.rate_hz,
                info.rate_hz
            );
        }
        let mut file = std::fs::File::open(path)
            .map_err(|e| anyhow!("cannot read {}: {e}", path.display()))?;
        file.seek(SeekFrom::Start(info.data_start as u64))?;
        let width = if info.float { 4 } else { 2 };
        let block = width * info.channels;
        Ok(WavStream {
            path: path.to_path_buf(),
            file: std::io::BufReader::with_capacity(1 << 16, file),
            encoding: if info.float {
                Encoding::Float32
            } else {
                Encoding::Pcm16
            },
            channels: info.channels,
            pick: info.pick,
            left: (info.data_len / block * block) as u64,
            read: 0,
            frames: (info.data_len / block) as u64,
            rate_hz,
            buffer: Vec::new(),
        })
    }

    /// Sample frames in the file (per channel).
    pub fn len(&self) -> u64 {
        self.frames
    }

    /// Whether the file holds no sample.
    pub fn is_empty(&self) -> bool {
        self.frames == 0
    }

    /// The sample rate.
    pub fn rate_hz(&self) -> u32 {
        self.rate_hz
    }

    /// The next block of at most `max` samples (one channel, or the mix),
    /// or `None` at the end.
    pub fn next_block(&mut self, max: usize) -> Result<Option<Samples>> {
        if self.left == 0 {
            return Ok(None);
        }
        let width = match self.encoding {
            Encoding::Pcm16 => 2,
            Encoding::Float32 => 4,
        };
        let frame_bytes = (width * self.channels) as u64;
        let bytes = (max.max(1) as u64 * frame_bytes).min(self.left) as usize;
        self.buffer.resize(bytes, 0);
        self.file.read_exact(&mut self.buffer).map_err(|e| {
            anyhow!(
                "{} is truncated: its data chunk ends early ({e}); re-export it",
                self.path.display()
            )
        })?;
        self.left -= bytes as u64;
        let first = self.read;
        self.read += bytes as u64 / frame_bytes;
        let b = &self.buffer;
        Ok(Some(match self.encoding {
            Encoding::Pcm16 => {
                let raw: Vec<i16> = b
                    .chunks_exact(2)
                    .map(|p| i16::from_le_bytes([p[0], p[1]]))
                    .collect();
                Samples::I16(crate::wav::pick_i16(raw, self.pick))
            }
            Encoding::Float32 => {
                let raw: Vec<f32> = b
                    .chunks_exact(4)
                    .map(|p| f32::from_le_bytes([p[0], p[1], p[2], p[3]]))
                    .collect();
                crate::wav::check_float(
                    &self.path,
                    &raw,
                    self.channels,
                    first * self.channels as u64,
                )?;
                Samples::F32(crate::wav::pick_f32(raw, self.pick))
            }
        }))
    }
}
