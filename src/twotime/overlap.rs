//! The static–dynamic comparison: an equilibrium overlap distribution P(q), given as a
//! histogram (`q, p`) or as samples (`q`), turned into x(q) = ∫₀^q P(q') dq' and compared
//! with the dynamic X(C) of the smooth model at q = C (Franz, Mézard, Parisi & Peliti,
//! Phys. Rev. Lett. 81, 1758 (1998)). Negative overlaps (a zero-field P(q), symmetric) are
//! folded onto |q|.

use super::result::{ShapeFit, StaticComparison};
use crate::common::Estimate;
use crate::error::{Error, Result};
use crate::resample::{IntervalMethod, interval};
use std::path::Path;

/// An overlap distribution as its cumulative x(q).
#[derive(Debug, Clone, PartialEq)]
pub struct Overlap {
    /// `(q, x(q))` at increasing q, x from 0 to 1, linear in between.
    cdf: Vec<(f64, f64)>,
    /// Negative overlaps were folded onto |q|.
    pub folded: bool,
    /// A histogram (`true`) or samples.
    pub histogram: bool,
}

impl Overlap {
    /// From samples of q: the empirical x(q) = #{|q_i| ≤ q}/n.
    pub fn from_samples(q: &[f64]) -> Option<Overlap> {
        let folded = q.iter().any(|v| *v < 0.0);
        let mut v: Vec<f64> = q.iter().map(|v| v.abs()).collect();
        v.sort_by(f64::total_cmp);
        if v.is_empty() {
            return None;
        }
        let n = v.len() as f64;
        let mut cdf = Vec::with_capacity(2 * v.len());
        for (i, &q) in v.iter().enumerate() {
            // A step at each sample: just below it the fraction before, at it the one after.
            cdf.push((q, i as f64 / n));
            cdf.push((q, (i + 1) as f64 / n));
        }
        Some(Overlap {
            cdf,
            folded,
            histogram: false,
        })
    }

    /// From a histogram: densities or weights `p` at bin centres `q` (bin edges midway
    /// between centres, the outer edges half a spacing out), normalized to 1.
    pub fn from_histogram(q: &[f64], p: &[f64]) -> Option<Overlap> {
        let folded = q.iter().any(|v| *v < 0.0);
        let mut pairs: Vec<(f64, f64)> = q.iter().map(|v| v.abs()).zip(p.iter().copied()).collect();
        pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
        // Folding puts ±q in one bin.
        let mut merged: Vec<(f64, f64)> = Vec::new();
        for (q, p) in pairs {
            match merged.last_mut() {
                Some(last) if (last.0 - q).abs() <= 1e-12 * q.abs().max(1.0) => last.1 += p,
                _ => merged.push((q, p)),
            }
        }
        let m = merged.len();
        if m < 2 {
            return None;
        }
        let edge = |k: usize| -> f64 {
            match k {
                0 => merged[0].0 - 0.5 * (merged[1].0 - merged[0].0),
                k if k == m => merged[m - 1].0 + 0.5 * (merged[m - 1].0 - merged[m - 2].0),
                k => 0.5 * (merged[k - 1].0 + merged[k].0),
            }
        };
        let mass: Vec<f64> = (0..m)
            .map(|k| merged[k].1 * (edge(k + 1) - edge(k)))
            .collect();
        let total: f64 = mass.iter().sum();
        if !(total > 0.0) {
            return None;
        }
        let mut cdf = vec![(edge(0).max(0.0), 0.0)];
        let mut acc = 0.0;
        for (k, w) in mass.iter().enumerate() {
            acc += w / total;
            cdf.push((edge(k + 1), acc));
        }
        Some(Overlap {
            cdf,
            folded,
            histogram: true,
        })
    }

    /// x(q), 0 below the smallest overlap and 1 above the largest.
    pub fn x_of_q(&self, q: f64) -> f64 {
        let c = &self.cdf;
        if q < c[0].0 {
            return 0.0;
        }
        // The last point at or below q.
        let k = c.partition_point(|p| p.0 <= q);
        if k >= c.len() {
            return 1.0;
        }
        let (a, b) = (c[k - 1], c[k]);
        if b.0 > a.0 {
            a.1 + (b.1 - a.1) * (q - a.0) / (b.0 - a.0)
        } else {
            a.1
        }
    }
}

