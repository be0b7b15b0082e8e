//! The limit of long ages (`fit --limit`): at fixed C, the parametric curves of the
//! waiting times are fitted jointly by
//!
//! `y(C, tw) = y∞(C) + a(C) · (tw / tw₀)^(−α)`,
//!
//! with one exponent α shared by every C and `tw₀` the geometric mean of the waiting
//! times (a scale that keeps the fit well conditioned; y∞ and α do not depend on it).
//! `X∞` is minus the slope of the least-squares line through `y∞(C)` below the joint
//! fit's break (all of it when no break is detected). Intervals come from the same cluster
//! bootstrap as the fit (the same samples in replicate `b`), so every number is refitted
//! in every replicate, α included.
//!
//! The rules, fixed ahead of the data:
//! - the grid: [`GRID`] values of C, equally spaced over the range that every curve
//!   covers (trimmed by 2% of it at each end); each curve's y is interpolated linearly
//!   between its two neighbouring points in C (sorted by the replicate's own C);
//! - α: least squares over a log-spaced grid of [`ALPHA_STEPS`] values in
//!   [`ALPHA_RANGE`], refined by golden-section search between the best grid value's
//!   neighbours; for a given α each C is an ordinary least-squares line in `u = (tw/tw₀)^−α`;
//! - intervals: X∞ ± t_{n−1} times its jackknife standard error (the limit refitted
//!   without each sample; [`jackknife_t`]); y∞(C) and α percentile intervals read at
//!   Student's width for the samples ([`crate::resample::widened_level`]; α at the
//!   stated level covered 0.91–0.925).
//!
//! Three curves or more are needed (two unknowns per C); a curve is a waiting time
//! (`--hold tw`).

use super::campaign::Campaign;
use super::points::LeaveOut;
use super::resampling::{Prepared, chunk_rows};
use super::result::{AgeLimit, LimitPoint};
use super::settings::{FitSettings, Hold};
use crate::common::Estimate;
use crate::error::{Error, Result};
use crate::resample::{self, IntervalMethod, interval, widened_level};
use rayon::prelude::*;
use statrs::distribution::{ContinuousCDF, StudentsT};

/// Values of C on which the curves are compared.
pub const GRID: usize = 16;
/// The range searched for α.
pub const ALPHA_RANGE: [f64; 2] = [0.05, 3.0];
/// Log-spaced values of α tried before the refinement.
pub const ALPHA_STEPS: usize = 60;
/// Least grid values below the break for the slope X∞.
const MIN_BELOW: usize = 3;
/// Above this share of replicates with α at an end of its range, α is called unresolved.
const EDGE_SHARE: f64 = 0.05;

/// What the fit of one set of mean curves needs, fixed from the full data.
#[derive(Debug, Clone)]
pub struct Setup {
    /// The waiting times, one per curve.
    tws: Vec<f64>,
    /// The point indices of each curve.
    curves: Vec<Vec<usize>>,
    /// The grid of C.
    grid: Vec<f64>,
    /// Grid values used for the slope X∞.
    below: Vec<usize>,
    /// `tw₀`.
    scale: f64,
}

/// The fit of one set of mean curves.
#[derive(Debug, Clone)]
pub struct LimitFit {
    /// y∞ per grid value.
    pub y_inf: Vec<f64>,
    /// The exponent.
    pub alpha: f64,
    /// `X∞`.
    pub x_inf: f64,
    /// α lies at an end of [`ALPHA_RANGE`].
    pub alpha_at_edge: bool,
}

/// Refuses `--limit` before any work where the campaign's layout cannot give it: curves
/// held at fixed t, fewer than 3 waiting times, a waiting time that is not positive.
///
/// # Errors
/// [`Error::Setting`] naming the reason.
pub fn check(campaign: &Campaign, s: &FitSettings) -> Result<()> {
    if s.hold != Hold::Tw {
        return Err(Error::Setting(
            "--limit extrapolates curves of fixed waiting time to long ages; it cannot be \
             used with --hold t"
                .into(),
        ));
    }
    let tws = campaign.waiting_times();
    if tws.len() < 3 {
        return Err(Error::Setting(format!(
            "--limit needs at least 3 waiting times (two unknowns per value of C), the \
             campaign has {}",
            tws.len()
        )));
    }
    if let Some(tw) = tws.iter().find(|tw| !(**tw > 0.0)) {
        return Err(Error::Setting(format!(
            "--limit needs positive waiting times (tw^-α), the campaign has tw = {tw}"
        )));
    }
    Ok(())
}

