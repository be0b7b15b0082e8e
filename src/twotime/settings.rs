//! The settings of a time-domain fit: every choice an enum, every field documented.

use super::points::Axes;
use crate::common::{Units, check_level, check_resamples};
use crate::error::{Error, Result};
pub use crate::fit::smooth::Constraint;
use crate::resample::IntervalMethod;

/// Which broken-stick model is fitted.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Model {
    /// Slope −1 above the break (quasi-equilibrium), slope −X below; null: the line of slope −1.
    Broken,
    /// Both slopes free; the first is reported against −1 as a thermometer check; null:
    /// one straight line of free slope.
    Free,
    /// One straight line of free slope −X through all points (no break); null: slope −1.
    Line,
    /// The broken stick, and beside it a smooth X(C) (monotone ramps, X = 1 at the largest
    /// C) with pointwise bands, where X leaves 1, and a test of one break against the
    /// smooth curve; null: slope −1.
    Smooth,
}

/// Which time is held fixed along one curve of the parametric plot.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Hold {
    /// The waiting time is fixed; the later time t runs (the usual zero-field-cooled form).
    Tw,
    /// The later time t is fixed; the earlier time runs.
    T,
}

impl Hold {
    /// The name of the held time in reports.
    pub fn name(self) -> &'static str {
        match self {
            Hold::Tw => "tw",
            Hold::T => "t",
        }
    }
}

/// How the points are weighted in the least-squares fits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum Weighting {
    /// Inverse of the sample variance of the fitted quantity at each point.
    InverseVariance,
    /// All points alike.
    Uniform,
}

/// Everything that shapes a time-domain result.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct FitSettings {
    /// Bath temperature `T` (in energy units when `units` is reduced, kelvin in SI).
    pub temperature: f64,
    /// Reduced (`k = 1`) or SI units.
    pub units: Units,
    /// Plain or normalized parametric axes.
    pub axes: Axes,
    /// The fitted model.
    pub model: Model,
    /// Point weights in the fits.
    pub weights: Weighting,
    /// Number of bootstrap resamples `B`.
    pub resamples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Confidence level of the intervals, in (0, 1).
    pub level: f64,
    /// How intervals are formed.
    pub interval: IntervalMethod,
    /// Least number of points on each side of the break.
    pub min_branch: usize,
    /// Which time is held fixed along a curve (groups the per-curve fits).
    pub hold: Hold,
    /// Only points with x in `[lo, hi]` are fitted (all when `None`).
    pub range: Option<[f64; 2]>,
    /// The smooth model's constraint on X(C) (`Some` exactly when the model is smooth).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub smooth: Option<Constraint>,
    /// Extrapolate the curves to long ages (`--limit`).
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub limit: bool,
    /// The margin, in X per decade of age, within which the aging verdict calls X settled.
    pub settled_within: f64,
}

impl Default for FitSettings {
    fn default() -> Self {
        FitSettings {
            temperature: 1.0,
            units: Units::Reduced,
            axes: Axes::Auto,
            model: Model::Broken,
            weights: Weighting::InverseVariance,
            resamples: 2000,
            seed: 1,
            level: 0.95,
            interval: IntervalMethod::Bca,
            min_branch: 5,
            hold: Hold::Tw,
            range: None,
            smooth: None,
            limit: false,
            settled_within: 0.05,
        }
    }
}

impl FitSettings {
    /// The level of the tests, `α = 1 − level`, rounded to 12 digits so that 0.95 gives
    /// exactly 0.05. A resampling p-value `(1 + #)/(B + 1)` rejects when `p ≤ α`, which has
    /// level exactly `α` when `α (B + 1)` is a whole number (B = 999, 1999, …).
    pub fn test_level(&self) -> f64 {
        ((1.0 - self.level) * 1e12).round() / 1e12
    }

    /// The smooth model's constraint (monotone unless given).
    pub fn constraint(&self) -> Constraint {
        self.smooth.unwrap_or(Constraint::Monotone)
    }

    /// Checks every field's range.
    ///
    /// # Errors
    /// [`Error::Setting`] naming the option and the value.
    pub fn validate(&self) -> Result<()> {
        if !(self.temperature > 0.0 && self.temperature.is_finite()) {
            return Err(Error::Setting(format!(
                "--temperature is {}, expected a positive number",
                self.temperature
            )));
        }
        check_level(self.level)?;
        check_resamples(self.resamples)?;
        if !(self.settled_within > 0.0 && self.settled_within.is_finite()) {
            return Err(Error::Setting(format!(
                "--settled-within is {}, expected a positive change of X per decade",
                self.settled_within
            )));
        }
        if let Some([lo, hi]) = self.range
            && !(hi > lo)
        {
            return Err(Error::Setting(format!(
                "--range is {lo}:{hi}, expected CMIN:CMAX with CMIN < CMAX"
            )));
        }
        if self.smooth.is_some() && self.model != Model::Smooth {
            return Err(Error::Setting(
                "--smooth-shape applies only with --model smooth".into(),
            ));
        }
        if self.min_branch < 2 {
            return Err(Error::Setting(format!(
                "--min-branch is {}, expected at least 2 points per branch",
                self.min_branch
            )));
        }
        Ok(())
    }
}
