//! The text report: a table per fit, the verdict, cautions, and a methods paragraph.

use super::findings;
use super::format::{Digits, distinct, fmt_num, fmt_p_resampled, p_clause, percent};
use super::sig;
use crate::common::Units;
use crate::twotime::model;
use crate::twotime::points::Axes;
use crate::twotime::settings::Weighting;
use crate::twotime::{Caution, Estimate, FitReport, GroupFit};
use std::fmt::Write;

/// An estimate with its interval, as the tables print it.
pub(super) fn est(e: &Estimate) -> String {
    match e.estimate {
        None => "—".into(),
        Some(v) => {
            if e.low.is_none()
                && e.high.is_none()
                && e.note
                    .as_deref()
                    .is_none_or(|n| !n.starts_with("unbounded"))
            {
                return sig(v, 4);
            }
            let ends = [e.low, e.high];
            let mut values = vec![v];
            values.extend(ends.iter().flatten());
            let mut texts = distinct(&values, Digits::Sig(4), false).into_iter();
            let first = texts.next().unwrap_or_default();
            let [low, high] = ends.map(|x| {
                x.map_or_else(|| "unbounded".into(), |_| texts.next().unwrap_or_default())
            });
            format!("{first} [{low}, {high}]")
        }
    }
}

/// A caution as the text report lists it: its subject, then its sentence.
fn sentence(c: &Caution) -> String {
    let who = findings::subject(c.subject);
    if who.is_empty() {
        findings::caution(c)
    } else {
        format!("{who}: {}", findings::caution(c))
    }
}

/// The fit's row label: `all` or its held time.
pub(super) fn label(f: &GroupFit) -> String {
    f.tw.or(f.t).map_or_else(|| "all".into(), fmt_num)
}

/// The human-readable report.
pub fn render(r: &FitReport) -> Vec<u8> {
    let mut o = String::new();
    header(&mut o, r);
    fits_table(&mut o, r);
    calibrated_table(&mut o, r);
    super::shape::section(&mut o, r);
    super::two_time::section(&mut o, r);
    verdicts(&mut o, r);
    super::shape::verdicts(&mut o, r);
    aging_line(&mut o, r);
    limit_section(&mut o, r);
    cautions(&mut o, r);
    let _ = writeln!(o);
    let _ = writeln!(o, "methods");
    let _ = writeln!(o, "{}", wrap(&methods(r), 92, "  "));
    o.into_bytes()
}

/// What was fitted and how: data, axes and units, model and weights, intervals.
fn header(o: &mut String, r: &FitReport) {
    let s = &r.settings;
    let g = &s.given;
    let _ = writeln!(
        o,
        "fdtemp {} · fluctuation–dissipation fit in the time domain",
        r.tool.version
    );
    let tws: Vec<String> = r.waiting_times.iter().map(|&t| fmt_num(t)).collect();
    let _ = writeln!(
        o,
        "data       {}{}{} samples, {} waiting time{} ({}), {} points",
        r.input.as_ref().map_or(String::new(), |f| format!("{f}: ")),
        r.observable
            .as_ref()
            .map_or(String::new(), |n| format!("observable '{n}', ")),
        r.n_samples,
        tws.len(),
        if tws.len() == 1 { "" } else { "s" },
        tws.join(", "),
        r.points.len()
    );
    if let Some(line) = super::format::excluded_line(&r.excluded_samples) {
        let _ = writeln!(o, "{line}");
    }
    let units = match g.units {
        Units::Reduced => "k = 1, reduced units".to_string(),
        Units::Si => format!("k = {} J/K, SI", sig(s.k, 7)),
    };
    let axes = match s.axes_used {
        Axes::Normalized => "x = C/C(t,t), y = k·T·chi/C(t,t)",
        _ => "x = C, y = k·T·chi",
    };
    let _ = writeln!(
        o,
        "axes       {axes}; T = {} ({units})",
        fmt_num(g.temperature)
    );
    let weights = match g.weights {
        Weighting::InverseVariance => "inverse-variance weights",
        Weighting::Uniform => "uniform weights",
    };
    let _ = writeln!(
        o,
        "model      {}; {weights}; at least {} points per branch",
        model::of(g.model).describe(),
        g.min_branch
    );
    let _ = writeln!(
        o,
        "intervals  {:.0}% {} from {} resamples of whole samples (seed {}); slopes read at \
         {} for {} samples (Student's width)",
        100.0 * g.level,
        g.interval.label(),
        g.resamples,
        g.seed,
        percent(r.settings.slope_level),
        r.n_samples
    );
}

