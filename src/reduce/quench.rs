//! Protocol 2, repeated quenches: many runs of one system, each a record of one
//! observable A at common times t; unperturbed runs (h = 0) and runs with a step field h
//! switched on at tw.
//!
//! Input: the long CSV `run, t, value, h, tw` (`tw` may be empty when h = 0), the rows of
//! one run together. The file is read twice, streaming: the first pass finds the runs'
//! switch-on times, the second folds each run into moment sums as soon as it ends, so
//! memory does not grow with the number of runs.
//!
//! # Formula
//! Over the `n₀` unperturbed runs, `C(t,tw) = ⟨A(t)A(tw)⟩ − ⟨A(t)⟩⟨A(tw)⟩` (connected,
//! the default) or `⟨A(t)A(tw)⟩` (plain). Over the perturbed runs r switched on at tw,
//! `χ(t,tw) = mean_r [A_r(t)/h_r] − ⟨A(t)⟩₀ · mean_r [1/h_r]`, which is
//! `(⟨A(t)⟩_h − ⟨A(t)⟩₀)/h` when every run has the same h.
//!
//! Pointwise intervals: a stratified bootstrap of runs by Poisson(1) weights (each run
//! gets an independent Poisson(1) count in every replicate, drawn from its own random
//! stream; the unperturbed runs and each tw group of perturbed runs are normalized by
//! their own total weight), so C and χ are recomputed from the weighted moments in every
//! replicate without keeping the runs (Hanley & MacGibbon, Comput. Methods Programs Biomed.
//! 83, 57 (2006), from memory; Chamandy et al., Google technical report (2012), from
//! memory). Intervals are percentile intervals.
//!
//! Several fields at one tw (signed, ±h allowed): the runs are grouped by h, each group is
//! its own stratum of the bootstrap, and χ is formed per level as for twin runs
//! ([`super::twin`]): `(⟨A⟩_{+a} − ⟨A⟩_{−a})/(2a)` when every amplitude has both signs
//! (even orders cancel, level variable a²), `(⟨A⟩_h − ⟨A⟩₀)/h` otherwise (level variable
//! h). The reduced χ is the intercept of the least-squares line in the level variable
//! (Richardson extrapolation to h → 0) or the smallest amplitude alone (`Combine`). The
//! linear-response test: per point the slope ĉ_p of that line over its standard error from
//! the strata's variances, `t_p = ĉ_p / se_p`, overall `max_p |t_p|`; both calibrated by
//! the same stratified Poisson bootstrap with the null imposed by centring,
//! `t*_p = (ĉ*_p − ĉ_p) / se*_p` (the twin test's studentized max-|t|; Davison & Hinkley
//! 1997, §4.4; Westfall & Young 1993, ch. 2). Only moment sums per (tw, h) group are kept.
//!
//! Early field: at every recorded time t < tw, the perturbed runs' mean is compared with
//! the unperturbed mean by a two-sample z statistic; the caution fires when the largest
//! |z| exceeds the Bonferroni bound `Φ⁻¹(1 − α/(2m))` over the m comparisons (a level of at
//! most α under the normal approximation).

use super::RawSource;
use super::twin::{Combine, FieldTest, LevelDesign, LevelPlan, plan_levels};
use crate::error::{Error, Result};
use crate::resample::{self, replicate_rng};
use rand::RngExt;
use rayon::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal};
use std::collections::{HashMap, HashSet};
use std::path::Path;

/// Settings of the quench reduction.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QuenchSettings {
    /// Connected C (the default) or plain `⟨A(t)A(tw)⟩`.
    pub connected: bool,
    /// Waiting times to form C at; empty = the perturbed runs' switch-on times.
    pub tws: Vec<f64>,
    /// Poisson-bootstrap replicates.
    pub resamples: usize,
    /// Seed: run k (in file order) uses random stream k.
    pub seed: u64,
    /// Confidence level of the intervals; the early-field caution's and the linearity
    /// test's level is `1 − level`.
    pub level: f64,
    /// How χ is formed when a tw has several fields.
    pub combine: Combine,
}

impl Default for QuenchSettings {
    fn default() -> Self {
        QuenchSettings {
            connected: true,
            tws: Vec::new(),
            resamples: 999,
            seed: 1,
            level: 0.95,
            combine: Combine::Extrapolate,
        }
    }
}

