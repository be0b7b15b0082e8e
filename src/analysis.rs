//! The time-domain analysis: from a campaign and settings to X, T_eff, the break and the
//! equilibrium test, jointly and per waiting time.
//!
//! Steps: parametric points (means over samples) → weighted broken-stick fit per group
//! (all waiting times together, then each one) → leave-one-sample-out fits (BCa
//! acceleration) → cluster bootstrap over samples, where one replicate's mean curves are
//! one row of `W · D` (`W` the counts/n, `D` the samples × columns data), computed in
//! fixed chunks in parallel → intervals, the null-calibrated equilibrium test, warnings.
//!
//! The equilibrium test statistic is `Δ = SSE(no break) − SSE(broken stick)`. A break
//! does not exist under the null, so no F table applies (Davies' problem); instead each
//! replicate is moved onto the fitted null model, `r*₀ = r* − r̂ + f̂₀`, and
//! `p = (1 + #{Δ*₀ ≥ Δ}) / (B + 1)`.
//!
//! ## Reference
//! Davies, R. B., Biometrika 74, 33–43 (1987) (a change point under the null);
//! Hall & Wilson, Biometrics 47, 757–762 (1991) (resample under the null);
//! Davison & Hinkley (1997) §3.8 (resampling whole clusters).

use crate::campaign::Campaign;
use crate::error::{Error, Result};
use crate::fdplot::{Axes, Parametric, Transform, data_matrix};
use crate::fit::{Base, Workspace, broken, fit_line};
use crate::resample::{self, IntervalMethod, interval};
use crate::settings::{FitSettings, Hold, Model, Weighting};
use ndarray::Array2;
use rayon::prelude::*;
use serde::Serialize;

/// The JSON schema version of [`FitReport`].
pub const SCHEMA: u32 = 1;
/// Replicates per chunk of the resampling product; fixed so results do not depend on threads.
const CHUNK: usize = 64;
/// Below this many samples the report warns that intervals are unreliable.
pub const FEW_SAMPLES: usize = 20;
/// Below this many samples the report says intervals run a little short (measured).
pub const SMALL_SAMPLES: usize = 40;

/// Receives progress of the resampling; the binary draws a bar, the library is silent.
pub trait Progress: Sync {
    /// Called once with the number of work units.
    fn start(&self, _total: u64) {}
    /// Called as units complete.
    fn advance(&self, _n: u64) {}
    /// Called when the work is done.
    fn finish(&self) {}
}

/// A [`Progress`] that shows nothing.
pub struct Silent;
impl Progress for Silent {}

/// A number with its interval; `None` where the number is undefined, with the reason.
#[derive(Debug, Clone, PartialEq, Serialize, Default)]
pub struct Estimate {
    /// Point estimate.
    pub estimate: Option<f64>,
    /// Lower end of the interval.
    pub low: Option<f64>,
    /// Upper end of the interval.
    pub high: Option<f64>,
    /// Why a number is missing, or how the interval was formed when it differs.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub note: Option<String>,
}

impl Estimate {
    fn with(estimate: f64, iv: Option<&resample::Interval>) -> Self {
        Estimate {
            estimate: Some(estimate),
            low: iv.map(|i| i.low),
            high: iv.map(|i| i.high),
            note: iv.and_then(|i| i.note.clone()),
        }
    }
    fn none(note: impl Into<String>) -> Self {
        Estimate {
            note: Some(note.into()),
            ..Default::default()
        }
    }
}

/// The fitted two-segment curve in plot coordinates: `y = intercept + slope_above · x`
/// for `x >= q`, and slope `slope_below` for `x < q` (continuous at `q`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Curve {
    /// Break.
    pub q: f64,
    /// Intercept of the upper segment.
    pub intercept: f64,
    /// Slope for `x >= q`.
    pub slope_above: f64,
    /// Slope for `x < q`.
    pub slope_below: f64,
}

impl Curve {
    /// The curve's y at x.
    pub fn eval(&self, x: f64) -> f64 {
        let y_q = self.intercept + self.slope_above * self.q;
        if x >= self.q {
            self.intercept + self.slope_above * x
        } else {
            y_q + self.slope_below * (x - self.q)
        }
    }
}

