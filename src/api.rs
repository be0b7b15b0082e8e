//! The steps of each command between its options and its result, in one place for every
//! front end: the command line and the Python package call these, so that a result and its
//! JSON come from one code path whatever the data were handed over as.
//!
//! - [`choice`]: an option's value by its command-line name (`--model smooth`).
//! - [`CampaignSource`], [`read_campaign`], [`fit_campaign`]: `fit`.
//! - [`SpectrumSource`], [`read_spectrum`]: `spectrum`.
//! - [`NoiseSource`], [`noise_psd`], [`noise_convention`], [`noise_spectrum`]: `noise`;
//!   [`noise_cross_psd`], [`noise_cross_spectrum`] (two channels),
//!   [`noise_subtracted_spectrum`] (a measured amplifier noise subtracted).

use crate::common::Progress;
use crate::error::{Error, Result};
use crate::fit::smooth::Constraint;
use crate::input::npy::{CampaignArrays, campaign_from_arrays};
use crate::input::{CampaignRead, Delimiter, ReadCampaign};
use crate::spectral::cross::PairPsd;
use crate::spectral::findings::{SpectralCaution, SpectralFinding};
use crate::spectral::input::{SpectrumGroup, Window};
use crate::spectral::leakage;
use crate::spectral::noise::{self, Dissipation, RecordPsd};
use crate::spectral::subtract::AmplifierNoise;
use crate::spectral::welch::WelchSettings;
use crate::spectral::{Convention, Estimator, SpectrumReport, SpectrumSettings};
use crate::twotime::design::{DesignSettings, calibrated_fit};
use crate::twotime::overlap::Overlap;
use crate::twotime::settings::{FitSettings, Model};
use crate::twotime::{FitReport, analyze};
use clap::ValueEnum;
use std::path::{Path, PathBuf};

/// The value of `--option` named `value` (as the command line spells it, any case).
///
/// # Errors
/// [`Error::Setting`] naming the option and the values it takes.
pub fn choice<T: ValueEnum>(option: &str, value: &str) -> Result<T> {
    T::from_str(value, true).map_err(|_| {
        let names: Vec<String> = T::value_variants()
            .iter()
            .filter_map(|v| v.to_possible_value().map(|p| p.get_name().to_string()))
            .collect();
        Error::Setting(format!(
            "--{option} is '{value}', expected one of {}",
            names.join(", ")
        ))
    })
}

/// The shape rule of the smooth X(C): the one given, else monotone with `--model smooth`.
pub fn smooth_rule(model: Model, given: Option<Constraint>) -> Option<Constraint> {
    match (model, given) {
        (Model::Smooth, None) => Some(Constraint::Monotone),
        (_, given) => given,
    }
}

/// Where a campaign comes from.
#[derive(Debug, Clone)]
pub enum CampaignSource {
    /// A file: a tidy text table, or a `.npz` archive by its name.
    File(PathBuf),
    /// The text of a tidy table held in memory; `label` names it in errors.
    Table {
        /// What errors call it (`<DataFrame>`).
        label: PathBuf,
        /// The table's bytes.
        text: Vec<u8>,
    },
    /// Arrays held in memory, as a `.npz` archive holds them; `label` names them in errors.
    Arrays {
        /// What errors call them (`<arrays>`).
        label: PathBuf,
        /// The arrays.
        arrays: Box<CampaignArrays>,
    },
}

impl CampaignSource {
    /// The name errors and the report give the data.
    pub fn label(&self) -> &Path {
        match self {
            CampaignSource::File(p) => p,
            CampaignSource::Table { label, .. } | CampaignSource::Arrays { label, .. } => label,
        }
    }
}

/// The campaign, read as `how` says (column names, delimiter, `--drop-incomplete`).
///
/// # Errors
/// As [`crate::input::read_campaign_with`] and [`campaign_from_arrays`].
pub fn read_campaign(source: CampaignSource, how: &CampaignRead) -> Result<ReadCampaign> {
    match source {
        CampaignSource::File(p) => crate::input::read_campaign_with(&p, how),
        CampaignSource::Table { label, text } => {
            crate::input::tidy::parse_campaign_with(text.as_slice(), &label, how)
        }
        CampaignSource::Arrays { label, arrays } => campaign_from_arrays(&label, how, *arrays),
    }
}

