//! `two-baths` and `ou-equilibrium`: Ornstein–Uhlenbeck modes, each coupled to its own
//! bath, with exact update steps (no discretization error). The response to a small force
//! is the perturbed run minus its zero-field twin (same noise).

use super::{FIELD, PARTICLES, Row, SimOutput, SimSpec, campaign_csv, log_grid};
use crate::resample::replicate_rng;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;
use std::fmt::Write;

/// One Ornstein–Uhlenbeck mode: `dx = −x/τ dt + μ h dt + √(2 μ T) dW`.
#[derive(Debug, Clone, Copy)]
pub(super) struct Mode {
    pub(super) temperature: f64,
    pub(super) mobility: f64,
    pub(super) time: f64,
}

impl Mode {
    pub(super) const FAST: Mode = Mode {
        temperature: 1.0,
        mobility: 1.0,
        time: 1.0,
    };
    pub(super) const SLOW: Mode = Mode {
        temperature: 2.5,
        mobility: 0.0004,
        time: 1000.0,
    };

    /// Stationary variance `μ T τ`.
    pub(super) fn variance(self) -> f64 {
        self.mobility * self.temperature * self.time
    }

    /// Exact step of length `dt` under force `h`: `(decay, drift, noise sd)`.
    pub(super) fn step(self, dt: f64, h: f64) -> (f64, f64, f64) {
        let e = (-dt / self.time).exp();
        let sd = (self.variance() * (1.0 - e * e)).sqrt();
        (e, self.mobility * h * self.time * (1.0 - e), sd)
    }
}

/// The waiting times of both scenarios.
const TWS: [f64; 2] = [50.0, 500.0];

/// A measurement time: `(time, tw index, lag index)`; lag index `usize::MAX` marks the
/// waiting time itself.
type Event = (f64, usize, usize);

/// `two-baths`: a fast mode at the bath temperature and a slow, hotter one.
pub(super) fn two_baths(spec: &SimSpec) -> SimOutput {
    run(spec, &[Mode::FAST, Mode::SLOW])
}

/// `ou-equilibrium`: the fast mode alone, in equilibrium.
pub(super) fn equilibrium(spec: &SimSpec) -> SimOutput {
    run(spec, &[Mode::FAST])
}

fn run(spec: &SimSpec, modes: &[Mode]) -> SimOutput {
    let rows = simulate_rows(spec, modes, &[vec![1.0; modes.len()]]);
    SimOutput {
        data: campaign_csv(&rows[0]),
        truth: truth(modes),
    }
}

/// Every sample's rows, one list per observable `Σ_k c_k x_k` of `coefs`.
fn simulate_rows(spec: &SimSpec, modes: &[Mode], coefs: &[Vec<f64>]) -> Vec<Vec<Row>> {
    let per_tw = if spec.quick { 24 } else { 40 };
    let events = schedule(&log_grid(0.02, 10_000.0, per_tw));
    let per_sample: Vec<Vec<Vec<Row>>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| sample(spec.seed, i, modes, coefs, &events))
        .collect();
    (0..coefs.len())
        .map(|o| {
            per_sample
                .iter()
                .flat_map(|s| s[o].iter().copied())
                .collect()
        })
        .collect()
}

/// The second slow bath's mode: as the slow mode, at its own temperature.
fn slow_b(temperature: f64) -> Mode {
    Mode {
        temperature,
        ..Mode::SLOW
    }
}

/// `two-baths-observables`: three modes (fast at T = 1, slow at 2.5, a second slow one at
/// `bath_b`) and two observables, `a = x_fast + x_slow` and
/// `b = x_fast + x_slow/2 + x_slow_b`, each with the response to its own conjugate field.
pub(super) fn two_observables(spec: &SimSpec, bath_b: f64) -> SimOutput {
    let modes = [Mode::FAST, Mode::SLOW, slow_b(bath_b)];
    let coefs = [vec![1.0, 1.0, 0.0], vec![1.0, 0.5, 1.0]];
    let rows = simulate_rows(spec, &modes, &coefs);
    let mut data = String::from("observable,sample,tw,t,corr,resp,corr_eq\n");
    for (name, rows) in ["a", "b"].iter().zip(&rows) {
        for &(i, tw, t, c, r, eq) in rows {
            let _ = writeln!(
                data,
                "{name},run{:04},{tw:?},{t:?},{c:?},{r:?},{:?}",
                i + 1,
                eq.unwrap_or(f64::NAN)
            );
        }
    }
    let exact = |c: &[f64]| exact_ratio(&modes, c);
    let (xa, xb) = (exact(&coefs[0]), exact(&coefs[1]));
    SimOutput {
        data: data.into_bytes(),
        truth: json!({
            "scenario": "two-baths-observables",
            "fit": "fdtemp fit FILE --temperature 1",
            "temperature": 1.0,
            "observables": {
                "a": {"coefficients": coefs[0], "ratio": xa, "t_eff": 1.0 / xa},
                "b": {"coefficients": coefs[1], "ratio": xb, "t_eff": 1.0 / xb},
            },
            "shared": (xa - xb).abs() < 1e-12,
            "modes": modes.iter().map(|m| json!({"temperature": m.temperature, "mobility": m.mobility, "time": m.time})).collect::<Vec<_>>(),
            "closed_form": "for B = sum_k c_k x_k with force h c_k on mode k: C_B = sum_k c_k^2 mu_k T_k tau_k exp(-(t-tw)/tau_k), chi_B = sum_k c_k^2 mu_k tau_k (1 - exp(-(t-tw)/tau_k)); below the plateau (slow modes only, equal mu tau) X_B = T sum c_k^2 / sum c_k^2 T_k",
            "source": "exact for independent Ornstein-Uhlenbeck modes (common practice): the slope of the slow branch is the slow modes' mu-tau-weighted inverse temperature",
        }),
    }
}

