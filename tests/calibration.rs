//! Calibration of every statement the time-domain report makes, ignored in CI.
//!
//! Over many independent synthetic campaigns with a known truth (invented data,
//! `fdtemp::scenarios::synth`), count how often each statement of the report is made and is
//! right: how often the equilibrium test rejects a true equilibrium, how often a 95%
//! interval contains the truth, how often a caution fires on data that do not deserve it.
//! Run with
//!
//!     cargo test --release --test calibration -- --ignored --nocapture
//!
//! Environment:
//! - `FDTEMP_CALIB_CAMPAIGNS` campaigns per row (default 200);
//! - `FDTEMP_CALIB_B` bootstrap resamples per fit (default 999);
//! - `FDTEMP_CALIB_ONLY` comma-separated substrings; only rows whose label (statement,
//!   scenario, samples, weights, model, as printed) contains one of them are run
//!   (case-insensitive), e.g. `FDTEMP_CALIB_ONLY="false alarm"` or `"edge"`.
//!
//! Each output line is a Markdown table row for docs/validation.md. Rows that share a
//! scenario, sample size and settings are measured on the same campaigns (one fit each), so
//! their runtime is that of the whole batch. Campaign `i` of a batch has its own data seed
//! and its own resampling seed (two different hashes of the batch label, plus `i`); so the
//! campaigns of one row are independent, rows with different sample sizes or scenarios use
//! different data, and the two weightings of one scenario see the same data (a paired
//! comparison).
//!
//! The binomial SD of a measured rate p over N statements is sqrt(p(1 − p)/N) (common
//! practice); per-waiting-time statements count each waiting time once, and the synthetic
//! noise of different waiting times is independent (each curve starts afresh).
//! Acceptance bands (for 200 campaigns): 5% tests and cautions on data that do not deserve
//! them at most 7.5%; 95% intervals 0.93–0.97; statements that must never be made, 0.

use fdtemp::scenarios::synth::{Shape, SynthSpec, generate};
use fdtemp::twotime::settings::{FitSettings, Model, Weighting};
use fdtemp::twotime::{Estimate, Finding, FitReport, GroupFit, Silent, analyze};
use std::time::Instant;

// ─── Accessors: every read of a report field happens here ───────────────────────────────
// The result types are changing; adapt these functions, not the rows below.

/// The joint fit (all waiting times together).
fn joint(r: &FitReport) -> &GroupFit {
    &r.fits[0]
}

/// The fits of one waiting time each.
fn per_tw(r: &FitReport) -> &[GroupFit] {
    r.fits.get(1..).unwrap_or(&[])
}

/// The waiting time of a per-tw fit.
fn fit_tw(f: &GroupFit) -> Option<f64> {
    f.tw
}

/// The p-value of the equilibrium (no-break) test.
fn equilibrium_p(f: &GroupFit) -> Option<f64> {
    f.equilibrium_p
}

fn interval_of(e: &Estimate) -> Option<(f64, f64)> {
    Some((e.low?, e.high?))
}

/// The X interval of a fit.
fn x_interval(f: &GroupFit) -> Option<(f64, f64)> {
    interval_of(&f.ratio)
}

/// The X interval the fit's verdict quotes ("X = 0.204 [0.185, 0.218]"), if it quotes one.
fn quoted_x_interval(f: &GroupFit) -> Option<(f64, f64)> {
    let words = fdtemp::report::findings::verdict(&f.verdict);
    if words.contains("X = ") && words.contains('[') {
        x_interval(f)
    } else {
        None
    }
}

/// The T_eff interval; an unbounded end (X's interval reaching 0) is ±∞.
fn t_eff_interval(f: &GroupFit) -> Option<(f64, f64)> {
    x_interval(f)?;
    Some((
        f.t_eff.low.unwrap_or(f64::NEG_INFINITY),
        f.t_eff.high.unwrap_or(f64::INFINITY),
    ))
}