/// One (tw, t) point of the reduction.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QuenchPoint {
    /// Waiting time.
    pub tw: f64,
    /// Later time.
    pub t: f64,
    /// C(t,tw) over the unperturbed runs.
    pub corr: f64,
    /// Percentile interval of C.
    pub corr_low: f64,
    /// Upper end.
    pub corr_high: f64,
    /// χ(t,tw); `None` when no perturbed run was switched on at tw.
    pub chi: Option<f64>,
    /// Percentile interval of χ.
    pub chi_low: Option<f64>,
    /// Upper end.
    pub chi_high: Option<f64>,
    /// χ at each field level of the point's tw, in the order of its design's levels (only
    /// where the tw has several fields).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub chi_levels: Option<Vec<f64>>,
    /// Change of χ across the levels from the fitted slope, `ĉ (u_max − u_min)`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub shift: Option<f64>,
    /// The point's linearity p-value.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub p: Option<f64>,
}

/// The field levels of one waiting time with several fields.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QuenchDesign {
    /// The waiting time.
    pub tw: f64,
    /// The distinct fields of its perturbed runs, ascending.
    pub fields: Vec<f64>,
    /// Runs per field (same order).
    pub runs: Vec<usize>,
    /// How the levels were formed and weighted (as for twin runs).
    #[serde(flatten)]
    pub design: LevelDesign,
}

/// A perturbed group whose mean moved before its field was switched on.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct EarlyDrift {
    /// The group's switch-on time.
    pub tw: f64,
    /// The time before tw with the largest |z|.
    pub t: f64,
    /// That z.
    pub z: f64,
    /// The Bonferroni bound it exceeded.
    pub bound: f64,
    /// Number of comparisons.
    pub comparisons: usize,
}

/// The reduction of repeated quenches.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct QuenchReduction {
    /// Unperturbed runs.
    pub unperturbed: usize,
    /// Perturbed runs per switch-on time `(tw, runs)`.
    pub perturbed: Vec<(f64, usize)>,
    /// Recorded times per run.
    pub times: usize,
    /// Per point: C and χ with intervals.
    pub points: Vec<QuenchPoint>,
    /// The early-field caution, when it fires.
    pub early: Option<EarlyDrift>,
    /// The waiting times with several fields and their levels.
    pub designs: Vec<QuenchDesign>,
    /// The linear-response test over the points of those waiting times (None when every
    /// tw has one field).
    pub test: Option<FieldTest>,
    /// Waiting times whose perturbed runs have one field only while others have several
    /// (their χ is not tested).
    pub untested: Vec<f64>,
    /// The settings used.
    pub settings: QuenchSettings,
    /// Per replicate, (C, χ) at every point (what the direct fit refits).
    #[serde(skip)]
    pub replicates: Vec<Vec<(f64, Option<f64>)>>,
}

const COLUMNS: [&str; 5] = ["run", "t", "value", "h", "tw"];

fn key(v: f64) -> u64 {
    if v == 0.0 { 0 } else { v.to_bits() }
}

/// One row as read.
struct Rec {
    run: String,
    t: f64,
    value: f64,
    h: f64,
    tw: Option<f64>,
    line: u64,
    /// 1-based column numbers of `run, t, value, h, tw`.
    cols: [u64; 5],
}

/// Streams the rows of the file to `each`, checking fields.
fn stream(src: &RawSource, mut each: impl FnMut(Rec) -> Result<()>) -> Result<()> {
    let path = src.label();
    let mut rdr = crate::input::csv_reader(src.open()?);
    let mut rec = csv::StringRecord::new();
    if !rdr
        .read_record(&mut rec)
        .map_err(|e| crate::input::csv_error(path, e))?
    {
        return Err(Error::input(
            path,
            None,
            None,
            format!(
                "the file is empty; expected a header line with columns {}",
                COLUMNS.join(", ")
            ),
        ));
    }
    let header = crate::input::Header::new(path, &rec)?;
    let idx = header.require(path, &COLUMNS)?;
    while rdr
        .read_record(&mut rec)
        .map_err(|e| crate::input::csv_error(path, e))?
    {
        if crate::input::is_blank(&rec) {
            continue;
        }
        header.check_width(path, &rec)?;
        let line = crate::input::line_of(&rec);
        let err = |c: usize, m: String| Error::input(path, Some(line), Some(c as u64 + 1), m);
        let num = |c: usize| {
            crate::input::parse_number(&rec[idx[c]], COLUMNS[c]).map_err(|m| err(idx[c], m))
        };
        if rec[idx[0]].is_empty() {
            return Err(err(
                idx[0],
                "column 'run' is empty, expected a run name".into(),
            ));
        }
        let h = num(3)?;
        let tw = if h == 0.0 {
            None
        } else if rec[idx[4]].is_empty() {
            return Err(err(
                idx[4],
                format!("column 'tw' is empty in a run with h = {h}, expected the switch-on time"),
            ));
        } else {
            Some(num(4)?)
        };
        each(Rec {
            run: rec[idx[0]].to_string(),
            t: num(1)?,
            value: num(2)?,
            h,
            tw,
            line,
            cols: [0, 1, 2, 3, 4].map(|c| idx[c] as u64 + 1),
        })?;
    }
    Ok(())
}

