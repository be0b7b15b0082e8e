//! One fit of one group of points: gather the group's points, weights and responses, let
//! the model fit them, and (for resamples) the null-imposed equilibrium statistic.

use super::lack_of_fit::{Bins, LofNull};
use super::model::{Draw, FdModel, FitBuffers, GroupPoints, Values};
use super::shape::Setup;
use crate::fit::smooth::{Constraint, SmoothFit};

/// Resampled curves kept for the figure's band (the first ones; quantiles of this many
/// curves are steady to well under a line width).
pub const BAND_CURVES: usize = 4000;

/// Bytes kept per resample and group (for the memory estimate): the draw while the
/// groups are assessed, then X, q and the slope above kept for the figures and the design
/// calibration.
pub const BYTES_PER_DRAW: usize = std::mem::size_of::<Option<Draw>>() + 3 * 8;

/// What every fit of a group shares: the model and the least points per branch.
#[derive(Clone, Copy)]
pub struct Spec {
    /// The model.
    pub model: &'static dyn FdModel,
    /// Least points on each side of the break.
    pub min_branch: usize,
}

/// A group of points: all of them (the joint fit) or one curve.
pub struct Group {
    /// The held time (tw or t), `None` for the joint fit.
    pub held: Option<f64>,
    /// `Σ w (x² + y²)`: the size of the weighted data, for rounding tolerances.
    pub scale: f64,
    /// Indices of its points.
    pub idx: Vec<usize>,
    /// The first index when `idx` is one run `a, a + 1, …` (every curve of a campaign
    /// listed curve by curve, and the joint fit), so its points are copied as slices.
    pub run: Option<usize>,
}

impl Group {
    /// A group of these points.
    pub fn new(held: Option<f64>, scale: f64, idx: Vec<usize>) -> Self {
        let first = idx.first().copied().unwrap_or(0);
        let run = idx
            .iter()
            .enumerate()
            .all(|(k, &j)| j == first + k)
            .then_some(first);
        Group {
            held,
            scale,
            idx,
            run,
        }
    }
}

/// All points of one fit (the full data, a resample, a leave-one-out set).
#[derive(Clone, Copy)]
pub struct Points<'a> {
    /// x per grid point.
    pub x: &'a [f64],
    /// y per grid point.
    pub y: &'a [f64],
    /// Weights per grid point.
    pub w: &'a [f64],
}

/// Per-group buffers, so replicate fits do not allocate.
#[derive(Clone)]
pub struct Scratch {
    x: Vec<f64>,
    y: Vec<f64>,
    r: Vec<f64>,
    /// The responses moved onto the equilibrium null and onto the fitted model (the
    /// lack-of-fit null), for [`fit_resample`].
    rn: Vec<f64>,
    rl: Vec<f64>,
    w: Vec<f64>,
    buf: FitBuffers,
    sums: Vec<[f64; 2]>,
}

impl Scratch {
    /// Buffers for a group whose points have these x (the starting sort order).
    pub fn new(x: &[f64]) -> Self {
        let buf = FitBuffers {
            ws: crate::fit::Workspace::sorted_by(x),
        };
        Scratch {
            x: Vec::with_capacity(x.len()),
            y: Vec::with_capacity(x.len()),
            r: Vec::with_capacity(x.len()),
            rn: Vec::with_capacity(x.len()),
            rl: Vec::with_capacity(x.len()),
            w: Vec::with_capacity(x.len()),
            buf,
            sums: Vec::new(),
        }
    }

    /// Its searches keep no copy of their x and weights for a later search on the same
    /// points (none comes: the fits of a resample without the smooth model's shape test).
    pub fn without_reuse(&mut self) {
        self.buf.ws.forget_x_parts();
    }
}

/// The group's x, y and weights: slices of `pts` for a run of points, the copies
/// [`gather`] made otherwise.
fn xyw<'a>(g: &Group, pts: Points<'a>, copies: [&'a [f64]; 3]) -> [&'a [f64]; 3] {
    match g.run {
        Some(a) => {
            let b = a + g.idx.len();
            [&pts.x[a..b], &pts.y[a..b], &pts.w[a..b]]
        }
        None => copies,
    }
}

/// The group's points with the responses in `sc` ([`gather`]).
fn group_points<'a>(g: &Group, pts: Points<'a>, sc: &'a Scratch) -> GroupPoints<'a> {
    let [x, y, w] = xyw(g, pts, [&sc.x, &sc.y, &sc.w]);
    GroupPoints { x, y, r: &sc.r, w }
}

