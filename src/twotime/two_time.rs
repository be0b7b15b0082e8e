//! The two-time ratio `X(t,tw) = −∂_tw y / ∂_tw C` at fixed later time t, with
//! `y = k·T·chi` (Sollich, Fielding & Mayer, J. Phys.: Condens. Matter 14, 1683 (2002)).
//!
//! It is not the slope of a fixed-tw curve of the parametric plot: along a fixed-tw curve
//! t runs, here tw runs at fixed t. The rules:
//!
//! - **Times.** The later times are the distinct measured t values (at most
//!   [`MAX_TIMES`], evenly spread in rank when there are more). A waiting-time curve
//!   contributes at t when t is measured on it, or when t lies inside its measured range:
//!   then C and chi are interpolated linearly in log t between its two nearest measured
//!   times (never extrapolated).
//! - **Window.** At each t, the contributing waiting times in ascending order; at the
//!   i-th of them, a least-squares polynomial in ln tw through it and its `(w − 1)/2`
//!   neighbours on each side gives `∂C/∂ln tw` and `∂y/∂ln tw` at its centre
//!   (unweighted): a straight line for w = 3, a cubic for w = 5 (a line over 5 waiting
//!   times averages X over a wider span and its bias dominated: coverage 0.79 on the
//!   invented aging truth of tests/two_time.rs at 1.5 between waiting times).
//!   Only centred windows: the first and last `(w − 1)/2` waiting times get no value. The
//!   ratio of the two slopes is the ratio of the tw-derivatives (the factor tw cancels).
//! - **Intervals.** Every slope is linear in the sample values, so each sample's slopes are
//!   columns of one matrix whose resampled means are rows of `W · D`, with the same
//!   replicate streams (seed, index) and the same cluster bootstrap of whole samples as the
//!   fit. Percentile intervals, read at [`crate::resample::widened_level`] as the fit's
//!   slopes are. Where the interval of `∂C/∂ln tw` reaches 0 the denominator is not
//!   resolved and X is not given.

use super::campaign::Campaign;
use crate::common::Estimate;
use crate::error::{Error, Result};
use crate::resample::{self, IntervalMethod};
use ndarray::Array2;
use rayon::prelude::*;
use serde::Serialize;

/// At most this many later times are used (evenly spread in rank among the measured ones).
pub const MAX_TIMES: usize = 48;

/// What shapes the two-time ratio beyond the fit's own settings (seed, B, level, T, k).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct TwoTimeSettings {
    /// Waiting times per local fit: 3 or 5.
    pub window: usize,
}

impl Default for TwoTimeSettings {
    fn default() -> Self {
        TwoTimeSettings { window: 3 }
    }
}

/// The two-time ratio at one grid point (t, tw).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TwoTimePoint {
    /// The later time, held fixed.
    pub t: f64,
    /// The waiting time at the centre of the window.
    pub tw: f64,
    /// Mean `C(t,tw)` over samples.
    pub c: f64,
    /// Mean `k·T·chi(t,tw)` over samples.
    pub y: f64,
    /// C and chi at this point were interpolated in log t along the tw curve.
    pub interpolated: bool,
    /// The smallest and largest waiting time of the local fit.
    pub window: [f64; 2],
    /// How many of the window's values were interpolated in log t.
    pub window_interpolated: usize,
    /// `∂C/∂ln tw` at fixed t, with its interval.
    pub dc_dlntw: Estimate,
    /// `∂(k·T·chi)/∂ln tw` at fixed t, with its interval.
    pub dy_dlntw: Estimate,
    /// The denominator's interval excludes 0.
    pub resolved: bool,
    /// The two-time ratio `X(t,tw) = −∂_tw y / ∂_tw C`, with its interval (`null` with the
    /// reason where the denominator is not resolved).
    pub x: Estimate,
}

/// The two-time ratio on every grid point the rules allow, with how it was made.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TwoTime {
    /// Waiting times per local fit.
    pub window: usize,
    /// The level at which the replicates were read (the stated level widened).
    pub read_level: f64,
    /// How many later times were left out to stay within [`MAX_TIMES`].
    pub times_left_out: usize,
    /// The grid points, by t then tw.
    pub points: Vec<TwoTimePoint>,
}

