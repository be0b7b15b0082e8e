//! A smooth parametric curve `z(C) = y + C` whose slope `dz/dC = 1 − X(C)` is a sum of
//! non-negative ramps: with the monotone constraint, X(C) is continuous, piecewise linear,
//! non-decreasing in C, at most 1, and 1 at the largest C (the equilibrium branch), so `y`
//! is concave in C. Fitted by weighted non-negative least squares (Lawson–Hanson active
//! set on the normal equations, at most [`MAX_PIECES`] unknowns); without the constraint,
//! by plain weighted least squares on the same basis (X may leave [0, 1] and need not be
//! monotone).
//!
//! Basis, with knots `t_0 < … < t_K`: ramp `k` (`k ≥ 1`, see [`FIRST_RAMP`]) is `m_k(C) = 1` below `t_k`, falls linearly
//! to 0 at `t_{k+1}` and is 0 above, so `1 − X(C) = Σ β_k m_k(C)` and X at knot `t_j` is
//! `1 − Σ_{k ≥ j} β_k`. Its integral from C to `t_K` is the design column:
//! `z(C) = c0 − Σ β_k M_k(C)`.
//!
//! ## Reference
//! Lawson, C. L. & Hanson, R. J., *Solving Least Squares Problems* (Prentice-Hall, 1974),
//! ch. 23 (the NNLS algorithm and its Kuhn–Tucker conditions); Ramsay, J. O., Statistical
//! Science 3, 425–441 (1988) (monotone regression splines: monotone shape from
//! non-negative coefficients on monotone basis functions).

// Dense linear algebra on small fixed arrays reads best with explicit indices.
#![allow(clippy::needless_range_loop)]

/// Most pieces (knot intervals) a fit uses.
pub const MAX_PIECES: usize = 16;

/// Distinct C values per piece in the knot rule.
pub const VALUES_PER_PIECE: usize = 4;

/// The first ramp in the basis: ramp 0 (over the first piece) is left out, so X is
/// constant on `[t_0, t_1]` and y straight there, as at a natural spline's end: the slope
/// at the very edge of the points would rest on a handful of the noisiest points.
pub const FIRST_RAMP: usize = 1;

/// Knots `t_0 < … < t_K` of the ramps.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Knots {
    /// Number of pieces K.
    pub pieces: usize,
    /// `t_0 … t_K`; entries past `K` are unused.
    pub at: [f64; MAX_PIECES + 1],
}

impl Knots {
    /// The stated rule: K = ⌊m / 4⌋ pieces for m distinct C values, between 3 and
    /// [`MAX_PIECES`] (and at most m − 1), with knots at the equal-count quantiles of the distinct values (the
    /// first and last at the smallest and largest C). `None` with fewer than 3 distinct values.
    pub fn from_data(x: &[f64]) -> Option<Knots> {
        let mut u: Vec<f64> = x.iter().copied().filter(|v| v.is_finite()).collect();
        u.sort_by(f64::total_cmp);
        u.dedup();
        let m = u.len();
        if m < 3 {
            return None;
        }
        let pieces = (m / VALUES_PER_PIECE).clamp(3, MAX_PIECES).min(m - 1);
        let mut at = [f64::NAN; MAX_PIECES + 1];
        for (j, a) in at.iter_mut().enumerate().take(pieces + 1) {
            *a = u[(j * (m - 1) + pieces / 2) / pieces];
        }
        Some(Knots { pieces, at })
    }

    /// The knots in use.
    pub fn values(&self) -> &[f64] {
        &self.at[..=self.pieces]
    }

    /// Ramp `k` at `c`: `1 − X` contributed per unit of `β_k`.
    pub fn ramp(&self, k: usize, c: f64) -> f64 {
        let (lo, hi) = (self.at[k], self.at[k + 1]);
        if c <= lo {
            1.0
        } else if c >= hi {
            0.0
        } else {
            (hi - c) / (hi - lo)
        }
    }

    /// `M_k(c) = ∫_c^{t_K} m_k`: the design column of ramp `k`.
    pub fn column(&self, k: usize, c: f64) -> f64 {
        let (lo, hi) = (self.at[k], self.at[k + 1]);
        let h = hi - lo;
        if c >= hi {
            0.0
        } else if c >= lo {
            (hi - c).powi(2) / (2.0 * h)
        } else {
            (lo - c) + 0.5 * h
        }
    }
}

