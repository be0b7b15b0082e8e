//! `reduce`'s outputs: the reduction in words, its JSON, the campaign and per-point tables.
//! The command line and the Python package write these same bytes.

use crate::reduce::quench::QuenchReduction;
use crate::reduce::quench_fit::QuenchFits;
use crate::reduce::twin::{FieldTest, TwinReduction};
use crate::reduce::{Reduced, Reduction};
use crate::report::format::{fmt_num, p_clause, sig};
use serde_json::{Value, json};
use std::fmt::Write;

/// The reduction in words (what `reduce` prints before the files it wrote).
pub fn text(r: &Reduction) -> String {
    let file = r.label.display().to_string();
    match &r.reduced {
        Reduced::Twins(t) => render_twins(t, &file),
        Reduced::Quenches(q) => {
            let mut s = render_quenches(q, &file);
            if let Some(f) = &r.quench_fit {
                s.push_str(&render_quench_fit(f));
            }
            s
        }
    }
}

/// The direct fit of repeated quenches in words.
fn render_quench_fit(f: &QuenchFits) -> String {
    let mut s = String::new();
    let pct = fmt_num(100.0 * f.level);
    let _ = writeln!(
        s,
        "\nfit        broken stick on y = T·chi against C (slope −1 above q, −X below), T = {}; weights 1/var(y + C) per point; {pct}% percentile intervals from the same {} stratified replicates of runs",
        fmt_num(f.settings.temperature),
        f.replicates
    );
    let iv = |e: &crate::common::Estimate| match (e.estimate, e.low, e.high) {
        (Some(v), Some(l), Some(h)) => format!("{} [{}, {}]", sig(v, 4), sig(l, 4), sig(h, 4)),
        (Some(v), Some(l), None) => format!("{} [{}, ∞)", sig(v, 4), sig(l, 4)),
        (Some(v), _, _) => format!("{} (no interval)", sig(v, 4)),
        _ => "—".into(),
    };
    let _ = writeln!(
        s,
        "           {:<8} {:>6}  {:<28} {:<28} {:<28}",
        "tw", "points", "X", "T_eff", "q"
    );
    for g in &f.fits {
        let tw = g.tw.map_or_else(|| "all".to_string(), fmt_num);
        let _ = writeln!(
            s,
            "           {:<8} {:>6}  {:<28} {:<28} {:<28}",
            tw,
            g.n_points,
            iv(&g.x),
            iv(&g.t_eff),
            iv(&g.q)
        );
    }
    for g in &f.fits {
        let tw =
            g.tw.map_or_else(|| "all tw".to_string(), |t| format!("tw = {}", fmt_num(t)));
        let b = f.replicates;
        let p = g
            .p_equilibrium
            .map_or_else(|| "no p-value".to_string(), |p| p_clause(p, b));
        let test = format!(
            "{p}; null-imposed test of one line of slope −1, level {}",
            fmt_num(1.0 - f.level)
        );
        let verdict = if g.violates_equilibrium {
            format!("{tw}: the equilibrium relation is violated ({test})")
        } else {
            format!(
                "{tw}: no violation of the equilibrium relation shown ({test}); the X below is then no evidence of a second temperature"
            )
        };
        let _ = writeln!(s, "verdict    {verdict}");
        for c in &g.cautions {
            let _ = writeln!(s, "caution    {tw}: {c}");
        }
    }
    s
}

/// The file `--out` names: the campaign `fit` reads (twins), or the per-point table of C
/// and χ with their intervals (quenches).
pub fn out_csv(r: &Reduction) -> Vec<u8> {
    match &r.reduced {
        Reduced::Twins(t) => crate::input::write_campaign(&t.campaign),
        Reduced::Quenches(q) => table_quenches(q),
    }
}

/// The per-point table `--table` names: twins, and quenches with several fields at a tw
/// (χ per field, shift, p-value); None for quenches with one field per tw.
pub fn table_csv(r: &Reduction) -> Option<Vec<u8>> {
    match &r.reduced {
        Reduced::Twins(t) => Some(table_twins(t)),
        Reduced::Quenches(q) if !q.designs.is_empty() => Some(table_quench_levels(q)),
        Reduced::Quenches(_) => None,
    }
}

/// Version of the layout of [`json`].
pub const SCHEMA: u32 = 1;