/// The fit of one group of points: all waiting times (`tw = None`) or one waiting time.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GroupFit {
    /// The waiting time held fixed along this curve (`--hold tw`), `None` for the joint fit.
    pub tw: Option<f64>,
    /// The later time held fixed along this curve (`--hold t`), `None` otherwise.
    pub t: Option<f64>,
    /// The fitted model.
    pub model: Model,
    /// Number of independent samples.
    pub n_samples: usize,
    /// Number of parametric points in the group.
    pub n_points: usize,
    /// The fluctuation–dissipation ratio X (minus the slope below the break).
    pub ratio: Estimate,
    /// `T_eff = T / X`; ends are `None` ("unbounded") when X's interval reaches 0.
    pub t_eff: Estimate,
    /// The break q (the correlation where the slope changes).
    #[serde(rename = "break")]
    pub brk: Estimate,
    /// The slope above the break: fitted in the free model; for the fixed model, a free
    /// line through the points above the break, as a check of the quasi-equilibrium slope −1.
    pub fast_slope: Estimate,
    /// The p-value of the test of no break (equilibrium), calibrated by resampling.
    pub equilibrium_p: Option<f64>,
    /// Resamples that calibrated the test (the p-value's floor is `1/(this + 1)`).
    pub null_resamples: usize,
    /// The test statistic `SSE(no break) − SSE(broken stick)`.
    pub equilibrium_stat: Option<f64>,
    /// The break's profile interval: breaks whose SSE lies within the χ²₁ threshold of
    /// the minimum (assumes independent points; the bootstrap interval is the one to quote).
    pub break_profile: Option<[f64; 2]>,
    /// The fitted curve.
    pub curve: Option<Curve>,
    /// `(q, SSE)` over every candidate break.
    pub profile: Vec<[f64; 2]>,
    /// Resamples whose fit failed (excluded from the intervals).
    pub failed_resamples: usize,
    /// The fraction of resamples whose break sits in the first or last allowed interval.
    pub break_at_edge: Option<f64>,
    /// One sentence saying what the data show.
    pub verdict: String,
    /// Cautions in words.
    pub warnings: Vec<String>,
    /// The resampled X values (for figures; not written to JSON).
    #[serde(skip)]
    pub ratio_replicates: Vec<f64>,
    /// The resampled curves (for the figure's band; not written to JSON).
    #[serde(skip)]
    pub curve_replicates: Vec<Curve>,
}

/// A parametric point with its sample errors (for the points CSV and the figures).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PointRecord {
    /// Waiting time.
    pub tw: f64,
    /// Later time.
    pub t: f64,
    /// Parametric x.
    pub x: f64,
    /// Standard error of x.
    pub x_se: f64,
    /// Parametric y.
    pub y: f64,
    /// Standard error of y.
    pub y_se: f64,
}

/// The comparison of X on the first and the last curve (smallest and largest held time).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgingCheck {
    /// Which time is held along the curves.
    pub hold: Hold,
    /// The smallest held time.
    pub first: f64,
    /// The largest held time.
    pub last: f64,
    /// `X(last) − X(first)` with its percentile interval.
    pub ratio_change: Estimate,
}

/// Settings as recorded with the result (resolved axes, the value of k).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SettingsRecord {
    /// The settings as given.
    #[serde(flatten)]
    pub given: FitSettings,
    /// Boltzmann's constant used.
    pub k: f64,
    /// The axes actually used ("plain" or "normalized").
    pub axes_used: Axes,
}

/// Tool name and version, recorded in every result.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ToolInfo {
    /// "fdtemp".
    pub name: &'static str,
    /// The crate version.
    pub version: &'static str,
}

impl Default for ToolInfo {
    fn default() -> Self {
        ToolInfo {
            name: "fdtemp",
            version: env!("CARGO_PKG_VERSION"),
        }
    }
}

/// The full result of a time-domain fit; serialized as the JSON output.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitReport {
    /// JSON schema version.
    pub schema: u32,
    /// The tool that made it.
    pub tool: ToolInfo,
    /// The input file, when there was one.
    pub input: Option<String>,
    /// Settings that shaped the result.
    pub settings: SettingsRecord,
    /// Number of samples.
    pub n_samples: usize,
    /// The waiting times.
    pub waiting_times: Vec<f64>,
    /// The joint fit first, then one per waiting time.
    pub fits: Vec<GroupFit>,
    /// X at the oldest against the youngest waiting time.
    pub aging: Option<AgingCheck>,
    /// What the data show, in one sentence (from the joint fit).
    pub verdict: String,
    /// Cautions about the whole campaign.
    pub warnings: Vec<String>,
    /// The parametric points.
    pub points: Vec<PointRecord>,
}

/// Values from one fit of one group.
#[derive(Debug, Clone, Copy)]
struct Values {
    ratio: f64,
    q: f64,
    fast: f64,
    sol: broken::BreakSolution,
}

/// One replicate's fit of one group and its null-imposed test statistic.
type Replicate = Option<(Values, f64)>;

/// What every fit of a group shares: the model and the least points per branch.
#[derive(Clone, Copy)]
struct Spec {
    model: Model,
    min_branch: usize,
}

/// A group of points and what its fits need.
struct Group {
    /// The held time (tw or t), `None` for the joint fit.
    held: Option<f64>,
    /// `Σ w (x² + y²)`: the size of the weighted data, for rounding tolerances.
    scale: f64,
    idx: Vec<usize>,
    w: Vec<f64>,
}

/// Per-group buffers, so replicate fits do not allocate.
#[derive(Clone)]
struct Scratch {
    x: Vec<f64>,
    y: Vec<f64>,
    r: Vec<f64>,
    fx: Vec<f64>,
    fy: Vec<f64>,
    fw: Vec<f64>,
    ws: Workspace,
}

impl Scratch {
    fn new(x: &[f64]) -> Self {
        Scratch {
            x: Vec::with_capacity(x.len()),
            y: Vec::with_capacity(x.len()),
            r: Vec::with_capacity(x.len()),
            fx: Vec::new(),
            fy: Vec::new(),
            fw: Vec::new(),
            ws: Workspace::sorted_by(x),
        }
    }
}

fn base_of(model: Model) -> Base {
    match model {
        Model::Broken => Base::Constant,
        Model::Free | Model::Line => Base::Line,
    }
}

