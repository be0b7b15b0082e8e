//! The smooth X(C) in the text report (`--model smooth`): a table of the shape per fit, the
//! X(C) curve of the joint fit, the shape verdicts in words, cautions and the methods
//! sentence; and the CSV of every fit's X(C).

use super::format::{fmt_num, fmt_p_resampled, p_clause, percent, sig};
use super::text::{est, label, table};
use crate::fit::smooth::{Constraint, FIRST_RAMP, MAX_PIECES, VALUES_PER_PIECE};
use crate::twotime::{FitReport, GroupFit, ShapeFit, ShapeVerdict};
use std::fmt::Write;

/// Grid points printed in the text table (every `GRID_STEP`-th, from the first).
const GRID_STEP: usize = 4;

/// The shape table and the joint fit's X(C), when the smooth model was fitted.
pub fn section(o: &mut String, r: &FitReport) {
    let Some(joint) = r.fits[0].shape.as_ref() else {
        return;
    };
    let held = r.settings.given.hold.name();
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "smooth X(C): {}; {:.0}% pointwise percentile bands",
        constraint_words(joint.constraint),
        100.0 * r.settings.given.level
    );
    let mut rows: Vec<[String; 7]> = vec![[
        held.into(),
        "X at lowest C".into(),
        format!("X leaves 1 (≤ {}) below C", fmt_num(1.0 - joint.departure)),
        "X above that".into(),
        "drift of X below q".into(),
        "p(one break vs smooth)".into(),
        "shape".into(),
    ]];
    for f in &r.fits {
        let Some(s) = &f.shape else { continue };
        let low = &s.x_of_c[0];
        rows.push([
            label(f),
            format!("{} at C = {}", est(&low.x), sig(low.c, 3)),
            est(&s.leaves_one),
            est(&s.x_above_leaving),
            est(&s.drift_below_break),
            fmt_p_resampled(s.test.p, s.test.resamples),
            short(&s.verdict).into(),
        ]);
    }
    o.push_str(&table(&rows));
    let _ = writeln!(
        o,
        "(X above that: a line through the points above where X leaves 1, which must lie \
         within 1 ± {} for a continuous shape; drift: X's change across the points one knot \
         piece and more below the break q, which must lie within ±{} for one step)",
        joint.top_margin,
        fmt_num(2.0 * joint.one_step_margin)
    );
    for f in &r.fits {
        if let Some(s) = f.shape.as_ref().filter(|s| s.failed_resamples > 0) {
            let _ = writeln!(
                o,
                "({}: the smooth fit failed in {} of {} resamples, left out of its bands and \
                 intervals; if that is more than a few, the bands may be too narrow)",
                label(f),
                s.failed_resamples,
                r.settings.given.resamples
            );
        }
    }
    if r.fits
        .iter()
        .any(|f| f.shape.as_ref().is_some_and(|s| s.leaves_one.low.is_none()))
    {
        let _ = writeln!(
            o,
            "(where X leaves 1 has an interval only for a continuous shape: with a step the \
             smooth curve leaves 1 up to one knot piece above the break, so quote q instead)"
        );
    }
    let _ = writeln!(
        o,
        "(the per-curve shape tests are read at {} each: one family over the curves)",
        percent(
            r.fits
                .get(1)
                .and_then(|f| f.shape.as_ref())
                .map_or(joint.test.level, |s| s.test.level)
        )
    );
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "X(C) of {} (every {GRID_STEP}th grid point; all {} in --x-of-c and the JSON)",
        if r.fits.len() > 1 {
            "all curves together"
        } else {
            "the curve"
        },
        joint.x_of_c.len()
    );
    let stat = joint.static_comparison.as_ref();
    let mut rows: Vec<[String; 4]> = vec![[
        "C".into(),
        "X(C)".into(),
        "T_eff(C)".into(),
        if stat.is_some() {
            "static x(q = C)".into()
        } else {
            String::new()
        },
    ]];
    for (k, p) in joint.x_of_c.iter().enumerate().step_by(GRID_STEP) {
        rows.push([
            sig(p.c, 3),
            est(&p.x),
            est(&p.t_eff),
            stat.map_or(String::new(), |s| sig(s.x_static[k], 3)),
        ]);
    }
    o.push_str(&table(&rows));
    if let Some(s) = stat {
        let _ = writeln!(
            o,
            "static     x(q) from the overlap {}{}: mean of X(C) − x(C) over the grid {}; x(C) \
             inside the X(C) band at {} of {} C values; largest difference {} at C = {}",
            if s.histogram { "histogram" } else { "samples" },
            if s.folded {
                " (negative q folded onto |q|)"
            } else {
                ""
            },
            est(&s.mean_difference),
            s.inside_band,
            s.points,
            sig(s.largest_difference[1], 3),
            sig(s.largest_difference[0], 3),
        );
    }
}

