//! The lack-of-fit test of a fitted curve: does the model's shape (straight segments
//! joined at one break) describe the points, or do they bend where it is straight?
//!
//! # Statistic
//! The curve's points are split into at most [`MAX_BINS`] bins of equal count in C (at
//! least [`MIN_PER_BIN`] points each); with `e` the residual of the fitted response and
//! `w` the full-data weights,
//!
//! `T = Σ_bins (Σ_{i ∈ bin} w_i e_i)² / Σ_{i ∈ bin} w_i`,
//!
//! the weighted mean residual of each bin, squared and weighted by the bin's total weight.
//! A model of the right shape leaves bin means that scatter about zero; curvature leaves
//! runs of residuals of one sign, so whole bins sit off zero. The joint statistic of
//! several curves is the sum of the curves' statistics (each curve fitted on its own), so
//! that X changing with age is not read as lack of fit.
//!
//! # Calibration
//! Points of one sample are correlated along a curve, so no χ² table applies. Each
//! cluster-bootstrap resample (whole samples drawn with replacement) is moved onto the
//! fitted model: `r*₀ = r* − r̂ + f̂`, the resample's responses minus the data's plus the
//! fitted curve, which keeps the residual structure of the data about a correct model.
//! It is refitted the same way (its own weights), `T*` is formed with the full-data
//! weights and bins, and `p = (1 + #{c·T* ≥ T}) / (B + 1)`.
//!
//! The factor `c = n/(n − 1)` corrects the resample's spread: a resample's means scatter
//! about the data's with `(n − 1)/n` of the variance the data's means have about the truth,
//! and `T` is a sum of squares of means. The statistic uses the full-data weights in the
//! data and in every resample, so the same factor holds for both weightings. (For
//! inverse-variance weights `n/(n − 3)` was tried, from the mean `(n − 1)/(n − 3)` of an
//! estimated `1/s²` relative to `1/σ²` for Gaussian samples: it made the test conservative,
//! per-curve false alarms 0.023–0.027 at 10 samples against 0.047–0.048 with `n/(n − 1)`;
//! docs/validation.md.)
//!
//! ## Reference
//! Hall & Wilson, Biometrics 47, 757–762 (1991) (resample under the null); Davison &
//! Hinkley, *Bootstrap Methods and their Application* (1997), §6.2 (residual resampling,
//! cluster resampling); binned residual sums as a goodness-of-fit check: common practice.

use super::settings::Weighting;

/// The most bins a curve's points are split into.
pub const MAX_BINS: usize = 8;

/// The fewest points in a bin (curves with fewer than twice this have one bin, and no
/// test: one bin's mean residual is zero for any model with an intercept).
pub const MIN_PER_BIN: usize = 3;

/// The bins of one group of points: which bin each point falls in (equal counts in C).
#[derive(Debug, Clone)]
pub struct Bins {
    /// Bin of each point, in the group's order.
    pub of: Vec<usize>,
    /// Number of bins.
    pub count: usize,
}

impl Bins {
    /// Equal-count bins of the points with these x (ties in x broken by index).
    pub fn new(x: &[f64]) -> Self {
        let m = x.len();
        let count = (m / MIN_PER_BIN).clamp(1, MAX_BINS);
        let mut order: Vec<usize> = (0..m).collect();
        order.sort_by(|&i, &j| x[i].total_cmp(&x[j]).then(i.cmp(&j)));
        let mut of = vec![0; m];
        for (rank, &i) in order.iter().enumerate() {
            of[i] = rank * count / m.max(1);
        }
        Bins { of, count }
    }

    /// `Σ_bins (Σ w e)² / Σ w` for residuals `e` and weights `w` in the group's order.
    pub fn statistic(&self, e: &[f64], w: &[f64], sums: &mut Vec<[f64; 2]>) -> f64 {
        sums.clear();
        sums.resize(self.count, [0.0; 2]);
        // A bin's points mostly follow one another (bins of C, points in order of t), so
        // its sums are carried in registers while the bin lasts and stored when it ends:
        // the same additions in the same order as adding into `sums` point by point,
        // without waiting on memory for each.
        let (mut cur, mut acc) = (None::<usize>, [0.0; 2]);
        for ((&b, e), w) in self.of.iter().zip(e).zip(w) {
            if cur != Some(b) {
                if let Some(c) = cur {
                    sums[c] = acc;
                }
                (cur, acc) = (Some(b), sums[b]);
            }
            acc[0] += w * e;
            acc[1] += w;
        }
        if let Some(c) = cur {
            sums[c] = acc;
        }
        sums.iter()
            .filter(|s| s[1] > 0.0)
            .map(|s| s[0] * s[0] / s[1])
            .sum()
    }
}

