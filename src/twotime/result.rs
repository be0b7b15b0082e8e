//! The result of a time-domain fit: what the JSON carries and the reports render.

use super::findings::{Caution, Verdict};
use super::points::Axes;
use super::settings::{FitSettings, Hold, Model};
use crate::common::{Estimate, ToolInfo};
use serde::Serialize;

/// The JSON schema version of [`FitReport`].
pub const SCHEMA: u32 = 8;

/// The fitted two-segment curve in plot coordinates: `y = intercept + slope_above · x`
/// for `x >= q`, and slope `slope_below` for `x < q` (continuous at `q`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Curve {
    /// Break.
    pub q: f64,
    /// Intercept of the upper segment.
    pub intercept: f64,
    /// Slope for `x >= q`.
    pub slope_above: f64,
    /// Slope for `x < q`.
    pub slope_below: f64,
}

impl Curve {
    /// The curve's y at x. Without a break (`q` undefined, as in the line model) the
    /// curve is the one straight line `intercept + slope_above · x`.
    pub fn eval(&self, x: f64) -> f64 {
        let y_q = self.intercept + self.slope_above * self.q;
        if x >= self.q || self.q.is_nan() {
            self.intercept + self.slope_above * x
        } else {
            y_q + self.slope_below * (x - self.q)
        }
    }
}

/// The fit of one group of points: all waiting times (`tw = None`) or one waiting time.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GroupFit {
    /// The waiting time held fixed along this curve (`--hold tw`), `None` for the joint fit.
    pub tw: Option<f64>,
    /// The later time held fixed along this curve (`--hold t`), `None` otherwise.
    pub t: Option<f64>,
    /// The fitted model.
    pub model: Model,
    /// Number of independent samples.
    pub n_samples: usize,
    /// Number of parametric points in the group.
    pub n_points: usize,
    /// The fluctuation–dissipation ratio X (minus the slope below the break); JSON `x`.
    #[serde(rename = "x")]
    pub ratio: Estimate,
    /// `T_eff = T / X`; ends are `None` ("unbounded") when X's interval reaches 0.
    pub t_eff: Estimate,
    /// The break q (the correlation where the slope changes).
    #[serde(rename = "break")]
    pub brk: Estimate,
    /// The slope above the break: fitted in the free model; for the fixed model, a free
    /// line through the points above the break, as a check of the quasi-equilibrium slope −1.
    /// JSON `slope_above` ("slope above q" in the report).
    #[serde(rename = "slope_above")]
    pub fast_slope: Estimate,
    /// The p-value of the test of no break (equilibrium), calibrated by resampling.
    /// JSON `p_equilibrium` (the report's column "p(equilibrium)").
    #[serde(rename = "p_equilibrium")]
    pub equilibrium_p: Option<f64>,
    /// Resamples that calibrated the test (the p-value's floor is `1/(this + 1)`).
    pub null_resamples: usize,
    /// The test statistic `SSE(no break) − SSE(broken stick)`.
    /// JSON `equilibrium_statistic`.
    #[serde(rename = "equilibrium_statistic")]
    pub equilibrium_stat: Option<f64>,
    /// The p-value of the test that the slope above the break is −1 (the thermometer
    /// check), from resamples centred on the estimate; `None` for the line model, without
    /// a break, or with the break at the edge.
    /// JSON `p_slope_minus_one` (the report's column "p(slope -1)").
    #[serde(rename = "p_slope_minus_one")]
    pub thermometer_p: Option<f64>,
    /// The p-value of the lack-of-fit test of the model's shape (binned residuals,
    /// calibrated by resamples moved onto the fitted model); for the joint fit of several
    /// curves, of the sum of the curves' statistics. `None` where not fitted.
    /// JSON `p_lack_of_fit` (the report's column "p(lack of fit)").
    #[serde(rename = "p_lack_of_fit")]
    pub lack_of_fit_p: Option<f64>,
    /// The lack-of-fit statistic `Σ_bins (Σ w e)² / Σ w`. JSON `lack_of_fit_statistic`.
    #[serde(rename = "lack_of_fit_statistic")]
    pub lack_of_fit_stat: Option<f64>,
    /// X and its interval can be quoted: a break was detected away from the edge of the
    /// points (always true for the line model).
    pub x_quotable: bool,
    /// The fitted curve.
    pub curve: Option<Curve>,
    /// `(q, SSE)` over every candidate break.
    pub profile: Vec<[f64; 2]>,
    /// Resamples whose fit failed (excluded from the intervals).
    pub failed_resamples: usize,
    /// The fraction of resamples whose break sits in the first or last allowed interval.
    pub break_at_edge: Option<f64>,
    /// What the data show (a code, its numbers; the report says it in words).
    pub verdict: Verdict,
    /// Cautions about this fit.
    pub cautions: Vec<Caution>,
    /// The resampled X values (for figures; not written to JSON).
    #[serde(skip)]
    pub ratio_replicates: Vec<f64>,
    /// The resampled curves (for the figure's band; not written to JSON).
    #[serde(skip)]
    pub curve_replicates: Vec<Curve>,
    /// The resampled values behind each printed interval (for the design calibration;
    /// not written to JSON).
    #[serde(skip)]
    pub resampled: Resampled,
    /// Intervals calibrated on simulated campaigns of this design (`fit --calibrate`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub calibrated: Option<Calibrated>,
    /// The smooth X(C) beside the broken stick (`--model smooth`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub shape: Option<ShapeFit>,
}

