//! `fdtemp design-check`: how the report's intervals and tests do on campaigns simulated
//! with the user's own design.

use super::fit::{FitOptions, SimArgs};
use super::progress::Bar;
use super::{RunArgs, in_file, print};
use fdtemp::output::{self, Output};
use fdtemp::twotime::design::check_design;
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct DesignArgs {
    #[command(flatten)]
    opts: FitOptions,
    /// Simulated campaigns per truth (the fitted curve, and the equilibrium line for the
    /// equilibrium test's level). The Monte-Carlo error of a 95% coverage is about
    /// 0.22/√CAMPAIGNS.
    #[arg(long, default_value_t = 200)]
    campaigns: usize,
    #[command(flatten)]
    sim: SimArgs,
    /// Write the check as JSON to this file.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,
    /// Replace output files that exist already.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    pub(super) run: RunArgs,
}

/// Reads the campaign, fits it, simulates and refits campaigns of its design, prints the
/// coverage and level table (and writes it as JSON when asked).
pub fn run(a: DesignArgs) -> fdtemp::Result<()> {
    let settings = a.opts.settings();
    settings.validate()?;
    let design = a.sim.design(a.campaigns, settings.seed);
    design.validate()?;
    output::check_paths(&[&a.json], &[a.opts.file.as_path()], a.overwrite)?;
    let read = a.opts.campaign()?;
    if !read.more.is_empty() {
        return Err(fdtemp::Error::Setting(format!(
            "{}: design-check simulates one observable at a time; the file holds {}, choose \
             one with --observable NAME",
            a.opts.file.display(),
            read.more.len() + 1
        )));
    }
    let campaign = read.campaign;
    let file = &a.opts.file;
    let mut report = check_design(
        &campaign,
        &settings,
        &design,
        Some(file.display().to_string()),
        &Bar::labelled("simulating"),
    )
    .map_err(in_file(file))?;
    report.data_report.excluded_samples = read.excluded.clone();
    report.excluded_samples = read.excluded;
    if let Some(path) = a.json {
        output::write_all(
            &[Output {
                path,
                bytes: fdtemp::report::json::to_json(&report),
            }],
            a.overwrite,
        )?;
    }
    print(&fdtemp::report::design::render(&report));
    Ok(())
}
