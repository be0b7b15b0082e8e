//! Axes: tick labels, log-axis decades and powers of ten.

use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};
use plotters::coord::types::RangedCoordf64;
use std::ops::Range;

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

/// A linear axis whose labelled ticks are given (plotters then draws exactly these).
pub(super) struct Fixed {
    inner: RangedCoordf64,
    major: Vec<f64>,
}

impl Fixed {
    pub(super) fn new(range: Range<f64>, major: Vec<f64>) -> Self {
        Fixed {
            inner: range.into(),
            major,
        }
    }
}

impl Ranged for Fixed {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;
    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        self.inner.map(value, limit)
    }
    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        if hint.weight().allow_light_points() {
            Vec::new()
        } else {
            self.major.clone()
        }
    }
    fn range(&self) -> Range<f64> {
        self.inner.range()
    }
}

/// The ticks of a linear axis: labelled major ticks at a nice step and unlabelled minor
/// ticks between them.
#[derive(Debug, Clone, PartialEq)]
pub struct Ticks {
    /// Major tick positions, ascending, all inside the range.
    pub major: Vec<f64>,
    /// Minor tick positions, ascending, inside the range and not on a major tick.
    pub minor: Vec<f64>,
    /// The major step: 1, 2, 2.5 or 5 times a power of ten.
    pub step: f64,
}

/// The steps a linear axis may use, as multiples of a power of ten, with the number of
/// minor intervals each is divided into (1 → 0.2, 2 → 0.5, 2.5 → 0.5, 5 → 1).
const NICE: [(f64, u32); 5] = [(1.0, 5), (2.0, 4), (2.5, 5), (5.0, 5), (10.0, 5)];

/// Nice ticks on `lo..hi`: the smallest step among 1, 2, 2.5, 5 × 10ᵏ that gives at most
/// `most` major ticks (at least 2), and minor ticks between.
///
/// # Examples
/// ```
/// let t = fdtemp::report::plot::axes::nice_ticks(0.0, 0.67, 6);
/// assert_eq!(t.major, vec![0.0, 0.2, 0.4, 0.6]);
/// ```
pub fn nice_ticks(lo: f64, hi: f64, most: usize) -> Ticks {
    let empty = Ticks {
        major: vec![],
        minor: vec![],
        step: 0.0,
    };
    if !(hi > lo) || !lo.is_finite() || !hi.is_finite() {
        return empty;
    }
    let most = most.max(2);
    let e = ((hi - lo) / most as f64).log10().floor() as i32;
    for exp in [e - 1, e, e + 1] {
        for (m, parts) in NICE {
            let at = |k: f64| on_grid(k * m, exp);
            let step = at(1.0);
            let (k0, k1) = ((lo / step - 1e-9).ceil(), (hi / step + 1e-9).floor());
            if k1 - k0 + 1.0 > most as f64 {
                continue;
            }
            let major: Vec<f64> = (k0 as i64..=k1 as i64).map(|k| at(k as f64)).collect();
            let sub = m / f64::from(parts);
            let minor_step = on_grid(sub, exp);
            let (j0, j1) = (
                (lo / minor_step - 1e-9).ceil(),
                (hi / minor_step + 1e-9).floor(),
            );
            let minor = (j0 as i64..=j1 as i64)
                .filter(|j| j % i64::from(parts) != 0)
                .map(|j| on_grid(j as f64 * sub, exp))
                .collect();
            return Ticks { major, minor, step };
        }
    }
    empty
}

/// `mantissa × 10^exp` computed so that decimal tick values come out exact (0.75, not
/// 0.7500000000000001): divided by a whole power of ten when `exp` is negative.
fn on_grid(mantissa: f64, exp: i32) -> f64 {
    if exp < 0 {
        mantissa / 10f64.powi(-exp)
    } else {
        mantissa * 10f64.powi(exp)
    }
}

