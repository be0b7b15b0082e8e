//! Parametric fluctuation–dissipation points from a campaign.
//!
//! Per grid point, `x = C̄` and `y = k T χ̄` (plain axes), or `x = C̄ / C̄(t,t)` and
//! `y = k T χ̄ / C̄(t,t)` (normalized axes), where bars are means over samples: the
//! normalization is a ratio of means. Standard errors and the x–y covariance come from
//! the jackknife over samples, which for plain axes equals the usual `s/√n`.

use crate::twotime::campaign::Campaign;
use ndarray::{Array1, Array2, ArrayView1, ArrayView2, s};
use rayon::prelude::*;

/// Which quantities go on the axes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Axes {
    /// Normalized when the input has `corr_eq`, plain otherwise.
    Auto,
    /// `x = C`, `y = k T χ`.
    Plain,
    /// `x = C / C(t,t)`, `y = k T χ / C(t,t)` (needs `corr_eq`).
    Normalized,
}

/// Maps per-point means of the raw columns to parametric coordinates.
#[derive(Debug, Clone, Copy)]
pub struct Transform {
    /// `k T`, the factor on χ.
    pub kt: f64,
    /// Divide both coordinates by the mean `C(t,t)`.
    pub normalized: bool,
    /// Number of grid points `P`.
    pub points: usize,
}

impl Transform {
    /// Number of raw columns per point block (2 plain, 3 normalized).
    pub fn blocks(&self) -> usize {
        if self.normalized { 3 } else { 2 }
    }

    /// Writes `x`, `y` for every point from the means `[C̄ | χ̄ | C̄(t,t)]`.
    pub fn apply(&self, means: ArrayView1<'_, f64>, x: &mut [f64], y: &mut [f64]) {
        let p = self.points;
        for j in 0..p {
            let norm = if self.normalized {
                means[2 * p + j]
            } else {
                1.0
            };
            x[j] = means[j] / norm;
            y[j] = self.kt * means[p + j] / norm;
        }
    }
}

/// The raw data as one `n × (blocks·P)` matrix: `[C | χ | C(t,t)]` per sample row.
pub fn data_matrix(campaign: &Campaign, normalized: bool) -> Array2<f64> {
    data_matrix_with_room(campaign, normalized, 0)
}

/// [`data_matrix`] with `extra` more columns (zeros) after the raw ones, for the moment
/// columns of [`PointVariance::fill_moments`]: one allocation, no copy.
pub fn data_matrix_with_room(campaign: &Campaign, normalized: bool, extra: usize) -> Array2<f64> {
    let mut parts = vec![campaign.corr(), campaign.resp()];
    if normalized && let Some(eq) = campaign.corr_eq() {
        parts.push(eq);
    }
    let (n, p) = (campaign.n_samples(), campaign.n_points());
    let width = parts.len() * p + extra;
    let mut flat = vec![0.0; n * width];
    // Rows in parallel (the pages are first touched there too).
    flat.par_chunks_mut(width.max(1))
        .enumerate()
        .for_each(|(i, row)| {
            for (b, part) in parts.iter().enumerate() {
                for (o, v) in row[b * p..(b + 1) * p].iter_mut().zip(part.row(i)) {
                    *o = *v;
                }
            }
        });
    Array2::from_shape_vec((n, width), flat).expect("n rows of the full width")
}

/// The mean of every column, summed row by row.
fn column_means(data: ArrayView2<'_, f64>) -> Array1<f64> {
    let mut sum = Array1::zeros(data.ncols());
    for row in data.rows() {
        sum += &row;
    }
    sum / data.nrows().max(1) as f64
}

/// Parametric points with their sample errors, and the leave-one-sample-out points.
#[derive(Debug, Clone)]
pub struct Parametric {
    /// x per grid point.
    pub x: Vec<f64>,
    /// y per grid point.
    pub y: Vec<f64>,
    /// Jackknife standard error of x.
    pub x_se: Vec<f64>,
    /// Jackknife standard error of y.
    pub y_se: Vec<f64>,
    /// Jackknife covariance of x and y.
    pub xy_cov: Vec<f64>,
    /// Leave-one-out x, samples × points.
    pub x_jack: Array2<f64>,
    /// Leave-one-out y, samples × points.
    pub y_jack: Array2<f64>,
}

impl Parametric {
    /// Computes the points from the raw columns of the data matrix of [`data_matrix`]
    /// (columns after them are not read).
    pub fn new(data: ArrayView2<'_, f64>, tf: Transform) -> Self {
        let n = data.nrows();
        let p = tf.points;
        let data = data.slice(s![.., ..tf.blocks() * p]);
        let means = column_means(data);
        let (mut x, mut y) = (vec![0.0; p], vec![0.0; p]);
        tf.apply(means.view(), &mut x, &mut y);
        let nf = n as f64;
        let (mut xj, mut yj) = (vec![0.0; n * p], vec![0.0; n * p]);
        xj.par_chunks_mut(p.max(1))
            .zip(yj.par_chunks_mut(p.max(1)))
            .enumerate()
            .for_each_init(
                || means.clone(),
                |loo, (i, (xr, yr))| {
                    for ((l, m), v) in loo.iter_mut().zip(&means).zip(data.row(i)) {
                        *l = (m * nf - v) / (nf - 1.0);
                    }
                    tf.apply(loo.view(), xr, yr);
                },
            );
        let x_jack = Array2::from_shape_vec((n, p), xj).expect("n rows of P");
        let y_jack = Array2::from_shape_vec((n, p), yj).expect("n rows of P");
        // Sums over the leave-one-out points, row by row (the arrays are row-major).
        let scale = (nf - 1.0) / nf;
        let (mx, my) = (column_means(x_jack.view()), column_means(y_jack.view()));
        let (mut sxx, mut syy, mut sxy) = (vec![0.0; p], vec![0.0; p], vec![0.0; p]);
        for (xr, yr) in x_jack.rows().into_iter().zip(y_jack.rows()) {
            for j in 0..p {
                let (dx, dy) = (xr[j] - mx[j], yr[j] - my[j]);
                sxx[j] += dx * dx;
                syy[j] += dy * dy;
                sxy[j] += dx * dy;
            }
        }
        let x_se = sxx.iter().map(|v| (scale * v).sqrt()).collect();
        let y_se = syy.iter().map(|v| (scale * v).sqrt()).collect();
        let xy_cov = sxy.iter().map(|v| scale * v).collect();
        Parametric {
            x,
            y,
            x_se,
            y_se,
            xy_cov,
            x_jack,
            y_jack,
        }
    }
}