/// Poisson(1) by inversion.
fn poisson1(rng: &mut rand_chacha::ChaCha8Rng) -> f64 {
    let u: f64 = rng.random();
    let (mut k, mut p) = (0u32, (-1.0f64).exp());
    let mut cum = p;
    while u > cum && k < 30 {
        k += 1;
        p /= f64::from(k);
        cum += p;
    }
    f64::from(k)
}

/// Where each quantity sits in a moment vector.
struct Layout {
    /// Grid times.
    times: Vec<f64>,
    /// Points: (tw index in `tws`, grid index of tw, grid index of t).
    points: Vec<(usize, usize, usize)>,
    /// Waiting times.
    tws: Vec<f64>,
    /// Number of moments.
    len: usize,
    /// Per waiting time: its fields when it has several.
    groups: Vec<Option<Group>>,
    /// Offset of Σ A² of the unperturbed runs per grid time (0: not kept, no tw has
    /// several fields).
    u0: usize,
}

/// A waiting time with several fields: one stratum per field.
struct Group {
    /// The distinct fields (ascending); a run's level index is its place here.
    fields: Vec<f64>,
    /// How χ is formed from the fields (indices into `fields`).
    plan: LevelPlan,
    /// The tw's points: `first..first + count` in `Layout::points`.
    first: usize,
    /// Number of points.
    count: usize,
    /// Offset of the moments: per field the weight, then Σ A(t) and Σ A(t)² per point.
    base: usize,
}

impl Group {
    fn stride(&self) -> usize {
        1 + 2 * self.count
    }
    fn w(&self, f: usize) -> usize {
        self.base + f * self.stride()
    }
    fn s(&self, f: usize, j: usize) -> usize {
        self.w(f) + 1 + j
    }
    fn q(&self, f: usize, j: usize) -> usize {
        self.w(f) + 1 + self.count + j
    }
    fn len(&self) -> usize {
        self.fields.len() * self.stride()
    }
}

/// (C, χ) per point.
type PointEstimates = Vec<(f64, Option<f64>)>;

/// One point of a tw with several fields, from a moment vector.
struct LevelPoint {
    /// χ per level (None where a field's stratum has no weight).
    chis: Option<Vec<f64>>,
    /// The reduced χ.
    chi: Option<f64>,
    /// Slope of χ in the level variable and its standard error (None where a stratum
    /// has weight below 2).
    slope: Option<(f64, f64)>,
}

impl Layout {
    fn w0(&self) -> usize {
        0
    }
    fn s0(&self, g: usize) -> usize {
        1 + g
    }
    fn q0(&self, p: usize) -> usize {
        1 + self.times.len() + p
    }
    fn ng(&self, w: usize) -> usize {
        1 + self.times.len() + self.points.len() + 2 * w
    }
    fn hg(&self, w: usize) -> usize {
        self.ng(w) + 1
    }
    fn sg(&self, p: usize) -> usize {
        1 + self.times.len() + self.points.len() + 2 * self.tws.len() + p
    }
}

/// ` (tw = …, h = …)` of a perturbed run, empty for an unperturbed one.
fn run_label(r: &Run) -> String {
    r.tw.map_or(String::new(), |tw| format!(" (tw = {tw}, h = {})", r.h))
}

/// A finished run: its values on the grid.
struct Run {
    h: f64,
    tw: Option<f64>,
    /// Its field's index in the group of its tw, when that tw has several fields.
    level: Option<usize>,
    values: Vec<f64>,
}

/// Adds run `r` with weight `w` into the moment vector `m`.
fn fold(lay: &Layout, m: &mut [f64], r: &Run, w: f64) {
    if w == 0.0 {
        return;
    }
    let a = &r.values;
    match r.tw {
        None => {
            m[lay.w0()] += w;
            for (g, v) in a.iter().enumerate() {
                m[lay.s0(g)] += w * v;
            }
            for (p, &(_, gw, gt)) in lay.points.iter().enumerate() {
                m[lay.q0(p)] += w * a[gt] * a[gw];
            }
            if lay.u0 > 0 {
                for (g, v) in a.iter().enumerate() {
                    m[lay.u0 + g] += w * v * v;
                }
            }
        }
        Some(tw) => {
            let Some(wi) = lay.tws.iter().position(|&x| key(x) == key(tw)) else {
                return;
            };
            m[lay.ng(wi)] += w;
            m[lay.hg(wi)] += w / r.h;
            for (p, &(pw, _, gt)) in lay.points.iter().enumerate() {
                if pw == wi {
                    m[lay.sg(p)] += w * a[gt] / r.h;
                }
            }
            if let (Some(g), Some(f)) = (&lay.groups[wi], r.level) {
                m[g.w(f)] += w;
                for j in 0..g.count {
                    let v = a[lay.points[g.first + j].2];
                    m[g.s(f, j)] += w * v;
                    m[g.q(f, j)] += w * v * v;
                }
            }
        }
    }
}

