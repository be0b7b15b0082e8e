//! `fdtemp spectrum` (a PSD table) and `fdtemp noise` (raw records through Welch), with the
//! options they share.

use super::{PlotArgs, RunArgs, parse_band, print};
use fdtemp::common::Units;
use fdtemp::input::Delimiter;
use fdtemp::output::{self, Output};
use fdtemp::report::plot::{self, Figure};
use fdtemp::resample::IntervalMethod;
use fdtemp::spectral::analysis::ErrorModel;
use fdtemp::spectral::input::Window;
use fdtemp::spectral::noise::{self, Dissipation, RecordPsd};
use fdtemp::spectral::welch::WelchSettings;
use fdtemp::spectral::{Convention, SpectrumReport, SpectrumSettings};
use std::path::PathBuf;

#[derive(clap::Args)]
pub struct SpectrumArgs {
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
    pub(super) common: SpectralArgs,
}

#[derive(clap::Args)]
pub struct NoiseArgs {
    /// Noise record: one number per line, or one column per run (optional header); or a
    /// NumPy .npy array, one run or runs × samples (docs/input.md).
    file: PathBuf,
    /// Samples per second [default: from the record's time column, a first column named
    /// t or time (any unit suffix) or, without a header, rising in even steps].
    #[arg(long, allow_negative_numbers = true)]
    sample_rate: Option<f64>,
    /// Voltage gain between the sample and the recorder: the PSD is divided by GAIN² so
    /// that it is referred to the sample.
    #[arg(long, allow_negative_numbers = true)]
    gain: Option<f64>,
    /// A second record of the same sample taken at the same time through another,
    /// independent amplifier (same layout as FILE: runs, length, sample rate). T_eff then
    /// comes from the real part of the two records' cross-spectrum, in which the
    /// amplifiers' uncorrelated noise averages out.
    #[arg(long, value_name = "FILE", conflicts_with = "psd_out")]
    cross_with: Option<PathBuf>,
    /// Voltage gain of the second channel (--cross-with) [default: --gain].
    #[arg(long, allow_negative_numbers = true, requires = "cross_with")]
    cross_gain: Option<f64>,
    /// A measured amplifier-noise PSD to subtract from the record's PSD: a CSV with
    /// columns f, psd, dof (as --psd-out writes from a record of the amplifier alone),
    /// referred to the sample like the record's PSD after --gain.
    #[arg(long, value_name = "FILE", conflicts_with = "cross_with")]
    amplifier_noise: Option<PathBuf>,
    /// Segment length of Welch's method (samples).
    #[arg(long, default_value_t = 4096)]
    segment: usize,
    /// Overlap of consecutive segments (samples) [default: half a segment].
    #[arg(long)]
    overlap: Option<usize>,
    /// A resistor's resistance R (ohm): the dissipation of voltage noise, Re Z = R.
    #[arg(long, conflicts_with = "loss_file", allow_negative_numbers = true)]
    resistance: Option<f64>,
    /// CSV of f and the dissipation (loss, Re Z or Re Y), interpolated in log f – log
    /// value; its column name (loss, Re Z, Re Y, …) sets the convention unless
    /// --convention is given.
    #[arg(long, value_name = "FILE")]
    loss_file: Option<PathBuf>,
    /// Bath temperature T: enables the departure test.
    #[arg(long, short = 'T', allow_negative_numbers = true)]
    temperature: Option<f64>,
    /// How PSD and dissipation are normalized [default: voltage with --resistance; with
    /// --loss-file, what its column name says].
    #[arg(long, value_enum)]
    convention: Option<Convention>,
    /// Write the PSD as a CSV that `fdtemp spectrum` reads back.
    #[arg(long, value_name = "FILE")]
    psd_out: Option<PathBuf>,
    /// Records that start at a quench: T_eff(f, tw) in windows centred at these ages
    /// (seconds after the quench, comma-separated, increasing); the loss file may give one
    /// table per age (a first column named tw).
    #[arg(
        long,
        value_name = "TW,...",
        value_delimiter = ',',
        conflicts_with = "psd_out"
    )]
    ages: Vec<f64>,
    /// With --ages: each window's width as a fraction of its age [default: 0.25].
    #[arg(
        long,
        value_name = "FRACTION",
        requires = "ages",
        conflicts_with = "age_window"
    )]
    age_span: Option<f64>,
    /// With --ages: each window's width in seconds, the same at every age.
    #[arg(long, value_name = "SECONDS", requires = "ages")]
    age_window: Option<f64>,
    /// With --ages: the time of the quench on the record's clock (seconds after its first
    /// sample); samples before it are not used.
    #[arg(long, value_name = "SECONDS", requires = "ages", default_value_t = 0.0)]
    quench_at: f64,
    /// Test the records against Gaussian noise of their own spectrum (per log band, the
    /// scatter of the per-segment powers against 199 Gaussian surrogates); when it
    /// rejects, --errors auto resamples runs. Holds the records in memory.
    #[arg(long)]
    intermittency: bool,
    #[command(flatten)]
    pub(super) common: SpectralArgs,
}

