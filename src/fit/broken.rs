//! Broken-stick least squares with an unknown break (profile search).
//!
//! The model is `r = a + b x + c h_q(x)` with the hinge `h_q(x) = max(q - x, 0)`: a line
//! for `x >= q` and another, with slope `b - c`, for `x < q`. The base part is either a
//! constant (`b = 0`, used on `z = y + x` when the first slope is fixed) or a line.
//!
//! For a fixed break the model is linear. After the base regressors are projected out
//! (Frisch–Waugh–Lovell), the hinge on the first `k` sorted points is `q·u - v`, with `u`
//! the indicator of those points and `v = x·u`, so the explained sum of squares is
//! `(α q - β)² / (γ q² - 2 δ q + ε)` where α…ε are prefix sums over the first `k` points.
//! Its stationary point inside an interval has the closed form
//! `q* = (β δ - α ε) / (β γ - α δ)`, so each interval between neighbouring data points
//! costs O(1), and the exact continuous optimum over every break costs one sort plus a
//! pass: O(P log P), or O(P) when the order is already nearly right (bootstrap
//! replicates start from the order of the full data, counted into bins of x when there
//! are many points, and insertion-sort it). The centring sums over all points and the
//! scan of the intervals for the best run in eight lanes ([`super::lanes`]): the same
//! numbers on every processor.
//!
//! ## Reference
//! Hudson, D. J., "Fitting segmented curves whose join points have to be estimated",
//! J. Amer. Statist. Assoc. 61, 1097–1129 (1966); Seber & Wild, *Nonlinear Regression*
//! (1989), ch. 9 (two-phase regression, profile over the change point).

use super::lanes::{Kernel, L8, LANES, Wide, dispatch, exceeds};

/// The part of the model that has no break.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Base {
    /// `r = a + c h_q(x)`: one constant level above the break.
    Constant,
    /// `r = a + b x + c h_q(x)`: a free line above the break.
    Line,
}

/// The least-squares broken stick for one data set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BreakSolution {
    /// The break `q`.
    pub q: f64,
    /// Intercept `a` (original coordinates).
    pub a: f64,
    /// Slope above the break `b` (0 for [`Base::Constant`]).
    pub b: f64,
    /// Hinge coefficient `c`: the slope below the break is `b - c`.
    pub c: f64,
    /// Weighted residual sum of squares of the broken stick.
    pub sse: f64,
    /// Weighted residual sum of squares of the base model alone (no break).
    pub sse_null: f64,
    /// Number of points below the break (`x < q`).
    pub n_below: usize,
    /// Index of the interval holding the break, counted from the lowest allowed one.
    pub interval: usize,
    /// Number of allowed intervals.
    pub n_intervals: usize,
}

impl BreakSolution {
    /// The fitted value at `x`.
    pub fn eval(&self, x: f64) -> f64 {
        self.a + self.b * x + self.c * (self.q - x).max(0.0)
    }
}

/// Scratch space reused across searches so the hot loop does not allocate.
///
/// It also remembers the part of the last search that depends only on `x`, the weights,
/// the base and the least branch (the sort order, the centred x and the prefix sums of
/// `w`, `w x`, `w x²`): a search on the same points with other responses (the null-moved
/// and the model-moved refits of one resample) reuses it.
#[derive(Debug, Default, Clone)]
pub struct Workspace {
    /// Point indices sorted by x.
    order: Vec<usize>,
    /// The order every new x starts from: that of the x the workspace was made for
    /// ([`Workspace::sorted_by`]); empty for a default workspace, whose searches start
    /// from the last order.
    start: Vec<usize>,
    /// The x in `order`'s order, while sorting.
    keys: Vec<f64>,
    /// Bins of x for the counting pass of a large sort (empty for few points).
    bins: Bins,
    /// The x part of the last search.
    xp: XPart,
    /// What each response of one pass needs per allowed interval.
    resp: [Resp; MAX_RESPONSES],
    /// The sorted order handed to the next sort ([`Workspace::give_order`]); empty when
    /// none was.
    given: Vec<usize>,
    /// `order` was made by the last sort and not taken yet ([`Workspace::take_order`]).
    fresh: bool,
    /// Searches keep no copy of their x and weights ([`Workspace::forget_x_parts`]).
    forget: bool,
}

/// The most responses [`search_each`] takes through the sorted points in one pass.
pub const MAX_RESPONSES: usize = 3;

/// One response's part of a search, per allowed interval.
#[derive(Debug, Default, Clone)]
struct Resp {
    /// `⟨r,u⟩`, `⟨r,v⟩` after projection.
    al: Vec<f64>,
    be: Vec<f64>,
}

impl Workspace {
    /// A workspace for points near `x` (the resamples of a data set): the search of any
    /// new x starts from the order of `x`.
    ///
    /// A resample's x is `x` plus its own noise, so the order of `x` is nearer to it than
    /// the last resample's order (which carries that resample's noise too): on the joint
    /// curve of 1,200 points of benches/ (W3) it needs 5.9 shifts a point against 8.3.
    pub fn sorted_by(x: &[f64]) -> Self {
        let order = order_of(x);
        Workspace {
            bins: Bins::over(x),
            start: order.clone(),
            order,
            ..Workspace::default()
        }
    }

    /// Sorts `order` by `x`, starting from [`Workspace::start`] when it has one for this
    /// many points, from the last order otherwise. The sort is stable, so ties keep the
    /// starting order: the result is the stable sort of the starting order, whichever way
    /// it is reached.
    fn sort(&mut self, x: &[f64]) {
        let p = x.len();
        self.fresh = true;
        if self.given.len() == p {
            // An order made elsewhere: taken as it is when it sorts x, which is all the
            // check costs (one pass, no shifts).
            std::mem::swap(&mut self.order, &mut self.given);
            self.given.clear();
            debug_assert!(
                is_permutation(&self.order),
                "a given order holds every point once"
            );
            self.keys.clear();
            self.keys.extend(self.order.iter().map(|&i| x[i]));
            if !self.keys.is_sorted() {
                insertion_sort(&mut self.order, &mut self.keys);
            }
            return;
        }
        self.given.clear();
        let from_start = self.start.len() == p;
        if from_start && !self.bins.count.is_empty() {
            self.bins
                .distribute(x, &self.start, &mut self.order, &mut self.keys);
        } else {
            if from_start {
                self.order.clear();
                self.order.extend_from_slice(&self.start);
            } else if self.order.len() != p {
                self.order = order_of(x);
                return;
            }
            self.keys.clear();
            self.keys.extend(self.order.iter().map(|&i| x[i]));
        }
        insertion_sort(&mut self.order, &mut self.keys);
    }
}

impl Workspace {
    /// The points of the last search in increasing x, when that search sorted them and
    /// the order was not taken since (`None` when it reused the x part or stopped before
    /// sorting): the stable sort of the workspace's start order.
    pub(crate) fn take_order(&mut self) -> Option<&[usize]> {
        std::mem::take(&mut self.fresh).then_some(self.order.as_slice())
    }

    /// The order the next search of new x takes as its sort, filled by the caller (or
    /// left empty for none): the indices of all the points, in increasing x.
    ///
    /// Made for a subset of a larger set of points whose sort is known: walking through
    /// the larger set's sorted order and keeping the subset's points gives the subset's
    /// sort in one pass, with no comparisons. When the larger set's start order, kept to
    /// the subset, is this workspace's start order (the groups of a joint fit, all started
    /// from the full data's order), the result is the very permutation this workspace's
    /// own sort would make: both are the stable sort of the same start order. The search
    /// checks that the order sorts its x (one pass) and sorts it further if not.
    pub(crate) fn give_order(&mut self) -> &mut Vec<usize> {
        self.given.clear();
        &mut self.given
    }

    /// From now on, a search keeps no copy of its x and weights, so a later search on
    /// the same points makes its x part again instead of reusing it: for callers that
    /// never search the same points twice (the bootstrap's fits without the smooth
    /// model), the copies and their comparison are saved.
    pub(crate) fn forget_x_parts(&mut self) {
        self.forget = true;
    }

