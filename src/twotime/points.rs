//! Parametric fluctuation–dissipation points from a campaign.
//!
//! Per grid point, `x = C̄` and `y = k T χ̄` (plain axes), or `x = C̄ / C̄(t,t)` and
//! `y = k T χ̄ / C̄(t,t)` (normalized axes), where bars are means over samples: the
//! normalization is a ratio of means. Standard errors and the x–y covariance come from
//! the jackknife over samples, which for plain axes equals the usual `s/√n`.

use crate::twotime::campaign::Campaign;
use ndarray::{Array1, Array2, ArrayView1, ArrayView2, CowArray, Ix2, s};
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
        let kt = self.kt;
        let m = contiguous(&means);
        let (c, chi) = (&m[..p], &m[p..2 * p]);
        let out = x[..p].iter_mut().zip(&mut y[..p]);
        if self.normalized {
            for ((x, y), ((c, chi), e)) in out.zip(c.iter().zip(chi).zip(&m[2 * p..3 * p])) {
                (*x, *y) = (c / e, kt * chi / e);
            }
        } else {
            // Plain axes divide by 1, which changes no bit.
            for ((x, y), (c, chi)) in out.zip(c.iter().zip(chi)) {
                (*x, *y) = (*c, kt * chi);
            }
        }
    }
}

/// The numbers of a view as one slice: borrowed when they lie in order in memory (the
/// rows of `W · D` and every array of means here), copied otherwise.
fn contiguous<'a>(v: &'a ArrayView1<'_, f64>) -> std::borrow::Cow<'a, [f64]> {
    match v.as_slice() {
        Some(s) => std::borrow::Cow::Borrowed(s),
        None => std::borrow::Cow::Owned(v.to_vec()),
    }
}

/// The raw data as one `n × (blocks·P)` matrix: `[C | χ | C(t,t)]` per sample row.
pub fn data_matrix(campaign: &Campaign, normalized: bool) -> Array2<f64> {
    data_matrix_with_room(campaign, normalized, 0)
}

/// [`data_matrix`] with `extra` more columns (zeros) after the raw ones: the one-matrix
/// shape of the product with moment columns (examples/product_floor times it).
pub fn data_matrix_with_room(campaign: &Campaign, normalized: bool, extra: usize) -> Array2<f64> {
    let d = DataMatrix::of_campaign(campaign, normalized);
    let width = d.ncols() + extra;
    let mut flat = vec![0.0; d.nrows() * width];
    // Rows in parallel (the pages are first touched there too); the room stays zero.
    flat.par_chunks_mut(width.max(1))
        .enumerate()
        .for_each(|(i, row)| d.row_into(i, row));
    Array2::from_shape_vec((d.nrows(), width), flat).expect("n rows of the full width")
}

/// The data matrix `D`, samples × columns: `[C | χ | C(t,t)]` per sample, then any
/// moment columns, held as column blocks side by side. The raw blocks are the campaign's
/// own arrays, borrowed rather than copied, so a fit holds its data once plus the moment
/// columns (the copy of [`data_matrix`] doubled the peak memory of large campaigns).
#[derive(Debug, Clone)]
pub struct DataMatrix<'a> {
    blocks: Vec<CowArray<'a, f64, Ix2>>,
    rows: usize,
    cols: usize,
}

impl<'a> DataMatrix<'a> {
    /// `[C | χ]`, and `C(t,t)` after them on normalized axes, borrowed from the campaign
    /// (copied only where an array is not in row-major order).
    pub fn of_campaign(campaign: &'a Campaign, normalized: bool) -> Self {
        let mut parts = vec![campaign.corr(), campaign.resp()];
        if normalized && let Some(eq) = campaign.corr_eq() {
            parts.push(eq);
        }
        let mut d = DataMatrix {
            blocks: Vec::new(),
            rows: campaign.n_samples(),
            cols: 0,
        };
        for a in parts {
            d.push(a);
        }
        d
    }

    /// One block from a matrix (tests and single-matrix callers).
    pub fn from_array(a: ArrayView2<'a, f64>) -> Self {
        let mut d = DataMatrix {
            blocks: Vec::new(),
            rows: a.nrows(),
            cols: 0,
        };
        d.push(a);
        d
    }

    /// Appends a block of columns on the right (copied into row-major order if it is not,
    /// for the matrix product).
    ///
    /// # Panics
    /// When the block's rows are not the matrix's (a caller's mistake).
    pub fn push(&mut self, block: impl Into<CowArray<'a, f64, Ix2>>) {
        let mut block = block.into();
        assert_eq!(block.nrows(), self.rows, "a block has one row per sample");
        if !block.is_standard_layout() {
            block = CowArray::from(block.as_standard_layout().into_owned());
        }
        self.cols += block.ncols();
        self.blocks.push(block);
    }

