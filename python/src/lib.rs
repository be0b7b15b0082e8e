//! `fdtemp._native`: the Python entry points of the fdtemp library, a thin layer.
//!
//! Every function turns its arguments into the library's settings, calls the same
//! `fdtemp::api` steps as the command line (with the GIL released), and returns the
//! result's JSON exactly as `--json` writes it. Errors are raised as `NativeError` with
//! the arguments (kind, text, file, line, column, message); `fdtemp/_errors.py` turns them
//! into the package's exception classes.

use fdtemp::api::{self, CampaignSource, NoiseSource, SpectrumSource, choice};
use fdtemp::common::{Progress, Silent};
use fdtemp::input::npy::CampaignArrays;
use fdtemp::input::{CampaignRead, ColumnNames, Delimiter};
use fdtemp::reduce::quench_fit::QuenchFitSettings;
use fdtemp::reduce::{RawSource, ReduceSettings};
use fdtemp::report::reduce as reduce_report;
use fdtemp::spectral::noise::Dissipation;
use fdtemp::spectral::welch::WelchSettings;
use fdtemp::spectral::{Convention, SpectrumSettings};
use fdtemp::twotime::design::DesignSettings;
use fdtemp::twotime::settings::FitSettings;
use numpy::{PyReadonlyArrayDyn, PyUntypedArrayMethods};
use pyo3::create_exception;
use pyo3::exceptions::PyException;
use pyo3::prelude::*;
use std::collections::HashMap;
use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::{AtomicU64, Ordering};

create_exception!(_native, NativeError, PyException);

/// The library's error as a `NativeError(kind, text, file, line, column, message)`.
fn to_py(e: fdtemp::Error) -> PyErr {
    let text = e.to_string();
    match e {
        fdtemp::Error::Input { at, message } => NativeError::new_err((
            "input",
            text,
            Some(at.file.display().to_string()),
            at.line,
            at.column,
            message,
        )),
        fdtemp::Error::Io { path, .. } => NativeError::new_err((
            "io",
            text.clone(),
            Some(path.display().to_string()),
            None::<u64>,
            None::<u64>,
            text,
        )),
        fdtemp::Error::Setting(m) => {
            NativeError::new_err(("setting", text, None::<String>, None::<u64>, None::<u64>, m))
        }
        fdtemp::Error::Analysis(m) => NativeError::new_err((
            "analysis",
            text,
            None::<String>,
            None::<u64>,
            None::<u64>,
            m,
        )),
    }
}

/// A setting error for an argument of the wrong kind.
fn setting(message: String) -> PyErr {
    to_py(fdtemp::Error::Setting(message))
}

/// Progress on standard error, one line rewritten in place; silent unless asked for.
struct Lines {
    label: &'static str,
    total: AtomicU64,
    done: AtomicU64,
}

impl Progress for Lines {
    fn start(&self, total: u64) {
        self.total.store(total, Ordering::Relaxed);
        self.done.store(0, Ordering::Relaxed);
    }
    fn advance(&self, n: u64) {
        let done = self.done.fetch_add(n, Ordering::Relaxed) + n;
        let total = self.total.load(Ordering::Relaxed).max(1);
        let step = (total / 50).max(1);
        if done % step < n || done == total {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\r{} {done}/{total}", self.label);
            let _ = err.flush();
        }
    }
    fn note(&self, text: &str) {
        eprintln!("{text}");
    }
    fn finish(&self) {
        eprintln!();
    }
}

fn progress(on: bool, label: &'static str) -> Box<dyn Progress> {
    if on {
        Box::new(Lines {
            label,
            total: AtomicU64::new(0),
            done: AtomicU64::new(0),
        })
    } else {
        Box::new(Silent)
    }
}

/// The arrays of a campaign from a dict of NumPy arrays (float64), copied out of Python.
fn campaign_arrays(
    arrays: &HashMap<String, PyReadonlyArrayDyn<'_, f64>>,
) -> PyResult<CampaignArrays> {
    let get = |name: &str| arrays.get(name).map(|a| a.as_array().to_owned());
    let need = |name: &str| {
        get(name).ok_or_else(|| {
            setting(format!(
                "array '{name}' is missing; expected corr, resp, tw and t"
            ))
        })
    };
    Ok(CampaignArrays {
        corr: need("corr")?,
        resp: need("resp")?,
        tw: need("tw")?,
        t: need("t")?,
        corr_eq: get("corr_eq"),
        sample: get("sample"),
    })
}