/// One value of a curve at a later time: columns of the campaign and their coefficients.
#[derive(Debug, Clone)]
struct Read {
    tw: f64,
    terms: Vec<(usize, f64)>,
    interpolated: bool,
}

/// The measured values of one waiting-time curve at `t`, interpolated in log t inside its
/// range.
fn read_at(curve: &[(f64, usize)], tw: f64, t: f64) -> Option<Read> {
    let exact = curve.iter().find(|(tc, _)| tc.total_cmp(&t).is_eq());
    if let Some(&(_, j)) = exact {
        return Some(Read {
            tw,
            terms: vec![(j, 1.0)],
            interpolated: false,
        });
    }
    let k = curve.partition_point(|(tc, _)| *tc < t);
    if k == 0 || k >= curve.len() {
        return None;
    }
    let ((t0, j0), (t1, j1)) = (curve[k - 1], curve[k]);
    let a = (t.ln() - t0.ln()) / (t1.ln() - t0.ln());
    if !(a.is_finite() && (0.0..=1.0).contains(&a)) {
        return None;
    }
    Some(Read {
        tw,
        terms: vec![(j0, 1.0 - a), (j1, a)],
        interpolated: true,
    })
}

/// One grid point's plan: where it sits and its slope coefficients per campaign column.
struct Plan {
    t: f64,
    tw: f64,
    centre: Vec<(usize, f64)>,
    interpolated: bool,
    window: [f64; 2],
    window_interpolated: usize,
    slope: Vec<(usize, f64)>,
}

/// The later times used and how many were left out.
fn later_times(campaign: &Campaign) -> (Vec<f64>, usize) {
    let mut ts: Vec<f64> = campaign.points().iter().map(|g| g.t).collect();
    ts.sort_by(f64::total_cmp);
    ts.dedup();
    if ts.len() <= MAX_TIMES {
        return (ts, 0);
    }
    let m = ts.len();
    let kept: Vec<f64> = (0..MAX_TIMES)
        .map(|i| ts[(i * (m - 1)) / (MAX_TIMES - 1)])
        .collect();
    (kept, m - MAX_TIMES)
}

fn plans(campaign: &Campaign, window: usize) -> (Vec<Plan>, usize) {
    let tws = campaign.waiting_times();
    let curves: Vec<Vec<(f64, usize)>> = tws
        .iter()
        .map(|&tw| {
            campaign
                .points()
                .iter()
                .enumerate()
                .filter(|(_, g)| g.tw.total_cmp(&tw).is_eq())
                .map(|(j, g)| (g.t, j))
                .collect()
        })
        .collect();
    let (times, left_out) = later_times(campaign);
    let h = window / 2;
    let mut out = Vec::new();
    for &t in &times {
        let reads: Vec<Read> = tws
            .iter()
            .zip(&curves)
            .filter_map(|(&tw, c)| read_at(c, tw, t))
            .collect();
        if reads.len() < window {
            continue;
        }
        for i in h..reads.len() - h {
            let win = &reads[i - h..=i + h];
            let u: Vec<f64> = win.iter().map(|r| r.tw.ln() - reads[i].tw.ln()).collect();
            let Some(gs) = derivative_weights(&u, if window == 3 { 1 } else { 3 }) else {
                continue;
            };
            let mut slope = Vec::new();
            for (r, g) in win.iter().zip(&gs) {
                slope.extend(r.terms.iter().map(|&(j, c)| (j, c * g)));
            }
            out.push(Plan {
                t,
                tw: reads[i].tw,
                centre: reads[i].terms.clone(),
                interpolated: reads[i].interpolated,
                window: [win[0].tw, win[window - 1].tw],
                window_interpolated: win.iter().filter(|r| r.interpolated).count(),
                slope,
            });
        }
    }
    (out, left_out)
}

