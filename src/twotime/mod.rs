//! The two-time (time-domain) analysis: from a campaign of C(t,tw) and χ(t,tw) over
//! independent samples to X, T_eff, the break and the tests, jointly and per curve.
//!
//! Data flow one way, one room per stage (docs/architecture.md):
//!
//! 1. [`campaign`]: the data model, samples × (tw, t) points, validated once;
//! 2. [`points`]: parametric points from sample means, and the data matrix `D`;
//! 3. [`model`]: the models behind one interface ([`model::FdModel`]);
//! 4. `fitting`: one fit of one group of points;
//! 5. `resampling`: weights, the leave-one-out fits and the cluster bootstrap
//!    (one resample's means are one row of `W · D`);
//! 6. `assess` and `aging`: intervals, tests and where the break sits, as typed
//!    [`findings`];
//! 7. [`result`]: what the JSON carries and the report layer renders.

pub mod campaign;
pub mod design;
pub mod findings;
pub mod model;
pub mod points;
pub mod result;
pub mod settings;

mod aging;
mod assess;
mod fitting;
mod lack_of_fit;
pub mod limit;
pub mod observables;
pub mod overlap;
mod resampling;
pub mod shape;
pub mod two_time;

pub use crate::common::{Estimate, Progress, Silent, ToolInfo};
pub use campaign::{Campaign, GridPoint};
pub use findings::{Caution, Finding, Subject, Verdict};
pub use result::{
    AgingTrend, Calibrated, CalibratedInterval, Curve, FitReport, GroupFit, LeftOut, PointRecord,
    SCHEMA, SettingsRecord, TwoTimeRecord,
};
pub use result::{ShapeFit, ShapeTest, ShapeVerdict, StaticComparison, XAtC};
pub use settings::{FitSettings, Hold, Model, Weighting};
pub use two_time::{TwoTime, TwoTimePoint, TwoTimeSettings};

pub(crate) use fitting::BYTES_PER_DRAW;
pub use resampling::chunk_rows;

use crate::error::{Error, Result};
use crate::fit::smooth::SmoothFit;
use findings::{FEW_SAMPLES, SMALL_SAMPLES};
use fitting::{Group, Points, Scratch, Spec, fit_group, lof_null, null_shift, shape_full};
use model::{Draw, Values};
use points::{Axes, Parametric};
use rayon::prelude::*;
use resampling::Prepared;

/// Runs the whole time-domain analysis.
///
/// # Errors
/// [`Error::Setting`] for settings out of range, normalized axes without `corr_eq`, or a
/// resampling that would not fit in memory; [`Error::Analysis`] when the joint fit is
/// impossible (too few points for two branches, no spread in C).
pub fn analyze(
    campaign: &Campaign,
    settings: &FitSettings,
    input: Option<String>,
    progress: &dyn Progress,
) -> Result<FitReport> {
    settings.validate()?;
    if settings.limit {
        limit::check(campaign, settings)?;
    }
    let spec = Spec {
        model: model::of(settings.model),
        min_branch: settings.min_branch,
    };
    let mut cautions = Vec::new();
    let prep = resampling::prepare(campaign, settings, spec, &mut cautions)?;
    let groups = resampling::make_groups(campaign, settings, &prep);
    let (n, p) = (campaign.n_samples(), campaign.n_points());
    crate::budget::check_fit(n, prep.data.ncols(), p, groups.len(), settings.resamples)?;
    let fits = fit_all(&prep, &groups, spec, settings, progress)?;
    let aging = aging::aging_trend(&groups, &fits.0, &fits.1, settings);
    let curved = fits.0.iter().any(|f| {
        f.cautions
            .iter()
            .any(|c| matches!(c.finding, Finding::LackOfFit { .. }))
    });
    cautions.extend(
        aging
            .as_ref()
            .and_then(|a| aging::aging_finding(a, curved))
            .map(campaign_caution),
    );
    campaign_cautions(&prep.pm, n, &mut cautions);
    let age_limit = settings.limit.then(|| {
        limit::age_limit(campaign, &prep, settings, fits.0[0].brk.estimate)
            .map_err(|e| e.to_string())
    });
    if let Some(Ok(l)) = &age_limit {
        if l.alpha_unresolved {
            cautions.push(campaign_caution(Finding::LimitApproachUnresolved {
                share: l.alpha_at_edge_share,
            }));
        }
        if l.x_inf.low.is_some_and(|v| v <= 0.0) {
            cautions.push(campaign_caution(Finding::LimitUnbounded));
        }
    }
    let ng = groups.len();
    let ratio_draws = fits
        .1
        .iter()
        .step_by(ng)
        .map(|d| d.map_or(f64::NAN, |d| d.ratio))
        .collect();
    let mut r = report(campaign, settings, input, &prep, fits.0, aging, cautions);
    r.age_limit = age_limit;
    r.ratio_draws = ratio_draws;
    Ok(r)
}