/// `fit`: the analysis of a campaign as read (calibrated on simulated campaigns of its
/// design when `design` is given, X(C) compared with the static x(q) of `overlap`), with
/// the samples left out listed. `label` names the data in the report and in errors.
///
/// # Errors
/// The settings' and the analysis' errors, the latter naming `label`.
pub fn fit_campaign(
    read: ReadCampaign,
    settings: &FitSettings,
    design: Option<&DesignSettings>,
    overlap: Option<&Overlap>,
    label: &Path,
    progress: &dyn Progress,
) -> Result<FitReport> {
    fit_campaign_with(read, settings, design, overlap, None, label, progress)
}

/// [`fit_campaign`], and with `two_time` the two-time ratio X(t,tw) at fixed t
/// ([`crate::twotime::two_time`]), from the same seed, resamples and level. A campaign on
/// which it cannot be formed is refused before any fitting.
///
/// # Errors
/// As [`fit_campaign`], and as [`crate::twotime::two_time::check`].
pub fn fit_campaign_with(
    read: ReadCampaign,
    settings: &FitSettings,
    design: Option<&DesignSettings>,
    overlap: Option<&Overlap>,
    two_time: Option<&crate::twotime::TwoTimeSettings>,
    label: &Path,
    progress: &dyn Progress,
) -> Result<FitReport> {
    settings.validate()?;
    if let Some(d) = design {
        d.validate()?;
    }
    if let Some(tt) = two_time {
        crate::twotime::two_time::check(&read.campaign, tt, settings.resamples)
            .map_err(in_file(label))?;
    }
    if !read.more.is_empty() {
        let names: Vec<&str> = std::iter::once(&read)
            .chain(&read.more)
            .filter_map(|r| r.observable.as_deref())
            .collect();
        return Err(Error::Setting(format!(
            "{}: the file holds {} observables ({}); fit them together (fdtemp fit, which tests \
             whether they share one X) or choose one with --observable NAME",
            label.display(),
            names.len(),
            names.join(", ")
        )));
    }
    let ReadCampaign {
        campaign,
        excluded,
        observable,
        ..
    } = read;
    let input = Some(label.display().to_string());
    let mut report = match design {
        None => analyze(&campaign, settings, input, progress),
        Some(d) => calibrated_fit(&campaign, settings, d, input, progress),
    }
    .map_err(in_file(label))?;
    if let Some(ov) = overlap {
        for f in &mut report.fits {
            if let Some(shape) = f.shape.as_mut() {
                shape.static_comparison =
                    Some(crate::twotime::overlap::compare(shape, ov, settings.level));
            }
        }
    }
    report.excluded_samples = excluded;
    report.observable = observable;
    if let Some(tt) = two_time {
        let kt = settings.units.boltzmann() * settings.temperature;
        let r = crate::twotime::two_time::two_time_ratio(
            &campaign,
            tt,
            kt,
            settings.resamples,
            settings.seed,
            settings.level,
        )
        .map_err(in_file(label))?;
        report.settings.two_time = Some(crate::twotime::TwoTimeRecord {
            window: r.window,
            read_level: r.read_level,
            times_left_out: r.times_left_out,
        });
        let unresolved = r.points.iter().filter(|p| !p.resolved).count();
        if unresolved > 0 {
            report.cautions.push(crate::twotime::Caution {
                subject: crate::twotime::Subject::Campaign,
                finding: crate::twotime::Finding::TwoTimeUnresolved {
                    points: unresolved,
                    of: r.points.len(),
                },
            });
        }
        report.two_time = Some(r.points);
    }
    Ok(report)
}

/// `fit` on a file of one or more observables: each observable as
/// [`fit_campaign_with`] fits it (same seed, so resample b draws the same samples in
/// all), then the joint test that they share one X
/// ([`crate::twotime::observables::shared_ratio`]).
///
/// # Errors
/// As [`fit_campaign_with`], each naming its observable.
pub fn fit_observables(
    read: ReadCampaign,
    settings: &FitSettings,
    design: Option<&DesignSettings>,
    overlap: Option<&Overlap>,
    two_time: Option<&crate::twotime::TwoTimeSettings>,
    label: &Path,
    progress: &dyn Progress,
) -> Result<crate::twotime::observables::ObservablesReport> {
    settings.validate()?;
    let mut first = read;
    let more = std::mem::take(&mut first.more);
    let mut reports = Vec::with_capacity(1 + more.len());
    for r in std::iter::once(first).chain(more) {
        let name = r.observable.clone().unwrap_or_default();
        let report = fit_campaign_with(r, settings, design, overlap, two_time, label, progress)
            .map_err(|e| e.about(&format!("observable '{name}'")))?;
        reports.push(report);
    }
    let kt = settings.units.boltzmann() * settings.temperature;
    let named: Vec<(String, &FitReport)> = reports
        .iter()
        .map(|r| (r.observable.clone().unwrap_or_default(), r))
        .collect();
    let shared_ratio = crate::twotime::observables::shared_ratio(&named, kt, settings.level);
    Ok(crate::twotime::observables::ObservablesReport {
        schema: crate::twotime::SCHEMA,
        tool: crate::common::ToolInfo::default(),
        input: Some(label.display().to_string()),
        observables: reports,
        shared_ratio,
    })
}

