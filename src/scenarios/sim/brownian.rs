//! `brownian`: free Brownian motion from the origin; the response to a small force is the
//! perturbed path minus its zero-field twin (same noise). With the later time held fixed,
//! X = 1/2 (Cugliandolo, Kurchan & Parisi, J. Phys. I France 4, 1641 (1994)).

use super::{FIELD, PARTICLES, Row, SimOutput, SimSpec, campaign_csv};
use crate::resample::replicate_rng;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;

const MOBILITY: f64 = 1.0;
const TEMPERATURE: f64 = 1.0;
/// The later times t, each held fixed along one curve.
const TS: [f64; 2] = [100.0, 1000.0];

/// Simulates `brownian`.
pub(super) fn brownian(spec: &SimSpec) -> SimOutput {
    let per_t = if spec.quick { 16 } else { 30 };
    let fractions: Vec<f64> = (0..per_t)
        .map(|k| 0.03 + 0.94 * k as f64 / (per_t - 1) as f64)
        .collect();
    let rows: Vec<Vec<Row>> = (0..spec.samples)
        .into_par_iter()
        .map(|i| sample(spec.seed, i, &fractions))
        .collect();
    SimOutput {
        data: campaign_csv(&rows.concat()),
        truth: json!({
            "scenario": "brownian",
            "fit": "fdtemp fit FILE --temperature 1 --hold t --model line",
            "temperature": TEMPERATURE,
            "ratio": 0.5,
            "t_eff": 2.0 * TEMPERATURE,
            "break": null,
            "source": "Cugliandolo, Kurchan & Parisi, J. Phys. I France 4, 1641 (1994): C(t,s) = 2Ds and T R = D give X = 1/2 with the later time t fixed",
        }),
    }
}

/// Sample `i`: for each later time t, the earlier times s = fraction · t.
fn sample(seed: u64, i: usize, fractions: &[f64]) -> Vec<Row> {
    let mut rng = replicate_rng(seed, i as u64);
    let d = MOBILITY * TEMPERATURE;
    let mut out = Vec::new();
    for &t in &TS {
        // Per particle one path; the earlier times s are points on it.
        let mut times: Vec<f64> = fractions.iter().map(|f| f * t).collect();
        times.push(t);
        let mut sums = vec![[0.0f64; 3]; times.len() - 1];
        for _ in 0..PARTICLES {
            let (mut x, mut now) = (0.0f64, 0.0);
            let mut at = Vec::with_capacity(times.len());
            for &s in &times {
                x += (2.0 * d * (s - now)).sqrt() * rng.sample::<f64, _>(StandardNormal);
                now = s;
                at.push(x);
            }
            let xt = at[at.len() - 1];
            for (k, &s) in times[..times.len() - 1].iter().enumerate() {
                // Perturbed twin: a force FIELD from s to t adds mobility·FIELD·(t − s).
                let twin = xt + MOBILITY * FIELD * (t - s);
                sums[k][0] += xt * at[k];
                sums[k][1] += (twin - xt) / FIELD;
                sums[k][2] += xt * xt;
            }
        }
        let np = PARTICLES as f64;
        for (k, &s) in times[..times.len() - 1].iter().enumerate() {
            out.push((
                i,
                s,
                t,
                sums[k][0] / np,
                sums[k][1] / np,
                Some(sums[k][2] / np),
            ));
        }
    }
    out
}