impl Setup {
    /// The setup from the campaign and the full-data points; `q` is the joint fit's
    /// break, when one was detected.
    ///
    /// # Errors
    /// [`Error::Analysis`] with fewer than 3 waiting times, curves held at fixed t,
    /// curves that share no range of C, or too few grid values below the break.
    pub fn new(campaign: &Campaign, s: &FitSettings, x: &[f64], q: Option<f64>) -> Result<Self> {
        check(campaign, s)?;
        let tws = campaign.waiting_times();
        let curves: Vec<Vec<usize>> = tws
            .iter()
            .map(|tw| {
                (0..campaign.n_points())
                    .filter(|&j| campaign.points()[j].tw.to_bits() == tw.to_bits())
                    .collect()
            })
            .collect();
        let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
        for c in &curves {
            let (a, b) = c
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &j| {
                    (a.min(x[j]), b.max(x[j]))
                });
            if c.len() < 2 {
                return Err(Error::Analysis(
                    "--limit needs at least 2 points on every curve".into(),
                ));
            }
            lo = lo.max(a);
            hi = hi.min(b);
        }
        if !(hi > lo) {
            return Err(Error::Analysis(format!(
                "--limit compares the curves at equal C, but they share no range of C (the \
                 highest of their lowest C is {lo:.4}, the lowest of their highest {hi:.4})"
            )));
        }
        let trim = 0.02 * (hi - lo);
        let (lo, hi) = (lo + trim, hi - trim);
        let grid: Vec<f64> = (0..GRID)
            .map(|k| lo + (hi - lo) * k as f64 / (GRID - 1) as f64)
            .collect();
        let below: Vec<usize> = match q {
            Some(q) => (0..GRID).filter(|&k| grid[k] < q).collect(),
            None => (0..GRID).collect(),
        };
        if below.len() < MIN_BELOW {
            return Err(Error::Analysis(format!(
                "--limit needs at least {MIN_BELOW} values of C below the break (q = {:.4}) \
                 on the range that every curve covers ({lo:.4} to {hi:.4}); the oldest \
                 curves do not reach far enough below the plateau",
                q.unwrap_or(f64::NAN)
            )));
        }
        let scale = (tws.iter().map(|t| t.ln()).sum::<f64>() / tws.len() as f64).exp();
        Ok(Setup {
            tws,
            curves,
            grid,
            below,
            scale,
        })
    }

    /// The grid of C.
    pub fn grid(&self) -> &[f64] {
        &self.grid
    }

    /// Fits one set of mean curves (`None` when a curve cannot be interpolated).
    pub fn fit(&self, x: &[f64], y: &[f64]) -> Option<LimitFit> {
        let k = self.grid.len();
        let mut table = vec![0.0; self.tws.len() * k];
        let mut pairs: Vec<(f64, f64)> = Vec::new();
        for (j, idx) in self.curves.iter().enumerate() {
            pairs.clear();
            pairs.extend(idx.iter().map(|&i| (x[i], y[i])));
            if pairs.iter().any(|p| !(p.0.is_finite() && p.1.is_finite())) {
                return None;
            }
            pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
            for (kk, &c) in self.grid.iter().enumerate() {
                table[j * k + kk] = interpolate(&pairs, c)?;
            }
        }
        let logu: Vec<f64> = self.tws.iter().map(|t| (t / self.scale).ln()).collect();
        let sse = |alpha: f64| profile(&table, &logu, k, alpha).0;
        let [a0, a1] = ALPHA_RANGE;
        let step = (a1 / a0).ln() / (ALPHA_STEPS - 1) as f64;
        let at = |i: usize| a0 * (step * i as f64).exp();
        let best = (0..ALPHA_STEPS)
            .map(|i| (i, sse(at(i))))
            .filter(|v| v.1.is_finite())
            .min_by(|a, b| a.1.total_cmp(&b.1))?
            .0;
        let alpha = golden(
            &sse,
            at(best.saturating_sub(1)),
            at((best + 1).min(ALPHA_STEPS - 1)),
        );
        let (_, y_inf) = profile(&table, &logu, k, alpha);
        let xs: Vec<f64> = self.below.iter().map(|&i| self.grid[i]).collect();
        let ys: Vec<f64> = self.below.iter().map(|&i| y_inf[i]).collect();
        let x_inf = -super::aging::ols_slope(&xs, &ys);
        Some(LimitFit {
            y_inf,
            alpha,
            x_inf,
            alpha_at_edge: best == 0 || best == ALPHA_STEPS - 1,
        })
    }
}