    /// Samples.
    pub fn nrows(&self) -> usize {
        self.rows
    }

    /// Columns of all blocks.
    pub fn ncols(&self) -> usize {
        self.cols
    }

    /// Block `k` (0: C, 1: χ, 2: C(t,t) on normalized axes).
    pub fn block(&self, k: usize) -> ArrayView2<'_, f64> {
        self.blocks[k].view()
    }

    /// Copies the first `out.len()` columns of row `i` into `out`.
    pub fn row_into(&self, i: usize, out: &mut [f64]) {
        let mut rest = out;
        for b in &self.blocks {
            if rest.is_empty() {
                break;
            }
            let row = b.row(i);
            let k = row.len().min(rest.len());
            let (head, tail) = rest.split_at_mut(k);
            for (o, v) in head.iter_mut().zip(row) {
                *o = *v;
            }
            rest = tail;
        }
    }

    /// The mean of every column, summed row by row (empty without rows).
    pub fn means(&self) -> Array1<f64> {
        if self.rows == 0 {
            return Array1::zeros(0);
        }
        let mut out = Array1::zeros(self.cols);
        let mut at = 0;
        for b in &self.blocks {
            let mut sum = out.slice_mut(s![at..at + b.ncols()]);
            for row in b.rows() {
                sum += &row;
            }
            at += b.ncols();
        }
        out / self.rows as f64
    }

    /// `W · D` into `out` (reshaped when its shape differs), block by block into its
    /// columns, so that chunk after chunk reuses one allocation.
    pub fn product_into(&self, w: &Array2<f64>, out: &mut Array2<f64>) {
        if out.dim() != (w.nrows(), self.cols) {
            *out = Array2::zeros((w.nrows(), self.cols));
        }
        let mut at = 0;
        for b in &self.blocks {
            crate::resample::product_columns(w, &b.view(), out, at);
            at += b.ncols();
        }
    }

    /// `W · D`.
    pub fn product(&self, w: &Array2<f64>) -> Array2<f64> {
        let mut out = Array2::zeros((0, 0));
        self.product_into(w, &mut out);
        out
    }
}

/// Parametric points with their sample errors (the jackknife over samples).
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
}

/// The column means and the parametric points of the campaign without one sample, made
/// from that sample's row of the data matrix, `(n·m̄ − v)/(n − 1)` per column: what every
/// jackknife reads, one sample at a time, so no samples × points copy is kept.
#[derive(Debug, Clone)]
pub struct LeaveOut {
    full: Array1<f64>,
    row: Vec<f64>,
    /// The column means without the sample (all columns, moment columns included).
    pub means: Array1<f64>,
    /// Its x per grid point.
    pub x: Vec<f64>,
    /// Its y per grid point.
    pub y: Vec<f64>,
}

impl LeaveOut {
    /// For the means `full` of all samples (one per column of the data matrix).
    pub fn new(full: Array1<f64>, tf: Transform) -> Self {
        LeaveOut {
            row: vec![0.0; full.len()],
            means: full.clone(),
            full,
            x: vec![0.0; tf.points],
            y: vec![0.0; tf.points],
        }
    }

    /// Leaves out sample `i` of `data` (its `n` rows).
    pub fn at(&mut self, data: &DataMatrix<'_>, tf: Transform, i: usize) {
        debug_assert_eq!(self.full.len(), data.ncols(), "the means of this matrix");
        let nf = data.nrows() as f64;
        data.row_into(i, &mut self.row);
        for ((l, m), v) in self.means.iter_mut().zip(&self.full).zip(&self.row) {
            *l = (m * nf - v) / (nf - 1.0);
        }
        tf.apply(self.means.view(), &mut self.x, &mut self.y);
    }
}