/// One row per fit: the break, X, T_eff, the slope above q and the p-values.
fn fits_table(o: &mut String, r: &FitReport) {
    let g = &r.settings.given;
    let _ = writeln!(o);
    let held = g.hold.name();
    let mut rows: Vec<[String; 9]> = vec![[
        held.into(),
        "points".into(),
        "break q".into(),
        "X".into(),
        "T_eff".into(),
        "slope above q".into(),
        "p(equilibrium)".into(),
        "p(slope -1)".into(),
        "p(lack of fit)".into(),
    ]];
    for f in &r.fits {
        rows.push([
            label(f),
            f.n_points.to_string(),
            est(&f.brk),
            est(&f.ratio),
            est(&f.t_eff),
            est(&f.fast_slope),
            f.equilibrium_p
                .map_or("—".into(), |p| fmt_p_resampled(p, f.null_resamples)),
            f.thermometer_p
                .map_or("—".into(), |p| fmt_p_resampled(p, f.null_resamples)),
            f.lack_of_fit_p
                .map_or("—".into(), |p| fmt_p_resampled(p, f.null_resamples)),
        ]);
    }
    o.push_str(&table(&rows));
    if r.two_time.is_some() {
        let _ = writeln!(
            o,
            "(X in this table: minus the slope of the fixed-{held} curve (jointly: of all              curves), not the two-time ratio X(t,tw) below)"
        );
    }
    if let Some(note) = model::of(g.model).table_note() {
        let _ = writeln!(o, "{note}");
    }
}

/// The intervals calibrated on simulated campaigns of this design, when asked for.
fn calibrated_table(o: &mut String, r: &FitReport) {
    let Some(level) = r
        .fits
        .iter()
        .find_map(|f| f.calibrated.as_ref().map(|c| c.level))
    else {
        return;
    };
    let held = r.settings.given.hold.name();
    let mut rows: Vec<[String; 6]> = vec![[
        held.into(),
        "quantity".into(),
        format!("calibrated {:.0}% interval", 100.0 * level),
        "nominal level used".into(),
        "plain interval covered".into(),
        "campaigns".into(),
    ]];
    let mut notes = Vec::new();
    for f in &r.fits {
        let Some(c) = &f.calibrated else { continue };
        let quantities = [
            ("X", &c.x, &f.ratio),
            ("T_eff", &c.t_eff, &f.t_eff),
            ("break q", &c.brk, &f.brk),
            ("slope above q", &c.slope_above, &f.fast_slope),
        ];
        for (name, ci, plain) in quantities {
            let Some(ci) = ci else { continue };
            let e = Estimate {
                estimate: plain.estimate,
                low: ci.low,
                high: ci.high,
                note: ci.high.is_none().then(|| "unbounded".into()),
            };
            rows.push([
                label(f),
                name.into(),
                est(&e),
                format!(
                    "{} [{}, {}]",
                    percent(ci.nominal_level),
                    percent(ci.nominal_range[0]),
                    percent(ci.nominal_range[1])
                ),
                percent(ci.plain_coverage),
                ci.campaigns.to_string(),
            ]);
        }
        notes.extend(c.notes.iter().map(|n| format!("{}: {n}", label(f))));
    }
    let _ = writeln!(o);
    o.push_str(&table(&rows));
    for n in notes {
        let _ = writeln!(o, "  {n}");
    }
}

/// The joint fit's verdict, then one per curve.
fn verdicts(o: &mut String, r: &FitReport) {
    let held = r.settings.given.hold.name();
    let _ = writeln!(o);
    let _ = writeln!(o, "verdict    {}", findings::verdict(&r.verdict));
    for f in r.fits.iter().skip(1) {
        let _ = writeln!(
            o,
            "  {held} = {:<6} {}",
            label(f),
            findings::verdict(&f.verdict)
        );
    }
}

