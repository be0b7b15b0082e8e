//! The long-age limit (`fit --limit`) and the settled/drifting verdict of the aging trend.
//!
//! Every campaign is invented data with a built-in answer (`fdtemp::scenarios::synth`):
//! two lines whose lower slope approaches its long-age value as `X(tw) = X∞ + A·tw^−α`, so
//! that at fixed C the curve is `y∞(C) + A (q − C)·tw^−α`, the model `--limit` fits.
//! The ignored study measures coverage over many campaigns:
//! `cargo test --release --test age_limit -- --ignored --nocapture`
//! (`FDTEMP_LIMIT_CAMPAIGNS`, default 200; `FDTEMP_LIMIT_SAMPLES`, default 40).

use assert_cmd::Command;
use fdtemp::FitSettings;
use fdtemp::common::Estimate;
use fdtemp::scenarios::synth::{SynthSpec, generate};
use fdtemp::twotime::result::{AgeLimit, Settling};
use fdtemp::twotime::{FitReport, Silent, analyze};
use predicates::prelude::*;

/// Five waiting times, X(tw) = x_inf + a·tw^−0.5 below q = 0.6, T = 0.6.
fn approach(samples: usize, seed: u64, x_inf: f64, a: f64) -> SynthSpec {
    SynthSpec {
        samples,
        seed,
        waiting_times: vec![30.0, 100.0, 300.0, 1000.0, 3000.0],
        points_per_tw: 20,
        ratio: x_inf,
        noise: 0.01,
        approach: Some([a, 0.5]),
        ..SynthSpec::default()
    }
}

fn fit(spec: &SynthSpec, resamples: usize, seed: u64) -> FitReport {
    let c = generate(spec).unwrap();
    let s = FitSettings {
        temperature: spec.temperature,
        resamples,
        seed,
        limit: true,
        ..FitSettings::default()
    };
    analyze(&c, &s, None, &Silent).unwrap()
}

fn limit(r: &FitReport) -> &AgeLimit {
    r.age_limit.as_ref().unwrap().as_ref().unwrap()
}

fn covers(e: &Estimate, v: f64) -> bool {
    matches!((e.low, e.high), (Some(lo), Some(hi)) if lo <= v && v <= hi)
}

#[test]
fn a_known_approach_is_extrapolated_to_its_limit_and_exponent() {
    // Invented truth: X∞ = 0.3, α = 0.5; the finite-age slopes run from 0.85 (tw = 30) to
    // 0.35 (tw = 3000), so no single curve shows X∞.
    let r = fit(&approach(40, 11, 0.3, 3.0), 399, 1);
    let l = limit(&r);
    let x = l.x_inf.estimate.unwrap();
    let alpha = l.alpha.estimate.unwrap();
    assert!((x - 0.3).abs() < 0.05, "X∞ = {x}");
    assert!((alpha - 0.5).abs() < 0.15, "α = {alpha}");
    assert!(covers(&l.x_inf, 0.3), "{:?}", l.x_inf);
    assert!(!l.alpha_unresolved);
    // Every per-curve X lies above the limit: the oldest is 0.35.
    let oldest = r.fits.last().unwrap().ratio.estimate.unwrap();
    assert!(oldest > 0.32, "{oldest}");
    // The trend says X still drifts.
    assert_eq!(r.aging.as_ref().unwrap().settling, Settling::Drifting);
}

#[test]
fn a_coarsening_like_set_extrapolates_to_a_limit_consistent_with_zero() {
    // Invented truth: X∞ = 0 (coarsening) while every finite-age curve has a slope
    // (0.55 at tw = 30 down to 0.05 at tw = 3000).
    let r = fit(&approach(40, 12, 0.0, 3.0), 399, 2);
    let l = limit(&r);
    assert!(covers(&l.x_inf, 0.0), "{:?}", l.x_inf);
    assert!(
        r.fits
            .iter()
            .skip(1)
            .all(|f| f.ratio.estimate.unwrap() > 0.0)
    );
    let text = String::from_utf8(fdtemp::report::text::render(&r)).unwrap();
    assert!(
        text.contains("X∞'s interval reaches 0: T_eff∞ has no upper bound"),
        "{text}"
    );
    assert!(text.contains("limit      tw → ∞ at fixed C over tw = 30, 100, 300, 1000, 3000"));
    // The caution is a typed finding with its code in the JSON.
    assert!(
        r.cautions
            .iter()
            .any(|c| matches!(c.finding, fdtemp::twotime::Finding::LimitUnbounded))
    );
    let json = String::from_utf8(fdtemp::report::json::fit_json(&r)).unwrap();
    assert!(json.contains("\"code\": \"limit_unbounded\""), "{json}");
}

#[test]
fn x_that_does_not_age_is_called_settled_and_x_that_ages_fast_drifting() {
    // Invented: no aging at all, precise data → the change per decade is inside ±0.05.
    let still = SynthSpec {
        samples: 80,
        noise: 0.005,
        seed: 5,
        ..SynthSpec::default()
    };
    let r = fit(&still, 399, 3);
    let a = r.aging.as_ref().unwrap();
    assert_eq!(a.settling, Settling::Settled, "{a:?}");
    let aging = SynthSpec {
        ratio_per_decade: 0.15,
        ..still
    };
    let r = fit(&aging, 399, 3);
    assert_eq!(r.aging.as_ref().unwrap().settling, Settling::Drifting);
}

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

