//! `ising-chain`: a 1D Ising chain with heat-bath (Glauber) single-spin dynamics quenched
//! from a random state to a low temperature. The integrated response comes from the
//! unperturbed dynamics by the field-free estimator (Ricci-Tersenghi, Phys. Rev. E 68,
//! 065104(R) (2003); Chatelain, J. Phys. A 36, 10739 (2003)). Published: `X∞ = 1/2`
//! (Godrèche & Luck, J. Phys. A 33, 1151 (2000); Lippiello & Zannetti, Phys. Rev. E 61,
//! 3369 (2000)).

use super::{Row, SimOutput, SimSpec, campaign_csv, log_grid};
use crate::resample::replicate_rng;
use crate::twotime::settings::Hold;
use rand::RngExt;
use rayon::prelude::*;
use serde_json::json;

const TEMPERATURE: f64 = 0.25;

/// A waiting time s (sweeps) and its measurement sweeps t, sorted.
type Plan = (usize, Vec<usize>);

/// The chain and its measurement plan.
struct Chain {
    /// Spins.
    l: usize,
    /// `tanh(β h)` for the local fields h = −2, 0, 2.
    tanh: [f64; 3],
    plans: Vec<Plan>,
    /// The last sweep.
    end: usize,
}

/// Simulates `ising-chain`.
pub(super) fn ising_chain(spec: &SimSpec) -> SimOutput {
    if spec.hold == Hold::T {
        return at_fixed_t(spec);
    }
    let (l, sweeps_per_s): (usize, [usize; 2]) = if spec.quick {
        (2000, [10, 20])
    } else {
        (4000, [20, 40])
    };
    let max_ratio = if spec.quick { 60.0 } else { 150.0 };
    let per_s = if spec.quick { 24 } else { 40 };
    let plans = plans(&sweeps_per_s, max_ratio, per_s);
    let end = plans
        .iter()
        .flat_map(|(_, ts)| ts.iter().copied())
        .max()
        .unwrap_or(1);
    let beta = 1.0 / TEMPERATURE;
    let chain = Chain {
        l,
        tanh: [(-2.0 * beta).tanh(), 0.0, (2.0 * beta).tanh()],
        plans,
        end,
    };
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| sample(spec.seed, i, &chain))
        .collect();
    SimOutput {
        data: campaign_csv(&rows.concat()),
        truth: json!({
            "scenario": "ising-chain",
            "fit": "fdtemp fit FILE --temperature 0.25 --model line --range 0:0.15",
            "temperature": TEMPERATURE,
            "ratio": 0.5,
            "ratio_note": "the asymptotic value X_inf as C -> 0; at finite t/s the local slope is (t+s)/(2t), about 0.51 on 0 < C < 0.15",
            "t_eff": 2.0 * TEMPERATURE,
            "break": null,
            "chain_length": l,
            "waiting_times_sweeps": sweeps_per_s,
            "response": "field-free estimator from the unperturbed heat-bath dynamics (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R) (2003); Chatelain, J. Phys. A 36, 10739 (2003))",
            "scaling_forms": "C(t,s) = (2/pi) arctan sqrt(2s/(t-s)); T chi(t,s) = (sqrt 2/pi) arccos sqrt(s/t)",
            "source": "Godreche & Luck, J. Phys. A 33, 1151 (2000); Lippiello & Zannetti, Phys. Rev. E 61, 3369 (2000): X(t,s) = (t+s)/(2t), X_inf = 1/2",
        }),
    }
}