#[derive(clap::Args)]
pub struct SpectralArgs {
    /// Units: si (kelvin, k = 1.380649e-23 J/K) or reduced (k = 1).
    #[arg(long, value_enum, default_value_t = Units::Si)]
    units: Units,
    /// What separates the fields of the input tables (the data and --loss-file); with any
    /// but comma, numbers may have a decimal comma (0,25).
    #[arg(long, value_enum, default_value_t = Delimiter::Comma)]
    delimiter: Delimiter,
    /// Where intervals come from: auto, chi-square, runs (bootstrap over runs), or normal
    /// (from each value's variance; the cross-spectrum's and a subtracted PSD's).
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
    pub(super) run: RunArgs,
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
            ..SpectrumSettings::default()
        }
    }
}

/// `fdtemp spectrum`: reads the PSD table, analyses it, writes the files, prints the report.
pub fn spectrum(a: SpectrumArgs) -> fdtemp::Result<()> {
    let convention = a.convention.unwrap_or(Convention::Loss);
    let settings = a.common.settings(Some(a.temperature), convention);
    settings.validate()?;
    let figure = a.common.plot.figure()?;
    output::check_paths(
        &[&a.common.json, &a.common.plot.plot],
        &[a.file.as_path()],
        a.common.overwrite,
    )?;
    let source = fdtemp::api::SpectrumSource::File(a.file.clone());
    let (groups, window) = fdtemp::api::read_spectrum(&source, a.common.delimiter, a.window)?;
    let report = fdtemp::api::spectrum(&groups, window, &settings, &a.file)?;
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

/// `fdtemp noise`: Welch PSD of the records; with a dissipation, T_eff(f) and its report.
pub fn noise(a: NoiseArgs) -> fdtemp::Result<()> {
    let mut inputs = vec![a.file.as_path()];
    for p in [&a.loss_file, &a.cross_with, &a.amplifier_noise]
        .into_iter()
        .flatten()
    {
        inputs.push(p.as_path());
    }
    output::check_paths(
        &[&a.common.json, &a.psd_out, &a.common.plot.plot],
        &inputs,
        a.common.overwrite,
    )?;
    let by_age = match &a.loss_file {
        Some(p) if !a.ages.is_empty() => {
            fdtemp::spectral::aging::read_loss_by_age(p, a.common.delimiter)?
        }
        _ => None,
    };
    let (diss, column) = match (a.resistance, &a.loss_file, &by_age) {
        (Some(r), _, _) => (Some(Dissipation::Constant(r)), None),
        (None, Some(_), Some((_, name))) => (None, Some(name.clone())),
        (None, Some(p), None) => {
            let (d, name) = noise::read_dissipation_in(p, a.common.delimiter)?;
            (Some(d), Some(name))
        }
        (None, None, _) => (None, None),
    };
    let NoiseSetup {
        welch,
        settings,
        figure,
        convention_note,
    } = noise_settings(&a, column.as_deref())?;
    if !a.ages.is_empty() {
        let loss = match (by_age, diss) {
            (Some((tables, _)), _) => fdtemp::spectral::aging::AgeLoss::ByAge(tables),
            (None, Some(d)) => fdtemp::spectral::aging::AgeLoss::Same(d),
            (None, None) => return Err(no_dissipation("--ages")),
        };
        return noise_ages(&a, &loss, welch, settings, figure, convention_note);
    }
    if let Some(b) = &a.cross_with {
        let Some(diss) = diss else {
            return Err(no_dissipation("--cross-with"));
        };
        return noise_cross(&a, b, &diss, welch, &settings, figure, convention_note);
    }
    let amp = match &a.amplifier_noise {
        Some(_) if diss.is_none() => return Err(no_dissipation("--amplifier-noise")),
        Some(p) => Some(noise::read_amplifier_noise(p, a.common.delimiter)?),
        None => None,
    };
    let mut settings = settings;
    let burst = burst_test(&a, welch)?;
    let source = fdtemp::api::NoiseSource::File(a.file.clone(), a.common.delimiter);
    let rec = fdtemp::api::noise_psd(source, welch, a.sample_rate, a.gain)?;
    let mut header = noise_header(&a, &welch, &rec);
    header.extend(convention_note);
    if let Some(b) = &burst {
        let allowed = a.amplifier_noise.is_none();
        header.push(burst_line(b, &mut settings, rec.runs.len(), allowed));
    }
    if let (Some(p), Some(amp)) = (&a.amplifier_noise, &amp) {
        header.push(format!(
            "amplifier   {} ({} run(s), {}–{} Hz) subtracted from the PSD (referred to the sample)",
            p.display(),
            amp.runs,
            fdtemp::report::format::fmt_num(amp.range[0]),
            fdtemp::report::format::fmt_num(amp.range[1])
        ));
    }
    let mut outputs = Vec::new();
    if let Some(p) = &a.psd_out {
        outputs.push(Output {
            path: p.clone(),
            bytes: noise::psd_csv(&rec, diss.as_ref()),
        });
    }
    let Some(diss) = diss else {
        return psd_only(&a, &header, &outputs);
    };
    let report = match (&a.amplifier_noise, &amp) {
        (Some(p), Some(amp)) => fdtemp::api::noise_subtracted_spectrum(
            &rec,
            amp,
            p,
            &diss,
            &settings,
            &a.file,
            a.loss_file.as_deref(),
        )?,
        _ => noise_analysis(&a, &rec, &diss, &settings)?,
    };
    let mut report = report;
    report.intermittency = burst;
    resistance_line(&a, &mut header);
    spectral_outputs(&mut outputs, &report, &a.common.json, figure)?;
    output::write_all(&outputs, a.common.overwrite)?;
    print(&fdtemp::report::spectrum::render(&report, &header));
    Ok(())
}

/// `noise --ages`: T_eff(f, tw) of records that start at a quench, in windows at the
/// ages.
fn noise_ages(
    a: &NoiseArgs,
    loss: &fdtemp::spectral::aging::AgeLoss,
    welch: WelchSettings,
    mut settings: SpectrumSettings,
    figure: Option<(PathBuf, Figure)>,
    convention_note: Option<String>,
) -> fdtemp::Result<()> {
    use fdtemp::report::format::{fmt_num, sig};
    use fdtemp::spectral::aging::{AgeSettings, Width};
    let width = match (a.age_window, a.age_span) {
        (Some(s), _) => Width::Seconds(s),
        (None, Some(f)) => Width::Fraction(f),
        (None, None) => Width::Fraction(0.25),
    };
    let ages = AgeSettings {
        ages: a.ages.clone(),
        width,
        quench_at: a.quench_at,
    };
    ages.validate()?;
    settings.ages = Some(ages.clone());
    let channel = match (&a.cross_with, &a.amplifier_noise) {
        (Some(b), _) => fdtemp::api::AgeChannel::Cross { second: b.clone() },
        (None, Some(p)) => fdtemp::api::AgeChannel::Subtracted {
            amp: noise::read_amplifier_noise(p, a.common.delimiter)?,
            file: p.clone(),
        },
        (None, None) => fdtemp::api::AgeChannel::Single,
    };
    let (report, windows) = fdtemp::api::noise_aging(
        &a.file,
        a.common.delimiter,
        welch,
        a.sample_rate,
        a.gain,
        &ages,
        loss,
        &settings,
        a.intermittency,
        &channel,
    )?;
    let first = &windows[0].psd;
    let mut header = vec![format!(
        "data        {}: {} run(s) at {} Hz, from the quench at {} s on their clock",
        a.file.display(),
        first.runs.len(),
        fmt_num(first.sample_rate),
        fmt_num(a.quench_at)
    )];
    for w in &windows {
        let p = &w.psd.psd[0];
        header.push(format!(
            "age         tw = {} s: window {}–{} s after the quench, {} segments per run, {} \
             degrees of freedom per frequency",
            fmt_num(w.tw),
            fmt_num(w.window[0]),
            fmt_num(w.window[1]),
            p.segments,
            sig(p.dof[1.min(p.dof.len() - 1)], 4)
        ));
    }
    if let Some(g) = a.gain {
        header.push(format!(
            "gain        {}: the PSD is divided by {} (referred to the sample)",
            fmt_num(g),
            sig(g * g, 4)
        ));
    }
    header.push(format!(
        "welch       Hann window, {} samples per segment, overlap {}",
        welch.segment, welch.overlap
    ));
    header.extend(convention_note);
    match &channel {
        fdtemp::api::AgeChannel::Cross { second } => header.push(format!(
            "second      {}: the cross-spectrum of the two records in every window",
            second.display()
        )),
        fdtemp::api::AgeChannel::Subtracted { file, .. } => header.push(format!(
            "amplifier   {} subtracted from every window's PSD (referred to the sample)",
            file.display()
        )),
        fdtemp::api::AgeChannel::Single => {}
    }
    if matches!(loss, fdtemp::spectral::aging::AgeLoss::ByAge(_)) {
        header.push("loss        one table per age (the loss file's tw column)".into());
    }
    for (t, sp) in report.intermittency_by_age.iter().zip(&report.spectra) {
        header.push(format!(
            "gaussian?   tw = {} s: {}: p = {} over {} bands ({} surrogates){}",
            fmt_num(t.tw),
            gaussian_words(&t.test),
            fdtemp::report::format::fmt_p(t.test.p_value),
            t.test.bands.len(),
            t.test.settings.surrogates,
            if t.test.needs_run_resampling
                && sp.errors == ErrorModel::Runs
                && a.common.errors == ErrorModel::Auto
            {
                "; intervals resample runs"
            } else {
                ""
            }
        ));
    }
    resistance_line(a, &mut header);
    let mut outputs = Vec::new();
    spectral_outputs(&mut outputs, &report, &a.common.json, figure)?;
    output::write_all(&outputs, a.common.overwrite)?;
    print(&fdtemp::report::spectrum::render(&report, &header));
    Ok(())
}

/// `--intermittency`: the records' test against Gaussian surrogates (first channel).
fn burst_test(
    a: &NoiseArgs,
    welch: WelchSettings,
) -> fdtemp::Result<Option<fdtemp::spectral::intermittency::IntermittencyReport>> {
    if !a.intermittency {
        return Ok(None);
    }
    fdtemp::api::noise_intermittency(
        &a.file,
        a.common.delimiter,
        welch,
        a.sample_rate,
        a.common.level,
        a.common.seed,
    )
    .map(Some)
}

/// The intermittency verdict in the `gaussian?` header line.
fn gaussian_words(b: &fdtemp::spectral::intermittency::IntermittencyReport) -> &'static str {
    match b.verdict {
        fdtemp::spectral::intermittency::IntermittencyVerdict::Intermittent => "no, intermittent",
        _ => "consistent with Gaussian noise",
    }
}

