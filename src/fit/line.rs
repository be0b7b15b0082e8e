//! Weighted least-squares straight line `y = b0 + b1 x` with its standard statistics.
//!
//! Sums are formed about the weighted means (two passes), which keeps the certified
//! digits of the NIST StRD linear problems.
//!
//! ## Reference
//! Draper & Smith, *Applied Regression Analysis*, 3rd ed. (1998), ch. 1 and 9 (weighted
//! least squares); certified test values from the NIST Statistical Reference Datasets.

use super::lanes::{Kernel, L8, LANES, Wide, dispatch};

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
    // All x equal: no slope, whatever the rounding of the weighted mean leaves in Sxx.
    #[allow(clippy::float_cmp)] // exact equality is meant
    if x.iter().all(|&v| v == x[0]) {
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

/// The slope of [`fit_line`] through the points with `x ≥ q`, without gathering them
/// first. `None` where [`fit_line`] of those points is `None` (fewer than 3, a weight that
/// is not positive, all x equal). Pairs beyond the shortest of `x`, `y`, `w` are not read.
///
/// Its sums run in eight lanes ([`super::lanes`]), so it agrees with [`fit_line`] to
/// rounding, not bit for bit, and is the same number on every processor.
///
/// # Examples
/// ```
/// let (x, y, w) = ([0.0, 1.0, 2.0, 3.0, 4.0], [9.0, 1.0, 3.0, 5.0, 7.0], [1.0; 5]);
/// let b = fdtemp::fit::line::slope_above(&x, &y, &w, 1.0).unwrap();
/// assert!((b - 2.0).abs() < 1e-12);
/// ```
pub fn slope_above(x: &[f64], y: &[f64], w: &[f64], q: f64) -> Option<f64> {
    let p = x.len().min(y.len()).min(w.len());
    let (x, y, w) = (&x[..p], &y[..p], &w[..p]);
    dispatch(SlopeAbove { x, y, w, q })
}

/// [`slope_above`]'s sums.
struct SlopeAbove<'a> {
    x: &'a [f64],
    y: &'a [f64],
    w: &'a [f64],
    q: f64,
}

impl Kernel for SlopeAbove<'_> {
    type Output = Option<f64>;

    #[inline(always)]
    fn run<S: Wide>(self, s: S) -> Option<f64> {
        let Self { x, y, w, q } = self;
        let (zero, one, q) = (L8::splat(s, 0.0), L8::splat(s, 1.0), L8::splat(s, q));
        // Lanes past the end hold x = NaN, which is never kept. A point not kept adds
        // selected zeros, so it never reaches a sum.
        // The first kept x: a kept x that differs from it means the kept x are not all
        // equal (tested directly: Sxx's rounding can leave it above zero when they are).
        let &first = x.iter().find(|&&v| v >= self.q)?;
        let x0 = L8::splat(s, first);
        let (mut n, mut bad, mut sw, mut swx, mut swy) = (zero, zero, zero, zero, zero);
        let mut spread = zero;
        for j0 in (0..x.len()).step_by(LANES) {
            let xv = L8::get(s, x, j0, f64::NAN);
            let (yv, wv) = (L8::get(s, y, j0, 0.0), L8::get(s, w, j0, 0.0));
            n = n.add(s, xv.select_ge(s, q, one, zero));
            // A kept point whose weight is not positive (NaN included).
            let not_positive = zero.select_ge(s, wv, one, wv.select_ge(s, wv, zero, one));
            bad = bad.add(s, xv.select_ge(s, q, not_positive, zero));
            let differs = xv.select_gt(s, x0, one, x0.select_gt(s, xv, one, zero));
            spread = spread.add(s, xv.select_ge(s, q, differs, zero));
            sw = sw.add(s, xv.select_ge(s, q, wv, zero));
            swx = swx.add(s, xv.select_ge(s, q, wv.mul(s, xv), zero));
            swy = swy.add(s, xv.select_ge(s, q, wv.mul(s, yv), zero));
        }
        if bad.fold(s) > 0.0 || n.fold(s) < 3.0 || spread.fold(s) == 0.0 {
            return None;
        }
        let sw = sw.fold(s);
        let (xm, ym) = (
            L8::splat(s, swx.fold(s) / sw),
            L8::splat(s, swy.fold(s) / sw),
        );
        let (mut sxx, mut sxy) = (zero, zero);
        for j0 in (0..x.len()).step_by(LANES) {
            let xv = L8::get(s, x, j0, f64::NAN);
            let (yv, wv) = (L8::get(s, y, j0, 0.0), L8::get(s, w, j0, 0.0));
            let (dx, dy) = (xv.sub(s, xm), yv.sub(s, ym));
            let wdx = wv.mul(s, dx);
            sxx = sxx.add(s, xv.select_ge(s, q, wdx.mul(s, dx), zero));
            sxy = sxy.add(s, xv.select_ge(s, q, wdx.mul(s, dy), zero));
        }
        let sxx = sxx.fold(s);
        (sxx > 0.0).then(|| sxy.fold(s) / sxx)
    }
}

