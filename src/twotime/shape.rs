//! The smooth X(C) beside the broken stick (`--model smooth`): the curve on a grid with
//! pointwise bands from the same cluster bootstrap, where X leaves 1, and the test of one
//! break against the smooth curve, with the verdict between shapes.
//!
//! The test's statistic is `T = SSE(one break) − SSE(smooth)`. Its null distribution comes
//! from resamples moved onto the fitted broken stick (`r* − (r̂ − f̂_broken)`), refitted by
//! both models with their own weights, as the lack-of-fit and equilibrium tests do (Hall &
//! Wilson, Biometrics 47, 757 (1991)). The two models are not nested (the smooth curve's
//! knots are fixed, the break is free), so `T` may be negative; the resampled null
//! calibrates it all the same.

use super::assess::t_eff_estimate;
use super::findings::Verdict;
use super::result::{GroupFit, ShapeFit, ShapeTest, ShapeVerdict, XAtC};
use super::settings::FitSettings;
use crate::common::Estimate;
use crate::fit::line::{curvature, fit_line};
use crate::fit::smooth::{Constraint, Knots, SmoothFit, fit_smooth};
use crate::resample::{IntervalMethod, interval};

/// Points of the X(C) grid, from the smallest to the largest fitted C.
pub const GRID: usize = 41;

/// X "leaves 1" where it falls to `1 − DEPARTURE`.
pub const DEPARTURE: f64 = 0.05;

/// One step is claimed only when X stays within this distance of its mean across the
/// lower branch: the interval of its drift there ([`Setup::drift_below`], a parabola's
/// slope change, so one number and no multiplicity over a grid) lies within
/// `±2·ONE_STEP_MARGIN`.
pub const ONE_STEP_MARGIN: f64 = 0.1;

/// A continuous shape is claimed only where the top of the curve is measured: the interval
/// of the X of a line through the points above where the smooth X leaves 1 must lie within
/// `1 ± TOP_MARGIN` (a wrong temperature or response units tilt it, and too few points
/// leave it wide; a bend of the curve below does not).
pub const TOP_MARGIN: f64 = 0.02;

/// Values kept per resample and group: X on the grid, where X leaves 1, the test's
/// statistic of the resample moved onto the broken stick, the X of the points above where
/// the full-data curve leaves 1, and the drift of X across the lower branch.
pub const ROW: usize = GRID + 4;

/// What every smooth fit of one group shares, fixed by the full data.
#[derive(Debug, Clone)]
pub struct Setup {
    /// Knots (the stated rule of [`Knots::from_data`] on the group's C values).
    pub knots: Knots,
    /// The constraint.
    pub constraint: Constraint,
    /// The grid of C.
    pub grid: Vec<f64>,
    /// `r̂ − f̂_broken` per point of the group: subtracting it moves a resample onto the
    /// fitted broken stick.
    pub shift: Vec<f64>,
    /// The group's C values (full data).
    pub x: Vec<f64>,
    /// Least points above where X leaves 1 for a continuous shape to be claimed.
    pub min_above: usize,
    /// Where the full-data smooth X leaves 1 (NaN until fitted, or when it never does).
    pub top: f64,
    /// The full data's [`Setup::ratio_above`] (NaN until fitted).
    pub top_x: f64,
    /// The C range of the lower branch's points: from the smallest C to one knot piece
    /// below the full data's break ([`branch_end`]); NaN without a break.
    pub branch: [f64; 2],
    /// The full data's [`Setup::drift_below`] (NaN until fitted).
    pub drift: f64,
}

/// The points whose C passes `keep`.
fn select(x: &[f64], z: &[f64], w: &[f64], keep: impl Fn(f64) -> bool) -> [Vec<f64>; 3] {
    let mut out = [Vec::new(), Vec::new(), Vec::new()];
    for ((&x, &z), &w) in x.iter().zip(z).zip(w) {
        if keep(x) {
            out[0].push(x);
            out[1].push(z);
            out[2].push(w);
        }
    }
    out
}

