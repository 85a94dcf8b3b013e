//! What the fuzz targets (`tests/fuzz/`) exercise, here so that
//! `tests/fuzz_replay.rs` replays every seed and every finding
//! (`tests/fuzz/seeds/`, `tests/fuzz/regressions/`) through the same code in
//! the ordinary test run.

use stapes_core::blob::{
    CRC_OFFSET, DIRECTORY_ENTRY_BYTES, HEADER_BYTES, MAGIC, TableBlob, blob_crc,
};
use stapes_core::config::{CONFIG_BYTES, FeatureConfig};
use stapes_core::table::FilterbankForm;
use stapes_core::{Arithmetic, F32, Fixed16, Fixed32, FrontEnd, StreamingFrontEnd, Unchanged};

/// Capacities large enough for every configuration the core accepts.
const FFT: usize = 4096;
const OVERLAP: usize = 4096;
const BANDS: usize = 257;

/// A copy of `bytes` on a 4-byte boundary (blobs are read in place).
fn aligned(bytes: &[u8]) -> (Vec<u32>, usize) {
    let mut words = vec![0u32; bytes.len().div_ceil(4)];
    bytemuck::cast_slice_mut::<u32, u8>(&mut words)[..bytes.len()].copy_from_slice(bytes);
    (words, bytes.len())
}

fn as_bytes(words: &[u32], len: usize) -> &[u8] {
    &bytemuck::cast_slice::<u32, u8>(words)[..len]
}

/// The shipped presets' generated tables, made once per process.
fn preset_tables() -> &'static [(FeatureConfig, stapes_sim::generate::GeneratedTables)] {
    static TABLES: std::sync::OnceLock<
        Vec<(FeatureConfig, stapes_sim::generate::GeneratedTables)>,
    > = std::sync::OnceLock::new();
    TABLES.get_or_init(|| {
        stapes_core::presets::ALL
            .iter()
            .map(|&(_, c)| (c, stapes_sim::generate::GeneratedTables::new(&c)))
            .collect()
    })
}

/// Samples derived from the input: a loud tone, then the bytes themselves
/// as 16-bit samples, then silence.
fn samples_from(data: &[u8], n: usize) -> Vec<i16> {
    let mut out: Vec<i16> = (0..n)
        .map(|i| ((i as i32 * 7919) % 65536 - 32768) as i16)
        .collect();
    for (o, pair) in out.iter_mut().zip(data.chunks_exact(2)) {
        *o = i16::from_le_bytes([pair[0], pair[1]]);
    }
    out.extend(std::iter::repeat_n(0, n / 2));
    out
}

/// Streams `samples` through `fe` in chunks of 97 and returns the frames.
fn drain<F: StreamingFrontEnd>(fe: &mut F, samples: &[i16]) -> Vec<Vec<F::Value>> {
    let mut out = Vec::new();
    for chunk in samples.chunks(97) {
        let mut rest = chunk;
        while let Some(frame) = fe.next_frame_with(&mut rest, &mut ()) {
            out.push(frame.bands.to_vec());
        }
    }
    out
}

fn run<A: Arithmetic>(config: FeatureConfig, tables: A::Tables<'_>, samples: &[i16]) {
    if let Ok(fe) =
        FrontEnd::<A, FFT, OVERLAP, BANDS, Unchanged>::with_stages(config, tables, Unchanged)
    {
        let mut fe = Box::new(fe);
        let _ = drain(fe.as_mut(), samples);
        // And with the default log.
        let log = A::log::<BANDS>(&config, &tables);
        if let Ok(fe) = FrontEnd::<A, FFT, OVERLAP, BANDS, _>::with_stages(config, tables, log) {
            let mut fe = Box::new(fe);
            let _ = drain(fe.as_mut(), samples);
        }
    }
}