/// `fdtemp fit` on a file (`path`), a tidy table's text (`text`) or arrays; returns the JSON.
#[pyfunction]
#[pyo3(signature = (
    label, path, text, arrays, temperature, units, axes, model, smooth_shape, weights,
    resamples, seed, level, interval, min_branch, hold, range, columns, delimiter,
    drop_incomplete, calibrate, sim_noise, overlap, threads, show_progress, limit,
    settled_within, two_time, observable
))]
#[allow(clippy::too_many_arguments)]
fn fit(
    py: Python<'_>,
    label: String,
    path: Option<PathBuf>,
    text: Option<Vec<u8>>,
    arrays: Option<HashMap<String, PyReadonlyArrayDyn<'_, f64>>>,
    temperature: f64,
    units: &str,
    axes: &str,
    model: &str,
    smooth_shape: Option<&str>,
    weights: &str,
    resamples: usize,
    seed: u64,
    level: f64,
    interval: &str,
    min_branch: usize,
    hold: &str,
    range: Option<(f64, f64)>,
    columns: Vec<String>,
    delimiter: &str,
    drop_incomplete: bool,
    calibrate: Option<usize>,
    sim_noise: &str,
    overlap: Option<PathBuf>,
    threads: Option<usize>,
    show_progress: bool,
    limit: bool,
    settled_within: f64,
    two_time: Option<usize>,
    observable: Option<String>,
) -> PyResult<String> {
    let model = choice("model", model).map_err(to_py)?;
    let smooth_shape = smooth_shape
        .map(|s| choice("smooth-shape", s))
        .transpose()
        .map_err(to_py)?;
    let settings = FitSettings {
        temperature,
        units: choice("units", units).map_err(to_py)?,
        axes: choice("axes", axes).map_err(to_py)?,
        model,
        weights: choice("weights", weights).map_err(to_py)?,
        resamples,
        seed,
        level,
        interval: choice("interval", interval).map_err(to_py)?,
        min_branch,
        hold: choice("hold", hold).map_err(to_py)?,
        range: range.map(|(a, b)| [a, b]),
        smooth: api::smooth_rule(model, smooth_shape),
        limit,
        settled_within,
    };
    settings.validate().map_err(to_py)?;
    let design = calibrate
        .map(|m| -> fdtemp::Result<DesignSettings> {
            Ok(DesignSettings {
                campaigns: m,
                noise: choice("sim-noise", sim_noise)?,
                seed,
            })
        })
        .transpose()
        .map_err(to_py)?;
    let mut names = ColumnNames::default();
    for m in &columns {
        names.apply(m).map_err(to_py)?;
    }
    let how = CampaignRead {
        names,
        delimiter: choice::<Delimiter>("delimiter", delimiter).map_err(to_py)?,
        drop_incomplete,
        observable,
    };
    let label = PathBuf::from(label);
    let source = match (path, text, arrays) {
        (Some(p), _, _) => CampaignSource::File(p),
        (None, Some(text), _) => CampaignSource::Table { label, text },
        (None, None, Some(a)) => CampaignSource::Arrays {
            label,
            arrays: Box::new(campaign_arrays(&a)?),
        },
        (None, None, None) => return Err(setting("no data given".into())),
    };
    let bar = progress(
        show_progress,
        if design.is_some() {
            "simulating"
        } else {
            "resampling"
        },
    );
    let bar: &dyn Progress = bar.as_ref();
    py.detach(move || {
        fdtemp::with_threads(threads, || {
            let overlap = overlap
                .as_deref()
                .map(fdtemp::twotime::overlap::read_overlap)
                .transpose()?;
            let label = source.label().to_path_buf();
            let read = api::read_campaign(source, &how)?;
            let two_time = two_time.map(|window| fdtemp::twotime::TwoTimeSettings { window });
            if !read.more.is_empty() {
                let report = api::fit_observables(
                    read,
                    &settings,
                    design.as_ref(),
                    overlap.as_ref(),
                    two_time.as_ref(),
                    &label,
                    bar,
                )?;
                return Ok(fdtemp::report::observables::json(&report));
            }
            let report = api::fit_campaign_with(
                read,
                &settings,
                design.as_ref(),
                overlap.as_ref(),
                two_time.as_ref(),
                &label,
                bar,
            )?;
            Ok(fdtemp::report::json::fit_json(&report))
        })
    })
    .map_err(to_py)
    .map(|b| String::from_utf8_lossy(&b).into_owned())
}