/// The estimates, the leave-one-out fits and the bootstrap of every group, assessed.
fn fit_all(
    prep: &Prepared<'_>,
    groups: &[Group],
    spec: Spec,
    settings: &FitSettings,
    progress: &dyn Progress,
) -> Result<(Vec<GroupFit>, Vec<Option<Draw>>)> {
    let pm = &prep.pm;
    let full = Points {
        x: &pm.x,
        y: &pm.y,
        w: &prep.weights,
    };
    let mut est: Vec<Option<Values>> = Vec::new();
    let mut profiles: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut scratch: Vec<Scratch> = Vec::new();
    for g in groups {
        let gx: Vec<f64> = g.idx.iter().map(|&j| pm.x[j]).collect();
        let mut sc = Scratch::new(&gx);
        let mut prof = Vec::new();
        est.push(fit_group(g, full, spec, &mut sc, Some(&mut prof)));
        profiles.push(prof);
        scratch.push(sc);
    }
    check_joint(&pm.x, est[0].is_some(), pm.x.len(), settings.min_branch)?;
    // Null-model shifts per group: r̂ − f̂₀, so that r* − shift lies on the null model.
    let shifts: Vec<Option<Vec<f64>>> = groups
        .iter()
        .zip(&est)
        .map(|(g, e)| e.map(|_| null_shift(g, full, spec)))
        .collect();
    let ng = groups.len();
    // Lack of fit per curve; with several curves, the joint statistic is their sum (the
    // joint fit's own statistic only when no single curve could be fitted).
    let own_joint = est.iter().skip(1).all(Option::is_none);
    let lof: Vec<Option<(f64, lack_of_fit::LofNull)>> = groups
        .iter()
        .zip(&est)
        .enumerate()
        .map(|(gi, (g, e))| {
            let e = e.as_ref().filter(|_| gi > 0 || own_joint)?;
            Some(lof_null(g, full, spec, e))
        })
        .collect();
    let lof_nulls: Vec<Option<lack_of_fit::LofNull>> = lof
        .iter()
        .map(|l| l.as_ref().map(|l| l.1.clone()))
        .collect();
    // The smooth X(C) beside the broken stick, per group.
    let shapes: Vec<Option<(shape::Setup, SmoothFit, f64)>> = groups
        .iter()
        .zip(&est)
        .map(|(g, e)| {
            let e = e.as_ref().filter(|_| settings.model == Model::Smooth)?;
            shape_full(g, full, spec, e, settings.constraint())
        })
        .collect();
    let setups: Vec<Option<shape::Setup>> = shapes
        .iter()
        .map(|s| s.as_ref().map(|s| s.0.clone()))
        .collect();
    // Only BCa uses the leave-one-out fits (its acceleration).
    let jack = if settings.interval == crate::resample::IntervalMethod::Bca {
        resampling::jackknife(prep, groups, &est, spec, &scratch)
    } else {
        Vec::new()
    };
    let nulls = resampling::Nulls {
        equilibrium: &shifts,
        lack_of_fit: &lof_nulls,
        shape: &setups,
    };
    let resampling::Replicates { draws: reps, rows } =
        resampling::bootstrap(prep, groups, &nulls, spec, &scratch, settings, progress);
    let n = prep.data.nrows();
    let lof_tests = lof_series(&lof, &reps, ng);
    let curves = ng.saturating_sub(1).max(1);
    // The groups are assessed side by side (each alone: intervals, tests, shape).
    let fits = groups
        .par_iter()
        .enumerate()
        .map(|(gi, g)| {
            let series: Vec<Option<Draw>> = reps.iter().skip(gi).step_by(ng).copied().collect();
            let jk: Vec<Option<Draw>> = jack.iter().map(|r| r[gi]).collect();
            let input = assess::GroupInput {
                group: g,
                est: est[gi],
                reps: &series,
                jack: &jk,
                profile: &profiles[gi],
                lack_of_fit: lof_tests[gi].as_ref(),
                curves,
            };
            let mut fit = assess::assess(&input, spec, settings, n);
            if let Some((setup, full, stat)) = &shapes[gi] {
                let level = if g.held.is_none() {
                    settings.test_level()
                } else {
                    settings.test_level() / curves as f64
                };
                let group_rows: Vec<f64> = rows
                    .chunks_exact(shape::ROW)
                    .skip(gi)
                    .step_by(ng)
                    .flatten()
                    .copied()
                    .collect();
                let input = shape::ShapeInput {
                    setup,
                    full: *full,
                    stat: *stat,
                    rows: &group_rows,
                    level,
                    scale: g.scale,
                };
                fit.shape = Some(shape::assess(&input, &fit, settings));
            }
            fit
        })
        .collect();
    Ok((fits, reps))
}

