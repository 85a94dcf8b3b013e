//! Host side of stapes: the table generator, the independent `f64` reference,
//! checks, WAV and `.npy` I/O, the demo clip and figures, and the CLI.
#![deny(missing_docs)]

/// Prints a line to stdout, ignoring a closed pipe (`stapes check | head`)
/// instead of panicking.
#[macro_export]
macro_rules! say {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stdout().lock(), $($arg)*);
    }};
}

/// Prints text to stdout without a newline, ignoring a closed pipe.
#[macro_export]
macro_rules! say_text {
    ($text:expr) => {{
        use std::io::Write as _;
        let _ = write!(std::io::stdout().lock(), "{}", $text);
    }};
}

pub mod augment;
pub mod budget;
pub mod chain;
pub mod check;
pub mod cli;
pub mod clip_runner;
pub mod commands;
pub mod compare;
pub mod config_source;
pub mod corpus;
pub mod dataset;
pub mod dct;
pub mod demo;
pub mod design;
pub mod emit;
pub mod export;
pub mod generate;
pub mod model_input;
pub mod npy;
pub mod output;
pub mod pipeline_match;
pub mod plots;
pub mod predict;
pub mod reference;
pub mod run;
pub mod speed;
pub mod stage_check;
pub mod stages;
pub mod statistics;
pub mod sweep;
pub mod synth;
pub mod table_source;
pub mod wav;
pub mod wav_stream;