/// Parses `data` as a blob; views it in every form and arithmetic; streams
/// samples through every front end it accepts. Must not panic.
pub fn exercise_blob(data: &[u8]) {
    let (words, len) = aligned(data);
    let bytes = as_bytes(&words, len);
    let Ok(blob) = TableBlob::parse(bytes) else {
        return;
    };
    let config = blob.config();
    // Cap the work per input (the parser accepts any size the format allows).
    let n = (config.window_samples as usize).clamp(16, 8192) * 3;
    let samples = samples_from(data, n);
    for form in [FilterbankForm::Sparse, FilterbankForm::Compact] {
        if let Ok(view) = blob.view::<f32>(form) {
            run::<F32>(config, view, &samples);
        }
        let _ = blob.view::<i16>(form);
        if let Ok(tables) = blob.fixed_tables(form) {
            run::<Fixed16>(config, tables, &samples);
            run::<Fixed32>(config, tables, &samples);
        }
    }
    let _ = blob.stage_tables();
}

/// `data` with the blob frame repaired: magic, length, the fingerprint of
/// the configuration section (when one decodes) and the CRC.
pub fn repair_blob(data: &[u8]) -> Vec<u8> {
    let mut b = data.to_vec();
    if b.len() < HEADER_BYTES {
        b.resize(HEADER_BYTES, 0);
    }
    b[..8].copy_from_slice(&MAGIC);
    let version = u16::from_le_bytes([b[8], b[9]]);
    if !(1..=stapes_core::blob::FORMAT_VERSION).contains(&version) {
        b[8..10].copy_from_slice(&stapes_core::blob::FORMAT_VERSION.to_le_bytes());
    }
    let len = b.len() as u32;
    b[12..16].copy_from_slice(&len.to_le_bytes());
    let sections = u16::from_le_bytes([b[10], b[11]]) as usize;
    let mut config = None;
    let mut stages = None;
    for entry in 0..sections {
        let at = HEADER_BYTES + entry * DIRECTORY_ENTRY_BYTES;
        if at + DIRECTORY_ENTRY_BYTES > b.len() {
            break;
        }
        let kind = u16::from_le_bytes([b[at], b[at + 1]]);
        let offset = u32::from_le_bytes(b[at + 4..at + 8].try_into().unwrap()) as usize;
        let size = u32::from_le_bytes(b[at + 8..at + 12].try_into().unwrap()) as usize;
        let Some(raw) = offset.checked_add(size).and_then(|end| b.get(offset..end)) else {
            continue;
        };
        match kind {
            1 if size == CONFIG_BYTES => {
                config = FeatureConfig::from_bytes(raw.try_into().unwrap());
            }
            16 if size == stapes_core::config::STAGE_CONFIG_BYTES => {
                stages = stapes_core::config::StageConfig::from_bytes(raw.try_into().unwrap());
            }
            _ => {}
        }
    }
    if let Some(mut c) = config {
        if let Some(s) = stages {
            c.stages = s;
        }
        b[16..20].copy_from_slice(&c.fingerprint().to_le_bytes());
    }
    let crc = blob_crc(&b);
    b[CRC_OFFSET..CRC_OFFSET + 4].copy_from_slice(&crc.to_le_bytes());
    b
}

/// `data` as a configuration file and as flags: an error, or a validated
/// configuration whose generated tables pass every check the core makes.
pub fn exercise_configuration(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else {
        return;
    };
    if let Ok((_, c, _)) = stapes_sim::config_source::from_toml(text, "fuzz.toml", "fuzz".into()) {
        tables_validate(&c);
    }
    // As flags: whitespace-separated arguments after the program name.
    #[derive(clap::Parser)]
    struct Flags {
        #[command(flatten)]
        config: stapes_sim::config_source::ConfigArgs,
    }
    let args = std::iter::once("stapes").chain(text.split_whitespace());
    if let Ok(flags) = <Flags as clap::Parser>::try_parse_from(args)
        && flags.config.config.is_none()
        && let Ok(named) = flags.config.resolve()
    {
        tables_validate(&named.config);
    }
}