/// The smooth X(C) of one fit, with its bands, the shape test and the verdict.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ShapeFit {
    /// The constraint on X(C).
    pub constraint: crate::fit::smooth::Constraint,
    /// The knots of the ramps (in C).
    pub knots: Vec<f64>,
    /// X "leaves 1" where it falls to `1 − departure`.
    pub departure: f64,
    /// The largest C where X(C) ≤ 1 − departure (the end of the quasi-equilibrium regime),
    /// with its percentile interval.
    pub leaves_one: Estimate,
    /// X of a weighted line through the points above where the smooth X leaves 1 (the top of
    /// the curve, measured rather than imposed), with its percentile interval.
    pub x_above_leaving: Estimate,
    /// A continuous shape is claimed only when that interval lies within `1 ± top_margin`.
    pub top_margin: f64,
    /// One break against the smooth curve.
    pub test: ShapeTest,
    /// Grid points below the break where the one-break X lies inside the X(C) band.
    pub constant_inside: Option<usize>,
    /// Grid points below the break that were checked.
    pub constant_checked: Option<usize>,
    /// The farthest end of the X(C) band from the one-break X among the checked points.
    pub band_reach_below_break: Option<f64>,
    /// How much X drifts across the lower branch (up to one knot piece below the break),
    /// `X(C_hi) − X(C_lo)` from a weighted parabola's curvature, with its percentile
    /// interval.
    pub drift_below_break: Estimate,
    /// One step is claimed only when that interval lies within `±2·one_step_margin` (X
    /// within ±one_step_margin of its mean on the branch).
    pub one_step_margin: f64,
    /// `[C, X]` where X exceeds 1 by more than its band, at its largest (unconstrained
    /// curve only).
    pub x_above_one: Option<[f64; 2]>,
    /// The verdict between shapes.
    pub verdict: ShapeVerdict,
    /// X(C) and T_eff(C) on the grid, with pointwise percentile bands.
    pub x_of_c: Vec<XAtC>,
    /// Resamples whose smooth fit failed (left out of the bands and intervals).
    pub failed_resamples: usize,
    /// The comparison with a static x(q) (`--overlap`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub static_comparison: Option<StaticComparison>,
    /// X on the grid per resample (`x_of_c.len()` values each; not written to JSON).
    #[serde(skip)]
    pub replicates: Vec<f64>,
}