/// C and χ per point from a moment vector (None where a stratum has no weight), and the
/// level estimates of the points of waiting times with several fields.
fn estimates(
    lay: &Layout,
    m: &[f64],
    connected: bool,
) -> (PointEstimates, Vec<Option<LevelPoint>>) {
    let w0 = m[lay.w0()];
    let levels: Vec<Option<LevelPoint>> = lay
        .points
        .iter()
        .enumerate()
        .map(|(p, &(wi, _, gt))| {
            lay.groups[wi]
                .as_ref()
                .map(|g| level_point(lay, g, m, p - g.first, gt))
        })
        .collect();
    let est = lay
        .points
        .iter()
        .enumerate()
        .map(|(p, &(wi, gw, gt))| {
            let mt = m[lay.s0(gt)] / w0;
            let mut c = m[lay.q0(p)] / w0;
            if connected {
                c -= mt * m[lay.s0(gw)] / w0;
            }
            let chi = match &levels[p] {
                Some(l) => l.chi,
                None => {
                    let ng = m[lay.ng(wi)];
                    (ng > 0.0).then(|| m[lay.sg(p)] / ng - mt * m[lay.hg(wi)] / ng)
                }
            };
            (c, chi)
        })
        .collect();
    (est, levels)
}

/// The levels of point `j` of group `g` (grid time `gt`): χ per level, the reduced χ, and
/// the slope with its standard error from the strata's variances.
fn level_point(lay: &Layout, g: &Group, m: &[f64], j: usize, gt: usize) -> LevelPoint {
    // Mean and variance of the mean of a stratum from (weight, Σ A, Σ A²).
    let stratum = |w: f64, s: f64, q: f64| {
        let mean = s / w;
        let var = ((q - s * mean) / (w - 1.0)).max(0.0);
        (mean, var / w)
    };
    let w0 = m[lay.w0()];
    let base = stratum(w0, m[lay.s0(gt)], m[lay.u0 + gt]);
    let per: Vec<(f64, f64, f64)> = (0..g.fields.len())
        .map(|f| {
            let w = m[g.w(f)];
            let (mean, v) = stratum(w, m[g.s(f, j)], m[g.q(f, j)]);
            (w, mean, v)
        })
        .collect();
    if w0 <= 0.0 || per.iter().any(|x| !(x.0 > 0.0)) {
        return LevelPoint {
            chis: None,
            chi: None,
            slope: None,
        };
    }
    let plan = &g.plan;
    let chis: Vec<f64> = plan
        .levels
        .iter()
        .map(|l| match l.minus {
            Some(k) => (per[l.plus].1 - per[k].1) / (2.0 * l.value),
            None => (per[l.plus].1 - base.0) / l.value,
        })
        .collect();
    let chi = plan
        .design
        .weights
        .iter()
        .zip(&chis)
        .map(|(w, c)| w * c)
        .sum();
    let slope = plan.slope.as_ref().and_then(|sw| {
        if w0 <= 1.0 || per.iter().any(|x| x.0 <= 1.0) {
            return None;
        }
        // ĉ = Σ_k s_k χ_k as a combination of the strata's means: coefficient per field
        // and of the unperturbed mean.
        let mut coef = vec![0.0; g.fields.len()];
        let mut coef0 = 0.0;
        for (s, l) in sw.iter().zip(&plan.levels) {
            match l.minus {
                Some(k) => {
                    coef[l.plus] += s / (2.0 * l.value);
                    coef[k] -= s / (2.0 * l.value);
                }
                None => {
                    coef[l.plus] += s / l.value;
                    coef0 -= s / l.value;
                }
            }
        }
        let c: f64 = sw.iter().zip(&chis).map(|(s, x)| s * x).sum();
        let var: f64 =
            coef.iter().zip(&per).map(|(a, x)| a * a * x.2).sum::<f64>() + coef0 * coef0 * base.1;
        Some((c, var.sqrt()))
    });
    LevelPoint {
        chis: Some(chis),
        chi: Some(chi),
        slope,
    }
}

/// Runs per block folded into the replicates together (in file order, so the sums do not
/// depend on the thread count).
const BLOCK: usize = 256;

/// Reduces a file of repeated quenches.
///
/// # Errors
/// [`Error::Io`], [`Error::Input`] naming line, run and time for rows that do not line up
/// or a run whose rows are not together; [`Error::Setting`] for bad settings;
/// [`Error::Analysis`] naming the stratum with too few runs.
pub fn reduce_quenches(path: &Path, settings: &QuenchSettings) -> Result<QuenchReduction> {
    reduce_quenches_from(&RawSource::File(path.to_path_buf()), settings)
}

