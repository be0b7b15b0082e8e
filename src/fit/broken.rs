//! Broken-stick least squares with an unknown break (profile search).
//!
//! The model is `r = a + b x + c h_q(x)` with the hinge `h_q(x) = max(q - x, 0)`: a line
//! for `x >= q` and another, with slope `b - c`, for `x < q`. The base part is either a
//! constant (`b = 0`, used on `z = y + x` when the first slope is fixed) or a line.
//!
//! For a fixed break the model is linear. After the base regressors are projected out
//! (Frisch–Waugh–Lovell), the hinge on the first `k` sorted points is `q·u - v`, with `u`
//! the indicator of those points and `v = x·u`, so the explained sum of squares is
//! `(α q - β)² / (γ q² - 2 δ q + ε)` where α…ε are prefix sums over the first `k` points.
//! Its stationary point inside an interval has the closed form
//! `q* = (β δ - α ε) / (β γ - α δ)`, so each interval between neighbouring data points
//! costs O(1), and the exact continuous optimum over every break costs one sort plus a
//! pass: O(P log P), or O(P) when the order is already nearly right (bootstrap
//! replicates start from the order of the full data and insertion-sort it).
//!
//! ## Reference
//! Hudson, D. J., "Fitting segmented curves whose join points have to be estimated",
//! J. Amer. Statist. Assoc. 61, 1097–1129 (1966); Seber & Wild, *Nonlinear Regression*
//! (1989), ch. 9 (two-phase regression, profile over the change point).

/// The part of the model that has no break.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Base {
    /// `r = a + c h_q(x)`: one constant level above the break.
    Constant,
    /// `r = a + b x + c h_q(x)`: a free line above the break.
    Line,
}

/// The least-squares broken stick for one data set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BreakSolution {
    /// The break `q`.
    pub q: f64,
    /// Intercept `a` (original coordinates).
    pub a: f64,
    /// Slope above the break `b` (0 for [`Base::Constant`]).
    pub b: f64,
    /// Hinge coefficient `c`: the slope below the break is `b - c`.
    pub c: f64,
    /// Weighted residual sum of squares of the broken stick.
    pub sse: f64,
    /// Weighted residual sum of squares of the base model alone (no break).
    pub sse_null: f64,
    /// Number of points below the break (`x < q`).
    pub n_below: usize,
    /// Index of the interval holding the break, counted from the lowest allowed one.
    pub interval: usize,
    /// Number of allowed intervals.
    pub n_intervals: usize,
}

impl BreakSolution {
    /// The fitted value at `x`.
    pub fn eval(&self, x: f64) -> f64 {
        self.a + self.b * x + self.c * (self.q - x).max(0.0)
    }
}

/// Scratch space reused across searches so the hot loop does not allocate.
#[derive(Debug, Default, Clone)]
pub struct Workspace {
    /// Point indices sorted by x; kept between calls as the starting order.
    pub order: Vec<usize>,
}

impl Workspace {
    /// A workspace whose order starts as the order of `x`.
    pub fn sorted_by(x: &[f64]) -> Self {
        let mut order: Vec<usize> = (0..x.len()).collect();
        order.sort_by(|&i, &j| x[i].total_cmp(&x[j]));
        Workspace { order }
    }
}

fn insertion_sort(order: &mut [usize], x: &[f64]) {
    for i in 1..order.len() {
        let cur = order[i];
        let mut j = i;
        while j > 0 && x[order[j - 1]] > x[cur] {
            order[j] = order[j - 1];
            j -= 1;
        }
        order[j] = cur;
    }
}