/// Errors of subtracting an amplifier noise name its file.
fn amplifier_error(file: &Path) -> impl Fn(Error) -> Error + '_ {
    move |e| match e {
        Error::Analysis(m) => Error::input(file, None, None, m),
        e => e,
    }
}

/// Errors of the analysis name the input.
pub fn in_file(file: &Path) -> impl Fn(Error) -> Error + '_ {
    move |e| match e {
        Error::Analysis(m) => Error::input(file, None, None, m),
        e => e,
    }
}

/// Where a PSD table comes from.
#[derive(Debug, Clone)]
pub enum SpectrumSource {
    /// A file.
    File(PathBuf),
    /// The text of a table held in memory; `label` names it in errors.
    Table {
        /// What errors call it.
        label: PathBuf,
        /// The table's bytes.
        text: Vec<u8>,
    },
}

impl SpectrumSource {
    /// The name errors and the report give the data.
    pub fn label(&self) -> &Path {
        match self {
            SpectrumSource::File(p) | SpectrumSource::Table { label: p, .. } => p,
        }
    }
}

/// `spectrum`: the PSD groups of the table and the window they were estimated with (the
/// one given, else the file's first-line directive, else none).
///
/// # Errors
/// As [`crate::spectral::input::read_spectra_in`].
pub fn read_spectrum(
    source: &SpectrumSource,
    delimiter: Delimiter,
    window: Option<Window>,
) -> Result<(Vec<SpectrumGroup>, Window)> {
    match source {
        SpectrumSource::File(p) => {
            let groups = crate::spectral::input::read_spectra_in(p, delimiter)?;
            let window = match window {
                Some(w) => w,
                None => crate::spectral::input::window_directive(p)?.unwrap_or(Window::None),
            };
            Ok((groups, window))
        }
        SpectrumSource::Table { label, text } => Ok((
            crate::spectral::input::parse_spectra_in(text.as_slice(), label, delimiter)?,
            window.unwrap_or(Window::None),
        )),
    }
}

/// `spectrum`: T_eff(f) of the groups read by [`read_spectrum`].
///
/// # Errors
/// The settings' and the analysis' errors, the latter naming `label`.
pub fn spectrum(
    groups: &[SpectrumGroup],
    window: Window,
    settings: &SpectrumSettings,
    label: &Path,
) -> Result<SpectrumReport> {
    settings.validate()?;
    let mut report = crate::spectral::analyze_spectra(
        groups,
        &window.bin_rho2(),
        settings,
        Some(label.display().to_string()),
    )
    .map_err(in_file(label))?;
    if window == Window::Hann {
        for g in groups {
            if let Some(finding) = leakage::table_leakage(g) {
                report.cautions.push(SpectralCaution { tw: g.tw, finding });
            }
        }
    }
    Ok(report)
}

/// Where noise records come from.
#[derive(Debug, Clone)]
pub enum NoiseSource {
    /// A file: one column per run, or a `.npy` array by its name.
    File(PathBuf, Delimiter),
    /// An array held in memory (one run, or runs × samples); `label` names it in errors.
    Array {
        /// What errors call it.
        label: PathBuf,
        /// The samples.
        array: ndarray::ArrayD<f64>,
    },
}

impl NoiseSource {
    /// The name errors and the report give the data.
    pub fn label(&self) -> &Path {
        match self {
            NoiseSource::File(p, _) | NoiseSource::Array { label: p, .. } => p,
        }
    }
}