/// The break's (bootstrap) interval, when a break is reported.
fn q_interval(f: &GroupFit) -> Option<(f64, f64)> {
    interval_of(&f.brk)
}

/// The interval of the aging trend, dX/dlog10(tw), when there is one.
fn aging_change_interval(r: &FitReport) -> Option<(f64, f64)> {
    interval_of(&r.aging.as_ref()?.change_per_decade)
}

/// Whether a per-tw fit detected a break but withheld X (break at the edge).
fn x_withheld(f: &GroupFit) -> bool {
    f.equilibrium_p.is_some_and(|p| p < 0.05) && !f.x_quotable
}

/// The interval of the slope above the break (the thermometer check's slope).
fn slope_above_interval(f: &GroupFit) -> Option<(f64, f64)> {
    interval_of(&f.fast_slope)
}

fn all_findings(r: &FitReport) -> impl Iterator<Item = &Finding> {
    r.cautions
        .iter()
        .chain(r.fits.iter().flat_map(|f| &f.cautions))
        .map(|c| &c.finding)
}

/// The thermometer caution ("the slope above the break is … not -1") on any fit.
fn thermometer_flagged(r: &FitReport) -> bool {
    all_findings(r).any(|f| {
        matches!(
            f,
            Finding::SlopeAboveNotMinusOne { .. } | Finding::SlopeAboveCurved { .. }
        )
    })
}

/// The caution "X changes with age".
fn aging_flagged(r: &FitReport) -> bool {
    all_findings(r).any(|f| {
        matches!(
            f,
            Finding::XChangesWithAge { .. } | Finding::XChangesWithAgeCurved { .. }
        )
    })
}

// ─── Statements ─────────────────────────────────────────────────────────────────────────

/// One instance of a statement per entry: `None` when the report does not make it (not
/// counted), `Some(true)` when it counts as a hit.
type Event = fn(&FitReport, &SynthSpec) -> Vec<Option<bool>>;

fn covers(iv: Option<(f64, f64)>, truth: f64) -> Option<bool> {
    iv.map(|(lo, hi)| lo <= truth && truth <= hi)
}

fn equilibrium_rejected(r: &FitReport, _: &SynthSpec) -> Vec<Option<bool>> {
    vec![equilibrium_p(joint(r)).map(|p| p <= 0.05)]
}
fn x_covered(r: &FitReport, s: &SynthSpec) -> Vec<Option<bool>> {
    vec![covers(x_interval(joint(r)), s.ratio)]
}
fn t_eff_covered(r: &FitReport, s: &SynthSpec) -> Vec<Option<bool>> {
    vec![covers(t_eff_interval(joint(r)), s.temperature / s.ratio)]
}
fn q_covered(r: &FitReport, s: &SynthSpec) -> Vec<Option<bool>> {
    vec![covers(q_interval(joint(r)), s.plateau)]
}
fn aging_trend_covered(r: &FitReport, s: &SynthSpec) -> Vec<Option<bool>> {
    vec![covers(aging_change_interval(r), s.ratio_per_decade)]
}
fn per_tw_x_withheld(r: &FitReport, _: &SynthSpec) -> Vec<Option<bool>> {
    per_tw(r).iter().map(|f| Some(x_withheld(f))).collect()
}
fn slope_above_covered(r: &FitReport, _: &SynthSpec) -> Vec<Option<bool>> {
    vec![covers(slope_above_interval(joint(r)), -1.0)]
}
fn per_tw_x_covered(r: &FitReport, s: &SynthSpec) -> Vec<Option<bool>> {
    per_tw(r)
        .iter()
        .map(|f| covers(x_interval(f), s.ratio_at(fit_tw(f)?)))
        .collect()
}
fn per_tw_quoted_x_excludes(r: &FitReport, s: &SynthSpec) -> Vec<Option<bool>> {
    per_tw(r)
        .iter()
        .map(|f| covers(quoted_x_interval(f), s.ratio_at(fit_tw(f)?)).map(|c| !c))
        .collect()
}
fn aging_caution(r: &FitReport, _: &SynthSpec) -> Vec<Option<bool>> {
    vec![Some(aging_flagged(r))]
}
fn thermometer_caution(r: &FitReport, _: &SynthSpec) -> Vec<Option<bool>> {
    vec![Some(thermometer_flagged(r))]
}