/// Where each point of the first group (all points of a joint fit) is in the other groups
/// (the curves), for [`share_order`].
#[derive(Debug, Clone)]
pub struct Members {
    /// Per point of the first group: its group (counted from 0 after the first) and its
    /// index in that group.
    of: Vec<(u32, u32)>,
    /// Where each other group's points start in the list of all of them (one more entry:
    /// the end).
    starts: Vec<usize>,
}

impl Members {
    /// The members, when every other group's points are among the first group's and each
    /// of the first group's points is in exactly one other group (the curves of a joint
    /// fit); `None` otherwise.
    pub fn of(groups: &[Group]) -> Option<Self> {
        let (first, rest) = groups.split_first()?;
        let top = first.idx.iter().max().map_or(0, |&m| m + 1);
        let mut at = vec![u32::MAX; top];
        for (k, &j) in first.idx.iter().enumerate() {
            at[j] = u32::try_from(k).ok()?;
        }
        let mut of = vec![(u32::MAX, u32::MAX); first.idx.len()];
        let mut starts = vec![0];
        for (g, group) in rest.iter().enumerate() {
            for (l, &j) in group.idx.iter().enumerate() {
                let slot = of.get_mut(*at.get(j)? as usize)?;
                if slot.0 != u32::MAX {
                    return None;
                }
                *slot = (u32::try_from(g).ok()?, u32::try_from(l).ok()?);
            }
            starts.push(starts[g] + group.idx.len());
        }
        (!rest.is_empty() && of.iter().all(|m| m.0 != u32::MAX)).then_some(Members { of, starts })
    }
}

/// Hands the sort of the first group's last resample on to the other groups: walking
/// through the first group's points in increasing x and keeping each group's gives each
/// group its own sort in one pass (both start from the full data's order, so it is the
/// very permutation the group's own sort would make), and their searches skip the sort.
/// On W3 of benches/ the 12 curves' sorts took 2.5 µs of a resample's 82 µs. Groups get
/// nothing when the first group's search did not sort this resample. `flat` and
/// `cursor` are scratch.
pub fn share_order(
    sc: &mut [Scratch],
    members: &Members,
    flat: &mut Vec<usize>,
    cursor: &mut Vec<usize>,
) {
    let Some((first, rest)) = sc.split_first_mut() else {
        return;
    };
    for s in rest.iter_mut() {
        s.buf.ws.give_order();
    }
    let Some(order) = first.buf.ws.take_order() else {
        return;
    };
    if order.len() != members.of.len() || rest.len() + 1 != members.starts.len() {
        return;
    }
    flat.resize(order.len(), 0);
    cursor.clear();
    cursor.extend_from_slice(&members.starts[..rest.len()]);
    for &k in order {
        let (g, l) = members.of[k];
        flat[cursor[g as usize]] = l as usize;
        cursor[g as usize] += 1;
    }
    for (s, w) in rest.iter_mut().zip(members.starts.windows(2)) {
        s.buf.ws.give_order().extend_from_slice(&flat[w[0]..w[1]]);
    }
}

/// `r = α x + y − shift` per point.
fn moved_into(spec: Spec, r: &mut Vec<f64>, x: &[f64], y: &[f64], shift: &[f64]) {
    let alpha = spec.model.c_factor();
    r.resize(x.len(), 0.0);
    for (((r, x), y), d) in r.iter_mut().zip(x).zip(y).zip(shift) {
        *r = alpha * x + y - d;
    }
}

/// Fits one group. Leaves the group's points in `sc`.
pub fn fit_group(
    g: &Group,
    pts: Points<'_>,
    spec: Spec,
    sc: &mut Scratch,
    profile: Option<&mut Vec<(f64, f64)>>,
) -> Option<Values> {
    gather(g, pts, spec, sc);
    let mut buf = std::mem::take(&mut sc.buf);
    let v = spec
        .model
        .fit(group_points(g, pts, sc), spec.min_branch, &mut buf, profile);
    sc.buf = buf;
    v
}

