//! WAV input and output.
//!
//! Accepted: 16-bit PCM and 32-bit float, mono; stereo when a channel choice is
//! given. Anything else, a sample rate other than the configuration's, a
//! truncated file, or a float sample that is non-finite or outside `[-1, 1]`
//! is an error that says what to change. Nothing is resampled.

use std::path::Path;

use anyhow::{Result, anyhow, bail};
use clap::ValueEnum;
use hound::{SampleFormat, WavReader, WavSpec, WavWriter};

use crate::output::write_atomic_with;
use crate::run::Samples;

/// Which channel of a stereo file to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum ChannelChoice {
    /// The first channel.
    Left,
    /// The second channel.
    Right,
    /// The average of both (integer average, rounded towards −∞, for 16-bit).
    Mix,
}

/// A decoded file.
#[derive(Debug, Clone)]
pub struct WavInput {
    /// Sample rate in Hz.
    pub sample_rate_hz: u32,
    /// The samples.
    pub samples: Samples,
}

/// A failure while reading samples after a good header: the data is short.
fn describe_sample_error(path: &Path, e: hound::Error) -> anyhow::Error {
    match e {
        hound::Error::IoError(io) => anyhow!(
            "{} is truncated: its data ends before the length its header states ({io}); \
             re-export or re-copy the recording",
            path.display()
        ),
        other => describe_hound(path, other),
    }
}

fn describe_hound(path: &Path, e: hound::Error) -> anyhow::Error {
    match e {
        hound::Error::IoError(io) if io.kind() == std::io::ErrorKind::UnexpectedEof => anyhow!(
            "{} is truncated: its data ends before the length its header states; \
             re-export or re-copy the recording",
            path.display()
        ),
        hound::Error::IoError(io) => anyhow!("cannot read {}: {io}", path.display()),
        hound::Error::FormatError(what) => anyhow!(
            "{} is not a readable WAV file ({what}); give a RIFF/WAVE file with 16-bit PCM \
             or 32-bit float samples",
            path.display()
        ),
        hound::Error::Unsupported => anyhow!(
            "{} uses a WAV encoding this tool does not read; convert it to 16-bit PCM or \
             32-bit float",
            path.display()
        ),
        other => anyhow!("{} is not a usable WAV file: {other}", path.display()),
    }
}

/// Reads `path`, picking a channel of a stereo file with `channel`.
pub fn read_wav(path: &Path, channel: Option<ChannelChoice>) -> Result<WavInput> {
    let bytes = std::fs::read(path).map_err(|e| anyhow!("cannot read {}: {e}", path.display()))?;
    read_wav_from(&bytes[..], path, channel)
}

/// The RIFF chunks the decoder needs, in a layout it reads: `fmt ` and
/// `data` (its declared length kept, so a truncated file is still refused),
/// every other chunk skipped with the pad byte RIFF puts after an odd-length
/// chunk (the decoder itself does not skip that byte).
///
/// With `keep_body` false the `data` chunk's body is left out (its header
/// kept) and the returned position is the body's in `bytes`: the header for
/// the decoder, the samples read where they are, no copy.
fn essential_chunks(
    bytes: &[u8],
    path: &Path,
    keep_body: bool,
) -> Result<(Vec<u8>, Option<(usize, usize)>)> {
    if bytes.is_empty() {
        bail!(
            "{} is empty (0 bytes): give a RIFF/WAVE file with 16-bit PCM or 32-bit float samples",
            path.display()
        );
    }
    if bytes.len() < 12 || &bytes[..4] != b"RIFF" || &bytes[8..12] != b"WAVE" {
        // Not RIFF/WAVE: the decoder's own message says so.
        return Ok((bytes.to_vec(), None));
    }
    let mut out = b"RIFF\0\0\0\0WAVE".to_vec();
    let mut data = None;
    let mut at = 12usize;
    while at + 8 <= bytes.len() {
        let id = &bytes[at..at + 4];
        let size = u32::from_le_bytes(bytes[at + 4..at + 8].try_into().unwrap()) as usize;
        let body = at + 8;
        let end = body.saturating_add(size).min(bytes.len());
        if id == b"fmt " || id == b"data" {
            if id == b"data" {
                if !keep_body {
                    data = Some((body, size));
                    out.extend_from_slice(&bytes[at..body]);
                    break;
                }
                data = Some((out.len() + 8, size));
            }
            out.extend_from_slice(&bytes[at..end]);
            if id == b"data" {
                break;
            }
            if size % 2 == 1 {
                out.push(0);
            }
        }
        at = body.saturating_add(size).saturating_add(size % 2);
    }
    let riff = (out.len() - 8) as u32;
    out[4..8].copy_from_slice(&riff.to_le_bytes());
    Ok((out, data))
}