/// y at `c` on the polyline through `pairs` (sorted by C): between the neighbours, or on
/// the end segment just outside.
fn interpolate(pairs: &[(f64, f64)], c: f64) -> Option<f64> {
    let m = pairs.len();
    let i = pairs.partition_point(|p| p.0 < c).clamp(1, m - 1);
    let ((x0, y0), (x1, y1)) = (pairs[i - 1], pairs[i]);
    let dx = x1 - x0;
    if !(dx.abs() > 0.0) {
        return Some(0.5 * (y0 + y1));
    }
    Some(y0 + (y1 - y0) * (c - x0) / dx)
}

/// The summed SSE over the grid and the intercepts `y∞(C)` for one α: per C, the
/// least-squares line of the curves' y against `u = exp(−α log(tw/tw₀))`.
fn profile(table: &[f64], logu: &[f64], k: usize, alpha: f64) -> (f64, Vec<f64>) {
    let j = logu.len();
    let u: Vec<f64> = logu.iter().map(|l| (-alpha * l).exp()).collect();
    let ub = u.iter().sum::<f64>() / j as f64;
    let suu: f64 = u.iter().map(|v| (v - ub).powi(2)).sum();
    let mut sse = 0.0;
    let mut y_inf = vec![f64::NAN; k];
    for (kk, yi) in y_inf.iter_mut().enumerate() {
        let ys = (0..j).map(|jj| table[jj * k + kk]);
        let yb = ys.clone().sum::<f64>() / j as f64;
        let (mut suy, mut syy) = (0.0, 0.0);
        for (y, uu) in ys.zip(&u) {
            suy += (uu - ub) * (y - yb);
            syy += (y - yb).powi(2);
        }
        let b = suy / suu;
        sse += syy - b * suy;
        *yi = yb - b * ub;
    }
    (sse, y_inf)
}

/// The minimum of `f` on `[a, b]` by golden-section search (40 steps).
fn golden(f: &dyn Fn(f64) -> f64, mut a: f64, mut b: f64) -> f64 {
    let g = 0.5 * (5f64.sqrt() - 1.0);
    let (mut c, mut d) = (b - g * (b - a), a + g * (b - a));
    let (mut fc, mut fd) = (f(c), f(d));
    for _ in 0..40 {
        if fc < fd {
            b = d;
            d = c;
            fd = fc;
            c = b - g * (b - a);
            fc = f(c);
        } else {
            a = c;
            c = d;
            fc = fd;
            d = a + g * (b - a);
            fd = f(d);
        }
    }
    0.5 * (a + b)
}

/// The limit with its intervals: the full-data fit, then the same fit on every replicate
/// of the cluster bootstrap (the fit's own draws, replicate by replicate).
///
/// # Errors
/// As [`Setup::new`], and [`Error::Analysis`] when the full-data curves cannot be fitted.
pub fn age_limit(
    campaign: &Campaign,
    prep: &Prepared<'_>,
    s: &FitSettings,
    q: Option<f64>,
) -> Result<AgeLimit> {
    let pm = &prep.pm;
    let setup = Setup::new(campaign, s, &pm.x, q)?;
    let full = setup.fit(&pm.x, &pm.y).ok_or_else(|| {
        Error::Analysis("--limit: the mean curves could not be interpolated on C".into())
    })?;
    let reps = replicates(prep, &setup, s);
    let ok: Vec<&LimitFit> = reps.iter().flatten().collect();
    let n = campaign.n_samples();
    let read = widened_level(s.level, n);
    let est = |v: f64, r: Vec<f64>, level: f64| {
        let iv = interval(v, &r, None, IntervalMethod::Percentile, level);
        Estimate::with(v, iv.as_ref())
    };
    let x_inf = jackknife_t(&setup, prep, full.x_inf, s.level).unwrap_or_else(|| {
        let mut e = est(full.x_inf, ok.iter().map(|f| f.x_inf).collect(), read);
        e.note = Some(
            "a leave-one-sample-out fit failed: percentile interval at Student's width".into(),
        );
        e
    });
    let alpha = est(full.alpha, ok.iter().map(|f| f.alpha).collect(), read);
    let edge = ok.iter().filter(|f| f.alpha_at_edge).count() as f64 / ok.len().max(1) as f64;
    let points = setup
        .grid()
        .iter()
        .enumerate()
        .map(|(k, &c)| {
            let e = est(full.y_inf[k], ok.iter().map(|f| f.y_inf[k]).collect(), read);
            LimitPoint {
                c,
                y_inf: e.estimate.unwrap_or(f64::NAN),
                low: e.low,
                high: e.high,
                below: setup.below.contains(&k),
            }
        })
        .collect();
    let t_eff = super::assess::t_eff_estimate(s.temperature, &x_inf);
    Ok(AgeLimit {
        waiting_times: setup.tws.clone(),
        break_used: q,
        x_inf,
        t_eff_inf: t_eff,
        alpha,
        alpha_at_edge_share: edge,
        alpha_unresolved: full.alpha_at_edge || edge > EDGE_SHARE,
        failed_resamples: reps.len() - ok.len(),
        points,
    })
}

