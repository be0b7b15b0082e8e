//! Protocol 1, twin runs: per independent sample an unperturbed run (h = 0) and perturbed
//! twins sharing its noise, each with a field h switched on at tw.
//!
//! Input: the long CSV `sample, tw, t, h, corr, m` (`corr` = C(t,tw) of the unperturbed
//! run, may be empty in perturbed rows and before tw; `m` = the observable conjugate to
//! the field). Rows with `t ≤ tw` are allowed: they check that the field does not move
//! the observable before it is switched on.
//!
//! # Formula
//! Per sample, point and field level k:
//! - one-sided: `χ_k = (m_{h_k} − m_0) / h_k`, level variable `u_k = h_k`;
//! - when every amplitude `a` has both signs: `χ_k = (m_{+a} − m_{−a}) / (2a)` (even orders
//!   cancel), `u_k = a_k²`.
//!
//! With K ≥ 2 levels, `χ(u) = χ₁ + c u + …` is fitted by least squares in `u` per sample;
//! its intercept is the Richardson extrapolation to h → 0 (for two levels exactly
//! `(u₂ χ(u₁) − u₁ χ(u₂)) / (u₂ − u₁)`), its slope `c` measures the dependence on h. Both
//! are fixed linear combinations of the sample's `χ_k`, so the reduced campaign's
//! per-sample rows stay independent across samples and `fit` resamples them as usual.
//!
//! The linear-response test: per point the studentized mean slope `t_p = ĉ_p / se(ĉ_p)`;
//! overall `max_p |t_p|`. Both are calibrated by a bootstrap of samples with the slopes
//! centred at their means (the null imposed) and the standard error recomputed in every
//! replicate (studentized; Davison & Hinkley 1997, §4.4; Westfall & Young 1993 for the
//! max over points).

use crate::error::{Error, Result};
use crate::resample::{self, draw_counts};
use crate::twotime::campaign::{Campaign, GridPoint};
use ndarray::Array2;
use rayon::prelude::*;
use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

/// How χ is formed from the field levels.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Combine {
    /// Richardson extrapolation to h → 0 over every level (the smallest level alone when
    /// there is only one).
    Extrapolate,
    /// The smallest amplitude alone (its ±h combination when both signs were run).
    Smallest,
}

/// Settings of the twin reduction.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct TwinSettings {
    /// How χ is formed from the levels.
    pub combine: Combine,
    /// Bootstrap resamples of the samples for the test and the pointwise intervals.
    pub resamples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Confidence level of the intervals; the tests reject at `1 − level`.
    pub level: f64,
}

impl Default for TwinSettings {
    fn default() -> Self {
        TwinSettings {
            combine: Combine::Extrapolate,
            resamples: 1999,
            seed: 1,
            level: 0.95,
        }
    }
}

impl TwinSettings {
    /// The level of the tests, `1 − level`, rounded to 12 digits.
    pub fn test_level(&self) -> f64 {
        ((1.0 - self.level) * 1e12).round() / 1e12
    }

    /// Checks the ranges.
    ///
    /// # Errors
    /// [`Error::Setting`] naming the option.
    pub fn validate(&self) -> Result<()> {
        crate::common::check_level(self.level)?;
        crate::common::check_resamples(self.resamples)
    }
}

/// A perturbed run whose observable differs from its unperturbed twin at or before tw.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct EarlyShift {
    /// The sample.
    pub sample: String,
    /// Waiting time (switch-on time of the field).
    pub tw: f64,
    /// Field of the perturbed run.
    pub h: f64,
    /// The first time `t ≤ tw` where `m_h ≠ m_0`.
    pub t: f64,
    /// `m_h − m_0` there.
    pub difference: f64,
    /// How many perturbed runs in all differ before tw.
    pub runs: usize,
}

/// Validated twin runs: samples × points for the unperturbed run and each field.
#[derive(Debug, Clone)]
pub struct TwinRuns {
    samples: Vec<String>,
    points: Vec<GridPoint>,
    fields: Vec<f64>,
    corr: Array2<f64>,
    m0: Array2<f64>,
    mh: Vec<Array2<f64>>,
    early: Option<EarlyShift>,
}