/// Whether X(C) is held monotone (non-decreasing, at most 1) or left free.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Constraint {
    /// X non-decreasing in C and at most 1 (the aging shape): non-negative coefficients.
    Monotone,
    /// No sign constraint: X may fall as C grows and may exceed 1.
    None,
}

/// One fitted smooth curve.
#[derive(Debug, Clone, Copy)]
pub struct SmoothFit {
    /// Its knots.
    pub knots: Knots,
    /// Ramp coefficients `β_k` (entries past K are 0).
    pub beta: [f64; MAX_PIECES],
    /// The level `c0 = z(t_K)`.
    pub c0: f64,
    /// Weighted residual sum of squares.
    pub sse: f64,
}

impl SmoothFit {
    /// The fitted `z = y + C` at `c`.
    pub fn eval(&self, c: f64) -> f64 {
        self.c0
            - (0..self.knots.pieces)
                .map(|k| self.beta[k] * self.knots.column(k, c))
                .sum::<f64>()
    }

    /// X(C) = 1 − Σ β_k m_k(C).
    pub fn ratio_at(&self, c: f64) -> f64 {
        1.0 - (0..self.knots.pieces)
            .map(|k| self.beta[k] * self.knots.ramp(k, c))
            .sum::<f64>()
    }

    /// The largest C at which X(C) is at most `1 − delta` (X is piecewise linear, so the
    /// crossing is exact); NaN when X stays above `1 − delta` everywhere.
    pub fn leaves_one(&self, delta: f64) -> f64 {
        let target = 1.0 - delta;
        let kn = self.knots.values();
        let xs: Vec<f64> = kn.iter().map(|&c| self.ratio_at(c)).collect();
        for j in (0..kn.len() - 1).rev() {
            let (a, b) = (xs[j], xs[j + 1]);
            if b <= target {
                return kn[j + 1];
            }
            if a <= target {
                return kn[j] + (target - a) / (b - a) * (kn[j + 1] - kn[j]);
            }
        }
        f64::NAN
    }
}

/// Reusable sums so resampled fits do not allocate.
#[derive(Debug, Clone, Copy)]
struct Normal {
    g: [[f64; MAX_PIECES]; MAX_PIECES],
    b: [f64; MAX_PIECES],
    mean_a: [f64; MAX_PIECES],
    mean_z: f64,
}

/// Fits `z ≈ c0 − Σ β_k M_k(x)` with weights `w`.
pub fn fit_smooth(
    x: &[f64],
    z: &[f64],
    w: &[f64],
    knots: &Knots,
    constraint: Constraint,
) -> Option<SmoothFit> {
    let k = knots.pieces;
    let ne = normal_equations(x, z, w, knots)?;
    let mut beta = [0.0; MAX_PIECES];
    match constraint {
        Constraint::Monotone => nnls(&ne.g, &ne.b, k, &mut beta)?,
        Constraint::None => {
            let all: Vec<usize> = (FIRST_RAMP..k).collect();
            let mut s = [0.0; MAX_PIECES];
            solve_subset(&ne.g, &ne.b, &all, &mut s)?;
            beta[..k].copy_from_slice(&s[..k]);
        }
    }
    let c0 = ne.mean_z + (0..k).map(|j| beta[j] * ne.mean_a[j]).sum::<f64>();
    let mut fit = SmoothFit {
        knots: *knots,
        beta,
        c0,
        sse: 0.0,
    };
    fit.sse = x
        .iter()
        .zip(z)
        .zip(w)
        .map(|((x, z), w)| w * (z - fit.eval(*x)).powi(2))
        .sum();
    fit.sse.is_finite().then_some(fit)
}