/// The aging trend, or why there is none.
fn aging_line(o: &mut String, r: &FitReport) {
    let held = r.settings.given.hold.name();
    if let Some(a) = &r.aging {
        let left: Vec<String> = a
            .left_out
            .iter()
            .map(|l| format!("{held} = {} ({})", fmt_num(l.held), l.reason))
            .collect();
        let left = if left.is_empty() {
            String::new()
        } else {
            format!("; left out: {}", left.join(", "))
        };
        if a.change_per_decade.estimate.is_some() {
            let used: Vec<String> = a.curves_used.iter().map(|&t| fmt_num(t)).collect();
            let _ = writeln!(
                o,
                "aging      dX/dlog10({held}) = {} per decade over {held} = {} (percentile interval){left}",
                est(&a.change_per_decade),
                used.join(", "),
            );
            let _ = writeln!(
                o,
                "           {}",
                settling_words(a, r.settings.given.level)
            );
        } else {
            let _ = writeln!(
                o,
                "aging      no trend: fewer than 2 curves where X is quoted{left}"
            );
        }
    }
}

/// The long-age limit (`--limit`): X∞, T_eff∞, α and what they rest on.
fn limit_section(o: &mut String, r: &FitReport) {
    let Some(l) = &r.age_limit else { return };
    let l = match l {
        Ok(l) => l,
        Err(note) => {
            let _ = writeln!(o, "limit      not formed: {note}");
            return;
        }
    };
    let tws: Vec<String> = l.waiting_times.iter().map(|&t| fmt_num(t)).collect();
    let _ = writeln!(
        o,
        "limit      tw → ∞ at fixed C over tw = {}: X∞ = {}, T_eff∞ = {}; approach tw^-α with α = {}",
        tws.join(", "),
        est(&l.x_inf),
        est(&l.t_eff_inf),
        est(&l.alpha),
    );
    let (lo, hi) = (
        l.points.first().map_or(f64::NAN, |p| p.c),
        l.points.last().map_or(f64::NAN, |p| p.c),
    );
    let below = l.points.iter().filter(|p| p.below).count();
    let slope_of = l.break_used.map_or_else(
        || format!("over all {below} values (no break detected)"),
        |q| {
            format!(
                "below the joint fit's break q = {} ({below} values)",
                sig(q, 4)
            )
        },
    );
    let _ = writeln!(
        o,
        "           X∞ is the slope of the extrapolated curve y∞(C), {slope_of}, on {} values of C \
         from {} to {}; it is neither a fixed-tw slope nor the two-time ratio",
        l.points.len(),
        sig(lo, 3),
        sig(hi, 3),
    );
    if l.failed_resamples > 0 {
        let _ = writeln!(
            o,
            "           {} resamples could not be fitted and are left out",
            l.failed_resamples
        );
    }
}

/// The limit in the methods paragraph.
fn limit_methods(r: &FitReport) -> String {
    match &r.age_limit {
        Some(Ok(l)) => format!(
            " The limit of long ages was fitted at {} equally spaced values of C shared by \
             the curves (each curve interpolated linearly in C) as y = y∞(C) + a(C)·(tw/tw₀)^−α \
             with one exponent α for every C (least squares, α searched from 0.05 to 3), and \
             X∞ is minus the slope of the least-squares line through y∞(C) {}; the whole fit \
             was repeated on every resample (percentile intervals of α and y∞ read at \
             Student's width) and without each sample (X∞ ± t_{{n−1}} times its jackknife \
             standard error).",
            l.points.len(),
            l.break_used.map_or_else(
                || "over every value".to_string(),
                |q| format!("below the joint fit's break ({})", sig(q, 4))
            )
        ),
        _ => String::new(),
    }
}

/// The settled-or-drifting verdict of the aging trend, in words.
fn settling_words(a: &crate::twotime::result::AgingTrend, level: f64) -> String {
    use crate::twotime::result::Settling;
    let d = fmt_num(a.settled_within);
    let tost = a.settling_interval.map_or_else(
        || "no interval".to_string(),
        |[lo, hi]| {
            let t = distinct(&[lo, hi], Digits::Sig(3), false);
            format!(
                "{:.0}% interval [{}, {}]",
                100.0 * (2.0 * level - 1.0),
                t[0],
                t[1]
            )
        },
    );
    match a.settling {
        Settling::Settled => format!(
            "settled: X changes by less than ±{d} per decade ({tost} inside ±{d}; two one-sided tests)"
        ),
        Settling::Drifting => {
            "still drifting: the interval of the change per decade excludes 0".into()
        }
        Settling::Undecided => format!(
            "neither settled within ±{d} per decade ({tost} reaches past ±{d}) nor shown to drift"
        ),
        Settling::Untested => String::new(),
    }
}

