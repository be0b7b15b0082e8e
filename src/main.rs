//! The fdtemp command line: parse, call the library, print, exit code.

use clap::{Parser, Subcommand};
use fdtemp::analysis::Progress;
use fdtemp::fdplot::Axes;
use fdtemp::input::ColumnNames;
use fdtemp::output::{self, Output};
use fdtemp::resample::IntervalMethod;
use fdtemp::settings::{FitSettings, Model, Units, Weighting};
use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "fdtemp",
    version,
    about = "Fluctuation–dissipation ratios and effective temperatures of aging systems"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Fit X and T_eff from a campaign of C(t,tw) and chi(t,tw) over independent samples.
    Fit(FitArgs),
    /// Generate an invented aging scenario with a known answer, fit it, and compare.
    Demo(DemoArgs),
}

#[derive(clap::Args)]
struct FitArgs {
    /// Tidy CSV: one row per (sample, tw, t) with columns sample, tw, t, corr, resp [, corr_eq].
    file: PathBuf,
    /// Bath temperature T (energy units with --units reduced, kelvin with --units si).
    #[arg(long, short = 'T', allow_negative_numbers = true)]
    temperature: f64,
    /// Units: reduced (k = 1) or si (k = 1.380649e-23 J/K).
    #[arg(long, value_enum, default_value_t = Units::Reduced)]
    units: Units,
    /// Parametric axes: auto (normalized when corr_eq is present), plain or normalized.
    #[arg(long, value_enum, default_value_t = Axes::Auto)]
    axes: Axes,
    /// Model: broken (first slope fixed at -1) or free (both slopes fitted).
    #[arg(long, value_enum, default_value_t = Model::Broken)]
    model: Model,
    /// Point weights.
    #[arg(long, value_enum, default_value_t = Weighting::InverseVariance)]
    weights: Weighting,
    /// Number of bootstrap resamples B.
    #[arg(long, short = 'B', default_value_t = 2000)]
    resamples: usize,
    /// Seed of the random streams.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95, allow_negative_numbers = true)]
    level: f64,
    /// Interval method.
    #[arg(long, value_enum, default_value_t = IntervalMethod::Bca)]
    interval: IntervalMethod,
    /// Least number of points on each side of the break.
    #[arg(long, default_value_t = 5)]
    min_branch: usize,
    /// Map a column role to another header name, e.g. --column resp=chi_zfc (repeatable).
    #[arg(long = "column", value_name = "ROLE=NAME")]
    columns: Vec<String>,
    /// Write the full result as JSON to this file.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,
    /// Write the parametric points with their errors as CSV to this file.
    #[arg(long, value_name = "FILE")]
    points: Option<PathBuf>,
    /// Replace output files that exist already.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    run: RunArgs,
}

#[derive(clap::Args)]
struct DemoArgs {
    /// Folder for the demo's files.
    #[arg(long, default_value = "demo-data")]
    out: PathBuf,
    /// Replace demo files whose content differs.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    run: RunArgs,
}

#[derive(clap::Args)]
struct RunArgs {
    /// Worker threads (default: all cores). Results do not depend on it.
    #[arg(long)]
    threads: Option<usize>,
}

struct Bar(Option<indicatif::ProgressBar>);

impl Bar {
    fn new() -> Self {
        Bar(std::io::stderr()
            .is_terminal()
            .then(indicatif::ProgressBar::hidden))
    }
}

impl Progress for Bar {
    fn start(&self, total: u64) {
        if let Some(b) = &self.0 {
            b.set_length(total);
            b.set_style(
                indicatif::ProgressStyle::with_template("resampling {bar:40} {pos}/{len} {eta}")
                    .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
            );
            b.set_draw_target(indicatif::ProgressDrawTarget::stderr());
        }
    }
    fn advance(&self, n: u64) {
        if let Some(b) = &self.0 {
            b.inc(n);
        }
    }
    fn finish(&self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let threads = match &cli.command {
        Command::Fit(a) => a.run.threads,
        Command::Demo(a) => a.run.threads,
    };
    let result = fdtemp::with_threads(threads, || match cli.command {
        Command::Fit(a) => fit(a),
        Command::Demo(a) => demo(a),
    });
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(2)
        }
    }
}

fn fit(a: FitArgs) -> fdtemp::Result<()> {
    let mut names = ColumnNames::default();
    for m in &a.columns {
        names.apply(m)?;
    }
    let settings = FitSettings {
        temperature: a.temperature,
        units: a.units,
        axes: a.axes,
        model: a.model,
        weights: a.weights,
        resamples: a.resamples,
        seed: a.seed,
        level: a.level,
        interval: a.interval,
        min_branch: a.min_branch,
    };
    settings.validate()?;
    let planned: Vec<Output> = [&a.json, &a.points]
        .into_iter()
        .flatten()
        .map(|p| Output {
            path: p.clone(),
            bytes: Vec::new(),
        })
        .collect();
    output::check(&planned, &[a.file.as_path()], a.overwrite)?;
    let campaign = fdtemp::input::read_campaign(&a.file, &names)?;
    let report = fdtemp::analyze(
        &campaign,
        &settings,
        Some(a.file.display().to_string()),
        &Bar::new(),
    )
    .map_err(|e| match e {
        fdtemp::Error::Analysis(m) => fdtemp::Error::input(&a.file, None, None, m),
        e => e,
    })?;
    let mut outputs = Vec::new();
    if let Some(p) = a.json {
        outputs.push(Output {
            path: p,
            bytes: fdtemp::report::json::to_json(&report),
        });
    }
    if let Some(p) = a.points {
        outputs.push(Output {
            path: p,
            bytes: fdtemp::report::csv::points_csv(&report),
        });
    }
    output::write_all(&outputs, a.overwrite)?;
    print(&fdtemp::report::text::render(&report));
    Ok(())
}

fn demo(a: DemoArgs) -> fdtemp::Result<()> {
    if !a.out.exists() {
        std::fs::create_dir_all(&a.out).map_err(|source| fdtemp::Error::Io {
            path: a.out.clone(),
            action: "cannot create the folder",
            source,
        })?;
    }
    let d = fdtemp::demo::run(&a.out, &Bar::new())?;
    let outputs = fdtemp::demo::prune_unchanged(d.outputs.clone(), a.overwrite)?;
    output::write_all(&outputs, true)?;
    print(&fdtemp::report::text::render(&d.report));
    println!();
    print!("{}", fdtemp::demo::compare(&d));
    println!(
        "files      {} (campaign.csv is the input; try: fdtemp fit {} --temperature {})",
        a.out.display(),
        a.out.join("campaign.csv").display(),
        d.spec.temperature
    );
    Ok(())
}

fn print(bytes: &[u8]) {
    let mut out = std::io::stdout().lock();
    let _ = out.write_all(bytes);
}