/// X∞ ± t_{n−1} · (jackknife standard error), from the limit refitted on every
/// leave-one-sample-out set; `None` when one of them cannot be fitted. (Percentile
/// intervals of X∞, even at Student's width, covered 0.920–0.923 at 20 samples; these
/// 0.933–0.937, and both about 0.95 at 40: docs/validation.md. The jackknife variance
/// errs on the large side: Efron & Stein, Ann. Stat. 9, 586–596 (1981).)
fn jackknife_t(setup: &Setup, prep: &Prepared<'_>, x_inf: f64, level: f64) -> Option<Estimate> {
    let n = prep.data.nrows();
    let mut lo = LeaveOut::new(prep.means(), prep.tf);
    let jack = (0..n)
        .map(|i| {
            lo.at(&prep.data, prep.tf, i);
            setup.fit(&lo.x, &lo.y).map(|f| f.x_inf)
        })
        .collect::<Option<Vec<f64>>>()?;
    let se = resample::jackknife_se(&jack);
    let t = StudentsT::new(0.0, 1.0, (n - 1) as f64)
        .ok()?
        .inverse_cdf(0.5 + level / 2.0);
    (se.is_finite() && t.is_finite()).then_some(Estimate {
        estimate: Some(x_inf),
        low: Some(x_inf - t * se),
        high: Some(x_inf + t * se),
        note: None,
    })
}

/// The limit fitted on every replicate, in the fit's chunks and with its draws.
fn replicates(prep: &Prepared<'_>, setup: &Setup, s: &FitSettings) -> Vec<Option<LimitFit>> {
    let (n, p) = (prep.data.nrows(), prep.tf.points);
    let b_total = s.resamples;
    let chunk = chunk_rows(prep.data.ncols());
    let chunks: Vec<usize> = (0..b_total.div_ceil(chunk)).collect();
    chunks
        .par_iter()
        .flat_map_iter(|&c| {
            let b0 = c * chunk;
            let here = chunk.min(b_total - b0);
            let wm = resample::weight_rows(s.seed, b0, here, &mut vec![0u32; n]);
            let means = prep.data.product(&wm);
            let (mut x, mut y) = (vec![0.0; p], vec![0.0; p]);
            (0..here)
                .map(|r| {
                    prep.tf.apply(means.row(r), &mut x, &mut y);
                    setup.fit(&x, &y)
                })
                .collect::<Vec<_>>()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_power_law_curves_give_back_their_limit_and_exponent() {
        // Invented exact data: y(C, tw) = y∞(C) + a(C) (tw/tw₀)^−α with α = 0.7 on 4 curves.
        let tws = [10.0, 100.0, 1000.0, 10000.0];
        let scale = (tws.iter().map(|t: &f64| t.ln()).sum::<f64>() / 4.0).exp();
        let k = 5;
        let y_inf = [0.1, 0.2, 0.3, 0.4, 0.5];
        let amp = [0.3, 0.2, 0.1, 0.05, 0.0];
        let mut table = vec![0.0; 4 * k];
        for (j, tw) in tws.iter().enumerate() {
            for kk in 0..k {
                table[j * k + kk] = y_inf[kk] + amp[kk] * (tw / scale).powf(-0.7);
            }
        }
        let logu: Vec<f64> = tws.iter().map(|t| (t / scale).ln()).collect();
        let f = |a: f64| profile(&table, &logu, k, a).0;
        let alpha = golden(&f, 0.3, 1.5);
        assert!((alpha - 0.7).abs() < 1e-5, "{alpha}");
        let (sse, yi) = profile(&table, &logu, k, alpha);
        assert!(sse < 1e-12);
        for (a, b) in yi.iter().zip(y_inf) {
            assert!((a - b).abs() < 1e-6);
        }
    }

    #[test]
    fn interpolation_is_linear_between_neighbours_and_on_the_end_segment_outside() {
        let pairs = [(0.0, 1.0), (1.0, 3.0), (2.0, 4.0)];
        assert_eq!(interpolate(&pairs, 0.5), Some(2.0));
        assert_eq!(interpolate(&pairs, 1.5), Some(3.5));
        assert_eq!(interpolate(&pairs, -1.0), Some(-1.0));
        assert_eq!(interpolate(&pairs, 3.0), Some(5.0));
    }
}