/// What a statement's rate should be.
#[derive(Clone, Copy)]
enum Band {
    /// A false-alarm rate: nominal, and the most accepted.
    AtMost(f64, f64),
    /// A coverage: nominal, and the accepted range.
    Between(f64, f64, f64),
    /// A power or a description: no band.
    Report,
}

const FALSE_ALARM: Band = Band::AtMost(0.05, 0.075);
const COVERAGE: Band = Band::Between(0.95, 0.93, 0.97);
const NEVER: Band = Band::AtMost(0.0, 0.0);

impl Band {
    fn nominal(self) -> String {
        match self {
            Band::AtMost(n, _) | Band::Between(n, _, _) => format!("{n:.2}"),
            Band::Report => "—".into(),
        }
    }
    fn text(self) -> String {
        match self {
            Band::AtMost(_, hi) => format!("≤ {hi:.3}"),
            Band::Between(_, lo, hi) => format!("{lo:.2}–{hi:.2}"),
            Band::Report => "—".into(),
        }
    }
    fn accepts(self, p: f64) -> Option<bool> {
        match self {
            Band::AtMost(_, hi) => Some(p <= hi),
            Band::Between(_, lo, hi) => Some(lo <= p && p <= hi),
            Band::Report => None,
        }
    }
}

struct Statement {
    name: &'static str,
    band: Band,
    event: Event,
}

const fn st(name: &'static str, band: Band, event: Event) -> Statement {
    Statement { name, band, event }
}

/// Campaigns of one scenario, fitted with one setting; every statement is read from the
/// same fits.
struct Batch {
    scenario: &'static str,
    spec: SynthSpec,
    model: Model,
    weights: Weighting,
    /// The fit's temperature over the true one (1: the thermometer is right).
    t_scale: f64,
    statements: Vec<Statement>,
}

// ─── Scenarios (invented data) ─────────────────────────────────────────────────────────

/// The referee's design: 3 waiting times × 20 points, noise growing as C decays (its SD
/// triples from C = 1 to C = 0), C–χ noise correlation −0.4 and AR(1) correlation 0.8
/// along t (the synth defaults).
fn design(samples: usize) -> SynthSpec {
    SynthSpec::study(samples)
}

fn equilibrium(samples: usize) -> SynthSpec {
    SynthSpec {
        ratio: 1.0,
        ..design(samples)
    }
}

/// Two lines, X = 0.45 below q = 0.6, the same X at every age.
fn two_lines(samples: usize) -> SynthSpec {
    design(samples)
}

/// X grows by 0.05 per decade of tw (0.45, 0.50, 0.55).
fn aging_x(samples: usize) -> SynthSpec {
    SynthSpec {
        ratio_per_decade: 0.05,
        ..design(samples)
    }
}

/// The break near the top: q = 0.95, X = 0.25; 5, 6 and 5 points above q per tw.
fn edge_break(samples: usize) -> SynthSpec {
    SynthSpec {
        plateau: 0.95,
        ratio: 0.25,
        ..design(samples)
    }
}

/// The same with the first lag 0.3: 3, 4 and 4 points above q, fewer than the 5 a branch
/// needs, so each per-tw break is forced below the truth.
fn edge_break_forced(samples: usize) -> SynthSpec {
    SynthSpec {
        first_lag: 0.3,
        ..edge_break(samples)
    }
}

