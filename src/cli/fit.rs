//! `fdtemp fit`: the time-domain analysis of a campaign, its report and output files.

use super::progress::Bar;
use super::{PlotArgs, RunArgs, parse_band, print};
use fdtemp::common::Units;
use fdtemp::input::{CampaignRead, ColumnNames, Delimiter, ReadCampaign};
use fdtemp::output::{self, Output};
use fdtemp::report::plot::{self, Figure};
use fdtemp::resample::IntervalMethod;
use fdtemp::twotime::design::{DesignSettings, Noise};
use fdtemp::twotime::points::Axes;
use fdtemp::twotime::settings::{Constraint, FitSettings, Hold, Model, Weighting};
use std::path::PathBuf;

/// The options that shape a time-domain fit (shared by `fit` and `design-check`).
#[derive(clap::Args)]
pub struct FitOptions {
    /// Tidy CSV: one row per (sample, tw, t) with columns sample, tw, t, corr, resp [, corr_eq];
    /// or a NumPy .npz archive with arrays corr, resp (samples × points), tw, t [, corr_eq,
    /// sample] (docs/input.md).
    pub(super) file: PathBuf,
    /// Bath temperature T (energy units with --units reduced, kelvin with --units si).
    #[arg(long, short = 'T', allow_negative_numbers = true)]
    temperature: f64,
    /// Units: reduced (k = 1) or si (k = 1.380649e-23 J/K).
    #[arg(long, value_enum, default_value_t = Units::Reduced)]
    units: Units,
    /// Parametric axes: auto (normalized when corr_eq is present), plain or normalized.
    #[arg(long, value_enum, default_value_t = Axes::Auto)]
    axes: Axes,
    /// Model: broken (first slope fixed at -1), free (both slopes fitted), line (one slope),
    /// or smooth (the broken stick and a smooth X(C) beside it, with the shape verdict).
    #[arg(long, value_enum, default_value_t = Model::Broken)]
    model: Model,
    /// With --model smooth: monotone (X non-decreasing in C and at most 1, the aging shape)
    /// or none (X free to fall and to exceed 1; reported, never clamped).
    #[arg(long, value_enum, value_name = "RULE")]
    smooth_shape: Option<Constraint>,
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
    /// Extrapolate the curves to long ages: at fixed C, y = y∞(C) + a(C)·tw^−α with one α,
    /// jointly over the waiting times (at least 3); reports X∞, T_eff∞ and α with intervals.
    #[arg(long)]
    limit: bool,
    /// The aging verdict calls X settled when its change per decade of age lies within
    /// ±D at the test level (two one-sided tests).
    #[arg(long, value_name = "D", default_value_t = 0.05)]
    settled_within: f64,
    /// Map a column role to another header name, e.g. --column resp=chi_zfc (repeatable).
    #[arg(long = "column", value_name = "ROLE=NAME")]
    columns: Vec<String>,
    /// What separates the fields of the table; with any but comma, numbers may have a
    /// decimal comma (0,25).
    #[arg(long, value_enum, default_value_t = Delimiter::Comma)]
    delimiter: Delimiter,
    /// Leave out the samples that miss points (rows absent, or NaN in a .npz) instead of
    /// refusing the file; the report and the JSON list them.
    #[arg(long)]
    drop_incomplete: bool,
    /// Fit only this observable of a file with an observable column (without it, every
    /// observable is fitted and the joint test asks whether they share one X).
    #[arg(long, value_name = "NAME")]
    observable: Option<String>,
}

impl FitOptions {
    pub(super) fn settings(&self) -> FitSettings {
        FitSettings {
            temperature: self.temperature,
            units: self.units,
            axes: self.axes,
            model: self.model,
            weights: self.weights,
            resamples: self.resamples,
            seed: self.seed,
            level: self.level,
            interval: self.interval,
            min_branch: self.min_branch,
            hold: self.hold,
            range: self.range,
            smooth: fdtemp::api::smooth_rule(self.model, self.smooth_shape),
            limit: self.limit,
            settled_within: self.settled_within,
        }
    }

    /// The column names as mapped by `--column`.
    pub(super) fn names(&self) -> fdtemp::Result<ColumnNames> {
        let mut names = ColumnNames::default();
        for m in &self.columns {
            names.apply(m)?;
        }
        Ok(names)
    }

    /// The campaign, read with the mapped names and the delimiter, with the samples left
    /// out by --drop-incomplete.
    pub(super) fn campaign(&self) -> fdtemp::Result<ReadCampaign> {
        let how = CampaignRead {
            names: self.names()?,
            delimiter: self.delimiter,
            drop_incomplete: self.drop_incomplete,
            observable: self.observable.clone(),
        };
        fdtemp::api::read_campaign(fdtemp::api::CampaignSource::File(self.file.clone()), &how)
    }
}

