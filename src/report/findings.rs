//! Findings in words: one sentence per caution code and per verdict code. The text report
//! prints these; the JSON carries them as `message` beside the code and the numbers.

use super::format::{Digits, distinct, fmt_num, num3, p_clause, with_interval};
use crate::twotime::findings::{Caution, Finding, Subject, Verdict};
use crate::twotime::settings::Hold;

/// Who a caution is about, as the text report prefixes it ("tw = 100: …").
pub fn subject(s: Subject) -> String {
    match s {
        Subject::Campaign => String::new(),
        Subject::AllCurves => "all curves together".into(),
        Subject::Tw(v) => format!("{} = {}", Hold::Tw.name(), fmt_num(v)),
        Subject::T(v) => format!("{} = {}", Hold::T.name(), fmt_num(v)),
    }
}

/// The sentence of a caution (without its subject).
pub fn caution(c: &Caution) -> String {
    finding(&c.finding)
}

/// The sentence of a finding.
pub fn finding(f: &Finding) -> String {
    match f {
        Finding::NoSpreadUniformWeights => "every point has zero spread over samples, so \
             inverse-variance weights are undefined; uniform weights used"
            .into(),
        Finding::VarianceFloored => "some points have (almost) no spread over samples; their \
             variance was floored at 1e-6 of the median for the weights"
            .into(),
        Finding::XChangesWithAge { .. } | Finding::XChangesWithAgeCurved { .. } => aging(f),
        Finding::IdenticalSamples => "the samples are (almost) identical: there is no \
             sample-to-sample spread, so the intervals only reflect rounding; check that the \
             samples are independent runs"
            .into(),
        Finding::LimitApproachUnresolved { share } => format!(
            "long-age limit: α is not resolved (at an end of 0.05–3 in the data or in {} of \
             resamples): the approach to the limit is not measured, and X∞ rests on the \
             model alone",
            super::format::percent(*share)
        ),
        Finding::LimitUnbounded => "X∞'s interval reaches 0: T_eff∞ has no upper bound \
             (coarsening-like: the slow modes may not equilibrate at any temperature)"
            .into(),
        Finding::TwoTimeUnresolved { points, of } => format!(
            "two-time ratio: at {points} of {of} grid points C does not change measurably \
             with tw (the interval of dC/d ln tw reaches 0), so no ratio is given there: a \
             ratio of two unresolved derivatives can take any value"
        ),
        Finding::SmallSamples { samples } => format!(
            "{samples} samples: X and T_eff are read at Student's width and their 95% \
             intervals cover 0.94–0.955 at 20 samples, but the per-curve intervals of the \
             break q still run short (0.92 at 20 samples; docs/validation.md)"
        ),
        Finding::FewSamples { samples, limit } => format!(
            "only {samples} samples: bootstrap intervals from fewer than {limit} samples are \
             unreliable (measured at 10 samples: 95% intervals of X cover 0.976 jointly, wider \
             than stated, and 0.954 per curve; per-curve intervals of the break cover 0.88 at \
             12 samples; with uniform weights the 5% tests reject up to 8% of true equilibria; \
             docs/validation.md)"
        ),
        _ => break_finding(f),
    }
}

