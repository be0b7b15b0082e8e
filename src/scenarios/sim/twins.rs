//! Raw twin runs for `fdtemp reduce`: the two-bath Ornstein–Uhlenbeck system of `ou.rs`
//! with a real force h switched on at tw, one perturbed twin per field sharing the
//! unperturbed run's noise. Written in the long format `sample, tw, t, h, corr, m`.
//!
//! The force a twin feels can be made nonlinear in h on purpose, `f(h) = h + κ₂h² + κ₃h³`,
//! so that χ(h) = χ₁ (1 + κ₂h + κ₃h²) exactly: known-truth input for the linear-response
//! test (tests/reduce.rs).
//!
//! # Formula
//! Independent modes, each `dx = −x/τ dt + μ f dt + √(2μT) dW` started in equilibrium:
//! `C(t,tw) = Σ μTτ e^{−(t−tw)/τ}`, `χ(t,tw) = Σ μτ (1 − e^{−(t−tw)/τ})` (the stationary
//! covariance of the Ornstein–Uhlenbeck process and the mean of the same linear equation
//! under a constant force: Gardiner, *Stochastic Methods*, 4th ed. (2009), §3.8.4 (section
//! from memory)). With T = T_fast the parametric slope is −1 then −T/T_slow.

use super::ou::Mode;
use super::{PARTICLES, SimOutput, SimSpec, log_grid};
use crate::error::{Error, Result};
use crate::resample::replicate_rng;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;
use std::fmt::Write;

/// The waiting times (switch-on times of the field).
pub const TWS: [f64; 2] = [50.0, 500.0];
/// The fields of `synth two-baths-twins`: two amplitudes, both signs.
pub const FIELDS: [f64; 4] = [-0.1, -0.05, 0.05, 0.1];

/// What to simulate.
#[derive(Debug, Clone, PartialEq)]
pub struct TwinSpec {
    /// Independent samples.
    pub samples: usize,
    /// Seed: sample i uses stream i.
    pub seed: u64,
    /// Fewer times per waiting time.
    pub quick: bool,
    /// The signed fields of the perturbed twins.
    pub fields: Vec<f64>,
    /// κ₂ of the force `h + κ₂h² + κ₃h³` (0 for a linear system).
    pub quadratic: f64,
    /// κ₃ of the force (0 for a linear system).
    pub cubic: f64,
}

impl TwinSpec {
    /// The linear two-bath system of `synth two-baths-twins`.
    pub fn linear(samples: usize, seed: u64, quick: bool) -> Self {
        TwinSpec {
            samples,
            seed,
            quick,
            fields: FIELDS.to_vec(),
            quadratic: 0.0,
            cubic: 0.0,
        }
    }
}

/// The modes: a fast one at the bath temperature, a slow hotter one (as `two-baths`).
pub const MODES: usize = 2;

fn modes() -> [Mode; MODES] {
    [Mode::FAST, Mode::SLOW]
}

/// The lags `t − tw` measured after each waiting time.
pub fn lags(quick: bool) -> Vec<f64> {
    log_grid(0.02, 10_000.0, if quick { 16 } else { 30 })
}

/// Closed-form `C(t,tw)` of the stationary two-bath system.
pub fn exact_corr(lag: f64) -> f64 {
    modes()
        .iter()
        .map(|m| m.variance() * (-lag / m.time).exp())
        .sum()
}

/// Closed-form linear `χ(t,tw)` of the two-bath system.
pub fn exact_chi(lag: f64) -> f64 {
    modes()
        .iter()
        .map(|m| m.mobility * m.time * (1.0 - (-lag / m.time).exp()))
        .sum()
}

/// The raw CSV of twin runs.
pub fn twin_csv(spec: &TwinSpec) -> Vec<u8> {
    let lags = lags(spec.quick);
    let mut events: Vec<(f64, usize, usize)> = Vec::new();
    for (a, &tw) in TWS.iter().enumerate() {
        events.push((tw, a, usize::MAX));
        for (b, &lag) in lags.iter().enumerate() {
            events.push((tw + lag, a, b));
        }
    }
    events.sort_by(|x, y| x.0.total_cmp(&y.0));
    let blocks: Vec<String> = (0..spec.samples)
        .into_par_iter()
        .map(|i| sample(spec, i, &events))
        .collect();
    let mut s = String::from("sample,tw,t,h,corr,m\n");
    for b in blocks {
        s.push_str(&b);
    }
    s.into_bytes()
}