/// Finds the break minimizing the weighted SSE of `r = a + b x + c h_q(x)`.
///
/// `x`, `r`, `w` are the points (any order; `w > 0`); `min_branch` is the least number of
/// points on each side of the break. When `profile` is given it receives `(q, SSE)` for
/// every candidate break, in increasing `q`.
///
/// Returns `None` when there are too few points for two branches of `min_branch`, all
/// `x` are equal, or no candidate break is identifiable.
///
/// # Examples
/// ```
/// use fdtemp::fit::{broken::search, Base, Workspace};
/// let x: Vec<f64> = (0..20).map(|i| i as f64 / 19.0).collect();
/// let r: Vec<f64> = x.iter().map(|&x| 1.0 - 0.5 * (0.6 - x).max(0.0)).collect();
/// let w = vec![1.0; 20];
/// let mut ws = Workspace::sorted_by(&x);
/// let s = search(&x, &r, &w, Base::Constant, 3, &mut ws, None).unwrap();
/// assert!((s.q - 0.6).abs() < 1e-9 && (s.c + 0.5).abs() < 1e-9);
/// ```
pub fn search(
    x: &[f64],
    r: &[f64],
    w: &[f64],
    base: Base,
    min_branch: usize,
    ws: &mut Workspace,
    profile: Option<&mut Vec<(f64, f64)>>,
) -> Option<BreakSolution> {
    let p = x.len();
    let m = min_branch.max(1);
    if p < 2 * m || r.len() != p || w.len() != p {
        return None;
    }
    if ws.order.len() != p {
        *ws = Workspace::sorted_by(x);
    } else {
        insertion_sort(&mut ws.order, x);
    }
    let c = Centred::of(x, r, w)?;
    let line = base == Base::Line;
    let best = scan(x, r, w, &ws.order, &c, line, m, profile)?;
    Some(solution(&best, &c, line, m, p + 1 - 2 * m))
}

/// Weighted means and centred second moments of the data.
struct Centred {
    sw: f64,
    xm: f64,
    rm: f64,
    sxx: f64,
    sxr: f64,
    srr: f64,
}

impl Centred {
    /// `None` when x has no spread.
    fn of(x: &[f64], r: &[f64], w: &[f64]) -> Option<Self> {
        let sw: f64 = w.iter().sum();
        let xm = x.iter().zip(w).map(|(x, w)| w * x).sum::<f64>() / sw;
        let rm = r.iter().zip(w).map(|(r, w)| w * r).sum::<f64>() / sw;
        let (mut sxx, mut sxr, mut srr) = (0.0, 0.0, 0.0);
        for i in 0..x.len() {
            let (dx, dr) = (x[i] - xm, r[i] - rm);
            sxx += w[i] * dx * dx;
            sxr += w[i] * dx * dr;
            srr += w[i] * dr * dr;
        }
        (sxx > 0.0).then_some(Centred {
            sw,
            xm,
            rm,
            sxx,
            sxr,
            srr,
        })
    }

    /// SSE of the base model alone (no break).
    fn sse_null(&self, line: bool) -> f64 {
        if line {
            self.srr - self.sxr * self.sxr / self.sxx
        } else {
            self.srr
        }
    }
}

/// The best break found: its SSE, its centred position, the prefix sums there and the
/// number of points below it.
struct Best {
    sse: f64,
    q: f64,
    sums: [f64; 5],
    k: usize,
}