/// Sentences about the break, the slopes and the resamples of one fit.
fn break_finding(f: &Finding) -> String {
    match f {
        Finding::FailedResamples { failed, total } => format!(
            "{failed} of {total} resamples could not be fitted and were left out; the \
             intervals may be too narrow"
        ),
        Finding::BreakAtEdgeInResamples { share } => format!(
            "the break sits at the edge of the data in {:.0}% of resamples: the slow regime \
             is barely reached (too few points below or above q); q is uncertain and X is not \
             quoted with an interval",
            100.0 * share
        ),
        Finding::FewPointsOneSide { points, side } => {
            let side = side.word();
            format!(
                "only {points} points lie {side} the break: that regime is barely resolved, so \
                 q, the slope {side} it and their intervals are uncertain (add times that reach \
                 further into it)"
            )
        }
        Finding::BreakNextToEdge => "the break sits next to the first or last point the search \
             allows: q and X are uncertain"
            .into(),
        Finding::BreaksSplit {
            near_low,
            near_high,
        } => format!(
            "the resampled breaks split into separate groups (near {} and near {}): the data \
             support more than one break; look at the profile before quoting q",
            fmt_num(*near_low),
            fmt_num(*near_high)
        ),
        Finding::SlopeAboveNotMinusOne {
            slope,
            low,
            high,
            p,
            resamples,
        } => {
            let slope = value_and_interval(*slope, *low, *high);
            format!(
                "the slope above the break is {slope}, not -1 ({}): the thermometer or the \
                 response units may be off, the system may be driven, or the curve bends \
                 gradually rather than at one break",
                p_clause(*p, *resamples)
            )
        }
        Finding::SlopeAboveCurved {
            slope,
            low,
            high,
            p,
            resamples,
        } => {
            let slope = value_and_interval(*slope, *low, *high);
            format!(
                "the slope above the break is {slope}, not -1 ({}), but the points do not \
                 follow the model's shape (lack of fit): a curve that bends gradually tilts \
                 the line above the break, so curvature may cause this; do not read it as a \
                 wrong thermometer or wrong response units before --model free shows a \
                 straight upper branch",
                p_clause(*p, *resamples)
            )
        }
        Finding::LackOfFit {
            p,
            level,
            resamples,
        } => format!(
            "lack of fit ({}, tested at {}): the points bend where the model is straight, \
             so its shape is not the data's (curvature, a gradual change of slope); one \
             break and one X do not describe this curve — try --model free, or --model \
             smooth for a continuous X(C)",
            p_clause(*p, *resamples),
            fmt_level(*level)
        ),
        Finding::RatioAboveOne { ratio } => format!(
            "X = {} > 1 (T_eff below the bath temperature): reported as measured; this \
             happens after heating, or when the response units are off",
            num3(*ratio)
        ),
        Finding::RatioBelowZero { ratio } => format!(
            "X = {} < 0 (negative T_eff): reported as measured; some kinetically \
             constrained systems do this, otherwise suspect the sign of the response",
            num3(*ratio)
        ),
        _ => finding(f),
    }
}

/// A test level as a percentage ("5%", "1.7%").
fn fmt_level(level: f64) -> String {
    let pct = 100.0 * level;
    if (pct - pct.round()).abs() < 1e-9 {
        format!("{pct:.0}%")
    } else {
        format!("{pct:.2}%")
    }
}

fn aging(f: &Finding) -> String {
    let (Finding::XChangesWithAge {
        hold,
        change_per_decade,
        low,
        high,
        curves,
        first,
        last,
    }
    | Finding::XChangesWithAgeCurved {
        hold,
        change_per_decade,
        low,
        high,
        curves,
        first,
        last,
    }) = f
    else {
        return String::new();
    };
    let h = hold.name();
    let s = distinct(&[*change_per_decade, *low, *high], Digits::Fixed(3), true);
    let why = if matches!(f, Finding::XChangesWithAgeCurved { .. }) {
        format!(
            "but the curves do not follow the model's shape (lack of fit): when the curve \
             bends gradually, X below one break depends on how far along it each {h} \
             reaches, so curvature may cause this change rather than aging"
        )
    } else {
        format!(
            "the slow regime has not reached its aging limit, so the joint fit mixes ages — \
             quote the per-{h} values or the oldest one"
        )
    };
    format!(
        "X changes with age: {} [{}, {}] per decade of {h} \
         over {curves} curves ({h} = {} to {}); {why}",
        s[0],
        s[1],
        s[2],
        fmt_num(*first),
        fmt_num(*last),
    )
}

/// The sentence of a verdict.
pub fn verdict(v: &Verdict) -> String {
    let pr = |p: &f64, b: &usize| p_clause(*p, *b);
    let x = |[x, lo, hi]: &[f64; 3]| with_interval(*x, *lo, *hi);
    match v {
        Verdict::NotFitted { points, min_branch } => format!(
            "not fitted: {points} points, and each branch needs at least {min_branch} with \
             distinct C values"
        ),
        Verdict::NoInterval => "no interval for X could be formed".into(),
        Verdict::Equilibrium {
            p,
            resamples,
            alpha,
        } => format!(
            "equilibrium: no violation of the fluctuation–dissipation relation at the {:.0}% \
             level ({}); with no break, X below a break is not meaningful",
            100.0 * alpha,
            pr(p, resamples)
        ),
        Verdict::BreakAtEdge {
            p,
            resamples,
            q,
            ratio,
        } => format!(
            "a break is detected ({}) at C = {}, at the edge of the points: one regime is \
             barely reached, so X ({}) is not quoted with an interval and this curve is left \
             out of the aging trend",
            pr(p, resamples),
            num3(*q),
            num3(*ratio)
        ),
        Verdict::LineSlope {
            ratio,
            p,
            resamples,
        } => format!(
            "one line of slope -X with X = {}: the slope differs from the equilibrium -1 ({})",
            x(ratio),
            pr(p, resamples)
        ),
        Verdict::LineEquilibrium {
            ratio,
            p,
            resamples,
        } => format!(
            "equilibrium: the slope is compatible with -1 ({}); X = {}",
            pr(p, resamples),
            x(ratio)
        ),
        _ => break_verdict(v),
    }
}

