//! Command-line interface definitions.

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand, ValueEnum};

use crate::check::Arith;
use crate::config_source::ConfigArgs;
use crate::wav::ChannelChoice;

/// stapes: log-mel front-end tables, checks and features for keyword spotting on microcontrollers.
#[derive(Parser, Debug)]
#[command(name = "stapes", version, about)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Generate flash tables (Rust source, C header, checked blob) and print their sizes.
    Tables(TablesArgs),
    /// Run the core on a WAV (or the demo clip), compare with the f64 reference, exit 1 on failure.
    Check(CheckArgs),
    /// Write the core's log-mel frames for a WAV as .npy (float32, frames × bands, dB or ln).
    Features(FeaturesArgs),
    /// Synthesise the demo clip, generate tables, run and check the core, and draw the figures.
    Demo(DemoArgs),
    /// Predict a front end's flash and RAM on a board before building anything.
    Budget(BudgetArgs),
    /// Measure the core's speed on this machine (frames per second per arithmetic, demo clip).
    Speed(SpeedArgs),
    /// Compute the per-value normalisation statistics of a folder of clips, as a [stages.normalise] table.
    Statistics(StatisticsArgs),
    /// Turn a labelled dataset folder into the board's features for training (packed .npy per split, manifests, statistics), resumably.
    Export(ExportArgs),
    /// Find the configuration that reproduces the features a user's own pipeline computed for some clips, and name what a streaming board cannot reproduce.
    Match(crate::pipeline_match::MatchArgs),
}

/// `stapes export`.
#[derive(Args, Debug)]
pub struct ExportArgs {
    /// The dataset: one folder per label (DIR/<label>/*.wav), or
    /// DIR/<split>/<label>/*.wav with splits train, validation, test.
    #[arg(long, value_name = "DIR")]
    pub input_dir: PathBuf,
    /// Where the features, labels, manifests and statistics go (new or
    /// empty; or an earlier export's folder with the same plan, to resume).
    #[arg(long, value_name = "DIR")]
    pub output_dir: PathBuf,
    /// Labels (and splits) from a CSV manifest of rows path,label[,split],
    /// paths relative to --input-dir, instead of the folders.
    #[arg(long, value_name = "FILE.csv")]
    pub manifest: Option<PathBuf>,
    /// The configuration.
    #[command(flatten)]
    pub config: ConfigArgs,
    /// Arithmetic of the core: f32, fixed16 or fixed32.
    #[arg(long, value_enum, default_value = "f32")]
    pub arith: Arith,
    /// Filterbank form the core reads.
    #[arg(long, value_enum, default_value = "sparse")]
    pub form: FormChoice,
    /// The stage to write (log, pcen, range_floor, mfcc, normalise,
    /// quantise); the last one, the model's input, by default.
    #[arg(long, value_name = "STAGE")]
    pub stage: Option<String>,
    /// Write the board's exact integers (fixed arithmetics; int8/uint8
    /// codes for the quantise stage) instead of float32.
    #[arg(long)]
    pub raw: bool,
    /// Channel of stereo clips.
    #[arg(long, value_enum)]
    pub channel: Option<ChannelChoice>,
    /// Frames per clip: each clip is padded with zero samples or trimmed to
    /// N frames (default: the longest clip's frames; with --per-clip, each
    /// clip's own).
    #[arg(long, value_name = "N")]
    pub frames: Option<usize>,
    /// Where each clip sits in its N frames (the padding or trimming is at
    /// the other end, or split for centre).
    #[arg(long, value_enum, default_value = "start")]
    pub align: crate::export::Align,
    /// One .npy per clip (under <split>/clips/) instead of packed arrays.
    #[arg(long)]
    pub per_clip: bool,
    /// Clips per shard: the unit a rerun resumes from and flushes to the
    /// disk (one fsync each, while the next shard runs).
    #[arg(long, value_name = "N", default_value_t = 256)]
    pub shard_clips: usize,
    /// Percent of clips without a split of their own that go to
    /// validation (by a stable hash of the path).
    #[arg(long, value_name = "P", default_value_t = 0.0)]
    pub validation_percent: f64,
    /// Percent of clips without a split of their own that go to test.
    #[arg(long, value_name = "P", default_value_t = 0.0)]
    pub test_percent: f64,
    /// Augmented copies of each clip of the augmented splits (beside the
    /// clip itself), made before the front end and run through the board's
    /// arithmetic.
    #[arg(long, value_name = "K", default_value_t = 0)]
    pub augment_copies: u32,
    /// Augmentation: gain drawn uniformly from LOW:HIGH dB.
    #[arg(long, value_name = "LOW:HIGH", allow_hyphen_values = true)]
    pub gain_db: Option<String>,
    /// Augmentation: background recordings (WAV, at the configuration's
    /// rate) mixed into each copy.
    #[arg(long, value_name = "DIR")]
    pub noise_dir: Option<PathBuf>,
    /// Augmentation: signal-to-noise ratio drawn from LOW:HIGH dB (default 0:20).
    #[arg(long, value_name = "LOW:HIGH", allow_hyphen_values = true)]
    pub snr_db: Option<String>,
    /// Augmentation: time shift drawn uniformly within ±MS milliseconds.
    #[arg(long, value_name = "MS")]
    pub shift_ms: Option<f64>,
    /// Augmentation: the seed of every draw.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Splits that get augmented copies, comma-separated.
    #[arg(long, value_name = "LIST", default_value = "train")]
    pub augment_splits: String,
    /// Stop at the first clip that cannot be read (by default it is listed
    /// with its error and the rest go on).
    #[arg(long)]
    pub strict: bool,
    /// Worker threads (default: every core).
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// No progress bar (it is never drawn when stderr is not a terminal).
    #[arg(long)]
    pub quiet: bool,
}

