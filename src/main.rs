//! The fdtemp command line: parse, call the library, print, exit code.
//!
//! The options and the per-command steps are in [`cli`]; this file parses, sets up the
//! worker threads, dispatches, and maps every error to exit code 2.

mod cli;

use clap::Parser;
use cli::{Cli, Command};
use std::process::ExitCode;

fn main() -> ExitCode {
    let cli = Cli::parse();
    let threads = cli.command.threads();
    let result = fdtemp::with_threads(threads, || match cli.command {
        Command::Fit(a) => cli::fit::run(a),
        Command::DesignCheck(a) => cli::design::run(a),
        Command::Spectrum(a) => cli::spectral::spectrum(a),
        Command::Noise(a) => cli::spectral::noise(a),
        Command::Reduce(a) => cli::reduce::run(a),
        Command::Synth(a) => cli::synth::run(a),
        Command::Demo(a) => cli::demo::run(a),
        Command::Completions(a) => cli::shell::completions(a),
        Command::ManPages(a) => cli::shell::man_pages(a),
    });
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(2)
        }
    }
}
