//! The fdtemp command line: parse, call the library, print, exit code.

use clap::{Parser, Subcommand};
use fdtemp::analysis::Progress;
use fdtemp::fdplot::Axes;
use fdtemp::input::ColumnNames;
use fdtemp::output::{self, Output};
use fdtemp::report::plot::{self, Figure};
use fdtemp::resample::IntervalMethod;
use fdtemp::scenarios::sim::Scenario;
use fdtemp::settings::{FitSettings, Hold, Model, Units, Weighting};
use fdtemp::spectral::analysis::ErrorModel;
use fdtemp::spectral::input::Window;
use fdtemp::spectral::{Convention, SpectrumSettings};
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
    /// T_eff(f) from a noise spectrum and the dissipation (loss, Re Z or Re Y).
    Spectrum(SpectrumArgs),
    /// Welch PSD of raw noise records, and T_eff(f) when a dissipation is given.
    Noise(NoiseArgs),
    /// Simulate a system with a known or published ratio into a file that fit/noise read.
    Synth(SynthArgs),
    /// Generate an invented aging scenario with a known answer, fit it, and compare.
    Demo(DemoArgs),
}

#[derive(clap::Args)]
struct SynthArgs {
    /// The system to simulate.
    #[arg(value_enum)]
    scenario: Scenario,
    /// Independent runs (samples; for resistor, records).
    #[arg(long, default_value_t = 200)]
    samples: usize,
    /// Seed: run i uses random stream i of this seed.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// The data file to write; the truth goes beside it as STEM.truth.json.
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// A smaller, faster version of the simulation.
    #[arg(long)]
    quick: bool,
    /// Replace files that exist already.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    run: RunArgs,
}

#[derive(clap::Args)]
struct SpectrumArgs {
    /// CSV with columns f, psd, loss and optionally dof, run, tw (one row per frequency).
    file: PathBuf,
    /// Bath temperature T (kelvin with SI units): enables the departure test.
    #[arg(long, short = 'T', allow_negative_numbers = true)]
    temperature: f64,
    /// How PSD and dissipation are normalized [default: loss].
    #[arg(long, value_enum)]
    convention: Option<Convention>,
    /// The window the PSD was estimated with (sets the correlation of neighbouring
    /// frequencies in band averages) [default: as the file's first line says, else none].
    #[arg(long, value_enum)]
    window: Option<Window>,
    #[command(flatten)]
    common: SpectralArgs,
}

#[derive(clap::Args)]
struct NoiseArgs {
    /// Noise record: one number per line, or one column per run (optional header).
    file: PathBuf,
    /// Samples per second.
    #[arg(long, allow_negative_numbers = true)]
    sample_rate: f64,
    /// Segment length of Welch's method (samples).
    #[arg(long, default_value_t = 4096)]
    segment: usize,
    /// Overlap of consecutive segments (samples) [default: half a segment].
    #[arg(long)]
    overlap: Option<usize>,
    /// A resistor's resistance R (ohm): the dissipation of voltage noise, Re Z = R.
    #[arg(long, conflicts_with = "loss_file", allow_negative_numbers = true)]
    resistance: Option<f64>,
    /// CSV of f and the dissipation (loss, Re Z or Re Y per --convention), interpolated.
    #[arg(long, value_name = "FILE")]
    loss_file: Option<PathBuf>,
    /// Bath temperature T: enables the departure test.
    #[arg(long, short = 'T', allow_negative_numbers = true)]
    temperature: Option<f64>,
    /// How PSD and dissipation are normalized [default: voltage with --resistance, else loss].
    #[arg(long, value_enum)]
    convention: Option<Convention>,
    /// Write the PSD as a CSV that `fdtemp spectrum` reads back.
    #[arg(long, value_name = "FILE")]
    psd_out: Option<PathBuf>,
    #[command(flatten)]
    common: SpectralArgs,
}