/// The fitted quantity: `z = y + x` for the fixed first slope, `y` otherwise.
fn response(model: Model, x: f64, y: f64) -> f64 {
    match model {
        Model::Broken => y + x,
        Model::Free | Model::Line => y,
    }
}

/// Fits one group given all points' x and y. Leaves the group's points in `sc` (x, y, and
/// the workspace order sorted by x) for [`null_statistic`].
fn fit_group(
    g: &Group,
    x: &[f64],
    y: &[f64],
    spec: Spec,
    sc: &mut Scratch,
    profile: Option<&mut Vec<(f64, f64)>>,
) -> Option<Values> {
    let model = spec.model;
    sc.x.clear();
    sc.y.clear();
    sc.r.clear();
    for &j in &g.idx {
        sc.x.push(x[j]);
        sc.y.push(y[j]);
        sc.r.push(response(model, x[j], y[j]));
    }
    if model == Model::Line {
        return fit_single_line(&sc.x, &sc.r, &g.w);
    }
    let sol = broken::search(
        &sc.x,
        &sc.r,
        &g.w,
        base_of(model),
        spec.min_branch,
        &mut sc.ws,
        profile,
    )?;
    let (ratio, fast) = match model {
        Model::Broken => {
            sc.fx.clear();
            sc.fy.clear();
            sc.fw.clear();
            for k in 0..sc.x.len() {
                if sc.x[k] >= sol.q {
                    sc.fx.push(sc.x[k]);
                    sc.fy.push(sc.y[k]);
                    sc.fw.push(g.w[k]);
                }
            }
            let fast = fit_line(&sc.fx, &sc.fy, Some(&sc.fw)).map_or(f64::NAN, |l| l.slope);
            (1.0 + sol.c, fast)
        }
        Model::Free | Model::Line => (sol.c - sol.b, sol.b),
    };
    Some(Values {
        ratio,
        q: sol.q,
        fast,
        sol,
    })
}

/// The test statistic `SSE(no break) − SSE(broken stick)` of the resample whose points
/// [`fit_group`] just left in `sc`, after moving it onto the fitted null model
/// (`r − shift`). Reuses the gathered points and the sorted order.
fn null_statistic(g: &Group, spec: Spec, sc: &mut Scratch, shift: &[f64]) -> f64 {
    sc.r.clear();
    for ((x, y), d) in sc.x.iter().zip(&sc.y).zip(shift) {
        sc.r.push(response(spec.model, *x, *y) - d);
    }
    let sol = if spec.model == Model::Line {
        fit_single_line(&sc.x, &sc.r, &g.w).map(|v| v.sol)
    } else {
        broken::search(
            &sc.x,
            &sc.r,
            &g.w,
            base_of(spec.model),
            spec.min_branch,
            &mut sc.ws,
            None,
        )
    };
    sol.map_or(f64::NAN, |s| s.sse_null - s.sse)
}

/// The single free line `r = a + b x` (X = −b), against the null of slope −1.
fn fit_single_line(x: &[f64], r: &[f64], w: &[f64]) -> Option<Values> {
    let line = fit_line(x, r, Some(w))?;
    let sw: f64 = w.iter().sum();
    let z_mean = (0..x.len()).map(|k| w[k] * (r[k] + x[k])).sum::<f64>() / sw;
    let (mut sse, mut sse_null) = (0.0, 0.0);
    for k in 0..x.len() {
        sse += w[k] * (r[k] - line.intercept - line.slope * x[k]).powi(2);
        sse_null += w[k] * (r[k] + x[k] - z_mean).powi(2);
    }
    let x_min = x.iter().copied().fold(f64::INFINITY, f64::min);
    let sol = broken::BreakSolution {
        q: x_min,
        a: line.intercept,
        b: line.slope,
        c: 0.0,
        sse,
        sse_null,
        n_below: 0,
        interval: 0,
        n_intervals: 1,
    };
    Some(Values {
        ratio: -line.slope,
        q: f64::NAN,
        fast: line.slope,
        sol,
    })
}

