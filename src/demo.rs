//! The demo: an invented aging scenario with a known answer, fitted end to end.
//!
//! Scenario: a soft colloidal glass, quenched into its glassy state in 40 independent
//! runs; the correlation of the particle density and its integrated response to a
//! weak field are recorded at three ages (tw = 100, 1000, 10000 in microscopic time
//! units) at bath temperature T = 0.6 (reduced units). The data are built so that their
//! mean lies on slope −1 down to q = 0.6 and on slope −X = −0.45 below it, i.e.
//! T_eff = 0.6 / 0.45 ≈ 1.333.

use crate::analysis::{FitReport, Progress, analyze};
use crate::error::{Error, Result};
use crate::output::Output;
use crate::settings::FitSettings;
use crate::synth::{SynthSpec, generate};
use std::fmt::Write;
use std::path::Path;

/// What the demo made.
pub struct Demo {
    /// Files to write (campaign, truth, fit JSON, points).
    pub outputs: Vec<Output>,
    /// The fit.
    pub report: FitReport,
    /// The truth the data were built from.
    pub spec: SynthSpec,
}

/// The demo scenario's recipe.
pub fn scenario() -> SynthSpec {
    SynthSpec::default()
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
    let truth = serde_json::json!({
        "scenario": "soft colloidal glass after a quench (invented)",
        "ratio": spec.ratio,
        "t_eff": spec.temperature / spec.ratio,
        "break": spec.plateau,
        "temperature": spec.temperature,
        "recipe": &spec,
        "source": "built in: fdtemp::synth with the demo recipe; the sample means lie on the \
                   broken stick by construction",
    });
    let outputs = vec![
        Output {
            path: campaign_path,
            bytes: crate::input::write_campaign(&campaign),
        },
        Output {
            path: dir.join("truth.json"),
            bytes: crate::report::json::to_json(&truth),
        },
        Output {
            path: dir.join("fit.json"),
            bytes: crate::report::json::to_json(&report),
        },
        Output {
            path: dir.join("points.csv"),
            bytes: crate::report::csv::points_csv(&report),
        },
    ];
    Ok(Demo {
        outputs,
        report,
        spec,
    })
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
