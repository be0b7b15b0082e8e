//! The data behind every fit and the resampling of whole samples: the data matrix `D`
//! whose rows are samples, the weight rule applied alike to the full data, each
//! leave-one-out set and each resample, the jackknife, and the chunked bootstrap where one
//! replicate's means are one row of `W · D`.

use super::campaign::Campaign;
use super::findings::{Caution, Finding, Subject};
use super::fitting::{
    Group, Members, Points, Scratch, Spec, fit_group, fit_resample, shape_null, shape_record,
    share_order,
};
use super::lack_of_fit::LofNull;
use super::model::{Draw, Values};
use super::points::{Axes, DataMatrix, LeaveOut, Parametric, PointVariance, Transform};
use super::settings::{FitSettings, Hold, Weighting};
use super::shape::{self, Setup};
use crate::common::Progress;
use crate::error::{Error, Result};
use crate::resample;
use ndarray::{Array2, ArrayView1};
use rayon::prelude::*;

/// Bytes of `W · D` per chunk of replicates.
const CHUNK_BYTES: usize = 2 << 20;

/// Replicates per chunk of the resampling product for a data matrix of `cols` columns:
/// 2 MiB of product, 16 to 256 rows, a multiple of 16 (64 for 1200 points on plain axes
/// with one moment column each, 32 on normalized axes). Smaller chunks keep the product's
/// buffers well below the data matrix on large campaigns (W1 of benches/: peak 63 → 51 MiB
/// against 256 rows, the same wall time, 5% more CPU in re-packing `D`). Results depend on neither the chunk nor
/// the threads: replicate `b`'s draws come from `(seed, b)` and its row of `W · D` is its
/// own, the same bits in any chunk (a one-row chunk is multiplied as two rows, since the
/// product takes another path for one row: `resample::product_columns`).
pub fn chunk_rows(cols: usize) -> usize {
    (CHUNK_BYTES / (8 * cols.max(1))).clamp(16, 256) / 16 * 16
}

/// How point weights are made, the same way in the full fit and in every resample.
#[derive(Debug, Clone)]
pub enum WeightRule {
    /// All points alike.
    Uniform,
    /// `1 / max(var, floor)` with `var` from the fit's own samples.
    Inverse { pv: PointVariance, floor: f64 },
}

