//! The design check as text: what was simulated, the coverage and bias of every interval,
//! the rejection rate of every test, what they mean in words, and a methods paragraph.

use super::format::{fmt_num, percent, sig};
use super::text::{table, wrap};
use crate::twotime::design::{CoverageRow, DesignReport, Rate, TestRow, TruthKind};
use crate::twotime::model;
use std::fmt::Write;

/// Differences from the stated rate beyond this many Monte-Carlo errors are reported.
const SIGMAS: f64 = 2.0;

fn rate(r: &Rate) -> String {
    format!("{} ± {}", sig(r.rate, 3), sig(r.se.max(1e-4), 2))
}

fn fit_label(held: Option<f64>) -> String {
    held.map_or_else(|| "all".into(), fmt_num)
}

fn quantity_name(q: &str) -> &'static str {
    match q {
        "x" => "X",
        "t_eff" => "T_eff",
        "break" => "break q",
        _ => "slope above q",
    }
}

fn test_name(t: &str) -> &'static str {
    match t {
        "equilibrium" => "equilibrium (no break)",
        "slope_minus_one" => "slope above q = -1",
        _ => "aging alarm (X changes with age)",
    }
}

fn truth_name(k: TruthKind) -> &'static str {
    match k {
        TruthKind::Fitted => "fitted curve",
        TruthKind::Equilibrium => "equilibrium line",
    }
}

/// The human-readable design check.
pub fn render(r: &DesignReport) -> Vec<u8> {
    let mut o = String::new();
    header(&mut o, r);
    coverage(&mut o, r);
    tests(&mut o, r);
    let found = findings(r);
    if !found.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "findings");
        for f in found {
            let _ = writeln!(o, "  - {}", wrap(&f, 92, "    ").trim_start());
        }
    }
    let _ = writeln!(o);
    let _ = writeln!(o, "methods");
    let _ = writeln!(o, "{}", wrap(&methods(r), 92, "  "));
    o.into_bytes()
}

fn header(o: &mut String, r: &DesignReport) {
    let g = &r.fit;
    let _ = writeln!(
        o,
        "fdtemp {} · design check: the report's statements on campaigns like this one",
        r.tool.version
    );
    let _ = writeln!(
        o,
        "data       {}{} samples, {} points",
        r.input.as_ref().map_or(String::new(), |f| format!("{f}: ")),
        r.n_samples,
        r.n_points
    );
    let _ = writeln!(
        o,
        "fit        {}; {:.0}% {} intervals from {} resamples; tests at {}",
        model::of(g.model).describe(),
        100.0 * g.level,
        g.interval.label(),
        g.resamples,
        percent(g.test_level())
    );
    for (t, failed) in r.truths.iter().zip(&r.failed) {
        let c = &t.curve;
        let what = match t.kind {
            TruthKind::Fitted if c.q.is_finite() => format!(
                "the fitted curve (q = {}, X = {}, slope above q = {})",
                sig(c.q, 4),
                sig(t.ratio(), 4),
                sig(c.slope_above, 4)
            ),
            TruthKind::Fitted => format!("the fitted line (X = {})", sig(t.ratio(), 4)),
            TruthKind::Equilibrium => format!(
                "the equilibrium line (slope {}, no break)",
                sig(c.slope_below, 4)
            ),
        };
        let fails = if *failed > 0 {
            format!("; {failed} could not be fitted and are not counted")
        } else {
            String::new()
        };
        let _ = writeln!(
            o,
            "simulated  {} campaigns about {what}{fails}",
            r.design.campaigns
        );
    }
    let _ = writeln!(o, "noise      {}", r.design.noise.describe());
}

fn coverage(o: &mut String, r: &DesignReport) {
    if r.coverage.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(
            o,
            "intervals  none checked: the data's joint fit quotes no X, so there is no fitted \
             curve to simulate from"
        );
        return;
    }
    let held = r.fit.hold.name();
    let mut rows: Vec<[String; 7]> = vec![[
        held.into(),
        "quantity".into(),
        "truth".into(),
        "printed".into(),
        format!("coverage ({:.0}% stated)", 100.0 * r.fit.level),
        "bias".into(),
        format!("nominal level for {:.0}%", 100.0 * r.fit.level),
    ]];
    for c in &r.coverage {
        rows.push([
            fit_label(c.held),
            quantity_name(c.quantity).into(),
            sig(c.truth, 4),
            format!("{}/{}", c.printed.hits, c.printed.of),
            c.coverage.as_ref().map_or("—".into(), rate),
            c.bias.map_or("—".into(), |b| {
                format!("{} ± {}", sig(b.mean, 2), sig(b.se, 2))
            }),
            c.calibrated.map_or("not reachable".into(), |n| {
                format!(
                    "{} [{}, {}]",
                    percent(n.level),
                    percent(n.range[0]),
                    percent(n.range[1])
                )
            }),
        ]);
    }
    let _ = writeln!(o);
    o.push_str(&table(&rows));
}