impl TwinRuns {
    /// Builds twin runs from arrays (`n × P`, one per field in `fields`).
    ///
    /// # Errors
    /// [`Error::Analysis`] for fewer than 2 samples, no field, a zero or repeated field,
    /// shapes that disagree or a non-finite value.
    pub fn new(
        samples: Vec<String>,
        points: Vec<GridPoint>,
        fields: Vec<f64>,
        corr: Array2<f64>,
        m0: Array2<f64>,
        mh: Vec<Array2<f64>>,
    ) -> Result<Self> {
        let (n, p) = (samples.len(), points.len());
        if n < 2 {
            return Err(Error::Analysis(format!(
                "{n} sample(s); at least 2 independent samples are needed"
            )));
        }
        if fields.is_empty() || fields.len() != mh.len() {
            return Err(Error::Analysis(
                "no perturbed runs (h ≠ 0); expected at least one field".into(),
            ));
        }
        for (i, h) in fields.iter().enumerate() {
            if !(h.abs() > 0.0) || !h.is_finite() {
                return Err(Error::Analysis(format!(
                    "field h = {h}: expected a nonzero number"
                )));
            }
            if fields[..i].iter().any(|g| g.to_bits() == h.to_bits()) {
                return Err(Error::Analysis(format!("field h = {h} appears twice")));
            }
        }
        for a in std::iter::once(&corr)
            .chain(std::iter::once(&m0))
            .chain(&mh)
        {
            if a.dim() != (n, p) {
                return Err(Error::Analysis(format!(
                    "data arrays must be {n} samples × {p} points"
                )));
            }
            if a.iter().any(|v| !v.is_finite()) {
                return Err(Error::Analysis("a value is not finite".into()));
            }
        }
        Ok(TwinRuns {
            samples,
            points,
            fields,
            corr,
            m0,
            mh,
            early: None,
        })
    }

    /// The signed fields of the perturbed runs, in the order of the arrays.
    pub fn fields(&self) -> &[f64] {
        &self.fields
    }

    /// Number of samples.
    pub fn n_samples(&self) -> usize {
        self.samples.len()
    }

    /// The grid points `(tw, t)` with `t > tw`.
    pub fn points(&self) -> &[GridPoint] {
        &self.points
    }

    /// The first perturbed run that moved the observable before tw, if any.
    pub fn early_shift(&self) -> Option<&EarlyShift> {
        self.early.as_ref()
    }
}

/// How the levels were formed.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LevelDesign {
    /// True when every amplitude was run with both signs (levels are ±h combinations).
    pub symmetric: bool,
    /// The level amplitudes: |h| (symmetric) or signed h.
    pub levels: Vec<f64>,
    /// The weight of each level in the reduced χ.
    pub weights: Vec<f64>,
    /// What was done, in words.
    pub rule: String,
}

/// The per-point result of the reduction.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PointRow {
    /// Waiting time.
    pub tw: f64,
    /// Later time.
    pub t: f64,
    /// Mean C over samples.
    pub corr: f64,
    /// Mean reduced χ over samples.
    pub chi: f64,
    /// Its standard error (sample SD / √n).
    pub chi_se: f64,
    /// Bootstrap percentile interval of the mean χ.
    pub chi_low: f64,
    /// Upper end.
    pub chi_high: f64,
    /// Mean χ at each level (in the order of [`LevelDesign::levels`]).
    pub chi_levels: Vec<f64>,
    /// Change of χ across the levels from the fitted slope: `ĉ (u_max − u_min)`, when there
    /// are two levels or more.
    pub shift: Option<f64>,
    /// The point's test p-value (χ does not depend on h), when there is a test.
    pub p: Option<f64>,
}

/// The linear-response (field-independence) test over every point.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct FieldTest {
    /// What the test looks at, in words.
    pub looks_at: String,
    /// The observed `max_p |t_p|`.
    pub statistic: f64,
    /// Its bootstrap p-value `(1 + #{max* ≥ max})/(B + 1)`.
    pub p: f64,
    /// The level it rejects at.
    pub alpha: f64,
    /// True when it rejects: χ depends on h.
    pub rejects: bool,
    /// Points whose own p-value is at or below alpha.
    pub points_rejecting: usize,
    /// The point with the largest |t_p|.
    pub worst: GridPoint,
}