/// Sample `i`: [`PARTICLES`] particles; per waiting time the unperturbed run and one twin
/// per field. Rows: the value at tw itself (before the field acts), then every lag.
fn sample(spec: &TwinSpec, i: usize, events: &[(f64, usize, usize)]) -> String {
    let modes = modes();
    let nf = spec.fields.len();
    let force: Vec<f64> = spec
        .fields
        .iter()
        .map(|&h| h + spec.quadratic * h * h + spec.cubic * h * h * h)
        .collect();
    let mut rng = replicate_rng(spec.seed, i as u64);
    // Per event: Σ A0(t) A0(tw), Σ A0(t), Σ A_h(t) per field.
    let mut sums: Vec<Vec<f64>> = vec![vec![0.0; 2 + nf]; events.len()];
    for _ in 0..PARTICLES {
        let mut x0: Vec<f64> = modes
            .iter()
            .map(|m| m.variance().sqrt() * rng.sample::<f64, _>(StandardNormal))
            .collect();
        let mut xh: Vec<Vec<Vec<f64>>> = vec![vec![x0.clone(); nf]; TWS.len()];
        let mut a_tw = [0.0; 2];
        let mut now = 0.0;
        for (ev, &(time, a, b)) in events.iter().enumerate() {
            let dt = time - now;
            if dt > 0.0 {
                for (k, m) in modes.iter().enumerate() {
                    let z: f64 = rng.sample(StandardNormal);
                    let (e, _, sd) = m.step(dt, 0.0);
                    let noise = sd * z;
                    x0[k] = x0[k] * e + noise;
                    for (w, per_tw) in xh.iter_mut().enumerate() {
                        if now < TWS[w] {
                            continue;
                        }
                        for (f, twin) in per_tw.iter_mut().enumerate() {
                            let (e, drift, _) = m.step(dt, force[f]);
                            twin[k] = twin[k] * e + drift + noise;
                        }
                    }
                }
                now = time;
            }
            let a0: f64 = x0.iter().sum();
            let acc = &mut sums[ev];
            if b == usize::MAX {
                a_tw[a] = a0;
                for twin in xh[a].iter_mut() {
                    twin.clone_from(&x0);
                }
                acc[0] += a0 * a0;
                acc[1] += a0;
                for f in 0..nf {
                    acc[2 + f] += a0;
                }
            } else {
                acc[0] += a0 * a_tw[a];
                acc[1] += a0;
                for f in 0..nf {
                    acc[2 + f] += xh[a][f].iter().sum::<f64>();
                }
            }
        }
    }
    let np = PARTICLES as f64;
    let mut s = String::new();
    let id = format!("s{:04}", i + 1);
    for (a, &tw) in TWS.iter().enumerate() {
        for (&(time, ea, _), acc) in events.iter().zip(&sums) {
            if ea != a {
                continue;
            }
            let _ = writeln!(
                s,
                "{id},{tw:?},{time:?},0,{:?},{:?}",
                acc[0] / np,
                acc[1] / np
            );
            for (f, h) in spec.fields.iter().enumerate() {
                let _ = writeln!(s, "{id},{tw:?},{time:?},{h:?},,{:?}", acc[2 + f] / np);
            }
        }
    }
    s
}

/// `synth two-baths-twins`: the raw file and its truth.
pub(super) fn two_baths(spec: &SimSpec) -> SimOutput {
    let t = TwinSpec::linear(spec.samples, spec.seed, spec.quick);
    let [f, s] = modes();
    SimOutput {
        data: twin_csv(&t),
        truth: json!({
            "scenario": "two-baths-twins",
            "fit": "fdtemp reduce FILE --out campaign.csv --fit --temperature 1",
            "temperature": f.temperature,
            "ratio": f.temperature / s.temperature,
            "t_eff": s.temperature,
            "fields": FIELDS,
            "linear_response": "exact: the system is linear, chi does not depend on h",
            "closed_form": "C(t,tw) = sum_i mu_i T_i tau_i exp(-(t-tw)/tau_i); chi(t,tw) = sum_i mu_i tau_i (1 - exp(-(t-tw)/tau_i))",
            "source": "exact for independent Ornstein-Uhlenbeck modes (Gardiner, Stochastic Methods, 4th ed. (2009), section 3.8.4, from memory): slope -1 then -T/T_slow, X = T_fast/T_slow",
        }),
    }
}

/// Repeated quenches of the two-bath system for `reduce` (protocol 2): independent runs of
/// one particle started in equilibrium; run k is unperturbed when k mod 3 = 0, otherwise
/// a step force from tw = 50 (k mod 3 = 1) or 500 (k mod 3 = 2), with the field
/// `fields[(k / 3) mod len]` (the fields take turns within each tw). Every run is recorded
/// at the same times: two before the first tw, both tws, and the lags after each. As for
/// twins, the force can be made nonlinear, `h + κ₂h² + κ₃h³`, so that
/// χ(h) = χ₁ (1 + κ₂h + κ₃h²) exactly.
#[derive(Debug, Clone, PartialEq)]
pub struct QuenchSpec {
    /// Independent runs.
    pub runs: usize,
    /// Seed: run k uses stream k.
    pub seed: u64,
    /// Fewer times.
    pub quick: bool,
    /// The fields of the perturbed runs (signed; they take turns within each tw).
    pub fields: Vec<f64>,
    /// κ₂ of the force `h + κ₂h² + κ₃h³` (0 for a linear system).
    pub quadratic: f64,
    /// κ₃ of the force (0 for a linear system).
    pub cubic: f64,
    /// How long before tw the field is really switched on (0: at tw, as recorded).
    pub lead: f64,
    /// The slow mode's temperature (2.5 as `two-baths`; 1, the bath's, for equilibrium).
    pub slow_temperature: f64,
}