/// The `gaussian?` header line; where the test rejects, `--errors auto` becomes runs
/// (with at least 2 runs, when `allowed`).
fn burst_line(
    b: &fdtemp::spectral::intermittency::IntermittencyReport,
    settings: &mut SpectrumSettings,
    runs: usize,
    allowed: bool,
) -> String {
    let switch =
        b.needs_run_resampling && settings.errors == ErrorModel::Auto && runs >= 2 && allowed;
    if switch {
        settings.errors = ErrorModel::Runs;
    }
    format!(
        "gaussian?   {}: p = {} over {} bands ({} surrogates){}",
        gaussian_words(b),
        fdtemp::report::format::fmt_p(b.p_value),
        b.bands.len(),
        b.settings.surrogates,
        if switch {
            "; intervals resample runs"
        } else {
            ""
        }
    )
}

/// The header's line on a constant resistance.
fn resistance_line(a: &NoiseArgs, header: &mut Vec<String>) {
    if let Some(r) = a.resistance {
        header.push(format!(
            "dissipation Re Z = {} ohm at every frequency",
            fdtemp::report::format::fmt_num(r)
        ));
    }
}

/// The error for an option that needs a dissipation given without one.
fn no_dissipation(option: &str) -> fdtemp::Error {
    fdtemp::Error::Setting(format!(
        "{option} gives T_eff, which needs a dissipation: give --resistance R or --loss-file FILE"
    ))
}