#[test]
fn the_command_line_refuses_a_limit_it_cannot_form_and_writes_it_in_json() {
    let dir = tempfile::tempdir().unwrap();
    let two = dir.path().join("two.csv");
    let c = generate(&SynthSpec {
        samples: 10,
        waiting_times: vec![100.0, 1000.0],
        points_per_tw: 12,
        ..SynthSpec::default()
    })
    .unwrap();
    std::fs::write(&two, fdtemp::input::tidy::write_campaign(&c)).unwrap();
    let json = dir.path().join("fit.json");
    fdtemp()
        .arg("fit")
        .arg(&two)
        .args(["-T", "0.6", "-B", "199", "--limit", "--json"])
        .arg(&json)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--limit needs at least 3 waiting times (two unknowns per value of C), the campaign has 2",
        ));
    assert!(!json.exists(), "no partial output");
    let five = dir.path().join("five.csv");
    let campaign = generate(&approach(12, 4, 0.3, 3.0)).unwrap();
    std::fs::write(&five, fdtemp::input::tidy::write_campaign(&campaign)).unwrap();
    fdtemp()
        .arg("fit")
        .arg(&five)
        .args(["-T", "0.6", "-B", "199", "--limit", "--hold", "t"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains("cannot be used with --hold t"));
    fdtemp()
        .arg("fit")
        .arg(&five)
        .args(["-T", "0.6", "-B", "199", "--limit", "--json"])
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains("limit      tw → ∞ at fixed C"))
        .stdout(predicate::str::contains(
            "it is neither a fixed-tw slope nor the two-time ratio",
        ));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    let l = &v["age_limit"];
    assert!(l["x_inf"]["estimate"].is_f64(), "{l}");
    assert!(l["alpha"]["low"].is_f64());
    assert_eq!(l["points"].as_array().unwrap().len(), 16);
    assert_eq!(v["settings"]["limit"], true);
}

fn env_usize(name: &str, default: usize) -> usize {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

fn rate(k: usize, n: usize) -> String {
    let p = k as f64 / n.max(1) as f64;
    format!(
        "{p:.3} ± {:.3} ({k}/{n})",
        (p * (1.0 - p) / n.max(1) as f64).sqrt()
    )
}

/// Coverage of X∞ and α, the coarsening-like set, and the settled verdict's level.
#[test]
#[ignore]
fn limit_and_settling_study() {
    let campaigns = env_usize("FDTEMP_LIMIT_CAMPAIGNS", 200);
    let samples = env_usize("FDTEMP_LIMIT_SAMPLES", 40);
    for (name, x_inf) in [("approach X∞ = 0.3", 0.3), ("coarsening-like X∞ = 0", 0.0)] {
        let (mut cx, mut ca, mut unresolved, mut n) = (0, 0, 0, 0);
        let (mut mean, mut mean_alpha, mut alpha_low) = (0.0, 0.0, 0);
        for k in 0..campaigns {
            let r = fit(
                &approach(samples, 30_000 + k as u64, x_inf, 3.0),
                999,
                k as u64,
            );
            let Some(Ok(l)) = r.age_limit.as_ref() else {
                continue;
            };
            n += 1;
            cx += usize::from(covers(&l.x_inf, x_inf));
            ca += usize::from(covers(&l.alpha, 0.5));
            unresolved += usize::from(l.alpha_unresolved);
            mean += l.x_inf.estimate.unwrap_or(f64::NAN);
            mean_alpha += l.alpha.estimate.unwrap_or(f64::NAN);
            alpha_low += usize::from(l.alpha.high.is_some_and(|h| h < 0.5));
        }
        println!(
            "{name}, {samples} samples: X∞ covered {}, α covered {} (interval below the truth in \
             {alpha_low}), α unresolved {}, mean X∞ {:.4}, mean α {:.4}",
            rate(cx, n),
            rate(ca, n),
            rate(unresolved, n),
            mean / n as f64,
            mean_alpha / n as f64
        );
    }
    // The settled verdict where X changes by exactly the margin (0.05 per decade): it must
    // be said in at most 5% of campaigns (the test's level); and its power where X is still.
    for (name, per_decade) in [("change = margin 0.05/decade", 0.05), ("no change", 0.0)] {
        let mut settled = 0;
        for k in 0..campaigns {
            let spec = SynthSpec {
                samples,
                seed: 40_000 + k as u64,
                ratio_per_decade: per_decade,
                ..SynthSpec::study(samples)
            };
            let r = fit(&spec, 999, k as u64);
            settled += usize::from(
                r.aging
                    .as_ref()
                    .is_some_and(|a| a.settling == Settling::Settled),
            );
        }
        println!(
            "settled within ±0.05 said, {name}, {samples} samples (study design): {}",
            rate(settled, campaigns)
        );
    }
}