/// The settings shared by `spectrum` and `noise`.
#[allow(clippy::too_many_arguments)]
fn spectral_settings(
    temperature: Option<f64>,
    convention: Convention,
    units: &str,
    errors: &str,
    dof: Option<f64>,
    band: Option<(f64, f64)>,
    bands_per_decade: usize,
    level: f64,
    resamples: usize,
    seed: u64,
    interval: &str,
) -> fdtemp::Result<SpectrumSettings> {
    let s = SpectrumSettings {
        temperature,
        units: choice("units", units)?,
        convention,
        level,
        errors: choice("errors", errors)?,
        resamples,
        seed,
        interval: choice("interval", interval)?,
        band: band.map(|(a, b)| [a, b]),
        dof,
        bands_per_decade,
        ..SpectrumSettings::default()
    };
    s.validate()?;
    Ok(s)
}

/// `fdtemp spectrum` on a file or a table's text; returns the JSON.
#[pyfunction]
#[pyo3(signature = (
    label, path, text, temperature, convention, window, units, delimiter, errors, dof, band,
    bands_per_decade, level, resamples, seed, interval, threads
))]
#[allow(clippy::too_many_arguments)]
fn spectrum(
    py: Python<'_>,
    label: String,
    path: Option<PathBuf>,
    text: Option<Vec<u8>>,
    temperature: f64,
    convention: Option<&str>,
    window: Option<&str>,
    units: &str,
    delimiter: &str,
    errors: &str,
    dof: Option<f64>,
    band: Option<(f64, f64)>,
    bands_per_decade: usize,
    level: f64,
    resamples: usize,
    seed: u64,
    interval: &str,
    threads: Option<usize>,
) -> PyResult<String> {
    let convention = match convention {
        Some(c) => choice("convention", c).map_err(to_py)?,
        None => Convention::Loss,
    };
    let settings = spectral_settings(
        Some(temperature),
        convention,
        units,
        errors,
        dof,
        band,
        bands_per_decade,
        level,
        resamples,
        seed,
        interval,
    )
    .map_err(to_py)?;
    let window = window
        .map(|w| choice("window", w))
        .transpose()
        .map_err(to_py)?;
    let delimiter = choice::<Delimiter>("delimiter", delimiter).map_err(to_py)?;
    let source = match (path, text) {
        (Some(p), _) => SpectrumSource::File(p),
        (None, Some(text)) => SpectrumSource::Table {
            label: PathBuf::from(label),
            text,
        },
        (None, None) => return Err(setting("no data given".into())),
    };
    py.detach(move || {
        fdtemp::with_threads(threads, || {
            let (groups, window) = api::read_spectrum(&source, delimiter, window)?;
            let report = api::spectrum(&groups, window, &settings, source.label())?;
            Ok(fdtemp::report::json::spectrum_json(&report))
        })
    })
    .map_err(to_py)
    .map(|b| String::from_utf8_lossy(&b).into_owned())
}

