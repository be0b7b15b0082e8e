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
use crate::fdplot::{Axes, Parametric, PointVariance, Transform, data_matrix};
use crate::fit::{Base, Workspace, broken, fit_line};
use crate::resample::{self, IntervalMethod, interval};
use crate::settings::{FitSettings, Hold, Model, Weighting};
use ndarray::{Array2, ArrayView1, Axis};
use rayon::prelude::*;
use serde::Serialize;

/// The JSON schema version of [`FitReport`].
pub const SCHEMA: u32 = 2;
/// Replicates per chunk of the resampling product; fixed so results do not depend on threads.
pub(crate) const CHUNK: usize = 64;
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
    /// The p-value of the test that the slope above the break is −1 (the thermometer
    /// check), from resamples centred on the estimate; `None` for the line model, without
    /// a break, or with the break at the edge.
    pub thermometer_p: Option<f64>,
    /// X and its interval can be quoted: a break was detected away from the edge of the
    /// points (always true for the line model).
    pub x_quotable: bool,
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

/// A curve left out of the aging trend, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LeftOut {
    /// Its held time.
    pub held: f64,
    /// Why it was left out.
    pub reason: String,
}

/// How X changes with the held time: a line in log₁₀ of it over the usable curves.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgingTrend {
    /// Which time is held along the curves.
    pub hold: Hold,
    /// The held times of the curves used.
    pub curves_used: Vec<f64>,
    /// The curves left out (no break, break at the edge, not fitted), with the reason.
    pub left_out: Vec<LeftOut>,
    /// `dX / d log₁₀(held time)`, with its percentile interval.
    pub change_per_decade: Estimate,
    /// The interval excludes 0: X changes with age.
    pub changes: bool,
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
    /// X against the held time, over the usable curves.
    pub aging: Option<AgingTrend>,
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

impl Values {
    /// The break sits in the first or last allowed interval between points.
    fn at_edge(&self) -> bool {
        self.q.is_finite()
            && (self.sol.interval == 0 || self.sol.interval + 1 == self.sol.n_intervals)
    }
    /// The scalars a resample keeps.
    fn draw(&self, null_stat: f64) -> Draw {
        Draw {
            ratio: self.ratio,
            q: self.q,
            fast: self.fast,
            intercept: self.sol.a,
            null_stat,
            edge: self.at_edge(),
        }
    }
}

/// What one resample (or leave-one-out fit) of one group keeps: only the scalars the
/// intervals, tests and figures need, so memory grows as 48 bytes per resample and group.
#[derive(Debug, Clone, Copy)]
struct Draw {
    ratio: f64,
    q: f64,
    fast: f64,
    intercept: f64,
    /// The null-imposed equilibrium statistic (NaN for leave-one-out fits).
    null_stat: f64,
    edge: bool,
}

/// Above this share of resamples with the break at the edge, X is not quoted.
const EDGE_SHARE: f64 = 0.05;
/// Bytes kept per resample and group (for the memory estimate).
pub const BYTES_PER_DRAW: usize = std::mem::size_of::<Option<Draw>>();
/// Resampled curves kept for the figure's band (the first ones; quantiles of this many
/// curves are steady to well under a line width).
const BAND_CURVES: usize = 4000;

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
}

/// How point weights are made, the same way in the full fit and in every resample.
#[derive(Debug, Clone)]
enum WeightRule {
    /// All points alike.
    Uniform,
    /// `1 / max(var, floor)` with `var` from the fit's own samples.
    Inverse { pv: PointVariance, floor: f64 },
}

impl WeightRule {
    /// Writes the weights of every point from a row of `W · D` over `drawn` samples.
    fn weights(&self, means: ArrayView1<'_, f64>, drawn: usize, var: &mut [f64], w: &mut [f64]) {
        match self {
            WeightRule::Uniform => w.iter_mut().for_each(|v| *v = 1.0),
            WeightRule::Inverse { pv, floor } => {
                pv.apply(means, drawn, var);
                for (w, v) in w.iter_mut().zip(var.iter()) {
                    *w = 1.0 / v.max(*floor);
                }
            }
        }
    }
}

