//! `resistor`: Johnson–Nyquist noise records of a resistor, white with one-sided PSD 4kTR
//! (Nyquist, Phys. Rev. 32, 110 (1928)), for `noise`.

use super::{SimOutput, SimSpec};
use crate::common::BOLTZMANN_SI;
use crate::resample::replicate_rng;
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde_json::json;

/// Simulates `resistor`: one column per record.
pub(super) fn resistor(spec: &SimSpec) -> SimOutput {
    let (temperature, resistance, rate) = (300.0, 1000.0, 1e4);
    let n = if spec.quick { 1 << 16 } else { 1 << 20 };
    let sd = (4.0 * BOLTZMANN_SI * temperature * resistance * rate / 2.0).sqrt();
    let columns: Vec<Vec<f64>> = (0..spec.samples)
        .into_par_iter()
        .map(|r| {
            let mut rng = replicate_rng(spec.seed, r as u64);
            (0..n)
                .map(|_| sd * rng.sample::<f64, _>(StandardNormal))
                .collect()
        })
        .collect();
    let mut s = (1..=spec.samples)
        .map(|r| format!("run{r:02}"))
        .collect::<Vec<_>>()
        .join(",");
    s.push('\n');
    for k in 0..n {
        let line: Vec<String> = columns.iter().map(|c| format!("{:e}", c[k])).collect();
        s.push_str(&line.join(","));
        s.push('\n');
    }
    SimOutput {
        data: s.into_bytes(),
        truth: json!({
            "scenario": "resistor",
            "fit": "fdtemp noise FILE --sample-rate 10000 --resistance 1000 --temperature 300",
            "temperature": temperature,
            "resistance_ohm": resistance,
            "sample_rate_hz": rate,
            "t_eff": temperature,
            "source": "Nyquist, Phys. Rev. 32, 110 (1928): one-sided voltage noise 4 k T R (white); 1 kOhm at 300 K gives 4.0704 nV/sqrt(Hz)",
        }),
    }
}