/// `noise --cross-with`: the two channels' cross-spectrum, T_eff(f) from its real part.
fn noise_cross(
    a: &NoiseArgs,
    b: &std::path::Path,
    diss: &Dissipation,
    welch: WelchSettings,
    settings: &SpectrumSettings,
    figure: Option<(PathBuf, Figure)>,
    convention_note: Option<String>,
) -> fdtemp::Result<()> {
    use fdtemp::report::format::{fmt_num, sig};
    let burst = burst_test(a, welch)?;
    let mut settings = settings.clone();
    let pair = fdtemp::api::noise_cross_psd(
        &a.file,
        b,
        a.common.delimiter,
        welch,
        a.sample_rate,
        a.gain,
        a.cross_gain,
    )?;
    let mut header = noise_header(a, &welch, &pair.a);
    let gb = pair.b.gain;
    header.push(format!(
        "channel 2   {}: {} run(s), same length and rate{}",
        b.display(),
        pair.b.runs.len(),
        if gb == 1.0 {
            String::new()
        } else {
            format!(
                "; gain {}, its PSD divided by {}",
                fmt_num(gb),
                sig(gb * gb, 4)
            )
        }
    ));
    header.push(
        "estimate    real part of the cross-spectrum of the two channels (the amplifiers' \
         uncorrelated noise averages out)"
            .into(),
    );
    header.extend(convention_note);
    if let Some(t) = &burst {
        header.push(burst_line(t, &mut settings, pair.a.runs.len(), true));
    }
    let mut report = fdtemp::api::noise_cross_spectrum(
        &pair,
        diss,
        &settings,
        &a.file,
        b,
        a.loss_file.as_deref(),
    )?;
    report.intermittency = burst;
    resistance_line(a, &mut header);
    let mut outputs = Vec::new();
    spectral_outputs(&mut outputs, &report, &a.common.json, figure)?;
    output::write_all(&outputs, a.common.overwrite)?;
    print(&fdtemp::report::spectrum::render(&report, &header));
    Ok(())
}