/// One knot piece below the break `q` (the ramps spread a step over about one piece):
/// `q − h`, with `h` the width of the piece that holds q; `None` when q is below the first
/// knot or not finite.
pub fn branch_end(knots: &Knots, q: f64) -> Option<f64> {
    let kn = knots.values();
    let piece = kn.iter().rposition(|&t| t <= q)?.min(kn.len() - 2);
    Some(q - (kn[piece + 1] - kn[piece]))
}

impl Setup {
    /// The setup of a group whose points have these x, responses `z` and broken-stick
    /// fitted values; `None` when the knots cannot be placed.
    pub fn new(
        x: &[f64],
        z: &[f64],
        fitted: &[f64],
        constraint: Constraint,
        min_above: usize,
    ) -> Option<Setup> {
        let knots = Knots::from_data(x)?;
        let (lo, hi) = (knots.at[0], knots.at[knots.pieces]);
        let grid = (0..GRID)
            .map(|i| lo + (hi - lo) * i as f64 / (GRID - 1) as f64)
            .collect();
        let shift = z.iter().zip(fitted).map(|(z, f)| z - f).collect();
        Some(Setup {
            knots,
            constraint,
            grid,
            shift,
            x: x.to_vec(),
            min_above,
            top: f64::NAN,
            top_x: f64::NAN,
            branch: [f64::NAN; 2],
            drift: f64::NAN,
        })
    }

    /// `X = 1 − slope` of the weighted line of the responses `z` (`x + y`) on C through the
    /// points at or above [`Setup::top`]: the measured X of the top of the curve; NaN with
    /// fewer than 3 such points or no spread in C.
    pub fn ratio_above(&self, x: &[f64], z: &[f64], w: &[f64]) -> f64 {
        let [x, z, w] = select(x, z, w, |c| c >= self.top);
        fit_line(&x, &z, Some(&w)).map_or(f64::NAN, |l| 1.0 - l.slope)
    }

    /// How much X drifts across the lower branch, `X(C_hi) − X(C_lo)`, from the curvature
    /// `c` of a weighted parabola of `z` on C through the points of [`Setup::branch`]
    /// (`X(C) = 1 − b − 2cC`, so the drift is `−2c (C_hi − C_lo)`); NaN with fewer than
    /// `min_above` points there.
    pub fn drift_below(&self, x: &[f64], z: &[f64], w: &[f64]) -> f64 {
        let [lo, hi] = self.branch;
        let [x, z, w] = select(x, z, w, |c| c <= hi);
        if x.len() < self.min_above.max(4) {
            return f64::NAN;
        }
        curvature(&x, &z, &w).map_or(f64::NAN, |c| -2.0 * c * (hi - lo))
    }

    /// The smooth fit of one set of points.
    pub fn fit(&self, x: &[f64], z: &[f64], w: &[f64]) -> Option<SmoothFit> {
        fit_smooth(x, z, w, &self.knots, self.constraint)
    }

    /// Writes X on the grid and where X leaves 1 into the first `GRID + 1` entries of `row`.
    pub fn record(&self, f: &SmoothFit, row: &mut [f64]) {
        for (v, &c) in row.iter_mut().zip(&self.grid) {
            *v = f.ratio_at(c);
        }
        row[GRID] = f.leaves_one(DEPARTURE);
    }
}

/// Everything the assessment of one group's smooth curve needs.
pub struct ShapeInput<'a> {
    /// The setup.
    pub setup: &'a Setup,
    /// The full-data smooth fit.
    pub full: SmoothFit,
    /// `SSE(one break) − SSE(smooth)` on the full data.
    pub stat: f64,
    /// Rows of the resamples ([`ROW`] values each, NaN where a fit failed).
    pub rows: &'a [f64],
    /// The level of the shape test (α, or α/K for each of K curves).
    pub level: f64,
    /// The size of the weighted data, for rounding tolerances.
    pub scale: f64,
}