/// One pass over the sorted points: in each interval between neighbouring points, the
/// interior stationary point (closed form) and the interval's upper end are candidates.
#[allow(clippy::too_many_arguments)]
fn scan(
    x: &[f64],
    r: &[f64],
    w: &[f64],
    order: &[usize],
    c: &Centred,
    line: bool,
    m: usize,
    mut profile: Option<&mut Vec<(f64, f64)>>,
) -> Option<Best> {
    let sse_null = c.sse_null(line);
    let tiny = 1e-12 * c.sxx;
    // Prefix sums over the first k sorted points, in centred coordinates:
    // [Σw, Σw x, Σw x², Σw r, Σw x r].
    let mut s = [0.0f64; 5];
    let mut best: Option<Best> = None;
    for k in 1..=(x.len() - m) {
        let i = order[k - 1];
        let (dx, dr) = (x[i] - c.xm, r[i] - c.rm);
        s[0] += w[i];
        s[1] += w[i] * dx;
        s[2] += w[i] * dx * dx;
        s[3] += w[i] * dr;
        s[4] += w[i] * dx * dr;
        if k < m {
            continue;
        }
        let [al, be, ga, de, ep] = projected(&s, c.sw, c.sxx, c.sxr, line);
        let lo = x[order[k - 1]] - c.xm;
        let hi = x[order[k]] - c.xm;
        let mut consider = |q: f64, best: &mut Option<Best>| {
            let den = ga * q * q - 2.0 * de * q + ep;
            if !(den > tiny) {
                return;
            }
            let num = al * q - be;
            let sse = (sse_null - num * num / den).max(0.0);
            if let Some(prof) = profile.as_deref_mut() {
                prof.push((q + c.xm, sse));
            }
            if best.as_ref().is_none_or(|b| sse < b.sse) {
                *best = Some(Best { sse, q, sums: s, k });
            }
        };
        let d = be * ga - al * de;
        if d != 0.0 {
            let q_star = (be * de - al * ep) / d;
            if q_star > lo && q_star < hi {
                consider(q_star, &mut best);
            }
        }
        consider(hi, &mut best);
    }
    best
}

/// The coefficients at the optimum (centred coordinates), then back to the original ones.
fn solution(best: &Best, c: &Centred, line: bool, m: usize, n_intervals: usize) -> BreakSolution {
    let qc = best.q;
    let [s_w, s_x, s_xx, _, _] = best.sums;
    let sum_h = qc * s_w - s_x;
    let sum_xh = qc * s_x - s_xx;
    let [al, be, ga, de, ep] = projected(&best.sums, c.sw, c.sxx, c.sxr, line);
    let den = ga * qc * qc - 2.0 * de * qc + ep;
    let coef = (al * qc - be) / den;
    let b = if line {
        (c.sxr - coef * sum_xh) / c.sxx
    } else {
        0.0
    };
    let a_c = -coef * sum_h / c.sw;
    BreakSolution {
        q: qc + c.xm,
        a: c.rm + a_c - b * c.xm,
        b,
        c: coef,
        sse: best.sse,
        sse_null: c.sse_null(line),
        n_below: best.k,
        interval: best.k - m,
        n_intervals,
    }
}

/// The inner products `[⟨r,u⟩, ⟨r,v⟩, ⟨u,u⟩, ⟨u,v⟩, ⟨v,v⟩]` after projecting out the base
/// regressors, from the prefix sums `[Σw, Σw x, Σw x², Σw r, Σw x r]` (centred data).
fn projected(s: &[f64; 5], sw: f64, sxx: f64, sxr: f64, line: bool) -> [f64; 5] {
    let [s_w, s_x, s_xx, s_r, s_xr] = *s;
    let mut out = [
        s_r,
        s_xr,
        s_w - s_w * s_w / sw,
        s_x - s_w * s_x / sw,
        s_xx - s_x * s_x / sw,
    ];
    if line {
        out[0] -= s_x * sxr / sxx;
        out[1] -= s_xx * sxr / sxx;
        out[2] -= s_x * s_x / sxx;
        out[3] -= s_x * s_xx / sxx;
        out[4] -= s_xx * s_xx / sxx;
    }
    out
}