/// How simulated campaigns of the user's design are made (`fit --calibrate`,
/// `design-check`).
#[derive(clap::Args)]
pub struct SimArgs {
    /// How a simulated sample's noise is drawn from the data: gaussian (with the samples'
    /// covariance across all points; calibrates best in docs/validation.md) or resample
    /// (residual curves of whole samples with replacement, no distributional assumption).
    #[arg(long, value_enum, default_value_t = Noise::Gaussian)]
    sim_noise: Noise,
}

impl SimArgs {
    pub(super) fn design(&self, campaigns: usize, seed: u64) -> DesignSettings {
        DesignSettings {
            campaigns,
            noise: self.sim_noise,
            seed,
        }
    }
}

#[derive(clap::Args)]
pub struct FitArgs {
    #[command(flatten)]
    opts: FitOptions,
    /// Also give intervals calibrated on this many campaigns simulated with this design
    /// (the fitted curve as truth, the data's own noise): formed at the nominal level that
    /// covered at --level on them.
    #[arg(long, value_name = "CAMPAIGNS")]
    calibrate: Option<usize>,
    #[command(flatten)]
    sim: SimArgs,
    /// Write the full result as JSON to this file.
    #[arg(long, value_name = "FILE")]
    json: Option<PathBuf>,
    /// Write the parametric points with their errors as CSV to this file.
    #[arg(long, value_name = "FILE")]
    points: Option<PathBuf>,
    /// With --model smooth: write every fit's X(C) and T_eff(C) with their bands as CSV.
    #[arg(long, value_name = "FILE")]
    x_of_c: Option<PathBuf>,
    /// With --model smooth: compare X(C) with the static x(q) = ∫₀^q P(q') dq' of this
    /// equilibrium overlap distribution (CSV: columns q, p for a histogram, or q alone for
    /// samples; negative q folded onto |q|).
    #[arg(long, value_name = "FILE")]
    overlap: Option<PathBuf>,
    /// With --model smooth: draw X(C) with its band into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    plot_x_of_c: Option<PathBuf>,
    /// Also estimate the two-time ratio X(t,tw) = -∂_tw(kT chi)/∂_tw C at fixed later time
    /// t (not the slope of a fixed-tw curve), from local fits in ln tw over neighbouring
    /// waiting times; needs at least 3 waiting times reaching a common t (measured, or
    /// inside a curve's range by interpolation in log t).
    #[arg(long)]
    two_time: bool,
    /// With --two-time: waiting times per local fit along tw, 3 or 5 (centred windows).
    #[arg(long, value_name = "N", default_value_t = 3, requires = "two_time")]
    two_time_window: usize,
    /// With --two-time: write the two-time ratio table as CSV to this file.
    #[arg(long, value_name = "FILE", requires = "two_time")]
    two_time_csv: Option<PathBuf>,
    /// Replace output files that exist already.
    #[arg(long)]
    overwrite: bool,
    /// Draw the histogram of the resampled X into this file (.svg, .png or .pdf).
    #[arg(long, value_name = "FILE")]
    plot_resamples: Option<PathBuf>,
    /// Draw the FD plot and X against tw side by side into this file (needs
    /// --plot-size double: each panel one column wide).
    #[arg(long, value_name = "FILE")]
    plot_panels: Option<PathBuf>,
    #[command(flatten)]
    plot: PlotArgs,
    #[command(flatten)]
    pub(super) run: RunArgs,
}

