//! Long statistical studies, ignored in CI. Run with:
//!
//!     cargo test --release --test coverage_study -- --ignored --nocapture
//!
//! Over many synthetic campaigns with a known X (invented data, `fdtemp::scenarios::synth`),
//! count how often each interval method's 95% interval contains the truth.

use fdtemp::FitSettings;
use fdtemp::resample::IntervalMethod;
use fdtemp::scenarios::synth::{SynthSpec, generate};
use fdtemp::twotime::{Silent, analyze};

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
            let inside = |e: &fdtemp::twotime::Estimate, v: f64| matches!((e.low, e.high), (Some(lo), Some(hi)) if lo <= v && v <= hi);
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

#[test]
#[ignore = "long statistical study; see the module header for the command"]
fn coverage_of_band_averages_from_welch_records() {
    use fdtemp::spectral::analysis::SpectrumSettings;
    use fdtemp::spectral::input::{SpectrumGroup, Window};
    use fdtemp::spectral::welch::{Welch, WelchSettings};
    use fdtemp::spectral::{Convention, analyze_spectra};
    use rand::RngExt;
    let trials = 2000;
    let mut hits = [0usize; 2];
    let mut per_freq = (0usize, 0usize);
    for seed in 0..trials {
        let mut w = Welch::new(WelchSettings {
            sample_rate: 1.0,
            segment: 64,
            overlap: 32,
        })
        .unwrap();
        let mut rng = fdtemp::resample::replicate_rng(90_000 + seed, 0);
        for _ in 0..(64 * 40) {
            let z: f64 = rng.sample(rand_distr::StandardNormal);
            w.push(z * 0.5f64.sqrt());
        }
        let p = w.finish().unwrap();
        let keep: Vec<usize> = (2..p.freqs.len() - 1).collect();
        let g = SpectrumGroup {
            tw: None,
            runs: vec![String::new()],
            freqs: keep.iter().map(|&j| p.freqs[j]).collect(),
            psd: ndarray::Array2::from_shape_fn((1, keep.len()), |(_, j)| p.psd[keep[j]]),
            loss: ndarray::Array2::from_elem((1, keep.len()), 0.25),
            dof: Some(ndarray::Array2::from_shape_fn((1, keep.len()), |(_, j)| {
                p.dof[keep[j]]
            })),
        };
        let s = SpectrumSettings {
            units: fdtemp::common::Units::Reduced,
            convention: Convention::Voltage,
            ..SpectrumSettings::default()
        };
        for (i, window) in [Window::Hann, Window::None].iter().enumerate() {
            let r =
                analyze_spectra(std::slice::from_ref(&g), &window.bin_rho2(), &s, None).unwrap();
            let b = r.band.unwrap().t_eff;
            hits[i] += usize::from(b.low.unwrap() <= 1.0 && 1.0 <= b.high.unwrap());
            if i == 0 {
                for q in &r.points {
                    per_freq.1 += 1;
                    per_freq.0 += usize::from(q.low.unwrap() <= 1.0 && 1.0 <= q.high.unwrap());
                }
            }
        }
    }
    let n = trials as f64;
    println!(
        "white records through Welch (Hann, L = 64, 50% overlap, 39 segments), {trials} records"
    );
    println!(
        "  per-frequency 95% chi-square intervals: coverage {:.4}",
        per_freq.0 as f64 / per_freq.1 as f64
    );
    println!(
        "  band average, Hann bin correlation:     coverage {:.4}",
        hits[0] as f64 / n
    );
    println!(
        "  band average, bins taken as independent: coverage {:.4}",
        hits[1] as f64 / n
    );
}

#[test]
#[ignore = "long statistical study; see the module header for the command"]
fn coverage_on_simulated_two_bath_campaigns() {
    use fdtemp::scenarios::sim::{Scenario, SimSpec, simulate};
    let methods = [
        IntervalMethod::Percentile,
        IntervalMethod::Basic,
        IntervalMethod::Bca,
    ];
    let campaigns = 200u64;
    println!("two-baths (simulated), 95% intervals, B = 2000, {campaigns} campaigns per row");
    println!("  samples  method      X       T_eff   q");
    for samples in [20usize, 200] {
        let mut hits = [[0usize; 3]; 3];
        for seed in 0..campaigns {
            let sim = simulate(&SimSpec {
                scenario: Scenario::TwoBaths,
                samples,
                seed: 50_000 + seed,
                quick: false,
                hold: fdtemp::twotime::settings::Hold::Tw,
            })
            .unwrap();
            let c = fdtemp::input::tidy::parse_campaign(
                sim.data.as_slice(),
                std::path::Path::new("sim.csv"),
                &Default::default(),
            )
            .unwrap();
            let truth = [
                sim.truth["ratio"].as_f64().unwrap(),
                sim.truth["t_eff"].as_f64().unwrap(),
                sim.truth["break"].as_f64().unwrap(),
            ];
            for (m, method) in methods.iter().enumerate() {
                let s = FitSettings {
                    temperature: 1.0,
                    resamples: 2000,
                    seed,
                    interval: *method,
                    ..FitSettings::default()
                };
                let f = analyze(&c, &s, None, &Silent).unwrap().fits.remove(0);
                for (k, e) in [&f.ratio, &f.t_eff, &f.brk].iter().enumerate() {
                    let inside = matches!((e.low, e.high), (Some(lo), Some(hi)) if lo <= truth[k] && truth[k] <= hi);
                    hits[m][k] += usize::from(inside);
                }
            }
        }
        for (m, method) in methods.iter().enumerate() {
            let c = |k: usize| hits[m][k] as f64 / campaigns as f64;
            println!(
                "  {samples:>7}  {:<10} {:.3}   {:.3}   {:.3}",
                method.label(),
                c(0),
                c(1),
                c(2)
            );
        }
    }
}