    /// The length of the order handed to the next sort (0 for none).
    #[cfg(test)]
    pub(crate) fn given_len(&self) -> usize {
        self.given.len()
    }
}

/// Equal-width bins of x for the counting pass that puts a large resample's points
/// nearly in order before the insertion sort.
///
/// The curves of a joint fit cover the same range of C, and one resample moves a whole
/// curve against the others, so its points land several places from where the full
/// data's order put them (about 6 on the joint curve of W3 in benches/, 1200 points).
/// The insertion sort then pays a mispredicted branch for most points. Counting the
/// points into bins first (bins a monotone function of x, points taken in the starting
/// order) leaves them out of order only within a bin: 0.2 shifts a point with 4096
/// bins, and the whole sort takes 7 µs instead of 15.5 µs there. The result is the
/// same permutation: both are the stable sort of the starting order.
#[derive(Debug, Default, Clone)]
struct Bins {
    /// Lowest x of the full data.
    lo: f64,
    /// Bins per unit of x.
    scale: f64,
    /// Points per bin, then where each bin starts (one more entry than bins).
    count: Vec<u32>,
    /// The bin of each point, in the starting order.
    bin: Vec<u32>,
}

/// Fewest points for which a sort counts into bins first. Measured on resamples of W3's
/// curves (benches/): 3 interleaved curves of 100 points sort in 1.6 µs by insertion
/// alone against 2.0 µs through bins, 6 curves in 5.9 against 3.1 µs, 12 in 15.5 against
/// 7 µs; one curve alone needs almost no shifts, so a long single curve pays the bins
/// (about 2 µs at 1000 points) for nothing.
const BINNED_SORT_MIN: usize = 512;

impl Bins {
    /// Bins over the range of `x`, about three per point; none for few points, or x
    /// without a finite spread.
    fn over(x: &[f64]) -> Self {
        let (lo, hi) = x
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                (lo.min(v), hi.max(v))
            });
        let width = hi - lo;
        if x.len() < BINNED_SORT_MIN || !(width > 0.0 && width.is_finite()) {
            return Bins::default();
        }
        let n = (3 * x.len()).next_power_of_two();
        Bins {
            lo,
            scale: (n - 1) as f64 / width,
            count: vec![0; n + 1],
            bin: vec![0; x.len()],
        }
    }

    /// `order` and `keys`: the points of `start` (with their x) stably counted into bins.
    /// x outside the full data's range goes to the end bins; the bin is non-decreasing
    /// in x, so the insertion sort that follows only fixes the order within bins.
    fn distribute(
        &mut self,
        x: &[f64],
        start: &[usize],
        order: &mut Vec<usize>,
        keys: &mut Vec<f64>,
    ) {
        let top = (self.count.len() - 2) as f64;
        let (lo, scale) = (self.lo, self.scale);
        self.count.fill(0);
        self.bin.resize(start.len(), 0);
        for (b, &i) in self.bin.iter_mut().zip(start) {
            // `as` saturates and maps NaN to 0, so every bin is in range.
            *b = ((x[i] - lo) * scale).clamp(0.0, top) as u32;
        }
        for &b in &self.bin {
            self.count[b as usize + 1] += 1;
        }
        running_count(&mut self.count);
        order.resize(start.len(), 0);
        keys.resize(start.len(), 0.0);
        for (&b, &i) in self.bin.iter().zip(start) {
            let at = &mut self.count[b as usize];
            order[*at as usize] = i;
            keys[*at as usize] = x[i];
            *at += 1;
        }
    }
}

/// `count` replaced by its running sum. Four quarters are summed side by side (each add
/// waits on the one before it in its quarter only), then each quarter after the first
/// gets the total of those before it: integer adds, so the same counts as one running sum,
/// in about half the time for the 4,096 bins of W3's joint curve (benches/).
fn running_count(count: &mut [u32]) {
    let q = count.len() / 4;
    let (a, rest) = count.split_at_mut(q);
    let (b, rest) = rest.split_at_mut(q);
    let (c, d) = rest.split_at_mut(q);
    let mut sums = [0u32; 4];
    for (((a, b), c), d) in a
        .iter_mut()
        .zip(b.iter_mut())
        .zip(c.iter_mut())
        .zip(d.iter_mut())
    {
        (sums[0], sums[1], sums[2], sums[3]) =
            (sums[0] + *a, sums[1] + *b, sums[2] + *c, sums[3] + *d);
        (*a, *b, *c, *d) = (sums[0], sums[1], sums[2], sums[3]);
    }
    // The last quarter's tail (its length is not a multiple of four).
    let mut tail = sums[3];
    for v in d.iter_mut().skip(q) {
        tail += *v;
        *v = tail;
    }
    let mut offset = 0;
    for (part, sum) in [b, c, d].into_iter().zip([sums[0], sums[1], sums[2]]) {
        offset += sum;
        part.iter_mut().for_each(|v| *v += offset);
    }
}

/// What a search needs that depends only on the points' x and weights, the base and the
/// least branch `m`. Per allowed interval `i` (break after the first `k = m + i` sorted
/// points): the prefix sums `Σw`, `Σw x`, `Σw x²` (centred x) and the projected
/// `⟨u,u⟩`, `⟨u,v⟩`, `⟨v,v⟩`.
#[derive(Debug, Default, Clone)]
struct XPart {
    /// The x, weights, base and `m` it was made from (`None`: nothing made yet).
    key: Option<(Base, usize)>,
    x: Vec<f64>,
    w: Vec<f64>,
    sw: f64,
    xm: f64,
    sxx: f64,
    /// Centred x in sorted order (all points).
    dx: Vec<f64>,
    /// Weights and `w · dx` in sorted order, for the searches that reuse the x part.
    ws: Vec<f64>,
    wdx: Vec<f64>,
    s0: Vec<f64>,
    s1: Vec<f64>,
    s2: Vec<f64>,
    ga: Vec<f64>,
    de: Vec<f64>,
    ep: Vec<f64>,
}

impl XPart {
    fn matches(&self, x: &[f64], w: &[f64], key: (Base, usize)) -> bool {
        self.key == Some(key) && same_bits(&self.x, x) && same_bits(&self.w, w)
    }

    /// The weighted mean and spread of x (with `FRESH`; otherwise those of the x part
    /// made) and the centred moments of each response, in two passes whose sums run side
    /// by side, each in its own order: the same numbers as taken one by one. `None` when
    /// x has no spread.
    #[inline(never)]
    fn centre<const K: usize, const FRESH: bool>(
        &mut self,
        x: &[f64],
        w: &[f64],
        rs: [&[f64]; K],
    ) -> Option<[Centred; K]> {
        let p = x.len();
        let (w, rs) = (&w[..p], rs.map(|r| &r[..p]));
        let (sw, swx, swr) = dispatch(FirstSums::<K, FRESH> { x, w, rs });
        if FRESH {
            self.key = None;
            self.sw = sw;
            self.xm = swx / sw;
        }
        let rm = swr.map(|s| s / self.sw);
        let xm = self.xm;
        let (sxx, sxr, srr) = dispatch(SecondSums::<K, FRESH> { x, w, rs, xm, rm });
        if FRESH {
            self.sxx = sxx;
            if !(sxx > 0.0) {
                return None;
            }
        }
        Some(std::array::from_fn(|k| Centred {
            rm: rm[k],
            sxr: sxr[k],
            srr: srr[k],
            slope: sxr[k] / self.sxx,
        }))
    }