/// Slope −1 above q = 0.6, then X(C) = 0.25 + 0.75 (C/q)² (no kink): the thermometer is
/// right, the relation is curved.
fn curved(samples: usize) -> SynthSpec {
    SynthSpec {
        ratio: 0.25,
        shape: Shape::Smooth { power: 2.0 },
        ..design(samples)
    }
}

/// One straight line k T χ = 0.5 (1 − C) (no fast part), for the single-line model.
fn single_line(samples: usize) -> SynthSpec {
    SynthSpec {
        ratio: 0.5,
        plateau: 1.0,
        ..design(samples)
    }
}

fn batches() -> Vec<Batch> {
    use Model::{Broken, Free, Line};
    use Weighting::{InverseVariance as Iv, Uniform};
    let mut out = Vec::new();
    for n in [10, 20, 48] {
        for w in [Iv, Uniform] {
            out.push(Batch {
                scenario: "equilibrium",
                spec: equilibrium(n),
                model: Broken,
                weights: w,
                t_scale: 1.0,
                statements: vec![
                    st(
                        "equilibrium test false alarm (p ≤ 0.05)",
                        FALSE_ALARM,
                        equilibrium_rejected,
                    ),
                    st(
                        "thermometer caution, slope exactly -1",
                        FALSE_ALARM,
                        thermometer_caution,
                    ),
                    st(
                        "\"X changes with age\", X does not age",
                        FALSE_ALARM,
                        aging_caution,
                    ),
                ],
            });
        }
    }
    for (model, n, w) in [
        (Free, 10, Iv),
        (Free, 10, Uniform),
        (Free, 20, Iv),
        (Free, 20, Uniform),
        (Line, 10, Iv),
        (Line, 10, Uniform),
        (Line, 20, Iv),
        (Line, 20, Uniform),
    ] {
        out.push(Batch {
            scenario: "equilibrium",
            spec: equilibrium(n),
            model,
            weights: w,
            t_scale: 1.0,
            statements: vec![st(
                "equilibrium test false alarm (p ≤ 0.05)",
                FALSE_ALARM,
                equilibrium_rejected,
            )],
        });
    }
    for w in [Iv, Uniform] {
        out.push(Batch {
            scenario: "two lines X = 0.45, q = 0.6",
            spec: two_lines(20),
            model: Broken,
            weights: w,
            t_scale: 1.0,
            statements: vec![
                st(
                    "equilibrium test power (p ≤ 0.05)",
                    Band::Report,
                    equilibrium_rejected,
                ),
                st("joint X interval covers", COVERAGE, x_covered),
                st("joint T_eff interval covers", COVERAGE, t_eff_covered),
                st("joint q interval covers", COVERAGE, q_covered),
                st(
                    "joint slope-above interval covers -1",
                    COVERAGE,
                    slope_above_covered,
                ),
                st("per-tw X interval covers", COVERAGE, per_tw_x_covered),
                st(
                    "\"X changes with age\", X does not age",
                    FALSE_ALARM,
                    aging_caution,
                ),
                st(
                    "thermometer caution, slope exactly -1",
                    FALSE_ALARM,
                    thermometer_caution,
                ),
            ],
        });
    }
    out.push(Batch {
        scenario: "two lines X = 0.45, q = 0.6",
        spec: two_lines(48),
        model: Broken,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![
            st("joint X interval covers", COVERAGE, x_covered),
            st("joint q interval covers", COVERAGE, q_covered),
            st("per-tw X interval covers", COVERAGE, per_tw_x_covered),
            st(
                "\"X changes with age\", X does not age",
                FALSE_ALARM,
                aging_caution,
            ),
            st(
                "aging trend interval covers 0",
                COVERAGE,
                aging_trend_covered,
            ),
            st(
                "thermometer caution, slope exactly -1",
                FALSE_ALARM,
                thermometer_caution,
            ),
        ],
    });
    out.push(Batch {
        scenario: "two lines X = 0.45, q = 0.6",
        spec: two_lines(20),
        model: Free,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![
            st("joint X interval covers", COVERAGE, x_covered),
            st("joint q interval covers", COVERAGE, q_covered),
            st(
                "joint slope-above interval covers -1",
                COVERAGE,
                slope_above_covered,
            ),
            st(
                "thermometer caution, slope exactly -1",
                FALSE_ALARM,
                thermometer_caution,
            ),
        ],
    });
    out.push(Batch {
        scenario: "weak violation X = 0.9, q = 0.6",
        spec: SynthSpec {
            ratio: 0.9,
            ..design(20)
        },
        model: Broken,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![st(
            "equilibrium test power (p ≤ 0.05)",
            Band::Report,
            equilibrium_rejected,
        )],
    });
    out.push(Batch {
        scenario: "aging X = 0.45 + 0.05/decade",
        spec: aging_x(20),
        model: Broken,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![
            st(
                "\"X changes with age\", X ages (power)",
                Band::Report,
                aging_caution,
            ),
            st(
                "aging trend interval covers 0.05 per decade",
                COVERAGE,
                aging_trend_covered,
            ),
            st("per-tw X interval covers", COVERAGE, per_tw_x_covered),
        ],
    });
    out.push(Batch {
        scenario: "edge break q = 0.95, X = 0.25",
        spec: edge_break(20),
        model: Broken,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![
            st(
                "\"X changes with age\", X does not age",
                FALSE_ALARM,
                aging_caution,
            ),
            st(
                "per-tw verdict quotes an X interval excluding the truth",
                FALSE_ALARM,
                per_tw_quoted_x_excludes,
            ),
            st(
                "per-tw break detected but X withheld (edge)",
                Band::Report,
                per_tw_x_withheld,
            ),
            st("per-tw X interval covers", COVERAGE, per_tw_x_covered),
            st("joint X interval covers", COVERAGE, x_covered),
            st("joint q interval covers", COVERAGE, q_covered),
            st(
                "thermometer caution, slope exactly -1",
                FALSE_ALARM,
                thermometer_caution,
            ),
        ],
    });
    for (scenario, spec) in [
        (
            "edge break forced, 3-4 points above q = 0.95, X = 0.25",
            edge_break_forced(20),
        ),
        (
            "edge break forced, 3-4 points above q = 0.95, X = 0.25, noise 0.01",
            SynthSpec {
                noise: 0.01,
                ..edge_break_forced(48)
            },
        ),
    ] {
        out.push(Batch {
            scenario,
            spec,
            model: Broken,
            weights: Iv,
            t_scale: 1.0,
            statements: vec![
                st(
                    "\"X changes with age\", X does not age",
                    FALSE_ALARM,
                    aging_caution,
                ),
                st(
                    "per-tw verdict quotes an X interval excluding the truth",
                    FALSE_ALARM,
                    per_tw_quoted_x_excludes,
                ),
                st(
                    "per-tw break detected but X withheld (edge)",
                    Band::Report,
                    per_tw_x_withheld,
                ),
                st("per-tw X interval covers", COVERAGE, per_tw_x_covered),
                st("joint X interval covers", COVERAGE, x_covered),
                st(
                    "thermometer caution, slope exactly -1",
                    FALSE_ALARM,
                    thermometer_caution,
                ),
            ],
        });
    }
    out.push(Batch {
        scenario: "curved X(C) = 0.25 + 0.75 (C/q)^2, q = 0.6",
        spec: curved(20),
        model: Broken,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![st(
            "thermometer caution, slope exactly -1 (curved below q)",
            FALSE_ALARM,
            thermometer_caution,
        )],
    });
    out.push(Batch {
        scenario: "two lines X = 0.45, q = 0.6, fitted with T 5% low (slope above -0.95)",
        spec: two_lines(20),
        model: Broken,
        weights: Iv,
        t_scale: 0.95,
        statements: vec![st(
            "thermometer caution, slope -0.95 (power)",
            Band::Report,
            thermometer_caution,
        )],
    });
    for n in [20, 48] {
        out.push(Batch {
            scenario: "single line X = 0.5",
            spec: single_line(n),
            model: Line,
            weights: Iv,
            t_scale: 1.0,
            statements: vec![
                st(
                    "thermometer caution (single-line model)",
                    NEVER,
                    thermometer_caution,
                ),
                st("joint X interval covers", COVERAGE, x_covered),
            ],
        });
    }
    out.push(Batch {
        scenario: "two lines X = 0.45, q = 0.6",
        spec: two_lines(10),
        model: Broken,
        weights: Iv,
        t_scale: 1.0,
        statements: vec![
            st("joint X interval covers", COVERAGE, x_covered),
            st("joint q interval covers", COVERAGE, q_covered),
            st("per-tw X interval covers", COVERAGE, per_tw_x_covered),
            st(
                "\"X changes with age\", X does not age",
                FALSE_ALARM,
                aging_caution,
            ),
            st(
                "thermometer caution, slope exactly -1",
                FALSE_ALARM,
                thermometer_caution,
            ),
        ],
    });
    out
}