/// The group's responses `r = α x + y` into `sc`, and for a group that is not a run of
/// points, its points and weights (a run's are read from `pts` where used, [`xyw`]: on
/// W3 of benches/ the copies took 1% of the CPU).
fn gather(g: &Group, pts: Points<'_>, spec: Spec, sc: &mut Scratch) {
    let alpha = spec.model.c_factor();
    sc.r.resize(g.idx.len(), 0.0);
    if let Some(a) = g.run {
        let b = a + g.idx.len();
        for ((r, x), y) in sc.r.iter_mut().zip(&pts.x[a..b]).zip(&pts.y[a..b]) {
            *r = alpha * x + y;
        }
        return;
    }
    for v in [&mut sc.x, &mut sc.y, &mut sc.w] {
        v.resize(g.idx.len(), 0.0);
    }
    let out = sc.x.iter_mut().zip(&mut sc.y).zip(&mut sc.w).zip(&mut sc.r);
    for ((((x, y), w), r), &j) in out.zip(&g.idx) {
        (*x, *y, *w) = (pts.x[j], pts.y[j], pts.w[j]);
        *r = alpha * *x + *y;
    }
}

/// Fits one resample of a group with its null-moved statistics, the fit and both refits
/// in one search pass:
/// - the equilibrium statistic `SSE(null) − SSE(model)` after moving the resample onto
///   the fitted null model (`r − shift`);
/// - with `lof`, the lack-of-fit statistic after moving it onto the fitted model
///   (`r − lof.shift`): refitted with its own weights, its residuals binned with the
///   full-data weights (NaN without `lof`).
///
/// Returns the fit and the two statistics (NaN where the refit failed). Leaves the
/// resample's points and responses in `sc`, as [`fit_group`] does.
pub fn fit_resample(
    g: &Group,
    pts: Points<'_>,
    spec: Spec,
    sc: &mut Scratch,
    shift: &[f64],
    lof: Option<&LofNull>,
) -> Option<(Values, f64, f64)> {
    gather(g, pts, spec, sc);
    let [x, y, _] = xyw(g, pts, [&sc.x, &sc.y, &sc.w]);
    moved_into(spec, &mut sc.rn, x, y, shift);
    if let Some(null) = lof {
        moved_into(spec, &mut sc.rl, x, y, &null.shift);
    }
    // The lack-of-fit refit only with its null.
    let k = 1 + usize::from(lof.is_some());
    let moved: [&[f64]; 2] = [&sc.rn, &sc.rl];
    let mut sols = [None, None];
    let mut buf = std::mem::take(&mut sc.buf);
    let v = spec.model.fit_moved(
        group_points(g, pts, sc),
        &moved[..k],
        spec.min_branch,
        &mut buf,
        &mut sols[..k],
    );
    sc.buf = buf;
    let v = v?;
    let gap = sols[0].map_or(f64::NAN, |s| s.sse_null - s.sse);
    let lof_stat = match (lof, sols[1]) {
        (Some(null), Some(sol)) => {
            // The residuals overwrite the moved responses: nothing reads them after this.
            for (r, x) in sc.rl.iter_mut().zip(x) {
                *r -= sol.eval(*x);
            }
            null.bins.statistic(&sc.rl, &null.w, &mut sc.sums)
        }
        _ => f64::NAN,
    };
    Some((v, gap, lof_stat))
}

/// A group's x, weights and `r̂ − f̂` (the full-data fit's residuals): subtracting them
/// moves a resample onto the fitted model.
fn residual_shift(g: &Group, pts: Points<'_>, spec: Spec, est: &Values) -> [Vec<f64>; 3] {
    let x: Vec<f64> = g.idx.iter().map(|&j| pts.x[j]).collect();
    let w: Vec<f64> = g.idx.iter().map(|&j| pts.w[j]).collect();
    let shift: Vec<f64> = g
        .idx
        .iter()
        .map(|&j| spec.model.response(pts.x[j], pts.y[j]) - est.sol.eval(pts.x[j]))
        .collect();
    [x, w, shift]
}

