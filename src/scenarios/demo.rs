//! The demo: an invented aging scenario with a known answer, fitted end to end.
//!
//! Scenario: a soft colloidal glass, quenched into its glassy state in 40 independent
//! runs; the correlation of the particle density and its integrated response to a
//! weak field are recorded at three ages (tw = 100, 1000, 10000 in microscopic time
//! units) at bath temperature T = 0.6 (reduced units). The data are built so that their
//! mean lies on slope −1 down to q = 0.6 and on slope −X = −0.45 below it, i.e.
//! T_eff = 0.6 / 0.45 ≈ 1.333.
//!
//! Spectral part: a colloidal gel aged two hours after gelation, its voltage-noise
//! spectrum compared with its dielectric loss in 12 runs at 295 K. The slow modes are hot:
//! `T_eff(f) = 295 K · (1 + (2 Hz / f)²)`, the bath temperature above about 20 Hz.

use crate::error::{Error, Result};
use crate::output::Output;
use crate::report::plot::{self, Figure, PlotSize};
use crate::scenarios::synth::{SpectrumSpec, SynthSpec, generate, generate_spectrum};
use crate::spectral::analysis::{SpectrumReport, SpectrumSettings, analyze_spectra};
use crate::spectral::input::write_spectra;
use crate::twotime::{FitReport, FitSettings, Progress, analyze};
use std::fmt::Write;
use std::path::Path;

/// What the demo made.
pub struct Demo {
    /// Files to write (campaign, truth, fit JSON, points, spectrum and its result).
    pub outputs: Vec<Output>,
    /// The fit.
    pub report: FitReport,
    /// The truth the data were built from.
    pub spec: SynthSpec,
    /// The spectral analysis.
    pub spectrum: SpectrumReport,
    /// The truth of the spectrum.
    pub spectrum_spec: SpectrumSpec,
}

/// The spectral scenario's settings: the band average over the quiet high frequencies.
pub fn spectrum_settings(spec: &SpectrumSpec) -> SpectrumSettings {
    SpectrumSettings {
        temperature: Some(spec.temperature),
        band: Some([20.0, spec.range[1]]),
        ..SpectrumSettings::default()
    }
}

/// The demo scenario's recipe.
pub fn scenario() -> SynthSpec {
    SynthSpec::default()
}

/// The demo's input files as `fdtemp demo` writes them: the campaign table, its truth
/// (JSON) and the spectrum table.
///
/// # Errors
/// Only on an internal inconsistency of the scenario.
pub fn inputs() -> Result<[Vec<u8>; 3]> {
    let spec = scenario();
    let campaign = generate(&spec)?;
    let spectrum_spec = SpectrumSpec::default();
    Ok([
        crate::input::write_campaign(&campaign),
        crate::report::json::sorted_json(&truth(&spec, &spectrum_spec)),
        write_spectra(std::slice::from_ref(&generate_spectrum(&spectrum_spec))),
    ])
}

/// Generates the scenario, fits it, and prepares the files for `dir`.
///
/// # Errors
/// Only on an internal inconsistency of the scenario.
pub fn run(dir: &Path, progress: &dyn Progress) -> Result<Demo> {
    let spec = scenario();
    let campaign = generate(&spec)?;
    let campaign_path = dir.join("campaign.csv");
    let settings = FitSettings {
        temperature: spec.temperature,
        ..FitSettings::default()
    };
    let report = analyze(
        &campaign,
        &settings,
        Some(campaign_path.display().to_string()),
        progress,
    )?;
    let spectrum_spec = SpectrumSpec::default();
    let truth = truth(&spec, &spectrum_spec);
    let group = generate_spectrum(&spectrum_spec);
    let spectrum_path = dir.join("spectrum.csv");
    let spectrum = analyze_spectra(
        std::slice::from_ref(&group),
        &[],
        &spectrum_settings(&spectrum_spec),
        Some(spectrum_path.display().to_string()),
    )?;
    let mut outputs = vec![
        Output {
            path: spectrum_path,
            bytes: write_spectra(std::slice::from_ref(&group)),
        },
        Output {
            path: dir.join("spectrum-fit.json"),
            bytes: crate::report::json::spectrum_json(&spectrum),
        },
        Output {
            path: campaign_path,
            bytes: crate::input::write_campaign(&campaign),
        },
        Output {
            path: dir.join("truth.json"),
            bytes: crate::report::json::sorted_json(&truth),
        },
        Output {
            path: dir.join("fit.json"),
            bytes: crate::report::json::fit_json(&report),
        },
        Output {
            path: dir.join("points.csv"),
            bytes: crate::report::csv::points_csv(&report),
        },
    ];
    outputs.extend(figures(dir, &report, &spectrum)?);
    Ok(Demo {
        outputs,
        report,
        spec,
        spectrum,
        spectrum_spec,
    })
}