/// The reduction of twin runs.
#[derive(Debug, Clone)]
pub struct TwinReduction {
    /// The campaign `fit` reads: per sample C and the reduced χ.
    pub campaign: Campaign,
    /// How the levels were formed and weighted.
    pub design: LevelDesign,
    /// Per point: means, intervals, shifts, p-values.
    pub points: Vec<PointRow>,
    /// The linear-response test (None with a single level).
    pub test: Option<FieldTest>,
    /// A perturbed run that moved the observable before tw.
    pub early: Option<EarlyShift>,
    /// Samples, resamples and seed used.
    pub settings: TwinSettings,
    /// Number of samples.
    pub samples: usize,
}

/// Reads a twin-run file.
///
/// # Errors
/// [`Error::Io`] when it cannot be read; [`Error::Input`] naming line and column for a
/// bad field, and naming sample, run and time when the runs do not line up.
pub fn read_twins(path: &Path) -> Result<TwinRuns> {
    parse_twins(crate::input::open(path)?, path)
}

/// Bit key of a number, with −0 as 0.
fn key(v: f64) -> u64 {
    if v == 0.0 { 0 } else { v.to_bits() }
}

struct RunRow {
    t: f64,
    m: f64,
    corr: Option<f64>,
    line: u64,
}

const COLUMNS: [&str; 6] = ["sample", "tw", "t", "h", "corr", "m"];

/// Parses twin runs from any reader; `file` names it in errors.
///
/// # Errors
/// As [`read_twins`].
pub fn parse_twins<R: Read>(reader: R, file: &Path) -> Result<TwinRuns> {
    let mut rdr = crate::input::csv_reader(reader);
    let mut rec = csv::StringRecord::new();
    if !rdr
        .read_record(&mut rec)
        .map_err(|e| crate::input::csv_error(file, e))?
    {
        return Err(Error::input(
            file,
            None,
            None,
            format!(
                "the file is empty; expected a header line with columns {}",
                COLUMNS.join(", ")
            ),
        ));
    }
    let header = crate::input::Header::new(file, &rec)?;
    let idx = header.require(file, &COLUMNS)?;
    let mut sample_index: HashMap<String, usize> = HashMap::new();
    let mut sample_ids: Vec<String> = Vec::new();
    // (sample, tw, h) → rows; plus the order runs appeared in.
    let mut runs: HashMap<(usize, u64, u64), Vec<RunRow>> = HashMap::new();
    let mut order: Vec<(usize, f64, f64)> = Vec::new();
    while rdr
        .read_record(&mut rec)
        .map_err(|e| crate::input::csv_error(file, e))?
    {
        if crate::input::is_blank(&rec) {
            continue;
        }
        header.check_width(file, &rec)?;
        let line = crate::input::line_of(&rec);
        let err = |c: usize, m: String| Error::input(file, Some(line), Some(c as u64 + 1), m);
        let num = |c: usize| {
            crate::input::parse_number(&rec[idx[c]], COLUMNS[c]).map_err(|m| err(idx[c], m))
        };
        let name = &rec[idx[0]];
        if name.is_empty() {
            return Err(err(
                idx[0],
                "column 'sample' is empty, expected a sample name".into(),
            ));
        }
        let (tw, t, h, m) = (num(1)?, num(2)?, num(3)?, num(5)?);
        let corr = if rec[idx[4]].is_empty() {
            None
        } else {
            Some(num(4)?)
        };
        if h == 0.0 && t > tw && corr.is_none() {
            return Err(err(
                idx[4],
                "column 'corr' is empty in an unperturbed row (h = 0) with t > tw, expected C(t,tw)"
                    .into(),
            ));
        }
        let s = match sample_index.get(name) {
            Some(&s) => s,
            None => {
                sample_ids.push(name.to_string());
                sample_index.insert(name.to_string(), sample_ids.len() - 1);
                sample_ids.len() - 1
            }
        };
        let k = (s, key(tw), key(h));
        let entry = runs.entry(k).or_insert_with(|| {
            order.push((s, tw, h));
            Vec::new()
        });
        if let Some(prev) = entry.iter().find(|r| key(r.t) == key(t)) {
            return Err(err(
                idx[2],
                format!(
                    "sample '{name}', tw = {tw}, h = {h}: t = {t} appears again (first on line {}); \
                     expected one row per (sample, tw, h, t)",
                    prev.line
                ),
            ));
        }
        entry.push(RunRow { t, m, corr, line });
    }
    if runs.is_empty() {
        return Err(Error::input(
            file,
            None,
            None,
            "no data rows after the header",
        ));
    }
    assemble(file, &sample_ids, &runs, &order)
}

