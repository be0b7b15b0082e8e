//! Bootstrap and jackknife engine, and the percentile, basic and BCa intervals.
//!
//! Every replicate has its own random stream, derived from `(seed, replicate index)`
//! (ChaCha8 with the index as stream number), so results do not depend on how many
//! threads run or in which order replicates are computed.
//!
//! ## Reference
//! Efron & Tibshirani, *An Introduction to the Bootstrap* (1993): ch. 11 (jackknife),
//! 13 (percentile), 14 (BCa, acceleration from the jackknife); Davison & Hinkley,
//! *Bootstrap Methods and their Application* (1997), §5.2 (basic interval);
//! Hesterberg, *What teachers should know about the bootstrap*, The American Statistician
//! 69, 371–386 (2015), §4.2 (the expanded percentile interval: [`widened_level`]).

use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal, StudentsT};

/// How a confidence interval is formed from bootstrap replicates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum IntervalMethod {
    /// Quantiles of the replicates.
    Percentile,
    /// Quantiles reflected about the estimate: `2θ̂ - θ*`.
    Basic,
    /// Bias-corrected and accelerated (acceleration from the jackknife).
    Bca,
}

impl IntervalMethod {
    /// The name used in reports.
    pub fn label(self) -> &'static str {
        match self {
            IntervalMethod::Percentile => "percentile",
            IntervalMethod::Basic => "basic",
            IntervalMethod::Bca => "BCa",
        }
    }
}

/// The random stream of one replicate.
pub fn replicate_rng(seed: u64, index: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(index);
    rng
}

/// The `n` sample indices drawn with replacement for replicate `index`.
pub fn draw_indices(seed: u64, index: u64, n: usize, out: &mut Vec<usize>) {
    let mut rng = replicate_rng(seed, index);
    out.clear();
    out.extend((0..n).map(|_| rng.random_range(0..n)));
}

/// How many times each of the `n` samples is drawn in replicate `index`
/// (the same draws as [`draw_indices`]).
pub fn draw_counts(seed: u64, index: u64, n: usize, counts: &mut [u32]) {
    let mut rng = replicate_rng(seed, index);
    counts.iter_mut().for_each(|c| *c = 0);
    for _ in 0..n {
        counts[rng.random_range(0..n)] += 1;
    }
}

/// The weight rows of replicates `b0 .. b0 + rows` over `n` units, each row the draw
/// counts of [`draw_counts`] divided by `n`: one row of `W` in the product `W · D`, whose
/// rows are then the replicates' means. `counts` is scratch of length `n`.
pub fn weight_rows(seed: u64, b0: usize, rows: usize, counts: &mut [u32]) -> ndarray::Array2<f64> {
    let mut wm = ndarray::Array2::<f64>::zeros((0, 0));
    weight_rows_into(seed, b0, rows, counts, &mut wm);
    wm
}

/// [`weight_rows`] written into `wm` (reshaped when its shape differs), so that chunk
/// after chunk reuses one allocation.
pub fn weight_rows_into(
    seed: u64,
    b0: usize,
    rows: usize,
    counts: &mut [u32],
    wm: &mut ndarray::Array2<f64>,
) {
    let n = counts.len();
    if wm.dim() != (rows, n) {
        *wm = ndarray::Array2::<f64>::zeros((rows, n));
    }
    for (r, mut row) in wm.rows_mut().into_iter().enumerate() {
        draw_counts(seed, (b0 + r) as u64, n, counts);
        for (w, &cnt) in row.iter_mut().zip(counts.iter()) {
            *w = f64::from(cnt) / n as f64;
        }
    }
}

/// Bootstraps a statistic of `n` independent units: `stat` receives the drawn indices.
///
/// Replicates run in parallel; the result is the same for any number of threads.
///
/// # Examples
/// ```
/// let data = [1.0, 2.0, 3.0, 4.0, 5.0];
/// let mean = |idx: &[usize]| idx.iter().map(|&i| data[i]).sum::<f64>() / idx.len() as f64;
/// let reps = fdtemp::resample::bootstrap(data.len(), 200, 7, mean);
/// assert_eq!(reps.len(), 200);
/// ```
pub fn bootstrap<F>(n: usize, resamples: usize, seed: u64, stat: F) -> Vec<f64>
where
    F: Fn(&[usize]) -> f64 + Sync,
{
    (0..resamples)
        .into_par_iter()
        .map_init(Vec::new, |idx, b| {
            draw_indices(seed, b as u64, n, idx);
            stat(idx)
        })
        .collect()
}