/// Reads an overlap distribution: a CSV with a header naming `q` and `p` (a histogram) or
/// `q` alone (samples).
///
/// # Errors
/// [`Error::Input`] with the line and column of a field that is not a finite number (or a
/// negative weight), a header without `q`, or fewer than 2 rows.
pub fn read_overlap(path: &Path) -> Result<Overlap> {
    use crate::input::{Header, csv_error, csv_reader, is_blank, line_of, open};
    let mut records = csv_reader(open(path)?).into_records();
    let mut next = || -> Result<Option<csv::StringRecord>> {
        for rec in records.by_ref() {
            let rec = rec.map_err(|e| csv_error(path, e))?;
            if !is_blank(&rec) {
                return Ok(Some(rec));
            }
        }
        Ok(None)
    };
    let Some(first) = next()? else {
        return Err(Error::input(
            path,
            None,
            None,
            "the file is empty: expected a header naming q (and p for a histogram)",
        ));
    };
    let header = Header::new(path, &first)?;
    let find = |name: &str| {
        header
            .fields
            .iter()
            .position(|f| f.trim().eq_ignore_ascii_case(name))
    };
    let (Some(qc), pc) = (find("q"), find("p")) else {
        return Err(Error::input(
            path,
            Some(header.line),
            None,
            format!(
                "the header is {:?}: expected a column q (overlap samples) or q and p (a \
                 histogram)",
                header.fields.join(",")
            ),
        ));
    };
    let (mut q, mut p) = (Vec::new(), Vec::new());
    while let Some(rec) = next()? {
        let line = line_of(&rec);
        let num = |col: usize, what: &str| -> Result<f64> {
            let f = rec.get(col).unwrap_or("");
            f.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| {
                    Error::input(
                        path,
                        Some(line),
                        Some(col as u64 + 1),
                        format!("{what} is {f:?}, expected a finite number"),
                    )
                })
        };
        q.push(num(qc, "q")?);
        if let Some(pc) = pc {
            let v = num(pc, "p")?;
            if v < 0.0 {
                return Err(Error::input(
                    path,
                    Some(line),
                    Some(pc as u64 + 1),
                    format!("p is {v}, expected a weight or density ≥ 0"),
                ));
            }
            p.push(v);
        }
    }
    let made = if pc.is_some() {
        Overlap::from_histogram(&q, &p)
    } else {
        Overlap::from_samples(&q)
    };
    made.filter(|_| q.len() >= 2).ok_or_else(|| {
        Error::input(
            path,
            None,
            None,
            format!(
                "{} rows with a total weight of {}: expected at least 2 rows and a positive total",
                q.len(),
                p.iter().sum::<f64>()
            ),
        )
    })
}

/// Compares the smooth X(C) with x(q = C): the mean of X(C) − x(C) over the grid with its
/// percentile interval from the same resamples, the largest difference, and how many
/// grid points have x(C) inside the X(C) band.
pub fn compare(shape: &ShapeFit, ov: &Overlap, level: f64) -> StaticComparison {
    let xs: Vec<f64> = shape.x_of_c.iter().map(|p| ov.x_of_q(p.c)).collect();
    let k = xs.len();
    let mean_diff =
        |x: &[f64]| -> f64 { x.iter().zip(&xs).map(|(d, s)| d - s).sum::<f64>() / k as f64 };
    let est: Vec<f64> = shape
        .x_of_c
        .iter()
        .map(|p| p.x.estimate.unwrap_or(f64::NAN))
        .collect();
    let reps: Vec<f64> = shape
        .replicates
        .chunks_exact(k)
        .filter(|r| r.iter().all(|v| v.is_finite()))
        .map(mean_diff)
        .collect();
    let m = mean_diff(&est);
    let iv = interval(m, &reps, None, IntervalMethod::Percentile, level);
    let (mut largest, mut inside) = ([f64::NAN, 0.0], 0);
    for ((p, e), s) in shape.x_of_c.iter().zip(&est).zip(&xs) {
        if !(largest[1].abs() >= (e - s).abs()) {
            largest = [p.c, e - s];
        }
        if let (Some(lo), Some(hi)) = (p.x.low, p.x.high) {
            inside += usize::from(lo <= *s && *s <= hi);
        }
    }
    StaticComparison {
        mean_difference: Estimate::with(m, iv.as_ref()),
        largest_difference: largest,
        inside_band: inside,
        points: k,
        folded: ov.folded,
        histogram: ov.histogram,
        x_static: xs,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Source (handbook formula): the empirical distribution function; a histogram's
    /// cumulative sum of density × bin width.
    #[test]
    fn samples_and_histograms_give_their_cumulative_x() {
        let s = Overlap::from_samples(&[0.1, -0.3, 0.5, 0.7]).unwrap();
        assert!(s.folded);
        assert!((s.x_of_q(0.0) - 0.0).abs() < 1e-15);
        assert!((s.x_of_q(0.2) - 0.25).abs() < 1e-15);
        assert!((s.x_of_q(0.4) - 0.5).abs() < 1e-15);
        assert!((s.x_of_q(0.9) - 1.0).abs() < 1e-15);
        // Uniform density on [0, 1] in 10 bins: x(q) = q.
        let q: Vec<f64> = (0..10).map(|k| 0.05 + 0.1 * k as f64).collect();
        let h = Overlap::from_histogram(&q, &[2.0; 10]).unwrap();
        for &v in &[0.0, 0.25, 0.5, 0.93, 1.0] {
            assert!((h.x_of_q(v) - v).abs() < 1e-12, "{v}");
        }
        assert!(Overlap::from_histogram(&[0.5], &[1.0]).is_none());
    }
}
