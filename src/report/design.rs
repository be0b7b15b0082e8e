//! The design check as text: what was simulated, the coverage and bias of every interval,
//! the rejection rate of every test, what they mean in words, and a methods paragraph.

use super::format::{fmt_num, percent, sig};
use super::text::{table, wrap};
use crate::twotime::design::{CoverageRow, DesignReport, Rate, TestRow, TruthKind};
use crate::twotime::model;
use std::fmt::Write;

/// The chance that any finding fires when every statement holds at its stated rate.
const FAMILY_ERROR: f64 = 0.05;

/// The number of rates and biases the findings compare with their stated values.
fn checks(r: &DesignReport) -> usize {
    let cov = r
        .coverage
        .iter()
        .filter(|c| c.quantity != "t_eff")
        .map(|c| {
            usize::from(c.coverage.is_some()) + usize::from(c.bias.is_some_and(|b| b.se > 0.0))
        })
        .sum::<usize>();
    cov + r.tests.iter().filter(|t| t.null_true).count()
}

/// How many standard errors a bias must be off 0 by to be reported: two-sided, Bonferroni
/// over the `k` checks, so that with every statement right a finding fires in at most 5%
/// of design checks.
fn sigmas(k: usize) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    let k = k.max(1) as f64;
    Normal::standard().inverse_cdf(1.0 - FAMILY_ERROR / (2.0 * k))
}

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
        "lack_of_fit" => "lack of fit (shape of the model)",
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
    let k = checks(r);
    let found = findings(r, k);
    let _ = writeln!(o);
    let _ = writeln!(
        o,
        "findings ({k} rates and biases checked against their stated values at {} \
         family-wise: exact binomial tests, Bonferroni)",
        percent(FAMILY_ERROR)
    );
    if found.is_empty() {
        let _ = writeln!(
            o,
            "  - every coverage, bias and test level is within its Monte-Carlo error of \
             the stated value on this design."
        );
    }
    for f in found {
        let _ = writeln!(o, "  - {}", wrap(&f, 92, "    ").trim_start());
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
    if let Some(line) = super::format::excluded_line(&r.excluded_samples) {
        let _ = writeln!(o, "{line}");
    }
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
                format!("actual level (stated {})", percent(t.level))
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
fn findings(r: &DesignReport, k: usize) -> Vec<String> {
    let z = sigmas(k);
    let held = r.fit.hold.name();
    let who = |h: Option<f64>| {
        h.map_or_else(
            || "all curves together".to_string(),
            |v| format!("{held} = {}", fmt_num(v)),
        )
    };
    let mut out = Vec::new();
    for c in r.coverage.iter().filter(|c| c.quantity != "t_eff") {
        out.extend(coverage_finding(c, r.fit.level, &who(c.held), k));
        if let Some(b) = c.bias
            && b.mean.abs() > z * b.se
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
        out.extend(test_finding(t, t.level, &who(t.held), k));
    }
    out
}

/// Whether `hits` of `m` campaigns is off the stated rate: the exact two-sided binomial
/// p-value (twice the smaller tail) below the per-check share of the family-wise error
/// for `k` checks. The normal approximation is not used: at a stated 5% over 200
/// campaigns its upper tail is four times too light at this depth.
fn beyond(hits: usize, m: usize, stated: f64, k: usize) -> bool {
    use statrs::distribution::{Binomial, DiscreteCDF};
    let Ok(b) = Binomial::new(stated, m as u64) else {
        return false;
    };
    let x = hits as u64;
    let below = b.cdf(x);
    let above = if x == 0 { 1.0 } else { b.sf(x - 1) };
    2.0 * below.min(above) < FAMILY_ERROR / k.max(1) as f64
}

fn coverage_finding(c: &CoverageRow, level: f64, who: &str, k: usize) -> Option<String> {
    let cov = c.coverage.as_ref()?;
    let gap = cov.rate - level;
    if !beyond(cov.hits, cov.of, level, k) {
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
        None if gap < 0.0 && cov.of < crate::twotime::design::MIN_CAMPAIGNS => format!(
            "; printed in {} campaigns only, too few to calibrate",
            cov.of
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

fn test_finding(t: &TestRow, alpha: f64, who: &str, k: usize) -> Option<String> {
    let rej = &t.rejected;
    let name = test_name(t.test);
    if t.null_true && beyond(rej.hits, rej.of, alpha, k) {
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

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};

    /// Binomial(m, p) by m Bernoulli draws.
    fn binomial(rng: &mut rand::rngs::StdRng, m: usize, p: f64) -> usize {
        (0..m).filter(|_| rng.random::<f64>() < p).count()
    }

    #[test]
    fn with_every_rate_as_stated_a_finding_fires_in_at_most_5_percent_of_checks() {
        // 2000 design checks of 33 independent rates, each exactly at its stated 95% (or
        // 5%), 200 campaigns each. Bonferroni bounds the family-wise rate by 5% (common
        // practice); binomial SD of the measured rate at 2000 checks ≈ 0.005.
        let mut rng = rand::rngs::StdRng::seed_from_u64(5);
        let (k, m) = (33, 200);
        let fired = (0..2000)
            .filter(|i| {
                (0..k).any(|j| {
                    let stated = if (i + j) % 3 == 0 { 0.05 } else { 0.95 };
                    beyond(binomial(&mut rng, m, stated), m, stated, k)
                })
            })
            .count() as f64
            / 2000.0;
        println!("family-wise rate {fired}");
        assert!(fired <= 0.06, "family-wise rate {fired}");
        assert!(fired >= 0.005, "so conservative it never fires: {fired}");
    }

    #[test]
    fn a_coverage_of_85_percent_over_200_campaigns_is_found() {
        let mut rng = rand::rngs::StdRng::seed_from_u64(6);
        let found = (0..500)
            .filter(|_| beyond(binomial(&mut rng, 200, 0.85), 200, 0.95, 33))
            .count();
        // Measured: 479 of 500 (0.958).
        assert!(found >= 450, "{found} of 500");
    }
}