/// `fdtemp noise` on a file or an array: returns (the JSON, or None without a
/// dissipation; the PSD as the CSV that `--psd-out` writes).
#[pyfunction]
#[pyo3(signature = (
    label, path, array, sample_rate, gain, segment, overlap, resistance, loss_file,
    temperature, convention, units, delimiter, errors, dof, band, bands_per_decade, level,
    resamples, seed, interval, threads, ages, age_span, age_window, quench_at, intermittency
))]
#[allow(clippy::too_many_arguments)]
fn noise(
    py: Python<'_>,
    label: String,
    path: Option<PathBuf>,
    array: Option<PyReadonlyArrayDyn<'_, f64>>,
    sample_rate: Option<f64>,
    gain: Option<f64>,
    segment: usize,
    overlap: Option<usize>,
    resistance: Option<f64>,
    loss_file: Option<PathBuf>,
    temperature: Option<f64>,
    convention: Option<&str>,
    units: &str,
    delimiter: &str,
    errors: &str,
    dof: Option<f64>,
    band: Option<(f64, f64)>,
    bands_per_decade: usize,
    level: f64,
    resamples: usize,
    seed: u64,
    interval: &str,
    threads: Option<usize>,
    ages: Vec<f64>,
    age_span: Option<f64>,
    age_window: Option<f64>,
    quench_at: f64,
    intermittency: bool,
) -> PyResult<(Option<String>, String)> {
    if (!ages.is_empty() || intermittency) && path.is_none() {
        return Err(setting(
            "ages= and intermittency= read the records from a file: give its path".into(),
        ));
    }
    if age_span.is_some() && age_window.is_some() {
        return Err(setting("give age_span= or age_window=, not both".into()));
    }
    if resistance.is_some() && loss_file.is_some() {
        return Err(setting(
            "--resistance and --loss-file both give the dissipation; give one".into(),
        ));
    }
    let delimiter = choice::<Delimiter>("delimiter", delimiter).map_err(to_py)?;
    let source = match (path, array) {
        (Some(p), _) => NoiseSource::File(p, delimiter),
        (None, Some(a)) => {
            if a.ndim() > 2 {
                return Err(setting(format!(
                    "the array has {} dimensions; expected one run or runs × samples",
                    a.ndim()
                )));
            }
            NoiseSource::Array {
                label: PathBuf::from(label),
                array: a.as_array().to_owned(),
            }
        }
        (None, None) => return Err(setting("no data given".into())),
    };
    let convention = convention
        .map(|c| choice::<Convention>("convention", c))
        .transpose()
        .map_err(to_py)?;
    let units = units.to_string();
    let errors = errors.to_string();
    let interval = interval.to_string();
    py.detach(move || {
        fdtemp::with_threads(threads, || {
            let (diss, column) = match (resistance, &loss_file) {
                (Some(r), _) => (Some(Dissipation::Constant(r)), None),
                (None, Some(p)) => {
                    let (d, name) = fdtemp::spectral::noise::read_dissipation_in(p, delimiter)?;
                    (Some(d), Some(name))
                }
                (None, None) => (None, None),
            };
            let segment_overlap = overlap.unwrap_or(segment / 2);
            let welch = WelchSettings {
                sample_rate: sample_rate.unwrap_or(1.0),
                segment,
                overlap: segment_overlap,
            };
            welch.validate()?;
            api::positive("--resistance", resistance, "a positive number of ohms")?;
            api::positive("--gain", gain, "a positive voltage gain (output/input)")?;
            let label = source.label().to_path_buf();
            let (convention, _) = api::noise_convention(
                convention,
                resistance.is_some(),
                column.as_deref(),
                loss_file.as_deref().unwrap_or(label.as_path()),
            )?;
            let mut settings = spectral_settings(
                temperature,
                convention,
                &units,
                &errors,
                dof,
                band,
                bands_per_decade,
                level,
                resamples,
                seed,
                &interval,
            )?;
            settings.gain = gain;
            if !ages.is_empty() {
                use fdtemp::spectral::aging::{AgeLoss, AgeSettings, Width, read_loss_by_age};
                let by_age = match &loss_file {
                    Some(p) => read_loss_by_age(p, delimiter)?,
                    None => None,
                };
                let loss = match (by_age, diss) {
                    (Some((tables, _)), _) => AgeLoss::ByAge(tables),
                    (None, Some(d)) => AgeLoss::Same(d),
                    (None, None) => {
                        return Err(fdtemp::Error::Setting(
                            "ages= needs a dissipation: give resistance= or loss_file=".into(),
                        ));
                    }
                };
                let width = match (age_window, age_span) {
                    (Some(s), _) => Width::Seconds(s),
                    (None, Some(f)) => Width::Fraction(f),
                    (None, None) => Width::Fraction(0.25),
                };
                let a = AgeSettings {
                    ages: ages.clone(),
                    width,
                    quench_at,
                };
                settings.ages = Some(a.clone());
                let (report, _) = api::noise_aging(
                    &label,
                    delimiter,
                    welch,
                    sample_rate,
                    gain,
                    &a,
                    &loss,
                    &settings,
                    intermittency,
                    &api::AgeChannel::Single,
                )?;
                return Ok((
                    Some(fdtemp::report::json::spectrum_json(&report)),
                    Vec::new(),
                ));
            }
            let burst = if intermittency {
                Some(api::noise_intermittency(
                    &label,
                    delimiter,
                    welch,
                    sample_rate,
                    level,
                    seed,
                )?)
            } else {
                None
            };
            let rec = api::noise_psd(source, welch, sample_rate, gain)?;
            if let Some(b) = &burst
                && b.needs_run_resampling
                && settings.errors == fdtemp::spectral::analysis::ErrorModel::Auto
                && rec.runs.len() >= 2
            {
                settings.errors = fdtemp::spectral::analysis::ErrorModel::Runs;
            }
            let psd = fdtemp::spectral::noise::psd_csv(&rec, diss.as_ref());
            let json = diss
                .map(|d| api::noise_spectrum(&rec, &d, &settings, &label, loss_file.as_deref()))
                .transpose()?
                .map(|mut r| {
                    r.intermittency = burst;
                    fdtemp::report::json::spectrum_json(&r)
                });
            Ok((json, psd))
        })
    })
    .map_err(to_py)
    .map(|(j, p)| {
        (
            j.map(|b| String::from_utf8_lossy(&b).into_owned()),
            String::from_utf8_lossy(&p).into_owned(),
        )
    })
}