/// A configuration that validates yields tables every check accepts
/// (bounded to sizes a test can afford).
fn tables_validate(c: &FeatureConfig) {
    if c.validate().is_err() || c.fft_points > 4096 || c.bands > 256 {
        return;
    }
    let t = stapes_sim::generate::GeneratedTables::new(c);
    for form in t.forms() {
        t.view_f32(form)
            .check(c)
            .unwrap_or_else(|e| panic!("{c:?} {form:?}: the f32 table fails its check: {e}"));
        if let Some(fixed) = t.fixed_tables(form) {
            fixed.check(c).unwrap_or_else(|e| {
                panic!("{c:?} {form:?}: the fixed tables fail their check: {e}")
            });
        }
    }
}

/// `data` as a WAV file with every channel choice: an error or samples.
pub fn exercise_wav(data: &[u8]) {
    use stapes_sim::wav::{ChannelChoice, read_wav_from};
    let path = std::path::Path::new("fuzz.wav");
    for choice in [
        None,
        Some(ChannelChoice::Left),
        Some(ChannelChoice::Right),
        Some(ChannelChoice::Mix),
    ] {
        if let Ok(wav) = read_wav_from(std::io::Cursor::new(data), path, choice) {
            let n = match wav.samples {
                stapes_sim::run::Samples::I16(x) => x.len(),
                stapes_sim::run::Samples::F32(x) => {
                    assert!(
                        x.iter().all(|v| (-1.0..=1.0).contains(v)),
                        "accepted samples beyond full scale"
                    );
                    x.len()
                }
            };
            assert!(n <= data.len(), "more samples than bytes");
        }
    }
}

/// `data` as (preset, chunk sizes, samples): every arithmetic gives the same
/// frames chunked as whole.
pub fn exercise_streaming(data: &[u8]) {
    let Some((&head, rest)) = data.split_first() else {
        return;
    };
    let presets = preset_tables();
    let (config, t) = &presets[head as usize % presets.len()];
    let config = *config;
    let (sizes, raw) = rest.split_at(rest.len().min(8));
    let chunks: Vec<usize> = sizes.iter().map(|&s| s as usize % 200 + 1).collect();
    let samples: Vec<i16> = raw
        .chunks_exact(2)
        .map(|p| i16::from_le_bytes([p[0], p[1]]))
        .collect();
    fn compare<F: StreamingFrontEnd>(
        mut make: impl FnMut() -> Box<F>,
        samples: &[i16],
        chunks: &[usize],
    ) where
        F::Value: PartialEq + core::fmt::Debug,
    {
        let mut whole = make();
        let mut expected = Vec::new();
        let mut rest = samples;
        while let Some(f) = whole.next_frame_with(&mut rest, &mut ()) {
            expected.push(f.bands.to_vec());
        }
        let mut pieces = make();
        let mut got = Vec::new();
        let mut at = 0;
        let mut i = 0;
        while at < samples.len() {
            let n = chunks
                .get(i % chunks.len().max(1))
                .copied()
                .unwrap_or(1)
                .min(samples.len() - at);
            let mut rest = &samples[at..at + n];
            while let Some(f) = pieces.next_frame_with(&mut rest, &mut ()) {
                got.push(f.bands.to_vec());
            }
            at += n;
            i += 1;
        }
        assert_eq!(
            got, expected,
            "chunked frames differ from whole-buffer frames"
        );
    }
    let form = FilterbankForm::Sparse;
    let view = t.view_f32(form);
    compare(
        || Box::new(FrontEnd::<F32, FFT, OVERLAP, BANDS>::new(config, view).unwrap()),
        &samples,
        &chunks,
    );
    let fixed = t
        .fixed_tables(form)
        .expect("shipped presets have fixed tables");
    compare(
        || Box::new(FrontEnd::<Fixed16, FFT, OVERLAP, BANDS>::new(config, fixed).unwrap()),
        &samples,
        &chunks,
    );
    compare(
        || Box::new(FrontEnd::<Fixed32, FFT, OVERLAP, BANDS>::new(config, fixed).unwrap()),
        &samples,
        &chunks,
    );
}