/// The smooth X(C) of one group, its bands, the shape test and the verdict.
pub fn assess(input: &ShapeInput<'_>, fit: &GroupFit, s: &FitSettings) -> ShapeFit {
    let setup = input.setup;
    let column = |k: usize| -> Vec<f64> {
        input
            .rows
            .chunks_exact(ROW)
            .map(|r| r[k])
            .filter(|v| v.is_finite())
            .collect()
    };
    let band = |estimate: f64, reps: &[f64]| {
        let iv = interval(estimate, reps, None, IntervalMethod::Percentile, s.level);
        Estimate::with(estimate, iv.as_ref())
    };
    let x_of_c: Vec<XAtC> = setup
        .grid
        .iter()
        .enumerate()
        .map(|(k, &c)| {
            let x = band(input.full.ratio_at(c), &column(k));
            let t_eff = t_eff_estimate(s.temperature, &x);
            let y = input.full.eval(c) - c;
            XAtC { c, y, x, t_eff }
        })
        .collect();
    let c_star = input.full.leaves_one(DEPARTURE);
    let stars = column(GRID);
    let leaves_one = if c_star.is_finite() {
        let mut e = band(c_star, &stars);
        let never = input
            .rows
            .chunks_exact(ROW)
            .filter(|r| r[GRID].is_nan())
            .count();
        if never * 20 > input.rows.len() / ROW {
            e.note = Some(format!(
                "in {never} resamples X stays above {} everywhere: the interval is formed from \
                 the others and may be too narrow",
                1.0 - DEPARTURE
            ));
        }
        e
    } else {
        Estimate::none(format!(
            "X stays above {} at every fitted C: it does not leave 1 within the points",
            1.0 - DEPARTURE
        ))
    };
    let x_above_leaving = {
        if setup.top_x.is_finite() {
            band(setup.top_x, &column(GRID + 2))
        } else {
            Estimate::none("fewer than 3 points above where X leaves 1")
        }
    };
    let drift_below_break = if setup.drift.is_finite() {
        band(setup.drift, &column(GRID + 3))
    } else {
        Estimate::none(format!(
            "fewer than {} points one knot piece below the break",
            setup.min_above.max(4)
        ))
    };
    let test = shape_test(input);
    let evidence = constant_evidence(&x_of_c, setup, fit);
    let verdict = shape_verdict(
        fit,
        setup,
        &test,
        &x_of_c,
        [&leaves_one, &x_above_leaving, &drift_below_break],
        s,
    );
    // A step is spread over a knot piece, so where the smooth curve leaves 1 lies above the
    // break (with 12 pieces its interval covered a one-step truth in 0.28–0.70 of 40 campaigns): an
    // interval is given only where the smooth shape is established.
    let leaves_one = match verdict {
        ShapeVerdict::Continuous { .. } => leaves_one,
        _ => Estimate {
            low: None,
            high: None,
            note: leaves_one.estimate.map(|_| {
                "no interval: the shape is not shown to be continuous, and with a step the \
                 smooth curve leaves 1 up to one knot piece above the break (quote the break q)"
                    .to_string()
            }),
            ..leaves_one
        },
    };
    let outside = outside_unit(&x_of_c);
    let failed_resamples = input
        .rows
        .chunks_exact(ROW)
        .filter(|r| r[0].is_nan())
        .count();
    ShapeFit {
        failed_resamples,
        constraint: setup.constraint,
        knots: setup.knots.values().to_vec(),
        departure: DEPARTURE,
        leaves_one,
        x_above_leaving,
        top_margin: TOP_MARGIN,
        drift_below_break,
        test,
        constant_inside: evidence.map(|e| e.inside),
        constant_checked: evidence.map(|e| e.checked),
        band_reach_below_break: evidence.map(|e| e.reach),
        one_step_margin: ONE_STEP_MARGIN,
        x_above_one: outside,
        verdict,
        x_of_c,
        static_comparison: None,
        replicates: input
            .rows
            .chunks_exact(ROW)
            .flat_map(|r| r[..GRID].iter().copied())
            .collect(),
    }
}