/// Verdicts of a detected break away from the edge.
fn break_verdict(v: &Verdict) -> String {
    let pr = |p: &f64, b: &usize| p_clause(*p, *b);
    let x = |[x, lo, hi]: &[f64; 3]| with_interval(*x, *lo, *hi);
    match v {
        Verdict::NoSlowResponse { q, p, resamples } => format!(
            "no response in the slow regime: below C = {} the response stays flat within \
             errors (X compatible with 0, T_eff unbounded), as in coarsening ({})",
            num3(*q),
            pr(p, resamples)
        ),
        Verdict::WeakViolation {
            ratio,
            p,
            resamples,
        } => format!(
            "a break is detected ({}) but X = {} is compatible with 1: the violation is weak \
             at this precision",
            pr(p, resamples),
            x(ratio)
        ),
        Verdict::OneBreak {
            q,
            ratio,
            level,
            p,
            resamples,
        } => format!(
            "one break: slope -1 down to C = {}, then X = {} at the {:.0}% level ({} for \
             equilibrium)",
            num3(*q),
            x(ratio),
            100.0 * level,
            pr(p, resamples)
        ),
        Verdict::Curved {
            p,
            resamples,
            alpha,
            p_equilibrium: _,
        } => format!(
            "curved: the points do not follow the model's straight segments (lack of fit, {}, \
             tested at {}); the slope changes gradually rather than at one break, so no \
             single q and X describe this curve — try --model free, or --model smooth for a continuous X(C)",
            pr(p, resamples),
            fmt_level(*alpha)
        ),
        Verdict::ColderThanBath {
            ratio,
            p,
            resamples,
        } => format!(
            "one break with X = {} above 1: the slow modes look colder than the bath ({})",
            x(ratio),
            pr(p, resamples)
        ),
        Verdict::NegativeRatio {
            ratio,
            p,
            resamples,
        } => format!(
            "one break with negative X = {} ({})",
            x(ratio),
            pr(p, resamples)
        ),
        _ => verdict(v),
    }
}

/// A value with its interval when both ends are known, else the value alone.
fn value_and_interval(v: f64, low: Option<f64>, high: Option<f64>) -> String {
    match (low, high) {
        (Some(lo), Some(hi)) => with_interval(v, lo, hi),
        _ => num3(v),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_small_x_keeps_its_numbers_and_a_floor_p_reads_as_a_bound() {
        let v = Verdict::OneBreak {
            q: 0.6,
            ratio: [0.0012, 0.00031, 0.0029],
            level: 0.95,
            p: 1.0 / 2001.0,
            resamples: 2000,
        };
        assert_eq!(
            verdict(&v),
            "one break: slope -1 down to C = 0.600, then X = 0.0012 [3.1e-4, 0.0029] at the 95% \
             level (p ≤ 5.0e-4 for equilibrium)"
        );
    }

    #[test]
    fn lack_of_fit_words_name_curvature_and_never_one_clean_break() {
        let v = Verdict::Curved {
            p: 0.001,
            resamples: 999,
            alpha: 0.05,
            p_equilibrium: 0.001,
        };
        let words = verdict(&v);
        assert!(words.starts_with("curved: "), "{words}");
        assert!(!words.contains("one break:"), "{words}");
        assert!(words.contains("--model free"), "{words}");
        let lof = finding(&Finding::LackOfFit {
            p: 0.004,
            level: 0.05 / 3.0,
            resamples: 999,
        });
        assert!(
            lof.contains("curvature") && lof.contains("tested at 1.67%"),
            "{lof}"
        );
        let slope = finding(&Finding::SlopeAboveCurved {
            slope: -0.9,
            low: Some(-0.95),
            high: Some(-0.85),
            p: 0.002,
            resamples: 999,
        });
        assert!(slope.contains("curvature may cause this"), "{slope}");
        let aging = finding(&Finding::XChangesWithAgeCurved {
            hold: Hold::Tw,
            change_per_decade: 0.05,
            low: 0.02,
            high: 0.08,
            curves: 3,
            first: 100.0,
            last: 10000.0,
        });
        assert!(
            aging.contains("curvature may cause this change rather than aging"),
            "{aging}"
        );
    }
}
