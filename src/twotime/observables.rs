//! Several observables of one campaign (wavevectors, overlaps, local and global
//! quantities): each is fitted on its own, all with the same resamples of the samples, and
//! a joint test asks whether they share one X (one T_eff) on the aging branch.
//!
//! The fits of one observable are those of a campaign of one observable. What the joint
//! part adds rests on resample `b` drawing the same samples for every observable (the
//! draws depend only on the seed, `b` and the number of samples, and every observable has
//! the same samples in the same order), so the resampled X's of the observables keep
//! their covariance.
//!
//! The test: with `K` observables and joint-fit estimates `X̂_k`, the contrasts
//! `d = (X̂_2 − X̂_1, …, X̂_K − X̂_1)` and `Σ`, the covariance of the resampled contrasts,
//! give the Wald statistic `W = dᵀ Σ⁻¹ d`. Its null distribution is that of the resampled
//! statistics centred on the estimate, `W*_b = (d*_b − d)ᵀ Σ⁻¹ (d*_b − d)`, and the p-value
//! is `(1 + #{W*_b ≥ W}) / (1 + B)` (the bootstrap Wald test: Davison & Hinkley, Bootstrap
//! Methods and their Application (1997), §4.4, with the pivot studentized by one
//! covariance). Reading `W` against `χ²_{K−1}` or Hotelling's `F` instead was measured
//! (docs/validation.md): the resampled covariance of the broken stick's X overstates its
//! sampling variance by 15–30% at 20 samples, and those readings rejected at half the
//! stated rate; the resampled null carries the same overstatement on both sides of the
//! comparison. Where the observables are consistent with one X, the common value is
//! their generalized-least-squares mean with the resampled covariance, read at Student's
//! width.

use super::FitReport;
use crate::common::{Estimate, ToolInfo};
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, StudentsT};

/// What the joint test found.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SharedVerdict {
    /// Not rejected at the test level: one X for all observables is consistent with the
    /// data.
    Consistent,
    /// Rejected: the observables' X differ.
    Differ,
    /// The test could not be formed (see the note).
    Undecided,
}

/// One observable's line in the joint result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ObservableRatio {
    /// The observable's name in the file.
    pub observable: String,
    /// Its X from the joint fit of its curves.
    pub ratio: Option<f64>,
    /// The standard deviation of its resampled X.
    pub se: Option<f64>,
}

/// The joint test that the observables share one X, with the common X where they do.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SharedRatio {
    /// Each observable's X and its resampled spread, in file order.
    pub observables: Vec<ObservableRatio>,
    /// The correlation matrix of the observables' resampled X (row-major, K × K).
    pub correlation: Vec<Vec<f64>>,
    /// Resamples in which every observable's fit gave an X (the ones used).
    pub resamples_used: usize,
    /// The Wald statistic `W = dᵀ Σ⁻¹ d`.
    pub wald: Option<f64>,
    /// The number of contrasts tested, `K − 1`.
    pub contrasts: usize,
    /// The p-value of the test, from the resampled statistics centred on the estimate.
    pub p_value: Option<f64>,
    /// The test level (1 − the confidence level).
    pub test_level: f64,
    /// The verdict at the test level.
    pub verdict: SharedVerdict,
    /// The common X (generalized-least-squares mean of the observables' X) with its
    /// interval at the slopes' level; formed when the verdict is `consistent`.
    pub common_ratio: Estimate,
    /// `T/X` of the common X, with the interval's ends mapped.
    pub common_t_eff: Estimate,
    /// Why the test or the common X is missing, when it is.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

/// `fit` on a file of several observables: every observable's own report, and the joint
/// test.
#[derive(Debug, Clone, Serialize)]
pub struct ObservablesReport {
    /// JSON schema version (that of [`FitReport`]).
    pub schema: u32,
    /// The tool that made it.
    pub tool: ToolInfo,
    /// The input file, when there was one.
    pub input: Option<String>,
    /// One report per observable, in file order, each naming its observable.
    pub observables: Vec<FitReport>,
    /// Do the observables share one X?
    pub shared_ratio: SharedRatio,
}