/// The dynamic X(C) against the static x(q) at q = C.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StaticComparison {
    /// The mean of X(C) − x(C) over the grid, with its percentile interval.
    pub mean_difference: Estimate,
    /// `[C, X(C) − x(C)]` where the difference is largest in size.
    pub largest_difference: [f64; 2],
    /// Grid points where x(C) lies inside the X(C) band.
    pub inside_band: usize,
    /// Grid points compared.
    pub points: usize,
    /// Negative overlaps were folded onto |q|.
    pub folded: bool,
    /// P(q) was a histogram (else samples).
    pub histogram: bool,
    /// x(q) at each grid C.
    pub x_static: Vec<f64>,
}

/// X and T_eff at one C of the grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct XAtC {
    /// C (or C/C(t,t) on normalized axes).
    pub c: f64,
    /// The smooth curve's fitted y (k·T·chi, normalized like the axes) at this C.
    pub y: f64,
    /// X(C) with its pointwise band.
    pub x: Estimate,
    /// T_eff(C) = T/X(C) with its band.
    pub t_eff: Estimate,
}

/// The test of one break against the smooth X(C).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ShapeTest {
    /// `SSE(one break) − SSE(smooth)`.
    pub statistic: f64,
    /// Its p-value from resamples moved onto the broken stick.
    pub p: f64,
    /// Resamples that calibrated it.
    pub resamples: usize,
    /// The level it is read at (α, or α/K per curve for K curves).
    pub level: f64,
}

/// Which shape the data show, at this precision.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum ShapeVerdict {
    /// The equilibrium test does not reject: X = 1 at this precision.
    Equilibrium {
        /// The equilibrium p-value.
        p_equilibrium: f64,
        /// Its level.
        alpha: f64,
    },
    /// One break describes the data: X constant below q (two temperatures).
    OneStep {
        /// The shape test's p-value.
        p: f64,
        /// Its level.
        level: f64,
        /// The one-break X with its interval.
        x: Option<[f64; 3]>,
        /// The break.
        q: f64,
        /// X's drift across the lower branch with its interval (inside
        /// `±2·one_step_margin`): smaller variations are not excluded.
        drift: Option<[f64; 3]>,
    },
    /// The smooth curve fits better than one break: X changes continuously with C.
    Continuous {
        /// The shape test's p-value.
        p: f64,
        /// Its level.
        level: f64,
        /// X at the smallest fitted C, with its band.
        x_lowest_c: Option<[f64; 3]>,
        /// The smallest fitted C.
        lowest_c: f64,
        /// Where X leaves 1, with its interval.
        leaves_one: Option<[f64; 3]>,
    },
    /// Neither shape is established at this precision.
    Undecided {
        /// The shape test's p-value.
        p: f64,
        /// Its level.
        level: f64,
        /// Why one step is not claimed.
        reason: String,
    },
}

/// One quantity's estimate with its resamples and leave-one-out values: what forms its
/// interval at any level.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Series {
    /// The full-data estimate.
    pub estimate: f64,
    /// Its bootstrap replicates (failed resamples left out).
    pub replicates: Vec<f64>,
    /// Its leave-one-out values, when every one was fitted (BCa's acceleration).
    pub jackknife: Option<Vec<f64>>,
}

/// The series behind the intervals a fit prints (`None` where it prints none).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Resampled {
    /// X.
    pub x: Option<Series>,
    /// The break q.
    pub q: Option<Series>,
    /// The slope above the break.
    pub slope_above: Option<Series>,
}

/// An interval at the nominal level that covered at the requested level on simulated
/// campaigns of the same design.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CalibratedInterval {
    /// Lower end.
    pub low: Option<f64>,
    /// Upper end (`None`: unbounded, for T_eff when X's calibrated interval reaches 0).
    pub high: Option<f64>,
    /// The nominal level used to form it.
    pub nominal_level: f64,
    /// The Monte-Carlo range (95%) of that nominal level.
    pub nominal_range: [f64; 2],
    /// Simulated campaigns in which the plain interval was printed (the calibration's size).
    pub campaigns: usize,
    /// The share of those campaigns whose plain interval (at the requested level) covered
    /// the truth.
    pub plain_coverage: f64,
}

