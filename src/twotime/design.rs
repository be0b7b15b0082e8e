//! Calibration on the user's own design: many campaigns simulated with the same samples
//! and the same (tw, t) grid, a known curve as truth and the data's own noise, each refitted
//! exactly as the data were. Over them: the actual coverage of every interval the report
//! prints, the actual level of every test, the bias of X, q and T_eff — and the nominal
//! level whose coverage is the one asked for (calibration of the confidence coefficient).
//!
//! ## How a campaign is simulated
//! The raw columns of every sample (C, χ and C(t,t) at every point) are split into the
//! column means and the residual curves `e_i = row_i − mean`. The truth keeps the means of
//! C and C(t,t) and moves χ's means onto the truth curve, `y(x̄) = k T χ̄ / norm` at the
//! data's own x̄ (norm = C̄(t,t) on normalized axes, 1 on plain ones). A simulated sample is
//! the truth plus noise, drawn one of two ways ([`Noise`]):
//! - `resample`: a residual curve of a whole sample drawn with replacement, times
//!   `√(n/(n−1))` so that its variance is the unbiased one (modified residuals, Davison &
//!   Hinkley, *Bootstrap Methods and their Application* (1997), §6.2.3);
//! - `gaussian`: `Σ_k g_k e_k / √(n−1)` with standard normal `g_k`, a Gaussian with the
//!   samples' covariance across all points and columns (of rank n − 1 at most).
//!
//! Either way a simulated sample carries the data's correlations along t, between C and χ
//! and between curves. Two truths are used: the joint fit's curve (for coverage, bias and
//! the level of the tests whose null it satisfies: the thermometer check of the fixed-slope
//! model and the aging alarm, since one curve serves every waiting time) and the
//! equilibrium line of the model's null fitted to the points (for the level of the
//! equilibrium test).
//!
//! ## Calibrated intervals
//! For each simulated campaign and each printed interval, the smallest nominal level at
//! which the interval covers the truth ([`covering_level`]); the actual coverage of a `β`
//! interval is the share of these levels `≤ β`, and the calibrated nominal level for a
//! wanted coverage `β` is their `β` quantile (Loh, JASA 82, 155–162 (1987); Hall & Martin,
//! Biometrika 75, 661–671 (1988)). The data's own interval formed at that level is the
//! calibrated interval.

use super::assess::slope_level;
use super::campaign::Campaign;
use super::points::{Axes, data_matrix};
use super::result::{Calibrated, CalibratedInterval, Curve, FitReport, GroupFit, Series};
use super::settings::{FitSettings, Model, Weighting};
use crate::common::{Progress, Silent, ToolInfo};
use crate::error::{Error, Result};
use crate::fit::line::fit_line;
use crate::resample::{IntervalMethod, covering_level, interval, replicate_rng, stated_level};
use ndarray::{Array1, Array2, Axis};
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde::Serialize;
use std::time::Instant;

/// The JSON schema version of [`DesignReport`].
pub const DESIGN_SCHEMA: u32 = 2;

/// How the noise of a simulated sample is drawn from the data's samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Noise {
    /// Residual curves of whole samples, drawn with replacement (scaled by √(n/(n−1))).
    Resample,
    /// Gaussian with the samples' covariance across all points (random combinations of the
    /// residual curves).
    Gaussian,
}

impl Noise {
    /// Words for reports.
    pub fn describe(self) -> &'static str {
        match self {
            Noise::Resample => {
                "residual curves of whole samples drawn with replacement, scaled by √(n/(n−1))"
            }
            Noise::Gaussian => "Gaussian with the samples' covariance across all points",
        }
    }
}

/// How many campaigns are simulated, and how.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct DesignSettings {
    /// Simulated campaigns per truth.
    pub campaigns: usize,
    /// How their noise is drawn.
    pub noise: Noise,
    /// Seed of the simulation (each campaign's own stream; its refit gets its own seed).
    pub seed: u64,
}

impl DesignSettings {
    /// Checks the settings.
    ///
    /// # Errors
    /// [`Error::Setting`] for fewer than 20 campaigns.
    pub fn validate(&self) -> Result<()> {
        if self.campaigns < MIN_CAMPAIGNS {
            return Err(Error::Setting(format!(
                "{} simulated campaigns, expected at least {MIN_CAMPAIGNS} (a coverage from \
                 fewer has a Monte-Carlo error above 5 points)",
                self.campaigns
            )));
        }
        Ok(())
    }
}

