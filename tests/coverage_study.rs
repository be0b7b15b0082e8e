//! Long statistical studies, ignored in CI. Run with:
//!
//!     cargo test --release --test coverage_study -- --ignored --nocapture
//!
//! Over many synthetic campaigns with a known X (invented data, `fdtemp::synth`), count how
//! often each interval method's 95% interval contains the truth.

use fdtemp::FitSettings;
use fdtemp::analysis::{Silent, analyze};
use fdtemp::resample::IntervalMethod;
use fdtemp::synth::{SynthSpec, generate};

fn coverage(samples: usize, campaigns: u64) -> Vec<(IntervalMethod, f64, f64, f64)> {
    let methods = [
        IntervalMethod::Percentile,
        IntervalMethod::Basic,
        IntervalMethod::Bca,
    ];
    let mut hits = [[0usize; 3]; 3]; // method × (X, q, slope above q)
    for seed in 0..campaigns {
        let spec = SynthSpec {
            samples,
            seed: 10_000 + seed,
            ..SynthSpec::default()
        };
        let c = generate(&spec).unwrap();
        for (m, method) in methods.iter().enumerate() {
            let s = FitSettings {
                temperature: spec.temperature,
                resamples: 2000,
                seed,
                interval: *method,
                ..FitSettings::default()
            };
            let f = analyze(&c, &s, None, &Silent).unwrap().fits.remove(0);
            let inside = |e: &fdtemp::analysis::Estimate, v: f64| matches!((e.low, e.high), (Some(lo), Some(hi)) if lo <= v && v <= hi);
            hits[m][0] += usize::from(inside(&f.ratio, spec.ratio));
            hits[m][1] += usize::from(inside(&f.brk, spec.plateau));
            hits[m][2] += usize::from(inside(&f.fast_slope, -1.0));
        }
    }
    let n = campaigns as f64;
    methods
        .iter()
        .zip(hits)
        .map(|(m, h)| (*m, h[0] as f64 / n, h[1] as f64 / n, h[2] as f64 / n))
        .collect()
}

#[test]
#[ignore = "long statistical study; see the module header for the command"]
fn coverage_of_95_percent_intervals_on_two_line_campaigns() {
    for samples in [20, 40, 200] {
        println!("samples = {samples}, 200 campaigns, B = 2000");
        println!("  method      X       q       slope above q = -1");
        for (m, x, q, s) in coverage(samples, 200) {
            println!("  {:<10} {:.3}   {:.3}   {:.3}", m.label(), x, q, s);
        }
    }
}