/// `noise`: the Welch PSD of every run (rate given or from the time column), divided by
/// `gain²` when a gain is given.
///
/// # Errors
/// As [`noise::welch_records_in`] and [`noise::welch_array`]; [`Error::Setting`] for a
/// gain that is not a positive number.
pub fn noise_psd(
    source: NoiseSource,
    welch: WelchSettings,
    sample_rate: Option<f64>,
    gain: Option<f64>,
) -> Result<RecordPsd> {
    positive("--gain", gain, "a positive voltage gain (output/input)")?;
    let mut rec = match source {
        NoiseSource::File(p, d) => noise::welch_records_in(&p, d, welch, sample_rate)?,
        NoiseSource::Array { label, array } => {
            noise::welch_array(&label, array, welch, sample_rate)?
        }
    };
    if let Some(g) = gain {
        rec.divide_gain(g);
    }
    Ok(rec)
}

/// `name` is a positive finite number when given.
///
/// # Errors
/// [`Error::Setting`] otherwise, saying `what` was expected.
pub fn positive(name: &str, v: Option<f64>, what: &str) -> Result<()> {
    if let Some(v) = v
        && !(v > 0.0 && v.is_finite())
    {
        return Err(Error::Setting(format!("{name} is {v}, expected {what}")));
    }
    Ok(())
}

/// `noise`: the convention of the dissipation — the one given, else voltage for a
/// resistance, else what the loss file's column name `column` says (with a note for the
/// report's header when that name was read or overruled). `loss_file` names the file in
/// the error for a column name that says nothing.
///
/// # Errors
/// [`Error::Input`] when no convention is given and the column name does not say one.
pub fn noise_convention(
    given: Option<Convention>,
    resistance: bool,
    column: Option<&str>,
    loss_file: &Path,
) -> Result<(Convention, Option<String>)> {
    let named = column.and_then(noise::convention_named);
    Ok(match (given, named, column) {
        (Some(c), Some(n), Some(col)) if c != n => (
            c,
            Some(format!(
                "loss file   column '{col}' reads as {}, but --convention {} was given: \
                 the given one is used",
                convention_label(n),
                convention_label(c)
            )),
        ),
        (Some(c), _, _) => (c, None),
        (None, _, None) if resistance => (Convention::Voltage, None),
        (None, Some(n), Some(col)) => (
            n,
            Some(format!(
                "loss file   column '{col}' read as {}",
                convention_label(n)
            )),
        ),
        (None, None, Some(col)) => {
            return Err(Error::input(
                loss_file,
                Some(1),
                Some(2),
                format!(
                    "column '{col}' does not say which dissipation it is; expected a name \
                     such as loss, Re Z or Re Y, or give --convention loss|angular|voltage|current"
                ),
            ));
        }
        (None, _, None) => (Convention::Loss, None),
    })
}

/// A convention in words, with its option value.
fn convention_label(c: Convention) -> &'static str {
    match c {
        Convention::Loss => "the loss (convention loss)",
        Convention::Angular => "the loss (convention angular)",
        Convention::Voltage => "Re Z (convention voltage)",
        Convention::Current => "Re Y (convention current)",
    }
}

/// `noise`: T_eff(f) of the records against the dissipation; frequencies outside its table
/// are left out with a caution (naming the table's range), and steep lowest bins get the
/// `window_leakage` caution. `label` names the records, `loss_file` the table.
///
/// # Errors
/// The settings' and the analysis' errors, the latter naming `label`; [`Error::Input`]
/// naming `loss_file` (and both frequency ranges) when the table and the PSD share no
/// frequency.
pub fn noise_spectrum(
    rec: &RecordPsd,
    diss: &Dissipation,
    settings: &SpectrumSettings,
    label: &Path,
    loss_file: Option<&Path>,
) -> Result<SpectrumReport> {
    settings.validate()?;
    let (group, dropped) = noise::to_group(rec, diss)
        .map_err(|e| no_common_frequency(e, rec, diss, label, loss_file))?;
    let settings = SpectrumSettings {
        estimator: Estimator::SingleChannel,
        ..settings.clone()
    };
    let mut report = crate::spectral::analyze_spectra(
        std::slice::from_ref(&group),
        &rec.bin_rho2,
        &settings,
        Some(label.display().to_string()),
    )
    .map_err(in_file(label))?;
    outside_table(&mut report, diss, dropped);
    leakage_caution(&mut report, rec, &group);
    Ok(report)
}