/// Runs the whole time-domain analysis.
///
/// # Errors
/// [`Error::Setting`] for settings out of range or normalized axes without `corr_eq`;
/// [`Error::Analysis`] when the joint fit is impossible (too few points for two
/// branches, no spread in C).
pub fn analyze(
    campaign: &Campaign,
    settings: &FitSettings,
    input: Option<String>,
    progress: &dyn Progress,
) -> Result<FitReport> {
    settings.validate()?;
    let normalized = match settings.axes {
        Axes::Auto => campaign.corr_eq().is_some(),
        Axes::Plain => false,
        Axes::Normalized if campaign.corr_eq().is_none() => {
            return Err(Error::Setting(
                "--axes normalized needs the column corr_eq (C(t,t)) in the input".into(),
            ));
        }
        Axes::Normalized => true,
    };
    let k = settings.units.boltzmann();
    let n = campaign.n_samples();
    let p = campaign.n_points();
    let tf = Transform {
        kt: k * settings.temperature,
        normalized,
        points: p,
    };
    let data = data_matrix(campaign, normalized);
    let pm = Parametric::new(&data, tf);
    let overflow =
        pm.x.iter()
            .chain(&pm.y)
            .chain(&pm.x_se)
            .chain(&pm.y_se)
            .any(|v| !v.is_finite())
            || pm
                .x
                .iter()
                .chain(&pm.y)
                .chain(&pm.x_se)
                .chain(&pm.y_se)
                .any(|v| !(v * v * 1e6).is_finite());
    if overflow {
        return Err(Error::Analysis(
            "the numbers are too large to compute with (their means or spreads overflow); \
             rescale the corr and resp columns"
                .into(),
        ));
    }
    let m = settings.min_branch;
    let model = settings.model;
    let spec = Spec {
        model,
        min_branch: m,
    };
    let mut warnings = Vec::new();

    // Weights from the sample spread of the fitted quantity.
    let var: Vec<f64> = (0..p)
        .map(|j| match model {
            Model::Broken => pm.x_se[j].powi(2) + pm.y_se[j].powi(2) + 2.0 * pm.xy_cov[j],
            Model::Free | Model::Line => pm.y_se[j].powi(2),
        })
        .collect();
    let weights = point_weights(&var, settings.weights, &mut warnings);

    // Groups: all points, then one per waiting time.
    let tws = campaign.waiting_times();
    let held_of = |j: usize| match settings.hold {
        Hold::Tw => campaign.points()[j].tw,
        Hold::T => campaign.points()[j].t,
    };
    let mut helds: Vec<f64> = (0..p).map(held_of).collect();
    helds.sort_by(f64::total_cmp);
    helds.dedup();
    let in_range = |j: usize| {
        settings
            .range
            .is_none_or(|[lo, hi]| pm.x[j] >= lo && pm.x[j] <= hi)
    };
    let make = |held: Option<f64>| {
        let idx: Vec<usize> = (0..p)
            .filter(|&j| in_range(j) && held.is_none_or(|h| held_of(j).total_cmp(&h).is_eq()))
            .collect();
        let w: Vec<f64> = idx.iter().map(|&j| weights[j]).collect();
        let scale = idx
            .iter()
            .zip(&w)
            .map(|(&j, w)| w * (pm.x[j].powi(2) + pm.y[j].powi(2)))
            .sum();
        Group {
            held,
            scale,
            idx,
            w,
        }
    };
    let mut groups = vec![make(None)];
    if helds.len() > 1 {
        groups.extend(helds.iter().map(|&h| make(Some(h))));
    }

    // Estimates.
    let mut est: Vec<Option<Values>> = Vec::new();
    let mut profiles: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut scratch: Vec<Scratch> = Vec::new();
    for g in &groups {
        let gx: Vec<f64> = g.idx.iter().map(|&j| pm.x[j]).collect();
        let mut sc = Scratch::new(&gx);
        let mut prof = Vec::new();
        est.push(fit_group(g, &pm.x, &pm.y, spec, &mut sc, Some(&mut prof)));
        profiles.push(prof);
        scratch.push(sc);
    }
    let spread = pm.x.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - pm.x.iter().copied().fold(f64::INFINITY, f64::min);
    if !(spread > 0.0) {
        return Err(Error::Analysis(format!(
            "the mean correlation is {} at every point; the parametric plot needs C to vary",
            fmt_num(pm.x[0])
        )));
    }
    if est[0].is_none() {
        return Err(Error::Analysis(format!(
            "cannot fit a break: {} points in all, and each branch needs at least {m} points \
             with distinct C values (lower --min-branch, or add points)",
            p
        )));
    }

    // Null-model shifts per group: r̂ − f̂₀, so that r* − shift lies on the null model.
    let shifts: Vec<Option<Vec<f64>>> = groups
        .iter()
        .zip(&est)
        .map(|(g, e)| e.map(|_| null_shift(g, &pm.x, &pm.y, model)))
        .collect();

    // Jackknife over samples (BCa acceleration).
    let jack: Vec<Vec<Option<Values>>> = (0..n)
        .into_par_iter()
        .map_init(
            || scratch.clone(),
            |sc, i| {
                let (xr, yr) = (pm.x_jack.row(i), pm.y_jack.row(i));
                let (xr, yr) = (xr.as_slice().unwrap_or(&[]), yr.as_slice().unwrap_or(&[]));
                groups
                    .iter()
                    .zip(sc.iter_mut())
                    .zip(&est)
                    .map(|((g, s), e)| e.and_then(|_| fit_group(g, xr, yr, spec, s, None)))
                    .collect()
            },
        )
        .collect();

    // Bootstrap over samples, in chunks of W·D.
    let b_total = settings.resamples;
    progress.start(b_total as u64);
    let n_chunks = b_total.div_ceil(CHUNK);
    let chunk_out: Vec<Vec<Vec<Replicate>>> = (0..n_chunks)
        .into_par_iter()
        .map_init(
            || (scratch.clone(), vec![0u32; n], vec![0.0; p], vec![0.0; p]),
            |(sc, counts, x, y), c| {
                let b0 = c * CHUNK;
                let b1 = (b0 + CHUNK).min(b_total);
                let mut wm = Array2::<f64>::zeros((b1 - b0, n));
                for (row, b) in (b0..b1).enumerate() {
                    resample::draw_counts(settings.seed, b as u64, n, counts);
                    for (i, &cnt) in counts.iter().enumerate() {
                        wm[[row, i]] = f64::from(cnt) / n as f64;
                    }
                }
                let means = wm.dot(&data);
                let out = (0..b1 - b0)
                    .map(|row| {
                        tf.apply(means.row(row), x, y);
                        groups
                            .iter()
                            .zip(sc.iter_mut())
                            .zip(&shifts)
                            .map(|((g, s), shift)| {
                                let shift = shift.as_deref()?;
                                let v = fit_group(g, x, y, spec, s, None)?;
                                Some((v, null_statistic(g, spec, s, shift)))
                            })
                            .collect::<Vec<_>>()
                    })
                    .collect::<Vec<_>>();
                progress.advance((b1 - b0) as u64);
                out
            },
        )
        .collect();
    progress.finish();
    let reps: Vec<&Vec<Replicate>> = chunk_out.iter().flatten().collect();

    // Assemble per-group results.
    let mut fits = Vec::new();
    for (gi, g) in groups.iter().enumerate() {
        let series: Vec<Replicate> = reps.iter().map(|r| r[gi]).collect();
        let jk: Vec<Option<Values>> = jack.iter().map(|r| r[gi]).collect();
        fits.push(assemble(
            g,
            est[gi],
            &series,
            &jk,
            &profiles[gi],
            settings,
            n,
        ));
    }

    let aging = aging_check(&groups, &est, &reps, settings);
    if let Some(a) = &aging
        && let (Some(lo), Some(hi)) = (a.ratio_change.low, a.ratio_change.high)
        && (lo > 0.0 || hi < 0.0)
    {
        let h = a.hold.name();
        warnings.push(format!(
            "X changes with age: from {h} = {} to {h} = {} it moves by {:+.3} [{:+.3}, {:+.3}]; \
             the slow regime has not reached its aging limit, so the joint fit mixes ages — \
             quote the per-{h} values or the oldest one",
            fmt_num(a.first),
            fmt_num(a.last),
            a.ratio_change.estimate.unwrap_or(f64::NAN),
            lo,
            hi
        ));
    }
    let spread = pm
        .x_se
        .iter()
        .chain(&pm.y_se)
        .fold(0.0f64, |m, v| m.max(*v));
    let size = pm.x.iter().chain(&pm.y).fold(0.0f64, |m, v| m.max(v.abs()));
    if !(spread > 1e-9 * size) {
        warnings.push(
            "the samples are (almost) identical: there is no sample-to-sample spread, so the \
             intervals only reflect rounding; check that the samples are independent runs"
                .into(),
        );
    }
    if (FEW_SAMPLES..SMALL_SAMPLES).contains(&n) {
        warnings.push(format!(
            "{n} samples: intervals run a little short at this size (measured coverage of 95% \
             intervals at 20 samples: X 0.93–0.94, break q 0.91; docs/validation.md)"
        ));
    }
    if n < FEW_SAMPLES {
        warnings.push(format!(
            "only {n} samples: bootstrap intervals from fewer than {FEW_SAMPLES} samples are \
             unreliable (usually too narrow)"
        ));
    }

    let points = (0..p)
        .map(|j| PointRecord {
            tw: campaign.points()[j].tw,
            t: campaign.points()[j].t,
            x: pm.x[j],
            x_se: pm.x_se[j],
            y: pm.y[j],
            y_se: pm.y_se[j],
        })
        .collect();
    Ok(FitReport {
        schema: SCHEMA,
        tool: ToolInfo::default(),
        input,
        settings: SettingsRecord {
            given: settings.clone(),
            k,
            axes_used: if normalized {
                Axes::Normalized
            } else {
                Axes::Plain
            },
        },
        n_samples: n,
        waiting_times: tws,
        verdict: fits[0].verdict.clone(),
        fits,
        aging,
        warnings,
        points,
    })
}