/// X of the slow branch of `Σ c_k x_k`: the modes slower than the first, with the first
/// mode's temperature as the bath's.
fn exact_ratio(modes: &[Mode], c: &[f64]) -> f64 {
    let (mut num, mut den) = (0.0, 0.0);
    for (m, ck) in modes.iter().zip(c).skip(1) {
        num += ck * ck * m.mobility * m.time;
        den += ck * ck * m.mobility * m.time * m.temperature;
    }
    modes[0].temperature * num / den
}

/// Every waiting time and measurement time, in time order.
fn schedule(lags: &[f64]) -> Vec<Event> {
    let mut events: Vec<Event> = Vec::new();
    for (a, &tw) in TWS.iter().enumerate() {
        events.push((tw, a, usize::MAX));
        for (b, &lag) in lags.iter().enumerate() {
            events.push((tw + lag, a, b));
        }
    }
    events.sort_by(|x, y| x.0.total_cmp(&y.0));
    events
}

/// Sample `i`: [`PARTICLES`] particles run through every event, C, χ and C(t,t) of each
/// observable `A = Σ_k c_k x_k` (one `c` per observable in `coefs`) averaged; the response
/// of A is to its conjugate field, a force `h c_k` on mode k.
fn sample(
    seed: u64,
    i: usize,
    modes: &[Mode],
    coefs: &[Vec<f64>],
    events: &[Event],
) -> Vec<Vec<Row>> {
    let mut rng = replicate_rng(seed, i as u64);
    let value = |c: &[f64], x: &[f64]| -> f64 { c.iter().zip(x).map(|(a, b)| a * b).sum() };
    // Per observable and point: sums over particles of A(t)A(tw), (A_h(t) − A(t))/h, A(t)².
    let mut sums: Vec<Vec<[f64; 3]>> = vec![vec![[0.0; 3]; events.len()]; coefs.len()];
    for _ in 0..PARTICLES {
        // Unperturbed state, and per observable one perturbed twin per waiting time
        // (force from tw on).
        let mut x0: Vec<f64> = modes
            .iter()
            .map(|m| m.variance().sqrt() * rng.sample::<f64, _>(StandardNormal))
            .collect();
        let mut xh: Vec<Vec<Vec<f64>>> = vec![vec![x0.clone(); TWS.len()]; coefs.len()];
        let mut a_tw = vec![vec![0.0; TWS.len()]; coefs.len()];
        let mut now = 0.0;
        for (ev, &(time, a, b)) in events.iter().enumerate() {
            let dt = time - now;
            if dt > 0.0 {
                for (k, m) in modes.iter().enumerate() {
                    let z: f64 = rng.sample(StandardNormal);
                    let (e, _, sd) = m.step(dt, 0.0);
                    let noise = sd * z;
                    x0[k] = x0[k] * e + noise;
                    for (c, twins) in coefs.iter().zip(xh.iter_mut()) {
                        for (w, twin) in twins.iter_mut().enumerate() {
                            let h = if now >= TWS[w] { FIELD * c[k] } else { 0.0 };
                            let (e, drift, _) = m.step(dt, h);
                            twin[k] = twin[k] * e + drift + noise;
                        }
                    }
                }
                now = time;
            }
            for (o, c) in coefs.iter().enumerate() {
                let a0 = value(c, &x0);
                if b == usize::MAX {
                    a_tw[o][a] = a0;
                    xh[o][a] = x0.clone();
                } else {
                    let ah = value(c, &xh[o][a]);
                    let acc = &mut sums[o][ev];
                    acc[0] += a0 * a_tw[o][a];
                    acc[1] += (ah - a0) / FIELD;
                    acc[2] += a0 * a0;
                }
            }
        }
    }
    let np = PARTICLES as f64;
    sums.iter()
        .map(|sums| {
            events
                .iter()
                .zip(sums)
                .filter(|(e, _)| e.2 != usize::MAX)
                .map(|(&(time, a, _), acc)| {
                    (i, TWS[a], time, acc[0] / np, acc[1] / np, Some(acc[2] / np))
                })
                .collect()
        })
        .collect()
}

/// The truth file: exact for independent modes.
fn truth(modes: &[Mode]) -> serde_json::Value {
    let total: f64 = modes.iter().map(|m| m.variance()).sum();
    if modes.len() == 2 {
        let (f, s) = (modes[0], modes[1]);
        json!({
            "scenario": "two-baths",
            "fit": "fdtemp fit FILE --temperature 1",
            "axes": "normalized (the file has corr_eq = C(t,t))",
            "temperature": f.temperature,
            "ratio": f.temperature / s.temperature,
            "t_eff": s.temperature,
            "break": s.variance() / total,
            "modes": [{"temperature": f.temperature, "mobility": f.mobility, "time": f.time},
                      {"temperature": s.temperature, "mobility": s.mobility, "time": s.time}],
            "closed_form": "C(t,tw) = sum_i mu_i T_i tau_i exp(-(t-tw)/tau_i); chi(t,tw) = sum_i mu_i tau_i (1 - exp(-(t-tw)/tau_i))",
            "source": "exact for independent Ornstein-Uhlenbeck modes (common practice): slope -T/T_fast then -T/T_slow; with T = T_fast, X = T_fast/T_slow, q = (mu T tau)_slow / C(t,t)",
        })
    } else {
        json!({
            "scenario": "ou-equilibrium",
            "fit": "fdtemp fit FILE --temperature 1",
            "temperature": modes[0].temperature,
            "ratio": 1.0,
            "t_eff": modes[0].temperature,
            "break": null,
            "source": "equilibrium fluctuation-dissipation theorem (common practice): X = 1, no break",
        })
    }
}