/// The estimator, and every window's spectrum group with its variances (two channels or
/// a subtraction).
type WindowEstimates = (Estimator, Vec<SpectrumGroup>, Vec<Option<Vec<f64>>>);

/// Which estimate of the noise `noise --ages` forms in every window.
#[derive(Debug, Clone)]
pub enum AgeChannel {
    /// One channel's PSD.
    Single,
    /// The cross-spectrum with a second record of the same layout (`--cross-with`), its
    /// gain in `settings.second_gain` (default: the first's).
    Cross {
        /// The second record.
        second: PathBuf,
    },
    /// One channel's PSD minus a measured amplifier noise (`--amplifier-noise`).
    Subtracted {
        /// The amplifier's PSD.
        amp: crate::spectral::subtract::AmplifierNoise,
        /// Its file, named in errors and the report.
        file: PathBuf,
    },
}

/// A record file held in memory: run names, each run's samples, and the sample rate
/// (given, or from the time column).
///
/// # Errors
/// Reader errors; [`Error::Input`] for an empty record or an unknown or disagreeing rate.
pub fn records_in_memory(
    path: &Path,
    delimiter: Delimiter,
    sample_rate: Option<f64>,
) -> Result<(Vec<String>, Vec<Vec<f64>>, f64)> {
    let mut runs: Vec<Vec<f64>> = Vec::new();
    let records = crate::spectral::input::stream_records_in(path, delimiter, |r, v| {
        while runs.len() <= r {
            runs.push(Vec::new());
        }
        runs[r].push(v);
    })?;
    if runs.iter().all(Vec::is_empty) {
        return Err(Error::input(
            path,
            None,
            None,
            "the record is empty; expected one number per line (or one column per run)",
        ));
    }
    let fs = noise::rate_of(path, sample_rate, records.time.as_ref())?;
    Ok((records.runs, runs, fs))
}

/// `noise --intermittency`: the records tested against Gaussian noise of their own
/// spectrum ([`crate::spectral::intermittency`]), with the Welch segments of the PSD.
///
/// # Errors
/// As [`records_in_memory`] and [`crate::spectral::intermittency::intermittency`], naming
/// the file.
pub fn noise_intermittency(
    path: &Path,
    delimiter: Delimiter,
    welch: WelchSettings,
    sample_rate: Option<f64>,
    level: f64,
    seed: u64,
) -> Result<crate::spectral::intermittency::IntermittencyReport> {
    use crate::spectral::intermittency::{IntermittencySettings, intermittency};
    let (_, runs, fs) = records_in_memory(path, delimiter, sample_rate)?;
    let welch = WelchSettings {
        sample_rate: fs,
        ..welch
    };
    let settings = IntermittencySettings {
        level,
        seed,
        ..IntermittencySettings::default()
    };
    intermittency(&runs, &welch, &settings).map_err(in_file(path))
}