/// `p = (1 + #{T* ≥ T}) / (B + 1)` over the resamples moved onto the broken stick.
fn shape_test(input: &ShapeInput<'_>) -> ShapeTest {
    let nulls: Vec<f64> = input
        .rows
        .chunks_exact(ROW)
        .map(|r| r[GRID + 1])
        .filter(|v| v.is_finite())
        .collect();
    let tol = 1e-13 * input.scale;
    let rows = input.rows.len() / ROW;
    if !input.stat.is_finite() || nulls.len() * 2 < rows {
        // No statistic, or most resamples failed: no p-value rather than a small one.
        return ShapeTest {
            statistic: input.stat,
            p: f64::NAN,
            resamples: nulls.len(),
            level: input.level,
        };
    }
    let stat = if input.stat.abs() <= tol {
        0.0
    } else {
        input.stat
    };
    let exceed = nulls.iter().filter(|&&t| t >= stat - tol).count();
    ShapeTest {
        statistic: stat,
        p: (1 + exceed) as f64 / (nulls.len() + 1) as f64,
        resamples: nulls.len(),
        level: input.level,
    }
}

/// Whether the one-break X lies inside the X(C) band below the break.
#[derive(Debug, Clone, Copy)]
struct Evidence {
    /// Grid points checked.
    checked: usize,
    /// Of which the one-break X lies inside the band.
    inside: usize,
    /// The farthest band end from the one-break X among them.
    reach: f64,
}

/// Checks the one-break X against the band at the grid points at least one knot piece
/// below the break (the ramps spread a step over about one piece): `C ≤ q − h`, with `h`
/// the width of the piece that holds q.
fn constant_evidence(x_of_c: &[XAtC], setup: &Setup, fit: &GroupFit) -> Option<Evidence> {
    let (x, q) = (fit.ratio.estimate?, fit.brk.estimate?);
    let below = branch_end(&setup.knots, q)?;
    let mut ev = Evidence {
        checked: 0,
        inside: 0,
        reach: 0.0,
    };
    for p in x_of_c.iter().filter(|p| p.c <= below) {
        let (Some(lo), Some(hi)) = (p.x.low, p.x.high) else {
            continue;
        };
        ev.checked += 1;
        ev.inside += usize::from(lo <= x && x <= hi);
        ev.reach = ev.reach.max(hi - x).max(x - lo);
    }
    (ev.checked > 0).then_some(ev)
}

/// The verdict between equilibrium, one step, a continuous X(C) and undecided.
fn shape_verdict(
    fit: &GroupFit,
    setup: &Setup,
    test: &ShapeTest,
    x_of_c: &[XAtC],
    [leaves_one, top, drift]: [&Estimate; 3],
    s: &FitSettings,
) -> ShapeVerdict {
    let p_eq = fit.equilibrium_p.unwrap_or(f64::NAN);
    let undecided = |reason: String| ShapeVerdict::Undecided {
        p: test.p,
        level: test.level,
        reason,
    };
    if p_eq.is_nan() || test.p.is_nan() {
        return undecided(
            "the equilibrium or the shape test could not be computed (too many resamples \
             failed)"
                .into(),
        );
    }
    if p_eq > s.test_level() {
        return ShapeVerdict::Equilibrium {
            p_equilibrium: p_eq,
            alpha: s.test_level(),
        };
    }
    let triple = |e: &Estimate| -> Option<[f64; 3]> { Some([e.estimate?, e.low?, e.high?]) };
    if test.p <= test.level {
        // The smooth curve imposes X = 1 at the largest C: a missing or tilted equilibrium
        // branch also makes it win, with a crossing pinned to the last knot piece.
        if let Some(why) = imposed_top(fit, setup, leaves_one, top) {
            return undecided(format!(
                "one break is rejected by the smooth curve, but {why}; the smooth curve sets \
                 X = 1 at the largest C, so there it is imposed, not measured"
            ));
        }
        let lowest = &x_of_c[0].x;
        return ShapeVerdict::Continuous {
            p: test.p,
            level: test.level,
            x_lowest_c: triple(lowest),
            lowest_c: x_of_c[0].c,
            leaves_one: triple(leaves_one),
        };
    }
    let one_break = matches!(fit.verdict, Verdict::OneBreak { .. });
    let bound = 2.0 * ONE_STEP_MARGIN;
    let inside = drift
        .low
        .zip(drift.high)
        .is_some_and(|(lo, hi)| -bound <= lo && hi <= bound);
    if one_break && inside {
        return ShapeVerdict::OneStep {
            p: test.p,
            level: test.level,
            x: triple(&fit.ratio),
            q: fit.brk.estimate.unwrap_or(f64::NAN),
            drift: triple(drift),
        };
    }
    let reason = match (drift.estimate, drift.low, drift.high) {
        _ if matches!(fit.verdict, Verdict::Curved { .. }) => {
            "one break does not fit (lack of fit), but the smooth curve does not fit \
             significantly better"
                .into()
        }
        _ if matches!(fit.verdict, Verdict::BreakAtEdge { .. }) => {
            "the one-break fit withholds X (its break sits at the edge of the points)".into()
        }
        _ if !one_break => "the one-break fit gives no clean X with 0 < X < 1".into(),
        (Some(d), Some(lo), Some(hi)) => {
            use crate::report::format::fmt_num;
            format!(
                "across the branch below the break X drifts by {} [{}, {}] (a parabola's \
                 curvature), which reaches beyond ±{bound}: a continuous X(C) varying by more \
                 than ±{ONE_STEP_MARGIN} there is not excluded",
                fmt_num(d),
                fmt_num(lo),
                fmt_num(hi)
            )
        }
        _ => format!(
            "X's drift across the branch below the break is not measured ({})",
            drift.note.as_deref().unwrap_or("no interval")
        ),
    };
    undecided(reason)
}

