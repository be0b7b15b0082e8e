//! Number formatting for reports: the one place numbers become text.

/// Formats a number with `sig` significant digits, switching to scientific notation
/// outside `[1e-3, 1e5)`.
pub fn sig(v: f64, sig: usize) -> String {
    if !v.is_finite() {
        return "—".into();
    }
    let a = v.abs();
    if a == 0.0 {
        return "0".into();
    }
    if !(1e-3..1e5).contains(&a) {
        return format!("{:.*e}", sig.saturating_sub(1), v);
    }
    let decimals = (sig as i32 - 1 - a.log10().floor() as i32).max(0) as usize;
    format!("{v:.decimals$}")
}

/// Formats a p-value for reports.
pub fn fmt_p(p: f64) -> String {
    if p < 0.001 {
        format!("{p:.1e}")
    } else {
        format!("{p:.3}")
    }
}

/// Formats a resampling p-value: at its floor `1/(B+1)` (no null resample reached the
/// observed statistic) it is only an upper bound, written "≤".
pub fn fmt_p_resampled(p: f64, resamples: usize) -> String {
    let floor = 1.0 / (resamples as f64 + 1.0);
    if p <= floor * (1.0 + 1e-9) {
        format!("≤ {}", fmt_p(p))
    } else {
        fmt_p(p)
    }
}

/// Formats a number compactly for reports.
pub fn fmt_num(v: f64) -> String {
    if v == 0.0 || (v.abs() >= 1e-3 && v.abs() < 1e5) {
        let s = format!("{v:.4}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:.3e}")
    }
}

/// A p-value as a sentence says it: "p = 0.012", or "p ≤ 5.0e-4" at the floor of a
/// resampled test (no null resample reached the observed statistic).
pub fn p_clause(p: f64, resamples: usize) -> String {
    let v = fmt_p_resampled(p, resamples);
    if v.starts_with('≤') {
        format!("p {v}")
    } else {
        format!("p = {v}")
    }
}

/// How [`distinct`] first tries to write its numbers.
#[derive(Debug, Clone, Copy)]
pub enum Digits {
    /// This many decimals (`{:.3}`).
    Fixed(usize),
    /// This many significant digits ([`sig`]).
    Sig(usize),
}

/// Formats numbers that are read together (an estimate and its interval ends) so that
/// none prints as 0 unless it is 0 and numbers that differ print differently: first as
/// `first` says; when that loses a number, with 2, 3, … significant digits (scientific
/// notation below 1e-3). `plus` writes a `+` before non-negative numbers.
pub fn distinct(values: &[f64], first: Digits, plus: bool) -> Vec<String> {
    let write = |d: Digits| -> Vec<String> {
        values
            .iter()
            .map(|&v| {
                let s = match d {
                    Digits::Fixed(n) => format!("{v:.n$}"),
                    Digits::Sig(n) => sig(v, n),
                };
                if plus && v >= 0.0 { format!("+{s}") } else { s }
            })
            .collect()
    };
    let start = match first {
        Digits::Fixed(_) => 2,
        Digits::Sig(n) => n + 1,
    };
    let mut out = write(first);
    let mut n = start;
    while !keeps_numbers(values, &out) && n <= 12 {
        out = write(Digits::Sig(n));
        n += 1;
    }
    out
}

/// No non-zero number prints as zero, and numbers that differ print differently.
fn keeps_numbers(values: &[f64], texts: &[String]) -> bool {
    let zero = |s: &str| s.trim_start_matches('+').parse::<f64>() == Ok(0.0);
    let lost = values
        .iter()
        .zip(texts)
        .any(|(&v, s)| v.is_finite() && v != 0.0 && zero(s));
    let merged = (0..values.len()).any(|i| {
        (i + 1..values.len()).any(|j| (values[i] - values[j]).abs() > 0.0 && texts[i] == texts[j])
    });
    !lost && !merged
}

/// An estimate and its interval as a sentence writes them: "0.445 [0.435, 0.455]" with
/// three decimals, more digits when three decimals would lose a number
/// ("0.0012 [0.00031, 0.0029]").
pub fn with_interval(v: f64, low: f64, high: f64) -> String {
    let s = distinct(&[v, low, high], Digits::Fixed(3), false);
    format!("{} [{}, {}]", s[0], s[1], s[2])
}

/// One number in a sentence: three decimals, or significant digits when three decimals
/// would print it as 0.
pub fn num3(v: f64) -> String {
    distinct(&[v], Digits::Fixed(3), false).remove(0)
}

/// A share as a percentage with one decimal ("97.2%").
pub fn percent(v: f64) -> String {
    format!("{:.1}%", 100.0 * v)
}

/// The report lines for samples left out by `--drop-incomplete` (none when none were):
/// each sample with up to 3 of the points it misses.
pub fn excluded_line(excluded: &[crate::input::ExcludedSample]) -> Option<String> {
    if excluded.is_empty() {
        return None;
    }
    let each: Vec<String> = excluded
        .iter()
        .map(|e| {
            let shown: Vec<String> = e
                .missing
                .iter()
                .take(3)
                .map(|g| format!("tw = {}, t = {}", fmt_num(g.tw), fmt_num(g.t)))
                .collect();
            let more = match e.missing.len().saturating_sub(3) {
                0 => String::new(),
                k => format!(" and {k} more"),
            };
            format!("'{}' (no {}{more})", e.sample, shown.join("; "))
        })
        .collect();
    let (n, one) = (excluded.len(), excluded.len() == 1);
    let text = format!(
        "{n} sample{} that miss{} points, left out by --drop-incomplete: {}",
        if one { "" } else { "s" },
        if one { "es" } else { "" },
        each.join(", ")
    );
    // The label, then the text wrapped under it.
    let body = crate::report::text::wrap(&text, 92, "           ");
    Some(format!("excluded   {}", &body[11..]))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_small_interval_keeps_its_numbers() {
        assert_eq!(with_interval(0.445, 0.435, 0.455), "0.445 [0.435, 0.455]");
        assert_eq!(
            with_interval(0.0012, 0.00031, 0.0029),
            "0.0012 [3.1e-4, 0.0029]"
        );
        assert_eq!(num3(0.0004), "4.0e-4");
        assert_eq!(num3(0.0), "0.000");
    }

    #[test]
    fn ends_equal_to_the_estimate_get_more_digits() {
        assert_eq!(
            with_interval(0.5, 0.4999, 0.5002),
            "0.5000 [0.4999, 0.5002]"
        );
    }

    #[test]
    fn a_floor_p_value_reads_as_a_bound() {
        assert_eq!(p_clause(1.0 / 2001.0, 2000), "p ≤ 5.0e-4");
        assert_eq!(p_clause(0.012, 2000), "p = 0.012");
    }
}