/// The centred normal equations of the columns `A_k = M_k(x)` (the intercept profiled
/// out): `G β = b` for the model `z − z̄ ≈ −Σ β_k (A_k − Ā_k)`.
fn normal_equations(x: &[f64], z: &[f64], w: &[f64], knots: &Knots) -> Option<Normal> {
    let k = knots.pieces;
    let sw: f64 = w.iter().sum();
    if !(sw > 0.0) {
        return None;
    }
    let mut ne = Normal {
        g: [[0.0; MAX_PIECES]; MAX_PIECES],
        b: [0.0; MAX_PIECES],
        mean_a: [0.0; MAX_PIECES],
        mean_z: 0.0,
    };
    let mut a = [0.0; MAX_PIECES];
    for ((&xi, &zi), &wi) in x.iter().zip(z).zip(w) {
        ne.mean_z += wi * zi;
        for j in FIRST_RAMP..k {
            a[j] = knots.column(j, xi);
            ne.mean_a[j] += wi * a[j];
        }
    }
    ne.mean_z /= sw;
    for v in &mut ne.mean_a[..k] {
        *v /= sw;
    }
    for ((&xi, &zi), &wi) in x.iter().zip(z).zip(w) {
        for j in FIRST_RAMP..k {
            a[j] = knots.column(j, xi) - ne.mean_a[j];
        }
        let dz = zi - ne.mean_z;
        for j in FIRST_RAMP..k {
            // The model's columns are −A: b = Σ w (−A) dz.
            ne.b[j] -= wi * a[j] * dz;
            for l in 0..=j {
                ne.g[j][l] += wi * a[j] * a[l];
            }
        }
    }
    for j in 0..k {
        for l in 0..j {
            ne.g[l][j] = ne.g[j][l];
        }
    }
    Some(ne)
}

/// Solves `G_PP s_P = b_P` by Cholesky; `None` when `G_PP` is not positive definite.
fn solve_subset(
    g: &[[f64; MAX_PIECES]; MAX_PIECES],
    b: &[f64; MAX_PIECES],
    set: &[usize],
    s: &mut [f64; MAX_PIECES],
) -> Option<()> {
    let n = set.len();
    let mut l = [[0.0; MAX_PIECES]; MAX_PIECES];
    let scale = set.iter().map(|&i| g[i][i]).fold(0.0f64, f64::max);
    for i in 0..n {
        for j in 0..=i {
            let mut sum = g[set[i]][set[j]];
            for k in 0..j {
                sum -= l[i][k] * l[j][k];
            }
            if i == j {
                if !(sum > 1e-13 * scale) {
                    return None;
                }
                l[i][i] = sum.sqrt();
            } else {
                l[i][j] = sum / l[j][j];
            }
        }
    }
    let mut y = [0.0; MAX_PIECES];
    for i in 0..n {
        let mut sum = b[set[i]];
        for k in 0..i {
            sum -= l[i][k] * y[k];
        }
        y[i] = sum / l[i][i];
    }
    s.iter_mut().for_each(|v| *v = 0.0);
    for i in (0..n).rev() {
        let mut sum = y[i];
        for k in i + 1..n {
            sum -= l[k][i] * s[set[k]];
        }
        s[set[i]] = sum / l[i][i];
    }
    Some(())
}