impl ExportArgs {
    /// The input options the table loader reads.
    pub fn input_args(&self) -> InputArgs {
        InputArgs {
            channel: self.channel,
            chunk_samples: 0,
            form: self.form,
            table_blob: None,
        }
    }
}

/// `stapes statistics`.
#[derive(Args, Debug)]
pub struct StatisticsArgs {
    /// Folder of WAV clips (searched recursively); those at the configuration's rate count.
    #[arg(long, value_name = "DIR")]
    pub corpus: PathBuf,
    /// The TOML file to write (a [stages.normalise] table).
    #[arg(long, value_name = "FILE.toml")]
    pub output: PathBuf,
    /// The configuration (its stages before the normaliser set what is measured).
    #[command(flatten)]
    pub config: ConfigArgs,
}

/// `stapes speed`.
#[derive(Args, Debug)]
pub struct SpeedArgs {
    /// The configuration.
    #[command(flatten)]
    pub config: ConfigArgs,
    /// Wall time to spend on each arithmetic, seconds.
    #[arg(long, default_value_t = 2.0)]
    pub seconds: f64,
}

/// `stapes budget`.
#[derive(Args, Debug)]
pub struct BudgetArgs {
    /// The configuration.
    #[command(flatten)]
    pub config: ConfigArgs,
    /// Arithmetic of the core.
    #[arg(long, value_enum, default_value = "f32")]
    pub arith: Arith,
    /// The board's core.
    #[arg(long, value_enum, default_value = "cortex-m4f")]
    pub core: crate::budget::Core,
    /// Filterbank form the board reads.
    #[arg(long, value_enum, default_value = "sparse")]
    pub form: FormChoice,
    /// The core's clock in MHz, for the share of each hop the front end takes.
    #[arg(long, default_value_t = 64.0)]
    pub clock_mhz: f64,
}

/// Filterbank form used by the core.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FormChoice {
    /// Per-band first bin, count, weights.
    Sparse,
    /// One weight per bin; adjacent triangles share it.
    Compact,
}

/// `stapes tables`.
#[derive(Args, Debug)]
pub struct TablesArgs {
    /// The configuration.
    #[command(flatten)]
    pub config: ConfigArgs,
    /// Regenerate every shipped preset (ignores the configuration options).
    #[arg(long)]
    pub all_presets: bool,
    /// Folder for the generated files.
    #[arg(long, value_name = "DIR", default_value = "tables")]
    pub out_dir: PathBuf,
}

