//! What both domains share: units and Boltzmann's constant, checks of the level and the
//! number of resamples, a number with its interval, the tool's name, and progress.

use crate::error::{Error, Result};
use crate::resample;
use serde::Serialize;

/// Boltzmann's constant in J/K (exact in the SI since 2019).
pub const BOLTZMANN_SI: f64 = 1.380649e-23;

/// Energy units: decides the value of Boltzmann's constant `k`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Units {
    /// Reduced units, `k = 1`: temperatures are energies.
    Reduced,
    /// SI, `k = 1.380649e-23 J/K`: temperatures in kelvin.
    Si,
}

impl Units {
    /// Boltzmann's constant in these units.
    pub fn boltzmann(self) -> f64 {
        match self {
            Units::Reduced => 1.0,
            Units::Si => BOLTZMANN_SI,
        }
    }
}

/// Checks a confidence level (shared by every analysis).
///
/// # Errors
/// [`Error::Setting`] when the level is not strictly between 0 and 1.
pub fn check_level(level: f64) -> Result<()> {
    if level > 0.0 && level < 1.0 {
        return Ok(());
    }
    Err(Error::Setting(format!(
        "--level is {level}, expected a number between 0 and 1 (for example 0.95)"
    )))
}

/// Checks a number of bootstrap resamples (shared by every analysis).
///
/// # Errors
/// [`Error::Setting`] below 100 resamples.
pub fn check_resamples(resamples: usize) -> Result<()> {
    if resamples >= 100 {
        return Ok(());
    }
    Err(Error::Setting(format!(
        "--resamples is {resamples}, expected at least 100 (2000 or more for intervals a paper can quote)"
    )))
}

/// Receives progress of the resampling; the binary draws a bar, the library is silent.
pub trait Progress: Sync {
    /// Called once with the number of work units.
    fn start(&self, _total: u64) {}
    /// Called as units complete.
    fn advance(&self, _n: u64) {}
    /// Called when the work is done.
    fn finish(&self) {}
    /// A line for the user before long work (what runs, how long it should take).
    fn note(&self, _text: &str) {}
}

/// A [`Progress`] that shows nothing.
pub struct Silent;
impl Progress for Silent {}

/// A number with its interval; `None` where the number is undefined, with the reason.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct Estimate {
    /// Point estimate.
    pub estimate: Option<f64>,
    /// Lower end of the interval.
    pub low: Option<f64>,
    /// Upper end of the interval.
    pub high: Option<f64>,
    /// Why a number is missing, or how the interval was formed when it differs.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

impl Estimate {
    /// An estimate with the ends of `iv` (none when there is no interval).
    pub fn with(estimate: f64, iv: Option<&resample::Interval>) -> Self {
        Estimate {
            estimate: Some(estimate),
            low: iv.map(|i| i.low),
            high: iv.map(|i| i.high),
            note: iv.and_then(|i| i.note.clone()),
        }
    }
    /// No number, and why.
    pub fn none(note: impl Into<String>) -> Self {
        Estimate {
            note: Some(note.into()),
            ..Default::default()
        }
    }
}

/// Tool name and version, recorded in every result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ToolInfo {
    /// "fdtemp".
    pub name: &'static str,
    /// The crate version.
    pub version: &'static str,
}

impl Default for ToolInfo {
    fn default() -> Self {
        ToolInfo {
            name: "fdtemp",
            version: env!("CARGO_PKG_VERSION"),
        }
    }
}