/// Every caution, with its subject.
fn cautions(o: &mut String, r: &FitReport) {
    let held = r.settings.given.hold.name();
    let mut cautions: Vec<String> = r.cautions.iter().map(sentence).collect();
    for f in &r.fits {
        let who = f.tw.or(f.t).map_or_else(
            || "all curves together".into(),
            |t| format!("{held} = {}", fmt_num(t)),
        );
        cautions.extend(f.cautions.iter().map(sentence));
        cautions.extend(super::shape::cautions(f, &who));
        for (what, e) in [("break q", &f.brk), ("X", &f.ratio), ("T_eff", &f.t_eff)] {
            if let Some(n) = &e.note
                && f.ratio.estimate.is_some()
            {
                cautions.push(format!("{who}: {what}: {n}"));
            }
        }
    }
    cautions.dedup();
    if !cautions.is_empty() {
        let _ = writeln!(o);
        let _ = writeln!(o, "cautions");
        for c in &cautions {
            let _ = writeln!(o, "  - {c}");
        }
    }
}

/// A methods paragraph that states how the numbers were made.
pub fn methods(r: &FitReport) -> String {
    let g = &r.settings.given;
    let kt = match g.units {
        Units::Reduced => format!("T = {} in units with k = 1", fmt_num(g.temperature)),
        Units::Si => format!("T = {} K and k = 1.380649e-23 J/K", fmt_num(g.temperature)),
    };
    let axes = match r.settings.axes_used {
        Axes::Normalized => "(C/C(t,t), k·T·chi/C(t,t)), ratios of sample means",
        _ => "(C, k·T·chi) from sample means",
    };
    let m = model::of(g.model);
    let weights = weights_phrase(g.weights, m);
    let interval = interval_phrase(g.interval);
    let p = r.fits[0]
        .equilibrium_p
        .map_or("p not computed".into(), |p| {
            p_clause(p, r.fits[0].null_resamples)
        });
    let search = if !m.has_break() {
        String::new()
    } else {
        format!(
            ", minimizing exactly over q with at least {} points on each segment",
            g.min_branch
        )
    };
    let test = test_sentences(m, &p);
    let aging = if r.aging.is_some() {
        format!(
            " The change of X with age is the least-squares slope of the per-curve X against \
             log10 {held} over the curves where X is quoted, with a percentile interval from \
             the same resamples.",
            held = g.hold.name()
        ) + &format!(
            " X is called settled when two one-sided tests at the {:.0}% level each place the \
             change per decade within ±{} (its {:.0}% percentile interval inside that margin).",
            100.0 * g.test_level(),
            fmt_num(g.settled_within),
            100.0 * (1.0 - 2.0 * g.test_level())
        )
    } else {
        String::new()
    };
    let aging = aging + &limit_methods(r);
    format!(
        "Fluctuation–dissipation ratios were estimated with fdtemp {ver}. For each of {n} \
         independent samples, the correlation C(t,tw) and the integrated response chi(t,tw) \
         were taken at {ntw} waiting time(s) ({np} (tw, t) points), and parametric points \
         {axes} were formed with {kt}. We fitted {model} by least squares, {weights}{search}; \
         T_eff = T/X. Fits were made jointly over all curves and for each curve (fixed {held}) \
         separately{range}. Uncertainties are {lvl:.0}% {interval} from {b} bootstrap \
         resamples of whole samples, so that the correlations between the points of one \
         sample are kept (seed {seed}); the intervals of X, T_eff and the slope above q \
         were read from the resamples at the {read} level, which gives Student's width for \
         {n} samples (the expanded percentile interval, Hesterberg, Am. Stat. 69, 371 \
         (2015)). {test}{aging}{shape}{two_time}{calibration}",
        read = percent(r.settings.slope_level),
        calibration = calibration_sentence(r),
        shape = super::shape::methods(r),
        two_time = super::two_time::methods(r),
        ver = r.tool.version,
        model = m.methods_phrase(),
        held = g.hold.name(),
        range = g.range.map_or(String::new(), |[a, b]| format!(
            ", using the points with x between {} and {}",
            fmt_num(a),
            fmt_num(b)
        )),
        n = r.n_samples,
        ntw = r.waiting_times.len(),
        np = r.points.len(),
        lvl = 100.0 * g.level,
        b = g.resamples,
        seed = g.seed,
    )
}