/// The weights `g` such that `Σ g_l f(u_l)` is the first-order coefficient of the
/// least-squares polynomial of `degree` in `u` (offsets from the window's centre): its
/// derivative at the centre. `None` when the points do not determine it.
fn derivative_weights(u: &[f64], degree: usize) -> Option<Vec<f64>> {
    let k = degree + 1;
    if u.len() < k {
        return None;
    }
    // Scale u to order 1 so the normal equations stay well conditioned.
    let s = u.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if !(s > 0.0) {
        return None;
    }
    let v: Vec<Vec<f64>> = u
        .iter()
        .map(|x| (0..k).map(|p| (x / s).powi(p as i32)).collect())
        .collect();
    // Normal matrix VᵀV, solved for the unit vector e₁ by Gauss–Jordan with pivoting:
    // row 1 of (VᵀV)⁻¹, then g = that row times Vᵀ.
    let mut a: Vec<Vec<f64>> = (0..k)
        .map(|r| {
            let mut row: Vec<f64> = (0..k)
                .map(|c| v.iter().map(|vi| vi[r] * vi[c]).sum())
                .collect();
            row.extend((0..k).map(|c| if c == r { 1.0 } else { 0.0 }));
            row
        })
        .collect();
    for col in 0..k {
        let piv = (col..k).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        if !(a[piv][col].abs() > 1e-12) {
            return None;
        }
        a.swap(col, piv);
        let d = a[col][col];
        a[col].iter_mut().for_each(|x| *x /= d);
        for r in 0..k {
            if r != col {
                let f = a[r][col];
                let pivot_row = a[col].clone();
                a[r].iter_mut()
                    .zip(&pivot_row)
                    .for_each(|(x, p)| *x -= f * p);
            }
        }
    }
    let inv_row1: Vec<f64> = a[1][k..].to_vec();
    Some(
        v.iter()
            .map(|vi| inv_row1.iter().zip(vi).map(|(a, b)| a * b).sum::<f64>() / s)
            .collect(),
    )
}

/// Refuses a campaign on which no two-time ratio can be formed, with the reason.
///
/// # Errors
/// [`Error::Setting`] for a window other than 3 or 5, or `resamples` whose replicates
/// would not fit in memory; [`Error::Analysis`] for fewer than 3 waiting times, or no
/// later time reached by enough waiting times.
pub fn check(campaign: &Campaign, settings: &TwoTimeSettings, resamples: usize) -> Result<()> {
    if settings.window != 3 && settings.window != 5 {
        return Err(Error::Setting(format!(
            "--two-time-window is {}, expected 3 or 5 waiting times",
            settings.window
        )));
    }
    let tws = campaign.waiting_times();
    if tws.len() < 3 {
        return Err(Error::Analysis(format!(
            "--two-time needs at least 3 waiting times (the derivatives along tw at fixed t \
             come from local fits over neighbouring waiting times); the campaign has {}",
            tws.len()
        )));
    }
    let q = plans(campaign, settings.window).0.len();
    if q == 0 {
        return Err(Error::Analysis(format!(
            "--two-time: no later time t is measured on (or inside the measured range of) \
             {} waiting times, so no derivative along tw can be formed; measure common later \
             times across the waiting times{}",
            settings.window,
            if settings.window == 5 {
                " or use --two-time-window 3"
            } else {
                ""
            }
        )));
    }
    // The replicates of both slopes at every grid point, one slope's column and the
    // ratios while a point is read, and the per-sample slopes.
    let need =
        8.0 * (2 * q + 3) as f64 * resamples as f64 + 8.0 * (2 * q * campaign.n_samples()) as f64;
    crate::budget::check(need, resamples, crate::budget::available_bytes())
}