/// The data chunk's whole samples of `width` bytes, when every byte its
/// header declares is present; `None` otherwise (the decoder then reads
/// the samples and reports the truncation in its own words).
fn sample_bytes(bytes: &[u8], data: Option<(usize, usize)>, width: usize) -> Option<&[u8]> {
    let (start, declared) = data?;
    let end = start.checked_add(declared)?;
    let body = bytes.get(start..end)?;
    Some(&body[..body.len() / width * width])
}

/// [`read_wav`] from any reader (`path` names it in errors).
pub fn read_wav_from<R: std::io::Read>(
    mut source: R,
    path: &Path,
    channel: Option<ChannelChoice>,
) -> Result<WavInput> {
    let mut whole = Vec::new();
    source
        .read_to_end(&mut whole)
        .map_err(|e| anyhow!("cannot read {}: {e}", path.display()))?;
    // The header alone for the decoder, the samples read in place; a file
    // whose data chunk is short goes through the decoder whole, which
    // reports the truncation in its own words.
    let (header, in_place) = essential_chunks(&whole, path, false)?;
    let complete = in_place.is_some_and(|(start, len)| start.saturating_add(len) <= whole.len());
    let (bytes, data) = if complete {
        (header, in_place)
    } else {
        essential_chunks(&whole, path, true)?
    };
    let source: &[u8] = if complete { &whole } else { &bytes };
    // The decoder reads the header (and refuses what it cannot read); the
    // samples are then decoded here, a whole buffer at a time.
    let mut reader =
        WavReader::new(std::io::Cursor::new(&bytes)).map_err(|e| describe_hound(path, e))?;
    let spec = reader.spec();
    let (channels, pick, _) = check_spec(spec, path, channel)?;
    let samples = match (spec.sample_format, spec.bits_per_sample) {
        (SampleFormat::Int, 16) => {
            let raw: Vec<i16> = match sample_bytes(source, data, 2) {
                Some(b) => b
                    .chunks_exact(2)
                    .map(|p| i16::from_le_bytes([p[0], p[1]]))
                    .collect(),
                None => reader
                    .samples::<i16>()
                    .collect::<Result<_, _>>()
                    .map_err(|e| describe_sample_error(path, e))?,
            };
            check_whole_frames(path, raw.len(), channels)?;
            Samples::I16(pick_i16(raw, pick))
        }
        (SampleFormat::Float, 32) => {
            let raw: Vec<f32> = match sample_bytes(source, data, 4) {
                Some(b) => b
                    .chunks_exact(4)
                    .map(|p| f32::from_le_bytes([p[0], p[1], p[2], p[3]]))
                    .collect(),
                None => reader
                    .samples::<f32>()
                    .collect::<Result<_, _>>()
                    .map_err(|e| describe_sample_error(path, e))?,
            };
            check_whole_frames(path, raw.len(), channels)?;
            check_float(path, &raw, channels, 0)?;
            Samples::F32(pick_f32(raw, pick))
        }
        (format, bits) => bail!(
            "{} holds {bits}-bit {} samples: give 16-bit PCM or 32-bit float \
             (convert the file first)",
            path.display(),
            if format == SampleFormat::Int {
                "integer"
            } else {
                "float"
            }
        ),
    };
    Ok(WavInput {
        sample_rate_hz: spec.sample_rate,
        samples,
    })
}

/// The rate, channel and sample-format checks of a header: the channels,
/// the channel taken, and whether the samples are 32-bit float (otherwise
/// 16-bit PCM).
fn check_spec(
    spec: hound::WavSpec,
    path: &Path,
    channel: Option<ChannelChoice>,
) -> Result<(usize, Option<ChannelChoice>, bool)> {
    if spec.sample_rate == 0 {
        bail!(
            "{} declares a sample rate of 0 Hz: its header is corrupt; re-export the recording",
            path.display()
        );
    }
    let channels = spec.channels as usize;
    let pick = match (channels, channel) {
        (1, _) => None,
        (2, Some(c)) => Some(c),
        (2, None) => bail!(
            "{} is stereo: choose a channel with --channel left, right or mix",
            path.display()
        ),
        (n, _) => bail!(
            "{} has {n} channels: give a mono or stereo file",
            path.display()
        ),
    };
    let float = match (spec.sample_format, spec.bits_per_sample) {
        (SampleFormat::Int, 16) => false,
        (SampleFormat::Float, 32) => true,
        (format, bits) => bail!(
            "{} holds {bits}-bit {} samples: give 16-bit PCM or 32-bit float \
             (convert the file first)",
            path.display(),
            if format == SampleFormat::Int {
                "integer"
            } else {
                "float"
            }
        ),
    };
    Ok((channels, pick, float))
}