/// Checks that the runs line up and builds the arrays.
fn assemble(
    file: &Path,
    sample_ids: &[String],
    runs: &HashMap<(usize, u64, u64), Vec<RunRow>>,
    order: &[(usize, f64, f64)],
) -> Result<TwinRuns> {
    let fail = |line: Option<u64>, m: String| Error::input(file, line, None, m);
    let n = sample_ids.len();
    if n < 2 {
        return Err(fail(
            None,
            format!(
                "only 1 sample ('{}') in the file; at least 2 independent samples are needed",
                sample_ids[0]
            ),
        ));
    }
    // The design of the first sample is the reference: its waiting times and fields.
    let mut tws: Vec<f64> = Vec::new();
    let mut fields: Vec<f64> = Vec::new();
    for &(s, tw, h) in order {
        if s != 0 {
            continue;
        }
        if !tws.iter().any(|&x| key(x) == key(tw)) {
            tws.push(tw);
        }
        if h != 0.0 && !fields.iter().any(|&x| key(x) == key(h)) {
            fields.push(h);
        }
    }
    tws.sort_by(f64::total_cmp);
    fields.sort_by(f64::total_cmp);
    if fields.is_empty() {
        return Err(fail(
            None,
            format!(
                "sample '{}' has no perturbed run (h ≠ 0); expected an unperturbed run and at \
                 least one twin with a field",
                sample_ids[0]
            ),
        ));
    }
    // Every run of every sample: present, and its times equal to its unperturbed twin's.
    for &(s, tw, h) in order {
        if !tws.iter().any(|&x| key(x) == key(tw))
            || (h != 0.0 && !fields.iter().any(|&x| key(x) == key(h)))
        {
            let line = runs[&(s, key(tw), key(h))][0].line;
            return Err(fail(
                Some(line),
                format!(
                    "sample '{}' has a run at tw = {tw}, h = {h} which sample '{}' does not have; \
                     every sample needs the same waiting times and fields",
                    sample_ids[s], sample_ids[0]
                ),
            ));
        }
    }
    // Reference times per tw: those of sample 0's unperturbed run.
    let mut grid: Vec<(f64, Vec<f64>)> = Vec::new();
    for &tw in &tws {
        let Some(base) = runs.get(&(0, key(tw), 0)) else {
            let line = fields
                .iter()
                .find_map(|&h| runs.get(&(0, key(tw), key(h))))
                .map(|r| r[0].line);
            return Err(fail(
                line,
                format!(
                    "sample '{}', tw = {tw}: no unperturbed run (h = 0); expected one per sample and tw",
                    sample_ids[0]
                ),
            ));
        };
        let mut ts: Vec<f64> = base.iter().map(|r| r.t).collect();
        ts.sort_by(f64::total_cmp);
        grid.push((tw, ts));
    }
    let mut points: Vec<GridPoint> = Vec::new();
    let mut point_at: HashMap<(u64, u64), usize> = HashMap::new();
    for (tw, ts) in &grid {
        for &t in ts.iter().filter(|&&t| t > *tw) {
            point_at.insert((key(*tw), key(t)), points.len());
            points.push(GridPoint { tw: *tw, t });
        }
    }
    if points.is_empty() {
        return Err(fail(
            None,
            "no unperturbed row has t > tw; expected times after the waiting time".into(),
        ));
    }
    let np = points.len();
    let mut corr = Array2::<f64>::zeros((n, np));
    let mut m0 = Array2::<f64>::zeros((n, np));
    let mut mh: Vec<Array2<f64>> = vec![Array2::<f64>::zeros((n, np)); fields.len()];
    let mut early: Option<EarlyShift> = None;
    let mut early_runs = 0;
    for s in 0..n {
        for (tw, ts) in &grid {
            let base = runs.get(&(s, key(*tw), 0)).ok_or_else(|| {
                fail(
                    None,
                    format!(
                        "sample '{}', tw = {tw}: no unperturbed run (h = 0); expected one per sample and tw",
                        sample_ids[s]
                    ),
                )
            })?;
            // The unperturbed run has the reference times.
            if s != 0 {
                lined_up(
                    file,
                    base,
                    ts,
                    &sample_ids[s],
                    *tw,
                    0.0,
                    "sample '".to_string() + &sample_ids[0] + "'s unperturbed run",
                )?;
            }
            let by_t: HashMap<u64, &RunRow> = base.iter().map(|r| (key(r.t), r)).collect();
            for r in base.iter().filter(|r| r.t > *tw) {
                let p = point_at[&(key(*tw), key(r.t))];
                corr[[s, p]] = r.corr.unwrap_or(0.0);
                m0[[s, p]] = r.m;
            }
            for (f, &h) in fields.iter().enumerate() {
                let twin = runs.get(&(s, key(*tw), key(h))).ok_or_else(|| {
                    fail(
                        None,
                        format!(
                            "sample '{}', tw = {tw}: no run with h = {h}, which sample '{}' has; \
                             every sample needs the same fields",
                            sample_ids[s], sample_ids[0]
                        ),
                    )
                })?;
                lined_up(
                    file,
                    twin,
                    ts,
                    &sample_ids[s],
                    *tw,
                    h,
                    "its unperturbed run".to_string(),
                )?;
                let mut moved = false;
                for r in twin {
                    if r.t > *tw {
                        mh[f][[s, point_at[&(key(*tw), key(r.t))]]] = r.m;
                    } else {
                        let d = r.m - by_t[&key(r.t)].m;
                        let scale = r.m.abs().max(by_t[&key(r.t)].m.abs());
                        if d.abs() > 1e-9 * scale && !moved {
                            moved = true;
                            early_runs += 1;
                            if early.is_none() {
                                early = Some(EarlyShift {
                                    sample: sample_ids[s].clone(),
                                    tw: *tw,
                                    h,
                                    t: r.t,
                                    difference: d,
                                    runs: 0,
                                });
                            }
                        }
                    }
                }
            }
        }
    }
    if let Some(e) = early.as_mut() {
        e.runs = early_runs;
    }
    let mut twins = TwinRuns::new(sample_ids.to_vec(), points, fields, corr, m0, mh)
        .map_err(|e| fail(None, e.to_string()))?;
    twins.early = early;
    Ok(twins)
}

