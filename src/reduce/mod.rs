//! Raw runs → a campaign of C(t,tw) and χ(t,tw) per independent sample, with the
//! linear-response check.
//!
//! Two protocols (docs/reduce.md):
//!
//! - [`twin`]: twin runs of a simulation. Per sample an unperturbed run and perturbed
//!   twins sharing its noise, with a field h switched on at tw. χ = (m_h − m_0)/h; with
//!   ±h, (m_{+h} − m_{−h})/(2h), which cancels the even orders; with several amplitudes a
//!   Richardson extrapolation to h → 0, and a test that χ does not depend on h, per point
//!   and overall, calibrated by resampling samples.
//! - [`quench`]: repeated quenches of one system (experiments). C from the unperturbed
//!   runs (connected by default), χ from the perturbed minus the unperturbed means over h,
//!   pointwise intervals by resampling runs within each stratum (unperturbed, perturbed).
//!
//! ## Reference
//! Richardson extrapolation: Press et al., *Numerical Recipes*, 3rd ed. (2007), §5.7
//! (derivative by extrapolation of a difference quotient) and §3.2 (Neville); the
//! studentized bootstrap max-statistic over many points: Westfall & Young, *Resampling-
//! Based Multiple Testing* (1993), ch. 2; Davison & Hinkley (1997), §4.4.

pub mod quench;
pub mod quench_fit;
pub mod twin;

pub use twin::{FieldTest, TwinReduction, TwinRuns, TwinSettings, read_twins, reduce_twins};

use crate::error::{Error, Result};
use std::io::BufRead;
use std::path::{Path, PathBuf};

/// Which protocol a raw file follows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum Protocol {
    /// From the header: `sample, tw, t, h, corr, m` is twins; `run, t, value, h, tw` is
    /// quenches.
    Auto,
    /// Twin runs: per sample an unperturbed run and perturbed twins sharing its noise.
    Twins,
    /// Repeated quenches: many runs of one system, some with a step field from tw.
    Quenches,
}

/// Where raw runs come from: a file, or a table's text held in memory.
#[derive(Debug, Clone)]
pub enum RawSource {
    /// A CSV file.
    File(PathBuf),
    /// The text of a CSV table; `label` names it in errors.
    Table {
        /// What errors call it (`<DataFrame>`).
        label: PathBuf,
        /// The table's bytes.
        text: Vec<u8>,
    },
}

impl RawSource {
    /// The name errors and the report give the data.
    pub fn label(&self) -> &Path {
        match self {
            RawSource::File(p) => p,
            RawSource::Table { label, .. } => label,
        }
    }

    /// A fresh reader from the start, with the line limit of every reader here.
    pub(crate) fn open(&self) -> Result<Box<dyn BufRead + '_>> {
        Ok(match self {
            RawSource::File(p) => Box::new(crate::input::open(p)?),
            RawSource::Table { text, .. } => Box::new(crate::input::limited(text.as_slice())),
        })
    }

    /// The protocol named by the header line (`auto` resolved).
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be read; [`Error::Input`] on line 1 naming the
    /// columns found when they are neither protocol's.
    pub fn detect(&self) -> Result<Protocol> {
        let mut r = self.open()?;
        let mut first = String::new();
        let mut line = 0u64;
        while first.trim().is_empty() || first.starts_with('#') {
            first.clear();
            line += 1;
            if r.read_line(&mut first).unwrap_or(0) == 0 {
                break;
            }
        }
        let names: Vec<String> = first
            .trim_start_matches('\u{feff}')
            .split(',')
            .map(|s| s.trim().to_string())
            .collect();
        let has = |n: &str| names.iter().any(|h| h == n);
        if has("m") && has("sample") {
            Ok(Protocol::Twins)
        } else if has("value") && has("run") {
            Ok(Protocol::Quenches)
        } else {
            Err(Error::input(
                self.label(),
                Some(line),
                None,
                format!(
                    "the header ({}) is neither twin runs (sample, tw, t, h, corr, m) nor \
                     repeated quenches (run, t, value, h, tw); name the columns so, or pass \
                     --protocol",
                    names.join(", ")
                ),
            ))
        }
    }
}