/// `noise --ages`: records that start at a quench (or carry it at `ages.quench_at` on their
/// clock), cut into windows at the ages, a Welch PSD per (run, window) referred to the
/// sample by `gain`, and T_eff(f, tw) against each age's dissipation, with every age's
/// cautions (window, leakage, frequencies outside its table). The records are held in
/// memory (8 bytes a sample).
///
/// # Errors
/// Reader errors; as [`crate::spectral::aging::age_windows`] and
/// [`crate::spectral::analyze_spectra`], naming the file.
#[allow(clippy::too_many_arguments)]
pub fn noise_aging(
    path: &Path,
    delimiter: Delimiter,
    welch: WelchSettings,
    sample_rate: Option<f64>,
    gain: Option<f64>,
    ages: &crate::spectral::aging::AgeSettings,
    loss: &crate::spectral::aging::AgeLoss,
    settings: &SpectrumSettings,
    intermittency: bool,
    channel: &AgeChannel,
) -> Result<(SpectrumReport, Vec<crate::spectral::aging::AgePsd>)> {
    use crate::spectral::aging::{age_groups, age_windows};
    use crate::spectral::analysis::AgeIntermittency;
    positive("--gain", gain, "a positive voltage gain (output/input)")?;
    settings.validate()?;
    ages.validate()?;
    let (names, runs, fs) = records_in_memory(path, delimiter, sample_rate)?;
    let (mut windows, cautions) =
        age_windows(&names, &runs, fs, ages, welch).map_err(in_file(path))?;
    // The Gaussian-noise test on each age's windows; where it rejects and the errors are
    // `auto`, every age's intervals resample runs.
    let mut by_age = Vec::new();
    if intermittency {
        use crate::spectral::intermittency::{IntermittencySettings, intermittency};
        let test_settings = IntermittencySettings {
            level: settings.level,
            seed: settings.seed,
            ..IntermittencySettings::default()
        };
        let w = WelchSettings {
            sample_rate: fs,
            ..welch
        };
        for &tw in &ages.ages {
            let (first, last) = ages.samples(tw, fs);
            let slices: Vec<Vec<f64>> = runs.iter().map(|r| r[first..last].to_vec()).collect();
            let test = intermittency(&slices, &w, &test_settings)
                .map_err(|e| e.about(&format!("tw = {tw}")))
                .map_err(in_file(path))?;
            by_age.push(AgeIntermittency { tw, test });
        }
    }
    let switch = settings.errors == crate::spectral::analysis::ErrorModel::Auto
        && names.len() >= 2
        && by_age.iter().any(|a| a.test.needs_run_resampling);
    let settings = &SpectrumSettings {
        errors: if switch {
            crate::spectral::analysis::ErrorModel::Runs
        } else {
            settings.errors
        },
        ..settings.clone()
    };
    if let Some(g) = gain {
        for w in &mut windows {
            w.psd.divide_gain(g);
        }
    }
    let groups = age_groups(&windows, |tw| loss.at(tw)).map_err(in_file(path))?;
    // The two-channel and subtracted estimates of every window, with their variances.
    let mut extra = Vec::new();
    let estimates: Option<WindowEstimates> = match channel {
        AgeChannel::Single => None,
        AgeChannel::Subtracted { amp, file } => {
            let (mut gs, mut vs) = (Vec::new(), Vec::new());
            for w in &windows {
                let mut sub = crate::spectral::subtract::subtract(&w.psd, amp, &loss.at(w.tw)?)
                    .map_err(amplifier_error(file))?;
                sub.group.tw = Some(w.tw);
                if let Some(finding) =
                    crate::spectral::subtract::large_subtraction(&sub, settings.bands_per_decade)
                {
                    extra.push(SpectralCaution {
                        tw: Some(w.tw),
                        finding,
                    });
                }
                gs.push(sub.group);
                vs.push(Some(sub.var));
            }
            Some((Estimator::Subtracted, gs, vs))
        }
        AgeChannel::Cross { second } => {
            let (names_b, runs_b, fs_b) = records_in_memory(second, delimiter, sample_rate)?;
            if names_b.len() != names.len()
                || runs_b.iter().zip(&runs).any(|(b, a)| b.len() != a.len())
                || (fs_b - fs).abs() > noise::RATE_TOLERANCE * fs
            {
                return Err(Error::input(
                    second,
                    None,
                    None,
                    format!(
                        "{} run(s) at {fs_b} Hz; expected the layout of {}: {} run(s) of the \
                         same lengths at {fs} Hz",
                        names_b.len(),
                        path.display(),
                        names.len()
                    ),
                ));
            }
            let w = WelchSettings {
                sample_rate: fs,
                ..welch
            };
            let ga = gain.unwrap_or(1.0);
            let (mut gs, mut vs) = (Vec::new(), Vec::new());
            for win in &windows {
                let (first, last) = ages.samples(win.tw, fs);
                let cross = runs
                    .iter()
                    .zip(&runs_b)
                    .map(|(a, b)| {
                        crate::spectral::cross::cross_welch(&a[first..last], &b[first..last], w)
                    })
                    .collect::<Result<Vec<_>>>()?;
                let mut pair = crate::spectral::cross::PairPsd::from_runs(
                    cross,
                    names.clone(),
                    names_b.clone(),
                    fs,
                    welch.segment,
                );
                pair.divide_gains(ga, settings.second_gain.unwrap_or(ga));
                let (mut g, var, _) =
                    crate::spectral::cross::to_cross_group(&pair, &loss.at(win.tw)?)
                        .map_err(in_file(path))?;
                g.tw = Some(win.tw);
                gs.push(g);
                vs.push(Some(var));
            }
            Some((Estimator::CrossSpectrum, gs, vs))
        }
    };
    let input = Some(path.display().to_string());
    let rho2 = &windows[0].psd.bin_rho2;
    let mut report = match estimates {
        None => {
            let only: Vec<SpectrumGroup> = groups.iter().map(|(g, _)| g.clone()).collect();
            crate::spectral::analyze_spectra(&only, rho2, settings, input)
        }
        Some((estimator, gs, vs)) => {
            let settings = SpectrumSettings {
                estimator,
                ..settings.clone()
            };
            crate::spectral::analyze_estimates(&gs, &vs, rho2, &settings, input)
        }
    }
    .map_err(in_file(path))?;
    match channel {
        AgeChannel::Subtracted { file, .. } => {
            report.amplifier_noise = Some(file.display().to_string());
        }
        AgeChannel::Cross { second } => report.second_input = Some(second.display().to_string()),
        AgeChannel::Single => {}
    }
    // Every age's cautions go with its spectrum (the report names its tw).
    let mut per_age = cautions;
    per_age.extend(extra);
    for ((g, dropped), w) in groups.iter().zip(&windows) {
        let before = report.cautions.len();
        outside_table(&mut report, &loss.at(w.tw)?, *dropped);
        leakage_caution(&mut report, &w.psd, g);
        per_age.extend(report.cautions.drain(before..).map(|mut c| {
            c.tw = Some(w.tw);
            c
        }));
    }
    for c in per_age {
        match report.spectra.iter_mut().find(|s| s.tw == c.tw) {
            Some(s) => s.cautions.push(c),
            None => report.cautions.push(c),
        }
    }
    report.intermittency_by_age = by_age;
    Ok((report, windows))
}

