//! The models of the parametric plot, behind one interface. A model says what quantity it
//! fits, fits it on a group's points with weights, compares itself with its no-break
//! (null) model, and gives the quantities the resampling keeps and the curve it draws.
//!
//! To add a model: write one file here implementing [`FdModel`], add its variant to
//! [`Model`](super::settings::Model) and one line to [`of`]. Nothing in the orchestration
//! changes.

mod broken;
mod free;
mod line;
mod smooth;

use super::result::Curve;
use super::settings::Model;
use crate::fit::broken::{MAX_RESPONSES, search, search_each};
use crate::fit::{Base, BreakSolution, Workspace};

/// The model registered for each `--model` choice.
pub fn of(kind: Model) -> &'static dyn FdModel {
    match kind {
        Model::Broken => &broken::FixedSlope,
        Model::Free => &free::FreeSlopes,
        Model::Line => &line::SingleLine,
        Model::Smooth => &smooth::BrokenBesideSmooth,
    }
}

/// One group's points, gathered: plot coordinates, the fitted response and the weights.
#[derive(Clone, Copy)]
pub struct GroupPoints<'a> {
    /// x per point.
    pub x: &'a [f64],
    /// y per point.
    pub y: &'a [f64],
    /// The model's fitted quantity per point ([`FdModel::response`]).
    pub r: &'a [f64],
    /// Weights.
    pub w: &'a [f64],
}

/// Buffers a model may use while fitting, so resampled fits do not allocate.
#[derive(Debug, Clone, Default)]
pub struct FitBuffers {
    /// The break search's scratch (its sort order and the x part of the last search).
    pub ws: Workspace,
}

/// The values of one fit of one group.
#[derive(Debug, Clone, Copy)]
pub struct Values {
    /// X: minus the slope below the break (or of the one line).
    pub ratio: f64,
    /// The break (NaN without one).
    pub q: f64,
    /// The slope above the break (the thermometer's check), NaN when undefined.
    pub fast: f64,
    /// The least-squares solution, with the SSE of the model and of its null.
    pub sol: BreakSolution,
}

impl Values {
    /// The break sits in the first or last allowed interval between points.
    pub fn at_edge(&self) -> bool {
        self.q.is_finite()
            && (self.sol.interval == 0 || self.sol.interval + 1 == self.sol.n_intervals)
    }

    /// The scalars a resample keeps.
    pub fn draw(&self, null_stat: f64) -> Draw {
        Draw {
            ratio: self.ratio,
            q: self.q,
            fast: self.fast,
            intercept: self.sol.a,
            null_stat,
            lof_stat: f64::NAN,
            edge: self.at_edge(),
        }
    }
}

/// What one resample (or leave-one-out fit) of one group keeps: only the scalars the
/// intervals, tests and figures need, so memory grows as 56 bytes per resample and group
/// (`fitting::BYTES_PER_DRAW` follows its size).
#[derive(Debug, Clone, Copy)]
pub struct Draw {
    /// X.
    pub ratio: f64,
    /// The break.
    pub q: f64,
    /// The slope above the break.
    pub fast: f64,
    /// The intercept of the upper segment.
    pub intercept: f64,
    /// The null-imposed equilibrium statistic (NaN for leave-one-out fits).
    pub null_stat: f64,
    /// The lack-of-fit statistic of the resample moved onto the fitted model (NaN for
    /// leave-one-out fits and for the joint fit of several curves, whose statistic is the
    /// sum over the curves).
    pub lof_stat: f64,
    /// The break sits at the edge of the allowed intervals.
    pub edge: bool,
}

