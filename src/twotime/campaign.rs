//! The data model: independent samples × a common grid of (tw, t) points.
//!
//! A [`Campaign`] holds, for `n` samples and `P` grid points, the two-time correlation
//! `C(t,tw)`, the integrated response `chi(t,tw)` and optionally the equal-time value
//! `C(t,t)`. Points of one sample are correlated; samples are independent, so every
//! resampling in fdtemp draws whole samples (rows).

use crate::error::{Error, Result};
use ndarray::Array2;

/// One point of the common grid: a waiting time and a later time.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct GridPoint {
    /// Waiting time: the age of the system when the measurement starts.
    pub tw: f64,
    /// Later time, `t > tw`.
    pub t: f64,
}

/// A validated campaign: every sample has every grid point, all values finite.
#[derive(Debug, Clone)]
pub struct Campaign {
    sample_ids: Vec<String>,
    points: Vec<GridPoint>,
    corr: Array2<f64>,
    resp: Array2<f64>,
    corr_eq: Option<Array2<f64>>,
}

impl Campaign {
    /// Builds a campaign from per-sample rows (`n × P` arrays) on a grid of `P` points.
    ///
    /// Points are re-ordered by `(tw, t)`; the arrays' columns follow.
    ///
    /// # Errors
    /// [`Error::Analysis`] when there are fewer than 2 samples, no points, arrays whose
    /// shapes disagree, a non-finite value, a repeated grid point or a point with `t <= tw`.
    pub fn new(
        sample_ids: Vec<String>,
        points: Vec<GridPoint>,
        corr: Array2<f64>,
        resp: Array2<f64>,
        corr_eq: Option<Array2<f64>>,
    ) -> Result<Self> {
        let n = sample_ids.len();
        let p = points.len();
        if n < 2 {
            return Err(Error::Analysis(format!(
                "the campaign has {n} sample(s); at least 2 independent samples are needed \
                 to estimate errors"
            )));
        }
        if p == 0 {
            return Err(Error::Analysis("the campaign has no points".into()));
        }
        let shape_ok = |a: &Array2<f64>| a.dim() == (n, p);
        if !shape_ok(&corr) || !shape_ok(&resp) || corr_eq.as_ref().is_some_and(|a| !shape_ok(a)) {
            return Err(Error::Analysis(format!(
                "data arrays must be {n} samples × {p} points"
            )));
        }
        for (name, a) in [
            ("corr", Some(&corr)),
            ("resp", Some(&resp)),
            ("corr_eq", corr_eq.as_ref()),
        ] {
            // One quick pass; the slot is looked for only when there is one.
            if let Some(a) = a
                && !a.iter().fold(true, |ok, v| ok & v.is_finite())
                && let Some(((i, j), v)) = a.indexed_iter().find(|(_, v)| !v.is_finite())
            {
                return Err(Error::Analysis(format!(
                    "{name} of sample '{}' at tw = {}, t = {} is {v}, expected a finite number",
                    sample_ids[i], points[j].tw, points[j].t
                )));
            }
        }
        if let Some(pt) = points.iter().find(|g| !(g.t > g.tw)) {
            return Err(Error::Analysis(format!(
                "point tw = {}, t = {}: expected t > tw",
                pt.tw, pt.t
            )));
        }
        let mut order: Vec<usize> = (0..p).collect();
        order.sort_by(|&a, &b| {
            (points[a].tw, points[a].t)
                .partial_cmp(&(points[b].tw, points[b].t))
                .unwrap_or(std::cmp::Ordering::Equal)
        });
        if let Some(w) = order.windows(2).find(|w| points[w[0]] == points[w[1]]) {
            let pt = points[w[0]];
            return Err(Error::Analysis(format!(
                "grid point tw = {}, t = {} appears twice",
                pt.tw, pt.t
            )));
        }
        // Samples in a canonical order (by identifier), so that the order of rows in a
        // file changes nothing: resample index i always means the same sample.
        let mut rows: Vec<usize> = (0..n).collect();
        rows.sort_by(|&a, &b| sample_ids[a].cmp(&sample_ids[b]));
        // Most files are in that order already: then the arrays are kept as they are.
        let in_place = |v: &[usize]| v.iter().enumerate().all(|(i, &j)| i == j);
        let keep = in_place(&rows) && in_place(&order);
        let reorder = |a: Array2<f64>| {
            if keep {
                a
            } else {
                Array2::from_shape_fn((n, p), |(i, j)| a[[rows[i], order[j]]])
            }
        };
        Ok(Campaign {
            points: order.iter().map(|&j| points[j]).collect(),
            corr: reorder(corr),
            resp: reorder(resp),
            corr_eq: corr_eq.map(reorder),
            sample_ids: rows.iter().map(|&i| sample_ids[i].clone()).collect(),
        })
    }

    /// The campaign of the samples whose identifier `keep` accepts.
    ///
    /// # Errors
    /// As [`Campaign::new`] (fewer than 2 samples kept).
    pub fn keep_samples(&self, keep: impl Fn(&str) -> bool) -> Result<Campaign> {
        let rows: Vec<usize> = (0..self.n_samples())
            .filter(|&i| keep(&self.sample_ids[i]))
            .collect();
        let pick = |a: &Array2<f64>| a.select(ndarray::Axis(0), &rows);
        Campaign::new(
            rows.iter().map(|&i| self.sample_ids[i].clone()).collect(),
            self.points.clone(),
            pick(&self.corr),
            pick(&self.resp),
            self.corr_eq.as_ref().map(pick),
        )
    }

    /// Number of independent samples `n`.
    pub fn n_samples(&self) -> usize {
        self.sample_ids.len()
    }

    /// Number of grid points `P`.
    pub fn n_points(&self) -> usize {
        self.points.len()
    }

    /// Sample identifiers, sorted (the canonical order of the rows of the data arrays).
    pub fn sample_ids(&self) -> &[String] {
        &self.sample_ids
    }

    /// Grid points, sorted by `(tw, t)`.
    pub fn points(&self) -> &[GridPoint] {
        &self.points
    }

    /// The distinct waiting times, ascending.
    pub fn waiting_times(&self) -> Vec<f64> {
        let mut tws: Vec<f64> = self.points.iter().map(|g| g.tw).collect();
        tws.dedup();
        tws
    }

    /// `C(t,tw)`, samples × points.
    pub fn corr(&self) -> &Array2<f64> {
        &self.corr
    }

    /// `chi(t,tw)`, samples × points.
    pub fn resp(&self) -> &Array2<f64> {
        &self.resp
    }

    /// `C(t,t)`, samples × points, when the input had it.
    pub fn corr_eq(&self) -> Option<&Array2<f64>> {
        self.corr_eq.as_ref()
    }
}