/// The reduction as JSON: settings, the design of the field levels, the linear-response
/// test, cautions with their words, and every point.
pub fn json(r: &Reduction) -> Vec<u8> {
    let common = json!({
        "schema": SCHEMA,
        "tool": crate::common::ToolInfo::default(),
        "command": "reduce",
        "input": r.label.display().to_string(),
        "protocol": r.protocol(),
    });
    let rest = match &r.reduced {
        Reduced::Twins(t) => json!({
            "settings": t.settings,
            "n_samples": t.samples,
            "waiting_times": t.campaign.waiting_times(),
            "n_points": t.points.len(),
            "design": t.design,
            "linearity": t.test,
            "early": t.early,
            "cautions": cautions(&twin_lines(t)),
            "points": t.points,
        }),
        Reduced::Quenches(q) => json!({
            "settings": q.settings,
            "unperturbed_runs": q.unperturbed,
            "perturbed_runs": q.perturbed.iter().map(|(tw, n)| json!({"tw": tw, "runs": n})).collect::<Vec<_>>(),
            "n_times": q.times,
            "n_points": q.points.len(),
            "design": q.designs,
            "linearity": q.test,
            "early": q.early,
            "cautions": cautions(&quench_lines(q)),
            "fit": r.quench_fit,
            "points": q.points,
        }),
    };
    let mut v = common;
    if let (Value::Object(a), Value::Object(b)) = (&mut v, rest) {
        a.extend(b);
    }
    let mut out = serde_json::to_vec_pretty(&v).unwrap_or_else(|e| {
        format!("{{\"error\": \"cannot serialize the result: {e}\"}}").into_bytes()
    });
    out.push(b'\n');
    out
}

/// A caution: its code and the words the report prints.
struct Line {
    code: &'static str,
    message: String,
}

fn cautions(lines: &[Line]) -> Value {
    Value::Array(
        lines
            .iter()
            .map(|l| json!({"code": l.code, "message": l.message}))
            .collect(),
    )
}

/// The twin reduction in words.
fn render_twins(r: &TwinReduction, file: &str) -> String {
    let mut s = String::new();
    let tws = r.campaign.waiting_times();
    let levels: Vec<String> = r
        .design
        .levels
        .iter()
        .map(|v| {
            if r.design.symmetric {
                format!("±{}", fmt_num(*v))
            } else {
                fmt_num(*v)
            }
        })
        .collect();
    let _ = writeln!(
        s,
        "twin runs  {file}: {} samples, {} waiting times, {} points; fields {}",
        r.samples,
        tws.len(),
        r.points.len(),
        levels.join(", ")
    );
    let _ = writeln!(s, "chi        {}", r.design.rule);
    render_linearity(
        &mut s,
        r.test.as_ref(),
        r.points.len(),
        &format!("{} resamples of samples", r.settings.resamples),
        r.settings.resamples,
        "one field level only",
    );
    for l in twin_lines(r).iter().filter(|l| l.code == EARLY) {
        let _ = writeln!(s, "caution    {}", l.message);
    }
    s
}

/// The `linearity` lines of the text report (twins and quenches): `tested` points,
/// `resampled` says what the bootstrap resampled, `b` its replicates, `single` why there
/// is no test.
fn render_linearity(
    s: &mut String,
    test: Option<&FieldTest>,
    tested: usize,
    resampled: &str,
    b: usize,
    single: &str,
) {
    match test {
        None => {
            let _ = writeln!(
                s,
                "linearity  not tested: {single} (run a second amplitude to test that chi does not depend on h)"
            );
        }
        Some(t) => {
            let stat = if t.statistic.is_finite() {
                sig(t.statistic, 3)
            } else {
                "∞".into()
            };
            if t.rejects {
                let _ = writeln!(
                    s,
                    "linearity  chi depends on h: max |t| = {stat} at tw = {}, t = {} ({}; level {}); {} of {tested} points reject on their own",
                    fmt_num(t.worst.tw),
                    fmt_num(t.worst.t),
                    p_clause(t.p, b),
                    fmt_num(t.alpha),
                    t.points_rejecting,
                );
                let _ = writeln!(
                    s,
                    "           the response is not linear at these fields: use smaller fields, or keep the extrapolation to h → 0 (--combine extrapolate) and check it with a third amplitude"
                );
            } else {
                let _ = writeln!(
                    s,
                    "linearity  no dependence of chi on h detected: max |t| = {stat} over {tested} points ({}; level {})",
                    p_clause(t.p, b),
                    fmt_num(t.alpha)
                );
            }
            let _ = writeln!(s, "           test of {}, {resampled}", t.looks_at);
        }
    }
}