/// The truth file: both recipes and the values they were built with.
fn truth(spec: &SynthSpec, spectrum_spec: &SpectrumSpec) -> serde_json::Value {
    serde_json::json!({
        "scenario": "soft colloidal glass after a quench (invented)",
        "ratio": spec.ratio,
        "t_eff": spec.temperature / spec.ratio,
        "break": spec.plateau,
        "temperature": spec.temperature,
        "recipe": spec,
        "source": "built in: fdtemp::scenarios::synth with the demo recipe; the sample means lie on the \
                   broken stick by construction",
        "spectrum": {
            "scenario": "aging colloidal gel, voltage noise against dielectric loss (invented)",
            "t_eff": "T (1 + (f_hot / f)^2)",
            "recipe": spectrum_spec,
        },
    })
}

/// The FD plot, the resample histogram and T_eff(f), each as SVG, PNG and PDF.
fn figures(dir: &Path, report: &FitReport, spectrum: &SpectrumReport) -> Result<Vec<Output>> {
    let mut outputs = Vec::new();
    for ext in ["svg", "png", "pdf"] {
        let fig = |name: &str| {
            let path = dir.join(format!("{name}.{ext}"));
            Figure::for_path(&path, PlotSize::Single).map(|f| (path, f))
        };
        let (path, f) = fig("fd-plot")?;
        outputs.push(Output {
            path,
            bytes: plot::fd_plot(report, f)?,
        });
        let (path, f) = fig("ratio-resamples")?;
        outputs.push(Output {
            path,
            bytes: plot::ratio_histogram(report, f)?,
        });
        let (path, f) = fig("teff-spectrum")?;
        outputs.push(Output {
            path,
            bytes: plot::teff_plot(spectrum, f)?,
        });
    }
    Ok(outputs)
}

/// Lines that compare the joint estimates with the truth.
pub fn compare(demo: &Demo) -> String {
    let f = &demo.report.fits[0];
    let s = &demo.spec;
    let mut o = String::from("demo: estimate against the truth the data were built with\n");
    let rows = [
        ("X", &f.ratio, s.ratio),
        ("T_eff", &f.t_eff, s.temperature / s.ratio),
        ("break q", &f.brk, s.plateau),
    ];
    for (name, e, truth) in rows {
        let inside = match (e.low, e.high) {
            (Some(lo), Some(hi)) if lo <= truth && truth <= hi => "inside the interval",
            (Some(_), Some(_)) => "OUTSIDE the interval",
            _ => "no interval",
        };
        let _ = writeln!(
            o,
            "  {name:<8} truth {:<8} estimate {:<10} off by {:+.1}%  ({inside})",
            crate::report::sig(truth, 4),
            e.estimate.map_or("—".into(), |v| crate::report::sig(v, 4)),
            e.estimate.map_or(f64::NAN, |v| 100.0 * (v - truth) / truth),
        );
    }
    let sp = &demo.spectrum_spec;
    let fit = &demo.spectrum.spectra[0];
    if let Some(b) = &fit.band {
        let e = &b.t_eff;
        let inside = matches!((e.low, e.high), (Some(lo), Some(hi)) if lo <= sp.temperature && sp.temperature <= hi);
        let _ = writeln!(
            o,
            "  T_eff over {}–{} Hz: truth {} K (the bath), estimate {} K ({})",
            crate::report::sig(b.fmin, 3),
            crate::report::sig(b.fmax, 3),
            crate::report::sig(sp.temperature, 4),
            e.estimate.map_or("—".into(), |v| crate::report::sig(v, 4)),
            if inside {
                "inside the interval"
            } else {
                "OUTSIDE the interval"
            }
        );
    }
    let _ = writeln!(
        o,
        "  departure: truth T_eff = T (1 + ({} Hz / f)^2), 10% above T below {} Hz; detected below {}",
        crate::report::sig(sp.f_hot, 3),
        crate::report::sig(sp.f_hot / 0.1f64.sqrt(), 3),
        fit.departure
            .as_ref()
            .map_or("— (none)".into(), |d| format!(
                "{} Hz ({})",
                crate::report::sig(d.below_hz, 3),
                d.direction.label()
            ))
    );
    o
}

/// Checks whether the demo's files may be written into `dir`: files that exist with the
/// same bytes are left alone; different ones need `overwrite`.
///
/// # Errors
/// [`Error::Setting`] when a file exists with other content and `overwrite` is off.
pub fn prune_unchanged(outputs: Vec<Output>, overwrite: bool) -> Result<Vec<Output>> {
    let mut keep = Vec::new();
    for o in outputs {
        match std::fs::read(&o.path) {
            Ok(old) if old == o.bytes => {}
            Ok(_) if !overwrite => {
                return Err(Error::Setting(format!(
                    "{}: exists with other content; pass --overwrite to replace it, or --out DIR",
                    o.path.display()
                )));
            }
            _ => keep.push(o),
        }
    }
    Ok(keep)
}