/// The full-data smooth fit of a group beside its broken stick: the setup its resamples
/// share, the fit, and the shape statistic `SSE(one break) − SSE(smooth)`.
pub fn shape_full(
    g: &Group,
    pts: Points<'_>,
    spec: Spec,
    est: &Values,
    constraint: Constraint,
) -> Option<(Setup, SmoothFit, f64)> {
    let [x, w, shift] = residual_shift(g, pts, spec, est);
    let z: Vec<f64> = g
        .idx
        .iter()
        .map(|&j| spec.model.response(pts.x[j], pts.y[j]))
        .collect();
    let fitted: Vec<f64> = z.iter().zip(&shift).map(|(z, d)| z - d).collect();
    let mut setup = Setup::new(&x, &z, &fitted, constraint, spec.min_branch)?;
    let fit = setup.fit(&x, &z, &w)?;
    setup.top = fit.leaves_one(super::shape::DEPARTURE);
    setup.top_x = setup.ratio_above(&x, &z, &w);
    if let Some(hi) = super::shape::branch_end(&setup.knots, est.q) {
        let lo = x.iter().copied().fold(f64::INFINITY, f64::min);
        setup.branch = [lo, hi];
        setup.drift = setup.drift_below(&x, &z, &w);
    }
    let stat = est.sol.sse - fit.sse;
    Some((setup, fit, stat))
}

/// X on the grid, where X leaves 1 and the X of the points above where the full-data curve
/// leaves 1, for the resample whose points [`fit_group`] just left in `sc` (call before
/// [`null_statistic`], which overwrites the responses).
pub fn shape_record(g: &Group, pts: Points<'_>, sc: &Scratch, setup: &Setup, row: &mut [f64]) {
    let [x, _, w] = xyw(g, pts, [&sc.x, &sc.y, &sc.w]);
    if let Some(f) = setup.fit(x, &sc.r, w) {
        setup.record(&f, row);
    }
    row[super::shape::GRID + 2] = setup.ratio_above(x, &sc.r, w);
    row[super::shape::GRID + 3] = setup.drift_below(x, &sc.r, w);
}

/// The shape statistic of the resample whose points [`fit_group`] left in `sc`, after
/// moving it onto the fitted broken stick: both models refitted with its own weights.
pub fn shape_null(g: &Group, pts: Points<'_>, spec: Spec, sc: &mut Scratch, setup: &Setup) -> f64 {
    let [x, y, w] = xyw(g, pts, [&sc.x, &sc.y, &sc.w]);
    moved_into(spec, &mut sc.r, x, y, &setup.shift);
    let mut buf = std::mem::take(&mut sc.buf);
    let sol = spec
        .model
        .solve(group_points(g, pts, sc), spec.min_branch, &mut buf);
    sc.buf = buf;
    match (sol, setup.fit(x, &sc.r, w)) {
        (Some(b), Some(f)) => b.sse - f.sse,
        _ => f64::NAN,
    }
}

/// The full-data fit's lack-of-fit statistic of a group, and what its resamples need.
pub fn lof_null(g: &Group, pts: Points<'_>, spec: Spec, est: &Values) -> (f64, LofNull) {
    let [x, w, shift] = residual_shift(g, pts, spec, est);
    let bins = Bins::new(&x);
    let stat = bins.statistic(&shift, &w, &mut Vec::new());
    (stat, LofNull { shift, bins, w })
}