/// The sampling variance of each point's fitted quantity `r = (α C + β χ) / C(t,t)` (the
/// division only on normalized axes), recomputed from the moments of whichever samples
/// make up a fit: all of them, a bootstrap resample, or a leave-one-out set. Inverse-
/// variance weights are then re-estimated inside every resample, as the estimator is
/// (weights fixed at their full-data values make the resampled statistics too narrow).
///
/// The moments are extra columns of the data matrix, so one product `W · D` gives the
/// means and the second moments together. To avoid cancellation, `a = α C + β χ` is
/// centred on the full-data ratio: `a' = a − r̂ C(t,t)` (or `a − ā` on plain axes); then
/// with `δ = r − r̂` the delta-method variance of the ratio of means is
/// `(M[a'²] − 2δ M[a'e] + δ² M[e²]) / (M[e]² (m − 1))` for `m` drawn samples, which on plain
/// axes (`e = 1`) is the usual `s²/m`.
///
/// Source: the delta method for a ratio of means (Cochran, *Sampling Techniques*, 3rd ed.
/// (1977), §6.3); resampling the whole estimator, weights included: Davison & Hinkley
/// (1997), §6.2 (common practice).
#[derive(Debug, Clone)]
pub struct PointVariance {
    /// `α`, the factor on C in the fitted quantity.
    pub alpha: f64,
    /// `β`, the factor on χ (`k T`).
    pub beta: f64,
    /// The full-data ratio `r̂` per point (the centre).
    centre: Vec<f64>,
    /// Raw columns before the moment columns (`blocks · P`).
    offset: usize,
    normalized: bool,
    points: usize,
}

impl PointVariance {
    /// The variance spec for `r = (α C + β χ)/e` with the centres taken from the raw
    /// columns of `data`.
    pub fn new(data: ArrayView2<'_, f64>, tf: Transform, alpha: f64, beta: f64) -> Self {
        let p = tf.points;
        let n = data.nrows().max(1) as f64;
        let (mut a, mut e) = (vec![0.0; p], vec![0.0; p]);
        for row in data.rows() {
            for j in 0..p {
                a[j] += alpha * row[j] + beta * row[p + j];
                e[j] += if tf.normalized { row[2 * p + j] } else { 1.0 };
            }
        }
        let centre = a.iter().zip(&e).map(|(a, e)| (a / n) / (e / n)).collect();
        PointVariance {
            alpha,
            beta,
            centre,
            offset: tf.blocks() * p,
            normalized: tf.normalized,
            points: p,
        }
    }

    /// Number of moment columns appended (per point: 1 plain, 3 normalized).
    pub fn extra_columns(&self) -> usize {
        self.points * if self.normalized { 3 } else { 1 }
    }

    /// Writes the moment columns of every row of `data` (made by
    /// [`data_matrix_with_room`] with [`PointVariance::extra_columns`] of room), rows in
    /// parallel.
    pub fn fill_moments(&self, data: &mut Array2<f64>) {
        let (p, off, cols) = (self.points, self.offset, data.ncols());
        let Some(flat) = data.as_slice_mut() else {
            return;
        };
        flat.par_chunks_mut(cols.max(1)).for_each(|row| {
            let (raw, moments) = row.split_at_mut(off);
            for j in 0..p {
                let e = if self.normalized { raw[2 * p + j] } else { 1.0 };
                let a = self.alpha * raw[j] + self.beta * raw[p + j] - self.centre[j] * e;
                moments[j] = a * a;
                if self.normalized {
                    moments[p + j] = a * e;
                    moments[2 * p + j] = e * e;
                }
            }
        });
    }

    /// The variance of every point's fitted quantity from the moments `means` (a row of
    /// `W · extend(D)`, weights summing to 1) of `drawn` samples.
    pub fn apply(&self, means: ArrayView1<'_, f64>, drawn: usize, var: &mut [f64]) {
        let p = self.points;
        let dof = (drawn as f64 - 1.0).max(1.0);
        for (j, v) in var.iter_mut().enumerate().take(p) {
            let e = if self.normalized {
                means[2 * p + j]
            } else {
                1.0
            };
            let r = (self.alpha * means[j] + self.beta * means[p + j]) / e;
            let d = r - self.centre[j];
            let maa = means[self.offset + j];
            let s = if self.normalized {
                let mae = means[self.offset + p + j];
                let mee = means[self.offset + 2 * p + j];
                maa - 2.0 * d * mae + d * d * mee
            } else {
                maa - d * d
            };
            *v = s.max(0.0) / (e * e * dof);
        }
    }
}