/// A model of the parametric plot `y(x)`.
pub trait FdModel: Sync {
    /// Its `--model` choice.
    fn kind(&self) -> Model;
    /// Words for the report header.
    fn describe(&self) -> &'static str;
    /// The model in the methods paragraph ("a two-segment line with …").
    fn methods_phrase(&self) -> &'static str;
    /// A line under the report's table explaining a column, if the model needs one.
    fn table_note(&self) -> Option<&'static str> {
        None
    }
    /// Whether the model has a break (a slope above it, a thermometer test, an edge).
    fn has_break(&self) -> bool {
        true
    }
    /// The factor `α` on x in the fitted quantity `r = α x + y` (1 or 0).
    fn c_factor(&self) -> f64;
    /// The fitted quantity at one point.
    fn response(&self, x: f64, y: f64) -> f64 {
        self.c_factor() * x + y
    }
    /// The least-squares fit of the group, with the SSE of its null model; `profile`
    /// receives `(q, SSE)` over every candidate break.
    fn fit(
        &self,
        pts: GroupPoints<'_>,
        min_branch: usize,
        buf: &mut FitBuffers,
        profile: Option<&mut Vec<(f64, f64)>>,
    ) -> Option<Values>;
    /// The least-squares solution for the responses `r` alone (no secondary quantities).
    fn solve(
        &self,
        pts: GroupPoints<'_>,
        min_branch: usize,
        buf: &mut FitBuffers,
    ) -> Option<BreakSolution>;
    /// [`FdModel::fit`] of the responses `r`, and [`FdModel::solve`] with each of `moved`
    /// in place of `r` into `out[k]` (a resample's refits after moving it onto its nulls),
    /// in one pass where the model allows it.
    fn fit_moved(
        &self,
        pts: GroupPoints<'_>,
        moved: &[&[f64]],
        min_branch: usize,
        buf: &mut FitBuffers,
        out: &mut [Option<BreakSolution>],
    ) -> Option<Values> {
        let v = self.fit(pts, min_branch, buf, None);
        for (r, out) in moved.iter().zip(out) {
            *out = self.solve(GroupPoints { r, ..pts }, min_branch, buf);
        }
        v
    }
    /// `r̂ − f̂₀` per point: subtracting it moves a resample onto the fitted null model.
    fn null_shift(&self, pts: GroupPoints<'_>) -> Vec<f64>;
    /// The fitted curve in plot coordinates (by default: the fitted slope above the
    /// break, −X below it).
    fn curve(&self, d: &Draw) -> Curve {
        Curve {
            q: d.q,
            intercept: d.intercept,
            slope_above: d.fast,
            slope_below: -d.ratio,
        }
    }
}

/// The broken-stick search of `pts.r` and of each of `moved` (into `out`) on the points'
/// x and weights, in one pass (the broken-stick models' [`FdModel::fit_moved`]); returns
/// the solution for `pts.r`.
fn search_moved(
    pts: GroupPoints<'_>,
    moved: &[&[f64]],
    base: Base,
    m: usize,
    buf: &mut FitBuffers,
    out: &mut [Option<BreakSolution>],
) -> Option<BreakSolution> {
    let k = moved.len() + 1;
    if k > MAX_RESPONSES {
        let sol = search(pts.x, pts.r, pts.w, base, m, &mut buf.ws, None);
        search_each(pts.x, moved, pts.w, base, m, &mut buf.ws, None, out);
        return sol;
    }
    let mut rs = [pts.r; MAX_RESPONSES];
    rs[1..k].copy_from_slice(moved);
    let mut sols = [None; MAX_RESPONSES];
    search_each(
        pts.x,
        &rs[..k],
        pts.w,
        base,
        m,
        &mut buf.ws,
        None,
        &mut sols[..k],
    );
    out.copy_from_slice(&sols[1..k]);
    sols[0]
}

/// `r̂ − f̂₀` when the null is the line of slope −1: `x + y` minus its weighted mean.
fn minus_one_shift(pts: GroupPoints<'_>) -> Vec<f64> {
    let c0 = equilibrium_level(pts);
    pts.x.iter().zip(pts.y).map(|(x, y)| x + y - c0).collect()
}

/// The weighted mean of `x + y` (the intercept of the slope −1 line).
fn equilibrium_level(pts: GroupPoints<'_>) -> f64 {
    let sw: f64 = pts.w.iter().sum();
    pts.x
        .iter()
        .zip(pts.y)
        .zip(pts.w)
        .map(|((x, y), w)| w * (x + y))
        .sum::<f64>()
        / sw
}