/// How the intervals were calibrated on the design, when they were.
fn calibration_sentence(r: &FitReport) -> String {
    let Some(c) = r.fits[0].calibrated.as_ref() else {
        return String::new();
    };
    let Some(x) = &c.x else {
        return String::new();
    };
    format!(
        " Calibrated intervals were formed at the nominal level whose intervals covered \
         the truth in {lvl:.0}% of {m} campaigns simulated with this design (the same samples \
         and points, the joint fit's curve as truth, noise: {noise}), each refitted in the \
         same way (calibration of the confidence coefficient: Loh 1987; Hall & Martin 1988); \
         for X of the joint fit that level was {nom}, and the plain {lvl:.0}% interval had \
         covered in {plain} of them.",
        lvl = 100.0 * c.level,
        m = x.campaigns,
        noise = c.noise,
        nom = percent(x.nominal_level),
        plain = percent(x.plain_coverage),
    )
}

/// How the points were weighted, in words.
fn weights_phrase(weights: Weighting, m: &dyn model::FdModel) -> String {
    match weights {
        Weighting::Uniform => "with uniform weights".to_string(),
        Weighting::InverseVariance => format!(
            "weighted by the inverse sample variance of {} at each point (re-estimated in \
             every resample from that resample's samples)",
            if m.c_factor() == 0.0 {
                "k·T·chi"
            } else {
                "k·T·chi + C"
            }
        ),
    }
}

/// How the intervals were formed, in words.
fn interval_phrase(method: crate::resample::IntervalMethod) -> &'static str {
    match method {
        crate::resample::IntervalMethod::Bca => {
            "BCa intervals (acceleration from the leave-one-sample-out jackknife)"
        }
        crate::resample::IntervalMethod::Percentile => "percentile intervals",
        crate::resample::IntervalMethod::Basic => "basic (reflected percentile) intervals",
    }
}

/// The tests in sentences, with the joint fit's equilibrium p-value.
fn test_sentences(m: &dyn model::FdModel, p: &str) -> String {
    let shape = "The model's shape was tested on each curve by a lack-of-fit statistic, the \
         squared weighted mean residual in up to 8 equal-count bins of C summed over the \
         bins, calibrated by the same resamples moved onto the fitted model and refitted \
         (jointly: the sum over the curves at the test level; each curve at the level \
         divided by the number of curves).";
    let tests = if !m.has_break() {
        format!(
            "The hypothesis of equilibrium (slope -1) was tested with the statistic SSE(slope \
             -1) − SSE(free slope), calibrated by the same resamples moved onto the fitted \
             slope -1 line; for the joint fit {p}."
        )
    } else {
        format!(
            "The hypothesis of no break (equilibrium) was tested with the statistic SSE(no \
             break) − SSE(two segments), calibrated by the same resamples moved onto the fitted \
             no-break model, because the break is not identified under that hypothesis; for \
             the joint fit {p}. X is quoted only where this test rejects and the break lies \
             away from the edge of the points. The slope above the break was tested against -1 \
             (a check of the thermometer and the response units) with the resamples centred on \
             its estimate."
        )
    };
    format!("{tests} {shape}")
}

/// Wraps text at `width` columns with an indent.
pub fn wrap(text: &str, width: usize, indent: &str) -> String {
    let mut out = String::new();
    let mut line = String::from(indent);
    for word in text.split_whitespace() {
        if line.len() > indent.len() && line.chars().count() + 1 + word.chars().count() > width {
            out.push_str(&line);
            out.push('\n');
            line = String::from(indent);
        }
        if line.len() > indent.len() {
            line.push(' ');
        }
        line.push_str(word);
    }
    out.push_str(&line);
    out
}

/// Lays out rows in columns two spaces apart (the second column right-aligned).
pub(super) fn table<const N: usize>(rows: &[[String; N]]) -> String {
    let mut width = [0usize; N];
    for r in rows {
        for (w, c) in width.iter_mut().zip(r) {
            *w = (*w).max(c.chars().count());
        }
    }
    let mut o = String::new();
    for r in rows {
        let mut line = String::new();
        for (i, (c, w)) in r.iter().zip(width).enumerate() {
            let pad = w - c.chars().count();
            if i == 1 {
                line.push_str(&" ".repeat(pad));
                line.push_str(c);
            } else {
                line.push_str(c);
                if i + 1 < N {
                    line.push_str(&" ".repeat(pad));
                }
            }
            if i + 1 < N {
                line.push_str("  ");
            }
        }
        o.push_str(line.trim_end());
        o.push('\n');
    }
    o
}