/// What the resampling needs to form one group's null statistic: the shift that moves a
/// resample onto the fitted model, the bins and the full-data weights.
#[derive(Debug, Clone)]
pub struct LofNull {
    /// `r̂ − f̂` per point: subtracting it moves a resample onto the fitted model.
    pub shift: Vec<f64>,
    /// The group's bins.
    pub bins: Bins,
    /// The full-data weights per point.
    pub w: Vec<f64>,
}

/// The small-sample factor on the resampled statistics (module docs): `n/(n − 1)` for
/// either weighting, since the statistic's weights are the full-data ones in every
/// resample (measured; `n/(n − 3)` for inverse-variance weights was conservative).
pub fn factor(weights: Weighting, n: usize) -> f64 {
    let n = n as f64;
    match weights {
        Weighting::Uniform | Weighting::InverseVariance => n / (n - 1.0).max(1.0),
    }
}

/// `p = (1 + #{c·T* ≥ T}) / (B + 1)` over the finite resampled statistics, with the
/// number of them; statistics within `tol` of zero count as zero (data exactly on the
/// model give p = 1).
pub fn p_value(stat: f64, nulls: &[f64], c: f64, tol: f64) -> (f64, usize) {
    let stat = if stat.abs() <= tol { 0.0 } else { stat };
    let ok: Vec<f64> = nulls
        .iter()
        .map(|t| t * c)
        .filter(|t| t.is_finite())
        .collect();
    let exceed = ok.iter().filter(|&&t| t >= stat - tol).count();
    ((1 + exceed) as f64 / (ok.len() + 1) as f64, ok.len())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bins_have_equal_counts_in_the_order_of_c() {
        let x = [0.9, 0.1, 0.5, 0.3, 0.7, 0.2, 0.8, 0.4, 0.6];
        let b = Bins::new(&x);
        assert_eq!(b.count, 3);
        assert_eq!(b.of, vec![2, 0, 1, 0, 2, 0, 2, 1, 1]);
        let many = Bins::new(&vec![0.0; 100]);
        assert_eq!(many.count, MAX_BINS);
    }

    #[test]
    fn the_statistic_is_the_weighted_squared_bin_means() {
        let b = Bins::new(&[0.1, 0.2, 0.3, 0.4, 0.5, 0.6]);
        let e = [1.0, 1.0, 1.0, -1.0, -1.0, -2.0];
        let w = [1.0, 1.0, 2.0, 1.0, 1.0, 1.0];
        // bins {0,1,2}: (1+1+2)²/4 = 4; {3,4,5}: (−4)²/3 = 16/3.
        let t = b.statistic(&e, &w, &mut Vec::new());
        assert!((t - (4.0 + 16.0 / 3.0)).abs() < 1e-12);
    }

    /// Bins in runs or scattered, the statistic is the one made by adding into each bin
    /// point by point, to the bit. Source: common practice (the same additions in the
    /// same order).
    #[test]
    fn carried_bin_sums_are_the_point_by_point_sums() {
        let x: Vec<f64> = (0..40).map(|i| ((i * 37) % 41) as f64 / 41.0).collect();
        let e: Vec<f64> = (0..40).map(|i| (i as f64 * 0.77).sin()).collect();
        let w: Vec<f64> = (0..40)
            .map(|i| 0.5 + (i as f64 * 0.31).cos().abs())
            .collect();
        let sorted: Vec<f64> = (0..40).map(|i| f64::from(i) / 40.0).collect();
        for b in [Bins::new(&x), Bins::new(&sorted)] {
            let mut want = vec![[0.0; 2]; b.count];
            for ((&k, e), w) in b.of.iter().zip(&e).zip(&w) {
                want[k][0] += w * e;
                want[k][1] += w;
            }
            let want: f64 = want.iter().map(|s| s[0] * s[0] / s[1]).sum();
            let got = b.statistic(&e, &w, &mut Vec::new());
            assert_eq!(got.to_bits(), want.to_bits());
        }
    }

    #[test]
    fn the_p_value_counts_scaled_resamples_at_or_above() {
        let (p, b) = p_value(2.0, &[1.0, 1.5, 3.0, f64::NAN], 1.5, 0.0);
        assert_eq!(b, 3);
        assert!((p - 3.0 / 4.0).abs() < 1e-12);
        assert!((factor(Weighting::Uniform, 10) - 10.0 / 9.0).abs() < 1e-12);
        assert!((factor(Weighting::InverseVariance, 10) - 10.0 / 9.0).abs() < 1e-12);
    }
}