/// The weighted least-squares curvature `c` of `y = a + b x + c x²`, from orthogonal
/// polynomials (Forsythe's three-term recurrence, so no normal matrix is formed): with
/// `p₀ = 1`, `p₁ = x − α₁`, `p₂ = (x − α₂) p₁ − β₁`, where `α₁ = Σw x / Σw`,
/// `α₂ = Σw x p₁² / Σw p₁²` and `β₁ = Σw p₁² / Σw`, the fit is a sum of multiples of the
/// three, and `p₂`'s leading coefficient is 1, so `c = Σw p₂ y / Σw p₂²`.
///
/// Returns `None` with fewer than 4 points, lengths that differ, a weight that is not
/// positive, or fewer than 3 distinct `x`.
///
/// # Examples
/// ```
/// let x = [0.0, 1.0, 2.0, 3.0, 4.0];
/// let y: Vec<f64> = x.iter().map(|x| 1.0 - 2.0 * x + 0.5 * x * x).collect();
/// let c = fdtemp::fit::line::curvature(&x, &y, &[1.0; 5]).unwrap();
/// assert!((c - 0.5).abs() < 1e-12);
/// ```
pub fn curvature(x: &[f64], y: &[f64], w: &[f64]) -> Option<f64> {
    let n = x.len();
    if n < 4 || y.len() != n || w.len() != n || w.iter().any(|&v| !(v > 0.0)) {
        return None;
    }
    let sw: f64 = w.iter().sum();
    let a1 = x.iter().zip(w).map(|(x, w)| w * x).sum::<f64>() / sw;
    let (mut s11, mut sx11) = (0.0, 0.0);
    for (x, w) in x.iter().zip(w) {
        let p1 = x - a1;
        s11 += w * p1 * p1;
        sx11 += w * x * p1 * p1;
    }
    if !(s11 > 0.0) {
        return None;
    }
    let (a2, b1) = (sx11 / s11, s11 / sw);
    let (mut s22, mut s2y) = (0.0, 0.0);
    for ((x, y), w) in x.iter().zip(y).zip(w) {
        let p2 = (x - a2) * (x - a1) - b1;
        s22 += w * p2 * p2;
        s2y += w * p2 * y;
    }
    // With 2 distinct x, p₂ vanishes at every point (up to rounding).
    (s22 > 1e-24 * b1 * b1 * sw).then(|| s2y / s22)
}

#[cfg(test)]
mod tests {
    use super::{curvature, fit_line, slope_above};