/// The run's times must be exactly `reference`; names the first time that differs.
fn lined_up(
    file: &Path,
    run: &[RunRow],
    reference: &[f64],
    sample: &str,
    tw: f64,
    h: f64,
    against: String,
) -> Result<()> {
    let set: HashMap<u64, u64> = run.iter().map(|r| (key(r.t), r.line)).collect();
    if let Some(r) = run
        .iter()
        .find(|r| reference.binary_search_by(|x| x.total_cmp(&r.t)).is_err())
    {
        return Err(Error::input(
            file,
            Some(r.line),
            None,
            format!(
                "sample '{sample}', run tw = {tw}, h = {h}: time t = {} is not among the times of \
                 {against}; twin runs must be recorded at the same times",
                r.t
            ),
        ));
    }
    if let Some(t) = reference.iter().find(|t| !set.contains_key(&key(**t))) {
        return Err(Error::input(
            file,
            None,
            None,
            format!(
                "sample '{sample}', run tw = {tw}, h = {h}: no row at t = {t}, which {against} has; \
                 twin runs must be recorded at the same times"
            ),
        ));
    }
    Ok(())
}

/// One field level: how its χ is formed from the means of the runs at each field.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Level {
    /// Index (in the fields) of the run at +a (±h pairs) or at h (one-sided).
    pub plus: usize,
    /// Index of the run at −a (±h pairs only).
    pub minus: Option<usize>,
    /// The amplitude a (±h pairs) or the signed h.
    pub value: f64,
}

/// How χ is formed from a set of fields: the levels, the combination, the slope.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct LevelPlan {
    /// The design as reported.
    pub design: LevelDesign,
    /// The levels, in the order of `design.levels`.
    pub levels: Vec<Level>,
    /// The level variable u (h² for ±h pairs, h otherwise).
    pub u: Vec<f64>,
    /// Least-squares slope weights in u (two levels or more).
    pub slope: Option<Vec<f64>>,
    /// max u − min u.
    pub span: f64,
    /// What the linearity test looks at, in words.
    pub looks_at: &'static str,
}