/// The range of a dissipation table (`None` for a constant).
fn table_range(diss: &Dissipation) -> Option<[f64; 2]> {
    match diss {
        Dissipation::Table(t) => match (t.first(), t.last()) {
            (Some(a), Some(b)) => Some([a.0, b.0]),
            _ => None,
        },
        Dissipation::Constant(_) => None,
    }
}

/// The error of a PSD and a dissipation table without a frequency in common, naming the
/// loss file and both ranges; other errors name the records.
fn no_common_frequency(
    e: Error,
    rec: &RecordPsd,
    diss: &Dissipation,
    label: &Path,
    loss_file: Option<&Path>,
) -> Error {
    let (Error::Analysis(_), Some([lo, hi])) = (&e, table_range(diss)) else {
        return in_file(label)(e);
    };
    let f = &rec.psd[0].freqs;
    let first = f.get(noise::FIRST_BIN).copied().unwrap_or(0.0);
    let last = f.last().copied().unwrap_or(0.0);
    let sig = crate::report::format::fmt_num;
    Error::input(
        loss_file.unwrap_or(label),
        None,
        None,
        format!(
            "the dissipation table covers {}–{} Hz and the PSD of {} {}–{} Hz: no \
             frequency in common; expected a table that covers the record's frequencies",
            sig(lo),
            sig(hi),
            label.display(),
            sig(first),
            sig(last)
        ),
    )
}

/// The `outside_table` caution when `dropped` frequencies lay outside the table.
fn outside_table(report: &mut SpectrumReport, diss: &Dissipation, dropped: usize) {
    if dropped > 0
        && let Some(range) = table_range(diss)
    {
        report.cautions.push(SpectralCaution {
            tw: None,
            finding: SpectralFinding::OutsideTable {
                frequencies: dropped,
                range,
            },
        });
    }
}

/// The `window_leakage` caution of the records' PSD (`group` at their frequencies).
fn leakage_caution(report: &mut SpectrumReport, rec: &RecordPsd, group: &SpectrumGroup) {
    let f = &rec.psd[0].freqs;
    if f.len() > 1 && f[1] > 0.0 {
        let segment = (rec.sample_rate / f[1]).round() as usize;
        let samples = rec.psd.iter().map(|p| p.samples).min().unwrap_or(0).max(1);
        // Half the record's lowest Fourier frequency: its first line stands for the band
        // from there (the f^-3 bias grows with the log of it; measured in tests/leakage.rs).
        let lowest = segment as f64 / (2.0 * samples as f64);
        if let Some(finding) = leakage::group_leakage(group, f[1], segment, lowest) {
            report.cautions.push(SpectralCaution { tw: None, finding });
        }
    }
}