impl Parametric {
    /// Computes the points from the raw columns of the data matrix (before the moment
    /// columns are added; columns after the raw ones would be carried along unused), and
    /// their jackknife errors from the leave-one-out points, made a block of rows at a
    /// time.
    pub fn new(data: &DataMatrix<'_>, tf: Transform) -> Self {
        let n = data.nrows();
        let p = tf.points;
        let means = data.means();
        let (mut x, mut y) = (vec![0.0; p], vec![0.0; p]);
        tf.apply(means.view(), &mut x, &mut y);
        let nf = n as f64;
        let rows = n.min(64);
        let (mut xj, mut yj) = (vec![0.0; rows * p], vec![0.0; rows * p]);
        // Every leave-one-out row in order, a block of rows at a time, rows in parallel.
        let mut each_row = |f: &mut dyn FnMut(&[f64], &[f64])| {
            for first in (0..n).step_by(rows.max(1)) {
                let here = rows.min(n - first) * p;
                xj[..here]
                    .par_chunks_mut(p.max(1))
                    .zip(yj[..here].par_chunks_mut(p.max(1)))
                    .enumerate()
                    .for_each_init(
                        || LeaveOut::new(means.clone(), tf),
                        |lo, (i, (xr, yr))| {
                            lo.at(data, tf, first + i);
                            xr.copy_from_slice(&lo.x);
                            yr.copy_from_slice(&lo.y);
                        },
                    );
                for (xr, yr) in xj[..here].chunks(p.max(1)).zip(yj[..here].chunks(p.max(1))) {
                    f(xr, yr);
                }
            }
        };
        // Sums over the leave-one-out points, row by row: their means, then the spreads.
        let (mut mx, mut my) = (Array1::<f64>::zeros(p), Array1::<f64>::zeros(p));
        each_row(&mut |xr, yr| {
            for j in 0..p {
                mx[j] += xr[j];
                my[j] += yr[j];
            }
        });
        let (mx, my) = (mx / n.max(1) as f64, my / n.max(1) as f64);
        let (mut sxx, mut syy, mut sxy) = (vec![0.0; p], vec![0.0; p], vec![0.0; p]);
        each_row(&mut |xr, yr| {
            for j in 0..p {
                let (dx, dy) = (xr[j] - mx[j], yr[j] - my[j]);
                sxx[j] += dx * dx;
                syy[j] += dy * dy;
                sxy[j] += dx * dy;
            }
        });
        let scale = (nf - 1.0) / nf;
        Parametric {
            x,
            y,
            x_se: sxx.iter().map(|v| (scale * v).sqrt()).collect(),
            y_se: syy.iter().map(|v| (scale * v).sqrt()).collect(),
            xy_cov: sxy.iter().map(|v| scale * v).collect(),
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
    pub fn new(data: &DataMatrix<'_>, tf: Transform, alpha: f64, beta: f64) -> Self {
        let p = tf.points;
        let n = data.nrows().max(1) as f64;
        let (mut a, mut e) = (vec![0.0; p], vec![0.0; p]);
        let mut row = vec![0.0; tf.blocks() * p];
        for i in 0..data.nrows() {
            data.row_into(i, &mut row);
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
        Self::moment_columns(self.points, self.normalized)
    }

    /// The moment columns that `points` points need, before a spec is made.
    pub fn moment_columns(points: usize, normalized: bool) -> usize {
        points * if normalized { 3 } else { 1 }
    }

    /// The moment columns of every row of the raw `data`
    /// ([`PointVariance::extra_columns`] of them), rows in parallel.
    pub fn moments(&self, data: &DataMatrix<'_>) -> Array2<f64> {
        let (p, cols) = (self.points, self.extra_columns());
        let mut flat = vec![0.0; data.nrows() * cols];
        flat.par_chunks_mut(cols.max(1)).enumerate().for_each_init(
            || vec![0.0; self.offset],
            |raw, (i, moments)| {
                data.row_into(i, raw);
                for j in 0..p {
                    let e = if self.normalized { raw[2 * p + j] } else { 1.0 };
                    let a = self.alpha * raw[j] + self.beta * raw[p + j] - self.centre[j] * e;
                    moments[j] = a * a;
                    if self.normalized {
                        moments[p + j] = a * e;
                        moments[2 * p + j] = e * e;
                    }
                }
            },
        );
        Array2::from_shape_vec((data.nrows(), cols), flat).expect("one row per sample")
    }

    /// The variance of every point's fitted quantity from the moments `means` (a row of
    /// `W · extend(D)`, weights summing to 1) of `drawn` samples.
    pub fn apply(&self, means: ArrayView1<'_, f64>, drawn: usize, var: &mut [f64]) {
        let p = self.points;
        let dof = (drawn as f64 - 1.0).max(1.0);
        let (alpha, beta) = (self.alpha, self.beta);
        let m = contiguous(&means);
        let (c, chi, maa) = (&m[..p], &m[p..2 * p], &m[self.offset..self.offset + p]);
        let raw = c.iter().zip(chi).zip(maa).zip(&self.centre);
        let out = var.iter_mut().take(p);
        if self.normalized {
            let e = &m[2 * p..3 * p];
            let (mae, mee) = (&m[self.offset + p..], &m[self.offset + 2 * p..]);
            for ((v, (((c, chi), maa), centre)), ((e, mae), mee)) in
                out.zip(raw).zip(e.iter().zip(mae).zip(mee))
            {
                let d = (alpha * c + beta * chi) / e - centre;
                let s = maa - 2.0 * d * mae + d * d * mee;
                *v = s.max(0.0) / (e * e * dof);
            }
        } else {
            // Plain axes divide by 1 (and by 1 · 1 · dof), which changes no bit.
            for (v, (((c, chi), maa), centre)) in out.zip(raw) {
                let d = (alpha * c + beta * chi) - centre;
                let s = maa - d * d;
                *v = s.max(0.0) / dof;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn standard_errors_are_the_jackknife_of_the_leave_one_out_points() {
        // 150 samples (more than one block of 64 rows), 7 points, normalized axes.
        let (n, p) = (150, 7);
        let data = Array2::from_shape_fn((n, 3 * p), |(i, j)| {
            let u = ((i * 31 + j * 17) % 97) as f64 / 97.0;
            if j >= 2 * p { 1.0 + 0.1 * u } else { u - 0.3 }
        });
        let tf = Transform {
            kt: 0.7,
            normalized: true,
            points: p,
        };
        // The jackknife written out: every leave-one-out point kept, then its spread.
        let d = DataMatrix::from_array(data.view());
        let pm = Parametric::new(&d, tf);
        let mut lo = LeaveOut::new(d.means(), tf);
        let (mut xs, mut ys) = (Vec::new(), Vec::new());
        for i in 0..n {
            lo.at(&d, tf, i);
            xs.push(lo.x.clone());
            ys.push(lo.y.clone());
        }
        let nf = n as f64;
        for j in 0..p {
            let mean = |v: &[Vec<f64>]| v.iter().map(|r| r[j]).sum::<f64>() / nf;
            let (mx, my) = (mean(&xs), mean(&ys));
            let cov = |a: &[Vec<f64>], ma: f64, b: &[Vec<f64>], mb: f64| {
                (nf - 1.0) / nf
                    * a.iter()
                        .zip(b)
                        .map(|(u, v)| (u[j] - ma) * (v[j] - mb))
                        .sum::<f64>()
            };
            let close = |u: f64, v: f64| (u - v).abs() <= 1e-12 * v.abs() && v != 0.0;
            assert!(close(pm.x_se[j], cov(&xs, mx, &xs, mx).sqrt()));
            assert!(close(pm.y_se[j], cov(&ys, my, &ys, my).sqrt()));
            assert!(close(pm.xy_cov[j], cov(&xs, mx, &ys, my)));
        }
        // Plain axes: the jackknife standard error of a mean is s/√n (common practice).
        let tf = Transform {
            normalized: false,
            ..tf
        };
        let plain = Parametric::new(&DataMatrix::from_array(data.view()), tf);
        let col: Vec<f64> = (0..n).map(|i| data[[i, 0]]).collect();
        let m = col.iter().sum::<f64>() / n as f64;
        let s2 = col.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n as f64 - 1.0);
        assert!((plain.x_se[0] - (s2 / n as f64).sqrt()).abs() < 1e-12);
    }

    #[test]
    fn blocks_give_the_one_matrix_bit_for_bit_for_any_chunk_of_replicates() {
        // 37 samples, blocks of 5, 5 and 3 columns (one of them not row-major) against the
        // same columns as one matrix.
        let (n, widths) = (37, [5, 5, 3]);
        let cols: usize = widths.iter().sum();
        let whole = Array2::from_shape_fn((n, cols), |(i, j)| {
            (((i * 7919 + j * 104_729) % 1009) as f64 / 1009.0 - 0.4) * 3.0
        });
        let mut d = DataMatrix::from_array(whole.slice(s![.., ..5]));
        d.push(whole.slice(s![.., 5..10]).to_owned());
        d.push(whole.slice(s![.., 10..]).t().to_owned().reversed_axes());
        assert_eq!((d.nrows(), d.ncols()), (n, cols));
        let same = |a: &[f64], b: &[f64]| {
            a.len() == b.len() && a.iter().zip(b).all(|(u, v)| u.to_bits() == v.to_bits())
        };
        let mut row = vec![0.0; cols];
        d.row_into(11, &mut row);
        assert!(same(&row, whole.row(11).as_slice().unwrap()));
        let mut head = vec![0.0; 7];
        d.row_into(3, &mut head);
        assert!(same(&head, &whole.row(3).as_slice().unwrap()[..7]));
        let means = whole.mean_axis(ndarray::Axis(0)).unwrap();
        assert!(same(
            d.means().as_slice().unwrap(),
            means.as_slice().unwrap()
        ));
        // 40 replicates at once, and replicates 13..21 on their own.
        let mut counts = vec![0u32; n];
        let all = crate::resample::weight_rows(9, 0, 40, &mut counts);
        let part = crate::resample::weight_rows(9, 13, 8, &mut counts);
        let one = crate::resample::product(&all, &whole);
        let (by_blocks, by_part) = (d.product(&all), d.product(&part));
        assert!(same(by_blocks.as_slice().unwrap(), one.as_slice().unwrap()));
        let rows = one.slice(s![13..21, ..]).to_owned();
        assert!(same(by_part.as_slice().unwrap(), rows.as_slice().unwrap()));
    }
}