/// The settings of `reduce` for either protocol.
#[derive(Debug, Clone, PartialEq)]
pub struct ReduceSettings {
    /// The protocol (`auto`: from the header).
    pub protocol: Protocol,
    /// How χ is formed from several field levels (twins, and quenches with several fields
    /// at a tw).
    pub combine: twin::Combine,
    /// Bootstrap resamples of the samples (runs).
    pub resamples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Confidence level of the intervals; the tests reject at 1 − level.
    pub level: f64,
    /// Quenches: connected C (true) or plain `<A(t)A(tw)>`.
    pub connected: bool,
    /// Quenches: waiting times to form C at (empty: the switch-on times).
    pub tws: Vec<f64>,
    /// Quenches: fit X, T_eff and the break directly on the replicates (`--fit`).
    pub quench_fit: Option<quench_fit::QuenchFitSettings>,
}

impl Default for ReduceSettings {
    fn default() -> Self {
        ReduceSettings {
            protocol: Protocol::Auto,
            combine: twin::Combine::Extrapolate,
            resamples: 1999,
            seed: 1,
            level: 0.95,
            connected: true,
            tws: Vec::new(),
            quench_fit: None,
        }
    }
}

/// What `reduce` made of the raw runs.
#[derive(Debug, Clone)]
pub enum Reduced {
    /// Twin runs: a campaign per sample, and the linear-response test.
    Twins(Box<TwinReduction>),
    /// Repeated quenches: pointwise C and χ.
    Quenches(Box<quench::QuenchReduction>),
}

/// A reduction with the name of its input.
#[derive(Debug, Clone)]
pub struct Reduction {
    /// The input's name (file path or `<DataFrame>`).
    pub label: PathBuf,
    /// The result.
    pub reduced: Reduced,
    /// The direct fit of repeated quenches, when asked for.
    pub quench_fit: Option<quench_fit::QuenchFits>,
}

impl Reduction {
    /// The protocol the runs followed.
    pub fn protocol(&self) -> Protocol {
        match self.reduced {
            Reduced::Twins(_) => Protocol::Twins,
            Reduced::Quenches(_) => Protocol::Quenches,
        }
    }

    /// The campaign `fit` reads (twins only).
    pub fn campaign(&self) -> Option<&crate::twotime::campaign::Campaign> {
        match &self.reduced {
            Reduced::Twins(r) => Some(&r.campaign),
            Reduced::Quenches(_) => None,
        }
    }
}

/// Reads and reduces raw runs by the protocol `settings` names (or the header shows).
///
/// # Errors
/// As [`read_twins`], [`reduce_twins`] and [`quench::reduce_quenches`]; analysis errors
/// name the input.
pub fn reduce(src: &RawSource, settings: &ReduceSettings) -> Result<Reduction> {
    let protocol = match settings.protocol {
        Protocol::Auto => src.detect()?,
        p => p,
    };
    let label = src.label().to_path_buf();
    let named = crate::api::in_file(src.label());
    let reduced = match protocol {
        Protocol::Quenches => {
            let q = quench::QuenchSettings {
                connected: settings.connected,
                tws: settings.tws.clone(),
                resamples: settings.resamples,
                seed: settings.seed,
                level: settings.level,
                combine: settings.combine,
            };
            let red = quench::reduce_quenches_from(src, &q).map_err(&named)?;
            if let Some(f) = &settings.quench_fit {
                let fits = quench_fit::fit_quenches(&red, f).map_err(&named)?;
                return Ok(Reduction {
                    label,
                    reduced: Reduced::Quenches(Box::new(red)),
                    quench_fit: Some(fits),
                });
            }
            Reduced::Quenches(Box::new(red))
        }
        _ => {
            if settings.quench_fit.is_some() {
                return Err(Error::Setting(
                    "the direct fit on replicates is for repeated quenches; twin runs give a \
                     campaign of samples: fit that campaign"
                        .into(),
                ));
            }
            let t = TwinSettings {
                combine: settings.combine,
                resamples: settings.resamples,
                seed: settings.seed,
                level: settings.level,
            };
            t.validate()?;
            let runs = twin::parse_twins(src.open()?, src.label())?;
            Reduced::Twins(Box::new(reduce_twins(&runs, &t).map_err(&named)?))
        }
    };
    Ok(Reduction {
        label,
        reduced,
        quench_fit: None,
    })
}