/// `r̂ − f̂₀` per point of the group, where f̂₀ is the model's fitted null.
pub fn null_shift(g: &Group, pts: Points<'_>, spec: Spec) -> Vec<f64> {
    let x: Vec<f64> = g.idx.iter().map(|&j| pts.x[j]).collect();
    let y: Vec<f64> = g.idx.iter().map(|&j| pts.y[j]).collect();
    let w: Vec<f64> = g.idx.iter().map(|&j| pts.w[j]).collect();
    let r: Vec<f64> = x
        .iter()
        .zip(&y)
        .map(|(x, y)| spec.model.response(*x, *y))
        .collect();
    spec.model.null_shift(GroupPoints {
        x: &x,
        y: &y,
        r: &r,
        w: &w,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::twotime::{Model, model};

    /// The curves searched with the order handed on from the joint fit's sort give what
    /// their own sorts give, bit for bit, with ties in x and curves that move against each
    /// other; groups that do not split the joint fit's points share nothing. Source:
    /// common practice (the stable sort of one start order, kept to a subset, is the
    /// subset's stable sort).
    #[test]
    fn curves_sorted_by_the_joint_sort_fit_as_their_own() {
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(23);
        let (curves, per) = (4, 30);
        let p = curves * per;
        let full: Vec<f64> = (0..p)
            .map(|j| 1.0 - (j % per) as f64 / per as f64 + 0.02 * rng.random::<f64>())
            .map(|v| (v * 64.0).round() / 64.0)
            .collect();
        let mut groups = vec![Group::new(None, 1.0, (0..p).collect())];
        groups.extend(
            (0..curves)
                .map(|c| Group::new(Some(c as f64), 1.0, (c * per..(c + 1) * per).collect())),
        );
        let members = Members::of(&groups).expect("the curves split the joint fit's points");
        let spec = Spec {
            model: model::of(Model::Broken),
            min_branch: 3,
        };
        let scratch = |g: &Group| Scratch::new(&g.idx.iter().map(|&j| full[j]).collect::<Vec<_>>());
        let mut shared: Vec<Scratch> = groups.iter().map(scratch).collect();
        let mut own: Vec<Scratch> = groups.iter().map(scratch).collect();
        let (mut flat, mut cursor) = (Vec::new(), Vec::new());
        for _ in 0..20 {
            let shift: Vec<f64> = (0..curves)
                .map(|_| 0.1 * (rng.random::<f64>() - 0.5))
                .collect();
            let x: Vec<f64> = (0..p)
                .map(|j| full[j] + shift[j / per] + 0.01 * rng.random::<f64>())
                .map(|v| (v * 128.0).round() / 128.0)
                .collect();
            let y: Vec<f64> = x
                .iter()
                .map(|&x| -0.4 * (0.6 - x).max(0.0) - x + 0.01 * rng.random::<f64>())
                .collect();
            let w: Vec<f64> = (0..p).map(|_| 0.5 + rng.random::<f64>()).collect();
            let pts = Points {
                x: &x,
                y: &y,
                w: &w,
            };
            fit_group(&groups[0], pts, spec, &mut shared[0], None);
            share_order(&mut shared, &members, &mut flat, &mut cursor);
            for c in 1..=curves {
                assert_eq!(shared[c].buf.ws.given_len(), per, "the sort is handed on");
                let a = fit_group(&groups[c], pts, spec, &mut shared[c], None);
                let b = fit_group(&groups[c], pts, spec, &mut own[c], None);
                assert_eq!(format!("{a:?}"), format!("{b:?}"), "curve {c}");
            }
        }
        // Points of the joint fit in no curve, a curve point outside it, a point in two.
        let g = |idx: std::ops::Range<usize>| Group::new(None, 1.0, idx.collect());
        assert!(Members::of(&[g(0..p), g(0..per)]).is_none());
        assert!(Members::of(&[g(0..per - 1), g(0..per)]).is_none());
        assert!(Members::of(&[g(0..per), g(0..per), g(0..per)]).is_none());
        assert!(Members::of(&[g(0..2 * per), g(0..per), g(per..2 * per)]).is_some());
    }

    /// A run of indices is read in place, and gives the points the index-by-index copy
    /// gives; other index lists are not runs. Source: common practice (two ways of one copy).
    #[test]
    fn a_run_of_points_is_gathered_as_the_index_list_is() {
        assert_eq!(Group::new(None, 1.0, vec![3, 4, 5]).run, Some(3));
        assert_eq!(Group::new(None, 1.0, vec![3, 5, 6]).run, None);
        assert_eq!(Group::new(None, 1.0, vec![4, 3]).run, None);
        let x: Vec<f64> = (0..9).map(|i| 0.9 - 0.1 * i as f64).collect();
        let y: Vec<f64> = (0..9).map(|i| 0.01 * (i * i) as f64).collect();
        let w: Vec<f64> = (0..9).map(|i| 1.0 + i as f64).collect();
        let pts = Points {
            x: &x,
            y: &y,
            w: &w,
        };
        let spec = Spec {
            model: model::of(Model::Broken),
            min_branch: 2,
        };
        let run = Group::new(None, 1.0, vec![2, 3, 4, 5, 6]);
        let listed = Group {
            run: None,
            ..Group::new(None, 1.0, run.idx.clone())
        };
        let (mut a, mut b) = (Scratch::new(&x[2..7]), Scratch::new(&x[2..7]));
        gather(&run, pts, spec, &mut a);
        gather(&listed, pts, spec, &mut b);
        let (u, v) = (group_points(&run, pts, &a), group_points(&listed, pts, &b));
        for (u, v) in [(u.x, v.x), (u.y, v.y), (u.w, v.w), (u.r, v.r)] {
            assert_eq!(u, v);
        }
        assert_eq!(u.x, &x[2..7]);
        assert!(a.x.is_empty(), "a run's points are not copied");
    }
}