#[derive(clap::Args)]
struct SpectralArgs {
    /// Units: si (kelvin, k = 1.380649e-23 J/K) or reduced (k = 1).
    #[arg(long, value_enum, default_value_t = Units::Si)]
    units: Units,
    /// Where intervals come from: auto, chi-square, or runs (bootstrap over runs).
    #[arg(long, value_enum, default_value_t = ErrorModel::Auto)]
    errors: ErrorModel,
    /// Degrees of freedom of every PSD value, when the file has no dof column.
    #[arg(long, allow_negative_numbers = true)]
    dof: Option<f64>,
    /// Band for the average of T_eff, FMIN:FMAX in hertz [default: every frequency].
    #[arg(long, value_parser = parse_band, value_name = "FMIN:FMAX")]
    band: Option<[f64; 2]>,
    /// Log-spaced bands per decade in the departure test.
    #[arg(long, default_value_t = 5)]
    bands_per_decade: usize,
    /// Confidence level.
    #[arg(long, default_value_t = 0.95, allow_negative_numbers = true)]
    level: f64,
    /// Bootstrap resamples (runs model).
    #[arg(long, short = 'B', default_value_t = 2000)]
    resamples: usize,
    /// Seed of the random streams.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Interval method for the runs model.
    #[arg(long, value_enum, default_value_t = IntervalMethod::Bca)]
    interval: IntervalMethod,
    /// Write the full result as JSON to this file.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,
    /// Replace output files that exist already.
    #[arg(long)]
    overwrite: bool,
    #[command(flatten)]
    plot: PlotArgs,
    #[command(flatten)]
    run: RunArgs,
}

impl SpectralArgs {
    fn settings(&self, temperature: Option<f64>, convention: Convention) -> SpectrumSettings {
        SpectrumSettings {
            temperature,
            units: self.units,
            convention,
            level: self.level,
            errors: self.errors,
            resamples: self.resamples,
            seed: self.seed,
            interval: self.interval,
            band: self.band,
            dof: self.dof,
            bands_per_decade: self.bands_per_decade,
        }
    }
}

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
    /// Model: broken (first slope fixed at -1), free (both slopes fitted), or line (one slope).
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
    /// Which time is held fixed along one curve: tw (t runs) or t (the earlier time runs).
    #[arg(long, value_enum, default_value_t = Hold::Tw)]
    hold: Hold,
    /// Fit only points whose parametric x (C, or C/C(t,t)) lies in CMIN:CMAX.
    #[arg(long, value_parser = parse_band, value_name = "CMIN:CMAX", allow_hyphen_values = true)]
    range: Option<[f64; 2]>,
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
    /// Draw the histogram of the resampled X into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    plot_resamples: Option<PathBuf>,
    #[command(flatten)]
    plot: PlotArgs,
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
struct PlotArgs {
    /// Draw the figure into this file (.svg or .png).
    #[arg(long, value_name = "FILE")]
    plot: Option<PathBuf>,
    /// Figure size in pixels (1000 wide suits 8.5 cm at 300 dpi).
    #[arg(long, value_name = "WxH", default_value = "1000x800", value_parser = fdtemp::report::plot::parse_size)]
    plot_size: (u32, u32),
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
        Command::Spectrum(a) => a.common.run.threads,
        Command::Noise(a) => a.common.run.threads,
        Command::Synth(a) => a.run.threads,
        Command::Demo(a) => a.run.threads,
    };
    let result = fdtemp::with_threads(threads, || match cli.command {
        Command::Fit(a) => fit(a),
        Command::Spectrum(a) => spectrum(a),
        Command::Noise(a) => noise(a),
        Command::Synth(a) => synth(a),
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
        hold: a.hold,
        range: a.range,
    };
    settings.validate()?;
    let figure = a.plot.figure()?;
    let resample_figure = a
        .plot_resamples
        .as_ref()
        .map(|p| Figure::for_path(p, a.plot.plot_size).map(|f| (p.clone(), f)))
        .transpose()?;
    output::check_paths(
        &[&a.json, &a.points, &a.plot.plot, &a.plot_resamples],
        &[a.file.as_path()],
        a.overwrite,
    )?;
    let campaign = fdtemp::input::read_campaign(&a.file, &names)?;
    let report = fdtemp::analyze(
        &campaign,
        &settings,
        Some(a.file.display().to_string()),
        &Bar::new(),
    )
    .map_err(in_file(&a.file))?;
    let mut outputs = Vec::new();
    if let Some(path) = a.json {
        outputs.push(Output {
            path,
            bytes: fdtemp::report::json::to_json(&report),
        });
    }
    if let Some(path) = a.points {
        outputs.push(Output {
            path,
            bytes: fdtemp::report::csv::points_csv(&report),
        });
    }
    if let Some((path, fig)) = figure {
        outputs.push(Output {
            path,
            bytes: plot::fd_plot(&report, fig)?,
        });
    }
    if let Some((path, fig)) = resample_figure {
        outputs.push(Output {
            path,
            bytes: plot::ratio_histogram(&report, fig)?,
        });
    }
    output::write_all(&outputs, a.overwrite)?;
    print(&fdtemp::report::text::render(&report));
    Ok(())
}