/// Fewest simulated campaigns accepted.
pub const MIN_CAMPAIGNS: usize = 20;

/// Which truth a set of campaigns was simulated from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TruthKind {
    /// The joint fit's curve.
    Fitted,
    /// The model's null (no violation) fitted to the points.
    Equilibrium,
}

/// A truth curve in the fit's coordinates.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Truth {
    /// Which one.
    pub kind: TruthKind,
    /// The curve (a single line when `q` is not finite).
    pub curve: Curve,
}

impl Truth {
    /// y at x.
    pub fn y(&self, x: f64) -> f64 {
        let c = &self.curve;
        if c.q.is_finite() {
            c.eval(x)
        } else {
            c.intercept + c.slope_below * x
        }
    }
    /// The true X (minus the slope below the break).
    pub fn ratio(&self) -> f64 {
        -self.curve.slope_below
    }
}

/// A rate over simulated campaigns with its binomial standard error.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Rate {
    /// The share.
    pub rate: f64,
    /// Its binomial standard error `√(p(1−p)/N)` (common practice).
    pub se: f64,
    /// How many of the campaigns.
    pub hits: usize,
    /// Out of how many.
    pub of: usize,
}

impl Rate {
    fn of(hits: usize, of: usize) -> Option<Rate> {
        (of > 0).then(|| {
            let p = hits as f64 / of as f64;
            Rate {
                rate: p,
                se: (p * (1.0 - p) / of as f64).sqrt(),
                hits,
                of,
            }
        })
    }
}

/// A mean over simulated campaigns with its standard error.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Mean {
    /// The mean.
    pub mean: f64,
    /// Its standard error (sample SD / √N).
    pub se: f64,
}

fn mean_of(v: &[f64]) -> Option<Mean> {
    let v: Vec<f64> = v.iter().copied().filter(|x| x.is_finite()).collect();
    (v.len() >= 2).then(|| {
        let n = v.len() as f64;
        let m = v.iter().sum::<f64>() / n;
        let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
        Mean {
            mean: m,
            se: (var / n).sqrt(),
        }
    })
}

/// The nominal level that covers at the wanted level on the simulated campaigns.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct NominalLevel {
    /// The calibrated nominal level.
    pub level: f64,
    /// Its Monte-Carlo range (order statistics at ±1.96 binomial SD of the rank).
    pub range: [f64; 2],
}

/// What one interval did over the simulated campaigns.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoverageRow {
    /// `x`, `t_eff`, `break` or `slope_above`.
    pub quantity: &'static str,
    /// The fit: `None` for all curves together, else the held time.
    pub held: Option<f64>,
    /// The truth.
    pub truth: f64,
    /// Campaigns whose report printed this interval, out of the campaigns fitted.
    pub printed: Rate,
    /// Share of the printed intervals that contained the truth.
    pub coverage: Option<Rate>,
    /// Mean of estimate − truth.
    pub bias: Option<Mean>,
    /// The nominal level whose coverage is the wanted one; `None` when the resamples
    /// cannot reach it (over 1 − level of the intervals miss at any level).
    pub calibrated: Option<NominalLevel>,
}

/// How often one test rejected over the simulated campaigns.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TestRow {
    /// `equilibrium`, `slope_minus_one`, `lack_of_fit` or `aging`.
    pub test: &'static str,
    /// The level the report tests at (the lack-of-fit test of one curve is at α/K).
    pub level: f64,
    /// The fit: `None` for all curves together (or the campaign), else the held time.
    pub held: Option<f64>,
    /// The truth simulated.
    pub truth: TruthKind,
    /// `true`: the truth satisfies the test's null, so the rate is its actual level;
    /// `false`: it does not, so the rate is the test's power.
    pub null_true: bool,
    /// The rejection rate.
    pub rejected: Rate,
}

