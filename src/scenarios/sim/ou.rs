//! `two-baths` and `ou-equilibrium`: Ornstein–Uhlenbeck modes, each coupled to its own
//! bath, with exact update steps (no discretization error). The response to a small force
//! is the perturbed run minus its zero-field twin (same noise).

use super::{FIELD, PARTICLES, Row, SimOutput, SimSpec, campaign_csv, log_grid};
use crate::resample::replicate_rng;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;

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
    let per_tw = if spec.quick { 24 } else { 40 };
    let events = schedule(&log_grid(0.02, 10_000.0, per_tw));
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| sample(spec.seed, i, modes, &events))
        .collect();
    SimOutput {
        data: campaign_csv(&rows.concat()),
        truth: truth(modes),
    }
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

/// Sample `i`: [`PARTICLES`] particles run through every event, C, χ and C(t,t) averaged.
fn sample(seed: u64, i: usize, modes: &[Mode], events: &[Event]) -> Vec<Row> {
    let mut rng = replicate_rng(seed, i as u64);
    // Per point: sums over particles of A(t)A(tw), (A_h(t) − A(t))/h, A(t)².
    let mut sums: Vec<[f64; 3]> = vec![[0.0; 3]; events.len()];
    for _ in 0..PARTICLES {
        // Unperturbed state, and one perturbed twin per waiting time (force from tw on).
        let mut x0: Vec<f64> = modes
            .iter()
            .map(|m| m.variance().sqrt() * rng.sample::<f64, _>(StandardNormal))
            .collect();
        let mut xh: Vec<Vec<f64>> = vec![x0.clone(); TWS.len()];
        let mut a_tw = vec![0.0; TWS.len()];
        let mut now = 0.0;
        for (ev, &(time, a, b)) in events.iter().enumerate() {
            let dt = time - now;
            if dt > 0.0 {
                for (k, m) in modes.iter().enumerate() {
                    let z: f64 = rng.sample(StandardNormal);
                    let (e, _, sd) = m.step(dt, 0.0);
                    let noise = sd * z;
                    x0[k] = x0[k] * e + noise;
                    for (w, twin) in xh.iter_mut().enumerate() {
                        let h = if now >= TWS[w] { FIELD } else { 0.0 };
                        let (e, drift, _) = m.step(dt, h);
                        twin[k] = twin[k] * e + drift + noise;
                    }
                }
                now = time;
            }
            let a0: f64 = x0.iter().sum();
            if b == usize::MAX {
                a_tw[a] = a0;
                xh[a] = x0.clone();
            } else {
                let ah: f64 = xh[a].iter().sum();
                let acc = &mut sums[ev];
                acc[0] += a0 * a_tw[a];
                acc[1] += (ah - a0) / FIELD;
                acc[2] += a0 * a0;
            }
        }
    }
    let np = PARTICLES as f64;
    events
        .iter()
        .zip(&sums)
        .filter(|(e, _)| e.2 != usize::MAX)
        .map(|(&(time, a, _), acc)| (i, TWS[a], time, acc[0] / np, acc[1] / np, Some(acc[2] / np)))
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