/// What `noise` does, checked before any work.
struct NoiseSetup {
    welch: WelchSettings,
    settings: SpectrumSettings,
    figure: Option<(PathBuf, Figure)>,
    /// A header line when the convention was read from the loss file's column name, or
    /// when the given one differs from what that name says.
    convention_note: Option<String>,
}

/// Welch and analysis settings and the figure of `noise`, checked before any work;
/// `column` is the loss file's value column name.
fn noise_settings(a: &NoiseArgs, column: Option<&str>) -> fdtemp::Result<NoiseSetup> {
    let welch = WelchSettings {
        sample_rate: a.sample_rate.unwrap_or(1.0),
        segment: a.segment,
        overlap: a.overlap.unwrap_or(a.segment / 2),
    };
    welch.validate()?;
    fdtemp::api::positive("--resistance", a.resistance, "a positive number of ohms")?;
    fdtemp::api::positive("--gain", a.gain, "a positive voltage gain (output/input)")?;
    let (convention, convention_note) = fdtemp::api::noise_convention(
        a.convention,
        a.resistance.is_some(),
        column,
        a.loss_file.as_deref().unwrap_or(a.file.as_path()),
    )?;
    fdtemp::api::positive(
        "--cross-gain",
        a.cross_gain,
        "a positive voltage gain (output/input)",
    )?;
    let mut settings = a.common.settings(a.temperature, convention);
    settings.gain = a.gain;
    if a.cross_with.is_some() {
        settings.estimator = fdtemp::spectral::Estimator::CrossSpectrum;
        settings.second_gain = a.cross_gain.or(a.gain);
    } else if a.amplifier_noise.is_some() {
        settings.estimator = fdtemp::spectral::Estimator::Subtracted;
    }
    settings.validate()?;
    let figure = a.common.plot.figure()?;
    if figure.is_some() && a.resistance.is_none() && a.loss_file.is_none() {
        return Err(fdtemp::Error::Setting(
            "--plot draws T_eff(f), which needs a dissipation: give --resistance R or --loss-file FILE".into(),
        ));
    }
    Ok(NoiseSetup {
        welch,
        settings,
        figure,
        convention_note,
    })
}