/// The levels of a set of distinct nonzero signed fields: ±h pairs when every amplitude
/// was run with both signs (χ = (m₊ − m₋)/(2a), u = a²), one-sided otherwise
/// (χ = (m_h − m₀)/h, u = h, ordered by |h|); the weights of the reduced χ by `combine`.
/// Shared by twin runs and repeated quenches.
pub(crate) fn plan_levels(fields: &[f64], combine: Combine) -> LevelPlan {
    let mut amps: Vec<f64> = fields.iter().map(|h| h.abs()).collect();
    amps.sort_by(f64::total_cmp);
    amps.dedup_by(|a, b| key(*a) == key(*b));
    let find = |h: f64| fields.iter().position(|&g| key(g) == key(h));
    let paired = amps
        .iter()
        .all(|&a| find(a).is_some() && find(-a).is_some());
    let levels: Vec<Level> = if paired {
        amps.iter()
            .map(|&a| Level {
                plus: find(a).unwrap_or(0),
                minus: find(-a),
                value: a,
            })
            .collect()
    } else {
        let mut hs = fields.to_vec();
        hs.sort_by(|a, b| a.abs().total_cmp(&b.abs()).then(a.total_cmp(b)));
        hs.iter()
            .map(|&h| Level {
                plus: find(h).unwrap_or(0),
                minus: None,
                value: h,
            })
            .collect()
    };
    let lv: Vec<f64> = levels.iter().map(|l| l.value).collect();
    let u: Vec<f64> = if paired {
        lv.iter().map(|a| a * a).collect()
    } else {
        lv.clone()
    };
    let kl = lv.len();
    let (weights, slope, rule) = match (combine, kl) {
        (Combine::Extrapolate, k) if k >= 2 => {
            let (w, s) = line_weights(&u);
            let rule = format!(
                "Richardson extrapolation to h → 0: least-squares line in {} over {k} levels, its intercept",
                if paired { "h²" } else { "h" }
            );
            (w, Some(s), rule)
        }
        (_, k) => {
            let mut w = vec![0.0; k];
            w[0] = 1.0;
            let s = (k >= 2).then(|| line_weights(&u).1);
            let rule = if k == 1 {
                "one field level only: no extrapolation".to_string()
            } else {
                "the smallest amplitude alone".to_string()
            };
            (w, s, rule)
        }
    };
    let rule = format!(
        "{}; {}",
        if paired {
            "χ = (m(+h) − m(−h))/(2h) per amplitude"
        } else {
            "χ = (m(h) − m(0))/h per field"
        },
        rule
    );
    let span = u.iter().copied().fold(f64::NEG_INFINITY, f64::max)
        - u.iter().copied().fold(f64::INFINITY, f64::min);
    LevelPlan {
        design: LevelDesign {
            symmetric: paired,
            levels: lv,
            weights,
            rule,
        },
        levels,
        u,
        slope,
        span,
        looks_at: if paired {
            "the ±h combination against h² (third-order response)"
        } else {
            "(m(h) − m(0))/h against h (second-order response)"
        },
    }
}

/// The levels' χ arrays (samples × points), in the plan's order.
fn level_chis(runs: &TwinRuns, plan: &LevelPlan) -> Vec<Array2<f64>> {
    plan.levels
        .iter()
        .map(|l| match l.minus {
            Some(m) => (&runs.mh[l.plus] - &runs.mh[m]) / (2.0 * l.value),
            None => (&runs.mh[l.plus] - &runs.m0) / l.value,
        })
        .collect()
}

/// Least-squares intercept and slope weights in `u` over the levels.
fn line_weights(u: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let k = u.len() as f64;
    let mean = u.iter().sum::<f64>() / k;
    let sxx: f64 = u.iter().map(|x| (x - mean).powi(2)).sum();
    let slope: Vec<f64> = u.iter().map(|x| (x - mean) / sxx).collect();
    let intercept = slope.iter().map(|v| 1.0 / k - mean * v).collect();
    (intercept, slope)
}