#[cfg(test)]
#[allow(clippy::needless_range_loop)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};

    /// Brute force: for a given q, ordinary weighted least squares on [1, (x), h_q].
    fn sse_at(x: &[f64], r: &[f64], w: &[f64], q: f64, line: bool) -> f64 {
        let cols: Vec<Vec<f64>> = {
            let mut c = vec![vec![1.0; x.len()]];
            if line {
                c.push(x.to_vec());
            }
            c.push(x.iter().map(|&x| (q - x).max(0.0)).collect());
            c
        };
        let k = cols.len();
        let mut a = vec![vec![0.0; k + 1]; k];
        for i in 0..k {
            for j in 0..k {
                a[i][j] = (0..x.len()).map(|p| w[p] * cols[i][p] * cols[j][p]).sum();
            }
            a[i][k] = (0..x.len()).map(|p| w[p] * cols[i][p] * r[p]).sum();
        }
        for i in 0..k {
            let piv = a[i][i];
            for j in i..=k {
                a[i][j] /= piv;
            }
            for l in 0..k {
                if l != i {
                    let f = a[l][i];
                    for j in i..=k {
                        a[l][j] -= f * a[i][j];
                    }
                }
            }
        }
        (0..x.len())
            .map(|p| {
                let fit: f64 = (0..k).map(|i| a[i][k] * cols[i][p]).sum();
                w[p] * (r[p] - fit).powi(2)
            })
            .sum()
    }

    #[test]
    fn closed_form_optimum_matches_a_dense_brute_force_scan() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for trial in 0..40 {
            let line = trial % 2 == 1;
            let p = 30;
            let x: Vec<f64> = (0..p).map(|_| rng.random::<f64>()).collect();
            let r: Vec<f64> = x
                .iter()
                .map(|&x| 0.3 * x - 0.7 * (0.5 - x).max(0.0) + 0.05 * rng.random::<f64>())
                .collect();
            let w: Vec<f64> = (0..p).map(|_| 0.5 + rng.random::<f64>()).collect();
            let base = if line { Base::Line } else { Base::Constant };
            let mut ws = Workspace::default();
            let s = search(&x, &r, &w, base, 4, &mut ws, None).unwrap();
            // The closed form's SSE equals a direct solve at its q ...
            let direct = sse_at(&x, &r, &w, s.q, line);
            assert!(
                (s.sse - direct).abs() < 1e-9 * (1.0 + direct),
                "trial {trial}"
            );
            // ... and no q on a dense grid inside the allowed range does better.
            let mut xs = x.clone();
            xs.sort_by(f64::total_cmp);
            let (lo, hi) = (xs[3], xs[p - 4]);
            for i in 0..=4000 {
                let q = lo + (hi - lo) * i as f64 / 4000.0;
                assert!(
                    sse_at(&x, &r, &w, q, line) >= s.sse - 1e-9,
                    "trial {trial}, q {q}"
                );
            }
            // The coefficients reproduce the fitted values' SSE.
            let sse_coef: f64 = (0..p).map(|i| w[i] * (r[i] - s.eval(x[i])).powi(2)).sum();
            assert!(
                (sse_coef - s.sse).abs() < 1e-9 * (1.0 + s.sse),
                "trial {trial}"
            );
        }
    }

    #[test]
    fn exact_broken_stick_data_give_back_the_break_and_slopes() {
        let x: Vec<f64> = (0..50).map(|i| i as f64 / 49.0).collect();
        let r: Vec<f64> = x
            .iter()
            .map(|&x| 2.0 - 0.8 * x + 0.55 * (0.37 - x).max(0.0))
            .collect();
        let w = vec![1.0; 50];
        let s = search(&x, &r, &w, Base::Line, 5, &mut Workspace::default(), None).unwrap();
        assert!((s.q - 0.37).abs() < 1e-9, "{s:?}");
        assert!((s.b + 0.8).abs() < 1e-9 && (s.c - 0.55).abs() < 1e-9 && (s.a - 2.0).abs() < 1e-9);
        assert!(s.sse < 1e-12, "{s:?}");
    }

    #[test]
    fn too_few_points_or_no_spread_give_none() {
        let mut ws = Workspace::default();
        let x = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];
        let r = [0.0; 9];
        let w = [1.0; 9];
        assert!(search(&x, &r, &w, Base::Constant, 5, &mut ws, None).is_none());
        let flat = [0.5; 12];
        assert!(
            search(
                &flat,
                &[0.0; 12],
                &[1.0; 12],
                Base::Constant,
                3,
                &mut ws,
                None
            )
            .is_none()
        );
    }
}