    /// Ends a new x part made by [`Workspace::sorted_pass`]: the projection of every
    /// interval (with no dependence between intervals: vectorized), and, with `keep`, the
    /// x, weights and key it was made from. (Stored, with the sorted weights, a search
    /// that reuses the x part costs 7.3 µs on the joint curve of W3, against 8.3 µs with
    /// both made again where used; a search on new x costs the same either way.)
    fn finish(&mut self, x: &[f64], w: &[f64], key: (Base, usize), keep: bool) {
        let n = self.s0.len();
        for v in [&mut self.ga, &mut self.de, &mut self.ep] {
            v.resize(n, 0.0);
        }
        let line = key.0 == Base::Line;
        let (inv_sw, inv_sxx) = (1.0 / self.sw, if line { 1.0 / self.sxx } else { 0.0 });
        let sums = self.s0.iter().zip(&self.s1).zip(&self.s2);
        let out = self.ga.iter_mut().zip(&mut self.de).zip(&mut self.ep);
        pulp::Arch::new().dispatch(
            #[inline(always)]
            || {
                for (((uu, uv), vv), ((&s_w, &s_x), &s_xx)) in out.zip(sums) {
                    *uu = s_w - s_w * s_w * inv_sw - s_x * s_x * inv_sxx;
                    *uv = s_x - s_w * s_x * inv_sw - s_x * s_xx * inv_sxx;
                    *vv = s_xx - s_x * s_x * inv_sw - s_xx * s_xx * inv_sxx;
                }
            },
        );
        // Without `keep`, no later search reuses this x part (its key is never matched).
        self.key = keep.then_some(key);
        if keep {
            self.x.clear();
            self.x.extend_from_slice(x);
            self.w.clear();
            self.w.extend_from_slice(w);
        }
    }
}

/// `Σw`, `Σw x` (with `FRESH`; 0 otherwise) and each `Σw r`, in lanes ([`super::lanes`]).
struct FirstSums<'a, const K: usize, const FRESH: bool> {
    x: &'a [f64],
    w: &'a [f64],
    rs: [&'a [f64]; K],
}

impl<const K: usize, const FRESH: bool> Kernel for FirstSums<'_, K, FRESH> {
    type Output = (f64, f64, [f64; K]);

    #[inline(always)]
    fn run<S: Wide>(self, s: S) -> Self::Output {
        let zero = L8::splat(s, 0.0);
        let (mut sw, mut swx, mut swr) = (zero, zero, [zero; K]);
        // Lanes past the end hold zeros: a zero weight adds zeros.
        for j0 in (0..self.x.len()).step_by(LANES) {
            let w = L8::get(s, self.w, j0, 0.0);
            if FRESH {
                sw = sw.add(s, w);
                swx = swx.add(s, w.mul(s, L8::get(s, self.x, j0, 0.0)));
            }
            for (acc, r) in swr.iter_mut().zip(self.rs) {
                *acc = acc.add(s, w.mul(s, L8::get(s, r, j0, 0.0)));
            }
        }
        (sw.fold(s), swx.fold(s), swr.map(|v| v.fold(s)))
    }
}

/// `Σw dx²` (with `FRESH`; 0 otherwise), each `Σw dx dr` and `Σw dr²`, with `dx = x − xm`
/// and `dr = r − rm`, in lanes ([`super::lanes`]).
struct SecondSums<'a, const K: usize, const FRESH: bool> {
    x: &'a [f64],
    w: &'a [f64],
    rs: [&'a [f64]; K],
    xm: f64,
    rm: [f64; K],
}

impl<const K: usize, const FRESH: bool> Kernel for SecondSums<'_, K, FRESH> {
    type Output = (f64, [f64; K], [f64; K]);

    #[inline(always)]
    fn run<S: Wide>(self, s: S) -> Self::Output {
        let zero = L8::splat(s, 0.0);
        let (mut sxx, mut sxr, mut srr) = (zero, [zero; K], [zero; K]);
        let xm = L8::splat(s, self.xm);
        let rm = self.rm.map(|m| L8::splat(s, m));
        for j0 in (0..self.x.len()).step_by(LANES) {
            let w = L8::get(s, self.w, j0, 0.0);
            let dx = L8::get(s, self.x, j0, 0.0).sub(s, xm);
            let wdx = w.mul(s, dx);
            if FRESH {
                sxx = sxx.add(s, wdx.mul(s, dx));
            }
            for k in 0..K {
                let dr = L8::get(s, self.rs[k], j0, 0.0).sub(s, rm[k]);
                sxr[k] = sxr[k].add(s, wdx.mul(s, dr));
                srr[k] = srr[k].add(s, w.mul(s, dr).mul(s, dr));
            }
        }
        (sxx.fold(s), sxr.map(|v| v.fold(s)), srr.map(|v| v.fold(s)))
    }
}

/// The two slices hold the same numbers, bit for bit.
fn same_bits(a: &[f64], b: &[f64]) -> bool {
    // The first numbers first: a resample's new x differs there already.
    a.len() == b.len()
        && a.first().map(|v| v.to_bits()) == b.first().map(|v| v.to_bits())
        && a.iter()
            .zip(b)
            .fold(0u64, |acc, (u, v)| acc | (u.to_bits() ^ v.to_bits()))
            == 0
}

/// `order` holds each of `0..order.len()` once.
fn is_permutation(order: &[usize]) -> bool {
    let mut seen = vec![false; order.len()];
    order
        .iter()
        .all(|&i| i < seen.len() && !std::mem::replace(&mut seen[i], true))
}

/// The indices of `x` in increasing x.
fn order_of(x: &[f64]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..x.len()).collect();
    order.sort_by(|&i, &j| x[i].total_cmp(&x[j]));
    order
}

/// Stable insertion sort of `order` by `keys` (the x of `order`'s points, moved with
/// them): the keys sit side by side, so a comparison reads one number, not an index and
/// then a number.
fn insertion_sort(order: &mut [usize], keys: &mut [f64]) {
    for i in 1..order.len() {
        let (cur, key) = (order[i], keys[i]);
        if keys[i - 1] <= key {
            continue;
        }
        let mut j = i;
        while j > 0 && keys[j - 1] > key {
            keys[j] = keys[j - 1];
            order[j] = order[j - 1];
            j -= 1;
        }
        keys[j] = key;
        order[j] = cur;
    }
}

/// Finds the break minimizing the weighted SSE of `r = a + b x + c h_q(x)`.
///
/// `x`, `r`, `w` are the points (any order; `w > 0`); `min_branch` is the least number of
/// points on each side of the break. When `profile` is given it receives `(q, SSE)` for
/// every candidate break, in increasing `q`.
///
/// Returns `None` when there are too few points for two branches of `min_branch`, all
/// `x` are equal, or no candidate break is identifiable.
///
/// # Examples
/// ```
/// use fdtemp::fit::{broken::search, Base, Workspace};
/// let x: Vec<f64> = (0..20).map(|i| i as f64 / 19.0).collect();
/// let r: Vec<f64> = x.iter().map(|&x| 1.0 - 0.5 * (0.6 - x).max(0.0)).collect();
/// let w = vec![1.0; 20];
/// let mut ws = Workspace::sorted_by(&x);
/// let s = search(&x, &r, &w, Base::Constant, 3, &mut ws, None).unwrap();
/// assert!((s.q - 0.6).abs() < 1e-9 && (s.c + 0.5).abs() < 1e-9);
/// ```
pub fn search(
    x: &[f64],
    r: &[f64],
    w: &[f64],
    base: Base,
    min_branch: usize,
    ws: &mut Workspace,
    profile: Option<&mut Vec<(f64, f64)>>,
) -> Option<BreakSolution> {
    let mut out = [None];
    search_each(x, &[r], w, base, min_branch, ws, profile, &mut out);
    out[0]
}