/// Reduces twin runs to a campaign, with the linear-response test.
///
/// # Errors
/// [`Error::Setting`] for a bad level or resample count; [`Error::Analysis`] when the
/// campaign cannot be formed.
pub fn reduce_twins(runs: &TwinRuns, settings: &TwinSettings) -> Result<TwinReduction> {
    settings.validate()?;
    let plan = plan_levels(&runs.fields, settings.combine);
    let chis = level_chis(runs, &plan);
    let weights = plan.design.weights.clone();
    let slope_w = plan.slope.clone();
    let span = plan.span;
    let (n, np) = runs.m0.dim();
    let mut chi = Array2::<f64>::zeros((n, np));
    for (w, c) in weights.iter().zip(&chis) {
        chi.scaled_add(*w, c);
    }
    let slope = slope_w.as_ref().map(|sw| {
        let mut s = Array2::<f64>::zeros((n, np));
        for (w, c) in sw.iter().zip(&chis) {
            s.scaled_add(*w, c);
        }
        s
    });
    let boot = bootstrap(&chi, slope.as_ref(), &chis, span, settings);
    let alpha = settings.test_level();
    let nf = n as f64;
    let points: Vec<PointRow> = (0..np)
        .map(|p| {
            let col = chi.column(p);
            let mean = col.sum() / nf;
            let sd = (col.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (nf - 1.0)).sqrt();
            let g = runs.points[p];
            PointRow {
                tw: g.tw,
                t: g.t,
                corr: runs.corr.column(p).sum() / nf,
                chi: mean,
                chi_se: sd / nf.sqrt(),
                chi_low: boot.low[p],
                chi_high: boot.high[p],
                chi_levels: chis.iter().map(|c| c.column(p).sum() / nf).collect(),
                shift: slope.as_ref().map(|s| s.column(p).sum() / nf * span),
                p: boot.point_p.as_ref().map(|v| v[p]),
            }
        })
        .collect();
    let test = boot.max_p.map(|(stat, p, worst)| FieldTest {
        looks_at: plan.looks_at.into(),
        statistic: stat,
        p,
        alpha,
        rejects: p <= alpha,
        points_rejecting: points
            .iter()
            .filter(|r| r.p.is_some_and(|q| q <= alpha))
            .count(),
        worst: runs.points[worst],
    });
    let campaign = Campaign::new(
        runs.samples.clone(),
        runs.points.clone(),
        runs.corr.clone(),
        chi,
        None,
    )?;
    Ok(TwinReduction {
        campaign,
        design: plan.design,
        points,
        test,
        early: runs.early.clone(),
        settings: settings.clone(),
        samples: n,
    })
}

/// What the bootstrap gives: pointwise intervals of the mean χ, the points' p-values and
/// the overall test `(statistic, p, index of the worst point)`.
struct Boot {
    low: Vec<f64>,
    high: Vec<f64>,
    point_p: Option<Vec<f64>>,
    max_p: Option<(f64, f64, usize)>,
}

/// Studentized `t_p = mean / se` of each column; a column with no spread is 0 when its
/// mean is 0 to rounding (relative to `scale`), infinite otherwise.
fn t_stats(sum: &[f64], sum2: &[f64], n: f64, scale: &[f64]) -> Vec<f64> {
    sum.iter()
        .zip(sum2)
        .zip(scale)
        .map(|((s, s2), sc)| {
            let mean = s / n;
            let var = ((s2 - s * mean) / (n - 1.0)).max(0.0);
            studentize(mean, (var / n).sqrt(), *sc)
        })
        .collect()
}

/// `estimate / se`; with no spread (se within 10⁻¹² of `scale`) 0 when the estimate is 0
/// to rounding, infinite otherwise.
pub(crate) fn studentize(estimate: f64, se: f64, scale: f64) -> f64 {
    let tiny = 1e-12 * scale;
    if se > tiny {
        estimate / se
    } else if estimate.abs() <= tiny {
        0.0
    } else {
        f64::INFINITY.copysign(estimate)
    }
}