/// Per-group buffers, so replicate fits do not allocate.
#[derive(Clone)]
struct Scratch {
    x: Vec<f64>,
    y: Vec<f64>,
    r: Vec<f64>,
    w: Vec<f64>,
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
            w: Vec::with_capacity(x.len()),
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

/// One fit's points: x, y and weights of every grid point.
#[derive(Clone, Copy)]
struct Points<'a> {
    x: &'a [f64],
    y: &'a [f64],
    w: &'a [f64],
}

/// Fits one group given all points. Leaves the group's points in `sc` (x, y, w, and the
/// workspace order sorted by x) for [`null_statistic`].
fn fit_group(
    g: &Group,
    pts: Points<'_>,
    spec: Spec,
    sc: &mut Scratch,
    profile: Option<&mut Vec<(f64, f64)>>,
) -> Option<Values> {
    let model = spec.model;
    sc.x.clear();
    sc.y.clear();
    sc.r.clear();
    sc.w.clear();
    for &j in &g.idx {
        sc.x.push(pts.x[j]);
        sc.y.push(pts.y[j]);
        sc.w.push(pts.w[j]);
        sc.r.push(response(model, pts.x[j], pts.y[j]));
    }
    if model == Model::Line {
        return fit_single_line(&sc.x, &sc.r, &sc.w);
    }
    let sol = broken::search(
        &sc.x,
        &sc.r,
        &sc.w,
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
                    sc.fw.push(sc.w[k]);
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
/// (`r − shift`). Reuses the gathered points, their weights and the sorted order.
fn null_statistic(spec: Spec, sc: &mut Scratch, shift: &[f64]) -> f64 {
    sc.r.clear();
    for ((x, y), d) in sc.x.iter().zip(&sc.y).zip(shift) {
        sc.r.push(response(spec.model, *x, *y) - d);
    }
    let sol = if spec.model == Model::Line {
        fit_single_line(&sc.x, &sc.r, &sc.w).map(|v| v.sol)
    } else {
        broken::search(
            &sc.x,
            &sc.r,
            &sc.w,
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

/// The campaign prepared for fitting: parametric points, the data matrix that one row of
/// `W · D` turns into a resample, and the rule that makes point weights.
struct Prepared {
    tf: Transform,
    pm: Parametric,
    /// `[C | χ | C(t,t)]` per sample, then the moment columns the weights need.
    data: Array2<f64>,
    rule: WeightRule,
    /// Weights of the full-data fit.
    weights: Vec<f64>,
    normalized: bool,
}

fn prepare(
    campaign: &Campaign,
    settings: &FitSettings,
    warnings: &mut Vec<String>,
) -> Result<Prepared> {
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
    let kt = settings.units.boltzmann() * settings.temperature;
    let tf = Transform {
        kt,
        normalized,
        points: campaign.n_points(),
    };
    let raw = data_matrix(campaign, normalized);
    let pm = Parametric::new(&raw, tf);
    let finite = |v: &f64| v.is_finite() && (v * v * 1e6).is_finite();
    if !pm
        .x
        .iter()
        .chain(&pm.y)
        .chain(&pm.x_se)
        .chain(&pm.y_se)
        .all(finite)
    {
        return Err(Error::Analysis(
            "the numbers are too large to compute with (their means or spreads overflow); \
             rescale the corr and resp columns"
                .into(),
        ));
    }
    let alpha = if settings.model == Model::Broken {
        1.0
    } else {
        0.0
    };
    let (rule, data) = match settings.weights {
        Weighting::Uniform => (WeightRule::Uniform, raw),
        Weighting::InverseVariance => {
            let pv = PointVariance::new(&raw, tf, alpha, kt);
            let data = pv.extend(&raw);
            (WeightRule::Inverse { pv, floor: 0.0 }, data)
        }
    };
    let mut prep = Prepared {
        tf,
        pm,
        data,
        rule,
        weights: Vec::new(),
        normalized,
    };
    prep.full_weights(warnings);
    Ok(prep)
}

impl Prepared {
    fn means(&self) -> ndarray::Array1<f64> {
        self.data.mean_axis(Axis(0)).unwrap_or_default()
    }

    /// The full-data weights, and the variance floor every resample then shares.
    fn full_weights(&mut self, warnings: &mut Vec<String>) {
        let p = self.tf.points;
        let (mut var, mut w) = (vec![0.0; p], vec![1.0; p]);
        let means = self.means();
        if let WeightRule::Inverse { pv, .. } = &self.rule {
            pv.apply(means.view(), self.data.nrows(), &mut var);
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
                self.rule = WeightRule::Uniform;
            } else {
                pos.sort_by(f64::total_cmp);
                let floor = 1e-6 * pos[pos.len() / 2];
                if var.iter().any(|v| !(*v >= floor)) {
                    warnings.push(
                        "some points have (almost) no spread over samples; their variance was \
                         floored at 1e-6 of the median for the weights"
                            .into(),
                    );
                }
                if let WeightRule::Inverse { floor: f, .. } = &mut self.rule {
                    *f = floor;
                }
            }
        }
        self.rule
            .weights(means.view(), self.data.nrows(), &mut var, &mut w);
        self.weights = w;
    }
}

/// Groups of points: all of them, then one per held time when there are several.
fn make_groups(campaign: &Campaign, settings: &FitSettings, prep: &Prepared) -> Vec<Group> {
    let p = campaign.n_points();
    let pm = &prep.pm;
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
        let scale = idx
            .iter()
            .map(|&j| prep.weights[j] * (pm.x[j].powi(2) + pm.y[j].powi(2)))
            .sum();
        Group { held, scale, idx }
    };
    let mut groups = vec![make(None)];
    if helds.len() > 1 {
        groups.extend(helds.iter().map(|&h| make(Some(h))));
    }
    groups
}

/// Leave-one-sample-out fits (BCa acceleration), weights re-estimated from the `n − 1`
/// samples left.
fn jackknife(
    prep: &Prepared,
    groups: &[Group],
    est: &[Option<Values>],
    spec: Spec,
    scratch: &[Scratch],
) -> Vec<Vec<Option<Draw>>> {
    let n = prep.data.nrows();
    let p = prep.tf.points;
    let full = prep.means();
    (0..n)
        .into_par_iter()
        .map_init(
            || (scratch.to_vec(), vec![0.0; p], vec![0.0; p], full.clone()),
            |(sc, var, w, loo), i| {
                let nf = n as f64;
                loo.assign(&((&full * nf - prep.data.row(i)) / (nf - 1.0)));
                prep.rule.weights(loo.view(), n - 1, var, w);
                let (xr, yr) = (prep.pm.x_jack.row(i), prep.pm.y_jack.row(i));
                let pts = Points {
                    x: xr.as_slice().unwrap_or(&[]),
                    y: yr.as_slice().unwrap_or(&[]),
                    w,
                };
                groups
                    .iter()
                    .zip(sc.iter_mut())
                    .zip(est)
                    .map(|((g, s), e)| {
                        e.and_then(|_| fit_group(g, pts, spec, s, None))
                            .map(|v| v.draw(f64::NAN))
                    })
                    .collect()
            },
        )
        .collect()
}

/// The cluster bootstrap: replicate `b`'s groups are `out[b·G .. (b+1)·G]`. One chunk of
/// replicates is one product `W · D`; chunks are fixed, so results do not depend on threads.
fn bootstrap(
    prep: &Prepared,
    groups: &[Group],
    shifts: &[Option<Vec<f64>>],
    spec: Spec,
    scratch: &[Scratch],
    settings: &FitSettings,
    progress: &dyn Progress,
) -> Vec<Option<Draw>> {
    let (n, p, ng) = (prep.data.nrows(), prep.tf.points, groups.len());
    let b_total = settings.resamples;
    let mut out: Vec<Option<Draw>> = vec![None; b_total * ng];
    progress.start(b_total as u64);
    out.par_chunks_mut(CHUNK * ng).enumerate().for_each_init(
        || {
            let bufs = vec![vec![0.0; p]; 4];
            (scratch.to_vec(), vec![0u32; n], bufs)
        },
        |(sc, counts, bufs), (c, slot)| {
            let b0 = c * CHUNK;
            let rows = slot.len() / ng;
            let mut wm = Array2::<f64>::zeros((rows, n));
            for row in 0..rows {
                resample::draw_counts(settings.seed, (b0 + row) as u64, n, counts);
                for (i, &cnt) in counts.iter().enumerate() {
                    wm[[row, i]] = f64::from(cnt) / n as f64;
                }
            }
            let means = wm.dot(&prep.data);
            for (row, reps) in slot.chunks_mut(ng).enumerate() {
                let [x, y, var, w] = &mut bufs[..] else {
                    return;
                };
                prep.tf.apply(means.row(row), x, y);
                prep.rule.weights(means.row(row), n, var, w);
                let pts = Points { x, y, w };
                for (((g, s), shift), rep) in groups.iter().zip(sc.iter_mut()).zip(shifts).zip(reps)
                {
                    *rep = shift.as_deref().and_then(|shift| {
                        let v = fit_group(g, pts, spec, s, None)?;
                        Some(v.draw(null_statistic(spec, s, shift)))
                    });
                }
            }
            progress.advance(rows as u64);
        },
    );
    progress.finish();
    out
}

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
    let n = campaign.n_samples();
    let p = campaign.n_points();
    let mut warnings = Vec::new();
    let prep = prepare(campaign, settings, &mut warnings)?;
    let groups = make_groups(campaign, settings, &prep);
    crate::budget::check_fit(n, prep.data.ncols(), p, groups.len(), settings.resamples)?;
    let spec = Spec {
        model: settings.model,
        min_branch: settings.min_branch,
    };
    let pm = &prep.pm;
    let full = Points {
        x: &pm.x,
        y: &pm.y,
        w: &prep.weights,
    };

    // Estimates.
    let mut est: Vec<Option<Values>> = Vec::new();
    let mut profiles: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut scratch: Vec<Scratch> = Vec::new();
    for g in &groups {
        let gx: Vec<f64> = g.idx.iter().map(|&j| pm.x[j]).collect();
        let mut sc = Scratch::new(&gx);
        let mut prof = Vec::new();
        est.push(fit_group(g, full, spec, &mut sc, Some(&mut prof)));
        profiles.push(prof);
        scratch.push(sc);
    }
    check_joint(&pm.x, est[0].is_some(), p, settings.min_branch)?;

    // Null-model shifts per group: r̂ − f̂₀, so that r* − shift lies on the null model.
    let shifts: Vec<Option<Vec<f64>>> = groups
        .iter()
        .zip(&est)
        .map(|(g, e)| e.map(|_| null_shift(g, full, settings.model)))
        .collect();
    let jack = jackknife(&prep, &groups, &est, spec, &scratch);
    let reps = bootstrap(&prep, &groups, &shifts, spec, &scratch, settings, progress);
    let ng = groups.len();

    let fits: Vec<GroupFit> = groups
        .iter()
        .enumerate()
        .map(|(gi, g)| {
            let series: Vec<Option<Draw>> = reps.iter().skip(gi).step_by(ng).copied().collect();
            let jk: Vec<Option<Draw>> = jack.iter().map(|r| r[gi]).collect();
            assemble(g, est[gi], &series, &jk, &profiles[gi], settings, n)
        })
        .collect();

    let aging = aging_trend(&groups, &fits, &reps, settings);
    if let Some(a) = &aging
        && a.changes
    {
        warnings.push(aging_sentence(a));
    }
    campaign_warnings(pm, n, &mut warnings);

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
            k: settings.units.boltzmann(),
            axes_used: if prep.normalized {
                Axes::Normalized
            } else {
                Axes::Plain
            },
        },
        n_samples: n,
        waiting_times: campaign.waiting_times(),
        verdict: fits[0].verdict.clone(),
        fits,
        aging,
        warnings,
        points,
    })
}