/// Input selection shared by `check` and `features`.
#[derive(Args, Debug, Clone)]
pub struct InputArgs {
    /// Channel of a stereo file.
    #[arg(long, value_enum)]
    pub channel: Option<ChannelChoice>,
    /// Samples handed to the core per call (simulates DMA chunks); 0 = whole file at once.
    #[arg(long, value_name = "N", default_value_t = 0)]
    pub chunk_samples: usize,
    /// Filterbank form the core reads.
    #[arg(long, value_enum, default_value = "sparse")]
    pub form: FormChoice,
    /// Read the tables (and the configuration) from a blob made by `stapes tables`.
    #[arg(long, value_name = "FILE.bin", conflicts_with_all = ["preset", "config"])]
    pub table_blob: Option<PathBuf>,
}

/// `stapes check`.
#[derive(Args, Debug)]
pub struct CheckArgs {
    /// WAV file (16-bit PCM or 32-bit float); the demo clip when absent.
    #[arg(long, value_name = "FILE.wav")]
    pub input: Option<PathBuf>,
    /// The configuration.
    #[command(flatten)]
    pub config: ConfigArgs,
    /// Input handling.
    #[command(flatten)]
    pub input_args: InputArgs,
    /// Print only the ten worst bands' statistics (all bands by default).
    #[arg(long)]
    pub worst_bands: bool,
    /// Arithmetic of the core: f32, fixed16 or fixed32 (default f32; with
    /// --corpus, every arithmetic unless one is named).
    #[arg(long, value_enum)]
    pub arith: Option<Arith>,
    /// Run the quantisation sweep instead (tones, white and pink noise, log
    /// chirps at 0, -20, -40, -60 dBFS) for every arithmetic.
    #[arg(long, conflicts_with_all = ["input", "arith"])]
    pub sweep: bool,
    /// Run every WAV under DIR through every arithmetic and filterbank form of
    /// each shipped preset at the clip's rate (or only the configuration
    /// given), print clips passing per preset × arithmetic × form with the
    /// worst clip and band, and exit 1 if any clip fails.
    #[arg(long, value_name = "DIR", conflicts_with_all = ["input", "sweep", "table_blob"])]
    pub corpus: Option<PathBuf>,
    /// With --corpus: failing clips listed per row, worst first.
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub list_failures: usize,
    /// Folder for the sweep's heat maps.
    #[arg(long, value_name = "DIR", default_value = "stapes-sweep")]
    pub out_dir: PathBuf,
}

/// `stapes features`.
#[derive(Args, Debug)]
pub struct FeaturesArgs {
    /// WAV file (16-bit PCM or 32-bit float).
    #[arg(long, value_name = "FILE.wav")]
    pub input: PathBuf,
    /// Output .npy file.
    #[arg(long, value_name = "FILE.npy")]
    pub output: PathBuf,
    /// The configuration.
    #[command(flatten)]
    pub config: ConfigArgs,
    /// Input handling.
    #[command(flatten)]
    pub input_args: InputArgs,
    /// Arithmetic of the core: f32, fixed16 or fixed32.
    #[arg(long, value_enum, default_value = "f32")]
    pub arith: Arith,
    /// With a fixed arithmetic: write the board's exact int16 values (1/256 dB
    /// or 1/256 ln per LSB) instead of float32; for a stage, its exact
    /// integers (int32; int8/uint8 codes for `quantise`).
    #[arg(long)]
    pub raw: bool,
    /// With a configuration that has stages: write this stage's output
    /// (log, pcen, range_floor, mfcc, normalise, quantise) instead of the
    /// last one, the model's input.
    #[arg(long, value_name = "STAGE")]
    pub stage: Option<String>,
    /// With a model window: write the windows the model reads, as
    /// `[windows, frames, values]`, instead of one row per frame.
    #[arg(long)]
    pub windows: bool,
}

/// `stapes demo`.
#[derive(Args, Debug)]
pub struct DemoArgs {
    /// Folder for everything the demo writes.
    #[arg(long, value_name = "DIR", default_value = "stapes-demo")]
    pub out_dir: PathBuf,
}