/// Reduces repeated quenches from a file or a table in memory.
///
/// # Errors
/// As [`reduce_quenches`], naming `src`'s label.
pub fn reduce_quenches_from(src: &RawSource, settings: &QuenchSettings) -> Result<QuenchReduction> {
    let path = src.label();
    crate::common::check_level(settings.level)?;
    crate::common::check_resamples(settings.resamples)?;
    // Pass 1: the grid (first run's times), the switch-on times, runs kept together.
    let mut grid: Vec<f64> = Vec::new();
    let mut first: Option<String> = None;
    let mut switch_on: Vec<f64> = Vec::new();
    // Per switch-on time: (h, runs, line of its first run).
    let mut fields_at: Vec<Vec<(f64, usize, u64)>> = Vec::new();
    let mut finished: HashSet<String> = HashSet::new();
    let mut current: Option<(String, f64, Option<f64>, u64)> = None;
    let (mut col_t, mut col_h) = (2u64, 4u64);
    stream(src, |r| {
        col_t = r.cols[1];
        col_h = r.cols[3];
        let same = current.as_ref().is_some_and(|c| c.0 == r.run);
        if !same {
            if let Some(c) = current.take() {
                finished.insert(c.0);
            }
            if finished.contains(&r.run) {
                return Err(Error::input(
                    path,
                    Some(r.line),
                    Some(r.cols[0]),
                    format!(
                        "run '{}' appears again after other runs; expected the rows of one run together",
                        r.run
                    ),
                ));
            }
            if first.is_none() {
                first = Some(r.run.clone());
            }
            if let Some(tw) = r.tw {
                let wi = match switch_on.iter().position(|&x| key(x) == key(tw)) {
                    Some(wi) => wi,
                    None => {
                        switch_on.push(tw);
                        fields_at.push(Vec::new());
                        switch_on.len() - 1
                    }
                };
                match fields_at[wi].iter_mut().find(|f| key(f.0) == key(r.h)) {
                    Some(f) => f.1 += 1,
                    None => fields_at[wi].push((r.h, 1, r.line)),
                }
            }
            current = Some((r.run.clone(), r.h, r.tw, r.line));
        }
        let c = current
            .as_ref()
            .map(|c| (c.1, c.2, c.3))
            .unwrap_or((0.0, None, 0));
        if key(c.0) != key(r.h) || c.1.map(key) != r.tw.map(key) {
            return Err(Error::input(
                path,
                Some(r.line),
                Some(if key(c.0) != key(r.h) {
                    r.cols[3]
                } else {
                    r.cols[4]
                }),
                format!(
                    "run '{}' changes its field or switch-on time (h = {}, tw = {} on line {}); \
                     expected one h and one tw per run",
                    r.run,
                    c.0,
                    c.1.map_or("none".to_string(), |v| v.to_string()),
                    c.2
                ),
            ));
        }
        if first.as_deref() == Some(r.run.as_str()) {
            grid.push(r.t);
        }
        Ok(())
    })?;
    if grid.is_empty() {
        return Err(Error::input(
            path,
            None,
            None,
            "no data rows after the header",
        ));
    }
    grid.sort_by(f64::total_cmp);
    let first = first.unwrap_or_default();
    if let Some(w) = grid.windows(2).find(|w| key(w[0]) == key(w[1])) {
        return Err(Error::input(
            path,
            None,
            None,
            format!(
                "run '{first}' has t = {} twice; expected one row per (run, t)",
                w[0]
            ),
        ));
    }
    let at: HashMap<u64, usize> = grid.iter().enumerate().map(|(i, &t)| (key(t), i)).collect();
    let mut tws = if settings.tws.is_empty() {
        switch_on.clone()
    } else {
        settings.tws.clone()
    };
    tws.sort_by(f64::total_cmp);
    tws.dedup_by(|a, b| key(*a) == key(*b));
    if tws.is_empty() {
        return Err(Error::Analysis(
            "no perturbed run (h ≠ 0) and no --tw given: no waiting time to form C(t,tw) at".into(),
        ));
    }
    let mut points = Vec::new();
    for (wi, &tw) in tws.iter().enumerate() {
        let gw = *at.get(&key(tw)).ok_or_else(|| {
            Error::Analysis(format!(
                "tw = {tw} is not one of the recorded times of run '{first}'; C(t,tw) needs A at tw"
            ))
        })?;
        for gt in gw + 1..grid.len() {
            points.push((wi, gw, gt));
        }
    }
    let np = points.len();
    let ntw = tws.len();
    let mut len = 1 + grid.len() + np + 2 * ntw + np;
    // Waiting times with several fields: one stratum per field.
    let mut groups: Vec<Option<Group>> = Vec::with_capacity(ntw);
    let mut designs: Vec<QuenchDesign> = Vec::new();
    let mut untested: Vec<f64> = Vec::new();
    for (ti, &tw) in tws.iter().enumerate() {
        let Some(wi) = switch_on.iter().position(|&x| key(x) == key(tw)) else {
            groups.push(None);
            continue;
        };
        let mut fs = fields_at[wi].clone();
        if fs.len() < 2 {
            untested.push(tw);
            groups.push(None);
            continue;
        }
        fs.sort_by(|a, b| a.0.total_cmp(&b.0));
        if let Some(f) = fs.iter().find(|f| f.1 < 2) {
            return Err(Error::input(
                path,
                Some(f.2),
                Some(col_h),
                format!(
                    "only 1 run switched on at tw = {tw} with h = {}; with several fields at a tw \
                     each field needs at least 2 runs (for χ per field and the linearity test)",
                    f.0
                ),
            ));
        }
        let fields: Vec<f64> = fs.iter().map(|f| f.0).collect();
        let mut plan = plan_levels(&fields, settings.combine);
        // The rule in the notation of quenches.
        let rest = plan.design.rule.split_once("; ").map_or("", |x| x.1);
        plan.design.rule = format!(
            "{}; {rest}",
            if plan.design.symmetric {
                "chi = (<A(t)>_{+h} − <A(t)>_{−h})/(2h) per amplitude"
            } else {
                "chi = (<A(t)>_h − <A(t)>_0)/h per field"
            }
        );
        let first = points.iter().position(|p| p.0 == ti).unwrap_or(0);
        let count = points.iter().filter(|p| p.0 == ti).count();
        let g = Group {
            fields: fields.clone(),
            plan,
            first,
            count,
            base: len,
        };
        len += g.len();
        if g.plan.slope.is_none() {
            // ±h of one amplitude: combined, but one level, nothing to test.
            untested.push(tw);
        }
        designs.push(QuenchDesign {
            tw,
            fields,
            runs: fs.iter().map(|f| f.1).collect(),
            design: g.plan.design.clone(),
        });
        groups.push(Some(g));
    }
    if groups.iter().flatten().all(|g| g.plan.slope.is_none()) {
        untested.clear();
    }
    let u0 = if designs.is_empty() { 0 } else { len };
    if u0 > 0 {
        len += grid.len();
    }
    let lay = Layout {
        len,
        times: grid,
        points,
        tws,
        groups,
        u0,
    };
    // Pass 2: fold every run as it ends.
    let b = settings.resamples;
    let mut full = vec![0.0; lay.len];
    let mut reps: Vec<Vec<f64>> = vec![vec![0.0; lay.len]; b];
    // For the early-field check: Σ A, Σ A² per grid time, unperturbed and per tw group.
    let g = lay.times.len();
    let mut pre0 = vec![[0.0f64; 2]; g];
    let mut pre = vec![vec![[0.0f64; 2]; g]; switch_on.len()];
    let mut pre_n = vec![0usize; switch_on.len()];
    let mut n0 = 0usize;
    let mut block: Vec<(Run, Vec<f64>)> = Vec::with_capacity(BLOCK);
    let mut index: u64 = 0;
    let mut cur: Option<(String, Run, Vec<u64>)> = None;
    let flush = |block: &mut Vec<(Run, Vec<f64>)>, reps: &mut Vec<Vec<f64>>| {
        reps.par_iter_mut().enumerate().for_each(|(k, m)| {
            for (r, w) in block.iter() {
                fold(&lay, m, r, w[k]);
            }
        });
        block.clear();
    };
    let mut finish = |name: String,
                      run: Run,
                      lines: Vec<u64>,
                      block: &mut Vec<(Run, Vec<f64>)>,
                      reps: &mut Vec<Vec<f64>>|
     -> Result<()> {
        if let Some(gi) = lines.iter().position(|&l| l == 0) {
            // The run's last row: where the missing time should have come by.
            let last = lines.iter().copied().max().unwrap_or(0);
            return Err(Error::input(
                path,
                (last > 0).then_some(last),
                (last > 0).then_some(col_t),
                format!(
                    "run '{name}'{} has no row at t = {}, which run '{first}' has; every run \
                     needs the same times",
                    run_label(&run),
                    lay.times[gi]
                ),
            ));
        }
        fold(&lay, &mut full, &run, 1.0);
        match run.tw {
            None => {
                n0 += 1;
                for (s, v) in pre0.iter_mut().zip(&run.values) {
                    s[0] += v;
                    s[1] += v * v;
                }
            }
            Some(tw) => {
                let wi = switch_on
                    .iter()
                    .position(|&x| key(x) == key(tw))
                    .unwrap_or(0);
                pre_n[wi] += 1;
                for (s, v) in pre[wi].iter_mut().zip(&run.values) {
                    s[0] += v;
                    s[1] += v * v;
                }
            }
        }
        let mut rng = replicate_rng(settings.seed, index);
        index += 1;
        let w: Vec<f64> = (0..b).map(|_| poisson1(&mut rng)).collect();
        block.push((run, w));
        if block.len() == BLOCK {
            flush(block, reps);
        }
        Ok(())
    };
    stream(src, |r| {
        if cur.as_ref().is_none_or(|c| c.0 != r.run) {
            if let Some((name, run, lines)) = cur.take() {
                finish(name, run, lines, &mut block, &mut reps)?;
            }
            let level = r.tw.and_then(|tw| {
                let wi = lay.tws.iter().position(|&x| key(x) == key(tw))?;
                let grp = lay.groups[wi].as_ref()?;
                grp.fields.iter().position(|&f| key(f) == key(r.h))
            });
            cur = Some((
                r.run.clone(),
                Run {
                    h: r.h,
                    tw: r.tw,
                    level,
                    values: vec![0.0; g],
                },
                vec![0; g],
            ));
        }
        let Some((name, run, lines)) = cur.as_mut() else {
            return Ok(());
        };
        let Some(&gi) = at.get(&key(r.t)) else {
            return Err(Error::input(
                path,
                Some(r.line),
                Some(r.cols[1]),
                format!(
                    "run '{name}'{}: time t = {} is not among the times of run '{first}'; every \
                     run needs the same times",
                    run_label(run),
                    r.t
                ),
            ));
        };
        if lines[gi] != 0 {
            return Err(Error::input(
                path,
                Some(r.line),
                Some(r.cols[1]),
                format!(
                    "run '{name}' has t = {} again (first on line {}); expected one row per (run, t)",
                    r.t, lines[gi]
                ),
            ));
        }
        lines[gi] = r.line;
        run.values[gi] = r.value;
        Ok(())
    })?;
    if let Some((name, run, lines)) = cur.take() {
        finish(name, run, lines, &mut block, &mut reps)?;
    }
    flush(&mut block, &mut reps);
    let n0 = n0;
    if n0 < 2 {
        return Err(Error::Analysis(format!(
            "{n0} unperturbed run(s) (h = 0); at least 2 are needed for C and its interval"
        )));
    }
    let perturbed: Vec<(f64, usize)> = lay
        .tws
        .iter()
        .map(|&tw| {
            let n = switch_on
                .iter()
                .position(|&x| key(x) == key(tw))
                .map_or(0, |i| pre_n[i]);
            (tw, n)
        })
        .collect();
    if let Some((tw, n)) = perturbed.iter().find(|(_, n)| *n == 1) {
        return Err(Error::Analysis(format!(
            "only {n} perturbed run switched on at tw = {tw}; at least 2 are needed for χ and its interval"
        )));
    }
    let (est, lev) = estimates(&lay, &full, settings.connected);
    // The tested points (tw with several fields) and their observed t_p.
    let scale = |p: usize| {
        let span = lay.groups[lay.points[p].0]
            .as_ref()
            .map_or(1.0, |g| g.plan.span);
        lev[p]
            .as_ref()
            .and_then(|l| l.chis.as_ref())
            .map_or(0.0, |c| c.iter().map(|v| v.abs()).fold(0.0, f64::max))
            / span
    };
    let tested: Vec<(usize, f64, f64, f64)> = lev
        .iter()
        .enumerate()
        .filter_map(|(p, l)| {
            let (c, se) = l.as_ref()?.slope?;
            let sc = scale(p);
            Some((p, c, super::twin::studentize(c, se, sc), sc))
        })
        .collect();
    let reps_out: Vec<(PointEstimates, Option<Vec<f64>>)> = reps
        .par_iter()
        .map(|m| {
            let (e, l) = estimates(&lay, m, settings.connected);
            let t: Option<Vec<f64>> = tested
                .iter()
                .map(|&(p, c, _, sc)| {
                    let (cr, se) = l[p].as_ref()?.slope?;
                    Some(super::twin::studentize(cr - c, se, sc).abs())
                })
                .collect();
            (e, t)
        })
        .collect();
    let (rep_est, rep_t): (Vec<_>, Vec<_>) = reps_out.into_iter().unzip();
    let alpha_test = ((1.0 - settings.level) * 1e12).round() / 1e12;
    let mut point_p: Vec<Option<f64>> = vec![None; lay.points.len()];
    let test = if tested.is_empty() {
        None
    } else {
        let valid: Vec<&[f64]> = rep_t.iter().filter_map(|t| t.as_deref()).collect();
        if valid.is_empty() {
            return Err(Error::Analysis(
                "no bootstrap replicate has two runs or more in every (tw, h) group; the \
                 linearity test needs more runs per field"
                    .into(),
            ));
        }
        let obs: Vec<f64> = tested.iter().map(|t| t.2).collect();
        let (pp, stat, p, worst) = super::twin::max_t_test(&obs, &valid);
        for (t, q) in tested.iter().zip(&pp) {
            point_p[t.0] = Some(*q);
        }
        let (wi, _, gt) = lay.points[tested[worst].0];
        let plan = lay.groups[wi].as_ref().map(|g| &g.plan);
        Some(FieldTest {
            looks_at: if plan.is_some_and(|p| p.design.symmetric) {
                "the ±h combination against h² (third-order response)".into()
            } else {
                "(<A(t)>_h − <A(t)>_0)/h against h (second-order response)".into()
            },
            statistic: stat,
            p,
            alpha: alpha_test,
            rejects: p <= alpha_test,
            points_rejecting: pp.iter().filter(|q| **q <= alpha_test).count(),
            worst: crate::twotime::campaign::GridPoint {
                tw: lay.tws[wi],
                t: lay.times[gt],
            },
        })
    };
    let alpha = (1.0 - settings.level) / 2.0;
    let q = |mut v: Vec<f64>| {
        v.retain(|x| x.is_finite());
        v.sort_by(f64::total_cmp);
        if v.len() < 2 {
            (f64::NAN, f64::NAN)
        } else {
            (
                resample::quantile_sorted(&v, alpha),
                resample::quantile_sorted(&v, 1.0 - alpha),
            )
        }
    };
    let points: Vec<QuenchPoint> = lay
        .points
        .iter()
        .enumerate()
        .map(|(p, &(wi, _, gt))| {
            let (cl, ch) = q(rep_est.iter().map(|r| r[p].0).collect());
            let chi = est[p].1;
            let (xl, xh) = q(rep_est.iter().filter_map(|r| r[p].1).collect());
            let span = lay.groups[wi].as_ref().map_or(0.0, |g| g.plan.span);
            let l = lev[p].as_ref();
            QuenchPoint {
                tw: lay.tws[wi],
                t: lay.times[gt],
                corr: est[p].0,
                corr_low: cl,
                corr_high: ch,
                chi,
                chi_low: chi.map(|_| xl),
                chi_high: chi.map(|_| xh),
                chi_levels: l.and_then(|l| l.chis.clone()),
                shift: l.and_then(|l| l.slope).map(|(c, _)| c * span),
                p: point_p[p],
            }
        })
        .collect();
    let early = early_drift(
        &lay.times,
        &switch_on,
        &pre0,
        n0,
        &pre,
        &pre_n,
        1.0 - settings.level,
    );
    Ok(QuenchReduction {
        unperturbed: n0,
        perturbed,
        times: g,
        points,
        early,
        designs,
        test,
        untested,
        settings: settings.clone(),
        replicates: rep_est,
    })
}

