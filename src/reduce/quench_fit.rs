//! The direct fit of repeated quenches: X, T_eff and the break with intervals from the
//! stratified bootstrap of runs that gave the pointwise C and χ.
//!
//! `fit` resamples whole samples; repeated quenches have none: C is a covariance over the
//! unperturbed runs and χ a difference of means between strata, so a replicate is a set of
//! Poisson(1) run weights within each stratum (module [`super::quench`]), and C and χ are
//! recomputed from its weighted moments. Here every replicate's points are refitted by the
//! broken stick of `fit --model broken` (slope −1 above the break q, −X below, on
//! y = k·T·χ against C), with the weights fixed at the inverse bootstrap variance of
//! y + C per point; the intervals are the replicates' percentile intervals (Efron &
//! Tibshirani, *An Introduction to the Bootstrap* (1993), ch. 13), T_eff's the image of
//! X's. One fit over all waiting times, then one per tw.
//!
//! The equilibrium relation (one line of slope −1) is tested by the weighted SSE that the
//! break removes, against replicates moved onto that line (r_b − r + r̄, the null-imposed
//! bootstrap of Hall & Wilson, Biometrics 47, 757 (1991), as `fit` does); it is rejected
//! when p < 1 − level.

use super::quench::QuenchReduction;
use crate::common::{Estimate, check_level};
use crate::error::{Error, Result};
use crate::resample::{self, IntervalMethod};
use crate::twotime::model::{self, FitBuffers, GroupPoints, Values};
use crate::twotime::settings::Model;

/// The settings of the direct fit.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct QuenchFitSettings {
    /// Bath temperature T (reduced units: k = 1).
    pub temperature: f64,
    /// Least number of points on each side of the break.
    pub min_branch: usize,
}

impl Default for QuenchFitSettings {
    fn default() -> Self {
        QuenchFitSettings {
            temperature: 1.0,
            min_branch: 5,
        }
    }
}

/// One fit: all waiting times (`tw` None) or one.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QuenchFit {
    /// The waiting time, None for the fit over all of them.
    pub tw: Option<f64>,
    /// Points fitted.
    pub n_points: usize,
    /// X: minus the slope below the break.
    pub x: Estimate,
    /// T_eff = T/X.
    pub t_eff: Estimate,
    /// The break q (in C).
    pub q: Estimate,
    /// Replicates whose fit failed (too few distinct points), left out of the intervals.
    pub failed_replicates: usize,
    /// Share of replicates whose break sits in the first or last allowed interval.
    pub edge_share: f64,
    /// p-value of the equilibrium relation (one line of slope −1): the null-imposed
    /// bootstrap test of the weighted SSE the break removes.
    pub p_equilibrium: Option<f64>,
    /// `p_equilibrium` below 1 − level: the equilibrium relation is rejected.
    pub violates_equilibrium: bool,
    /// Cautions in words.
    pub cautions: Vec<String>,
}

/// The direct fits of a quench reduction.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QuenchFits {
    /// The settings.
    pub settings: QuenchFitSettings,
    /// The confidence level (the reduction's).
    pub level: f64,
    /// Replicates (the reduction's resamples).
    pub replicates: usize,
    /// All waiting times first, then one per tw.
    pub fits: Vec<QuenchFit>,
}

/// Fits the reduction's points and every replicate's.
///
/// # Errors
/// [`Error::Setting`] for a temperature that is not positive; [`Error::Analysis`] when no
/// curve has enough points with χ for two branches of `min_branch`.
pub fn fit_quenches(r: &QuenchReduction, s: &QuenchFitSettings) -> Result<QuenchFits> {
    if !(s.temperature.is_finite() && s.temperature > 0.0) {
        return Err(Error::Setting(format!(
            "--temperature is {}, expected a positive bath temperature",
            s.temperature
        )));
    }
    check_level(r.settings.level)?;
    let mut tws: Vec<Option<f64>> = vec![None];
    for p in &r.points {
        if !tws.contains(&Some(p.tw)) {
            tws.push(Some(p.tw));
        }
    }
    let fits: Vec<QuenchFit> = tws.iter().filter_map(|&tw| fit_group(r, s, tw)).collect();
    if fits.first().is_none_or(|f| f.tw.is_some()) {
        return Err(Error::Analysis(format!(
            "too few points with chi for a break with {} points on each side",
            s.min_branch
        )));
    }
    Ok(QuenchFits {
        settings: *s,
        level: r.settings.level,
        replicates: r.replicates.len(),
        fits,
    })
}