/// One or two words for the table.
fn short(v: &ShapeVerdict) -> &'static str {
    match v {
        ShapeVerdict::Equilibrium { .. } => "equilibrium",
        ShapeVerdict::OneStep { .. } => "one step",
        ShapeVerdict::Continuous { .. } => "continuous",
        ShapeVerdict::Undecided { .. } => "undecided",
    }
}

fn constraint_words(c: Constraint) -> &'static str {
    match c {
        Constraint::Monotone => "X non-decreasing in C and at most 1, 1 at the largest C",
        Constraint::None => "X unconstrained (may fall with C and exceed 1), 1 at the largest C",
    }
}

fn triple(v: &Option<[f64; 3]>) -> String {
    v.map_or("—".into(), |[e, lo, hi]| {
        est(&crate::common::Estimate {
            estimate: Some(e),
            low: Some(lo),
            high: Some(hi),
            note: None,
        })
    })
}

/// The shape verdict in words.
pub fn verdict(s: &ShapeFit) -> String {
    let t = &s.test;
    let p = p_clause(t.p, t.resamples);
    match &s.verdict {
        ShapeVerdict::Equilibrium {
            p_equilibrium,
            alpha,
        } => format!(
            "equilibrium at this precision: no departure from slope -1 (p = {}, level {}), \
             so neither one step nor a continuous X(C) is seen",
            super::format::fmt_p(*p_equilibrium),
            fmt_num(*alpha)
        ),
        ShapeVerdict::OneStep { x, q, drift, .. } => format!(
            "one step (two temperatures): one break at q = {} with X = {} fits, and the \
             smooth curve does not fit better ({p}); across the branch below the break X \
             drifts by {} (a parabola's curvature), inside ±{}, so X is constant there \
             within ±{} (smaller variations are not excluded)",
            sig(*q, 3),
            triple(x),
            triple(drift),
            fmt_num(2.0 * s.one_step_margin),
            fmt_num(s.one_step_margin)
        ),
        ShapeVerdict::Continuous {
            x_lowest_c,
            lowest_c,
            leaves_one,
            level,
            ..
        } => format!(
            "continuous X(C): the smooth curve fits better than one break ({p}, read at {}); \
             X goes from {} at C = {} to 1 at the largest C, leaving 1 below C = {}",
            fmt_num(*level),
            triple(x_lowest_c),
            sig(*lowest_c, 3),
            triple(leaves_one)
        ),
        ShapeVerdict::Undecided { reason, level, .. } => format!(
            "undecided at this precision: {reason} ({p}, read at {}); neither one step nor a \
             continuous X(C) is established",
            fmt_num(*level)
        ),
    }
}

/// The shape verdict lines of every fit.
pub fn verdicts(o: &mut String, r: &FitReport) {
    let Some(joint) = r.fits[0].shape.as_ref() else {
        return;
    };
    let held = r.settings.given.hold.name();
    let _ = writeln!(o, "shape      {}", verdict(joint));
    for f in r.fits.iter().skip(1) {
        if let Some(s) = &f.shape {
            let _ = writeln!(o, "  {held} = {:<6} {}", label(f), verdict(s));
        }
    }
}

/// Cautions about the smooth curve of one fit, in words.
pub fn cautions(f: &GroupFit, who: &str) -> Vec<String> {
    let Some(s) = &f.shape else {
        return Vec::new();
    };
    let mut out = Vec::new();
    let reaching: Vec<f64> = s
        .x_of_c
        .iter()
        .filter(|p| p.x.low.is_some_and(|lo| lo <= 0.0))
        .map(|p| p.c)
        .collect();
    if let Some(top) = reaching.last() {
        out.push(format!(
            "{who}: the X(C) band reaches X = 0 at {} grid point(s) up to C = {}: T_eff(C) \
             has no upper limit there, and the slow modes' temperature is not measured at \
             those C",
            reaching.len(),
            sig(*top, 3)
        ));
    }
    if let Some([c, x]) = s.x_above_one {
        out.push(format!(
            "{who}: X(C) exceeds 1 beyond its band (X = {} at C = {}): the unconstrained \
             curve shows a response stronger than equilibrium there (check the temperature \
             and the response units)",
            sig(x, 3),
            sig(c, 3)
        ));
    }
    out
}

