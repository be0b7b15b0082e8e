//! The two-time ratio X(t,tw) in the text report (`fit --two-time`): its table, its
//! cautions in words and its methods sentence. Every number here is the two-time ratio at
//! fixed t, never the slope of a fixed-tw curve.

use super::format::{fmt_num, percent, sig};
use super::text::{est, table};
use crate::twotime::{FitReport, TwoTimePoint};
use std::fmt::Write;

/// The table of the two-time ratio, when it was asked for.
pub fn section(o: &mut String, r: &FitReport) {
    let (Some(points), Some(rec)) = (&r.two_time, &r.settings.two_time) else {
        return;
    };
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "two-time ratio X(t,tw) = -∂_tw(k·T·chi) / ∂_tw C at fixed t (not the slope of a \
         fixed-tw curve); local fits in ln tw over {} neighbouring waiting times ({}); {:.0}% \
         percentile intervals read at {}",
        rec.window,
        if rec.window == 3 { "line" } else { "cubic" },
        100.0 * r.settings.given.level,
        percent(rec.read_level)
    );
    let mut rows: Vec<[String; 6]> = vec![[
        "t".into(),
        "tw".into(),
        "C(t,tw)".into(),
        "two-time ratio X(t,tw)".into(),
        "dC/d ln tw".into(),
        "note".into(),
    ]];
    for p in points {
        rows.push([
            fmt_num(p.t),
            fmt_num(p.tw),
            sig(p.c, 4),
            if p.resolved {
                est(&p.x)
            } else {
                "— (not resolved)".into()
            },
            est(&p.dc_dlntw),
            note(p),
        ]);
    }
    o.push_str(&table(&rows));
    for line in cautions(r, points) {
        let _ = writeln!(o, "{}", super::text::wrap(&line, 92, ""));
    }
}

/// What a row's note says: interpolation, an unresolved denominator.
fn note(p: &TwoTimePoint) -> String {
    let mut parts = Vec::new();
    if !p.resolved {
        parts.push("dC/d ln tw interval reaches 0".to_string());
    }
    if p.interpolated {
        parts.push("C, chi interpolated in log t".into());
    } else if p.window_interpolated > 0 {
        parts.push(format!("{} of window interpolated", p.window_interpolated));
    }
    parts.join("; ")
}

/// The cautions in words under the table.
fn cautions(r: &FitReport, points: &[TwoTimePoint]) -> Vec<String> {
    let mut out = Vec::new();
    out.push(format!(
        "(X(t,tw) here is the two-time ratio at fixed t; the X of the fits above is minus the \
         slope of the fixed-{held} curves, a different quantity. The intervals are pointwise: \
         with {n} grid points, some miss by chance. A local line over neighbouring waiting \
         times has a curvature bias that the intervals do not contain; where tw is widely \
         spaced, compare --two-time-window 3 and 5.)",
        held = r.settings.given.hold.name(),
        n = points.len(),
    ));
    if let Some(rec) = &r.settings.two_time
        && rec.times_left_out > 0
    {
        out.push(format!(
            "note: {} later times were left out to keep the table to at most {} times \
             (evenly spread in rank).",
            rec.times_left_out,
            crate::twotime::two_time::MAX_TIMES
        ));
    }
    out
}

/// The methods sentence, when the two-time ratio was asked for.
pub fn methods(r: &FitReport) -> String {
    let Some(rec) = &r.settings.two_time else {
        return String::new();
    };
    format!(
        " The two-time ratio X(t,tw) = −∂_tw(k·T·chi)/∂_tw C at fixed later time t \
         (Sollich, Fielding & Mayer, J. Phys.: Condens. Matter 14, 1683 (2002); not the \
         slope of a fixed-tw curve) was estimated at each t measured on at least {w} waiting \
         times (C and chi interpolated linearly in log t inside a curve's measured range where \
         t was not measured on it) from the derivatives at the centre of least-squares \
         {poly} in ln tw through each waiting time and its {h} neighbour(s) on each side; \
         its {lvl:.0}% percentile \
         intervals come from the same bootstrap resamples of whole samples, read at the \
         {read} level, and it is not given where the interval of ∂C/∂ln tw reaches 0.",
        w = rec.window,
        h = rec.window / 2,
        poly = if rec.window == 3 { "lines" } else { "cubics" },
        lvl = 100.0 * r.settings.given.level,
        read = percent(rec.read_level),
    )
}