/// The fit of the points of `tw` (all with None), or None with too few points.
fn fit_group(r: &QuenchReduction, s: &QuenchFitSettings, tw: Option<f64>) -> Option<QuenchFit> {
    let t = s.temperature;
    let idx: Vec<usize> = (0..r.points.len())
        .filter(|&p| {
            tw.is_none_or(|w| r.points[p].tw.to_bits() == w.to_bits()) && r.points[p].chi.is_some()
        })
        .collect();
    let model = model::of(Model::Broken);
    // Weights: the inverse bootstrap variance of the fitted quantity y + C.
    let resp = |c: f64, chi: f64| model.response(c, t * chi);
    let w: Vec<f64> = idx
        .iter()
        .map(|&p| {
            let v: Vec<f64> = r
                .replicates
                .iter()
                .filter_map(|rep| rep[p].1.map(|chi| resp(rep[p].0, chi)))
                .filter(|v| v.is_finite())
                .collect();
            let var = resample::bootstrap_se(&v).powi(2);
            if var.is_finite() && var > 0.0 {
                1.0 / var
            } else {
                f64::NAN
            }
        })
        .collect();
    let floor = w
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .fold(f64::INFINITY, f64::min);
    let w: Vec<f64> = w
        .iter()
        .map(|&v| if v.is_finite() { v } else { floor })
        .collect();
    if !floor.is_finite() {
        return None;
    }
    let mut buf = FitBuffers::default();
    // One fit of points (C, r) with r = y + C the model's fitted quantity.
    let one = |c: &[f64], rr: &[f64], buf: &mut FitBuffers| -> Option<Values> {
        let y: Vec<f64> = c.iter().zip(rr).map(|(&c, &r)| r - c).collect();
        let pts = GroupPoints {
            x: c,
            y: &y,
            r: rr,
            w: &w,
        };
        model.fit(pts, s.min_branch, buf, None)
    };
    let resp_of = |c: &[f64], chi: &[f64]| -> Vec<f64> {
        c.iter().zip(chi).map(|(&c, &chi)| resp(c, chi)).collect()
    };
    // The statistic of the equilibrium test: the weighted SSE the break removes.
    let stat = |v: &Values| v.sol.sse_null - v.sol.sse;
    let c0: Vec<f64> = idx.iter().map(|&p| r.points[p].corr).collect();
    let chi0: Vec<f64> = idx.iter().filter_map(|&p| r.points[p].chi).collect();
    let r0 = resp_of(&c0, &chi0);
    let est = one(&c0, &r0, &mut buf)?;
    let t0 = stat(&est);
    // Replicates moved onto the null (one line of slope −1: r constant at its weighted
    // mean), as the null-imposed bootstrap test of `fit` does.
    let wsum: f64 = w.iter().sum();
    let null_level = r0.iter().zip(&w).map(|(r, w)| r * w).sum::<f64>() / wsum;
    let (mut xs, mut qs, mut failed, mut edges) = (Vec::new(), Vec::new(), 0usize, 0usize);
    let (mut null_n, mut null_ge) = (0usize, 0usize);
    for rep in &r.replicates {
        let c: Vec<f64> = idx.iter().map(|&p| rep[p].0).collect();
        let chi: Vec<f64> = idx.iter().map(|&p| rep[p].1.unwrap_or(f64::NAN)).collect();
        if !c.iter().chain(&chi).all(|v| v.is_finite()) {
            failed += 1;
            continue;
        }
        let rr = resp_of(&c, &chi);
        match one(&c, &rr, &mut buf) {
            Some(v) if v.ratio.is_finite() => {
                xs.push(v.ratio);
                qs.push(v.q);
                edges += usize::from(v.at_edge());
            }
            _ => failed += 1,
        }
        let moved: Vec<f64> = rr
            .iter()
            .zip(&r0)
            .map(|(rb, r0)| rb - r0 + null_level)
            .collect();
        if let Some(v) = one(&c, &moved, &mut buf) {
            null_n += 1;
            null_ge += usize::from(stat(&v) >= t0);
        }
    }
    let p_equilibrium = (null_n > 0).then(|| (1 + null_ge) as f64 / (1 + null_n) as f64);
    let level = r.settings.level;
    let interval = |v: &[f64], e: f64| {
        let iv = resample::interval(e, v, None, IntervalMethod::Percentile, level);
        Estimate::with(e, iv.as_ref())
    };
    let x = interval(&xs, est.ratio);
    let q = interval(&qs, est.q);
    let mut cautions = Vec::new();
    let t_eff = match (x.low, x.high) {
        (Some(lo), Some(hi)) if lo > 0.0 => Estimate {
            estimate: Some(t / est.ratio),
            low: Some(t / hi),
            high: Some(t / lo),
            ..Default::default()
        },
        (Some(_), Some(hi)) => {
            cautions.push(format!(
                "X's interval reaches 0 or below: T_eff is at least {} and has no upper bound \
                 at this precision (more runs narrow it)",
                crate::report::format::sig(t / hi.max(f64::MIN_POSITIVE), 3)
            ));
            Estimate {
                estimate: Some(t / est.ratio),
                low: (hi > 0.0).then(|| t / hi),
                high: None,
                note: Some("X's interval reaches 0: no upper bound".into()),
            }
        }
        _ => Estimate::with(t / est.ratio, None),
    };
    let n_rep = r.replicates.len().max(1);
    let edge_share = edges as f64 / n_rep as f64;
    if est.at_edge() || edge_share > 0.25 {
        cautions.push(format!(
            "the break sits at the edge of the points in {:.0}% of replicates{}: the plateau q \
             is not measured inside the data, and X may describe only the last points",
            100.0 * edge_share,
            if est.at_edge() {
                " and in the estimate"
            } else {
                ""
            }
        ));
    }
    if failed * 100 > n_rep {
        cautions.push(format!(
            "{failed} of {n_rep} replicates could not be fitted and are left out of the intervals"
        ));
    }
    let violates = p_equilibrium.is_some_and(|p| p < 1.0 - level);
    Some(QuenchFit {
        tw,
        n_points: idx.len(),
        x,
        t_eff,
        q,
        failed_replicates: failed,
        edge_share,
        p_equilibrium,
        violates_equilibrium: violates,
        cautions,
    })
}