/// Leave-one-out values of a statistic of `n` units: `stat` receives the kept indices.
pub fn jackknife<F>(n: usize, stat: F) -> Vec<f64>
where
    F: Fn(&[usize]) -> f64,
{
    let mut idx: Vec<usize> = Vec::with_capacity(n.saturating_sub(1));
    (0..n)
        .map(|i| {
            idx.clear();
            idx.extend((0..n).filter(|&j| j != i));
            stat(&idx)
        })
        .collect()
}

/// The jackknife standard error `sqrt((n-1)/n Σ (θ_i - θ̄)²)`.
pub fn jackknife_se(values: &[f64]) -> f64 {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    ((n - 1.0) / n * values.iter().map(|v| (v - mean).powi(2)).sum::<f64>()).sqrt()
}

/// The bootstrap standard error (sample standard deviation of the replicates).
pub fn bootstrap_se(replicates: &[f64]) -> f64 {
    let n = replicates.len() as f64;
    let mean = replicates.iter().sum::<f64>() / n;
    (replicates.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
}

/// The BCa acceleration from jackknife values:
/// `a = Σ (θ̄ - θ_i)³ / (6 [Σ (θ̄ - θ_i)²]^{3/2})`.
///
/// Returns 0 when all values are equal.
pub fn acceleration(jackknife: &[f64]) -> f64 {
    let n = jackknife.len() as f64;
    let mean = jackknife.iter().sum::<f64>() / n;
    let (mut s2, mut s3) = (0.0, 0.0);
    for v in jackknife {
        let d = mean - v;
        s2 += d * d;
        s3 += d * d * d;
    }
    if s2 > 0.0 {
        s3 / (6.0 * s2.powf(1.5))
    } else {
        0.0
    }
}

/// The `prob` quantile of sorted values, linear between order statistics
/// (Hyndman & Fan 1996, definition 7).
pub fn quantile_sorted(sorted: &[f64], prob: f64) -> f64 {
    let n = sorted.len();
    if n == 1 {
        return sorted[0];
    }
    let h = (n - 1) as f64 * prob.clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// A two-sided interval and, where the method had to give way, why.
#[derive(Debug, Clone, PartialEq)]
pub struct Interval {
    /// Lower end.
    pub low: f64,
    /// Upper end.
    pub high: f64,
    /// Bias correction `z0` (BCa only).
    pub z0: Option<f64>,
    /// Acceleration `a` (BCa only).
    pub acceleration: Option<f64>,
    /// Set when BCa could not be formed and the percentile interval was used.
    pub note: Option<String>,
}

/// `W · D` for a row-major `W` (`reps × n`) and `D` (`n × cols`) on faer's matrix product
/// (runtime AVX2/AVX-512 dispatch), one thread per call: chunks already run in parallel.
pub fn product(w: &ndarray::Array2<f64>, d: &ndarray::Array2<f64>) -> ndarray::Array2<f64> {
    let mut out = ndarray::Array2::<f64>::zeros((0, 0));
    product_into(w, d, &mut out);
    out
}

/// [`product`] written into `out` (reshaped when its shape differs), so that chunk after
/// chunk reuses one allocation.
pub fn product_into(
    w: &ndarray::Array2<f64>,
    d: &ndarray::Array2<f64>,
    out: &mut ndarray::Array2<f64>,
) {
    let (rows, cols) = (w.nrows(), d.ncols());
    if out.dim() != (rows, cols) {
        *out = ndarray::Array2::<f64>::zeros((rows, cols));
    }
    product_columns(w, &d.view(), out, 0);
}

/// `W · D` into the columns `first..first + d.ncols()` of `out`, which has `w.nrows()`
/// rows and at least those columns.
///
/// # Panics
/// When `out` is too small or `W` and `D` do not chain (a caller's mistake).
pub fn product_columns(
    w: &ndarray::Array2<f64>,
    d: &ndarray::ArrayView2<'_, f64>,
    out: &mut ndarray::Array2<f64>,
    first: usize,
) {
    let (rows, n, cols) = (w.nrows(), w.ncols(), d.ncols());
    assert!(out.nrows() == rows && out.ncols() >= first + cols && d.nrows() == n);
    if rows == 1 {
        // faer multiplies a single row another way, whose sums can differ in the last
        // bit from the same row inside a larger product: the row is multiplied twice over
        // so that a replicate's means do not depend on the chunk it falls in.
        let two = ndarray::concatenate(ndarray::Axis(0), &[w.view(), w.view()])
            .expect("two rows of one width");
        let mut pair = ndarray::Array2::zeros((2, cols));
        product_columns(&two, d, &mut pair, 0);
        out.slice_mut(ndarray::s![0, first..first + cols])
            .assign(&pair.row(0));
        return;
    }
    let width = out.ncols();
    if let (Some(ws), Some(ds), Some(os)) = (w.as_slice(), d.as_slice(), out.as_slice_mut()) {
        let lhs = faer::MatRef::from_row_major_slice(ws, rows, n);
        let rhs = faer::MatRef::from_row_major_slice(ds, n, cols);
        let dst = faer::MatMut::from_row_major_slice_mut(os, rows, width)
            .submatrix_mut(0, first, rows, cols);
        faer::linalg::matmul::matmul(dst, faer::Accum::Replace, lhs, rhs, 1.0, faer::Par::Seq);
    } else {
        out.slice_mut(ndarray::s![.., first..first + cols])
            .assign(&w.dot(d));
    }
}

/// The level at which to read the replicates of a statistic of `n` independent units so
/// that a `level` interval has Student's width rather than the bootstrap's small-sample
/// one: `2Φ(z′) − 1` with `z′ = √(n/(n − 1)) · t_{n−1}((1 + level)/2)`.
///
/// The bootstrap distribution of a mean has the spread `√((n − 1)/n) · s/√n` and normal
/// tails, so its percentile interval is narrower than the t interval by both factors;
/// other smooth statistics of the units run short by about the same proportion
/// (Hesterberg 2015, §4.2, the expanded percentile interval). At 20 units a 95% interval
/// is read at 96.8%, at 200 units at 95.2%. `level` itself for `n < 2` (no interval).
pub fn widened_level(level: f64, n: usize) -> f64 {
    if n < 2 || !(level > 0.0 && level < 1.0) {
        return level;
    }
    let nf = n as f64;
    let (Ok(t), normal) = (StudentsT::new(0.0, 1.0, nf - 1.0), Normal::standard()) else {
        return level;
    };
    let z = (nf / (nf - 1.0)).sqrt() * t.inverse_cdf(0.5 * (1.0 + level));
    2.0 * normal.cdf(z) - 1.0
}

/// The inverse of [`widened_level`]: the stated level whose widened level is `read`
/// (turns a level at which replicates were read back into the level a user states).
pub fn stated_level(read: f64, n: usize) -> f64 {
    if n < 2 || !(read > 0.0 && read < 1.0) {
        return read;
    }
    let nf = n as f64;
    let (Ok(t), normal) = (StudentsT::new(0.0, 1.0, nf - 1.0), Normal::standard()) else {
        return read;
    };
    let tq = normal.inverse_cdf(0.5 * (1.0 + read)) * ((nf - 1.0) / nf).sqrt();
    2.0 * t.cdf(tq) - 1.0
}

/// Forms a `level` interval for `estimate` from its replicates (any order; non-finite
/// replicates are ignored). BCa needs the jackknife values; without them, or when every
/// replicate lies on one side of the estimate, the percentile interval is returned with a
/// note. Returns `None` when fewer than 2 finite replicates remain.
///
/// # Formula
/// BCa: `z0 = Φ⁻¹((#{θ* < θ̂} + ½ #{θ* = θ̂}) / B)`, `α_j = Φ(z0 + (z0 + z_j) / (1 - a (z0 + z_j)))` for
/// `z_j = Φ⁻¹((1 ∓ level)/2)`; the ends are the `α_j` quantiles of the replicates.
pub fn interval(
    estimate: f64,
    replicates: &[f64],
    jackknife: Option<&[f64]>,
    method: IntervalMethod,
    level: f64,
) -> Option<Interval> {
    let mut sorted: Vec<f64> = replicates
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    if sorted.len() < 2 {
        return None;
    }
    sorted.sort_by(f64::total_cmp);
    let alpha = (1.0 - level) / 2.0;
    let pct = |note: Option<String>| Interval {
        low: quantile_sorted(&sorted, alpha),
        high: quantile_sorted(&sorted, 1.0 - alpha),
        z0: None,
        acceleration: None,
        note,
    };
    match method {
        IntervalMethod::Percentile => Some(pct(None)),
        IntervalMethod::Basic => {
            let p = pct(None);
            Some(Interval {
                low: 2.0 * estimate - p.high,
                high: 2.0 * estimate - p.low,
                ..p
            })
        }
        IntervalMethod::Bca => {
            let Some(jk) = jackknife.filter(|jk| jk.iter().all(|v| v.is_finite())) else {
                return Some(pct(Some(
                    "BCa needs finite leave-one-out values; percentile interval used".into(),
                )));
            };
            // Replicates equal to the estimate (up to rounding) count as half below: with
            // few samples a resample can reproduce the data exactly, and rounding must not
            // decide the bias correction.
            let tol = 1e-10 * estimate.abs().max(1e-300);
            let below = sorted.partition_point(|&v| v < estimate - tol);
            let ties = sorted.partition_point(|&v| v <= estimate + tol) - below;
            let frac = (below as f64 + 0.5 * ties as f64) / sorted.len() as f64;
            if frac <= 0.0 || frac >= 1.0 {
                return Some(pct(Some(
                    "every resample lies on one side of the estimate, so BCa's bias \
                     correction is undefined; percentile interval used"
                        .into(),
                )));
            }
            let normal = Normal::standard();
            let z0 = normal.inverse_cdf(frac);
            let a = acceleration(jk);
            let adjust = |p: f64| {
                let z = normal.inverse_cdf(p);
                normal.cdf(z0 + (z0 + z) / (1.0 - a * (z0 + z)))
            };
            Some(Interval {
                low: quantile_sorted(&sorted, adjust(alpha)),
                high: quantile_sorted(&sorted, adjust(1.0 - alpha)),
                z0: Some(z0),
                acceleration: Some(a),
                note: None,
            })
        }
    }
}

/// The smallest level at which [`interval`] covers `truth`: the interval at any level
/// `≥` this contains it, at any level below it does not (the intervals are nested in the
/// level). `1.0` when no interval the replicates allow contains it; `None` when no
/// interval can be formed.
///
/// Coverage of a `β` interval over simulated campaigns is the share whose level is `≤ β`;
/// the level whose share is the wanted coverage calibrates the interval (Loh, JASA 82,
/// 155–162 (1987); Hall & Martin, Biometrika 75, 661–671 (1988)).
pub fn covering_level(
    estimate: f64,
    replicates: &[f64],
    jackknife: Option<&[f64]>,
    method: IntervalMethod,
    truth: f64,
) -> Option<f64> {
    // Sorted once: the sort inside `interval` then finds one run and costs O(B).
    let mut sorted: Vec<f64> = replicates
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    sorted.sort_by(f64::total_cmp);
    let covers = |level: f64| {
        interval(estimate, &sorted, jackknife, method, level)
            .map(|iv| iv.low <= truth && truth <= iv.high)
    };
    const TOP: f64 = 1.0 - 1e-9;
    if !covers(TOP)? {
        return Some(1.0);
    }
    if covers(1e-9)? {
        return Some(0.0);
    }
    let (mut lo, mut hi) = (1e-9, TOP);
    // 40 halvings: the level to 1e-12, far below any Monte-Carlo error.
    for _ in 0..40 {
        let mid = 0.5 * (lo + hi);
        if covers(mid)? {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    Some(hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Replicates 1, 2, …, 1000 and the estimate at their middle.
    fn uniform_replicates() -> Vec<f64> {
        (1..=1000).map(f64::from).collect()
    }

    #[test]
    fn the_covering_level_is_where_the_interval_starts_to_contain_the_truth() {
        let reps = uniform_replicates();
        for method in [IntervalMethod::Percentile, IntervalMethod::Basic] {
            for truth in [380.0, 500.0, 610.5, 990.0] {
                let level = covering_level(500.5, &reps, None, method, truth).unwrap();
                let at = |l: f64| interval(500.5, &reps, None, method, l).unwrap();
                let (above, below) = (at((level + 1e-6).min(1.0 - 1e-9)), at(level - 1e-6));
                assert!(
                    above.low <= truth && truth <= above.high,
                    "{method:?} {truth}"
                );
                assert!(
                    !(below.low <= truth && truth <= below.high),
                    "{method:?} {truth}"
                );
            }
        }
    }

    #[test]
    fn a_percentile_interval_reaches_the_975th_of_1000_replicates_near_95_percent() {
        // The 95% percentile interval of 1000 sorted replicates ends near the 975th
        // (common practice: its ends are the 2.5% and 97.5% quantiles).
        let reps = uniform_replicates();
        let level = covering_level(500.5, &reps, None, IntervalMethod::Percentile, 975.0).unwrap();
        assert!((level - 0.95).abs() < 0.003, "{level}");
    }

    #[test]
    fn the_widened_level_reads_a_mean_at_students_width() {
        // Source: Student's t table (e.g. Abramowitz & Stegun 1964, Table 26.10):
        // t_{19}(0.975) = 2.093, t_{9}(0.975) = 2.262. The widened normal quantile is
        // √(n/(n−1)) times it (Hesterberg 2015, §4.2).
        let normal = Normal::standard();
        for (n, t) in [(20usize, 2.093f64), (10, 2.262)] {
            let level = widened_level(0.95, n);
            let z = normal.inverse_cdf(0.5 * (1.0 + level));
            let want = (n as f64 / (n as f64 - 1.0)).sqrt() * t;
            assert!((z - want).abs() < 1e-3, "n = {n}: {z} against {want}");
            assert!((stated_level(level, n) - 0.95).abs() < 1e-8);
        }
        // The levels the documentation quotes (docs/models.md), from the same tables.
        for (n, read) in [(10usize, 0.983), (20, 0.968), (48, 0.958), (200, 0.952)] {
            assert!((widened_level(0.95, n) - read).abs() < 0.0006, "n = {n}");
        }
        // Many units: the widening vanishes (common practice: t → z).
        assert!((widened_level(0.95, 100_000) - 0.95).abs() < 1e-5);
        assert_eq!(widened_level(0.95, 1).to_bits(), 0.95f64.to_bits());
    }

    #[test]
    fn a_truth_outside_all_replicates_needs_the_whole_level_and_the_estimate_none() {
        let reps = uniform_replicates();
        let p = IntervalMethod::Percentile;
        assert_eq!(covering_level(500.5, &reps, None, p, 5000.0), Some(1.0));
        let centre = covering_level(500.5, &reps, None, p, 500.5).unwrap();
        assert!(centre < 0.002, "{centre}");
    }

    #[test]
    fn a_replicate_has_the_same_row_of_the_product_in_any_chunk() {
        // 1000 samples (faer takes another path for a one-row product at this size), 300
        // columns: rows 0..70 at once, then in chunks of 64, 2, 3 and 1 rows.
        let (n, cols) = (1000, 300);
        let d = ndarray::Array2::from_shape_fn((n, cols), |(i, j)| {
            (((i * 7919 + j * 104_729) % 1009) as f64 / 1009.0 - 0.4) * 3.0
        });
        let mut counts = vec![0u32; n];
        let all = product(&weight_rows(5, 0, 70, &mut counts), &d);
        let mut at = 0;
        for rows in [64, 2, 3, 1] {
            let part = product(&weight_rows(5, at, rows, &mut counts), &d);
            for r in 0..rows {
                let same = part
                    .row(r)
                    .iter()
                    .zip(all.row(at + r))
                    .all(|(u, v)| u.to_bits() == v.to_bits());
                assert!(same, "row {} in a chunk of {rows}", at + r);
            }
            at += rows;
        }
    }
}