/// Lawson–Hanson NNLS on the normal equations: minimizes `½ βᵀGβ − bᵀβ` over `β ≥ 0`.
/// A column whose addition makes the passive system singular, or whose own coefficient
/// comes out ≤ 0 at once (rounding), is passed over until the passive set changes. `None`
/// when the iterations run out before the Kuhn–Tucker conditions hold.
fn nnls(
    g: &[[f64; MAX_PIECES]; MAX_PIECES],
    b: &[f64; MAX_PIECES],
    k: usize,
    beta: &mut [f64; MAX_PIECES],
) -> Option<()> {
    let bmax = b[..k].iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let gmax = (0..k).map(|i| g[i][i]).fold(0.0f64, f64::max);
    if !(gmax > 0.0) {
        return None;
    }
    let tol = 1e-12 * bmax.max(f64::MIN_POSITIVE);
    let mut passive = [false; MAX_PIECES];
    let mut passed_over = [false; MAX_PIECES];
    let mut set: Vec<usize> = Vec::with_capacity(k);
    let mut s = [0.0; MAX_PIECES];
    let cap = 3 * k + 3;
    for _outer in 0..4 * cap {
        // The gradient of the objective's negative: w = b − Gβ.
        let mut best = None;
        let mut best_w = tol;
        for j in FIRST_RAMP..k {
            if passive[j] || passed_over[j] {
                continue;
            }
            let wj = b[j] - (0..k).map(|l| g[j][l] * beta[l]).sum::<f64>();
            if wj > best_w {
                best_w = wj;
                best = Some(j);
            }
        }
        let Some(j) = best else {
            return Some(());
        };
        passive[j] = true;
        set.push(j);
        set.sort_unstable();
        let mut first = true;
        let mut converged = false;
        for _inner in 0..cap {
            let solved = solve_subset(g, b, &set, &mut s).is_some();
            if !solved || (first && s[j] <= 0.0) {
                // Pass over j until the passive set changes.
                passive[j] = false;
                passed_over[j] = true;
                set.retain(|&i| i != j);
                converged = true;
                break;
            }
            first = false;
            if set.iter().all(|&i| s[i] > 0.0) {
                for i in 0..k {
                    beta[i] = if passive[i] { s[i] } else { 0.0 };
                }
                passed_over = [false; MAX_PIECES];
                converged = true;
                break;
            }
            // Step from β toward s until the first passive coefficient reaches 0.
            let mut alpha = 1.0f64;
            for &i in &set {
                if s[i] <= 0.0 {
                    alpha = alpha.min(beta[i] / (beta[i] - s[i]));
                }
            }
            for i in 0..k {
                if passive[i] {
                    beta[i] += alpha * (s[i] - beta[i]);
                }
            }
            for i in 0..k {
                if passive[i] && beta[i] <= 1e-15 * (1.0 + beta[i].abs()) {
                    passive[i] = false;
                    beta[i] = 0.0;
                }
            }
            set.retain(|&i| passive[i]);
            passed_over = [false; MAX_PIECES];
            if set.is_empty() {
                converged = true;
                break;
            }
        }
        if !converged {
            return None;
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn grid(n: usize, lo: f64, hi: f64) -> Vec<f64> {
        (0..n)
            .map(|i| lo + (hi - lo) * i as f64 / (n - 1) as f64)
            .collect()
    }

    #[test]
    fn knots_follow_the_stated_rule() {
        let x = grid(40, 0.1, 0.9);
        let k = Knots::from_data(&x).unwrap();
        assert_eq!(k.pieces, 10);
        assert_eq!(k.values()[0].to_bits(), 0.1f64.to_bits());
        assert_eq!(k.values()[10].to_bits(), 0.9f64.to_bits());
        assert!(k.values().windows(2).all(|w| w[1] > w[0]));
        assert_eq!(Knots::from_data(&[0.1, 0.2, 0.2]), None);
        assert_eq!(
            Knots::from_data(&grid(1000, 0.0, 1.0)).unwrap().pieces,
            MAX_PIECES
        );
        assert_eq!(Knots::from_data(&grid(3, 0.0, 1.0)).unwrap().pieces, 2);
        assert_eq!(Knots::from_data(&grid(20, 0.0, 1.0)).unwrap().pieces, 5);
        assert_eq!(Knots::from_data(&grid(8, 0.0, 1.0)).unwrap().pieces, 3);
    }

    #[test]
    fn columns_integrate_the_ramps() {
        // M_k(c) = ∫_c^{t_K} m_k: check by the trapezoid rule on a fine grid.
        let k = Knots::from_data(&grid(30, 0.0, 1.0)).unwrap();
        for piece in 0..k.pieces {
            for &c in &[0.0, 0.13, 0.5, 0.77, 0.99] {
                let n = 20_000;
                let h = (1.0 - c) / n as f64;
                let num: f64 = (0..n)
                    .map(|i| {
                        let (a, b) = (c + h * i as f64, c + h * (i + 1) as f64);
                        0.5 * h * (k.ramp(piece, a) + k.ramp(piece, b))
                    })
                    .sum();
                assert!((num - k.column(piece, c)).abs() < 1e-8, "{piece} {c}");
            }
        }
    }

    /// A noise-free curve in the model's span is recovered exactly, constrained or not.
    #[test]
    fn recovers_a_curve_in_its_span() {
        let x = grid(50, 0.05, 0.95);
        let knots = Knots::from_data(&x).unwrap();
        let mut truth = SmoothFit {
            knots,
            beta: [0.0; MAX_PIECES],
            c0: 0.7,
            sse: 0.0,
        };
        for (k, b) in truth.beta.iter_mut().enumerate().take(knots.pieces) {
            *b = if k % 3 == 2 || k < FIRST_RAMP {
                0.0
            } else {
                0.05 * (k + 1) as f64
            };
        }
        let z: Vec<f64> = x.iter().map(|&c| truth.eval(c)).collect();
        let w: Vec<f64> = x.iter().map(|c| 1.0 + c).collect();
        for constraint in [Constraint::Monotone, Constraint::None] {
            let f = fit_smooth(&x, &z, &w, &knots, constraint).unwrap();
            for k in 0..knots.pieces {
                assert!(
                    (f.beta[k] - truth.beta[k]).abs() < 1e-8,
                    "{constraint:?} {k}"
                );
            }
            assert!((f.c0 - 0.7).abs() < 1e-10);
            assert!(f.sse < 1e-20);
        }
    }

    /// The constrained solution satisfies the Kuhn–Tucker conditions of NNLS: β ≥ 0, the
    /// gradient `w = Aᵀ W (z − A β)` is ≤ 0 where β = 0 and = 0 where β > 0.
    /// Source: Lawson & Hanson (1974), ch. 23, Theorem 23.4.
    #[test]
    fn monotone_fit_meets_the_kuhn_tucker_conditions() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        for case in 0..50 {
            let x = grid(40, 0.0, 1.0);
            // A curve that is not concave (so constraints bind), plus noise.
            let z: Vec<f64> = x
                .iter()
                .map(|&c| 0.3 * c + 0.2 * (6.0 * c).sin() + 0.05 * rng.random::<f64>())
                .collect();
            let w: Vec<f64> = x.iter().map(|_| 0.5 + rng.random::<f64>()).collect();
            let knots = Knots::from_data(&x).unwrap();
            let f = fit_smooth(&x, &z, &w, &knots, Constraint::Monotone).unwrap();
            let ne = normal_equations(&x, &z, &w, &knots).unwrap();
            let scale = ne.b.iter().fold(0.0f64, |m, v| m.max(v.abs())).max(1e-12);
            for j in 0..knots.pieces {
                assert!(f.beta[j] >= 0.0);
                let grad = ne.b[j]
                    - (0..knots.pieces)
                        .map(|l| ne.g[j][l] * f.beta[l])
                        .sum::<f64>();
                if f.beta[j] > 0.0 {
                    assert!(grad.abs() < 1e-8 * scale, "case {case} piece {j}: {grad}");
                } else {
                    assert!(grad < 1e-8 * scale, "case {case} piece {j}: {grad}");
                }
            }
            // X is non-decreasing and at most 1.
            let xs: Vec<f64> = x.iter().map(|&c| f.ratio_at(c)).collect();
            assert!(xs.windows(2).all(|p| p[1] >= p[0] - 1e-12));
            assert!(xs.iter().all(|v| *v <= 1.0 + 1e-12));
        }
    }

    #[test]
    fn leaves_one_is_the_last_crossing() {
        let x = grid(20, 0.0, 1.0);
        let knots = Knots::from_data(&x).unwrap();
        let mut f = SmoothFit {
            knots,
            beta: [0.0; MAX_PIECES],
            c0: 1.0,
            sse: 0.0,
        };
        assert!(f.leaves_one(0.05).is_nan());
        // One ramp over the second piece: X = 1 − 0.5 below t_1, rising to 1 at t_2.
        f.beta[FIRST_RAMP] = 0.5;
        let (t1, t2) = (knots.at[1], knots.at[2]);
        let c = f.leaves_one(0.05);
        assert!((f.ratio_at(c) - 0.95).abs() < 1e-12);
        assert!(c > t1 && c < t2);
        assert!((f.ratio_at(0.0) - 0.5).abs() < 1e-15);
        assert!((f.ratio_at(1.0) - 1.0).abs() < 1e-15);
    }
}