/// Interleaved 16-bit samples as the channel `pick` takes (all of a mono
/// file; the integer average, rounded towards −∞, for a mix).
pub(crate) fn pick_i16(raw: Vec<i16>, pick: Option<ChannelChoice>) -> Vec<i16> {
    match pick {
        None => raw,
        Some(ChannelChoice::Left) => raw.chunks_exact(2).map(|p| p[0]).collect(),
        Some(ChannelChoice::Right) => raw.chunks_exact(2).map(|p| p[1]).collect(),
        Some(ChannelChoice::Mix) => raw
            .chunks_exact(2)
            .map(|p| ((p[0] as i32 + p[1] as i32) >> 1) as i16)
            .collect(),
    }
}

/// Interleaved float samples as the channel `pick` takes.
pub(crate) fn pick_f32(raw: Vec<f32>, pick: Option<ChannelChoice>) -> Vec<f32> {
    match pick {
        None => raw,
        Some(ChannelChoice::Left) => raw.chunks_exact(2).map(|p| p[0]).collect(),
        Some(ChannelChoice::Right) => raw.chunks_exact(2).map(|p| p[1]).collect(),
        // Halved first: no sum can overflow.
        Some(ChannelChoice::Mix) => raw
            .chunks_exact(2)
            .map(|p| p[0] * 0.5 + p[1] * 0.5)
            .collect(),
    }
}

/// Refuses a non-finite float sample, or one outside full scale ±1 (a
/// board clamps such samples and counts them; a tool preparing training
/// data refuses them). `first` is the channel-interleaved index of
/// `raw[0]` in the file, so the message names the sample's place.
pub(crate) fn check_float(path: &Path, raw: &[f32], channels: usize, first: u64) -> Result<()> {
    let at = |i: usize| first + i as u64;
    if let Some(i) = raw.iter().position(|v| !v.is_finite()) {
        bail!(
            "{} holds a non-finite sample ({}) at sample {} (channel-interleaved \
             index {}): repair or re-export the recording",
            path.display(),
            raw[i],
            at(i) / channels as u64,
            at(i)
        );
    }
    if let Some(i) = raw.iter().position(|v| !(-1.0..=1.0).contains(v)) {
        bail!(
            "{} holds a float sample of {} at sample {} (channel-interleaved \
             index {}), outside the full-scale range [-1, 1]: normalise or \
             re-export the recording",
            path.display(),
            raw[i],
            at(i) / channels as u64,
            at(i)
        );
    }
    Ok(())
}

fn check_whole_frames(path: &Path, len: usize, channels: usize) -> Result<()> {
    if len % channels != 0 {
        bail!(
            "{} is truncated in the middle of a sample frame; re-export it",
            path.display()
        );
    }
    Ok(())
}

/// Reads `path` and checks its rate against the configuration's.
pub fn read_wav_for(
    path: &Path,
    channel: Option<ChannelChoice>,
    sample_rate_hz: u32,
) -> Result<Samples> {
    let wav = read_wav(path, channel)?;
    if wav.sample_rate_hz != sample_rate_hz {
        bail!(
            "{} is sampled at {} Hz but the configuration expects {sample_rate_hz} Hz: \
             resample the file, or choose a configuration for {} Hz (nothing is resampled here)",
            path.display(),
            wav.sample_rate_hz,
            wav.sample_rate_hz
        );
    }
    Ok(wav.samples)
}

/// Writes mono 16-bit PCM atomically.
pub fn write_wav_i16(path: &Path, sample_rate_hz: u32, samples: &[i16]) -> Result<()> {
    let spec = WavSpec {
        channels: 1,
        sample_rate: sample_rate_hz,
        bits_per_sample: 16,
        sample_format: SampleFormat::Int,
    };
    write_atomic_with(path, |file| {
        let mut w = WavWriter::new(std::io::BufWriter::new(file), spec)?;
        for &s in samples {
            w.write_sample(s)?;
        }
        w.finalize()?;
        Ok(())
    })
}