/// The range `lo..hi` of what is drawn, widened by `margin` (a fraction of its span) on
/// each side; a single value gets a span of 10% of its size (or 1 at 0).
///
/// # Examples
/// ```
/// let (a, b) = fdtemp::report::plot::axes::padded_range([0.1, 0.67, 0.3], 0.04).unwrap();
/// assert!((a - 0.0772).abs() < 1e-12 && (b - 0.6928).abs() < 1e-12);
/// ```
pub fn padded_range(values: impl IntoIterator<Item = f64>, margin: f64) -> Option<(f64, f64)> {
    let (lo, hi) = values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
            (a.min(v), b.max(v))
        });
    if lo > hi {
        return None;
    }
    let span = if hi > lo {
        hi - lo
    } else if lo == 0.0 {
        1.0
    } else {
        0.1 * lo.abs()
    };
    Some((lo - margin * span, hi + margin * span))
}

/// The decades 10ᵏ inside `lo..hi` (a log axis's labelled ticks) and the 2–9 × 10ᵏ
/// between them (its unlabelled minor ticks).
pub fn decade_ticks(lo: f64, hi: f64) -> Ticks {
    if !(lo > 0.0) || !(hi > lo) || !hi.is_finite() {
        return Ticks {
            major: vec![],
            minor: vec![],
            step: 0.0,
        };
    }
    let (k0, k1) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let inside = |v: &f64| *v >= lo * (1.0 - 1e-12) && *v <= hi * (1.0 + 1e-12);
    let major = (k0..=k1).map(|k| on_grid(1.0, k)).filter(inside).collect();
    let minor = (k0..=k1)
        .flat_map(|k| (2..10).map(move |m| on_grid(f64::from(m), k)))
        .filter(inside)
        .collect();
    Ticks {
        major,
        minor,
        step: 10.0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_ticks_use_steps_of_one_two_two_and_a_half_or_five() {
        // Invented ranges; the step rule is common practice (Heckbert, "Nice numbers
        // for graph labels", Graphics Gems, 1990, from memory, with 2.5 added).
        for (lo, hi, most, step) in [
            (0.0, 0.67, 6, 0.2),
            (0.0, 1.0, 5, 0.25),
            (-0.03, 0.71, 9, 0.1),
            (0.41, 0.47, 6, 0.02),
            (0.0, 740.0, 6, 200.0),
            (280.0, 3400.0, 6, 500.0),
        ] {
            let t = nice_ticks(lo, hi, most);
            assert!((t.step - step).abs() < 1e-12 * step, "{lo}..{hi}: {t:?}");
            assert!(t.major.len() <= most && t.major.len() >= 2, "{t:?}");
            assert!(t.major.iter().all(|v| (lo..=hi).contains(v)));
            let m = t.step / 10f64.powf(t.step.log10().floor());
            assert!([1.0, 2.0, 2.5, 5.0].iter().any(|n| (m - n).abs() < 1e-9));
            assert!(!t.minor.is_empty());
            assert!(t.minor.iter().all(|v| !t.major.contains(v)));
        }
        // Tick values are exact decimals, so their labels print cleanly.
        let t = nice_ticks(0.0, 1.0, 5);
        assert_eq!(t.major, vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        assert_eq!(tick(t.major[3]), "0.75");
    }

    #[test]
    fn a_padded_range_holds_the_data_with_a_small_margin_only() {
        // FD data stopping at 0.67 (issue 16): the axis ends near 0.67, not at 1.45.
        let (a, b) = padded_range([0.02, 0.31, 0.67], 0.04).unwrap();
        assert!(b > 0.67 && b < 0.67 * 1.05 && a < 0.02 && a > -0.01);
        assert_eq!(padded_range([f64::NAN], 0.04), None);
        assert_eq!(padded_range([0.0], 0.05), Some((-0.05, 0.05)));
    }

    #[test]
    fn decade_ticks_label_only_powers_of_ten() {
        let t = decade_ticks(0.42, 360.0);
        assert_eq!(t.major, vec![1.0, 10.0, 100.0]);
        assert_eq!(t.minor.first(), Some(&0.5));
        assert_eq!(t.minor.last(), Some(&300.0));
        let labels: Vec<String> = t
            .major
            .iter()
            .map(|&v| superscript_power(v.log10().round() as i64))
            .collect();
        assert_eq!(labels, ["10⁰", "10¹", "10²"]);
    }
}