/// Errors of the analysis name the input file.
fn in_file(file: &std::path::Path) -> impl Fn(fdtemp::Error) -> fdtemp::Error + '_ {
    move |e| match e {
        fdtemp::Error::Analysis(m) => fdtemp::Error::input(file, None, None, m),
        e => e,
    }
}

fn spectrum(a: SpectrumArgs) -> fdtemp::Result<()> {
    let convention = a.convention.unwrap_or(Convention::Loss);
    let settings = a.common.settings(Some(a.temperature), convention);
    settings.validate()?;
    let figure = a.common.plot.figure()?;
    output::check_paths(
        &[&a.common.json, &a.common.plot.plot],
        &[a.file.as_path()],
        a.common.overwrite,
    )?;
    let groups = fdtemp::spectral::input::read_spectra(&a.file)?;
    let window = match a.window {
        Some(w) => w,
        None => fdtemp::spectral::input::window_directive(&a.file)?.unwrap_or(Window::None),
    };
    let report = fdtemp::spectral::analyze_spectra(
        &groups,
        &window.bin_rho2(),
        &settings,
        Some(a.file.display().to_string()),
    )
    .map_err(in_file(&a.file))?;
    let mut outputs = Vec::new();
    spectral_outputs(&mut outputs, &report, &a.common.json, figure)?;
    output::write_all(&outputs, a.common.overwrite)?;
    let header = vec![
        format!("data        {}", a.file.display()),
        format!(
            "window      {}",
            match window {
                Window::Hann => "Hann (neighbouring frequencies correlated: rho^2 = 4/9, 1/36)",
                Window::None => "none given (neighbouring frequencies taken as independent)",
            }
        ),
    ];
    print(&fdtemp::report::spectrum::render(&report, &header));
    Ok(())
}

fn noise(a: NoiseArgs) -> fdtemp::Result<()> {
    use fdtemp::spectral::noise::{self, Dissipation};
    let welch = fdtemp::spectral::welch::WelchSettings {
        sample_rate: a.sample_rate,
        segment: a.segment,
        overlap: a.overlap.unwrap_or(a.segment / 2),
    };
    welch.validate()?;
    if let Some(r) = a.resistance
        && !(r > 0.0 && r.is_finite())
    {
        return Err(fdtemp::Error::Setting(format!(
            "--resistance is {r}, expected a positive number of ohms"
        )));
    }
    let convention = a.convention.unwrap_or(if a.resistance.is_some() {
        Convention::Voltage
    } else {
        Convention::Loss
    });
    let settings = a.common.settings(a.temperature, convention);
    settings.validate()?;
    let figure = a.common.plot.figure()?;
    if figure.is_some() && a.resistance.is_none() && a.loss_file.is_none() {
        return Err(fdtemp::Error::Setting(
            "--plot draws T_eff(f), which needs a dissipation: give --resistance R or --loss-file FILE".into(),
        ));
    }
    let mut inputs = vec![a.file.as_path()];
    if let Some(l) = &a.loss_file {
        inputs.push(l.as_path());
    }
    output::check_paths(
        &[&a.common.json, &a.psd_out, &a.common.plot.plot],
        &inputs,
        a.common.overwrite,
    )?;
    let diss = match (a.resistance, &a.loss_file) {
        (Some(r), _) => Some(Dissipation::Constant(r)),
        (None, Some(p)) => Some(noise::read_dissipation(p)?),
        (None, None) => None,
    };
    let rec = noise::welch_records(&a.file, welch)?;
    let p0 = &rec.psd[0];
    let mut header = vec![
        format!(
            "data        {}: {} run(s) of {} samples at {} Hz",
            a.file.display(),
            rec.runs.len(),
            p0.samples,
            fdtemp::analysis::fmt_num(a.sample_rate)
        ),
        format!(
            "welch       Hann window, {} samples per segment, overlap {}, {} segments per run, {} degrees of freedom per frequency",
            welch.segment,
            welch.overlap,
            p0.segments,
            fdtemp::report::sig(p0.dof[1.min(p0.dof.len() - 1)], 4)
        ),
    ];
    let mut outputs = Vec::new();
    if let Some(p) = &a.psd_out {
        outputs.push(Output {
            path: p.clone(),
            bytes: noise::psd_csv(&rec, diss.as_ref()),
        });
    }
    let Some(diss) = diss else {
        output::write_all(&outputs, a.common.overwrite)?;
        for h in &header {
            println!("{h}");
        }
        println!(
            "no dissipation given: the PSD is computed, T_eff is not (give --resistance R or --loss-file FILE)"
        );
        if let Some(p) = &a.psd_out {
            println!("psd         written to {}", p.display());
        }
        return Ok(());
    };
    let (group, dropped) = noise::to_group(&rec, &diss).map_err(in_file(&a.file))?;
    let mut report = fdtemp::spectral::analyze_spectra(
        &[group],
        &rec.bin_rho2,
        &settings,
        Some(a.file.display().to_string()),
    )
    .map_err(in_file(&a.file))?;
    if dropped > 0 {
        report.warnings.push(format!(
            "{dropped} frequencies outside the dissipation table's range were left out"
        ));
    }
    if let Some(r) = a.resistance {
        header.push(format!(
            "dissipation Re Z = {} ohm at every frequency",
            fdtemp::analysis::fmt_num(r)
        ));
    }
    spectral_outputs(&mut outputs, &report, &a.common.json, figure)?;
    output::write_all(&outputs, a.common.overwrite)?;
    print(&fdtemp::report::spectrum::render(&report, &header));
    Ok(())
}