/// [`search`] for several responses on the same points: `out[k]` is the search of
/// `rs[k]`, and `profile` is that of `rs[0]`.
///
/// Up to [`MAX_RESPONSES`] responses share one pass through the sorted points: their
/// running sums are independent, so the processor adds them side by side in the time one
/// takes. Each response's sums are the same, added in the same order, as in its own
/// search. Entries of `out` beyond `rs` are set to `None`.
#[allow(clippy::too_many_arguments)]
pub fn search_each(
    x: &[f64],
    rs: &[&[f64]],
    w: &[f64],
    base: Base,
    min_branch: usize,
    ws: &mut Workspace,
    profile: Option<&mut Vec<(f64, f64)>>,
    out: &mut [Option<BreakSolution>],
) {
    out.fill(None);
    let p = x.len();
    let m = min_branch.max(1);
    if p < 2 * m || w.len() != p {
        return;
    }
    let key = (base, m);
    let mut profile = profile;
    let mut chunks = rs.chunks(MAX_RESPONSES).zip(out.chunks_mut(MAX_RESPONSES));
    if !ws.xp.matches(x, w, key) {
        ws.sort(x);
        // The x part is made in the first pass, beside the first responses (none when
        // their lengths are wrong: they are left `None`, as in any pass). The profile is
        // the first response's, so it is used up here either way.
        let prof = profile.take();
        let made = match chunks.next() {
            Some((rs, out)) if rs.iter().all(|r| r.len() == p) => {
                ws.pass_any::<true>(rs, x, w, key, prof, out)
            }
            _ => ws.pass::<0, true>([], x, w, key, None, &mut []),
        };
        if !made {
            return;
        }
    }
    for (rs, out) in chunks {
        ws.pass_any::<false>(rs, x, w, key, profile.take(), out);
    }
}

/// The response's weighted mean and centred moments (the x ones are in [`XPart`]).
struct Centred {
    rm: f64,
    sxr: f64,
    srr: f64,
    /// `sxr / sxx`: the slope of the base line (read only with [`Base::Line`]).
    slope: f64,
}

impl Centred {
    /// SSE of the base model alone (no break).
    fn sse_null(&self, line: bool, sxx: f64) -> f64 {
        if line {
            self.srr - self.sxr * self.sxr / sxx
        } else {
            self.srr
        }
    }
}

/// The two candidates of one interval `(lo, hi]` between neighbouring points: the
/// interior stationary point (closed form) and the upper end. Each is the explained sum
/// of squares as a fraction `num² / den` (`den > 0`; `-1 / 1` where it is not a
/// candidate), so candidates compare without dividing. Returns `[interior, upper]` as
/// numerators, denominators and breaks.
#[inline(always)]
#[allow(clippy::too_many_arguments)]
fn interval_candidates(
    al: f64,
    be: f64,
    ga: f64,
    de: f64,
    ep: f64,
    lo: f64,
    hi: f64,
    tiny: f64,
) -> [[f64; 2]; 3] {
    // Both candidates are always computed and then selected, so the loop has no branch.
    let at = |q: f64| {
        let den = ga * q * q - 2.0 * de * q + ep;
        let num = al * q - be;
        (num * num, den, den > tiny)
    };
    // d = 0 gives an infinite or undefined q*, which fails the bounds.
    let q_star = (be * de - al * ep) / (be * ga - al * de);
    let (n_in, d_in, ok_in) = at(q_star);
    let ok_in = ok_in & (q_star > lo) & (q_star < hi);
    let (n_up, d_up, ok_up) = at(hi);
    [
        [
            if ok_in { n_in } else { -1.0 },
            if ok_up { n_up } else { -1.0 },
        ],
        [
            if ok_in { d_in } else { 1.0 },
            if ok_up { d_up } else { 1.0 },
        ],
        [q_star, hi],
    ]
}

impl Workspace {
    /// [`Workspace::pass`] for 0 to [`MAX_RESPONSES`] responses (`false` for more).
    fn pass_any<const FRESH: bool>(
        &mut self,
        rs: &[&[f64]],
        x: &[f64],
        w: &[f64],
        key: (Base, usize),
        profile: Option<&mut Vec<(f64, f64)>>,
        out: &mut [Option<BreakSolution>],
    ) -> bool {
        match *rs {
            [] => self.pass::<0, FRESH>([], x, w, key, profile, out),
            [a] => self.pass::<1, FRESH>([a], x, w, key, profile, out),
            [a, b] => self.pass::<2, FRESH>([a, b], x, w, key, profile, out),
            [a, b, c] => self.pass::<3, FRESH>([a, b, c], x, w, key, profile, out),
            _ => false,
        }
    }

    /// The search of up to [`MAX_RESPONSES`] responses: their sums in one pass, then each
    /// response's candidates and best break. With `FRESH` the x part of the sorted
    /// points is made in the same passes (its sums are independent of the responses', so
    /// they run side by side); without, it is the one made before. Returns `false`
    /// (and leaves `out` alone) when a new x has no spread, or a response's length is
    /// wrong.
    fn pass<const K: usize, const FRESH: bool>(
        &mut self,
        rs: [&[f64]; K],
        x: &[f64],
        w: &[f64],
        key: (Base, usize),
        profile: Option<&mut Vec<(f64, f64)>>,
        out: &mut [Option<BreakSolution>],
    ) -> bool {
        if rs.iter().any(|r| r.len() != x.len()) {
            return false;
        }
        let Some(cs) = self.xp.centre::<K, FRESH>(x, w, rs) else {
            return false;
        };
        let (line, m) = (key.0 == Base::Line, key.1);
        self.sorted_pass::<K, FRESH>(x, w, rs, &cs, line, m);
        if FRESH {
            self.xp.finish(x, w, key, !self.forget);
        }
        let tiny = 1e-12 * self.xp.sxx;
        let mut profile = profile;
        for (k, (c, out)) in cs.iter().zip(out).enumerate() {
            let sse_null = c.sse_null(line, self.xp.sxx);
            if let Some(prof) = profile.take() {
                self.profile(k, sse_null, tiny, m, prof);
            }
            *out = self
                .best(k, tiny, m)
                .map(|best| solution(self, k, best, c, line, m, tiny));
        }
        true
    }

    /// One pass through the sorted points. With `FRESH` it makes the x part's sorted
    /// arrays (centred x, weights, `w dx`) and, per allowed interval `i` (break after the
    /// first `m + i` sorted points), the prefix sums of `w`, `w dx`, `w dx²`; it reads
    /// them otherwise. Beside them, for each response, the projected `⟨r,u⟩`, `⟨r,v⟩` of
    /// every allowed interval from prefix sums of `w dr` and `w dx dr`.
    fn sorted_pass<const K: usize, const FRESH: bool>(
        &mut self,
        x: &[f64],
        w: &[f64],
        rs: [&[f64]; K],
        cs: &[Centred; K],
        line: bool,
        m: usize,
    ) {
        let p = x.len();
        let n = p + 1 - 2 * m;
        let xp = &mut self.xp;
        if FRESH {
            for v in [&mut xp.dx, &mut xp.ws, &mut xp.wdx] {
                v.resize(p, 0.0);
            }
            for v in [&mut xp.s0, &mut xp.s1, &mut xp.s2] {
                v.resize(n, 0.0);
            }
        }
        for r in &mut self.resp[..K] {
            r.al.resize(n, 0.0);
            r.be.resize(n, 0.0);
        }
        let out = self.resp.each_mut();
        let slope = cs.each_ref().map(|c| if line { c.slope } else { 0.0 });
        let rm = cs.each_ref().map(|c| c.rm);
        let xm = xp.xm;
        let (mut s, mut s3, mut s4) = ([0.0f64; 3], [0.0f64; K], [0.0f64; K]);
        // The first m − 1 points only add; each of the next n ends an allowed interval;
        // the last m only enter the x part's arrays.
        for (j, &i) in self.order.iter().enumerate() {
            let (wi, wdx) = if FRESH {
                let dx = x[i] - xm;
                let wdx = w[i] * dx;
                (xp.dx[j], xp.ws[j], xp.wdx[j]) = (dx, w[i], wdx);
                s[0] += w[i];
                s[1] += wdx;
                s[2] += wdx * dx;
                (w[i], wdx)
            } else {
                (xp.ws[j], xp.wdx[j])
            };
            if j + 1 >= m + n {
                if FRESH {
                    continue;
                }
                break;
            }
            for k in 0..K {
                let dr = rs[k][i] - rm[k];
                s3[k] += wi * dr;
                s4[k] += wdx * dr;
            }
            if j + 1 >= m {
                let at = j + 1 - m;
                let (s1, s2) = if FRESH {
                    (xp.s0[at], xp.s1[at], xp.s2[at]) = (s[0], s[1], s[2]);
                    (s[1], s[2])
                } else {
                    (xp.s1[at], xp.s2[at])
                };
                for k in 0..K {
                    out[k].al[at] = s3[k] - s1 * slope[k];
                    out[k].be[at] = s4[k] - s2 * slope[k];
                }
            }
        }
    }