/// The methods sentence of the smooth model.
pub fn methods(r: &FitReport) -> String {
    let Some(joint) = r.fits[0].shape.as_ref() else {
        return String::new();
    };
    let constraint = match joint.constraint {
        Constraint::Monotone => {
            "with non-negative coefficients (Lawson–Hanson non-negative least squares), so \
             that X is continuous, non-decreasing in C and at most 1"
        }
        Constraint::None => {
            "by ordinary least squares with no sign constraint (X may fall with C and exceed 1)"
        }
    };
    format!(
        " Beside the one-break fit, X(C) = −d(k·T·chi)/dC was modelled as a continuous, \
         piecewise-linear function equal to 1 at the largest C, fitted on linear ramps {constraint}; \
         the knots sit at equal-count quantiles of the fitted C values (one piece per {VALUES_PER_PIECE} \
         distinct values, 3 to {MAX_PIECES} pieces), and X is held constant on the first piece{first}. \
         Pointwise {lvl:.0}% percentile bands of X(C) and of T_eff(C) = T/X(C) come from the same \
         resamples; X leaves 1 at the largest C where X(C) ≤ {dep}. One break was tested against the \
         smooth curve with the statistic SSE(one break) − SSE(smooth), calibrated by refitting \
         both models to resamples moved onto the fitted broken stick (p = (1 + #)/(B + 1)), at \
         the test level jointly and at that level divided by the number of curves per curve. \
         The shape is called continuous when this test rejects and the curve's top is measured \
         rather than imposed (the one-break fit's break away from the edge; X leaving 1 before \
         the last knot piece with at least {min} points above; and the {lvl:.0}% interval of \
         the X of a weighted line through those points within 1 ± {top}, so that a wrong \
         temperature or response unit is not read as a bend), one step when the test does not \
         reject, the one-break fit is clean and the {lvl:.0}% interval of X's drift across \
         the points more than one knot piece below the break (from a weighted parabola's \
         curvature) lies within ±{drift} (X within ±{margin} of its mean there), and \
         undecided otherwise; where X leaves 1 is given an interval only for a continuous \
         shape.",
        margin = crate::twotime::shape::ONE_STEP_MARGIN,
        drift = fmt_num(2.0 * crate::twotime::shape::ONE_STEP_MARGIN),
        top = crate::twotime::shape::TOP_MARGIN,
        min = r.settings.given.min_branch,
        first = if FIRST_RAMP > 0 {
            " (y straight there, since the slope at the very edge rests on the noisiest points)"
        } else {
            ""
        },
        lvl = 100.0 * r.settings.given.level,
        dep = fmt_num(1.0 - joint.departure),
    )
}

/// Every fit's X(C) as CSV: `fit, held, c, x, x_low, x_high, t_eff, t_eff_low, t_eff_high`
/// (`fit` is `all` for the joint fit, the held time's name otherwise).
pub fn curve_csv(r: &FitReport) -> Vec<u8> {
    let held = r.settings.given.hold.name();
    let mut o = format!("fit,{held},c,x,x_low,x_high,t_eff,t_eff_low,t_eff_high\n");
    let num = |v: Option<f64>| v.map_or(String::new(), |v| format!("{v}"));
    for f in &r.fits {
        let Some(s) = &f.shape else { continue };
        let (fit, h) = match f.tw.or(f.t) {
            None => ("all", String::new()),
            Some(v) => (held, format!("{v}")),
        };
        for p in &s.x_of_c {
            let _ = writeln!(
                o,
                "{fit},{h},{},{},{},{},{},{},{}",
                p.c,
                num(p.x.estimate),
                num(p.x.low),
                num(p.x.high),
                num(p.t_eff.estimate),
                num(p.t_eff.low),
                num(p.t_eff.high)
            );
        }
    }
    o.into_bytes()
}