fn point_weights(var: &[f64], weighting: Weighting, warnings: &mut Vec<String>) -> Vec<f64> {
    if weighting == Weighting::Uniform {
        return vec![1.0; var.len()];
    }
    let mut pos: Vec<f64> = var
        .iter()
        .copied()
        .filter(|v| *v > 0.0 && v.is_finite())
        .collect();
    if pos.is_empty() {
        warnings.push(
            "every point has zero spread over samples, so inverse-variance weights are \
             undefined; uniform weights used"
                .into(),
        );
        return vec![1.0; var.len()];
    }
    pos.sort_by(f64::total_cmp);
    let floor = 1e-6 * pos[pos.len() / 2];
    if var.iter().any(|v| !(*v >= floor)) {
        warnings.push(
            "some points have (almost) no spread over samples; their variance was floored at \
             1e-6 of the median for the weights"
                .into(),
        );
    }
    var.iter().map(|&v| 1.0 / v.max(floor)).collect()
}

/// `r̂ − f̂₀` per point of the group, where f̂₀ is the fitted null model.
fn null_shift(g: &Group, x: &[f64], y: &[f64], model: Model) -> Vec<f64> {
    let gx: Vec<f64> = g.idx.iter().map(|&j| x[j]).collect();
    let gy: Vec<f64> = g.idx.iter().map(|&j| y[j]).collect();
    match model {
        Model::Broken => {
            let r: Vec<f64> = gx.iter().zip(&gy).map(|(x, y)| x + y).collect();
            let sw: f64 = g.w.iter().sum();
            let c0 = r.iter().zip(&g.w).map(|(r, w)| r * w).sum::<f64>() / sw;
            r.iter().map(|r| r - c0).collect()
        }
        Model::Line => {
            let sw: f64 = g.w.iter().sum();
            let c0 = gx
                .iter()
                .zip(&gy)
                .zip(&g.w)
                .map(|((x, y), w)| w * (x + y))
                .sum::<f64>()
                / sw;
            gx.iter().zip(&gy).map(|(x, y)| y - (c0 - x)).collect()
        }
        Model::Free => match fit_line(&gx, &gy, Some(&g.w)) {
            Some(l) => gx
                .iter()
                .zip(&gy)
                .map(|(x, y)| y - l.intercept - l.slope * x)
                .collect(),
            None => vec![0.0; gx.len()],
        },
    }
}

