//! The command-line definitions (clap) and one module per command; `main.rs` dispatches.
//!
//! - `fit.rs`: `fdtemp fit`, the time-domain analysis of a campaign.
//! - `design.rs`: `fdtemp design-check`, coverage and test levels on the campaign's design.
//! - `spectral.rs`: `fdtemp spectrum` and `fdtemp noise`, with their shared options.
//! - `reduce.rs`: `fdtemp reduce`, raw runs to a campaign with the linear-response check.
//! - `synth.rs`: `fdtemp synth`, a simulated system and its truth file.
//! - `demo.rs`: `fdtemp demo`, the invented scenario fitted end to end.
//! - `progress.rs`: the resampling progress bar.
//! - `shell.rs`: `fdtemp completions` and `fdtemp man-pages`, generated from these
//!   definitions.
//!
//! The help text is the doc comments below and in each command's file: changing one
//! changes `fdtemp --help`.

pub mod demo;
pub mod design;
pub mod fit;
mod progress;
pub mod reduce;
pub mod shell;
pub mod spectral;
pub mod synth;

use clap::{Parser, Subcommand};
use fdtemp::api::in_file;
use fdtemp::report::plot::{Figure, PlotSize};
use std::io::Write;
use std::path::PathBuf;

#[derive(Parser)]
#[command(
    name = "fdtemp",
    version,
    about = "Fluctuation–dissipation ratios and effective temperatures of aging systems"
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

#[derive(Subcommand)]
pub enum Command {
    /// Fit X and T_eff from a campaign of C(t,tw) and chi(t,tw) over independent samples.
    Fit(fit::FitArgs),
    /// Check the fit's intervals and tests on campaigns simulated with this file's design.
    DesignCheck(design::DesignArgs),
    /// T_eff(f) from a noise spectrum and the dissipation (loss, Re Z or Re Y).
    Spectrum(spectral::SpectrumArgs),
    /// Welch PSD of raw noise records, and T_eff(f) when a dissipation is given.
    Noise(spectral::NoiseArgs),
    /// Reduce raw runs (twin runs or repeated quenches) to a campaign, with the
    /// linear-response check; optionally fit it at once.
    Reduce(reduce::ReduceArgs),
    /// Simulate a system with a known or published ratio into a file that fit/noise read.
    Synth(synth::SynthArgs),
    /// Generate an invented aging scenario with a known answer, fit it, and compare.
    Demo(demo::DemoArgs),
    /// Print the shell completion script for fdtemp (bash, zsh, fish, elvish, powershell).
    Completions(shell::CompletionsArgs),
    /// Write fdtemp's manual pages (fdtemp.1, fdtemp-fit.1, …) into a folder.
    ManPages(shell::ManPagesArgs),
}

impl Command {
    /// The `--threads` of whichever command was given.
    pub fn threads(&self) -> Option<usize> {
        match self {
            Command::Fit(a) => a.run.threads,
            Command::DesignCheck(a) => a.run.threads,
            Command::Spectrum(a) => a.common.run.threads,
            Command::Noise(a) => a.common.run.threads,
            Command::Reduce(a) => a.run.threads,
            Command::Synth(a) => a.run.threads,
            Command::Demo(a) => a.run.threads,
            Command::Completions(_) | Command::ManPages(_) => None,
        }
    }
}

#[derive(clap::Args)]
pub struct PlotArgs {
    /// Draw the figure into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    plot: Option<PathBuf>,
    /// Figure size: single (8.5 cm wide, one column) or double (17.8 cm, two columns),
    /// text 7.5-9 pt at that size, PNG at 300 dpi; slide (16:9, text twice as large,
    /// 192 dpi); or WxH pixels, drawn as if one column wide.
    #[arg(long, value_name = "SIZE", default_value = "single", value_parser = fdtemp::report::plot::parse_size)]
    plot_size: PlotSize,
}

impl PlotArgs {
    /// The figure for `--plot`, checked before any work is done.
    fn figure(&self) -> fdtemp::Result<Option<(PathBuf, Figure)>> {
        self.plot
            .as_ref()
            .map(|p| Ok((p.clone(), Figure::for_path(p, self.plot_size)?)))
            .transpose()
    }
}

#[derive(clap::Args)]
pub struct RunArgs {
    /// Worker threads (default: all cores). Results do not depend on it.
    #[arg(long)]
    threads: Option<usize>,
}

/// `A:B` as two numbers (a frequency band, a range of C).
fn parse_band(s: &str) -> Result<[f64; 2], String> {
    let (a, b) = s
        .split_once(':')
        .ok_or_else(|| format!("'{s}' is not FMIN:FMAX"))?;
    let num = |t: &str| {
        t.trim()
            .parse::<f64>()
            .map_err(|_| format!("'{t}' in '{s}' is not a number"))
    };
    Ok([num(a)?, num(b)?])
}

/// Writes a rendered report to standard output (a closed pipe is not an error).
fn print(bytes: &[u8]) {
    let mut out = std::io::stdout().lock();
    let _ = out.write_all(bytes);
}
