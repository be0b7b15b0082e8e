//! Axes: tick labels, log-axis decades and powers of ten.

/// A compact tick label: powers of ten as 10ⁿ outside [1e-3, 1e4), others trimmed.
pub(super) fn tick(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    let l = a.log10();
    if !(1e-3..1e4).contains(&a) && (l - l.round()).abs() < 1e-9 {
        let sign = if v < 0.0 { "−" } else { "" };
        return format!("{sign}{}", superscript_power(l.round() as i64));
    }
    if !(1e-3..1e5).contains(&a) {
        return format!("{v:.1e}");
    }
    crate::report::format::fmt_num(v)
}

/// A log axis's label: decades only, all as 10ⁿ (other ticks stay, unlabelled, as minor
/// ticks). When the range holds fewer than two decades, every tick is labelled.
pub(super) fn log_tick(v: f64, (lo, hi): (f64, f64)) -> String {
    let decades = (hi.log10().floor() - lo.log10().ceil()) as i64 + 1;
    if decades < 2 {
        return tick(v);
    }
    let l = v.log10();
    if (l - l.round()).abs() > 1e-9 {
        return String::new();
    }
    superscript_power(l.round() as i64)
}

/// 10 to the power `n` with superscript digits (10⁻¹, 10⁰, 10³).
pub(super) fn superscript_power(n: i64) -> String {
    const SUP: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let digits: String = n
        .abs()
        .to_string()
        .chars()
        .map(|d| SUP[d as usize - '0' as usize])
        .collect();
    format!("10{}{digits}", if n < 0 { "⁻" } else { "" })
}