    /// All of interval `i`'s two candidates of response `k` (as [`interval_candidates`]).
    fn interval(&self, k: usize, i: usize, tiny: f64, m: usize) -> [[f64; 2]; 3] {
        let (xp, r) = (&self.xp, &self.resp[k]);
        let (ga, de, ep) = (xp.ga[i], xp.de[i], xp.ep[i]);
        let (lo, hi) = (xp.dx[m - 1 + i], xp.dx[m + i]);
        interval_candidates(r.al[i], r.be[i], ga, de, ep, lo, hi, tiny)
    }

    /// The interval with the largest explained sum of squares (the first on a tie) and
    /// that sum as `num / den`, `None` when no interval has a candidate. One pass through
    /// the intervals in lanes ([`BestInterval`]).
    // Not inlined (nor `XPart::centre`): inlined into `pass`, they made the sorted pass's
    // loop slower (W3 CPU 0.209 s out of line against 0.219 s inlined, alternating runs).
    #[inline(never)]
    fn best(&self, k: usize, tiny: f64, m: usize) -> Option<Best> {
        let (xp, r) = (&self.xp, &self.resp[k]);
        let n = xp.s0.len();
        dispatch(BestInterval {
            al: &r.al[..n],
            be: &r.be[..n],
            ga: &xp.ga[..n],
            de: &xp.de[..n],
            ep: &xp.ep[..n],
            lo: &xp.dx[m - 1..m - 1 + n],
            hi: &xp.dx[m..m + n],
            tiny,
        })
    }

    /// Every candidate's `(q, SSE)` of response `k`, in increasing q.
    fn profile(&self, k: usize, sse_null: f64, tiny: f64, m: usize, prof: &mut Vec<(f64, f64)>) {
        for i in 0..self.xp.s0.len() {
            let [n, d, q] = self.interval(k, i, tiny, m);
            for j in 0..2 {
                if n[j] >= 0.0 {
                    prof.push((q[j] + self.xp.xm, (sse_null - n[j] / d[j]).max(0.0)));
                }
            }
        }
    }
}

/// `((α q − β)², γ q² − 2 δ q + ε)` lane by lane, as in `interval_candidates`.
#[inline(always)]
fn explained_at<S: Wide>(s: S, [al, be, ga, de, ep]: [L8<S>; 5], q: L8<S>) -> (L8<S>, L8<S>) {
    let two_de = L8::splat(s, 2.0).mul(s, de);
    let den = ga.mul(s, q).mul(s, q).sub(s, two_de.mul(s, q)).add(s, ep);
    let num = al.mul(s, q).sub(s, be);
    (num.mul(s, num), den)
}

/// The interval a search chose and its explained sum of squares `num / den`.
#[derive(Clone, Copy)]
struct Best {
    i: usize,
    num: f64,
    den: f64,
}

/// Per allowed interval, the better of its two candidates (the interior one wins a tie),
/// and the best interval: each lane keeps the first best of its intervals (interval `i`
/// in lane `i % 8`), then the lanes' winners are compared, the lower interval winning a
/// tie. Explained sums of squares `num / den` are compared exactly
/// ([`super::lanes::exceeds`]): a rounded cross-multiplication is not transitive, and
/// with it the lanes could pick another interval than one scan (a review found 49 in
/// 400,000 searches on data with repeated x, same q, other `n_below`). So the first
/// largest interval wins, as in one scan. No branch, gather or division but `q*`'s, and
/// the same on every processor ([`super::lanes`]).
struct BestInterval<'a> {
    al: &'a [f64],
    be: &'a [f64],
    ga: &'a [f64],
    de: &'a [f64],
    ep: &'a [f64],
    lo: &'a [f64],
    hi: &'a [f64],
    tiny: f64,
}

impl BestInterval<'_> {
    /// The seven columns of intervals `j0..j0 + 8`: `v[j0..j0 + 8]` of whole blocks
    /// (`PAD` false), zeros past the end otherwise.
    #[inline(always)]
    fn block<S: Wide, const PAD: bool>(&self, s: S, j0: usize) -> [L8<S>; 7] {
        let cols = [
            self.al, self.be, self.ga, self.de, self.ep, self.lo, self.hi,
        ];
        let mut v = [L8::splat(s, 0.0); 7];
        for (v, c) in v.iter_mut().zip(cols) {
            *v = if PAD {
                L8::get(s, c, j0, 0.0)
            } else {
                L8::at(s, c, j0)
            };
        }
        v
    }

    /// Per interval of a block, the better of its two candidates as `(num, den)`, `-1 / 1`
    /// where it has none (the interior one on a tie).
    #[inline(always)]
    fn better<S: Wide>(&self, s: S, [al, be, ga, de, ep, lo, hi]: [L8<S>; 7]) -> (L8<S>, L8<S>) {
        let (one, minus) = (L8::splat(s, 1.0), L8::splat(s, -1.0));
        let tiny = L8::splat(s, self.tiny);
        // As `interval_candidates`, operation by operation.
        let q_star = be
            .mul(s, de)
            .sub(s, al.mul(s, ep))
            .div(s, be.mul(s, ga).sub(s, al.mul(s, de)));
        let (n_in, d_in) = explained_at(s, [al, be, ga, de, ep], q_star);
        let (n_up, d_up) = explained_at(s, [al, be, ga, de, ep], hi);
        // Kept where `d_in > tiny`, `q* > lo` and `hi > q*` (all false for NaN).
        let n_in = hi.select_gt(s, q_star, n_in, minus);
        let n_in = q_star.select_gt(s, lo, n_in, minus);
        let n_in = d_in.select_gt(s, tiny, n_in, minus);
        let d_kept = hi.select_gt(s, q_star, d_in, one);
        let d_kept = q_star.select_gt(s, lo, d_kept, one);
        let d_in = d_in.select_gt(s, tiny, d_kept, one);
        let (n_up, d_up) = (
            d_up.select_gt(s, tiny, n_up, minus),
            d_up.select_gt(s, tiny, d_up, one),
        );
        let (l, r) = (n_in.mul(s, d_up), n_up.mul(s, d_in));
        (l.select_ge(s, r, n_in, n_up), l.select_ge(s, r, d_in, d_up))
    }
}

/// Each lane's first best interval so far: its explained sum `n / d` and its index.
#[derive(Clone, Copy)]
struct Leaders<S: Wide> {
    n: L8<S>,
    d: L8<S>,
    i: L8<S>,
}

impl<S: Wide> Leaders<S> {
    /// None yet: `-1 / 1`, which any candidate beats.
    #[inline(always)]
    fn new(s: S) -> Self {
        let minus = L8::splat(s, -1.0);
        Leaders {
            n: minus,
            d: L8::splat(s, 1.0),
            i: minus,
        }
    }

    /// The candidates `num / den` of intervals `idx` where they beat the lane's leader,
    /// by the exact sign of `num·d − n·den`: a transitive comparison, so the lanes and
    /// their merge find the first best interval one scan would.
    #[inline(always)]
    fn take(self, s: S, num: L8<S>, den: L8<S>, idx: L8<S>) -> Self {
        let zero = L8::splat(s, 0.0);
        let det = L8::det(s, num, self.d, self.n, den);
        Leaders {
            n: num.select_ge(s, zero, det.select_gt(s, zero, num, self.n), self.n),
            d: num.select_ge(s, zero, det.select_gt(s, zero, den, self.d), self.d),
            i: num.select_ge(s, zero, det.select_gt(s, zero, idx, self.i), self.i),
        }
    }
}