impl QuenchSpec {
    /// The quenches of `synth two-baths-quenches`.
    pub fn standard(runs: usize, seed: u64, quick: bool) -> Self {
        QuenchSpec {
            runs,
            seed,
            quick,
            fields: vec![QUENCH_FIELD],
            quadratic: 0.0,
            cubic: 0.0,
            lead: 0.0,
            slow_temperature: Mode::SLOW.temperature,
        }
    }
}

/// The field of `synth two-baths-quenches` (without `--fields`).
pub const QUENCH_FIELD: f64 = 0.5;

/// The recorded times of every quench run.
pub fn quench_times(quick: bool) -> Vec<f64> {
    let mut ts = vec![10.0, 25.0];
    for tw in TWS {
        ts.push(tw);
        ts.extend(lags(quick).iter().map(|l| tw + l));
    }
    ts.sort_by(f64::total_cmp);
    ts.dedup();
    ts
}

/// The raw CSV of repeated quenches (`run, t, value, h, tw`).
pub fn quench_csv(spec: &QuenchSpec) -> Vec<u8> {
    let times = quench_times(spec.quick);
    let blocks: Vec<String> = (0..spec.runs)
        .into_par_iter()
        .map(|k| {
            let modes = [
                Mode::FAST,
                Mode {
                    temperature: spec.slow_temperature,
                    ..Mode::SLOW
                },
            ];
            let mut rng = replicate_rng(spec.seed, k as u64);
            let (h, tw) = match k % 3 {
                0 => (0.0, None),
                g => (
                    spec.fields[(k / 3) % spec.fields.len().max(1)],
                    Some(TWS[g - 1]),
                ),
            };
            let force = h + spec.quadratic * h * h + spec.cubic * h * h * h;
            let on = tw.map_or(f64::INFINITY, |tw| tw - spec.lead);
            let mut x: Vec<f64> = modes
                .iter()
                .map(|m| m.variance().sqrt() * rng.sample::<f64, _>(StandardNormal))
                .collect();
            let mut now = 0.0;
            let mut s = String::new();
            let tw_field = tw.map_or(String::new(), |v| format!("{v:?}"));
            for &t in &times {
                // Step to the switch-on time first, then to t.
                for stop in [on.min(t), t] {
                    let dt = stop - now;
                    if dt > 0.0 {
                        let f = if now >= on { force } else { 0.0 };
                        for (xk, m) in x.iter_mut().zip(&modes) {
                            let (e, drift, sd) = m.step(dt, f);
                            *xk = *xk * e + drift + sd * rng.sample::<f64, _>(StandardNormal);
                        }
                        now = stop;
                    }
                }
                let a: f64 = x.iter().sum();
                let _ = writeln!(s, "q{:05},{t:?},{a:?},{h:?},{tw_field}", k + 1);
            }
            s
        })
        .collect();
    let mut s = String::from("run,t,value,h,tw\n");
    for b in blocks {
        s.push_str(&b);
    }
    s.into_bytes()
}

/// `synth two-baths-quenches`: the raw file and its truth.
pub(super) fn two_baths_quenches(spec: &SimSpec, fields: &[f64]) -> Result<SimOutput> {
    let mut q = QuenchSpec::standard(spec.samples, spec.seed, spec.quick);
    if !fields.is_empty() {
        for (i, h) in fields.iter().enumerate() {
            if !(h.abs() > 0.0) || !h.is_finite() {
                return Err(Error::Setting(format!(
                    "--fields has {h}, expected nonzero fields"
                )));
            }
            if fields[..i].contains(h) {
                return Err(Error::Setting(format!("--fields has {h} twice")));
            }
        }
        q.fields = fields.to_vec();
    }
    let [f, s] = modes();
    let mut truth = json!({
            "scenario": "two-baths-quenches",
            "fit": "fdtemp reduce FILE --out points.csv",
            "temperature": f.temperature,
            "ratio": f.temperature / s.temperature,
            "runs": "run k: unperturbed when k mod 3 = 0, field from tw = 50 when 1, from tw = 500 when 2",
            "closed_form": "C(t,tw) = sum_i mu_i T_i tau_i exp(-(t-tw)/tau_i) (connected); chi(t,tw) = sum_i mu_i tau_i (1 - exp(-(t-tw)/tau_i))",
            "source": "exact for independent Ornstein-Uhlenbeck modes (Gardiner, Stochastic Methods, 4th ed. (2009), section 3.8.4, from memory)",
    });
    if let [h] = q.fields.as_slice() {
        truth["field"] = json!(h);
    } else {
        truth["fields"] = json!(q.fields);
        truth["runs"] = json!(
            "run k: unperturbed when k mod 3 = 0, field from tw = 50 when 1, from tw = 500 when 2; the field of run k is fields[(k / 3) mod (number of fields)]"
        );
        truth["linear_response"] = json!("exact: the system is linear, chi does not depend on h");
    }
    Ok(SimOutput {
        data: quench_csv(&q),
        truth,
    })
}