/// `ising-chain --hold t`: at fixed later times t the earlier time s runs, with
/// v = s/t log-spaced in [0.03, 0.99]. The slope of a fixed-t curve is the two-time ratio
/// X(t, s) = (1 + v)/2, and in the scaling regime (1 ≪ s < t ≪ ξ²; ξ ≈ 1500 sites at
/// T = 0.25) C = (2/π) arctan √(2v/(1−v)), so X(C) = (1 + v(C))/2 with
/// v(C) = u²/(2 + u²), u = tan(πC/2) (Godrèche & Luck, J. Phys. A 33, 1151 (2000)).
fn at_fixed_t(spec: &SimSpec) -> SimOutput {
    let (l, later): (usize, Vec<usize>) = if spec.quick {
        (2000, vec![200, 400])
    } else {
        (4000, vec![2000, 4000])
    };
    let per_t = if spec.quick { 24 } else { 40 };
    let plans: Vec<Plan> = later
        .iter()
        .map(|&t| {
            let mut ss: Vec<usize> = log_grid(0.03, 0.99, per_t)
                .iter()
                .map(|v| (v * t as f64).round() as usize)
                .filter(|&s| s >= 1 && s < t)
                .collect();
            ss.sort_unstable();
            ss.dedup();
            (t, ss)
        })
        .collect();
    let beta = 1.0 / TEMPERATURE;
    let tanh = [(-2.0 * beta).tanh(), 0.0, (2.0 * beta).tanh()];
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| sample_at_fixed_t(spec.seed, i, l, tanh, &plans))
        .collect();
    SimOutput {
        data: campaign_csv(&rows.concat()),
        truth: json!({
            "scenario": "ising-chain",
            "hold": "t",
            "fit": "fdtemp fit FILE --temperature 0.25 --hold t --axes plain --model smooth",
            "temperature": TEMPERATURE,
            "ratio": 0.5,
            "ratio_note": "at fixed t the slope is the two-time ratio X(t,s) = (1+v)/2, v = s/t: from 1/2 as C -> 0 to 1 as C -> 1; X(C) = (1 + v(C))/2 with v(C) = u^2/(2 + u^2), u = tan(pi C/2)",
            "t_eff": 2.0 * TEMPERATURE,
            "break": null,
            "chain_length": l,
            "later_times_sweeps": later,
            "response": "field-free estimator from the unperturbed heat-bath dynamics (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R) (2003); Chatelain, J. Phys. A 36, 10739 (2003))",
            "scaling_forms": "C(t,s) = (2/pi) arctan sqrt(2v/(1-v)); T chi(t,s) = (sqrt 2/pi) arccos sqrt(v), v = s/t",
            "source": "Godreche & Luck, J. Phys. A 33, 1151 (2000): X(t,s) = (t+s)/(2t)",
        }),
    }
}

/// The exact X(C) of the chain at fixed t in the scaling regime (see [`at_fixed_t`]).
pub fn ratio_at_fixed_t(c: f64) -> f64 {
    let u = (std::f64::consts::FRAC_PI_2 * c.clamp(0.0, 1.0)).tan();
    let v = if u.is_finite() {
        u * u / (2.0 + u * u)
    } else {
        1.0
    };
    0.5 * (1.0 + v)
}

/// Sample `i` of `--hold t`: one quench; the spins and the accumulated field-free sums
/// `A_k(τ) = Σ (σ_new − tanh βh)` kept at every planned s, so that at t
/// `T χ(t, s) = (1/L) Σ_k σ_k(t) (A_k(t) − A_k(s))` for every s at once.
fn sample_at_fixed_t(seed: u64, i: usize, l: usize, tanh: [f64; 3], plans: &[Plan]) -> Vec<Row> {
    let mut rng = replicate_rng(seed, i as u64);
    let mut spin: Vec<i8> = (0..l)
        .map(|_| if rng.random_bool(0.5) { 1 } else { -1 })
        .collect();
    let mut cum = vec![0.0f64; l];
    let mut earlier: Vec<usize> = plans
        .iter()
        .flat_map(|(_, ss)| ss.iter().copied())
        .collect();
    earlier.sort_unstable();
    earlier.dedup();
    let mut kept: Vec<(Vec<i8>, Vec<f64>)> = Vec::with_capacity(earlier.len());
    let end = plans.iter().map(|p| p.0).max().unwrap_or(0);
    let mut out = Vec::new();
    for sweep in 1..=end {
        for _ in 0..l {
            let k = rng.random_range(0..l);
            let h = i32::from(spin[(k + l - 1) % l]) + i32::from(spin[(k + 1) % l]);
            let th = tanh[(h / 2 + 1) as usize];
            let new: i8 = if rng.random::<f64>() < 0.5 * (1.0 + th) {
                1
            } else {
                -1
            };
            spin[k] = new;
            cum[k] += f64::from(new) - th;
        }
        if earlier.binary_search(&sweep).is_ok() {
            kept.push((spin.clone(), cum.clone()));
        }
        for (t, ss) in plans.iter().filter(|p| p.0 == sweep) {
            for &s in ss {
                let Ok(j) = earlier.binary_search(&s) else {
                    continue;
                };
                let (snap, cum_s) = &kept[j];
                let diff: Vec<f64> = cum.iter().zip(cum_s).map(|(a, b)| a - b).collect();
                let (c, tchi) = measure(&spin, snap, &diff);
                out.push((i, s as f64, *t as f64, c, tchi / TEMPERATURE, None));
            }
        }
    }
    out
}

