//! Writers: each output format is one small function that returns bytes from the same
//! result structs.

pub mod csv;
pub mod json;
pub mod plot;
pub mod spectrum;
pub mod text;

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