    /// The slope of the points above is fit_line's to rounding, and `None` where fit_line
    /// is. Source: common practice (one least-squares slope by two routes).
    #[test]
    fn slope_above_is_fit_lines_slope_of_the_points_above() {
        let x: Vec<f64> = (0..40).map(|i| (i as f64 * 0.37).sin()).collect();
        let y: Vec<f64> = x
            .iter()
            .map(|x| 0.3 - 1.7 * x + 0.1 * (x * 31.0).cos())
            .collect();
        let w: Vec<f64> = (0..40).map(|i| 0.5 + (i % 7) as f64 / 3.0).collect();
        for q in [-2.0, -0.5, 0.0, 0.4, 0.9, 0.99, 2.0] {
            let keep: Vec<usize> = (0..40).filter(|&i| x[i] >= q).collect();
            let pick = |v: &[f64]| keep.iter().map(|&i| v[i]).collect::<Vec<f64>>();
            let want = fit_line(&pick(&x), &pick(&y), Some(&pick(&w))).map(|l| l.slope);
            let got = slope_above(&x, &y, &w, q);
            assert_eq!(got.is_some(), want.is_some(), "q {q}");
            if let (Some(a), Some(b)) = (got, want) {
                assert!(
                    (a - b).abs() <= 1e-13 * b.abs().max(1.0),
                    "q {q}: {a} vs {b}"
                );
            }
        }
        let mut w0 = w.clone();
        w0[3] = 0.0;
        assert_eq!(slope_above(&x, &y, &w0, -2.0), None);
        w0[3] = f64::NAN;
        assert_eq!(slope_above(&x, &y, &w0, -2.0), None);
        assert_eq!(slope_above(&[1.0; 5], &y[..5], &w[..5], 0.0), None);
        assert!(slope_above(&x[..3], &y[..3], &w[..3], -2.0).is_some());
        assert_eq!(slope_above(&x[..2], &y[..2], &w[..2], -2.0), None);
        // Equal x above q: no slope, however the weighted mean rounds (a review's cases).
        let ys = [0.0, 1.0, 2.0, 3.0];
        assert_eq!(
            slope_above(&[0.1; 3], &ys[..3], &[0.32, 0.38, 0.81], 0.0),
            None
        );
        assert_eq!(
            slope_above(&[0.1; 4], &ys, &[1.05, 0.23, 0.44, 0.58], 0.0),
            None
        );
        assert!(fit_line(&[0.1; 3], &ys[..3], Some(&[0.32, 0.38, 0.81])).is_none());
        assert!(slope_above(&[0.0, 0.1, 0.1, 0.1], &ys, &[1.0; 4], 0.05).is_none());
        assert!(slope_above(&[0.2, 0.1, 0.1, 0.1], &ys, &[1.0; 4], 0.05).is_some());
    }

    /// Against the 3×3 normal equations solved by Cramer's rule (an independent route to
    /// the same least-squares solution; common practice), on uneven x and weights.
    #[test]
    fn curvature_matches_the_normal_equations() {
        let x: Vec<f64> = (0..23)
            .map(|i| 0.1 + 0.37 * i as f64 + 0.01 * ((i * i) % 7) as f64)
            .collect();
        let y: Vec<f64> = x.iter().map(|x| (1.3 * x).sin() + 0.2 * x).collect();
        let w: Vec<f64> = (0..23).map(|i| 1.0 + (i % 5) as f64).collect();
        let m = |p: i32| x.iter().zip(&w).map(|(x, w)| w * x.powi(p)).sum::<f64>();
        let v = |p: i32| {
            x.iter()
                .zip(&w)
                .zip(&y)
                .map(|((x, w), y)| w * x.powi(p) * y)
                .sum::<f64>()
        };
        let a = [[m(0), m(1), m(2)], [m(1), m(2), m(3)], [m(2), m(3), m(4)]];
        let det = |a: [[f64; 3]; 3]| {
            a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
                - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
                + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0])
        };
        let mut a3 = a;
        for (r, b) in a3.iter_mut().zip([v(0), v(1), v(2)]) {
            r[2] = b;
        }
        let c = det(a3) / det(a);
        let got = curvature(&x, &y, &w).unwrap();
        assert!((got - c).abs() < 1e-9 * c.abs().max(1.0), "{got} vs {c}");
    }

    #[test]
    fn curvature_needs_three_distinct_x() {
        assert!(curvature(&[1.0, 1.0, 2.0, 2.0], &[0.0, 1.0, 2.0, 3.0], &[1.0; 4]).is_none());
        assert!(curvature(&[1.0, 2.0, 3.0], &[0.0, 1.0, 2.0], &[1.0; 3]).is_none());
    }
}
