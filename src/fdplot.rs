//! Parametric fluctuation–dissipation points from a campaign.
//!
//! Per grid point, `x = C̄` and `y = k T χ̄` (plain axes), or `x = C̄ / C̄(t,t)` and
//! `y = k T χ̄ / C̄(t,t)` (normalized axes), where bars are means over samples: the
//! normalization is a ratio of means. Standard errors and the x–y covariance come from
//! the jackknife over samples, which for plain axes equals the usual `s/√n`.

use crate::campaign::Campaign;
use ndarray::{Array2, ArrayView1, Axis};

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
    let mut parts = vec![campaign.corr().view(), campaign.resp().view()];
    if normalized && let Some(eq) = campaign.corr_eq() {
        parts.push(eq.view());
    }
    ndarray::concatenate(Axis(1), &parts).expect("blocks share the sample axis")
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
    /// Computes the points from the data matrix of [`data_matrix`].
    pub fn new(data: &Array2<f64>, tf: Transform) -> Self {
        let n = data.nrows();
        let p = tf.points;
        let means = data.mean_axis(Axis(0)).expect("at least one sample");
        let (mut x, mut y) = (vec![0.0; p], vec![0.0; p]);
        tf.apply(means.view(), &mut x, &mut y);
        let mut x_jack = Array2::zeros((n, p));
        let mut y_jack = Array2::zeros((n, p));
        let nf = n as f64;
        let mut loo = means.clone();
        for i in 0..n {
            loo.assign(&((&means * nf - data.row(i)) / (nf - 1.0)));
            let (xr, yr) = (x_jack.row_mut(i), y_jack.row_mut(i));
            tf.apply(
                loo.view(),
                xr.into_slice().expect("row is contiguous"),
                yr.into_slice().expect("row is contiguous"),
            );
        }
        let scale = (nf - 1.0) / nf;
        let (mut x_se, mut y_se, mut xy_cov) = (vec![0.0; p], vec![0.0; p], vec![0.0; p]);
        for j in 0..p {
            let (cx, cy) = (x_jack.column(j), y_jack.column(j));
            let (mx, my) = (cx.mean().unwrap_or(0.0), cy.mean().unwrap_or(0.0));
            let (mut sxx, mut syy, mut sxy) = (0.0, 0.0, 0.0);
            for i in 0..n {
                let (dx, dy) = (cx[i] - mx, cy[i] - my);
                sxx += dx * dx;
                syy += dy * dy;
                sxy += dx * dy;
            }
            x_se[j] = (scale * sxx).sqrt();
            y_se[j] = (scale * syy).sqrt();
            xy_cov[j] = scale * sxy;
        }
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