/// The two-time ratio of a campaign: `kt = k·T`, the fit's `resamples`, `seed` and stated
/// `level`.
///
/// # Errors
/// As [`check`].
pub fn two_time_ratio(
    campaign: &Campaign,
    settings: &TwoTimeSettings,
    kt: f64,
    resamples: usize,
    seed: u64,
    level: f64,
) -> Result<TwoTime> {
    check(campaign, settings, resamples)?;
    let (plans, times_left_out) = plans(campaign, settings.window);
    let (n, q) = (campaign.n_samples(), plans.len());
    let (corr, resp) = (campaign.corr(), campaign.resp());
    // Per sample: ∂C/∂ln tw of every grid point, then ∂y/∂ln tw.
    let mut d = Array2::<f64>::zeros((n, 2 * q));
    for (k, p) in plans.iter().enumerate() {
        for &(j, g) in &p.slope {
            for i in 0..n {
                d[[i, k]] += g * corr[[i, j]];
                d[[i, q + k]] += g * kt * resp[[i, j]];
            }
        }
    }
    let mean = |a: &Array2<f64>, terms: &[(usize, f64)]| {
        terms
            .iter()
            .map(|&(j, c)| c * a.column(j).sum() / n as f64)
            .sum::<f64>()
    };
    let full = d.mean_axis(ndarray::Axis(0)).unwrap_or_default();
    // The same replicates as the fit: replicate b draws resample::draw_counts(seed, b, n).
    let chunk = crate::twotime::chunk_rows(d.ncols());
    let chunks: Vec<Array2<f64>> = (0..resamples.div_ceil(chunk))
        .into_par_iter()
        .map_init(
            || vec![0u32; n],
            |counts, c| {
                let b0 = c * chunk;
                let here = chunk.min(resamples - b0);
                resample::product(&resample::weight_rows(seed, b0, here, counts), &d)
            },
        )
        .collect();
    let read_level = resample::widened_level(level, n);
    let points = plans
        .iter()
        .enumerate()
        .map(|(k, p)| {
            let column = |col: usize| -> Vec<f64> {
                chunks.iter().flat_map(|m| m.column(col).to_vec()).collect()
            };
            let (dc_reps, dy_reps) = (column(k), column(q + k));
            let x_reps: Vec<f64> = dc_reps.iter().zip(&dy_reps).map(|(c, y)| -y / c).collect();
            let iv = |est: f64, reps: &[f64]| {
                resample::interval(est, reps, None, IntervalMethod::Percentile, read_level)
            };
            let (dc, dy) = (full[k], full[q + k]);
            let dc_iv = iv(dc, &dc_reps);
            let resolved = dc_iv.as_ref().is_some_and(|i| i.low > 0.0 || i.high < 0.0);
            let x = if resolved {
                let est = -dy / dc;
                Estimate::with(est, iv(est, &x_reps).as_ref())
            } else {
                Estimate::none(
                    "the interval of dC/d ln tw reaches 0: the denominator is not resolved, \
                     so no two-time ratio is given here",
                )
            };
            TwoTimePoint {
                t: p.t,
                tw: p.tw,
                c: mean(corr, &p.centre),
                y: kt * mean(resp, &p.centre),
                interpolated: p.interpolated,
                window: p.window,
                window_interpolated: p.window_interpolated,
                dc_dlntw: Estimate::with(dc, dc_iv.as_ref()),
                dy_dlntw: Estimate::with(dy, iv(dy, &dy_reps).as_ref()),
                resolved,
                x,
            }
        })
        .collect();
    Ok(TwoTime {
        window: settings.window,
        read_level,
        times_left_out,
        points,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::twotime::GridPoint;

    /// A campaign whose every sample is `C = f(t, tw)`, `chi = g(t, tw)` plus a small
    /// sample offset.
    fn campaign(tws: &[f64], ts: &[f64], f: impl Fn(f64, f64) -> (f64, f64)) -> Campaign {
        let pts: Vec<GridPoint> = tws
            .iter()
            .flat_map(|&tw| {
                ts.iter()
                    .filter(move |&&t| t > tw)
                    .map(move |&t| GridPoint { tw, t })
            })
            .collect();
        on(pts, f)
    }

    fn on(pts: Vec<GridPoint>, f: impl Fn(f64, f64) -> (f64, f64)) -> Campaign {
        let n = 4;
        let mut c = Array2::zeros((n, pts.len()));
        let mut r = Array2::zeros((n, pts.len()));
        for i in 0..n {
            for (j, g) in pts.iter().enumerate() {
                let (cv, rv) = f(g.t, g.tw);
                let e = 1e-6 * (i as f64 - 1.5);
                c[[i, j]] = cv + e;
                r[[i, j]] = rv - e;
            }
        }
        let ids = (0..n).map(|i| format!("s{i}")).collect();
        Campaign::new(ids, pts, c, r, None).unwrap()
    }

    #[test]
    fn a_ratio_linear_in_log_tw_is_recovered_exactly() {
        // C = 1 + a ln(tw/t) and chi = b ln(t/tw): X = b/a at every point, also through
        // interpolation in log t (both forms are linear in ln t).
        let tws = [1.0, 2.0, 4.0, 8.0, 16.0];
        let ts = [20.0, 40.0, 80.0];
        let camp = campaign(&tws, &ts, |t, tw| {
            (1.0 + 0.1 * (tw / t).ln(), 0.03 * (t / tw).ln())
        });
        let r = two_time_ratio(&camp, &TwoTimeSettings::default(), 1.0, 200, 3, 0.95).unwrap();
        assert_eq!(r.points.len(), 3 * 3);
        for p in &r.points {
            assert!((p.x.estimate.unwrap() - 0.3).abs() < 1e-6, "{p:?}");
        }
    }

    #[test]
    fn interpolation_in_log_t_fills_unshared_times() {
        // Each curve has its own later times (t = 10·tw, 40·tw); only t = 40 lies inside
        // all three ranges, measured at tw = 1 and 4 and interpolated in log t at tw = 2
        // (exact for forms linear in ln t); every other t is reached by fewer than 3.
        let pts = [1.0, 2.0, 4.0]
            .iter()
            .flat_map(|&tw| [10.0, 40.0].map(|k| GridPoint { tw, t: k * tw }))
            .collect();
        let camp = on(pts, |t, tw| {
            (1.0 + 0.2 * (tw / t).ln(), 0.05 * (t / tw).ln())
        });
        let r = two_time_ratio(&camp, &TwoTimeSettings::default(), 1.0, 100, 3, 0.95).unwrap();
        let ts: Vec<f64> = r.points.iter().map(|p| p.t).collect();
        assert_eq!(ts, [40.0]);
        for p in &r.points {
            assert!((p.tw - 2.0).abs() < 1e-12);
            assert!((p.x.estimate.unwrap() - 0.25).abs() < 1e-9, "{p:?}");
            assert!((p.c - (1.0 + 0.2 * (2.0 / p.t).ln())).abs() < 1e-9);
        }
        assert!(r.points[0].interpolated && r.points[0].window_interpolated == 1);
    }

    #[test]
    fn derivative_weights_are_the_central_differences() {
        // Common practice: on equal spacing h the line through 3 points gives
        // (f₊ − f₋)/(2h), the cubic through 5 the stencil (f₋₂ − 8f₋₁ + 8f₁ − f₂)/(12h).
        let h = 0.3;
        let g = derivative_weights(&[-h, 0.0, h], 1).unwrap();
        for (a, b) in g.iter().zip([-1.0 / (2.0 * h), 0.0, 1.0 / (2.0 * h)]) {
            assert!((a - b).abs() < 1e-9, "{g:?}");
        }
        let u = [-2.0 * h, -h, 0.0, h, 2.0 * h];
        let g = derivative_weights(&u, 3).unwrap();
        let want = [1.0, -8.0, 0.0, 8.0, -1.0].map(|c| c / (12.0 * h));
        for (a, b) in g.iter().zip(want) {
            assert!((a - b).abs() < 1e-9, "{g:?}");
        }
    }

    #[test]
    fn fewer_than_three_waiting_times_are_refused() {
        let camp = campaign(&[1.0, 2.0], &[10.0, 20.0], |t, tw| (tw / t, 1.0 - tw / t));
        let e = check(&camp, &TwoTimeSettings::default(), 200).unwrap_err();
        assert!(e.to_string().contains("at least 3 waiting times"), "{e}");
    }
}