/// The joint test on the per-observable reports (in file order, all fitted with the same
/// seed and resamples on the same samples); `kt` is `k T`, `level` the confidence level.
pub fn shared_ratio(reports: &[(String, &FitReport)], kt: f64, level: f64) -> SharedRatio {
    let k = reports.len();
    let n = reports.first().map_or(0, |r| r.1.n_samples);
    let test_level = ((1.0 - level) * 1e12).round() / 1e12;
    let est: Vec<Option<f64>> = reports.iter().map(|r| r.1.fits[0].ratio.estimate).collect();
    // Resamples in which every observable has an X.
    let b = reports
        .iter()
        .map(|r| r.1.ratio_draws.len())
        .min()
        .unwrap_or(0);
    let used: Vec<usize> = (0..b)
        .filter(|&i| reports.iter().all(|r| r.1.ratio_draws[i].is_finite()))
        .collect();
    let draws: Vec<Vec<f64>> = reports
        .iter()
        .map(|r| used.iter().map(|&i| r.1.ratio_draws[i]).collect())
        .collect();
    let cov = covariance(&draws);
    let se: Vec<Option<f64>> = (0..k)
        .map(|a| (used.len() > 1).then(|| cov[a][a].sqrt()))
        .collect();
    let correlation = (0..k)
        .map(|a| {
            (0..k)
                .map(|c| cov[a][c] / (cov[a][a] * cov[c][c]).sqrt())
                .collect()
        })
        .collect();
    let mut out = SharedRatio {
        observables: reports
            .iter()
            .zip(&est)
            .zip(&se)
            .map(|((r, e), s)| ObservableRatio {
                observable: r.0.clone(),
                ratio: *e,
                se: *s,
            })
            .collect(),
        correlation,
        resamples_used: used.len(),
        wald: None,
        contrasts: k.saturating_sub(1),
        p_value: None,
        test_level,
        verdict: SharedVerdict::Undecided,
        common_ratio: Estimate::none("no joint test"),
        common_t_eff: Estimate::none("no joint test"),
        note: None,
    };
    let p = k.saturating_sub(1);
    let why = if k < 2 {
        Some("one observable: nothing to compare".to_string())
    } else if let Some(i) = est.iter().position(Option::is_none) {
        Some(format!(
            "observable '{}' has no X (its joint fit found no aging branch)",
            reports[i].0
        ))
    } else if n <= p {
        Some(format!(
            "{n} samples for {k} observables: the test needs more samples than observables"
        ))
    } else if used.len() < 10 * k {
        Some(format!(
            "only {} resamples in which every observable has an X",
            used.len()
        ))
    } else {
        None
    };
    if let Some(note) = why {
        out.common_ratio = Estimate::none(note.clone());
        out.common_t_eff = Estimate::none(note.clone());
        out.note = Some(note);
        return out;
    }
    let x: Vec<f64> = est.iter().map(|e| e.unwrap_or(f64::NAN)).collect();
    // Contrasts against the first observable, and their covariance.
    let d: Vec<f64> = (1..k).map(|a| x[a] - x[0]).collect();
    let dcov: Vec<Vec<f64>> = (1..k)
        .map(|a| {
            (1..k)
                .map(|c| cov[a][c] - cov[a][0] - cov[0][c] + cov[0][0])
                .collect()
        })
        .collect();
    let Some(sd) = solve_spd(&dcov, &d) else {
        let note = "the resampled differences between the observables' X are degenerate \
                    (an observable repeated?)"
            .to_string();
        out.common_ratio = Estimate::none(note.clone());
        out.common_t_eff = Estimate::none(note.clone());
        out.note = Some(note);
        return out;
    };
    let w: f64 = d.iter().zip(&sd).map(|(a, b)| a * b).sum();
    // The resampled statistics, centred on the estimate.
    let exceed = (0..used.len())
        .filter(|&b| {
            let centred: Vec<f64> = (1..k)
                .map(|a| (draws[a][b] - draws[0][b]) - d[a - 1])
                .collect();
            solve_spd(&dcov, &centred)
                .is_some_and(|sc| centred.iter().zip(&sc).map(|(u, v)| u * v).sum::<f64>() >= w)
        })
        .count();
    let pv = (1 + exceed) as f64 / (1 + used.len()) as f64;
    out.wald = Some(w);
    out.p_value = Some(pv);
    out.verdict = if pv < test_level {
        SharedVerdict::Differ
    } else {
        SharedVerdict::Consistent
    };
    if out.verdict != SharedVerdict::Consistent {
        let note = match out.verdict {
            SharedVerdict::Differ => "the observables do not share one X",
            _ => "the test could not be formed",
        };
        out.common_ratio = Estimate::none(note);
        out.common_t_eff = Estimate::none(note);
        return out;
    }
    let ones = vec![1.0; k];
    let Some(vi1) = solve_spd(&cov, &ones) else {
        let note = "the resampled X's are degenerate";
        out.common_ratio = Estimate::none(note);
        out.common_t_eff = Estimate::none(note);
        return out;
    };
    let denom: f64 = vi1.iter().sum();
    let common = vi1.iter().zip(&x).map(|(a, b)| a * b).sum::<f64>() / denom;
    let var = 1.0 / denom;
    let half = student_width(level, n) * var.sqrt();
    let (low, high) = (common - half, common + half);
    out.common_ratio = Estimate {
        estimate: Some(common),
        low: Some(low),
        high: Some(high),
        note: None,
    };
    out.common_t_eff = if common > 0.0 {
        Estimate {
            estimate: Some(kt / common),
            low: (high > 0.0).then(|| kt / high),
            high: (low > 0.0).then(|| kt / low),
            note: (low <= 0.0).then(|| {
                "the interval of the common X reaches 0: T_eff is unbounded above".to_string()
            }),
        }
    } else {
        Estimate::none("the common X is not positive")
    };
    out
}