impl Kernel for BestInterval<'_> {
    type Output = Option<Best>;

    #[inline(always)]
    fn run<S: Wide>(self, s: S) -> Option<Best> {
        // Two sets of leaders, for the even and the odd blocks of eight intervals: a
        // set's choice waits on its last one, and two such chains run side by side.
        let mut sets = [Leaders::new(s); 2];
        let mut idx = L8::load(s, &[0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0]);
        let step = L8::splat(s, LANES as f64);
        let n = self.al.len();
        let whole = n - n % (2 * LANES);
        for j0 in (0..whole).step_by(2 * LANES) {
            let (n0, d0) = self.better(s, self.block::<S, false>(s, j0));
            let (n1, d1) = self.better(s, self.block::<S, false>(s, j0 + LANES));
            sets[0] = sets[0].take(s, n0, d0, idx);
            idx = idx.add(s, step);
            sets[1] = sets[1].take(s, n1, d1, idx);
            idx = idx.add(s, step);
        }
        // Intervals past the end hold zeros: q* is NaN and both denominators 0, so
        // neither candidate counts.
        for (b, j0) in (whole..n).step_by(LANES).enumerate() {
            let (nb, db) = self.better(s, self.block::<S, true>(s, j0));
            sets[b % 2] = sets[b % 2].take(s, nb, db, idx);
            idx = idx.add(s, step);
        }
        // The best of the lanes' leaders, the first interval on a tie: the winner a
        // scan in interval order keeps.
        let mut best: Option<Best> = None;
        for set in sets {
            let (bn, bd, bi) = (set.n.lanes(s), set.d.lanes(s), set.i.lanes(s));
            for l in (0..LANES).filter(|&l| bi[l] >= 0.0) {
                let i = bi[l] as usize;
                let take = best.is_none_or(|b| {
                    exceeds(bn[l], bd[l], b.num, b.den)
                        || (!exceeds(b.num, b.den, bn[l], bd[l]) && i < b.i)
                });
                if take {
                    best = Some(Best {
                        i,
                        num: bn[l],
                        den: bd[l],
                    });
                }
            }
        }
        best
    }
}

/// The coefficients at the optimum of interval `i` (centred coordinates), then back to
/// the original ones.
#[allow(clippy::too_many_arguments)]
fn solution(
    ws: &Workspace,
    k: usize,
    best: Best,
    c: &Centred,
    line: bool,
    m: usize,
    tiny: f64,
) -> BreakSolution {
    let (xp, r) = (&ws.xp, &ws.resp[k]);
    let i = best.i;
    let sse_null = c.sse_null(line, xp.sxx);
    // The break [`BestInterval`] chose in the interval (the interior one on a tie), made again.
    let [n, d, q] = ws.interval(k, i, tiny, m);
    let qc = if n[0] * d[1] >= n[1] * d[0] {
        q[0]
    } else {
        q[1]
    };
    let (s_w, s_x, s_xx) = (xp.s0[i], xp.s1[i], xp.s2[i]);
    let sum_h = qc * s_w - s_x;
    let sum_xh = qc * s_x - s_xx;
    let (al, be) = (r.al[i], r.be[i]);
    let (ga, de, ep) = (xp.ga[i], xp.de[i], xp.ep[i]);
    let den = ga * qc * qc - 2.0 * de * qc + ep;
    let coef = (al * qc - be) / den;
    let b = if line {
        (c.sxr - coef * sum_xh) / xp.sxx
    } else {
        0.0
    };
    let a_c = -coef * sum_h / xp.sw;
    BreakSolution {
        q: qc + xp.xm,
        a: c.rm + a_c - b * xp.xm,
        b,
        c: coef,
        sse: (sse_null - best.num / best.den).max(0.0),
        sse_null,
        n_below: m + i,
        interval: i,
        n_intervals: xp.s0.len(),
    }
}

