//! Weighted least-squares straight line `y = b0 + b1 x` with its standard statistics.
//!
//! Sums are formed about the weighted means (two passes), which keeps the certified
//! digits of the NIST StRD linear problems.
//!
//! ## Reference
//! Draper & Smith, *Applied Regression Analysis*, 3rd ed. (1998), ch. 1 and 9 (weighted
//! least squares); certified test values from the NIST Statistical Reference Datasets.

/// A fitted line and its standard statistics.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct LineFit {
    /// Intercept `b0`.
    pub intercept: f64,
    /// Slope `b1`.
    pub slope: f64,
    /// Standard deviation of the intercept estimate.
    pub intercept_sd: f64,
    /// Standard deviation of the slope estimate.
    pub slope_sd: f64,
    /// Residual standard deviation `sqrt(SSE_w / (n - 2))`.
    pub residual_sd: f64,
    /// Coefficient of determination `1 - SSE_w / SST_w`.
    pub r_squared: f64,
}

/// Fits `y = b0 + b1 x` by weighted least squares (`w = None` for equal weights).
///
/// # Formula
/// With weighted means `x̄, ȳ`, `Sxx = Σ w (x-x̄)²`, `Sxy = Σ w (x-x̄)(y-ȳ)`:
/// `b1 = Sxy / Sxx`, `b0 = ȳ - b1 x̄`, `s² = Σ w r² / (n-2)`,
/// `sd(b1) = s / √Sxx`, `sd(b0) = s √(1/Σw + x̄²/Sxx)`.
///
/// Returns `None` when there are fewer than 3 points, the lengths differ, a weight is not
/// positive, or all `x` are equal.
///
/// # Examples
/// ```
/// let f = fdtemp::fit::fit_line(&[0.0, 1.0, 2.0, 3.0], &[1.0, 3.0, 5.0, 7.0], None).unwrap();
/// assert!((f.slope - 2.0).abs() < 1e-12 && (f.intercept - 1.0).abs() < 1e-12);
/// ```
pub fn fit_line(x: &[f64], y: &[f64], w: Option<&[f64]>) -> Option<LineFit> {
    let n = x.len();
    if n < 3 || y.len() != n || w.is_some_and(|w| w.len() != n || w.iter().any(|&v| !(v > 0.0))) {
        return None;
    }
    let wt = |i: usize| w.map_or(1.0, |w| w[i]);
    let sw: f64 = (0..n).map(wt).sum();
    let xm = (0..n).map(|i| wt(i) * x[i]).sum::<f64>() / sw;
    let ym = (0..n).map(|i| wt(i) * y[i]).sum::<f64>() / sw;
    let (mut sxx, mut sxy, mut syy) = (0.0, 0.0, 0.0);
    for i in 0..n {
        let (dx, dy) = (x[i] - xm, y[i] - ym);
        sxx += wt(i) * dx * dx;
        sxy += wt(i) * dx * dy;
        syy += wt(i) * dy * dy;
    }
    if !(sxx > 0.0) {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    let sse: f64 = (0..n)
        .map(|i| {
            let r = y[i] - intercept - slope * x[i];
            wt(i) * r * r
        })
        .sum();
    let s2 = sse / (n as f64 - 2.0);
    Some(LineFit {
        intercept,
        slope,
        intercept_sd: (s2 * (1.0 / sw + xm * xm / sxx)).sqrt(),
        slope_sd: (s2 / sxx).sqrt(),
        residual_sd: s2.sqrt(),
        r_squared: if syy > 0.0 { 1.0 - sse / syy } else { 1.0 },
    })
}
