//! A file of several observables: each observable's report under its name, then the joint
//! test that they share one X, as text and as JSON.

use super::format::{fmt_p, fmt_p_resampled};
use super::sig;
use super::text::{est, wrap};
use crate::twotime::observables::{ObservablesReport, SharedRatio, SharedVerdict};
use std::fmt::Write;

/// The text report: every observable's own report, then the joint section.
pub fn render(r: &ObservablesReport) -> Vec<u8> {
    let mut o = String::new();
    for f in &r.observables {
        let name = f.observable.as_deref().unwrap_or_default();
        let _ = writeln!(o, "━━ observable '{name}' ━━");
        o.push_str(&String::from_utf8_lossy(&super::text::render(f)));
        o.push('\n');
    }
    section(&mut o, r);
    o.into_bytes()
}

/// The joint section: each observable's X, the test, the common X, the verdict and the
/// methods sentence.
fn section(o: &mut String, r: &ObservablesReport) {
    let s = &r.shared_ratio;
    let _ = writeln!(
        o,
        "━━ one X for every observable? ({} observables, the same {} samples and resamples) ━━",
        s.observables.len(),
        r.observables.first().map_or(0, |f| f.n_samples)
    );
    let width = s
        .observables
        .iter()
        .map(|x| x.observable.chars().count())
        .max()
        .unwrap_or(0)
        .max(10);
    let _ = writeln!(
        o,
        "  {:width$}  X (joint fit of its curves)   resampled sd",
        "observable"
    );
    for (x, f) in s.observables.iter().zip(&r.observables) {
        let _ = writeln!(
            o,
            "  {:width$}  {:28}  {}",
            x.observable,
            est(&f.fits[0].ratio),
            x.se.map_or_else(|| "—".into(), |v| sig(v, 2))
        );
    }
    if s.observables.len() > 1 && s.resamples_used > 1 {
        let mut pairs = Vec::new();
        for a in 0..s.observables.len() {
            for c in a + 1..s.observables.len() {
                pairs.push(format!(
                    "{}–{} {}",
                    s.observables[a].observable,
                    s.observables[c].observable,
                    sig(s.correlation[a][c], 2)
                ));
            }
        }
        let _ = writeln!(o, "  correlation of the resampled X: {}", pairs.join(", "));
    }
    if let (Some(w), Some(p)) = (s.wald, s.p_value) {
        let _ = writeln!(
            o,
            "  test       Wald W = {} on {} difference{} from '{}', against its {} resampled \
             values: p = {}",
            sig(w, 3),
            s.contrasts,
            if s.contrasts == 1 { "" } else { "s" },
            s.observables[0].observable,
            s.resamples_used,
            fmt_p_resampled(p, s.resamples_used)
        );
    }
    if s.verdict == SharedVerdict::Consistent {
        let _ = writeln!(
            o,
            "  common     X = {}, T_eff = {}",
            est(&s.common_ratio),
            est(&s.common_t_eff)
        );
    }
    let _ = writeln!(o, "{}", wrap(&verdict(s), 92, "  "));
    let _ = writeln!(o);
    let _ = writeln!(o, "methods (observables)");
    let _ = writeln!(o, "{}", wrap(&methods(s), 92, "  "));
}

/// The verdict in words.
pub fn verdict(s: &SharedRatio) -> String {
    let level = sig(s.test_level, 2);
    match s.verdict {
        SharedVerdict::Differ => format!(
            "verdict: the observables do not share one X (p = {} < {level}): no single \
             effective temperature describes their aging branches; report T_eff per observable.",
            s.p_value
                .map_or_else(|| "—".into(), |p| fmt_p_resampled(p, s.resamples_used))
        ),
        SharedVerdict::Consistent => format!(
            "verdict: one X for every observable is consistent with the data (p = {} ≥ \
             {level}); this is not proof that they share it: differences smaller than the \
             intervals above would go unseen.",
            s.p_value.map_or_else(|| "—".into(), fmt_p)
        ),
        SharedVerdict::Undecided => format!(
            "verdict: no joint test: {}.",
            s.note.as_deref().unwrap_or("it could not be formed")
        ),
    }
}

/// The methods sentence of the joint test.
fn methods(s: &SharedRatio) -> String {
    format!(
        "Each observable was fitted on its own with the same resamples of the samples \
         (resample b draws the same samples for every observable), so the resampled X's keep \
         their covariance; {} resamples gave every observable an X. The hypothesis that all \
         share one X was tested at the {} level with the Wald statistic of the {} \
         difference{} from the first observable, studentized by their resampled covariance \
         and referred to the same statistic in every resample, centred on the estimate (a \
         bootstrap Wald test). Where it is not rejected, the common X is the \
         generalized-least-squares mean of the observables' X with the resampled covariance, \
         its interval read with Student's t on n − 1 degrees of freedom.",
        s.resamples_used,
        sig(s.test_level, 2),
        s.contrasts,
        if s.contrasts == 1 { "" } else { "s" }
    )
}

/// The JSON: every observable's report as `fit --json` writes it, and the joint test with
/// its verdict's sentence.
pub fn json(r: &ObservablesReport) -> Vec<u8> {
    let mut v = serde_json::json!({
        "schema": r.schema,
        "tool": r.tool,
        "input": r.input,
    });
    let fits: Vec<serde_json::Value> = r
        .observables
        .iter()
        .filter_map(|f| serde_json::from_slice(&super::json::fit_json(f)).ok())
        .collect();
    v["observables"] = serde_json::Value::Array(fits);
    let mut shared = serde_json::to_value(&r.shared_ratio).unwrap_or_default();
    shared["message"] = verdict(&r.shared_ratio).into();
    v["shared_ratio"] = shared;
    super::json::to_json(&v)
}