/// The half-width factor of an interval at confidence `level` from a bootstrap standard
/// error of a statistic of `n` samples: Student's `t_{n−1}` quantile times `√(n/(n−1))`
/// (the bootstrap variance is the sample variance times `(n − 1)/n`).
fn student_width(level: f64, n: usize) -> f64 {
    let nf = n as f64;
    StudentsT::new(0.0, 1.0, nf - 1.0).map_or(f64::NAN, |t| {
        t.inverse_cdf(0.5 + level / 2.0) * (nf / (nf - 1.0)).sqrt()
    })
}

/// The covariance matrix of the rows of `draws` (each row one variable's resamples).
fn covariance(draws: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = draws.len();
    let m = draws.first().map_or(0, Vec::len);
    let means: Vec<f64> = draws
        .iter()
        .map(|d| d.iter().sum::<f64>() / m.max(1) as f64)
        .collect();
    let denom = m.saturating_sub(1).max(1) as f64;
    (0..k)
        .map(|a| {
            (0..k)
                .map(|c| {
                    draws[a]
                        .iter()
                        .zip(&draws[c])
                        .map(|(u, v)| (u - means[a]) * (v - means[c]))
                        .sum::<f64>()
                        / denom
                })
                .collect()
        })
        .collect()
}

/// Solves `A x = b` for a symmetric positive-definite `A` by Cholesky; `None` when `A` is
/// not positive definite (to a relative tolerance).
fn solve_spd(a: &[Vec<f64>], b: &[f64]) -> Option<Vec<f64>> {
    let k = b.len();
    let scale = (0..k).map(|i| a[i][i].abs()).fold(0.0f64, f64::max);
    let mut l = vec![vec![0.0; k]; k];
    for i in 0..k {
        for j in 0..=i {
            let s: f64 = a[i][j] - (0..j).map(|m| l[i][m] * l[j][m]).sum::<f64>();
            if i == j {
                if !(s > 1e-12 * scale) {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    let mut y = vec![0.0; k];
    for i in 0..k {
        y[i] = (b[i] - (0..i).map(|m| l[i][m] * y[m]).sum::<f64>()) / l[i][i];
    }
    let mut x = vec![0.0; k];
    for i in (0..k).rev() {
        x[i] = (y[i] - (i + 1..k).map(|m| l[m][i] * x[m]).sum::<f64>()) / l[i][i];
    }
    Some(x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_solves_a_known_system() {
        // Source: common practice — the 3 × 3 system with A = [[4,12,−16],[12,37,−43],
        // [−16,−43,98]] (its Cholesky factor is [[2,0,0],[6,1,0],[−8,5,3]]) and x = (1,2,3):
        // b = A x = (−20, −43, 192).
        let a = vec![
            vec![4.0, 12.0, -16.0],
            vec![12.0, 37.0, -43.0],
            vec![-16.0, -43.0, 98.0],
        ];
        let x = solve_spd(&a, &[-20.0, -43.0, 192.0]).unwrap();
        for (got, want) in x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-10, "{got} vs {want}");
        }
        assert!(solve_spd(&[vec![1.0, 1.0], vec![1.0, 1.0]], &[1.0, 1.0]).is_none());
    }

    #[test]
    fn student_width_is_the_t_quantile_widened() {
        // Source: Student's t table, t_{19, 0.975} = 2.093 (from memory; any table).
        let w = student_width(0.95, 20);
        assert!((w - 2.093 * (20.0f64 / 19.0).sqrt()).abs() < 2e-3, "{w}");
    }
}