/// The calibrated intervals of one fit, and why one is missing.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct Calibrated {
    /// The level the intervals are calibrated to cover.
    pub level: f64,
    /// How the simulated campaigns' noise was drawn, in words.
    pub noise: String,
    /// X.
    pub x: Option<CalibratedInterval>,
    /// T_eff = T/X (X's calibrated interval mapped).
    pub t_eff: Option<CalibratedInterval>,
    /// The break q.
    #[serde(rename = "break")]
    pub brk: Option<CalibratedInterval>,
    /// The slope above the break.
    pub slope_above: Option<CalibratedInterval>,
    /// Why a quantity has no calibrated interval.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub notes: Vec<String>,
}

/// A parametric point with its sample errors (for the points CSV and the figures).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PointRecord {
    /// Waiting time.
    pub tw: f64,
    /// Later time.
    pub t: f64,
    /// Parametric x.
    pub x: f64,
    /// Standard error of x.
    pub x_se: f64,
    /// Parametric y.
    pub y: f64,
    /// Standard error of y.
    pub y_se: f64,
}

/// A curve left out of the aging trend, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LeftOut {
    /// Its held time.
    pub held: f64,
    /// Why it was left out.
    pub reason: String,
}

/// How X changes with the held time: a line in log₁₀ of it over the usable curves.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgingTrend {
    /// Which time is held along the curves.
    pub hold: Hold,
    /// The held times of the curves used.
    pub curves_used: Vec<f64>,
    /// The curves left out (no break, break at the edge, not fitted), with the reason.
    pub left_out: Vec<LeftOut>,
    /// `dX / d log₁₀(held time)`, with its percentile interval.
    pub change_per_decade: Estimate,
    /// The interval excludes 0: X changes with age.
    pub changes: bool,
    /// Whether X has settled within `settled_within` per decade, drifts, or neither.
    pub settling: Settling,
    /// The interval of the change per decade at level `1 − 2α` that the settled test
    /// compares with `±settled_within` (two one-sided tests at level α each).
    pub settling_interval: Option<[f64; 2]>,
    /// The margin (X per decade).
    pub settled_within: f64,
}

/// What the trend says about X settling with age.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Settling {
    /// The change per decade lies within ±margin (two one-sided tests reject both ends).
    Settled,
    /// The change per decade excludes 0 at the stated level.
    Drifting,
    /// Neither shown.
    Undecided,
    /// No trend (fewer than 2 usable curves).
    Untested,
}

/// One value of C on the grid of the long-age limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LimitPoint {
    /// C (or C/C(t,t) on normalized axes).
    pub c: f64,
    /// The limit y∞(C).
    pub y_inf: f64,
    /// Lower end of its interval.
    pub low: Option<f64>,
    /// Upper end of its interval.
    pub high: Option<f64>,
    /// Used for the slope X∞ (below the break).
    pub below: bool,
}

/// The long-age limit (`--limit`): `y(C, tw) = y∞(C) + a(C)·(tw/tw₀)^−α` at fixed C.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgeLimit {
    /// The waiting times extrapolated.
    pub waiting_times: Vec<f64>,
    /// The joint fit's break below which X∞ is the slope (none: every grid value).
    pub break_used: Option<f64>,
    /// `X∞ = −dy∞/dC` below the break.
    pub x_inf: Estimate,
    /// `T/X∞`.
    pub t_eff_inf: Estimate,
    /// The approach exponent α.
    pub alpha: Estimate,
    /// Share of resamples whose α lies at an end of its search range.
    pub alpha_at_edge_share: f64,
    /// α is not resolved (at an end of its range in the data or in over 5% of resamples).
    pub alpha_unresolved: bool,
    /// Resamples whose curves could not be fitted.
    pub failed_resamples: usize,
    /// y∞ on the grid of C.
    pub points: Vec<LimitPoint>,
}