// ─── The harness ───────────────────────────────────────────────────────────────────────

fn env_usize(name: &str, default: usize) -> usize {
    match std::env::var(name) {
        Ok(v) => v
            .trim()
            .parse()
            .unwrap_or_else(|_| panic!("{name} = {v:?}: expected a whole number")),
        Err(_) => default,
    }
}

/// FNV-1a (common practice): a stable seed from a label.
fn seed_of(label: &str) -> u64 {
    label.bytes().fold(0xcbf2_9ce4_8422_2325, |h, b| {
        (h ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3)
    })
}

fn weights_name(w: Weighting) -> &'static str {
    match w {
        Weighting::InverseVariance => "inverse-variance",
        Weighting::Uniform => "uniform",
    }
}

fn model_name(m: Model) -> &'static str {
    match m {
        Model::Broken => "broken",
        Model::Free => "free",
        Model::Line => "line",
        Model::Smooth => "smooth",
    }
}

/// Counts of one statement over the campaigns: hits, statements made, campaigns.
#[derive(Default, Clone, Copy)]
struct Tally {
    hits: usize,
    made: usize,
}

/// Runs `campaigns` campaigns of `make` fitted with `settings` (data seed and resampling
/// seed distinct per campaign) and tallies each event. Returns the tallies and the number
/// of campaigns whose analysis failed (their statements are not made).
fn rate(
    campaigns: usize,
    make: &dyn Fn(u64) -> SynthSpec,
    settings: &dyn Fn(&SynthSpec, u64) -> FitSettings,
    events: &[Event],
) -> (Vec<Tally>, usize) {
    let mut tallies = vec![Tally::default(); events.len()];
    let mut failed = 0;
    for i in 0..campaigns as u64 {
        let spec = make(i);
        let campaign = generate(&spec).expect("synthetic campaign");
        let Ok(report) = analyze(&campaign, &settings(&spec, i), None, &Silent) else {
            failed += 1;
            continue;
        };
        for (t, event) in tallies.iter_mut().zip(events) {
            for hit in event(&report, &spec).into_iter().flatten() {
                t.made += 1;
                t.hits += usize::from(hit);
            }
        }
    }
    (tallies, failed)
}

