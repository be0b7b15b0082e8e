//! `two-lines`: the invented two-line campaign of [`crate::scenarios::synth`] (not a
//! simulation), in the size the benchmarks use.

use super::{SimOutput, SimSpec};
use crate::error::Result;
use crate::scenarios::synth::{SynthSpec, generate};
use serde_json::json;

/// Generates `two-lines`.
pub(super) fn two_lines(spec: &SimSpec) -> Result<SimOutput> {
    let base = SynthSpec::default();
    let synth = SynthSpec {
        samples: spec.samples,
        seed: spec.seed,
        waiting_times: if spec.quick {
            base.waiting_times.clone()
        } else {
            (0..12).map(|k| 100.0 * 2f64.powi(k)).collect()
        },
        points_per_tw: if spec.quick { 40 } else { 100 },
        ..base
    };
    let campaign = generate(&synth)?;
    Ok(SimOutput {
        data: crate::input::write_campaign(&campaign),
        truth: json!({
            "scenario": "two-lines",
            "fit": "fdtemp fit FILE --temperature 0.6",
            "temperature": synth.temperature,
            "ratio": synth.ratio,
            "t_eff": synth.temperature / synth.ratio,
            "break": synth.plateau,
            "source": "invented: the sample means lie on the broken stick by construction (fdtemp::scenarios::synth)",
        }),
    })
}