/// Checks the settings and output paths, reads the campaign, analyses it, writes the files
/// asked for, prints the report.
pub fn run(a: FitArgs) -> fdtemp::Result<()> {
    let settings = a.opts.settings();
    settings.validate()?;
    let design = a.calibrate.map(|m| a.sim.design(m, settings.seed));
    if let Some(d) = &design {
        d.validate()?;
    }
    for (given, name) in [
        (a.x_of_c.is_some(), "--x-of-c"),
        (a.plot_x_of_c.is_some(), "--plot-x-of-c"),
    ] {
        if given && settings.model != Model::Smooth {
            return Err(fdtemp::Error::Setting(format!(
                "{name} shows the smooth X(C): it needs --model smooth"
            )));
        }
    }
    let x_of_c_figure = a
        .plot_x_of_c
        .as_ref()
        .map(|p| Figure::for_path(p, a.plot.plot_size).map(|f| (p.clone(), f)))
        .transpose()?;
    let figure = a.plot.figure()?;
    let resample_figure = a
        .plot_resamples
        .as_ref()
        .map(|p| Figure::for_path(p, a.plot.plot_size).map(|f| (p.clone(), f)))
        .transpose()?;
    let panels = a
        .plot_panels
        .as_ref()
        .map(|p| plot::panels_figure(p, a.plot.plot_size).map(|f| (p.clone(), f)))
        .transpose()?;
    output::check_paths(
        &[
            &a.json,
            &a.points,
            &a.plot.plot,
            &a.plot_resamples,
            &a.plot_panels,
            &a.x_of_c,
            &a.plot_x_of_c,
            &a.two_time_csv,
        ],
        &std::iter::once(a.opts.file.as_path())
            .chain(a.overlap.as_deref())
            .collect::<Vec<_>>(),
        a.overwrite,
    )?;
    let overlap = a
        .overlap
        .as_deref()
        .map(fdtemp::twotime::overlap::read_overlap)
        .transpose()?;
    let file = &a.opts.file;
    let read = a.opts.campaign()?;
    let progress = match &design {
        None => Bar::new(),
        Some(_) => Bar::labelled("simulating"),
    };
    let two_time = a.two_time.then_some(fdtemp::twotime::TwoTimeSettings {
        window: a.two_time_window,
    });
    let files = Files {
        points: a.points,
        figure,
        resample_figure,
        panels,
        two_time_csv: a.two_time_csv,
        x_of_c: a.x_of_c,
        x_of_c_figure,
    };
    if !read.more.is_empty() {
        let report = fdtemp::api::fit_observables(
            read,
            &settings,
            design.as_ref(),
            overlap.as_ref(),
            two_time.as_ref(),
            file,
            &progress,
        )?;
        let mut outputs = Vec::new();
        if let Some(path) = a.json {
            let bytes = fdtemp::report::observables::json(&report);
            outputs.push(Output { path, bytes });
        }
        for r in &report.observables {
            let name = r.observable.as_deref().unwrap_or_default();
            outputs.extend(files.outputs(r, Some(name))?);
        }
        let inputs: Vec<&std::path::Path> = std::iter::once(file.as_path())
            .chain(a.overlap.as_deref())
            .collect();
        output::check(&outputs, &inputs, a.overwrite)?;
        output::write_all(&outputs, a.overwrite)?;
        print(&fdtemp::report::observables::render(&report));
        return Ok(());
    }
    let report = fdtemp::api::fit_campaign_with(
        read,
        &settings,
        design.as_ref(),
        overlap.as_ref(),
        two_time.as_ref(),
        file,
        &progress,
    )?;
    let mut outputs = Vec::new();
    if let Some(path) = a.json {
        let bytes = fdtemp::report::json::fit_json(&report);
        outputs.push(Output { path, bytes });
    }
    outputs.extend(files.outputs(&report, None)?);
    output::write_all(&outputs, a.overwrite)?;
    print(&fdtemp::report::text::render(&report));
    Ok(())
}

/// The files of one fit that `fit` can write besides the JSON, with their figures' sizes.
struct Files {
    points: Option<PathBuf>,
    figure: Option<(PathBuf, Figure)>,
    resample_figure: Option<(PathBuf, Figure)>,
    panels: Option<(PathBuf, Figure)>,
    two_time_csv: Option<PathBuf>,
    x_of_c: Option<PathBuf>,
    x_of_c_figure: Option<(PathBuf, Figure)>,
}

/// `fd.svg` for observable `q1` becomes `fd-q1.svg` (characters other than letters,
/// digits, `.`, `_` and `-` in the name become `_`).
pub(super) fn for_observable(path: &std::path::Path, name: &str) -> PathBuf {
    let safe: String = name
        .chars()
        .map(|c| {
            if c.is_alphanumeric() || matches!(c, '.' | '_' | '-') {
                c
            } else {
                '_'
            }
        })
        .collect();
    let stem = path
        .file_stem()
        .map_or_else(String::new, |s| s.to_string_lossy().into_owned());
    let file = match path.extension() {
        Some(ext) => format!("{stem}-{safe}.{}", ext.to_string_lossy()),
        None => format!("{stem}-{safe}"),
    };
    path.with_file_name(file)
}

impl Files {
    /// The files of `report`; with `observable`, each path carries its name.
    fn outputs(
        &self,
        report: &fdtemp::FitReport,
        observable: Option<&str>,
    ) -> fdtemp::Result<Vec<Output>> {
        let at = |p: &PathBuf| observable.map_or_else(|| p.clone(), |n| for_observable(p, n));
        let mut outputs = Vec::new();
        let mut push = |path: &PathBuf, bytes: Vec<u8>| {
            outputs.push(Output {
                path: at(path),
                bytes,
            })
        };
        if let Some(path) = &self.points {
            push(path, fdtemp::report::csv::points_csv(report));
        }
        if let Some((path, fig)) = &self.figure {
            push(path, plot::fd_plot(report, *fig)?);
        }
        if let Some((path, fig)) = &self.resample_figure {
            push(path, plot::ratio_histogram(report, *fig)?);
        }
        if let Some((path, fig)) = &self.panels {
            push(path, plot::fd_panels(report, *fig)?);
        }
        if let Some(path) = &self.two_time_csv {
            push(path, fdtemp::report::csv::two_time_csv(report));
        }
        if let Some(path) = &self.x_of_c {
            push(path, fdtemp::report::shape::curve_csv(report));
        }
        if let Some((path, fig)) = &self.x_of_c_figure {
            push(path, plot::x_of_c_plot(report, *fig)?);
        }
        Ok(outputs)
    }
}