/// Each group's lack-of-fit statistic with its resampled statistics (`b·G + g` in `reps`);
/// the joint fit of several curves gets the sums over the curves, and a resample counts
/// only when every fitted curve's statistic is defined in it.
fn lof_series(
    lof: &[Option<(f64, lack_of_fit::LofNull)>],
    reps: &[Option<Draw>],
    ng: usize,
) -> Vec<Option<(f64, Vec<f64>)>> {
    let per_group = |gi: usize| -> Vec<f64> {
        reps.iter()
            .skip(gi)
            .step_by(ng)
            .map(|d| d.map_or(f64::NAN, |d| d.lof_stat))
            .collect()
    };
    let mut out: Vec<Option<(f64, Vec<f64>)>> = (0..ng)
        .map(|gi| lof[gi].as_ref().map(|(t, _)| (*t, per_group(gi))))
        .collect();
    if ng > 1 && out[0].is_none() {
        let curves: Vec<&(f64, Vec<f64>)> = out[1..].iter().flatten().collect();
        if !curves.is_empty() {
            let stat = curves.iter().map(|c| c.0).sum();
            let b = curves[0].1.len();
            let sums = (0..b)
                .map(|k| curves.iter().map(|c| c.1[k]).sum())
                .collect();
            out[0] = Some((stat, sums));
        }
    }
    out
}

/// The report: the fits, the points and what shaped them.
fn report(
    campaign: &Campaign,
    settings: &FitSettings,
    input: Option<String>,
    prep: &Prepared<'_>,
    fits: Vec<GroupFit>,
    aging: Option<AgingTrend>,
    cautions: Vec<Caution>,
) -> FitReport {
    let pm = &prep.pm;
    let points = (0..campaign.n_points())
        .map(|j| PointRecord {
            tw: campaign.points()[j].tw,
            t: campaign.points()[j].t,
            x: pm.x[j],
            x_se: pm.x_se[j],
            y: pm.y[j],
            y_se: pm.y_se[j],
        })
        .collect();
    FitReport {
        schema: SCHEMA,
        tool: ToolInfo::default(),
        input,
        settings: SettingsRecord {
            given: settings.clone(),
            k: settings.units.boltzmann(),
            axes_used: if prep.normalized {
                Axes::Normalized
            } else {
                Axes::Plain
            },
            slope_level: assess::slope_level(settings.level, campaign.n_samples()),
            two_time: None,
        },
        n_samples: campaign.n_samples(),
        excluded_samples: Vec::new(),
        waiting_times: campaign.waiting_times(),
        verdict: fits[0].verdict.clone(),
        fits,
        aging,
        age_limit: None,
        cautions,
        points,
        two_time: None,
        observable: None,
        ratio_draws: Vec::new(),
    }
}

/// Refuses a joint fit that cannot be made, with the reason.
fn check_joint(x: &[f64], fitted: bool, p: usize, m: usize) -> Result<()> {
    let spread = x.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - x.iter().copied().fold(f64::INFINITY, f64::min);
    if !(spread > 0.0) {
        return Err(Error::Analysis(format!(
            "the mean correlation is {} at every point; the parametric plot needs C to vary",
            x[0]
        )));
    }
    if !fitted {
        return Err(Error::Analysis(format!(
            "cannot fit a break: {p} points in all, and each branch needs at least {m} points \
             with distinct C values (lower --min-branch, or add points)"
        )));
    }
    Ok(())
}

fn campaign_caution(finding: Finding) -> Caution {
    Caution {
        subject: Subject::Campaign,
        finding,
    }
}

/// Cautions about the whole campaign: no spread between samples, few samples.
fn campaign_cautions(pm: &Parametric, n: usize, cautions: &mut Vec<Caution>) {
    let spread = pm
        .x_se
        .iter()
        .chain(&pm.y_se)
        .fold(0.0f64, |m, v| m.max(*v));
    let size = pm.x.iter().chain(&pm.y).fold(0.0f64, |m, v| m.max(v.abs()));
    if !(spread > 1e-9 * size) {
        cautions.push(campaign_caution(Finding::IdenticalSamples));
    }
    if (FEW_SAMPLES..SMALL_SAMPLES).contains(&n) {
        cautions.push(campaign_caution(Finding::SmallSamples { samples: n }));
    }
    if n < FEW_SAMPLES {
        cautions.push(campaign_caution(Finding::FewSamples {
            samples: n,
            limit: FEW_SAMPLES,
        }));
    }
}