/// Samples per channel in a WAV file, from its header alone (the `fmt `
/// block size and the `data` chunk's length, limited by the file's size):
/// for planning, not decoding. Errors when no `data` chunk is found in the
/// first megabyte.
pub fn probe_length(path: &Path) -> Result<usize> {
    use std::io::Read;
    let file =
        std::fs::File::open(path).map_err(|e| anyhow!("cannot read {}: {e}", path.display()))?;
    let size = file.metadata()?.len() as usize;
    let mut head = Vec::new();
    file.take(1 << 20).read_to_end(&mut head)?;
    if head.len() < 12 || &head[..4] != b"RIFF" || &head[8..12] != b"WAVE" {
        bail!("{} is not a RIFF/WAVE file", path.display());
    }
    let mut at = 12usize;
    let mut block = None;
    while at + 8 <= head.len() {
        let id = &head[at..at + 4];
        let len = u32::from_le_bytes(head[at + 4..at + 8].try_into().expect("4 bytes")) as usize;
        let body = at + 8;
        if id == b"fmt " && body + 14 <= head.len() {
            block = Some(u16::from_le_bytes([head[body + 12], head[body + 13]]) as usize);
        }
        if id == b"data" {
            let Some(b) = block.filter(|&b| b > 0) else {
                bail!("{} has no usable fmt chunk before its data", path.display());
            };
            return Ok(len.min(size.saturating_sub(body)) / b);
        }
        at = body.saturating_add(len).saturating_add(len % 2);
    }
    bail!("{} has no data chunk", path.display())
}

/// Where a WAV file's samples are and how they are laid out, from its
/// header alone: what [`crate::wav_stream::WavStream`] reads.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct HeaderInfo {
    /// Sample rate in Hz.
    pub rate_hz: u32,
    /// Channels in the file (1 or 2).
    pub channels: usize,
    /// The channel taken from a stereo file.
    pub pick: Option<ChannelChoice>,
    /// 32-bit float samples (otherwise 16-bit PCM).
    pub float: bool,
    /// Offset of the first sample byte.
    pub data_start: usize,
    /// Bytes of samples the data chunk declares.
    pub data_len: usize,
}

/// The header of `path`, checked as [`read_wav`] checks it (the same
/// messages), without reading the samples. A file whose data chunk is
/// shorter than it declares is read whole by [`read_wav`] for its error.
pub fn header_info(path: &Path, channel: Option<ChannelChoice>) -> Result<HeaderInfo> {
    use std::io::{Read, Seek, SeekFrom};
    let mut file =
        std::fs::File::open(path).map_err(|e| anyhow!("cannot read {}: {e}", path.display()))?;
    let size = file.metadata()?.len() as usize;
    let mut riff = [0u8; 12];
    let whole = |path: &Path| -> anyhow::Error {
        match read_wav(path, channel) {
            Err(e) => e,
            Ok(_) => anyhow!("{} has a header this reader cannot stream", path.display()),
        }
    };
    if size < 12
        || file.read_exact(&mut riff).is_err()
        || &riff[..4] != b"RIFF"
        || &riff[8..12] != b"WAVE"
    {
        return Err(whole(path));
    }
    // Walk the chunks up to `data`, keeping `fmt ` and the data header.
    let mut head = b"RIFF\0\0\0\0WAVE".to_vec();
    let mut at = 12usize;
    let data = loop {
        let mut ch = [0u8; 8];
        if at + 8 > size || file.read_exact(&mut ch).is_err() {
            return Err(whole(path));
        }
        let len = u32::from_le_bytes([ch[4], ch[5], ch[6], ch[7]]) as usize;
        let body = at + 8;
        if &ch[..4] == b"data" {
            head.extend_from_slice(&ch);
            break (body, len);
        }
        if &ch[..4] == b"fmt " {
            let mut b = vec![0u8; len];
            if file.read_exact(&mut b).is_err() {
                return Err(whole(path));
            }
            head.extend_from_slice(&ch);
            head.extend_from_slice(&b);
            if len % 2 == 1 {
                head.push(0);
            }
        }
        at = body.saturating_add(len).saturating_add(len % 2);
        file.seek(SeekFrom::Start(at as u64))?;
    };
    if data.0.saturating_add(data.1) > size {
        return Err(whole(path));
    }
    let riff_len = (head.len() - 8) as u32;
    head[4..8].copy_from_slice(&riff_len.to_le_bytes());
    let reader =
        WavReader::new(std::io::Cursor::new(&head)).map_err(|e| describe_hound(path, e))?;
    let (channels, pick, float) = check_spec(reader.spec(), path, channel)?;
    Ok(HeaderInfo {
        rate_hz: reader.spec().sample_rate,
        channels,
        pick,
        float,
        data_start: data.0,
        data_len: data.1,
    })
}
