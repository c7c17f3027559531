//! The `veer` command: critical-speed and separation-margin monitoring for rotating machines.
//!
//! `main` parses the command line, runs one subcommand and turns any error into a single line on
//! stderr with a non-zero exit code. Everything that computes lives in the `veer-tracker` crate;
//! this crate reads files, builds the engine's configuration and prints results.

mod alerts;
mod cli;
mod cmd;
mod config;
mod decode;
mod ingest;
mod pipeline;
mod plant;
mod report;
mod review;
mod serial;
mod setup;
mod timefmt;
mod watch;

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = cli::Cli::parse();
    match cmd::run(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // One line: the context chain joined by ": ".
            let msg = format!("{e:#}").replace('\n', " ");
            eprintln!("veer: error: {msg}");
            ExitCode::FAILURE
        }
    }
}