/// The design check of one campaign.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DesignReport {
    /// JSON schema version.
    pub schema: u32,
    /// The tool that made it.
    pub tool: ToolInfo,
    /// The input file, when there was one.
    pub input: Option<String>,
    /// The fit's settings (each simulated campaign refitted with these, its own seed).
    pub fit: FitSettings,
    /// The simulation's settings.
    pub design: DesignSettings,
    /// Samples per campaign.
    pub n_samples: usize,
    /// Samples of the file left out because they miss points (`--drop-incomplete`).
    pub excluded_samples: Vec<crate::input::ExcludedSample>,
    /// Grid points per campaign.
    pub n_points: usize,
    /// The truths simulated.
    pub truths: Vec<Truth>,
    /// Simulated campaigns whose fit failed (not counted), per truth.
    pub failed: Vec<usize>,
    /// Interval coverage, bias and calibrated levels, joint fit first.
    pub coverage: Vec<CoverageRow>,
    /// Test levels (and power).
    pub tests: Vec<TestRow>,
    /// The data's own report.
    #[serde(skip)]
    pub data_report: FitReport,
}

/// The simulator: the data's means and residual curves, and how χ maps to y.
struct Simulator {
    ids: Vec<String>,
    grid: Vec<super::GridPoint>,
    means: Array1<f64>,
    resid: Array2<f64>,
    points: usize,
    normalized: bool,
    kt: f64,
}

impl Simulator {
    fn new(campaign: &Campaign, report: &FitReport) -> Self {
        let normalized = report.settings.axes_used == Axes::Normalized;
        let data = data_matrix(campaign, normalized);
        let means = data.mean_axis(Axis(0)).unwrap_or_else(|| Array1::zeros(0));
        let resid = &data - &means.view().insert_axis(Axis(0));
        let g = &report.settings.given;
        Simulator {
            ids: campaign.sample_ids().to_vec(),
            grid: campaign.points().to_vec(),
            means,
            resid,
            points: campaign.n_points(),
            normalized,
            kt: report.settings.k * g.temperature,
        }
    }

    /// The column means with χ's moved onto the truth curve at the data's own x.
    fn truth_means(&self, truth: &Truth) -> Array1<f64> {
        let p = self.points;
        let mut m = self.means.clone();
        for j in 0..p {
            let norm = if self.normalized { m[2 * p + j] } else { 1.0 };
            let x = m[j] / norm;
            m[p + j] = truth.y(x) * norm / self.kt;
        }
        m
    }

    /// Simulated campaign `index` about `truth` (the truth's column means).
    fn campaign(
        &self,
        truth: &Array1<f64>,
        noise: Noise,
        seed: u64,
        index: u64,
    ) -> Result<Campaign> {
        let n = self.resid.nrows();
        let mut rng = replicate_rng(seed, index);
        let mut data = Array2::zeros(self.resid.dim());
        match noise {
            Noise::Resample => {
                let s = (n as f64 / (n as f64 - 1.0)).sqrt();
                for mut row in data.rows_mut() {
                    let k = rng.random_range(0..n);
                    row.assign(&(truth + &(&self.resid.row(k) * s)));
                }
            }
            Noise::Gaussian => {
                let g: Array2<f64> = Array2::from_shape_simple_fn((n, n), || {
                    rng.sample::<f64, _>(StandardNormal) / (n as f64 - 1.0).sqrt()
                });
                data = g.dot(&self.resid) + truth.view().insert_axis(Axis(0));
            }
        }
        let p = self.points;
        let block = |k: usize| data.slice(ndarray::s![.., k * p..(k + 1) * p]).to_owned();
        Campaign::new(
            self.ids.clone(),
            self.grid.clone(),
            block(0),
            block(1),
            self.normalized.then(|| block(2)),
        )
    }
}

