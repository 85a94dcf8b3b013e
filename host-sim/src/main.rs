//! The `stapes` command: parses the command line and dispatches.

use std::process::ExitCode;

use clap::Parser;
use stapes_sim::cli::Cli;
use stapes_sim::commands::{Outcome, run};

fn main() -> ExitCode {
    match run(Cli::parse()) {
        Ok(Outcome::Success) => ExitCode::SUCCESS,
        Ok(Outcome::CheckFailed) => ExitCode::from(1),
        Ok(Outcome::SomeFailed) => ExitCode::from(3),
        Err(e) => {
            eprintln!("error: {e:#}");
            ExitCode::from(2)
        }
    }
}