const HEADER: &str = "| statement | scenario | samples | weights | model | nominal | statements (campaigns) | measured | binomial SD | band | in band | batch time |\n|---|---|---|---|---|---|---|---|---|---|---|---|";

#[test]
#[ignore = "long calibration study; see the module header for the command"]
fn calibration_table() {
    let campaigns = env_usize("FDTEMP_CALIB_CAMPAIGNS", 200);
    let b = env_usize("FDTEMP_CALIB_B", 999);
    let only: Vec<String> = std::env::var("FDTEMP_CALIB_ONLY")
        .unwrap_or_default()
        .split(',')
        .map(|s| s.trim().to_lowercase())
        .filter(|s| !s.is_empty())
        .collect();
    println!(
        "calibration: {campaigns} campaigns per row, B = {b}, 95% BCa intervals, 3 waiting \
         times × 20 points{}",
        if only.is_empty() {
            String::new()
        } else {
            format!(", rows matching {only:?}")
        }
    );
    println!("{HEADER}");
    let mut outside = Vec::new();
    for batch in batches() {
        let setting = |st: &Statement| {
            format!(
                "{} | {} | {} | {} | {}",
                st.name,
                batch.scenario,
                batch.spec.samples,
                weights_name(batch.weights),
                model_name(batch.model)
            )
        };
        let chosen: Vec<&Statement> = batch
            .statements
            .iter()
            .filter(|st| {
                let label = setting(st).to_lowercase();
                only.is_empty() || only.iter().any(|o| label.contains(o.as_str()))
            })
            .collect();
        if chosen.is_empty() {
            continue;
        }
        let seed_label = format!("{} / {} samples", batch.scenario, batch.spec.samples);
        let (data_seed, fit_seed) = (
            seed_of(&seed_label),
            seed_of(&format!("{seed_label} / fit")),
        );
        let make = |i: u64| SynthSpec {
            seed: data_seed.wrapping_add(i),
            ..batch.spec.clone()
        };
        let settings = |spec: &SynthSpec, i: u64| FitSettings {
            temperature: spec.temperature * batch.t_scale,
            resamples: b,
            seed: fit_seed.wrapping_add(i),
            model: batch.model,
            weights: batch.weights,
            ..FitSettings::default()
        };
        let events: Vec<Event> = chosen.iter().map(|st| st.event).collect();
        let start = Instant::now();
        let (tallies, failed) = rate(campaigns, &make, &settings, &events);
        let secs = start.elapsed().as_secs_f64();
        for (st, t) in chosen.iter().zip(tallies) {
            let (p, sd, ok) = if t.made > 0 {
                let p = t.hits as f64 / t.made as f64;
                (
                    format!("{p:.3}"),
                    format!("{:.3}", (p * (1.0 - p) / t.made as f64).sqrt()),
                    st.band.accepts(p),
                )
            } else {
                ("not stated".into(), "—".into(), None)
            };
            let verdict = match ok {
                Some(true) => "yes",
                Some(false) => {
                    outside.push(setting(st));
                    "**no**"
                }
                None => "—",
            };
            println!(
                "| {} | {} | {} ({campaigns}{}) | {p} | {sd} | {} | {verdict} | {secs:.1} s |",
                setting(st),
                st.band.nominal(),
                t.made,
                if failed > 0 {
                    format!(", {failed} failed")
                } else {
                    String::new()
                },
                st.band.text(),
            );
        }
    }
    println!("\nrows outside their band: {}", outside.len());
    for o in &outside {
        println!("  {o}");
    }
}

/// The harness itself, quickly: the accessors read a real report, the seeds differ.
#[test]
fn the_harness_reads_a_report() {
    let spec = SynthSpec {
        seed: 3,
        ..two_lines(20)
    };
    let c = generate(&spec).unwrap();
    let s = FitSettings {
        temperature: spec.temperature,
        resamples: 200,
        seed: 4,
        ..FitSettings::default()
    };
    let r = analyze(&c, &s, None, &Silent).unwrap();
    assert_eq!(per_tw(&r).len(), 3);
    assert!(equilibrium_p(joint(&r)).unwrap() < 0.05);
    assert!(x_interval(joint(&r)).is_some());
    assert_eq!(x_covered(&r, &spec).len(), 1);
    assert_eq!(per_tw_x_covered(&r, &spec).len(), 3);
    assert_ne!(seed_of("a / 20 samples"), seed_of("a / 20 samples / fit"));
    assert_ne!(seed_of("a / 20 samples"), seed_of("a / 10 samples"));
}