/// The `nonlinear_response` caution of a rejecting test.
fn nonlinear_line(t: &FieldTest, b: usize) -> Line {
    Line {
        code: "nonlinear_response",
        message: format!(
            "chi depends on h (max |t| at tw = {}, t = {}; {}; level {}): the response is \
             not linear at these fields; use smaller fields, or keep the extrapolation to \
             h → 0 and check it with a third amplitude",
            fmt_num(t.worst.tw),
            fmt_num(t.worst.t),
            p_clause(t.p, b),
            fmt_num(t.alpha)
        ),
    }
}

/// Code of the caution that a perturbed run moved before its field was switched on.
const EARLY: &str = "field_before_tw";

/// The twin reduction's cautions.
fn twin_lines(r: &TwinReduction) -> Vec<Line> {
    let mut v = Vec::new();
    match &r.test {
        None => v.push(Line {
            code: "linearity_untested",
            message: "one field level only: that chi does not depend on h is not tested (run a \
                      second amplitude to test it)"
                .into(),
        }),
        Some(t) if t.rejects => v.push(nonlinear_line(t, r.settings.resamples)),
        Some(_) => {}
    }
    if let Some(e) = &r.early {
        v.push(Line {
            code: EARLY,
            message: format!(
                "the field moved the observable before tw: sample '{}', tw = {}, h = {}: m(h) − m(0) = {} at t = {} ({} perturbed run(s) differ before tw); twins should share the noise and switch the field on at tw",
                e.sample,
                fmt_num(e.tw),
                fmt_num(e.h),
                sig(e.difference, 3),
                fmt_num(e.t),
                e.runs
            ),
        });
    }
    v
}

/// The per-point table of a twin reduction.
fn table_twins(r: &TwinReduction) -> Vec<u8> {
    let mut s = String::from("tw,t,corr,chi,chi_se,chi_low,chi_high");
    for (k, v) in r.design.levels.iter().enumerate() {
        let _ = write!(s, ",chi_level{}_{:?}", k + 1, v);
    }
    s.push_str(",shift,p\n");
    for p in &r.points {
        let _ = write!(
            s,
            "{:?},{:?},{:?},{:?},{:?},{:?},{:?}",
            p.tw, p.t, p.corr, p.chi, p.chi_se, p.chi_low, p.chi_high
        );
        for c in &p.chi_levels {
            let _ = write!(s, ",{c:?}");
        }
        let opt = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:?}"));
        let _ = writeln!(s, ",{},{}", opt(p.shift), opt(p.p));
    }
    s.into_bytes()
}

/// The quench reduction in words.
fn render_quenches(r: &QuenchReduction, file: &str) -> String {
    let mut s = String::new();
    let groups: Vec<String> = r
        .perturbed
        .iter()
        .map(|(tw, n)| {
            let fields = r
                .designs
                .iter()
                .find(|d| d.tw.to_bits() == tw.to_bits())
                .map_or(String::new(), |d| {
                    let f: Vec<String> = d
                        .fields
                        .iter()
                        .zip(&d.runs)
                        .map(|(h, k)| format!("{k} at h = {}", fmt_num(*h)))
                        .collect();
                    format!(" ({})", f.join(", "))
                });
            format!("{n} from tw = {}{fields}", fmt_num(*tw))
        })
        .collect();
    let _ = writeln!(
        s,
        "quenches   {file}: {} unperturbed runs, perturbed {}; {} times, {} points",
        r.unperturbed,
        groups.join(", "),
        r.times,
        r.points.len()
    );
    let _ = writeln!(
        s,
        "C          {} over the unperturbed runs; chi = (<A(t)>_h − <A(t)>_0)/h",
        if r.settings.connected {
            "connected <A(t)A(tw)> − <A(t)><A(tw)>"
        } else {
            "plain <A(t)A(tw)>"
        }
    );
    for d in &r.designs {
        let _ = writeln!(s, "chi        tw = {}: {}", fmt_num(d.tw), d.design.rule);
    }
    let _ = writeln!(
        s,
        "intervals  {}% percentile, {} Poisson-bootstrap replicates of runs, unperturbed and perturbed runs apart (seed {})",
        fmt_num(100.0 * r.settings.level),
        r.settings.resamples,
        r.settings.seed
    );
    let tested = r.points.iter().filter(|p| p.p.is_some()).count();
    render_linearity(
        &mut s,
        r.test.as_ref(),
        tested,
        &format!(
            "{} Poisson-bootstrap replicates of runs stratified by (tw, h)",
            r.settings.resamples
        ),
        r.settings.resamples,
        if r.designs.is_empty() {
            "one field per waiting time"
        } else {
            "one field level per waiting time (±h of one amplitude)"
        },
    );
    if r.test.is_some() && !r.untested.is_empty() {
        let _ = writeln!(
            s,
            "           not tested at tw = {} (one field there)",
            r.untested
                .iter()
                .map(|v| fmt_num(*v))
                .collect::<Vec<_>>()
                .join(", ")
        );
    }
    match &r.early {
        None => {
            let _ = writeln!(
                s,
                "early      no perturbed group's mean differs from the unperturbed one before its tw (level {})",
                fmt_num(1.0 - r.settings.level)
            );
        }
        Some(_) => {
            for l in quench_lines(r).iter().filter(|l| l.code == EARLY) {
                let _ = writeln!(s, "caution    {}", l.message);
            }
        }
    }
    let _ = writeln!(
        s,
        "note       the output is pointwise C and chi, not a campaign of samples: `fit` cannot read it; `reduce --fit -T T` fits X on the stratified replicates of these runs"
    );
    s
}