/// `noise` with two channels: each record's Welch PSD and their cross-spectrum, streamed
/// in step, referred to the sample by the gains (`gain_b` defaults to `gain_a`).
///
/// # Errors
/// As [`crate::spectral::cross::cross_records_in`]; [`Error::Setting`] for a gain that is
/// not a positive number.
pub fn noise_cross_psd(
    a: &Path,
    b: &Path,
    delimiter: Delimiter,
    welch: WelchSettings,
    sample_rate: Option<f64>,
    gain_a: Option<f64>,
    gain_b: Option<f64>,
) -> Result<PairPsd> {
    positive("--gain", gain_a, "a positive voltage gain (output/input)")?;
    positive(
        "--cross-gain",
        gain_b,
        "a positive voltage gain (output/input)",
    )?;
    let mut pair = crate::spectral::cross::cross_records_in(a, b, delimiter, welch, sample_rate)?;
    let ga = gain_a.unwrap_or(1.0);
    pair.divide_gains(ga, gain_b.unwrap_or(ga));
    Ok(pair)
}

/// `noise` with two channels: T_eff(f) from the real part of the cross-spectrum, with
/// normal intervals from its variance (or run resampling), cautions as for one channel
/// (`window_leakage` from the first channel's PSD). `label` names the first record,
/// `second` the second.
///
/// # Errors
/// As [`noise_spectrum`].
pub fn noise_cross_spectrum(
    pair: &PairPsd,
    diss: &Dissipation,
    settings: &SpectrumSettings,
    label: &Path,
    second: &Path,
    loss_file: Option<&Path>,
) -> Result<SpectrumReport> {
    let settings = SpectrumSettings {
        estimator: Estimator::CrossSpectrum,
        ..settings.clone()
    };
    settings.validate()?;
    let (group, var, dropped) = crate::spectral::cross::to_cross_group(pair, diss)
        .map_err(|e| no_common_frequency(e, &pair.a, diss, label, loss_file))?;
    let mut report = crate::spectral::analyze_estimates(
        std::slice::from_ref(&group),
        &[Some(var)],
        &pair.a.bin_rho2,
        &settings,
        Some(label.display().to_string()),
    )
    .map_err(in_file(label))?;
    report.second_input = Some(second.display().to_string());
    outside_table(&mut report, diss, dropped);
    let (auto, _) = noise::to_group(&pair.a, diss).map_err(in_file(label))?;
    leakage_caution(&mut report, &pair.a, &auto);
    Ok(report)
}

/// `noise --amplifier-noise`: T_eff(f) of one channel's PSD minus a measured
/// amplifier-noise PSD (`amp`, read from `amp_file`), with normal intervals from the sum
/// of both variances (or run resampling), the `large_subtraction` caution and, for
/// frequencies outside the amplifier table, `outside_amplifier_table`.
///
/// # Errors
/// As [`noise_spectrum`]; [`Error::Input`] naming `amp_file` when it shares no frequency
/// with the PSD.
pub fn noise_subtracted_spectrum(
    rec: &RecordPsd,
    amp: &AmplifierNoise,
    amp_file: &Path,
    diss: &Dissipation,
    settings: &SpectrumSettings,
    label: &Path,
    loss_file: Option<&Path>,
) -> Result<SpectrumReport> {
    let settings = SpectrumSettings {
        estimator: Estimator::Subtracted,
        ..settings.clone()
    };
    settings.validate()?;
    noise::to_group(rec, diss).map_err(|e| no_common_frequency(e, rec, diss, label, loss_file))?;
    let sub =
        crate::spectral::subtract::subtract(rec, amp, diss).map_err(amplifier_error(amp_file))?;
    let mut report = crate::spectral::analyze_estimates(
        std::slice::from_ref(&sub.group),
        &[Some(sub.var.clone())],
        &rec.bin_rho2,
        &settings,
        Some(label.display().to_string()),
    )
    .map_err(in_file(label))?;
    report.amplifier_noise = Some(amp_file.display().to_string());
    outside_table(&mut report, diss, sub.outside_dissipation);
    if sub.outside_amplifier > 0 {
        report.cautions.push(SpectralCaution {
            tw: None,
            finding: SpectralFinding::OutsideAmplifierTable {
                frequencies: sub.outside_amplifier,
                range: amp.range,
            },
        });
    }
    if let Some(finding) =
        crate::spectral::subtract::large_subtraction(&sub, settings.bands_per_decade)
    {
        report.cautions.push(SpectralCaution { tw: None, finding });
    }
    let (auto, _) = noise::to_group(rec, diss).map_err(in_file(label))?;
    leakage_caution(&mut report, rec, &auto);
    Ok(report)
}
