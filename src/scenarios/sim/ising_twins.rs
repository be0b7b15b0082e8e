//! `ising-twins`: the Glauber–Ising chain of `ising.rs` (heat-bath dynamics, quench from a
//! random state to T = 0.25) as raw twin runs for `reduce`: per sample a random-sign field
//! ε_i h (signs drawn per sample), switched on after sweep s, at two amplitudes and both
//! signs; the twins share the unperturbed run's site choices and random numbers. The
//! observable conjugate to the field is the staggered magnetization m = (1/L) Σ ε_i σ_i.
//!
//! Each unperturbed row also carries `chi_free`, the field-free estimator of the same
//! response from the unperturbed dynamics (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R)
//! (2003); Chatelain, J. Phys. A 36, 10739 (2003)), which `reduce` ignores and the tests
//! compare with. Published: X∞ = 1/2 (Godrèche & Luck, J. Phys. A 33, 1151 (2000)).

use super::{SimOutput, SimSpec, log_grid};
use crate::resample::replicate_rng;
use rand::RngExt;
use rayon::prelude::*;
use serde_json::json;
use std::fmt::Write;

const TEMPERATURE: f64 = 0.25;
/// The field amplitudes (both signs are run).
pub const AMPLITUDES: [f64; 2] = [0.05, 0.1];

/// Simulates `ising-twins`.
pub(super) fn ising_twins(spec: &SimSpec) -> SimOutput {
    SimOutput {
        data: ising_twin_csv(spec.samples, spec.seed, spec.quick),
        truth: json!({
            "scenario": "ising-twins",
            "fit": "fdtemp reduce FILE --out campaign.csv --fit --temperature 0.25",
            "temperature": TEMPERATURE,
            "ratio": 0.5,
            "ratio_note": "the asymptotic value X_inf as C -> 0; at finite t/s the local slope is (t+s)/(2t)",
            "fields": "random-sign field eps_i h, h = +-0.05, +-0.1, from sweep s on",
            "chi_free": "field-free estimator of the same response in the unperturbed rows (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R) (2003))",
            "source": "Godreche & Luck, J. Phys. A 33, 1151 (2000): X(t,s) = (t+s)/(2t), X_inf = 1/2",
        }),
    }
}

/// The raw twin CSV with the extra column `chi_free`.
pub fn ising_twin_csv(samples: usize, seed: u64, quick: bool) -> Vec<u8> {
    let (l, waits): (usize, [usize; 2]) = if quick {
        (1000, [10, 20])
    } else {
        (4000, [20, 40])
    };
    let ratios = log_grid(
        1.1,
        if quick { 30.0 } else { 100.0 },
        if quick { 12 } else { 30 },
    );
    let plans: Vec<(usize, Vec<usize>)> = waits
        .iter()
        .map(|&s| {
            let mut ts: Vec<usize> = ratios
                .iter()
                .map(|r| (r * s as f64).round() as usize)
                .filter(|&t| t > s)
                .collect();
            ts.dedup();
            (s, ts)
        })
        .collect();
    let blocks: Vec<String> = (0..samples)
        .into_par_iter()
        .map(|i| sample(seed, i, l, &plans))
        .collect();
    let mut s = String::from("sample,tw,t,h,corr,m,chi_free\n");
    for b in blocks {
        s.push_str(&b);
    }
    s.into_bytes()
}

fn sample(seed: u64, i: usize, l: usize, plans: &[(usize, Vec<usize>)]) -> String {
    let beta = 1.0 / TEMPERATURE;
    let fields: Vec<f64> = AMPLITUDES.iter().flat_map(|&a| [-a, a]).collect();
    let mut rng = replicate_rng(seed, i as u64);
    let eps: Vec<i8> = (0..l)
        .map(|_| if rng.random_bool(0.5) { 1 } else { -1 })
        .collect();
    let mut spin: Vec<i8> = (0..l)
        .map(|_| if rng.random_bool(0.5) { 1 } else { -1 })
        .collect();
    let np = plans.len();
    // Per waiting time: snapshot, field-free accumulators, one twin chain per field.
    let mut snap: Vec<Vec<i8>> = vec![Vec::new(); np];
    let mut acc: Vec<Vec<f64>> = vec![Vec::new(); np];
    let mut twins: Vec<Vec<Vec<i8>>> = vec![Vec::new(); np];
    let end = plans
        .iter()
        .flat_map(|p| p.1.iter().copied())
        .max()
        .unwrap_or(1);
    let stag = |s: &[i8]| {
        s.iter()
            .zip(&eps)
            .map(|(a, e)| i32::from(a * e))
            .sum::<i32>() as f64
            / l as f64
    };
    let id = format!("s{:04}", i + 1);
    let mut out = String::new();
    for sweep in 1..=end {
        for _ in 0..l {
            let k = rng.random_range(0..l);
            let u: f64 = rng.random();
            let (left, right) = ((k + l - 1) % l, (k + 1) % l);
            let hl = f64::from(i32::from(spin[left]) + i32::from(spin[right]));
            let th = (beta * hl).tanh();
            spin[k] = if u < 0.5 * (1.0 + th) { 1 } else { -1 };
            for a in acc.iter_mut().filter(|a| !a.is_empty()) {
                a[k] += f64::from(spin[k]) - th;
            }
            for per_tw in twins.iter_mut() {
                for (f, tw) in per_tw.iter_mut().enumerate() {
                    let h = f64::from(i32::from(tw[left]) + i32::from(tw[right]))
                        + f64::from(eps[k]) * fields[f];
                    tw[k] = if u < 0.5 * (1.0 + (beta * h).tanh()) {
                        1
                    } else {
                        -1
                    };
                }
            }
        }
        for (p, (s, ts)) in plans.iter().enumerate() {
            if sweep == *s {
                snap[p] = spin.clone();
                acc[p] = vec![0.0; l];
                twins[p] = vec![spin.clone(); fields.len()];
                let m0 = stag(&spin);
                let _ = writeln!(out, "{id},{s},{s},0,1,{m0:?},0");
                for h in &fields {
                    let _ = writeln!(out, "{id},{s},{s},{h:?},,{m0:?},");
                }
            } else if ts.binary_search(&sweep).is_ok() {
                let c = spin
                    .iter()
                    .zip(&snap[p])
                    .map(|(a, b)| i32::from(a * b))
                    .sum::<i32>() as f64
                    / l as f64;
                let tchi = spin
                    .iter()
                    .zip(&acc[p])
                    .map(|(a, d)| f64::from(*a) * d)
                    .sum::<f64>()
                    / l as f64;
                let _ = writeln!(
                    out,
                    "{id},{s},{sweep},0,{c:?},{:?},{:?}",
                    stag(&spin),
                    tchi / TEMPERATURE
                );
                for (f, h) in fields.iter().enumerate() {
                    let _ = writeln!(out, "{id},{s},{sweep},{h:?},,{:?},", stag(&twins[p][f]));
                }
            }
        }
    }
    out
}
