//! (ignored) The lack-of-fit test over many independent synthetic campaigns (invented
//! data, known truth; `fdtemp::scenarios::synth`, the design of `tests/calibration.rs`:
//! 3 waiting times × 20 points, noise growing as C decays, C–χ noise correlation −0.4,
//! AR(1) correlation 0.8 along t). False alarms where the model is true (line, broken;
//! uniform and inverse-variance weights; 10, 20, 48 samples), and power on a curved truth
//! (slope −1 above q = 0.6, then X(C) = 0.3 + 0.7 C/q rising gradually to 1 at q) at the
//! standard design (20 samples, noise 0.03) and a precise one (48 samples, noise 0.01).
//! Prints one Markdown row per case: rate ± binomial SD sqrt(p(1 − p)/N).
//!
//! ```sh
//! RAYON_NUM_THREADS=2 cargo test --release --test lack_of_fit_study -- --ignored --nocapture
//! FDTEMP_LOF_CAMPAIGNS=1000 FDTEMP_LOF_B=399 RAYON_NUM_THREADS=2 \
//!   cargo test --release --test lack_of_fit_study -- --ignored --nocapture
//! ```

use fdtemp::FitSettings;
use fdtemp::scenarios::synth::{Shape, SynthSpec, generate};
use fdtemp::twotime::settings::{Model, Weighting};
use fdtemp::twotime::{Finding, FitReport, Silent, analyze};

fn env(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn design(samples: usize) -> SynthSpec {
    SynthSpec {
        samples,
        points_per_tw: 20,
        noise_growth: 2.0,
        cross: -0.4,
        along_t: 0.8,
        ..SynthSpec::default()
    }
}

struct Rates {
    joint: usize,
    any_curve: usize,
    curve_tests: usize,
    curve_at_alpha: usize,
    campaigns: usize,
}

fn run(spec: &SynthSpec, model: Model, weights: Weighting, campaigns: usize, b: usize) -> Rates {
    let mut r = Rates {
        joint: 0,
        any_curve: 0,
        curve_tests: 0,
        curve_at_alpha: 0,
        campaigns,
    };
    for k in 0..campaigns {
        let spec = SynthSpec {
            seed: 500_000 + k as u64,
            ..spec.clone()
        };
        let c = generate(&spec).unwrap();
        let s = FitSettings {
            temperature: spec.temperature,
            resamples: b,
            seed: 7 + k as u64,
            weights,
            model,
            ..FitSettings::default()
        };
        let rep: FitReport = analyze(&c, &s, None, &Silent).unwrap();
        let flagged = |f: &fdtemp::twotime::GroupFit| {
            f.cautions
                .iter()
                .any(|c| matches!(c.finding, Finding::LackOfFit { .. }))
        };
        r.joint += usize::from(flagged(&rep.fits[0]));
        r.any_curve += usize::from(rep.fits[1..].iter().any(flagged));
        for f in &rep.fits[1..] {
            if let Some(p) = f.lack_of_fit_p {
                r.curve_tests += 1;
                r.curve_at_alpha += usize::from(p <= 0.05);
            }
        }
    }
    r
}

fn rate(k: usize, n: usize) -> String {
    let p = k as f64 / n.max(1) as f64;
    format!("{p:.3} ± {:.3}", (p * (1.0 - p) / n.max(1) as f64).sqrt())
}

#[test]
#[ignore = "long: the lack-of-fit calibration table (docs/validation.md)"]
fn lack_of_fit_false_alarms_and_power() {
    let campaigns = env("FDTEMP_LOF_CAMPAIGNS", 200);
    let b = env("FDTEMP_LOF_B", 199);
    println!(
        "| truth | model | weights | samples | campaigns | joint p ≤ 0.05 | any curve p ≤ 0.05/3 | per-curve p ≤ 0.05 (curves) |"
    );
    println!("|---|---|---|---|---|---|---|---|");
    let single_line = |n| SynthSpec {
        ratio: 0.5,
        plateau: 1.0,
        ..design(n)
    };
    let curved = |n, noise| SynthSpec {
        ratio: 0.3,
        noise,
        shape: Shape::Smooth { power: 1.0 },
        ..design(n)
    };
    let mut cases: Vec<(String, SynthSpec, Model, Weighting)> = Vec::new();
    for n in [10, 20, 48] {
        for w in [Weighting::Uniform, Weighting::InverseVariance] {
            cases.push((
                "two lines X = 0.45, q = 0.6".into(),
                design(n),
                Model::Broken,
                w,
            ));
            cases.push(("single line X = 0.5".into(), single_line(n), Model::Line, w));
        }
    }
    for w in [Weighting::InverseVariance, Weighting::Uniform] {
        cases.push((
            "curved X(C) = 0.3 + 0.7 C/q, noise 0.03".into(),
            curved(20, 0.03),
            Model::Broken,
            w,
        ));
        cases.push((
            "curved X(C) = 0.3 + 0.7 C/q, noise 0.01".into(),
            curved(48, 0.01),
            Model::Broken,
            w,
        ));
    }
    for (label, spec, model, w) in cases {
        let r = run(&spec, model, w, campaigns, b);
        let wl = match w {
            Weighting::Uniform => "uniform",
            Weighting::InverseVariance => "IV",
        };
        println!(
            "| {label} | {model:?} | {wl} | {} | {} | {} | {} | {} ({}) |",
            spec.samples,
            r.campaigns,
            rate(r.joint, r.campaigns),
            rate(r.any_curve, r.campaigns),
            rate(r.curve_at_alpha, r.curve_tests),
            r.curve_tests
        );
    }
}