/// The quench reduction's cautions.
fn quench_lines(r: &QuenchReduction) -> Vec<Line> {
    let mut v = Vec::new();
    match &r.test {
        None => v.push(Line {
            code: "linearity_untested",
            message: format!(
                "{}: that chi does not depend on h is not tested (run a second amplitude at a \
                 tw to test it)",
                if r.designs.is_empty() {
                    "one field per waiting time"
                } else {
                    "one field level per waiting time (±h of one amplitude)"
                }
            ),
        }),
        Some(t) => {
            if t.rejects {
                v.push(nonlinear_line(t, r.settings.resamples));
            }
            if !r.untested.is_empty() {
                v.push(Line {
                    code: "linearity_untested",
                    message: format!(
                        "one field at tw = {}: that chi does not depend on h is not tested there \
                         (run a second amplitude at that tw to test it)",
                        r.untested
                            .iter()
                            .map(|v| fmt_num(*v))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                });
            }
        }
    }
    if let Some(e) = &r.early {
        v.push(Line {
            code: EARLY,
            message: format!(
                "the field moved the observable before tw: runs switched on at tw = {} differ from the unperturbed mean at t = {} by z = {} (bound {} over {} comparisons)",
                fmt_num(e.tw),
                fmt_num(e.t),
                sig(e.z, 3),
                sig(e.bound, 3),
                e.comparisons
            ),
        });
    }
    v.push(Line {
        code: "pointwise_only",
        message: "the output is pointwise C and chi, not a campaign of samples: `fit` cannot \
                  read it; `reduce --fit -T T` fits X on the stratified replicates of these runs"
            .into(),
    });
    v
}

/// The per-point table of a quench reduction.
fn table_quenches(r: &QuenchReduction) -> Vec<u8> {
    let mut s = String::from("tw,t,corr,corr_low,corr_high,chi,chi_low,chi_high\n");
    let opt = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:?}"));
    for p in &r.points {
        let _ = writeln!(
            s,
            "{:?},{:?},{:?},{:?},{:?},{},{},{}",
            p.tw,
            p.t,
            p.corr,
            p.corr_low,
            p.corr_high,
            opt(p.chi),
            opt(p.chi_low),
            opt(p.chi_high)
        );
    }
    s.into_bytes()
}

/// The per-point table of quenches with several fields at a tw: χ per level, the shift
/// across the levels and the point's linearity p-value (empty cells at points of a tw with
/// one field).
fn table_quench_levels(r: &QuenchReduction) -> Vec<u8> {
    let k = r
        .designs
        .iter()
        .map(|d| d.design.levels.len())
        .max()
        .unwrap_or(0);
    let shared = r
        .designs
        .windows(2)
        .all(|w| w[0].design.levels == w[1].design.levels);
    let mut s = String::from("tw,t,corr,chi,chi_low,chi_high");
    for j in 0..k {
        match r.designs.first().filter(|_| shared) {
            Some(d) => {
                let _ = write!(s, ",chi_level{}_{:?}", j + 1, d.design.levels[j]);
            }
            None => {
                let _ = write!(s, ",chi_level{}", j + 1);
            }
        }
    }
    s.push_str(",shift,p\n");
    let opt = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:?}"));
    for p in &r.points {
        let _ = write!(
            s,
            "{:?},{:?},{:?},{},{},{}",
            p.tw,
            p.t,
            p.corr,
            opt(p.chi),
            opt(p.chi_low),
            opt(p.chi_high)
        );
        for j in 0..k {
            let c = p.chi_levels.as_ref().and_then(|c| c.get(j).copied());
            let _ = write!(s, ",{}", opt(c));
        }
        let _ = writeln!(s, ",{},{}", opt(p.shift), opt(p.p));
    }
    s.into_bytes()
}