/// The max-|t| test over points: `observed` t_p, and per replicate the |t*_p| with the
/// null imposed (centred). Returns the points' p-values `(1 + #{|t*_p| ≥ |t_p|})/(B + 1)`,
/// the statistic `max_p |t_p|`, its p-value `(1 + #{max_p |t*_p| ≥ max})/(B + 1)` and the
/// index of the worst point (Westfall & Young 1993, ch. 2: the single-step max-T).
pub(crate) fn max_t_test(observed: &[f64], replicates: &[&[f64]]) -> (Vec<f64>, f64, f64, usize) {
    let bf = replicates.len() as f64 + 1.0;
    let pp: Vec<f64> = (0..observed.len())
        .map(|p| {
            let o = observed[p].abs();
            (1.0 + replicates.iter().filter(|r| r[p] >= o).count() as f64) / bf
        })
        .collect();
    let (worst, stat) =
        observed
            .iter()
            .map(|v| v.abs())
            .enumerate()
            .fold(
                (0, f64::NEG_INFINITY),
                |acc, (i, v)| if v > acc.1 { (i, v) } else { acc },
            );
    let exceed = replicates
        .iter()
        .filter(|r| r.iter().copied().fold(0.0, f64::max) >= stat)
        .count();
    (pp, stat, (1.0 + exceed as f64) / bf, worst)
}

fn bootstrap(
    chi: &Array2<f64>,
    slope: Option<&Array2<f64>>,
    chis: &[Array2<f64>],
    span: f64,
    settings: &TwinSettings,
) -> Boot {
    let (n, np) = chi.dim();
    let nf = n as f64;
    let b = settings.resamples;
    // The scale of the slope per point, χ over the span of the levels (for "zero to
    // rounding").
    let scale: Vec<f64> = (0..np)
        .map(|p| {
            chis.iter()
                .map(|c| c.column(p).mapv(f64::abs).sum() / nf)
                .fold(0.0, f64::max)
                / span
        })
        .collect();
    let centred = slope.map(|s| {
        let mut c = s.clone();
        for p in 0..np {
            let m = s.column(p).sum() / nf;
            c.column_mut(p).mapv_inplace(|v| v - m);
        }
        c
    });
    let observed = slope.map(|s| {
        let sum: Vec<f64> = (0..np).map(|p| s.column(p).sum()).collect();
        let sum2: Vec<f64> = (0..np).map(|p| s.column(p).mapv(|v| v * v).sum()).collect();
        t_stats(&sum, &sum2, nf, &scale)
    });
    // Per replicate: the mean χ per point, and |t*_p| per point.
    let reps: Vec<(Vec<f64>, Vec<f64>)> = (0..b)
        .into_par_iter()
        .map_init(
            || vec![0u32; n],
            |counts, r| {
                draw_counts(settings.seed, r as u64, n, counts);
                let mut mean = vec![0.0; np];
                let mut sum = vec![0.0; np];
                let mut sum2 = vec![0.0; np];
                for (i, &c) in counts.iter().enumerate() {
                    if c == 0 {
                        continue;
                    }
                    let c = f64::from(c);
                    for p in 0..np {
                        mean[p] += c * chi[[i, p]];
                    }
                    if let Some(cs) = &centred {
                        for p in 0..np {
                            let v = cs[[i, p]];
                            sum[p] += c * v;
                            sum2[p] += c * v * v;
                        }
                    }
                }
                mean.iter_mut().for_each(|m| *m /= nf);
                let t = if centred.is_some() {
                    t_stats(&sum, &sum2, nf, &scale)
                        .into_iter()
                        .map(f64::abs)
                        .collect()
                } else {
                    Vec::new()
                };
                (mean, t)
            },
        )
        .collect();
    let alpha = (1.0 - settings.level) / 2.0;
    let mut low = vec![0.0; np];
    let mut high = vec![0.0; np];
    let mut col: Vec<f64> = Vec::with_capacity(b);
    for p in 0..np {
        col.clear();
        col.extend(reps.iter().map(|r| r.0[p]));
        col.sort_by(f64::total_cmp);
        low[p] = resample::quantile_sorted(&col, alpha);
        high[p] = resample::quantile_sorted(&col, 1.0 - alpha);
    }
    let (point_p, max_p) = match observed {
        None => (None, None),
        Some(obs) => {
            let rt: Vec<&[f64]> = reps.iter().map(|r| r.1.as_slice()).collect();
            let (pp, stat, p, worst) = max_t_test(&obs, &rt);
            (Some(pp), Some((stat, p, worst)))
        }
    };
    Boot {
        low,
        high,
        point_p,
        max_p,
    }
}