fn tests(o: &mut String, r: &DesignReport) {
    let mut rows: Vec<[String; 5]> = vec![[
        "test".into(),
        "fit".into(),
        "truth simulated".into(),
        "rejected".into(),
        "meaning".into(),
    ]];
    for t in &r.tests {
        rows.push([
            test_name(t.test).into(),
            if t.test == "aging" {
                "—".into()
            } else {
                fit_label(t.held)
            },
            truth_name(t.truth).into(),
            rate(&t.rejected),
            if t.null_true {
                format!("actual level (stated {})", percent(r.fit.test_level()))
            } else {
                "power".into()
            },
        ]);
    }
    let _ = writeln!(o);
    o.push_str(&table(&rows));
}

/// What the numbers mean, in words: only departures beyond the Monte-Carlo error, and
/// powers that are low.
fn findings(r: &DesignReport) -> Vec<String> {
    let held = r.fit.hold.name();
    let who = |h: Option<f64>| {
        h.map_or_else(
            || "all curves together".to_string(),
            |v| format!("{held} = {}", fmt_num(v)),
        )
    };
    let mut out = Vec::new();
    for c in r.coverage.iter().filter(|c| c.quantity != "t_eff") {
        out.extend(coverage_finding(c, r.fit.level, &who(c.held)));
        if let Some(b) = c.bias
            && b.mean.abs() > SIGMAS * b.se
            && b.se > 0.0
        {
            out.push(format!(
                "{}: {} is biased by {} ± {} on this design (truth {}).",
                who(c.held),
                quantity_name(c.quantity),
                sig(b.mean, 2),
                sig(b.se, 2),
                sig(c.truth, 4)
            ));
        }
    }
    for t in &r.tests {
        out.extend(test_finding(t, r.fit.test_level(), &who(t.held)));
    }
    out
}

fn coverage_finding(c: &CoverageRow, level: f64, who: &str) -> Option<String> {
    let cov = c.coverage.as_ref()?;
    let gap = cov.rate - level;
    let err = cov.se.max((level * (1.0 - level) / cov.of as f64).sqrt());
    if gap.abs() <= SIGMAS * err {
        return None;
    }
    let name = quantity_name(c.quantity);
    let fix = match c.calibrated {
        Some(n) if gap < 0.0 => format!(
            "; `fit --calibrate {}` forms them at the nominal {} level, which covered {:.0}% here",
            c.printed.of,
            percent(n.level),
            100.0 * level
        ),
        None if gap < 0.0 => "; no nominal level these resamples allow covers often enough \
                              (more samples, or a larger B, are needed)"
            .into(),
        _ => String::new(),
    };
    Some(format!(
        "{who}: {:.0}% intervals for {name} covered the truth in {} of the campaigns that \
         printed one — {} than stated, beyond the Monte-Carlo error{fix}.",
        100.0 * level,
        rate(cov),
        if gap < 0.0 {
            "less often"
        } else {
            "more often"
        },
    ))
}

fn test_finding(t: &TestRow, alpha: f64, who: &str) -> Option<String> {
    let rej = &t.rejected;
    let err = rej.se.max((alpha * (1.0 - alpha) / rej.of as f64).sqrt());
    let name = test_name(t.test);
    if t.null_true && (rej.rate - alpha).abs() > SIGMAS * err {
        let subject = if t.test == "aging" {
            "the campaign"
        } else {
            who
        };
        return Some(format!(
            "{subject}: the test \"{name}\" rejected a true null in {} of the campaigns, \
             against {} stated: {} on this design.",
            rate(rej),
            percent(alpha),
            if rej.rate > alpha {
                "it rejects too often, so treat its rejections with care"
            } else {
                "it is conservative (rejects less often than stated)"
            }
        ));
    }
    (!t.null_true && rej.rate < 0.8).then(|| {
        format!(
            "{who}: the test \"{name}\" detected the fitted violation in only {} of the \
             campaigns: on this design a violation of this size is often missed.",
            rate(rej)
        )
    })
}

/// How the check was made, for a methods section.
pub fn methods(r: &DesignReport) -> String {
    let truths: Vec<&str> = r
        .truths
        .iter()
        .map(|t| match t.kind {
            TruthKind::Fitted => "the joint fit's curve",
            TruthKind::Equilibrium => "the model's equilibrium line fitted to the points",
        })
        .collect();
    format!(
        "The intervals and tests were checked on the design of the data with fdtemp {ver}: \
         {m} campaigns each were simulated about {truths}, with the same {n} samples and {p} \
         (tw, t) points; a simulated sample is the truth plus noise from the data ({noise}), \
         so that it keeps the data's correlations along t, between C and chi and between \
         curves. Each simulated campaign was refitted exactly as the data were (the same \
         settings, its own seed). Coverage is the share of printed intervals that contain \
         the truth; a test's level is its rejection rate under a truth that satisfies its \
         null; errors are binomial. The nominal level for a wanted coverage is the quantile \
         of the smallest covering levels (calibration of the confidence coefficient: Loh, \
         JASA 82, 155–162 (1987); Hall & Martin, Biometrika 75, 661–671 (1988)).",
        ver = r.tool.version,
        m = r.design.campaigns,
        truths = truths.join(" and about "),
        n = r.n_samples,
        p = r.n_points,
        noise = r.design.noise.describe(),
    )
}