/// A seed for the refit of simulated campaign `index` (SplitMix64 of the pair; common
/// practice for deriving independent seeds).
fn refit_seed(seed: u64, index: u64) -> u64 {
    let mut z = seed ^ index.wrapping_mul(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The model's null fitted to the points: the line of slope −1 (fixed-slope and
/// single-line models) or a straight line of free slope (free model), by least squares
/// with the fit's kind of weights (inverse variance of y, or uniform).
fn equilibrium_truth(report: &FitReport) -> Option<Truth> {
    let g = &report.settings.given;
    let pts = &report.points;
    let x: Vec<f64> = pts.iter().map(|p| p.x).collect();
    let y: Vec<f64> = pts.iter().map(|p| p.y).collect();
    let w: Vec<f64> = pts
        .iter()
        .map(|p| match g.weights {
            Weighting::InverseVariance if p.y_se > 0.0 => 1.0 / (p.y_se * p.y_se),
            _ => 1.0,
        })
        .collect();
    let (intercept, slope) = if g.model == Model::Free {
        let l = fit_line(&x, &y, Some(&w))?;
        (l.intercept, l.slope)
    } else {
        let sw: f64 = w.iter().sum();
        let a = x
            .iter()
            .zip(&y)
            .zip(&w)
            .map(|((x, y), w)| w * (x + y))
            .sum::<f64>()
            / sw;
        (a, -1.0)
    };
    Some(Truth {
        kind: TruthKind::Equilibrium,
        curve: Curve {
            q: f64::NAN,
            intercept,
            slope_above: slope,
            slope_below: slope,
        },
    })
}

/// The joint fit's curve, when it detected a violation and quotes X.
fn fitted_truth(report: &FitReport) -> Option<Truth> {
    let joint = &report.fits[0];
    let violated = joint
        .equilibrium_p
        .is_some_and(|p| p <= report.settings.given.test_level());
    let quotable = joint.x_quotable && (violated || report.settings.given.model == Model::Line);
    Some(Truth {
        kind: TruthKind::Fitted,
        curve: joint.curve.filter(|_| quotable)?,
    })
}

/// What one simulated campaign's fit said, per fit (joint first).
#[derive(Default, Clone)]
struct Outcome {
    fits: Vec<FitOutcome>,
    aging_alarm: Option<bool>,
}

#[derive(Default, Clone)]
struct FitOutcome {
    /// Per quantity (x, break, slope_above): the smallest covering level and the error.
    levels: [Option<(f64, f64)>; 3],
    t_eff_error: Option<f64>,
    p_equilibrium: Option<f64>,
    p_slope: Option<f64>,
    p_lack_of_fit: Option<f64>,
}

const QUANTITIES: [&str; 3] = ["x", "break", "slope_above"];

fn series_of(f: &GroupFit, k: usize) -> Option<&Series> {
    match k {
        0 => f.resampled.x.as_ref(),
        1 => f.resampled.q.as_ref(),
        _ => f.resampled.slope_above.as_ref(),
    }
}

/// The stated level whose interval of quantity `k` is read at `read` (the slopes are read
/// widened, [`super::assess::slope_level`]; the break as stated).
fn stated_of(k: usize, read: f64, n: usize) -> f64 {
    if k == 1 { read } else { stated_level(read, n) }
}

/// The level at which quantity `k`'s replicates are read for the stated `level`.
fn read_at(k: usize, level: f64, n: usize) -> f64 {
    if k == 1 { level } else { slope_level(level, n) }
}

fn truth_of(t: &Truth, k: usize) -> f64 {
    match k {
        0 => t.ratio(),
        1 => t.curve.q,
        _ => t.curve.slope_above,
    }
}

fn outcome(r: &FitReport, truth: &Truth, method: IntervalMethod, temperature: f64) -> Outcome {
    let fits = r
        .fits
        .iter()
        .map(|f| {
            let mut o = FitOutcome {
                p_equilibrium: f.equilibrium_p,
                p_slope: f.thermometer_p,
                p_lack_of_fit: f.lack_of_fit_p,
                ..FitOutcome::default()
            };
            for k in 0..3 {
                let t = truth_of(truth, k);
                if let Some(s) = series_of(f, k).filter(|_| t.is_finite()) {
                    o.levels[k] = covering_level(
                        s.estimate,
                        &s.replicates,
                        s.jackknife.as_deref(),
                        method,
                        t,
                    )
                    .map(|l| (stated_of(k, l, f.n_samples), s.estimate - t));
                }
            }
            if let (Some(x), true) = (f.resampled.x.as_ref(), truth.ratio() != 0.0) {
                o.t_eff_error = Some(temperature / x.estimate - temperature / truth.ratio());
            }
            o
        })
        .collect();
    Outcome {
        fits,
        aging_alarm: r.aging.as_ref().map(|a| a.changes),
    }
}

/// Simulates `design.campaigns` campaigns about `truth` and refits each.
fn simulate(
    sim: &Simulator,
    truth: &Truth,
    fit: &FitSettings,
    design: &DesignSettings,
    stream: u64,
    progress: &dyn Progress,
) -> Vec<Option<Outcome>> {
    let means = sim.truth_means(truth);
    let seed = refit_seed(design.seed, stream);
    (0..design.campaigns)
        .into_par_iter()
        .map(|m| {
            let out = sim
                .campaign(&means, design.noise, seed, m as u64)
                .and_then(|c| {
                    let s = FitSettings {
                        seed: refit_seed(seed, m as u64),
                        ..fit.clone()
                    };
                    super::analyze(&c, &s, None, &Silent)
                })
                .ok()
                .map(|r| outcome(&r, truth, fit.interval, fit.temperature));
            progress.advance(1);
            out
        })
        .collect()
}

/// What is about to run and how long it should take: each simulated campaign costs about
/// what the data's fit did (both use every worker thread).
fn estimate_note(campaigns: usize, one_fit: f64) -> String {
    let total = campaigns as f64 * one_fit;
    let about = if total < 1.0 {
        "under a second".to_string()
    } else if total < 120.0 {
        format!("about {:.0} s", total.ceil())
    } else {
        format!("about {:.0} min", (total / 60.0).ceil())
    };
    format!(
        "simulating {campaigns} campaigns of this design, each refitted as the data were \
         (the data's fit took {one_fit:.2} s): {about}"
    )
}

/// The `level` quantile of covering levels, with its Monte-Carlo range; `None` when it
/// is 1 (the resamples cannot make an interval that covers often enough).
fn nominal_level(levels: &[f64], level: f64) -> Option<NominalLevel> {
    let mut v = levels.to_vec();
    v.sort_by(f64::total_cmp);
    let m = v.len();
    if m == 0 {
        return None;
    }
    let rank = |r: f64| v[(r.ceil() as usize).clamp(1, m) - 1];
    let centre = level * m as f64;
    let spread = 1.96 * (m as f64 * level * (1.0 - level)).sqrt();
    let at = rank(centre);
    (at < 1.0).then(|| NominalLevel {
        level: at,
        range: [rank(centre - spread), rank(centre + spread)],
    })
}

fn coverage_rows(
    outcomes: &[&Outcome],
    truth: &Truth,
    fit: &FitSettings,
    helds: &[Option<f64>],
) -> Vec<CoverageRow> {
    let mut rows = Vec::new();
    for (gi, held) in helds.iter().enumerate() {
        let of = outcomes.len();
        for (k, quantity) in QUANTITIES.iter().enumerate() {
            let t = truth_of(truth, k);
            let got: Vec<(f64, f64)> = outcomes
                .iter()
                .filter_map(|o| o.fits.get(gi).and_then(|f| f.levels[k]))
                .collect();
            if got.is_empty() {
                continue;
            }
            let levels: Vec<f64> = got.iter().map(|g| g.0).collect();
            let errors: Vec<f64> = got.iter().map(|g| g.1).collect();
            let covered = levels.iter().filter(|&&l| l <= fit.level).count();
            rows.push(CoverageRow {
                quantity,
                held: *held,
                truth: t,
                printed: Rate::of(got.len(), of).unwrap_or(Rate {
                    rate: 0.0,
                    se: 0.0,
                    hits: 0,
                    of,
                }),
                coverage: Rate::of(covered, got.len()),
                bias: mean_of(&errors),
                // A level from fewer campaigns than `fit --calibrate` accepts is not shown.
                calibrated: (levels.len() >= MIN_CAMPAIGNS)
                    .then(|| nominal_level(&levels, fit.level))
                    .flatten(),
            });
            if k == 0 && truth.ratio() != 0.0 {
                let te: Vec<f64> = outcomes
                    .iter()
                    .filter_map(|o| o.fits.get(gi).and_then(|f| f.t_eff_error))
                    .collect();
                let last = rows.last().cloned();
                if let Some(x) = last {
                    rows.push(CoverageRow {
                        quantity: "t_eff",
                        truth: fit.temperature / truth.ratio(),
                        bias: mean_of(&te),
                        ..x
                    });
                }
            }
        }
    }
    rows
}

fn test_rows(
    outcomes: &[&Outcome],
    truth: &Truth,
    fit: &FitSettings,
    helds: &[Option<f64>],
) -> Vec<TestRow> {
    let alpha = fit.test_level();
    let mut rows = Vec::new();
    let count = |f: &dyn Fn(&Outcome) -> Option<bool>| {
        let v: Vec<bool> = outcomes.iter().filter_map(|o| f(o)).collect();
        Rate::of(v.iter().filter(|&&b| b).count(), v.len())
    };
    for (gi, held) in helds.iter().enumerate() {
        if let Some(rejected) = count(&|o| {
            o.fits
                .get(gi)
                .and_then(|f| f.p_equilibrium)
                .map(|p| p <= alpha)
        }) {
            rows.push(TestRow {
                test: "equilibrium",
                level: alpha,
                held: *held,
                truth: truth.kind,
                null_true: truth.kind == TruthKind::Equilibrium,
                rejected,
            });
        }
        // The thermometer's null (slope −1 above the break) holds on the fitted curve of
        // the fixed-slope model only.
        if truth.kind == TruthKind::Fitted
            && matches!(fit.model, Model::Broken | Model::Smooth)
            && let Some(rejected) =
                count(&|o| o.fits.get(gi).and_then(|f| f.p_slope).map(|p| p <= alpha))
        {
            rows.push(TestRow {
                test: "slope_minus_one",
                level: alpha,
                held: *held,
                truth: truth.kind,
                null_true: true,
                rejected,
            });
        }
    }
    // The fitted curve is the model's own shape, so the lack-of-fit null holds: the joint
    // test at α, each of the K curves at α/K, as the report's caution uses them.
    let curves = helds.len().saturating_sub(1).max(1);
    for (gi, held) in helds.iter().enumerate() {
        let level = if gi == 0 {
            alpha
        } else {
            alpha / curves as f64
        };
        if truth.kind == TruthKind::Fitted
            && let Some(rejected) = count(&|o| {
                o.fits
                    .get(gi)
                    .and_then(|f| f.p_lack_of_fit)
                    .map(|p| p <= level)
            })
        {
            rows.push(TestRow {
                test: "lack_of_fit",
                level,
                held: *held,
                truth: truth.kind,
                null_true: true,
                rejected,
            });
        }
    }
    if truth.kind == TruthKind::Fitted
        && let Some(rejected) = count(&|o| o.aging_alarm)
    {
        rows.push(TestRow {
            test: "aging",
            level: alpha,
            held: None,
            truth: truth.kind,
            null_true: true,
            rejected,
        });
    }
    rows
}

/// The held time of every fit of a report (joint first).
fn helds(r: &FitReport) -> Vec<Option<f64>> {
    r.fits.iter().map(|f| f.tw.or(f.t)).collect()
}

/// The design check: the data's fit, then `design.campaigns` campaigns about each truth
/// (the fitted curve when the data quote X, and the equilibrium line), each refitted as
/// the data were.
///
/// # Errors
/// What [`super::analyze`] returns for the data; [`Error::Setting`] for bad settings.
pub fn check_design(
    campaign: &Campaign,
    fit: &FitSettings,
    design: &DesignSettings,
    input: Option<String>,
    progress: &dyn Progress,
) -> Result<DesignReport> {
    design.validate()?;
    let started = Instant::now();
    let report = super::analyze(campaign, fit, input.clone(), &Silent)?;
    let sim = Simulator::new(campaign, &report);
    let truths: Vec<Truth> = [fitted_truth(&report), equilibrium_truth(&report)]
        .into_iter()
        .flatten()
        .collect();
    progress.note(&estimate_note(
        design.campaigns * truths.len(),
        started.elapsed().as_secs_f64(),
    ));
    progress.start((design.campaigns * truths.len()) as u64);
    let hs = helds(&report);
    let (mut coverage, mut tests, mut failed) = (Vec::new(), Vec::new(), Vec::new());
    for (stream, truth) in truths.iter().enumerate() {
        let outs = simulate(&sim, truth, fit, design, stream as u64, progress);
        let ok: Vec<&Outcome> = outs.iter().flatten().collect();
        failed.push(outs.len() - ok.len());
        if truth.kind == TruthKind::Fitted {
            coverage = coverage_rows(&ok, truth, fit, &hs);
        }
        tests.extend(test_rows(&ok, truth, fit, &hs));
    }
    progress.finish();
    Ok(DesignReport {
        schema: DESIGN_SCHEMA,
        tool: ToolInfo::default(),
        input,
        fit: fit.clone(),
        design: *design,
        n_samples: campaign.n_samples(),
        excluded_samples: Vec::new(),
        n_points: campaign.n_points(),
        truths,
        failed,
        coverage,
        tests,
        data_report: report,
    })
}

/// The data's fit with calibrated intervals: `design.campaigns` campaigns simulated about
/// the fitted curve set, for each printed interval, the nominal level that covers at the
/// asked level on them, and the data's interval at that level is added to the fit
/// ([`GroupFit::calibrated`]). Without a quoted X (no violation detected) the report is
/// returned as it is, with a note on the joint fit.
///
/// # Errors
/// As [`check_design`].
pub fn calibrated_fit(
    campaign: &Campaign,
    fit: &FitSettings,
    design: &DesignSettings,
    input: Option<String>,
    progress: &dyn Progress,
) -> Result<FitReport> {
    design.validate()?;
    let started = Instant::now();
    let mut report = super::analyze(campaign, fit, input, &Silent)?;
    let Some(truth) = fitted_truth(&report) else {
        report.fits[0].calibrated = Some(Calibrated {
            level: fit.level,
            noise: design.noise.describe().into(),
            notes: vec![
                "no calibration: the fit quotes no X, so there is no curve to \
                         simulate from"
                    .into(),
            ],
            ..Calibrated::default()
        });
        return Ok(report);
    };
    let sim = Simulator::new(campaign, &report);
    progress.note(&estimate_note(
        design.campaigns,
        started.elapsed().as_secs_f64(),
    ));
    progress.start(design.campaigns as u64);
    let outs = simulate(&sim, &truth, fit, design, 0, progress);
    progress.finish();
    let ok: Vec<&Outcome> = outs.iter().flatten().collect();
    for (gi, f) in report.fits.iter_mut().enumerate() {
        f.calibrated = Some(calibrate_fit(f, gi, &ok, fit, design.noise));
    }
    Ok(report)
}

/// One fit's calibrated intervals from the covering levels of the simulated campaigns.
fn calibrate_fit(
    f: &GroupFit,
    gi: usize,
    ok: &[&Outcome],
    fit: &FitSettings,
    noise: Noise,
) -> Calibrated {
    let mut c = Calibrated {
        level: fit.level,
        noise: noise.describe().into(),
        ..Calibrated::default()
    };
    for (k, name) in QUANTITIES.iter().enumerate() {
        let Some(series) = series_of(f, k) else {
            continue;
        };
        let levels: Vec<f64> = ok
            .iter()
            .filter_map(|o| o.fits.get(gi).and_then(|g| g.levels[k]).map(|l| l.0))
            .collect();
        if levels.len() < MIN_CAMPAIGNS {
            c.notes.push(format!(
                "{name}: printed in {} simulated campaigns only, too few to calibrate",
                levels.len()
            ));
            continue;
        }
        let Some(nominal) = nominal_level(&levels, fit.level) else {
            c.notes.push(format!(
                "{name}: over {:.0}% of the simulated intervals miss the truth at any level \
                 these resamples allow; no calibrated interval",
                100.0 * (1.0 - fit.level)
            ));
            continue;
        };
        let iv = interval(
            series.estimate,
            &series.replicates,
            series.jackknife.as_deref(),
            fit.interval,
            read_at(k, nominal.level, f.n_samples),
        );
        let Some(iv) = iv else { continue };
        let ci = CalibratedInterval {
            low: Some(iv.low),
            high: Some(iv.high),
            nominal_level: nominal.level,
            nominal_range: nominal.range,
            campaigns: levels.len(),
            plain_coverage: levels.iter().filter(|&&l| l <= fit.level).count() as f64
                / levels.len() as f64,
        };
        match k {
            0 => {
                c.t_eff = Some(t_eff_interval(fit.temperature, &ci));
                c.x = Some(ci);
            }
            1 => c.brk = Some(ci),
            _ => c.slope_above = Some(ci),
        }
    }
    c
}

/// X's calibrated interval mapped by T/X; unbounded above where it reaches 0.
fn t_eff_interval(temperature: f64, x: &CalibratedInterval) -> CalibratedInterval {
    let (lo, hi) = (x.low.unwrap_or(f64::NAN), x.high.unwrap_or(f64::NAN));
    let (low, high) = if lo > 0.0 || hi < 0.0 {
        (Some(temperature / hi), Some(temperature / lo))
    } else if hi > 0.0 {
        (Some(temperature / hi), None)
    } else {
        (None, None)
    };
    CalibratedInterval { low, high, ..*x }
}