/// The JSON and the figure of a spectral analysis, as asked for.
fn spectral_outputs(
    outputs: &mut Vec<Output>,
    report: &fdtemp::spectral::SpectrumReport,
    json: &Option<PathBuf>,
    figure: Option<(PathBuf, Figure)>,
) -> fdtemp::Result<()> {
    if let Some(p) = json {
        outputs.push(Output {
            path: p.clone(),
            bytes: fdtemp::report::json::to_json(report),
        });
    }
    if let Some((path, fig)) = figure {
        outputs.push(Output {
            path,
            bytes: plot::teff_plot(report, fig)?,
        });
    }
    Ok(())
}

fn synth(a: SynthArgs) -> fdtemp::Result<()> {
    let truth_path = a.out.with_extension("truth.json");
    output::check_paths(
        &[&Some(a.out.clone()), &Some(truth_path.clone())],
        &[],
        a.overwrite,
    )?;
    let spec = fdtemp::scenarios::sim::SimSpec {
        scenario: a.scenario,
        samples: a.samples,
        seed: a.seed,
        quick: a.quick,
    };
    let sim = fdtemp::scenarios::sim::simulate(&spec)?;
    let fit = sim.truth["fit"]
        .as_str()
        .unwrap_or("")
        .replace("FILE", &a.out.display().to_string());
    output::write_all(
        &[
            Output {
                path: a.out.clone(),
                bytes: sim.data,
            },
            Output {
                path: truth_path.clone(),
                bytes: fdtemp::report::json::to_json(&sim.truth),
            },
        ],
        a.overwrite,
    )?;
    println!(
        "wrote      {} ({} runs) and {}",
        a.out.display(),
        a.samples,
        truth_path.display()
    );
    println!("truth      {}", sim.truth["source"].as_str().unwrap_or(""));
    println!("analyse    {fit}");
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
    let d = fdtemp::scenarios::demo::run(&a.out, &Bar::new())?;
    let outputs = fdtemp::scenarios::demo::prune_unchanged(d.outputs.clone(), a.overwrite)?;
    output::write_all(&outputs, true)?;
    print(&fdtemp::report::text::render(&d.report));
    println!("\n════ spectral part\n");
    print(&fdtemp::report::spectrum::render(
        &d.spectrum,
        &[format!(
            "data        {}",
            a.out.join("spectrum.csv").display()
        )],
    ));
    println!();
    print!("{}", fdtemp::scenarios::demo::compare(&d));
    println!(
        "files      {} (try: fdtemp fit {} --temperature {}; fdtemp spectrum {} --temperature {} --band 20:500)",
        a.out.display(),
        a.out.join("campaign.csv").display(),
        d.spec.temperature,
        a.out.join("spectrum.csv").display(),
        d.spectrum_spec.temperature
    );
    Ok(())
}

fn print(bytes: &[u8]) {
    let mut out = std::io::stdout().lock();
    let _ = out.write_all(bytes);
}