#[cfg(test)]
#[allow(clippy::needless_range_loop)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};

    /// Brute force: for a given q, ordinary weighted least squares on [1, (x), h_q].
    fn sse_at(x: &[f64], r: &[f64], w: &[f64], q: f64, line: bool) -> f64 {
        let cols: Vec<Vec<f64>> = {
            let mut c = vec![vec![1.0; x.len()]];
            if line {
                c.push(x.to_vec());
            }
            c.push(x.iter().map(|&x| (q - x).max(0.0)).collect());
            c
        };
        let k = cols.len();
        let mut a = vec![vec![0.0; k + 1]; k];
        for i in 0..k {
            for j in 0..k {
                a[i][j] = (0..x.len()).map(|p| w[p] * cols[i][p] * cols[j][p]).sum();
            }
            a[i][k] = (0..x.len()).map(|p| w[p] * cols[i][p] * r[p]).sum();
        }
        for i in 0..k {
            let piv = a[i][i];
            for j in i..=k {
                a[i][j] /= piv;
            }
            for l in 0..k {
                if l != i {
                    let f = a[l][i];
                    for j in i..=k {
                        a[l][j] -= f * a[i][j];
                    }
                }
            }
        }
        (0..x.len())
            .map(|p| {
                let fit: f64 = (0..k).map(|i| a[i][k] * cols[i][p]).sum();
                w[p] * (r[p] - fit).powi(2)
            })
            .sum()
    }

    /// Several responses in one pass give each response's own search, bit for bit, for
    /// one to more than [`MAX_RESPONSES`] responses, both bases, and the profile of the
    /// first.
    #[test]
    fn responses_searched_together_match_their_own_searches() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let p = 60;
        let x: Vec<f64> = (0..p).map(|_| rng.random::<f64>()).collect();
        let w: Vec<f64> = (0..p).map(|_| 0.5 + rng.random::<f64>()).collect();
        let rs: Vec<Vec<f64>> = (0..5)
            .map(|k| {
                let q = 0.3 + 0.1 * k as f64;
                x.iter()
                    .map(|&x| 0.2 * x - 0.6 * (q - x).max(0.0) + 0.05 * rng.random::<f64>())
                    .collect()
            })
            .collect();
        for base in [Base::Constant, Base::Line] {
            for k in 1..=rs.len() {
                let refs: Vec<&[f64]> = rs[..k].iter().map(Vec::as_slice).collect();
                let mut ws = Workspace::sorted_by(&x);
                let (mut out, mut prof) = (vec![None; k], Vec::new());
                search_each(&x, &refs, &w, base, 4, &mut ws, Some(&mut prof), &mut out);
                for (r, got) in refs.iter().zip(&out) {
                    let mut own = Workspace::default();
                    let want = search(&x, r, &w, base, 4, &mut own, None);
                    assert_eq!(format!("{got:?}"), format!("{want:?}"), "{base:?}, {k}");
                }
                let (mut own, mut want) = (Workspace::default(), Vec::new());
                search(&x, refs[0], &w, base, 4, &mut own, Some(&mut want));
                assert_eq!(format!("{prof:?}"), format!("{want:?}"));
            }
        }
    }

    #[test]
    fn closed_form_optimum_matches_a_dense_brute_force_scan() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        for trial in 0..40 {
            let line = trial % 2 == 1;
            let p = 30;
            let x: Vec<f64> = (0..p).map(|_| rng.random::<f64>()).collect();
            let r: Vec<f64> = x
                .iter()
                .map(|&x| 0.3 * x - 0.7 * (0.5 - x).max(0.0) + 0.05 * rng.random::<f64>())
                .collect();
            let w: Vec<f64> = (0..p).map(|_| 0.5 + rng.random::<f64>()).collect();
            let base = if line { Base::Line } else { Base::Constant };
            let mut ws = Workspace::default();
            let s = search(&x, &r, &w, base, 4, &mut ws, None).unwrap();
            // The closed form's SSE equals a direct solve at its q ...
            let direct = sse_at(&x, &r, &w, s.q, line);
            assert!(
                (s.sse - direct).abs() < 1e-9 * (1.0 + direct),
                "trial {trial}"
            );
            // ... and no q on a dense grid inside the allowed range does better.
            let mut xs = x.clone();
            xs.sort_by(f64::total_cmp);
            let (lo, hi) = (xs[3], xs[p - 4]);
            for i in 0..=4000 {
                let q = lo + (hi - lo) * i as f64 / 4000.0;
                assert!(
                    sse_at(&x, &r, &w, q, line) >= s.sse - 1e-9,
                    "trial {trial}, q {q}"
                );
            }
            // The coefficients reproduce the fitted values' SSE.
            let sse_coef: f64 = (0..p).map(|i| w[i] * (r[i] - s.eval(x[i])).powi(2)).sum();
            assert!(
                (sse_coef - s.sse).abs() < 1e-9 * (1.0 + s.sse),
                "trial {trial}"
            );
        }
    }

    /// The search done the slow way: every allowed break interval's sums summed afresh,
    /// the same closed forms, the first least SSE kept.
    fn slow_search(x: &[f64], r: &[f64], w: &[f64], line: bool, m: usize) -> Option<(f64, f64)> {
        let p = x.len();
        let mut idx: Vec<usize> = (0..p).collect();
        idx.sort_by(|&i, &j| x[i].total_cmp(&x[j]));
        let sw: f64 = w.iter().sum();
        let xm = (0..p).map(|i| w[i] * x[i]).sum::<f64>() / sw;
        let rm = (0..p).map(|i| w[i] * r[i]).sum::<f64>() / sw;
        let sxx: f64 = (0..p).map(|i| w[i] * (x[i] - xm).powi(2)).sum();
        let sxr: f64 = (0..p).map(|i| w[i] * (x[i] - xm) * (r[i] - rm)).sum();
        let srr: f64 = (0..p).map(|i| w[i] * (r[i] - rm).powi(2)).sum();
        let sse_null = if line { srr - sxr * sxr / sxx } else { srr };
        let mut best: Option<(f64, f64)> = None;
        for k in m..=(p - m) {
            let mut s = [0.0; 5];
            for &i in &idx[..k] {
                let (dx, dr) = (x[i] - xm, r[i] - rm);
                s = [
                    s[0] + w[i],
                    s[1] + w[i] * dx,
                    s[2] + w[i] * dx * dx,
                    s[3] + w[i] * dr,
                    s[4] + w[i] * dx * dr,
                ];
            }
            let l = if line { 1.0 } else { 0.0 };
            let al = s[3] - l * s[1] * sxr / sxx;
            let be = s[4] - l * s[2] * sxr / sxx;
            let ga = s[0] - s[0] * s[0] / sw - l * s[1] * s[1] / sxx;
            let de = s[1] - s[0] * s[1] / sw - l * s[1] * s[2] / sxx;
            let ep = s[2] - s[1] * s[1] / sw - l * s[2] * s[2] / sxx;
            let (lo, hi) = (x[idx[k - 1]] - xm, x[idx[k]] - xm);
            let q_star = (be * de - al * ep) / (be * ga - al * de);
            let qs = if q_star > lo && q_star < hi {
                vec![q_star, hi]
            } else {
                vec![hi]
            };
            for q in qs {
                let den = ga * q * q - 2.0 * de * q + ep;
                if den > 1e-12 * sxx {
                    let sse = (sse_null - (al * q - be).powi(2) / den).max(0.0);
                    if best.is_none_or(|b| sse < b.1) {
                        best = Some((q + xm, sse));
                    }
                }
            }
        }
        best
    }

    #[test]
    fn the_one_pass_search_finds_what_the_slow_search_finds() {
        // Random points with ties in x, reused workspaces (the x part remembered between
        // searches on the same points, then points and weights changed under it).
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let mut ws = Workspace::default();
        for trial in 0..300 {
            let line = trial % 2 == 0;
            let p = 8 + trial % 40;
            let m = 1 + trial % 4;
            let x: Vec<f64> = (0..p)
                .map(|_| (rng.random::<f64>() * 20.0).round() / 20.0)
                .collect();
            let w: Vec<f64> = (0..p).map(|_| 0.2 + rng.random::<f64>()).collect();
            let base = if line { Base::Line } else { Base::Constant };
            for again in 0..3 {
                let r: Vec<f64> = x
                    .iter()
                    .map(|&x| 0.4 * x - 0.9 * (0.45 - x).max(0.0) + 0.1 * rng.random::<f64>())
                    .collect();
                let fast = search(&x, &r, &w, base, m, &mut ws, None).map(|s| (s.q, s.sse));
                let slow = slow_search(&x, &r, &w, line, m);
                match (fast, slow) {
                    (Some(a), Some(b)) => assert!(
                        (a.0 - b.0).abs() < 1e-9 && (a.1 - b.1).abs() < 1e-9 * (1.0 + b.1),
                        "trial {trial}.{again}: {a:?} vs {b:?}"
                    ),
                    (a, b) => assert_eq!(a.is_some(), b.is_some(), "trial {trial}.{again}"),
                }
            }
        }
    }

    #[test]
    fn a_remembered_x_part_gives_what_a_fresh_workspace_gives() {
        let x: Vec<f64> = (0..40).map(|i| ((i * 17) % 40) as f64 / 40.0).collect();
        let w: Vec<f64> = (0..40).map(|i| 1.0 + (i % 3) as f64).collect();
        let r1: Vec<f64> = x.iter().map(|&x| 1.0 - 0.6 * (0.5 - x).max(0.0)).collect();
        let r2: Vec<f64> = x
            .iter()
            .map(|&x| 1.0 - 0.3 * (0.3 - x).max(0.0) + 0.01 * x)
            .collect();
        let mut kept = Workspace::default();
        for base in [Base::Constant, Base::Line] {
            search(&x, &r1, &w, base, 3, &mut kept, None).unwrap();
            let again = search(&x, &r2, &w, base, 3, &mut kept, None).unwrap();
            let fresh = search(&x, &r2, &w, base, 3, &mut Workspace::default(), None).unwrap();
            assert_eq!(again, fresh);
            // Other weights on the same x must not reuse the remembered part.
            let w2: Vec<f64> = w.iter().rev().copied().collect();
            let other = search(&x, &r2, &w2, base, 3, &mut kept, None).unwrap();
            let fresh = search(&x, &r2, &w2, base, 3, &mut Workspace::default(), None).unwrap();
            assert_eq!(other, fresh);
        }
    }

    #[test]
    fn exact_broken_stick_data_give_back_the_break_and_slopes() {
        let x: Vec<f64> = (0..50).map(|i| i as f64 / 49.0).collect();
        let r: Vec<f64> = x
            .iter()
            .map(|&x| 2.0 - 0.8 * x + 0.55 * (0.37 - x).max(0.0))
            .collect();
        let w = vec![1.0; 50];
        let s = search(&x, &r, &w, Base::Line, 5, &mut Workspace::default(), None).unwrap();
        assert!((s.q - 0.37).abs() < 1e-9, "{s:?}");
        assert!((s.b + 0.8).abs() < 1e-9 && (s.c - 0.55).abs() < 1e-9 && (s.a - 2.0).abs() < 1e-9);
        assert!(s.sse < 1e-12, "{s:?}");
    }

    #[test]
    fn too_few_points_or_no_spread_give_none() {
        let mut ws = Workspace::default();
        let x = [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];
        let r = [0.0; 9];
        let w = [1.0; 9];
        assert!(search(&x, &r, &w, Base::Constant, 5, &mut ws, None).is_none());
        let flat = [0.5; 12];
        assert!(
            search(
                &flat,
                &[0.0; 12],
                &[1.0; 12],
                Base::Constant,
                3,
                &mut ws,
                None
            )
            .is_none()
        );
    }

    /// The running count in four quarters is the one running sum, for every length
    /// (none, fewer than four, not a multiple of four). Source: common practice (integer
    /// addition is associative).
    #[test]
    fn a_running_count_in_quarters_is_the_running_sum() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for len in [0, 1, 3, 4, 5, 8, 17, 4097] {
            let count: Vec<u32> = (0..len).map(|_| rng.random_range(0..4)).collect();
            let want: Vec<u32> = count
                .iter()
                .scan(0, |s, &c| {
                    *s += c;
                    Some(*s)
                })
                .collect();
            let mut got = count.clone();
            running_count(&mut got);
            assert_eq!(got, want, "{len} bins");
        }
    }

    /// The sort through bins gives the stable sort of the starting order: with ties,
    /// with x beyond the full data's range at both ends, and with the curves of a resample
    /// moved against each other. The insertion sort alone is the reference.
    /// Source: common practice (a stable sort is unique, so two ways must agree).
    #[test]
    fn a_sort_through_bins_is_the_stable_sort_of_the_starting_order() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let (curves, per) = (8, 80);
        // Curves over the same range of x, rounded so that some points tie.
        let full: Vec<f64> = (0..curves * per)
            .map(|j| 1.0 - (j % per) as f64 / per as f64 + 0.01 * rng.random::<f64>())
            .map(|v| (v * 512.0).round() / 512.0)
            .collect();
        let mut binned = Workspace::sorted_by(&full);
        assert!(
            !binned.bins.count.is_empty(),
            "{} points are binned",
            full.len()
        );
        for draw in 0..20 {
            let shift: Vec<f64> = (0..curves)
                .map(|_| 0.05 * (rng.random::<f64>() - 0.5))
                .collect();
            let x: Vec<f64> = full
                .iter()
                .enumerate()
                .map(|(j, v)| v + shift[j / per] + if draw % 2 == 0 { 0.0 } else { 0.3 })
                .map(|v| (v * 256.0).round() / 256.0)
                .collect();
            binned.sort(&x);
            let mut want = binned.start.clone();
            let mut keys: Vec<f64> = want.iter().map(|&i| x[i]).collect();
            insertion_sort(&mut want, &mut keys);
            assert_eq!(binned.order, want, "draw {draw}");
        }
    }

    /// The scan over these columns (`al, be, ga, de, ep, lo, hi`).
    fn best_interval<'a>(c: [&'a [f64]; 7], tiny: f64) -> BestInterval<'a> {
        let [al, be, ga, de, ep, lo, hi] = c;
        BestInterval {
            al,
            be,
            ga,
            de,
            ep,
            lo,
            hi,
            tiny,
        }
    }

    /// Three intervals whose explained sums of squares tie under the rounded
    /// cross-multiplication (0 against 1) while 8 is larger than 0 and ties with 1: the
    /// lanes and one scan both take the exactly largest, the same on every instruction
    /// set. Source: a review's counterexample to the rounded comparison (the inputs are
    /// its bits).
    #[test]
    fn near_ties_go_to_the_exactly_largest_interval() {
        let n = 9;
        let (al, ga, de) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
        let (mut be, mut ep) = (vec![0.0; n], vec![0.0; n]);
        for (i, b, e) in [
            (0, 0x3feb3c821235b8c1u64, 0x3ff48518cb1b3a76u64),
            (1, 0x3fed0c3e715bbca6, 0x3ff757179710aa02),
            (8, 0x3fe3b6b01b6f745c, 0x3fe58005ea323b0d),
        ] {
            (be[i], ep[i]) = (f64::from_bits(b), f64::from_bits(e));
        }
        let (lo, hi) = (vec![-1.0; n], vec![1.0; n]);
        let op = || best_interval([&al, &be, &ga, &de, &ep, &lo, &hi], 0.0);
        // Upper candidates only (q* = 0/0): b² / e at each; exact order by rationals.
        let value = |i: usize| (be[i] * be[i], ep[i]);
        let mut want = 0;
        for i in [1, 8] {
            let ((n1, d1), (n2, d2)) = (value(i), value(want));
            if exceeds(n1, d1, n2, d2) {
                want = i;
            }
        }
        assert_eq!(
            op().run(super::super::lanes::Plain).map(|b| b.i),
            Some(want)
        );
        assert_eq!(dispatch(op()).map(|b| b.i), Some(want));
    }

    /// The scan in lanes chooses the interval one scan in order chooses (the interior
    /// candidate on a tie inside an interval, the first interval on a tie between them),
    /// on every instruction set: random intervals, some without a candidate, and exact
    /// ties placed in different lanes. Source: common practice (the first maximum of a
    /// list does not depend on how the list is split).
    #[test]
    fn the_scan_in_lanes_chooses_what_one_scan_chooses() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        for trial in 0..400 {
            let n = 1 + trial % 45;
            let mut col = |scale: f64| -> Vec<f64> {
                (0..n)
                    .map(|_| scale * (rng.random::<f64>() - 0.3))
                    .collect()
            };
            let (mut al, mut be) = (col(2.0), col(2.0));
            let mut ga: Vec<f64> = col(1.0).iter().map(|v| v.abs() + 0.1).collect();
            let mut de = col(0.2);
            let mut ep: Vec<f64> = col(1.0).iter().map(|v| v.abs() + 0.5).collect();
            let mut lo: Vec<f64> = col(1.0);
            lo.sort_by(f64::total_cmp);
            let mut hi: Vec<f64> = lo.iter().map(|v| v + 0.05).collect();
            if trial % 3 == 0 && n > 9 {
                // One interval twice, in different lanes: an exact tie, the first wins.
                let (a, b) = (trial % 5, n - 1 - trial % 3);
                for v in [
                    &mut al, &mut be, &mut ga, &mut de, &mut ep, &mut lo, &mut hi,
                ] {
                    v[b] = v[a];
                }
            }
            let tiny = 1e-3 * (trial % 4) as f64;
            let (mut want, mut bn, mut bd) = (None, 0.0, 1.0);
            for i in 0..n {
                let [c, d, _] =
                    interval_candidates(al[i], be[i], ga[i], de[i], ep[i], lo[i], hi[i], tiny);
                let inner = c[0] * d[1] >= c[1] * d[0];
                let (c, d) = if inner { (c[0], d[0]) } else { (c[1], d[1]) };
                if c >= 0.0 && (want.is_none() || exceeds(c, d, bn, bd)) {
                    (want, bn, bd) = (Some(i), c, d);
                }
            }
            let scan = |w: Option<Best>| w.map(|b| (b.i, b.num.to_bits(), b.den.to_bits()));
            let want = want.map(|i| (i, bn.to_bits(), bd.to_bits()));
            let op = || best_interval([&al, &be, &ga, &de, &ep, &lo, &hi], tiny);
            assert_eq!(
                scan(op().run(super::super::lanes::Plain)),
                want,
                "trial {trial}"
            );
            assert_eq!(scan(dispatch(op())), want, "trial {trial}");
        }
    }

    /// The profile is the first response's: when that response cannot be searched (its
    /// length is wrong) the profile stays empty, and the responses after the first
    /// [`MAX_RESPONSES`] are still searched, as on their own. Source: common practice
    /// (the documented contract of `search_each`).
    #[test]
    fn a_profile_is_never_taken_from_a_later_response() {
        let p = 40;
        let x: Vec<f64> = (0..p).map(|i| i as f64 / p as f64).collect();
        let r: Vec<f64> = x.iter().map(|&x| 1.0 - 0.5 * (0.6 - x).max(0.0)).collect();
        let w = vec![1.0; p];
        let short = &r[..p - 1];
        let rs: [&[f64]; 4] = [short, &r, &r, &r];
        let (mut ws, mut out, mut prof) = (Workspace::default(), [None; 4], Vec::new());
        search_each(
            &x,
            &rs,
            &w,
            Base::Constant,
            3,
            &mut ws,
            Some(&mut prof),
            &mut out,
        );
        assert!(prof.is_empty(), "{} profile points", prof.len());
        assert!(out[..3].iter().all(Option::is_none));
        let own = search(
            &x,
            &r,
            &w,
            Base::Constant,
            3,
            &mut Workspace::default(),
            None,
        );
        assert_eq!(format!("{:?}", out[3]), format!("{own:?}"));
    }
}