#[allow(clippy::too_many_arguments)]
fn assemble(
    g: &Group,
    est: Option<Values>,
    reps: &[Replicate],
    jack: &[Option<Values>],
    profile: &[(f64, f64)],
    s: &FitSettings,
    n: usize,
) -> GroupFit {
    let (tw, t) = match s.hold {
        Hold::Tw => (g.held, None),
        Hold::T => (None, g.held),
    };
    let mut fit = GroupFit {
        tw,
        t,
        model: s.model,
        n_samples: n,
        n_points: g.idx.len(),
        ratio: Estimate::default(),
        t_eff: Estimate::default(),
        brk: Estimate::default(),
        fast_slope: Estimate::default(),
        equilibrium_p: None,
        null_resamples: 0,
        equilibrium_stat: None,
        break_profile: None,
        curve: None,
        profile: profile.iter().map(|&(q, e)| [q, e]).collect(),
        failed_resamples: 0,
        break_at_edge: None,
        verdict: String::new(),
        warnings: Vec::new(),
        ratio_replicates: Vec::new(),
        curve_replicates: Vec::new(),
    };
    let Some(e) = est else {
        let why = format!(
            "not fitted: {} points, and each branch needs at least {} with distinct C values",
            g.idx.len(),
            s.min_branch
        );
        fit.ratio = Estimate::none(why.clone());
        fit.t_eff = Estimate::none(why.clone());
        fit.brk = Estimate::none(why.clone());
        fit.fast_slope = Estimate::none(why.clone());
        fit.verdict = why;
        return fit;
    };
    let ok: Vec<&(Values, f64)> = reps.iter().flatten().collect();
    fit.failed_resamples = reps.len() - ok.len();
    let jack_ok = jack.iter().all(Option::is_some);
    let jk = |f: fn(&Values) -> f64| -> Option<Vec<f64>> {
        jack_ok.then(|| jack.iter().flatten().map(f).collect())
    };
    let series = |f: fn(&Values) -> f64| -> Vec<f64> { ok.iter().map(|(v, _)| f(v)).collect() };
    let iv = |estimate: f64, f: fn(&Values) -> f64| {
        interval(estimate, &series(f), jk(f).as_deref(), s.interval, s.level)
    };

    let x_iv = iv(e.ratio, |v| v.ratio);
    fit.ratio = Estimate::with(e.ratio, x_iv.as_ref());
    fit.t_eff = t_eff_estimate(s.temperature, &fit.ratio);
    let q_iv = iv(e.q, |v| v.q);
    fit.fast_slope = match s.model {
        Model::Broken if e.fast.is_finite() => {
            Estimate::with(e.fast, iv(e.fast, |v| v.fast).as_ref())
        }
        Model::Broken => Estimate::none("fewer than 3 points above the break"),
        Model::Free | Model::Line => Estimate::with(e.fast, iv(e.fast, |v| v.fast).as_ref()),
    };
    fit.curve = Some(curve_of(&e, s.model));
    fit.ratio_replicates = series(|v| v.ratio);
    fit.curve_replicates = ok.iter().map(|(v, _)| curve_of(v, s.model)).collect();

    // Equilibrium test.
    let stat = e.sol.sse_null - e.sol.sse;
    let nulls: Vec<f64> = ok
        .iter()
        .map(|(_, d)| *d)
        .filter(|d| d.is_finite())
        .collect();
    // Statistics at the level of rounding are zero: data exactly on the no-break model
    // must give p = 1, not a coin toss between rounding errors.
    let tol = 1e-13 * g.scale;
    let stat = if stat.abs() <= tol { 0.0 } else { stat };
    let exceed = nulls.iter().filter(|&&d| d >= stat - tol).count();
    let pval = (1 + exceed) as f64 / (nulls.len() + 1) as f64;
    fit.equilibrium_stat = Some(stat);
    fit.equilibrium_p = Some(pval);
    fit.null_resamples = nulls.len();
    let alpha = 1.0 - s.level;
    let violated = pval < alpha;

    if s.model == Model::Line {
        fit.brk = Estimate::none("the single-line model has no break");
    } else if violated {
        fit.brk = Estimate::with(e.q, q_iv.as_ref());
    } else {
        fit.brk = Estimate::none(format!(
            "no break: the data are compatible with equilibrium at the {:.0}% level (p = {})",
            100.0 * alpha,
            fmt_p(pval)
        ));
    }
    // Profile interval of the break.
    let params = if s.model == Model::Broken { 3.0 } else { 4.0 };
    let dof = g.idx.len() as f64 - params;
    if dof > 0.0 && violated && s.model != Model::Line {
        let chi = statrs::distribution::ChiSquared::new(1.0)
            .map(|d| statrs::distribution::ContinuousCDF::inverse_cdf(&d, s.level))
            .unwrap_or(3.84);
        let thr = e.sol.sse * (1.0 + chi / dof);
        let inside: Vec<f64> = profile
            .iter()
            .filter(|(_, sse)| *sse <= thr)
            .map(|(q, _)| *q)
            .collect();
        if let (Some(lo), Some(hi)) = (
            inside.iter().copied().reduce(f64::min),
            inside.iter().copied().reduce(f64::max),
        ) {
            fit.break_profile = Some([lo, hi]);
        }
    }

    // Warnings.
    let w = &mut fit.warnings;
    let mut edge_flagged = false;
    if fit.failed_resamples * 100 > reps.len() {
        w.push(format!(
            "{} of {} resamples could not be fitted and were left out; the intervals may be too narrow",
            fit.failed_resamples,
            reps.len()
        ));
    }
    let n_int = e.sol.n_intervals;
    if violated && !ok.is_empty() && s.model != Model::Line {
        let edge = ok
            .iter()
            .filter(|(v, _)| v.sol.interval == 0 || v.sol.interval + 1 == n_int)
            .count() as f64
            / ok.len() as f64;
        fit.break_at_edge = Some(edge);
        if edge > 0.1 {
            edge_flagged = true;
            w.push(format!(
                "the break sits at the edge of the data in {:.0}% of resamples: the slow regime is \
                 barely reached (too few points below or above q); q and X are uncertain",
                100.0 * edge
            ));
        }
        let below = e.sol.n_below;
        let above = g.idx.len() - below;
        if below.min(above) < (2 * s.min_branch).max(g.idx.len() / 6) {
            edge_flagged = true;
            let (side, k) = if below < above {
                ("below", below)
            } else {
                ("above", above)
            };
            w.push(format!(
                "only {k} points lie {side} the break: that regime is barely resolved, so q, the \
                 slope {side} it and their intervals are uncertain (add times that reach further \
                 into it)"
            ));
        }
        if let Some((a, b)) = split_groups(&series(|v| v.q)) {
            w.push(format!(
                "the resampled breaks split into separate groups (near {} and near {}): the data \
                 support more than one break; look at the profile before quoting q",
                fmt_num(a),
                fmt_num(b)
            ));
        }
    }
    // With the break at the edge the slope above it rests on a few points: no verdict on
    // the thermometer then. The check warns on the joint fit, or on one waiting time when
    // the departure is also large (one of several per-tw checks misses -1 by chance 5% of
    // the time); below 2% the check itself can be off (errors in both variables).
    if let (Some(v), Some(lo), Some(hi)) = (
        fit.fast_slope.estimate,
        fit.fast_slope.low,
        fit.fast_slope.high,
    ) && (hi < -1.0 || lo > -1.0)
        && (v + 1.0).abs() > if g.held.is_none() { 0.02 } else { 0.1 }
        && !edge_flagged
    {
        w.push(format!(
            "the slope above the break is {:.3} [{:.3}, {:.3}], not -1: the thermometer or the \
             response units are off, or the system is driven",
            fit.fast_slope.estimate.unwrap_or(f64::NAN),
            lo,
            hi
        ));
    }
    if violated {
        if e.ratio > 1.0 {
            w.push(format!(
                "X = {:.3} > 1 (T_eff below the bath temperature): reported as measured; this \
                 happens after heating, or when the response units are off",
                e.ratio
            ));
        } else if e.ratio < 0.0 {
            w.push(format!(
                "X = {:.3} < 0 (negative T_eff): reported as measured; some kinetically \
                 constrained systems do this, otherwise suspect the sign of the response",
                e.ratio
            ));
        }
    }
    fit.verdict = verdict(
        &fit,
        s.model,
        violated,
        &fmt_p_resampled(pval, nulls.len()),
        alpha,
    );
    fit
}