/// The report's first lines: the records, their time column and gain, and the Welch
/// estimate.
fn noise_header(a: &NoiseArgs, welch: &WelchSettings, rec: &RecordPsd) -> Vec<String> {
    use fdtemp::report::format::{fmt_num, sig};
    let p0 = &rec.psd[0];
    let mut lines = vec![format!(
        "data        {}: {} run(s) of {} samples at {} Hz",
        a.file.display(),
        rec.runs.len(),
        p0.samples,
        fmt_num(rec.sample_rate)
    )];
    if let Some(t) = &rec.time {
        lines.push(format!(
            "time        column '{}' (recognised {}) holds the times, not a run: step {} s, \
             {} Hz{}",
            t.name,
            t.by,
            sig(t.step, 4),
            fmt_num(1.0 / t.step),
            if a.sample_rate.is_some() {
                ", agreeing with --sample-rate"
            } else {
                ", used as the sample rate"
            }
        ));
    }
    if rec.gain != 1.0 {
        lines.push(format!(
            "gain        {}: the PSD is divided by {} (referred to the sample)",
            fmt_num(rec.gain),
            sig(rec.gain * rec.gain, 4)
        ));
    }
    lines.push(format!(
        "welch       Hann window, {} samples per segment, overlap {}, {} segments per run, {} degrees of freedom per frequency",
        welch.segment,
        welch.overlap,
        p0.segments,
        sig(p0.dof[1.min(p0.dof.len() - 1)], 4)
    ));
    lines
}

/// Without a dissipation: writes the PSD if asked and says that T_eff is not computed.
fn psd_only(a: &NoiseArgs, header: &[String], outputs: &[Output]) -> fdtemp::Result<()> {
    output::write_all(outputs, a.common.overwrite)?;
    for h in header {
        println!("{h}");
    }
    println!(
        "no dissipation given: the PSD is computed, T_eff is not (give --resistance R or --loss-file FILE)"
    );
    if let Some(p) = &a.psd_out {
        println!("psd         written to {}", p.display());
    }
    Ok(())
}

/// T_eff(f) of the records against the dissipation; frequencies outside its table are
/// left out with a warning.
fn noise_analysis(
    a: &NoiseArgs,
    rec: &RecordPsd,
    diss: &Dissipation,
    settings: &SpectrumSettings,
) -> fdtemp::Result<SpectrumReport> {
    fdtemp::api::noise_spectrum(rec, diss, settings, &a.file, a.loss_file.as_deref())
}

/// The JSON and the figure of a spectral analysis, as asked for.
fn spectral_outputs(
    outputs: &mut Vec<Output>,
    report: &SpectrumReport,
    json: &Option<PathBuf>,
    figure: Option<(PathBuf, Figure)>,
) -> fdtemp::Result<()> {
    if let Some(p) = json {
        outputs.push(Output {
            path: p.clone(),
            bytes: fdtemp::report::json::spectrum_json(report),
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
