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
