//! What a fit found, as typed values: a stable code, the numbers, and the subject (the
//! campaign, the joint fit, or one curve). The report layer turns each into a sentence
//! (`report::findings`); the JSON carries the code, the numbers and that sentence. The
//! codes are listed in docs/findings.md; they do not change between versions.

use super::settings::Hold;
use serde::Serialize;

/// Below this many samples the report says intervals are unreliable.
pub const FEW_SAMPLES: usize = 20;
/// Below this many samples the report says intervals run a little short (measured).
pub const SMALL_SAMPLES: usize = 40;

/// What a finding is about.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Subject {
    /// The whole campaign (its samples, its weights, its aging).
    Campaign,
    /// The fit of all curves together.
    AllCurves,
    /// The curve at this waiting time.
    Tw(f64),
    /// The curve at this later time (`--hold t`).
    T(f64),
}

/// Which side of the break.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Side {
    /// `C < q`.
    Below,
    /// `C ≥ q`.
    Above,
}

impl Side {
    /// The word.
    pub fn word(self) -> &'static str {
        match self {
            Side::Below => "below",
            Side::Above => "above",
        }
    }
}

/// A caution: something that can mislead, with its numbers.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "snake_case")]
pub enum Finding {
    /// Every point has zero spread: inverse-variance weights undefined, uniform used.
    NoSpreadUniformWeights,
    /// Some variances were floored at 1e-6 of the median for the weights.
    VarianceFloored,
    /// The aging trend's interval excludes 0.
    XChangesWithAge {
        /// Which time is held along the curves.
        hold: Hold,
        /// `dX / d log₁₀(held)`.
        change_per_decade: f64,
        /// Lower end of its interval.
        low: f64,
        /// Upper end of its interval.
        high: f64,
        /// Curves in the trend.
        curves: usize,
        /// The first held time used.
        first: f64,
        /// The last held time used.
        last: f64,
    },
    /// The aging trend's interval excludes 0, but lack of fit was found: the change may
    /// come from curvature (each curve reaching a different part of a bending line).
    XChangesWithAgeCurved {
        /// Which time is held along the curves.
        hold: Hold,
        /// `dX / d log₁₀(held)`.
        change_per_decade: f64,
        /// Lower end of its interval.
        low: f64,
        /// Upper end of its interval.
        high: f64,
        /// Curves in the trend.
        curves: usize,
        /// The first held time used.
        first: f64,
        /// The last held time used.
        last: f64,
    },
    /// No sample-to-sample spread: the intervals only reflect rounding.
    IdenticalSamples,
    /// `--limit`: the approach exponent α sits at an end of its search range in the data
    /// or in over 5% of resamples, so X∞ rests on the model alone.
    LimitApproachUnresolved {
        /// Share of resamples with α at an end of its range.
        share: f64,
    },
    /// `--limit`: X∞'s interval reaches 0, so T_eff∞ has no upper bound.
    LimitUnbounded,
    /// `--two-time`: at some grid points C does not change measurably with tw (the
    /// interval of dC/d ln tw reaches 0), so no two-time ratio is given there.
    TwoTimeUnresolved {
        /// Grid points without a ratio.
        points: usize,
        /// Grid points in all.
        of: usize,
    },
    /// 20–39 samples: intervals run a little short (measured).
    SmallSamples {
        /// Number of samples.
        samples: usize,
    },
    /// Fewer than 20 samples: intervals unreliable.
    FewSamples {
        /// Number of samples.
        samples: usize,
        /// The size below which this fires.
        limit: usize,
    },
    /// Over 1% of the resamples could not be fitted.
    FailedResamples {
        /// Resamples left out.
        failed: usize,
        /// Resamples drawn.
        total: usize,
    },
    /// The break sits at the edge in over 5% of the resamples (X not quoted).
    BreakAtEdgeInResamples {
        /// The share of resamples.
        share: f64,
    },
    /// Few points on one side of the break.
    FewPointsOneSide {
        /// How many.
        points: usize,
        /// Which side.
        side: Side,
    },
    /// The break is in the first or last interval the search allows (X not quoted).
    BreakNextToEdge,
    /// The resampled breaks form separate groups.
    BreaksSplit {
        /// Median of the lower group.
        near_low: f64,
        /// Median of the upper group.
        near_high: f64,
    },
    /// The thermometer test rejects: the slope above the break is not −1.
    SlopeAboveNotMinusOne {
        /// The slope.
        slope: f64,
        /// Lower end of its interval.
        low: Option<f64>,
        /// Upper end of its interval.
        high: Option<f64>,
        /// The test's p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// The thermometer test rejects, but the fit shows lack of fit: curvature may tilt the
    /// upper line.
    SlopeAboveCurved {
        /// The slope.
        slope: f64,
        /// Lower end of its interval.
        low: Option<f64>,
        /// Upper end of its interval.
        high: Option<f64>,
        /// The thermometer test's p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// The lack-of-fit test rejects: the points do not follow the model's shape.
    LackOfFit {
        /// Its p-value.
        p: f64,
        /// The level it was tested at (α jointly, α/K per curve).
        level: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// X above 1 (T_eff below the bath), reported as measured.
    RatioAboveOne {
        /// X (JSON `x`).
        #[serde(rename = "x")]
        ratio: f64,
    },
    /// X below 0 (negative T_eff), reported as measured.
    RatioBelowZero {
        /// X (JSON `x`).
        #[serde(rename = "x")]
        ratio: f64,
    },
}

/// A finding with its subject.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Caution {
    /// What it is about.
    pub subject: Subject,
    /// What was found.
    #[serde(flatten)]
    pub finding: Finding,
}

/// What one fit shows, in one statement.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "snake_case")]
pub enum Verdict {
    /// Too few points for two branches.
    NotFitted {
        /// Points in the curve.
        points: usize,
        /// Points each branch needs.
        min_branch: usize,
    },
    /// No interval of X could be formed.
    NoInterval,
    /// The equilibrium test does not reject.
    Equilibrium {
        /// Its p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
        /// The test's level α.
        alpha: f64,
    },
    /// A break is detected at the edge of the points: X is not quoted.
    BreakAtEdge {
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
        /// The break.
        q: f64,
        /// X, without an interval (JSON `x`).
        #[serde(rename = "x")]
        ratio: f64,
    },
    /// The line model: one slope, different from −1.
    LineSlope {
        /// X = −slope, with its interval.
        #[serde(rename = "x")]
        ratio: [f64; 3],
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// The line model: the slope is compatible with −1.
    LineEquilibrium {
        /// X = −slope, with its interval.
        #[serde(rename = "x")]
        ratio: [f64; 3],
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// X compatible with 0 below the break: no response, as in coarsening.
    NoSlowResponse {
        /// The break.
        q: f64,
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// A break, but X compatible with 1.
    WeakViolation {
        /// X with its interval.
        #[serde(rename = "x")]
        ratio: [f64; 3],
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// One break with 0 < X < 1.
    OneBreak {
        /// The break.
        q: f64,
        /// X with its interval.
        #[serde(rename = "x")]
        ratio: [f64; 3],
        /// The confidence level.
        level: f64,
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// The lack-of-fit test rejects: the curve bends where the model is straight, so no
    /// single break and X describe it.
    Curved {
        /// The lack-of-fit p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
        /// The level it was tested at.
        alpha: f64,
        /// The equilibrium test's p-value.
        p_equilibrium: f64,
    },
    /// One break with X above 1.
    ColderThanBath {
        /// X with its interval.
        #[serde(rename = "x")]
        ratio: [f64; 3],
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
    /// One break with X below 0.
    NegativeRatio {
        /// X with its interval.
        #[serde(rename = "x")]
        ratio: [f64; 3],
        /// The equilibrium p-value.
        p: f64,
        /// Resamples that calibrated it.
        resamples: usize,
    },
}