/// Measurement sweeps for each s: t/s log-spaced in (1, max_ratio].
fn plans(sweeps_per_s: &[usize], max_ratio: f64, per_s: usize) -> Vec<Plan> {
    sweeps_per_s
        .iter()
        .map(|&s| {
            // The published check ratios t/s = 2, 4, 10 are always on the grid.
            let mut ts: Vec<usize> = log_grid(1.1, max_ratio, per_s)
                .iter()
                .chain(&[2.0, 4.0, 10.0])
                .map(|r| (r * s as f64).round() as usize)
                .filter(|&t| t > s)
                .collect();
            ts.sort_unstable();
            ts.dedup();
            (s, ts)
        })
        .collect()
}

/// Sample `i`: one quench, C and T χ (field-free estimator) at every planned (s, t).
fn sample(seed: u64, i: usize, chain: &Chain) -> Vec<Row> {
    let (l, tanh) = (chain.l, chain.tanh);
    let mut rng = replicate_rng(seed, i as u64);
    let mut spin: Vec<i8> = (0..l)
        .map(|_| if rng.random_bool(0.5) { 1 } else { -1 })
        .collect();
    let mut snapshot: Vec<Vec<i8>> = vec![Vec::new(); chain.plans.len()];
    let mut acc: Vec<Vec<f64>> = vec![Vec::new(); chain.plans.len()];
    let mut out = Vec::new();
    for sweep in 1..=chain.end {
        for _ in 0..l {
            let k = rng.random_range(0..l);
            let h = i32::from(spin[(k + l - 1) % l]) + i32::from(spin[(k + 1) % l]);
            let th = tanh[(h / 2 + 1) as usize];
            let new: i8 = if rng.random::<f64>() < 0.5 * (1.0 + th) {
                1
            } else {
                -1
            };
            spin[k] = new;
            for a in acc.iter_mut().filter(|a| !a.is_empty()) {
                a[k] += f64::from(new) - th;
            }
        }
        for (p, (s, ts)) in chain.plans.iter().enumerate() {
            if sweep == *s {
                snapshot[p] = spin.clone();
                acc[p] = vec![0.0; l];
            } else if ts.binary_search(&sweep).is_ok() {
                let (c, tchi) = measure(&spin, &snapshot[p], &acc[p]);
                out.push((i, *s as f64, sweep as f64, c, tchi / TEMPERATURE, None));
            }
        }
    }
    out
}

/// C(t,s) from the spins now and at s, and T χ(t,s) from the accumulated estimator.
fn measure(spin: &[i8], snapshot: &[i8], acc: &[f64]) -> (f64, f64) {
    let l = spin.len() as f64;
    let c = spin
        .iter()
        .zip(snapshot)
        .map(|(a, b)| i32::from(a * b))
        .sum::<i32>() as f64
        / l;
    let tchi = spin
        .iter()
        .zip(acc)
        .map(|(a, d)| f64::from(*a) * d)
        .sum::<f64>()
        / l;
    (c, tchi)
}