/// Settings as recorded with the result (resolved axes, the value of k).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SettingsRecord {
    /// The settings as given.
    #[serde(flatten)]
    pub given: FitSettings,
    /// Boltzmann's constant used.
    pub k: f64,
    /// The axes actually used ("plain" or "normalized").
    pub axes_used: Axes,
    /// The level at which the slopes' replicates (X, T_eff, the slope above the break)
    /// were read: the stated level widened to Student's width for these samples.
    pub slope_level: f64,
    /// With `--two-time`: waiting times per local fit along tw, and the level at which
    /// the two-time ratio's replicates were read.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub two_time: Option<TwoTimeRecord>,
}

/// How the two-time ratio was formed (with `--two-time`).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TwoTimeRecord {
    /// Waiting times per local fit (3 or 5).
    pub window: usize,
    /// The level at which its replicates were read (percentile intervals).
    pub read_level: f64,
    /// Later times left out to stay within the limit (evenly spread in rank).
    pub times_left_out: usize,
}

/// The full result of a time-domain fit; serialized as the JSON output.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitReport {
    /// JSON schema version.
    pub schema: u32,
    /// The tool that made it.
    pub tool: ToolInfo,
    /// The input file, when there was one.
    pub input: Option<String>,
    /// Settings that shaped the result.
    pub settings: SettingsRecord,
    /// Number of samples.
    pub n_samples: usize,
    /// Samples of the file left out because they miss points (`--drop-incomplete`).
    pub excluded_samples: Vec<crate::input::ExcludedSample>,
    /// The waiting times.
    pub waiting_times: Vec<f64>,
    /// The joint fit first, then one per waiting time.
    pub fits: Vec<GroupFit>,
    /// X against the held time, over the usable curves.
    pub aging: Option<AgingTrend>,
    /// The long-age limit, when asked for (`--limit`); `Err` says why it was not formed.
    #[serde(
        skip_serializing_if = "Option::is_none",
        serialize_with = "limit_or_note"
    )]
    pub age_limit: Option<std::result::Result<AgeLimit, String>>,
    /// What the data show (the joint fit's verdict).
    pub verdict: Verdict,
    /// Cautions about the whole campaign.
    pub cautions: Vec<Caution>,
    /// The parametric points.
    pub points: Vec<PointRecord>,
    /// The two-time ratio X(t,tw) at fixed t (`fit --two-time`), absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub two_time: Option<Vec<super::two_time::TwoTimePoint>>,
    /// The observable this report is of, when the file has an observable column.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub observable: Option<String>,
    /// The joint fit's X in each resample (NaN where it had none), in resample order: what
    /// the joint test of several observables pairs across them. Not serialized.
    #[serde(skip)]
    pub ratio_draws: Vec<f64>,
}

/// The limit as its object, or `{"note": why}` when it could not be formed.
fn limit_or_note<S: serde::Serializer>(
    v: &Option<std::result::Result<AgeLimit, String>>,
    ser: S,
) -> std::result::Result<S::Ok, S::Error> {
    use serde::ser::SerializeMap;
    match v {
        Some(Ok(l)) => l.serialize(ser),
        Some(Err(note)) => {
            let mut m = ser.serialize_map(Some(1))?;
            m.serialize_entry("note", note)?;
            m.end()
        }
        None => ser.serialize_none(),
    }
}

#[cfg(test)]
mod curve_tests {
    use super::Curve;

    #[test]
    fn a_curve_without_a_break_is_its_straight_line() {
        // The line model's curve has no break; it used to evaluate to NaN everywhere, so
        // the FD plot drew its fit along the bottom of the axes.
        let c = Curve {
            q: f64::NAN,
            intercept: 0.84,
            slope_above: -0.84,
            slope_below: -0.84,
        };
        assert!((c.eval(0.5) - 0.42).abs() < 1e-12);
        let b = Curve { q: 0.6, ..c };
        assert!((b.eval(0.2) - (0.84 - 0.84 * 0.2)).abs() < 1e-12);
    }
}