/// What `reduce` hands back: (JSON, text, `--out` bytes, `--table` bytes).
type Reduced = (String, String, Vec<u8>, Option<Vec<u8>>);

/// `fdtemp reduce` on a file (`path`) or a table's text (`text`); returns (the JSON, the
/// report in words, the `--out` file's bytes, the `--table` file's bytes if any).
#[pyfunction]
#[pyo3(signature = (label, path, text, protocol, combine, resamples, seed, level, plain, tw, temperature, min_branch, threads))]
#[allow(clippy::too_many_arguments)]
fn reduce(
    py: Python<'_>,
    label: String,
    path: Option<PathBuf>,
    text: Option<Vec<u8>>,
    protocol: &str,
    combine: &str,
    resamples: usize,
    seed: u64,
    level: f64,
    plain: bool,
    tw: Vec<f64>,
    temperature: Option<f64>,
    min_branch: usize,
    threads: Option<usize>,
) -> PyResult<Reduced> {
    let src = match (path, text) {
        (Some(p), None) => RawSource::File(p),
        (None, Some(text)) => RawSource::Table {
            label: PathBuf::from(label),
            text,
        },
        _ => return Err(setting("reduce needs a path or a table".into())),
    };
    let settings = ReduceSettings {
        protocol: choice("protocol", protocol).map_err(to_py)?,
        combine: choice("combine", combine).map_err(to_py)?,
        resamples,
        seed,
        level,
        connected: !plain,
        tws: tw,
        quench_fit: temperature.map(|temperature| QuenchFitSettings {
            temperature,
            min_branch,
        }),
    };
    py.detach(move || {
        fdtemp::with_threads(threads, || {
            let r = fdtemp::reduce::reduce(&src, &settings)?;
            Ok((
                String::from_utf8_lossy(&reduce_report::json(&r)).into_owned(),
                reduce_report::text(&r),
                reduce_report::out_csv(&r),
                reduce_report::table_csv(&r),
            ))
        })
    })
    .map_err(to_py)
}

/// `fdtemp synth`: returns (the data file's bytes, the truth file's JSON).
#[pyfunction]
#[pyo3(signature = (scenario, samples, seed, quick, threads, hold))]
fn synth(
    py: Python<'_>,
    scenario: &str,
    samples: usize,
    seed: u64,
    quick: bool,
    threads: Option<usize>,
    hold: &str,
) -> PyResult<(Vec<u8>, String)> {
    let spec = fdtemp::scenarios::sim::SimSpec {
        scenario: choice("scenario", scenario).map_err(to_py)?,
        samples,
        seed,
        quick,
        hold: choice("hold", hold).map_err(to_py)?,
    };
    py.detach(move || {
        fdtemp::with_threads(threads, || {
            let sim = fdtemp::scenarios::sim::simulate(&spec)?;
            Ok((sim.data, fdtemp::report::json::sorted_json(&sim.truth)))
        })
    })
    .map_err(to_py)
    .map(|(d, t)| (d, String::from_utf8_lossy(&t).into_owned()))
}

/// The demo's inputs as `fdtemp demo` writes them: (campaign.csv, truth.json,
/// spectrum.csv) bytes.
#[pyfunction]
fn demo_inputs(py: Python<'_>) -> PyResult<(Vec<u8>, Vec<u8>, Vec<u8>)> {
    py.detach(fdtemp::scenarios::demo::inputs)
        .map_err(to_py)
        .map(|[c, t, s]| (c, t, s))
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("NativeError", m.py().get_type::<NativeError>())?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add_function(wrap_pyfunction!(fit, m)?)?;
    m.add_function(wrap_pyfunction!(spectrum, m)?)?;
    m.add_function(wrap_pyfunction!(noise, m)?)?;
    m.add_function(wrap_pyfunction!(synth, m)?)?;
    m.add_function(wrap_pyfunction!(reduce, m)?)?;
    m.add_function(wrap_pyfunction!(demo_inputs, m)?)?;
    Ok(())
}
