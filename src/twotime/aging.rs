//! How X changes with age: a least-squares line of the per-curve X against log₁₀ of the
//! held time, over the curves where X is quoted, with a percentile interval from the same
//! resamples (all curves of one resample share its samples, so their correlation is
//! carried). One bad curve cannot raise the alarm: curves whose break sits at the edge are
//! left out, with the reason.

use super::findings::Finding;
use super::fitting::Group;
use super::model::Draw;
use super::result::{AgingTrend, GroupFit, LeftOut, Settling};
use super::settings::FitSettings;
use crate::common::Estimate;
use crate::resample::{IntervalMethod, interval};

/// The trend over the per-curve fits (`None` with fewer than two curves).
pub fn aging_trend(
    groups: &[Group],
    fits: &[GroupFit],
    reps: &[Option<Draw>],
    s: &FitSettings,
) -> Option<AgingTrend> {
    if groups.len() < 3 {
        return None;
    }
    let ng = groups.len();
    let mut used = Vec::new();
    let mut left_out = Vec::new();
    for (gi, (g, f)) in groups.iter().zip(fits).enumerate().skip(1) {
        let held = g.held.unwrap_or(f64::NAN);
        match left_out_reason(f, held) {
            Some(r) => left_out.push(LeftOut {
                held,
                reason: r.into(),
            }),
            None => used.push((gi, held.log10(), f.ratio.estimate.unwrap_or(f64::NAN))),
        }
    }
    let mut trend = AgingTrend {
        hold: s.hold,
        curves_used: used.iter().map(|u| 10f64.powf(u.1)).collect(),
        left_out,
        change_per_decade: Estimate::none("fewer than 2 usable curves"),
        changes: false,
        settling: Settling::Untested,
        settling_interval: None,
        settled_within: s.settled_within,
    };
    if used.len() < 2 {
        return Some(trend);
    }
    let lx: Vec<f64> = used.iter().map(|u| u.1).collect();
    let estimate = ols_slope(&lx, &used.iter().map(|u| u.2).collect::<Vec<_>>());
    let mut xs = vec![0.0; used.len()];
    let slopes: Vec<f64> = reps
        .chunks(ng)
        .filter_map(|r| {
            for (k, u) in used.iter().enumerate() {
                xs[k] = r[u.0]?.ratio;
            }
            Some(ols_slope(&lx, &xs))
        })
        .collect();
    let iv = interval(estimate, &slopes, None, IntervalMethod::Percentile, s.level);
    trend.change_per_decade = Estimate::with(estimate, iv.as_ref());
    trend.changes = iv.is_some_and(|i| i.low > 0.0 || i.high < 0.0);
    // Settled: two one-sided tests at level α that the change per decade is above −δ and
    // below +δ, i.e. its 1 − 2α interval inside ±δ (Schuirmann, J. Pharmacokin. Biopharm.
    // 15, 657–680 (1987)).
    let tost = interval(
        estimate,
        &slopes,
        None,
        IntervalMethod::Percentile,
        1.0 - 2.0 * s.test_level(),
    );
    trend.settling_interval = tost.as_ref().map(|i| [i.low, i.high]);
    let d = s.settled_within;
    trend.settling = if trend.changes {
        Settling::Drifting
    } else if tost.is_some_and(|i| i.low > -d && i.high < d) {
        Settling::Settled
    } else {
        Settling::Undecided
    };
    Some(trend)
}

/// Why a curve is left out of the trend, if it is.
fn left_out_reason(f: &GroupFit, held: f64) -> Option<&'static str> {
    if f.ratio.estimate.is_none() && f.equilibrium_p.is_none() {
        Some("not fitted")
    } else if !f.x_quotable && f.ratio.estimate.is_some() {
        Some("break at the edge of the points")
    } else if !f.x_quotable {
        Some("no break detected")
    } else if !(held > 0.0) {
        Some("held time not positive (no logarithm)")
    } else {
        None
    }
}

/// The finding "X changes with age", when the trend's interval excludes 0; when lack of
/// fit was found (`curved`), the variant that names curvature as a possible cause.
pub fn aging_finding(a: &AgingTrend, curved: bool) -> Option<Finding> {
    let e = &a.change_per_decade;
    let (hold, change_per_decade) = (a.hold, e.estimate.unwrap_or(f64::NAN));
    let (low, high) = (e.low.unwrap_or(f64::NAN), e.high.unwrap_or(f64::NAN));
    let curves = a.curves_used.len();
    let first = a.curves_used.first().copied().unwrap_or(f64::NAN);
    let last = a.curves_used.last().copied().unwrap_or(f64::NAN);
    a.changes.then_some({
        if curved {
            Finding::XChangesWithAgeCurved {
                hold,
                change_per_decade,
                low,
                high,
                curves,
                first,
                last,
            }
        } else {
            Finding::XChangesWithAge {
                hold,
                change_per_decade,
                low,
                high,
                curves,
                first,
                last,
            }
        }
    })
}

/// The least-squares slope of y on x.
pub(super) fn ols_slope(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    sxy / sxx
}