/// Why the equilibrium branch at the top of the curve is not established, if it is not:
/// the one-break fit's break at the edge, the interval of the X of the points above where
/// the smooth X leaves 1 not within `1 ± TOP_MARGIN` (a wrong temperature or response
/// units, or too few points), X leaving 1
/// only on the last knot piece, or too few points above where it leaves 1.
fn imposed_top(
    fit: &GroupFit,
    setup: &Setup,
    leaves_one: &Estimate,
    top: &Estimate,
) -> Option<String> {
    if matches!(fit.verdict, Verdict::BreakAtEdge { .. }) {
        return Some("the one-break fit's break sits at the edge of the points".into());
    }
    use crate::report::format::fmt_num;
    match (top.estimate, top.low, top.high) {
        (Some(x), Some(lo), Some(hi)) if lo < 1.0 - TOP_MARGIN || hi > 1.0 + TOP_MARGIN => {
            return Some(format!(
                "the points above where X leaves 1 have X = {} [{}, {}], not within \
                 1 ± {TOP_MARGIN} (a wrong temperature or response units tilt the upper \
                 branch; too few points leave it unmeasured)",
                fmt_num(x),
                fmt_num(lo),
                fmt_num(hi)
            ));
        }
        (Some(_), Some(_), Some(_)) => {}
        _ => {
            return Some(format!(
                "the X of the points above where X leaves 1 is not measured ({})",
                top.note.as_deref().unwrap_or("no interval")
            ));
        }
    }
    let Some(c) = leaves_one.estimate else {
        return Some(format!(
            "X stays above {} at every fitted C",
            1.0 - DEPARTURE
        ));
    };
    let kn = setup.knots.values();
    if c >= kn[kn.len() - 2] {
        return Some(format!(
            "X leaves 1 only on the last knot piece (C ≥ {})",
            crate::report::format::fmt_num(kn[kn.len() - 2])
        ));
    }
    let above = setup.x.iter().filter(|&&v| v >= c).count();
    (above < setup.min_above).then(|| {
        format!(
            "only {above} points lie above where X leaves 1 (at least {} needed, as on each \
             side of a break)",
            setup.min_above
        )
    })
}

/// The largest X of the grid when it exceeds 1 by more than its band (the unconstrained
/// curve only: the monotone one is at most 1 by construction).
fn outside_unit(x_of_c: &[XAtC]) -> Option<[f64; 2]> {
    x_of_c
        .iter()
        .filter(|p| p.x.low.is_some_and(|lo| lo > 1.0))
        .map(|p| [p.c, p.x.estimate.unwrap_or(f64::NAN)])
        .max_by(|a, b| a[1].total_cmp(&b[1]))
}