/// The early-field check (module docs).
fn early_drift(
    times: &[f64],
    switch_on: &[f64],
    pre0: &[[f64; 2]],
    n0: usize,
    pre: &[Vec<[f64; 2]>],
    pre_n: &[usize],
    alpha: f64,
) -> Option<EarlyDrift> {
    let moments = |s: [f64; 2], n: usize| {
        let nf = n as f64;
        let m = s[0] / nf;
        (m, ((s[1] - s[0] * m) / (nf - 1.0)).max(0.0) / nf)
    };
    let mut zs: Vec<(f64, f64, f64)> = Vec::new();
    for (wi, &tw) in switch_on.iter().enumerate() {
        if pre_n[wi] < 2 {
            continue;
        }
        for (gi, &t) in times.iter().enumerate().filter(|(_, t)| **t < tw) {
            let (m0, v0) = moments(pre0[gi], n0);
            let (mh, vh) = moments(pre[wi][gi], pre_n[wi]);
            let se = (v0 + vh).sqrt();
            if se > 0.0 {
                zs.push((tw, t, (mh - m0) / se));
            }
        }
    }
    let m = zs.len();
    if m == 0 {
        return None;
    }
    let bound = Normal::standard().inverse_cdf(1.0 - alpha / (2.0 * m as f64));
    let worst = zs.iter().copied().fold((0.0f64, 0.0f64, 0.0f64), |a, z| {
        if z.2.abs() > a.2.abs() { z } else { a }
    });
    (worst.2.abs() > bound).then_some(EarlyDrift {
        tw: worst.0,
        t: worst.1,
        z: worst.2,
        bound,
        comparisons: m,
    })
}