impl WeightRule {
    /// Writes the weights of every point from a row of `W · D` over `drawn` samples.
    pub fn weights(
        &self,
        means: ArrayView1<'_, f64>,
        drawn: usize,
        var: &mut [f64],
        w: &mut [f64],
    ) {
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

/// The campaign prepared for fitting: parametric points, the data matrix that one row of
/// `W · D` turns into a resample (the campaign's arrays borrowed, the moment columns
/// owned), and the rule that makes point weights.
pub struct Prepared<'a> {
    /// Means to plot coordinates.
    pub tf: Transform,
    /// The parametric points and their jackknife errors.
    pub pm: Parametric,
    /// `[C | χ | C(t,t)]` per sample, then the moment columns the weights need.
    pub data: DataMatrix<'a>,
    /// How weights are made.
    pub rule: WeightRule,
    /// Weights of the full-data fit.
    pub weights: Vec<f64>,
    /// Normalized axes were used.
    pub normalized: bool,
}

/// Forms the points, the data matrix and the full-data weights.
///
/// # Errors
/// [`Error::Setting`] for normalized axes without `corr_eq`; [`Error::Analysis`] when
/// the numbers overflow.
pub fn prepare<'a>(
    campaign: &'a Campaign,
    settings: &FitSettings,
    spec: Spec,
    cautions: &mut Vec<Caution>,
) -> Result<Prepared<'a>> {
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
    let alpha = spec.model.c_factor();
    let mut data = DataMatrix::of_campaign(campaign, normalized);
    let pm = Parametric::new(&data, tf);

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
    let rule = match settings.weights {
        Weighting::Uniform => WeightRule::Uniform,
        Weighting::InverseVariance => {
            let pv = PointVariance::new(&data, tf, alpha, kt);
            data.push(pv.moments(&data));
            WeightRule::Inverse { pv, floor: 0.0 }
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
    prep.full_weights(cautions);
    Ok(prep)
}

impl Prepared<'_> {
    /// The means of every column over all samples.
    pub fn means(&self) -> ndarray::Array1<f64> {
        self.data.means()
    }

    /// The full-data weights, and the variance floor every resample then shares.
    fn full_weights(&mut self, cautions: &mut Vec<Caution>) {
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
                cautions.push(campaign_caution(Finding::NoSpreadUniformWeights));
                self.rule = WeightRule::Uniform;
            } else {
                pos.sort_by(f64::total_cmp);
                let floor = 1e-6 * pos[pos.len() / 2];
                if var.iter().any(|v| !(*v >= floor)) {
                    cautions.push(campaign_caution(Finding::VarianceFloored));
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
pub fn make_groups(campaign: &Campaign, settings: &FitSettings, prep: &Prepared<'_>) -> Vec<Group> {
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
        Group::new(held, scale, idx)
    };
    let mut groups = vec![make(None)];
    if helds.len() > 1 {
        groups.extend(helds.iter().map(|&h| make(Some(h))));
    }
    groups
}

/// Leave-one-sample-out fits (BCa acceleration), weights re-estimated from the `n − 1`
/// samples left.
pub fn jackknife(
    prep: &Prepared<'_>,
    groups: &[Group],
    est: &[Option<Values>],
    spec: Spec,
    scratch: &[Scratch],
) -> Vec<Vec<Option<Draw>>> {
    let n = prep.data.nrows();
    let p = prep.tf.points;
    let full = prep.means();
    // The joint fit's sort serves the curves' searches, as in the bootstrap.
    let members = Members::of(groups);
    (0..n)
        .into_par_iter()
        .map_init(
            || {
                let lo = LeaveOut::new(full.clone(), prep.tf);
                let mut sc = scratch.to_vec();
                // One search a group: none reuses an x part.
                sc.iter_mut().for_each(Scratch::without_reuse);
                let shared = (Vec::new(), Vec::new());
                (sc, vec![0.0; p], vec![0.0; p], lo, shared)
            },
            |(sc, var, w, lo, (flat, cursor)), i| {
                lo.at(&prep.data, prep.tf, i);
                prep.rule.weights(lo.means.view(), n - 1, var, w);
                let pts = Points {
                    x: &lo.x,
                    y: &lo.y,
                    w,
                };
                (0..groups.len())
                    .map(|gi| {
                        if gi == 1
                            && let Some(members) = &members
                        {
                            share_order(sc, members, flat, cursor);
                        }
                        est[gi]
                            .and_then(|_| fit_group(&groups[gi], pts, spec, &mut sc[gi], None))
                            .map(|v| v.draw(f64::NAN))
                    })
                    .collect()
            },
        )
        .collect()
}

/// What moves each group's resamples onto a null model, per group: the equilibrium line
/// (`r̂ − f̂₀`), the fitted model for the lack-of-fit test, and the broken stick for the
/// shape test of the smooth X(C).
pub struct Nulls<'a> {
    /// `r̂ − f̂₀` per group (`None`: not fitted).
    pub equilibrium: &'a [Option<Vec<f64>>],
    /// The lack-of-fit null per group.
    pub lack_of_fit: &'a [Option<LofNull>],
    /// The smooth curve's setup per group (`--model smooth`).
    pub shape: &'a [Option<Setup>],
}

/// What the bootstrap keeps: replicate `b`'s groups are `draws[b·G .. (b+1)·G]`, and with
/// the smooth model their rows of [`shape::ROW`] values are `rows[(b·G + g)·ROW ..]`.
pub struct Replicates {
    /// The scalars of every resample and group.
    pub draws: Vec<Option<Draw>>,
    /// The smooth curve's values per resample and group (empty without the smooth model).
    pub rows: Vec<f64>,
}

/// The cluster bootstrap. One chunk of replicates is one product `W · D`; chunks are
/// fixed, so results do not depend on threads. Each resample also gets its null-moved
/// statistics where `nulls` has the group's null.
pub fn bootstrap(
    prep: &Prepared<'_>,
    groups: &[Group],
    nulls: &Nulls<'_>,
    spec: Spec,
    scratch: &[Scratch],
    settings: &FitSettings,
    progress: &dyn Progress,
) -> Replicates {
    let (n, p, ng) = (prep.data.nrows(), prep.tf.points, groups.len());
    let chunk = chunk_rows(prep.data.ncols());
    // The joint fit's sort serves the curves' searches.
    let members = Members::of(groups);
    let b_total = settings.resamples;
    let mut draws: Vec<Option<Draw>> = vec![None; b_total * ng];
    let row = if nulls.shape.iter().any(Option::is_some) {
        shape::ROW
    } else {
        0
    };
    let mut rows = vec![f64::NAN; b_total * ng * row];
    // A chunk of rows per chunk of draws (a dummy one each when there are no rows).
    let mut dummy = vec![f64::NAN; draws.len().div_ceil(chunk * ng)];
    let row_chunks: Vec<&mut [f64]> = if row > 0 {
        rows.chunks_mut(chunk * ng * row).collect()
    } else {
        dummy.chunks_mut(1).collect()
    };
    progress.start(b_total as u64);
    draws
        .par_chunks_mut(chunk * ng)
        .zip(row_chunks)
        .enumerate()
        .for_each_init(
            || {
                let bufs = vec![vec![0.0; p]; 4];
                let mats = [Array2::zeros((0, 0)), Array2::zeros((0, 0))];
                let shared = (Vec::new(), Vec::new());
                let mut sc = scratch.to_vec();
                if row == 0 {
                    // No shape test: no search of a resample is made twice on its points.
                    sc.iter_mut().for_each(Scratch::without_reuse);
                }
                (sc, vec![0u32; n], bufs, mats, shared)
            },
            |(sc, counts, bufs, [wm, means], (flat, cursor)), (c, (slot, rows))| {
                let b0 = c * chunk;
                let reps_here = slot.len() / ng;
                resample::weight_rows_into(settings.seed, b0, reps_here, counts, wm);
                prep.data.product_into(wm, means);
                for (r, reps) in slot.chunks_mut(ng).enumerate() {
                    let [x, y, var, w] = &mut bufs[..] else {
                        return;
                    };
                    prep.tf.apply(means.row(r), x, y);
                    prep.rule.weights(means.row(r), n, var, w);
                    let pts = Points { x, y, w };
                    for (gi, g) in groups.iter().enumerate() {
                        if gi == 1
                            && let Some(members) = &members
                        {
                            share_order(sc, members, flat, cursor);
                        }
                        let shape_row = (row > 0)
                            .then(|| &mut rows[(r * ng + gi) * row..(r * ng + gi + 1) * row]);
                        reps[gi] = replicate(g, pts, spec, &mut sc[gi], nulls, gi, shape_row);
                    }
                }
                progress.advance(reps_here as u64);
            },
        );
    progress.finish();
    Replicates { draws, rows }
}

/// One resample of one group: its fit and its null-moved statistics.
fn replicate(
    g: &Group,
    pts: Points<'_>,
    spec: Spec,
    s: &mut Scratch,
    nulls: &Nulls<'_>,
    gi: usize,
    shape_row: Option<&mut [f64]>,
) -> Option<Draw> {
    let shift = nulls.equilibrium[gi].as_deref()?;
    let lof = nulls.lack_of_fit[gi].as_ref();
    let (v, null_stat, lof_stat) = fit_resample(g, pts, spec, s, shift, lof)?;
    let setup = nulls.shape.get(gi).and_then(Option::as_ref);
    let mut shape_row = shape_row;
    if let (Some(setup), Some(row)) = (setup, shape_row.as_deref_mut()) {
        shape_record(g, pts, s, setup, row);
    }
    let mut d = v.draw(null_stat);
    d.lof_stat = lof_stat;
    if let (Some(setup), Some(row)) = (setup, shape_row) {
        row[shape::GRID + 1] = shape_null(g, pts, spec, s, setup);
    }
    Some(d)
}

fn campaign_caution(finding: Finding) -> Caution {
    Caution {
        subject: Subject::Campaign,
        finding,
    }
}