/// The fitted curve in plot coordinates.
fn curve_of(v: &Values, model: Model) -> Curve {
    let (slope_above, slope_below) = match model {
        Model::Broken => (-1.0, -v.ratio),
        Model::Free | Model::Line => (v.sol.b, v.sol.b - v.sol.c),
    };
    Curve {
        q: v.q,
        intercept: v.sol.a,
        slope_above,
        slope_below,
    }
}

/// Maps X's interval to T_eff = T/X (monotone), with `None` ends where X's interval reaches 0.
fn t_eff_estimate(temperature: f64, ratio: &Estimate) -> Estimate {
    let Some(x) = ratio.estimate else {
        return Estimate::none("X is undefined");
    };
    let estimate = (x != 0.0).then(|| temperature / x);
    match (ratio.low, ratio.high) {
        (Some(lo), Some(hi)) if lo > 0.0 || hi < 0.0 => Estimate {
            estimate,
            low: Some(temperature / hi),
            high: Some(temperature / lo),
            note: None,
        },
        (Some(_), Some(hi)) if hi > 0.0 => Estimate {
            estimate,
            low: Some(temperature / hi),
            high: None,
            note: Some("unbounded: X's interval reaches 0, so T_eff has no upper limit".into()),
        },
        (Some(_), Some(_)) => Estimate {
            estimate,
            low: None,
            high: None,
            note: Some("unbounded: X's interval reaches 0".into()),
        },
        _ => Estimate {
            estimate,
            low: None,
            high: None,
            note: Some("no interval".into()),
        },
    }
}