/// Refuses a joint fit that cannot be made, with the reason.
fn check_joint(x: &[f64], fitted: bool, p: usize, m: usize) -> Result<()> {
    let spread = x.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - x.iter().copied().fold(f64::INFINITY, f64::min);
    if !(spread > 0.0) {
        return Err(Error::Analysis(format!(
            "the mean correlation is {} at every point; the parametric plot needs C to vary",
            fmt_num(x[0])
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

/// Cautions about the whole campaign: no spread between samples, few samples.
fn campaign_warnings(pm: &Parametric, n: usize, warnings: &mut Vec<String>) {
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
             intervals at 20 samples: X 0.93–0.94 for the joint fit, 0.91–0.92 per curve and \
             for the line model; docs/validation.md)"
        ));
    }
    if n < FEW_SAMPLES {
        warnings.push(format!(
            "only {n} samples: bootstrap intervals from fewer than {FEW_SAMPLES} samples are \
             unreliable, usually too narrow (measured at 10 samples: 95% intervals of X cover \
             0.93 jointly and 0.91 per curve; with uniform weights the 5% tests reject up to 8% \
             of true equilibria; docs/validation.md)"
        ));
    }
}

/// `r̂ − f̂₀` per point of the group, where f̂₀ is the fitted null model.
fn null_shift(g: &Group, pts: Points<'_>, model: Model) -> Vec<f64> {
    let gx: Vec<f64> = g.idx.iter().map(|&j| pts.x[j]).collect();
    let gy: Vec<f64> = g.idx.iter().map(|&j| pts.y[j]).collect();
    let gw: Vec<f64> = g.idx.iter().map(|&j| pts.w[j]).collect();
    let sw: f64 = gw.iter().sum();
    match model {
        Model::Broken => {
            let r: Vec<f64> = gx.iter().zip(&gy).map(|(x, y)| x + y).collect();
            let c0 = r.iter().zip(&gw).map(|(r, w)| r * w).sum::<f64>() / sw;
            r.iter().map(|r| r - c0).collect()
        }
        Model::Line => {
            let c0 = gx
                .iter()
                .zip(&gy)
                .zip(&gw)
                .map(|((x, y), w)| w * (x + y))
                .sum::<f64>()
                / sw;
            gx.iter().zip(&gy).map(|(x, y)| y - (c0 - x)).collect()
        }
        Model::Free => match fit_line(&gx, &gy, Some(&gw)) {
            Some(l) => gx
                .iter()
                .zip(&gy)
                .map(|(x, y)| y - l.intercept - l.slope * x)
                .collect(),
            None => vec![0.0; gx.len()],
        },
    }
}

/// `p = (1 + #{T* ≥ T}) / (B + 1)` with `T = (θ̂ − θ₀)²` and `T* = (θ* − θ̂)²`: the
/// resamples centred on the estimate play the null (Hall & Wilson's first guideline).
fn centred_p(estimate: f64, null: f64, reps: &[f64]) -> Option<f64> {
    let ok: Vec<f64> = reps.iter().copied().filter(|v| v.is_finite()).collect();
    if ok.len() < 2 || !estimate.is_finite() {
        return None;
    }
    let t = (estimate - null).powi(2);
    let exceed = ok.iter().filter(|v| (*v - estimate).powi(2) >= t).count();
    Some((1 + exceed) as f64 / (ok.len() + 1) as f64)
}

/// The equilibrium test: the statistic and its p-value against the null-imposed resamples.
///
/// With uniform weights the statistic is a sum of squares in the data's own units, and a
/// resample's means scatter about the data's with `(n − 1)/n` of the variance the data's
/// means have about the truth, so the null statistics are scaled by `n/(n − 1)` (measured:
/// at 10 samples the false-alarm rate falls from 8.4% to the level; docs/validation.md).
/// Inverse-variance weights re-estimated in each resample make the statistic scale-free,
/// and no factor is applied.
fn equilibrium_test(
    g: &Group,
    e: &Values,
    ok: &[&Draw],
    s: &FitSettings,
    n: usize,
) -> (f64, f64, usize) {
    let stat = e.sol.sse_null - e.sol.sse;
    let factor = match s.weights {
        Weighting::Uniform => n as f64 / (n as f64 - 1.0).max(1.0),
        Weighting::InverseVariance => 1.0,
    };
    let nulls: Vec<f64> = ok
        .iter()
        .map(|d| d.null_stat * factor)
        .filter(|d| d.is_finite())
        .collect();
    // Statistics at the level of rounding are zero: data exactly on the no-break model
    // must give p = 1, not a coin toss between rounding errors.
    let tol = 1e-13 * g.scale;
    let stat = if stat.abs() <= tol { 0.0 } else { stat };
    let exceed = nulls.iter().filter(|&&d| d >= stat - tol).count();
    let pval = (1 + exceed) as f64 / (nulls.len() + 1) as f64;
    (stat, pval, nulls.len())
}

fn empty_fit(g: &Group, s: &FitSettings, n: usize, profile: &[(f64, f64)]) -> GroupFit {
    let (tw, t) = match s.hold {
        Hold::Tw => (g.held, None),
        Hold::T => (None, g.held),
    };
    GroupFit {
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
        thermometer_p: None,
        x_quotable: false,
        curve: None,
        profile: profile.iter().map(|&(q, e)| [q, e]).collect(),
        failed_resamples: 0,
        break_at_edge: None,
        verdict: String::new(),
        warnings: Vec::new(),
        ratio_replicates: Vec::new(),
        curve_replicates: Vec::new(),
    }
}

fn assemble(
    g: &Group,
    est: Option<Values>,
    reps: &[Option<Draw>],
    jack: &[Option<Draw>],
    profile: &[(f64, f64)],
    s: &FitSettings,
    n: usize,
) -> GroupFit {
    let mut fit = empty_fit(g, s, n, profile);
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
    let ok: Vec<&Draw> = reps.iter().flatten().collect();
    fit.failed_resamples = reps.len() - ok.len();
    let jack_ok = jack.iter().all(Option::is_some);
    let jk = |f: fn(&Draw) -> f64| -> Option<Vec<f64>> {
        jack_ok.then(|| jack.iter().flatten().map(f).collect())
    };
    let series = |f: fn(&Draw) -> f64| -> Vec<f64> { ok.iter().map(|d| f(d)).collect() };
    let iv = |estimate: f64, f: fn(&Draw) -> f64| {
        interval(estimate, &series(f), jk(f).as_deref(), s.interval, s.level)
    };

    let (stat, pval, nulls) = equilibrium_test(g, &e, &ok, s, n);
    fit.equilibrium_stat = Some(stat);
    fit.equilibrium_p = Some(pval);
    fit.null_resamples = nulls;
    let alpha = s.test_level();
    let violated = pval <= alpha;
    let line = s.model == Model::Line;

    fit.fast_slope = if e.fast.is_finite() {
        Estimate::with(e.fast, iv(e.fast, |d| d.fast).as_ref())
    } else {
        Estimate::none("fewer than 3 points above the break")
    };
    fit.curve = Some(curve_of(&e.draw(f64::NAN), s.model));
    fit.ratio_replicates = series(|d| d.ratio);
    fit.curve_replicates = ok
        .iter()
        .take(BAND_CURVES)
        .map(|d| curve_of(d, s.model))
        .collect();

    let edge = if line {
        false
    } else {
        edge_cautions(&mut fit, g, &e, &ok, s, violated)
    };
    fit.x_quotable = line || (violated && !edge);
    let x_iv = iv(e.ratio, |d| d.ratio);
    fit.ratio = if fit.x_quotable {
        Estimate::with(e.ratio, x_iv.as_ref())
    } else if violated {
        let mut x = Estimate::none(
            "no interval: the break sits at the edge of the points, so X rests on too few of them",
        );
        x.estimate = Some(e.ratio);
        x
    } else {
        Estimate::none("no break detected: X below a break is not identified")
    };
    fit.t_eff = t_eff_estimate(s.temperature, &fit.ratio);
    fit.brk = if line {
        Estimate::default()
    } else if violated {
        Estimate::with(e.q, iv(e.q, |d| d.q).as_ref())
    } else {
        Estimate::none(format!(
            "no break: the data are compatible with equilibrium at the {:.0}% level (p = {})",
            100.0 * alpha,
            fmt_p(pval)
        ))
    };
    if !line && violated && !edge {
        fit.thermometer_p = centred_p(e.fast, -1.0, &series(|d| d.fast));
        // One test, on the joint fit: the per-curve p-values are reported as numbers, but
        // a caution from each of several curves would fire by chance far above the level.
        if g.held.is_none()
            && let Some(p) = fit.thermometer_p.filter(|p| *p <= alpha)
        {
            fit.warnings
                .push(thermometer_sentence(&fit.fast_slope, p, nulls));
        }
    }
    if fit.failed_resamples * 100 > reps.len() {
        fit.warnings.push(format!(
            "{} of {} resamples could not be fitted and were left out; the intervals may be too narrow",
            fit.failed_resamples,
            reps.len()
        ));
    }
    if fit.x_quotable && !line {
        sign_cautions(&mut fit.warnings, e.ratio);
    }
    fit.verdict = verdict(
        &fit,
        s.model,
        violated,
        &fmt_p_resampled(pval, nulls),
        alpha,
    );
    fit
}

/// Cautions about where the break sits; true when it sits at the edge of the points (in
/// the fit itself, or in over [`EDGE_SHARE`] of the resamples), so that X is not quoted
/// with an interval. (At a tenth, the intervals of the curves kept still ran short: the
/// aging trend covered 0.928 at 48 samples; at a twentieth, 0.940; docs/validation.md.)
fn edge_cautions(
    fit: &mut GroupFit,
    g: &Group,
    e: &Values,
    ok: &[&Draw],
    s: &FitSettings,
    violated: bool,
) -> bool {
    if !violated || ok.is_empty() {
        return false;
    }
    let w = &mut fit.warnings;
    let mut edge = e.at_edge();
    let frac = ok.iter().filter(|d| d.edge).count() as f64 / ok.len() as f64;
    fit.break_at_edge = Some(frac);
    if frac > EDGE_SHARE {
        edge = true;
        w.push(format!(
            "the break sits at the edge of the data in {:.0}% of resamples: the slow regime is \
             barely reached (too few points below or above q); q is uncertain and X is not \
             quoted with an interval",
            100.0 * frac
        ));
    }
    let below = e.sol.n_below;
    let above = g.idx.len() - below;
    // Few points on one side is a caution; X is withheld only when the break is pinned
    // at the edge the search allows (in the fit or in many resamples).
    if below.min(above) < (2 * s.min_branch).max(g.idx.len() / 6) {
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
    } else if e.at_edge() {
        w.push(
            "the break sits next to the first or last point the search allows: q and X are \
             uncertain"
                .into(),
        );
    }
    let qs: Vec<f64> = ok.iter().map(|d| d.q).collect();
    if let Some((a, b)) = split_groups(&qs) {
        w.push(format!(
            "the resampled breaks split into separate groups (near {} and near {}): the data \
             support more than one break; look at the profile before quoting q",
            fmt_num(a),
            fmt_num(b)
        ));
    }
    edge
}

/// Cautions for X outside [0, 1].
fn sign_cautions(w: &mut Vec<String>, ratio: f64) {
    if ratio > 1.0 {
        w.push(format!(
            "X = {ratio:.3} > 1 (T_eff below the bath temperature): reported as measured; this \
             happens after heating, or when the response units are off"
        ));
    } else if ratio < 0.0 {
        w.push(format!(
            "X = {ratio:.3} < 0 (negative T_eff): reported as measured; some kinetically \
             constrained systems do this, otherwise suspect the sign of the response"
        ));
    }
}

/// The fitted curve in plot coordinates.
fn curve_of(v: &Draw, model: Model) -> Curve {
    let (slope_above, slope_below) = match model {
        Model::Broken => (-1.0, -v.ratio),
        Model::Free | Model::Line => (v.fast, -v.ratio),
    };
    Curve {
        q: v.q,
        intercept: v.intercept,
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
        // No interval for X (its note says why): none for T_eff either.
        _ => Estimate {
            estimate,
            low: None,
            high: None,
            note: None,
        },
    }
}

/// The thermometer finding in words: neutral about the cause.
fn thermometer_sentence(slope: &Estimate, p: f64, resamples: usize) -> String {
    let v = slope.estimate.unwrap_or(f64::NAN);
    let ends = match (slope.low, slope.high) {
        (Some(lo), Some(hi)) => format!(" [{lo:.3}, {hi:.3}]"),
        _ => String::new(),
    };
    format!(
        "the slope above the break is {v:.3}{ends}, not -1 (p = {}): the thermometer or the \
         response units may be off, the system may be driven, or the curve bends gradually \
         rather than at one break",
        fmt_p_resampled(p, resamples)
    )
}

fn verdict(fit: &GroupFit, model: Model, violated: bool, p: &str, alpha: f64) -> String {
    if model != Model::Line && !violated {
        return format!(
            "equilibrium: no violation of the fluctuation–dissipation relation at the {:.0}% level \
             (p = {p}); with no break, X below a break is not meaningful",
            100.0 * alpha,
        );
    }
    let q = fit.brk.estimate.unwrap_or(f64::NAN);
    let (x, lo, hi) = match (fit.ratio.estimate, fit.ratio.low, fit.ratio.high) {
        (Some(x), Some(lo), Some(hi)) => (x, lo, hi),
        (Some(x), _, _) if !fit.x_quotable => {
            return format!(
                "a break is detected (p = {p}) at C = {q:.3}, at the edge of the points: one \
                 regime is barely reached, so X ({x:.3}) is not quoted with an interval and this \
                 curve is left out of the aging trend"
            );
        }
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
    if lo <= 0.0 && hi >= 0.0 {
        format!(
            "no response in the slow regime: below C = {q:.3} the response stays flat within \
             errors (X compatible with 0, T_eff unbounded), as in coarsening (p = {p})"
        )
    } else if lo <= 1.0 && hi >= 1.0 {
        format!(
            "a break is detected (p = {p}) but X = {x:.3} [{lo:.3}, {hi:.3}] is compatible with 1: \
             the violation is weak at this precision"
        )
    } else if hi < 1.0 && lo > 0.0 {
        format!(
            "one break: slope -1 down to C = {q:.3}, then X = {x:.3} [{lo:.3}, {hi:.3}] at the \
             {pct:.0}% level (p = {p} for equilibrium)"
        )
    } else if lo > 1.0 {
        format!(
            "one break with X = {x:.3} [{lo:.3}, {hi:.3}] above 1: the slow modes look colder \
             than the bath (p = {p})"
        )
    } else {
        format!("one break with negative X = {x:.3} [{lo:.3}, {hi:.3}] (p = {p})")
    }
}

/// The trend of X against log₁₀ of the held time over the usable curves: an ordinary
/// least-squares slope, with a percentile interval from the same resamples (all curves of
/// one resample share its samples, so their correlation is carried).
fn aging_trend(
    groups: &[Group],
    fits: &[GroupFit],
    reps: &[Option<Draw>],
    s: &FitSettings,
) -> Option<AgingTrend> {
    if groups.len() < 3 {
        return None;
    }
    let ng = groups.len();
    let mut used = Vec::new();
    let mut left_out = Vec::new();
    for (gi, (g, f)) in groups.iter().zip(fits).enumerate().skip(1) {
        let held = g.held.unwrap_or(f64::NAN);
        let reason = if f.ratio.estimate.is_none() && f.equilibrium_p.is_none() {
            Some("not fitted")
        } else if !f.x_quotable && f.ratio.estimate.is_some() {
            Some("break at the edge of the points")
        } else if !f.x_quotable {
            Some("no break detected")
        } else if !(held > 0.0) {
            Some("held time not positive (no logarithm)")
        } else {
            None
        };
        match reason {
            Some(r) => left_out.push(LeftOut {
                held,
                reason: r.into(),
            }),
            None => used.push((gi, held.log10(), f.ratio.estimate.unwrap_or(f64::NAN))),
        }
    }
    let mut trend = AgingTrend {
        hold: s.hold,
        curves_used: used.iter().map(|u| 10f64.powf(u.1)).collect(),
        left_out,
        change_per_decade: Estimate::none("fewer than 2 usable curves"),
        changes: false,
    };
    if used.len() < 2 {
        return Some(trend);
    }
    let lx: Vec<f64> = used.iter().map(|u| u.1).collect();
    let estimate = ols_slope(&lx, &used.iter().map(|u| u.2).collect::<Vec<_>>());
    let mut xs = vec![0.0; used.len()];
    let slopes: Vec<f64> = reps
        .chunks(ng)
        .filter_map(|r| {
            for (k, u) in used.iter().enumerate() {
                xs[k] = r[u.0]?.ratio;
            }
            Some(ols_slope(&lx, &xs))
        })
        .collect();
    let iv = interval(estimate, &slopes, None, IntervalMethod::Percentile, s.level);
    trend.change_per_decade = Estimate::with(estimate, iv.as_ref());
    trend.changes = iv.is_some_and(|i| i.low > 0.0 || i.high < 0.0);
    Some(trend)
}

fn ols_slope(x: &[f64], y: &[f64]) -> f64 {
    let n = x.len() as f64;
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    sxy / sxx
}

fn aging_sentence(a: &AgingTrend) -> String {
    let h = a.hold.name();
    let e = &a.change_per_decade;
    let (lo, hi) = (e.low.unwrap_or(f64::NAN), e.high.unwrap_or(f64::NAN));
    format!(
        "X changes with age: {:+.3} [{lo:+.3}, {hi:+.3}] per decade of {h} over {} curves \
         ({h} = {} to {}); the slow regime has not reached its aging limit, so the joint fit \
         mixes ages — quote the per-{h} values or the oldest one",
        e.estimate.unwrap_or(f64::NAN),
        a.curves_used.len(),
        fmt_num(a.curves_used.first().copied().unwrap_or(f64::NAN)),
        fmt_num(a.curves_used.last().copied().unwrap_or(f64::NAN)),
    )
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