fn verdict(fit: &GroupFit, model: Model, violated: bool, p: &str, alpha: f64) -> String {
    let (x, lo, hi) = match (fit.ratio.estimate, fit.ratio.low, fit.ratio.high) {
        (Some(x), Some(lo), Some(hi)) => (x, lo, hi),
        _ => return "no interval for X could be formed".into(),
    };
    if model == Model::Line {
        return if violated {
            format!(
                "one line of slope -X with X = {x:.3} [{lo:.3}, {hi:.3}]: the slope differs \
                 from the equilibrium -1 (p = {p})"
            )
        } else {
            format!(
                "equilibrium: the slope is compatible with -1 (p = {p}); X = {x:.3} [{lo:.3}, {hi:.3}]"
            )
        };
    }
    let pct = 100.0 * (1.0 - alpha);
    if !violated {
        return format!(
            "equilibrium: no violation of the fluctuation–dissipation relation at the {:.0}% level \
             (p = {p}); with no break, X below a break is not meaningful",
            100.0 * alpha,
        );
    }
    let q = fit.brk.estimate.unwrap_or(f64::NAN);
    if lo <= 0.0 && hi >= 0.0 {
        format!(
            "no response in the slow regime: below C = {q:.3} the response stays flat within \
             errors (X compatible with 0, T_eff unbounded), as in coarsening (p = {})",
            p
        )
    } else if lo <= 1.0 && hi >= 1.0 {
        format!(
            "a break is detected (p = {}) but X = {x:.3} [{lo:.3}, {hi:.3}] is compatible with 1: \
             the violation is weak at this precision",
            p
        )
    } else if hi < 1.0 && lo > 0.0 {
        format!(
            "one break: slope -1 down to C = {q:.3}, then X = {x:.3} [{lo:.3}, {hi:.3}] at the \
             {pct:.0}% level (p = {} for equilibrium)",
            p
        )
    } else if lo > 1.0 {
        format!(
            "one break with X = {x:.3} [{lo:.3}, {hi:.3}] above 1: the slow modes look colder \
             than the bath (p = {})",
            p
        )
    } else {
        format!(
            "one break with negative X = {x:.3} [{lo:.3}, {hi:.3}] (p = {})",
            p
        )
    }
}

fn aging_check(
    groups: &[Group],
    est: &[Option<Values>],
    reps: &[&Vec<Replicate>],
    s: &FitSettings,
) -> Option<AgingCheck> {
    if groups.len() < 3 {
        return None;
    }
    let (first, last) = (1, groups.len() - 1);
    let diffs: Vec<f64> = reps
        .iter()
        .filter_map(|r| Some(r[last]?.0.ratio - r[first]?.0.ratio))
        .collect();
    let estimate = est[last]?.ratio - est[first]?.ratio;
    let iv = interval(estimate, &diffs, None, IntervalMethod::Percentile, s.level)?;
    Some(AgingCheck {
        hold: s.hold,
        first: groups[first].held.unwrap_or(f64::NAN),
        last: groups[last].held.unwrap_or(f64::NAN),
        ratio_change: Estimate::with(estimate, Some(&iv)),
    })
}

/// Detects a split of replicate breaks into separate groups: the largest gap inside the
/// central 95% is wider than a quarter of that range, with at least 5% on each side.
fn split_groups(values: &[f64]) -> Option<(f64, f64)> {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    if v.len() < 40 {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let (a, b) = (v.len() * 25 / 1000, v.len() - 1 - v.len() * 25 / 1000);
    let central = &v[a..=b];
    let range = central[central.len() - 1] - central[0];
    let scale = central[0].abs().max(central[central.len() - 1].abs());
    // A spread at the level of rounding is no spread.
    if !(range > 1e-9 * scale.max(f64::MIN_POSITIVE)) {
        return None;
    }
    let (gap_at, gap) = central
        .windows(2)
        .enumerate()
        .map(|(i, w)| (i, w[1] - w[0]))
        .max_by(|a, b| a.1.total_cmp(&b.1))?;
    let below = gap_at + 1;
    let above = central.len() - below;
    let min_side = central.len() / 20;
    (gap > 0.25 * range && below >= min_side && above >= min_side).then(|| {
        let med = |s: &[f64]| s[s.len() / 2];
        (med(&central[..below]), med(&central[below..]))
    })
}

/// Formats a p-value for reports.
pub fn fmt_p(p: f64) -> String {
    if p < 0.001 {
        format!("{p:.1e}")
    } else {
        format!("{p:.3}")
    }
}

/// Formats a resampling p-value: at its floor `1/(B+1)` (no null resample reached the
/// observed statistic) it is only an upper bound, written "≤".
pub fn fmt_p_resampled(p: f64, resamples: usize) -> String {
    let floor = 1.0 / (resamples as f64 + 1.0);
    if p <= floor * (1.0 + 1e-9) {
        format!("≤ {}", fmt_p(p))
    } else {
        fmt_p(p)
    }
}

/// Formats a number compactly for reports.
pub fn fmt_num(v: f64) -> String {
    if v == 0.0 || (v.abs() >= 1e-3 && v.abs() < 1e5) {
        let s = format!("{v:.4}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:.3e}")
    }
}
