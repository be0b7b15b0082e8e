//! The smooth X(C) (`fit --model smooth`) end to end: a user's file, its outputs and
//! messages, and known-truth synthetic campaigns (invented data; the long rates are in
//! `tests/shape_study.rs` and docs/validation.md).

use assert_cmd::Command;
use fdtemp::scenarios::synth::{Shape, SynthSpec, generate};
use fdtemp::twotime::points::Axes;
use fdtemp::twotime::settings::{Constraint, Model};
use fdtemp::twotime::{FitSettings, ShapeVerdict, Silent, analyze};
use predicates::prelude::*;
use std::path::{Path, PathBuf};

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

/// The precise design of the shape study: 48 samples, noise 0.01, X∞ = 0.3 below q = 0.6.
fn precise(shape: Shape) -> SynthSpec {
    SynthSpec {
        ratio: 0.3,
        noise: 0.01,
        shape,
        seed: 4242,
        ..SynthSpec::study(48)
    }
}

fn write(dir: &Path, spec: &SynthSpec) -> PathBuf {
    let c = generate(spec).unwrap();
    let path = dir.join("bent curve.csv");
    std::fs::write(&path, fdtemp::input::write_campaign(&c)).unwrap();
    path
}

fn settings(spec: &SynthSpec, constraint: Constraint) -> FitSettings {
    FitSettings {
        temperature: spec.temperature,
        model: Model::Smooth,
        smooth: Some(constraint),
        resamples: 999,
        axes: Axes::Plain,
        ..FitSettings::default()
    }
}

#[test]
fn a_user_file_gives_the_curve_its_csv_figure_and_json() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(dir.path(), &precise(Shape::Smooth { power: 1.0 }));
    let (csv, svg, json) = (
        dir.path().join("xc.csv"),
        dir.path().join("xc.svg"),
        dir.path().join("fit.json"),
    );
    fdtemp()
        .arg("fit")
        .arg(&file)
        .args(["-T", "0.6", "--model", "smooth", "-B", "400"])
        .arg("--x-of-c")
        .arg(&csv)
        .arg("--plot-x-of-c")
        .arg(&svg)
        .arg("--json")
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "smooth X(C): X non-decreasing in C and at most 1, 1 at the largest C; 95% \
             pointwise percentile bands",
        ))
        .stdout(predicate::str::contains(
            "shape      continuous X(C): the smooth curve fits better than one break (p ≤ 0.002",
        ))
        .stdout(predicate::str::contains("Lawson–Hanson"));
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next(),
        Some("fit,tw,c,x,x_low,x_high,t_eff,t_eff_low,t_eff_high")
    );
    // 41 grid points for the joint fit and for each of the 3 curves.
    assert_eq!(lines.count(), 4 * 41);
    assert!(std::fs::read_to_string(&svg).unwrap().contains("<svg"));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    let shape = &v["fits"][0]["shape"];
    assert_eq!(shape["x_of_c"].as_array().unwrap().len(), 41);
    assert_eq!(shape["verdict"]["kind"], "continuous");
    assert!(shape["x_of_c"][0]["x"]["low"].is_number());
}

#[test]
fn the_smooth_options_need_the_smooth_model_and_write_nothing_without_it() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(dir.path(), &precise(Shape::TwoLines));
    let csv = dir.path().join("xc.csv");
    fdtemp()
        .arg("fit")
        .arg(&file)
        .args(["-T", "0.6", "--x-of-c"])
        .arg(&csv)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--x-of-c shows the smooth X(C): it needs --model smooth",
        ));
    assert!(!csv.exists());
    fdtemp()
        .arg("fit")
        .arg(&file)
        .args(["-T", "0.6", "--smooth-shape", "none"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "--smooth-shape applies only with --model smooth",
        ));
}

/// Known truth X(C) = 0.3 + 0.7 C/q below q = 0.6 (invented): the joint band covers the
/// true curve on at least 90% of the grid, the verdict is continuous and X leaves 1 near
/// the true crossing of 0.95 (C = 0.557).
#[test]
fn a_continuous_truth_is_called_continuous_and_its_band_covers_the_curve() {
    let spec = precise(Shape::Smooth { power: 1.0 });
    let r = analyze(
        &generate(&spec).unwrap(),
        &settings(&spec, Constraint::Monotone),
        None,
        &Silent,
    )
    .unwrap();
    let s = r.fits[0].shape.as_ref().unwrap();
    assert!(matches!(s.verdict, ShapeVerdict::Continuous { .. }));
    let covered = s
        .x_of_c
        .iter()
        .filter(|p| {
            let truth = spec.local_ratio(100.0, p.c);
            p.x.low.unwrap() - 1e-12 <= truth && truth <= p.x.high.unwrap() + 1e-12
        })
        .count();
    assert!(covered * 10 >= 9 * s.x_of_c.len(), "{covered} of 41");
    let star = 0.6 * (0.65 / 0.7);
    let (lo, hi) = (s.leaves_one.low.unwrap(), s.leaves_one.high.unwrap());
    assert!(
        lo - 0.02 < star && star < hi + 0.02,
        "[{lo}, {hi}] against {star}"
    );
}

/// Known truth: one step (X = 0.3 below q = 0.6, invented). Not called continuous, and
/// the smooth curve's X below the break agrees with the one-break X.
#[test]
fn a_one_step_truth_is_not_called_continuous() {
    let spec = precise(Shape::TwoLines);
    let r = analyze(
        &generate(&spec).unwrap(),
        &settings(&spec, Constraint::Monotone),
        None,
        &Silent,
    )
    .unwrap();
    let s = r.fits[0].shape.as_ref().unwrap();
    assert!(!matches!(s.verdict, ShapeVerdict::Continuous { .. }));
    assert!(s.test.p > 0.05);
    let mid = s.x_of_c.iter().find(|p| p.c > 0.3).unwrap();
    assert!((mid.x.estimate.unwrap() - 0.3).abs() < 0.03);
    // Without a continuous shape, where X leaves 1 is not given an interval.
    assert!(s.leaves_one.low.is_none() && s.leaves_one.note.is_some());
}

/// X above 1 below the break (a response stronger than equilibrium, invented truth
/// X = 1.4): the monotone curve cannot show it, the unconstrained one reports it.
#[test]
fn the_unconstrained_curve_reports_x_above_one_and_the_monotone_one_stays_at_most_one() {
    let spec = SynthSpec {
        ratio: 1.4,
        ..precise(Shape::TwoLines)
    };
    let c = generate(&spec).unwrap();
    let free = analyze(&c, &settings(&spec, Constraint::None), None, &Silent).unwrap();
    let s = free.fits[0].shape.as_ref().unwrap();
    let [_, x] = s.x_above_one.expect("X above 1 is reported");
    assert!(x > 1.2, "{x}");
    let text = String::from_utf8(fdtemp::report::text::render(&free)).unwrap();
    assert!(text.contains("X(C) exceeds 1 beyond its band"));
    let mono = analyze(&c, &settings(&spec, Constraint::Monotone), None, &Silent).unwrap();
    let s = mono.fits[0].shape.as_ref().unwrap();
    assert!(
        s.x_of_c
            .iter()
            .all(|p| p.x.estimate.unwrap() <= 1.0 + 1e-12)
    );
    assert!(s.x_above_one.is_none());
}

/// A small CI-sized check of the verdict's rates (the full table is in docs/validation.md):
/// of 20 one-step campaigns at the standard design (20 samples, noise 0.03) at most 4 are
/// called continuous (the test's level is 5%: P(more than 4 of 20) = 0.016 at that level),
/// and none of 8 continuous campaigns at the standard design is called one step.
#[test]
fn the_verdict_calls_one_step_continuous_rarely_and_continuous_one_step_never() {
    let standard = |shape, k: u64| SynthSpec {
        ratio: 0.3,
        shape,
        seed: 9100 + k,
        ..SynthSpec::study(20)
    };
    let verdict = |spec: &SynthSpec| {
        let mut s = settings(spec, Constraint::Monotone);
        s.resamples = 399;
        let r = analyze(&generate(spec).unwrap(), &s, None, &Silent).unwrap();
        r.fits[0].shape.as_ref().unwrap().verdict.clone()
    };
    let called_continuous = (0..20)
        .filter(|&k| {
            matches!(
                verdict(&standard(Shape::TwoLines, k)),
                ShapeVerdict::Continuous { .. }
            )
        })
        .count();
    assert!(called_continuous <= 4, "{called_continuous} of 20");
    for k in 0..8 {
        let v = verdict(&standard(Shape::Smooth { power: 1.0 }, 100 + k));
        assert!(
            !matches!(v, ShapeVerdict::OneStep { .. }),
            "campaign {k}: {v:?}"
        );
    }
}

/// Samples of an overlap distribution whose x(q) is known, at the quantiles (no noise):
/// a fraction `at_zero` at q = 0, the rest uniform on [0, q_max] or all at q_max.
fn overlap_samples(dir: &Path, name: &str, at_zero: f64, q_max: f64, uniform: bool) -> PathBuf {
    let n = 4000;
    let mut text = String::from("q\n");
    for i in 0..n {
        let u = (i as f64 + 0.5) / n as f64;
        let q = if u < at_zero {
            0.0
        } else if uniform {
            q_max * (u - at_zero) / (1.0 - at_zero)
        } else {
            q_max
        };
        // Zero-field overlaps come in ± pairs; the sign is folded away.
        let q = if i % 2 == 0 { q } else { -q };
        text.push_str(&format!("{q}\n"));
    }
    let path = dir.join(name);
    std::fs::write(&path, text).unwrap();
    path
}

/// The static–dynamic comparison: X(C) = 0.3 + 0.7 C/0.6 below 0.6 (invented truth) is the
/// x(q) of P(q) = 0.3 δ(q) + 0.7 uniform on [0, 0.6] (x(q) = ∫₀^q P, Franz, Mézard, Parisi
/// & Peliti, Phys. Rev. Lett. 81, 1758 (1998)); the matching P(q) is found inside the band
/// with a mean difference whose interval holds 0, a one-step P(q) is not.
#[test]
fn a_matching_overlap_distribution_agrees_and_a_wrong_one_does_not() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(dir.path(), &precise(Shape::Smooth { power: 1.0 }));
    let matching = overlap_samples(dir.path(), "pq.csv", 0.3, 0.6, true);
    let wrong = overlap_samples(dir.path(), "pq_step.csv", 0.3, 0.6, false);
    let run = |pq: &Path, json: &str| -> serde_json::Value {
        let out = dir.path().join(json);
        fdtemp()
            .arg("fit")
            .arg(&file)
            .args(["-T", "0.6", "--model", "smooth", "-B", "999", "--overlap"])
            .arg(pq)
            .arg("--json")
            .arg(&out)
            .assert()
            .success()
            .stdout(predicate::str::contains(
                "static     x(q) from the overlap samples (negative q folded onto |q|)",
            ));
        serde_json::from_slice(&std::fs::read(&out).unwrap()).unwrap()
    };
    let good = run(&matching, "good.json");
    let s = &good["fits"][0]["shape"]["static_comparison"];
    let (lo, hi) = (
        s["mean_difference"]["low"].as_f64().unwrap(),
        s["mean_difference"]["high"].as_f64().unwrap(),
    );
    assert!(lo <= 0.0 && 0.0 <= hi, "[{lo}, {hi}]");
    assert!(s["inside_band"].as_u64().unwrap() >= 37, "{s}");
    let bad = run(&wrong, "bad.json");
    let s = &bad["fits"][0]["shape"]["static_comparison"];
    assert!(s["mean_difference"]["low"].as_f64().unwrap() > 0.05, "{s}");
}

#[test]
fn a_bad_overlap_file_names_its_line_and_column_and_writes_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let file = write(dir.path(), &precise(Shape::Smooth { power: 1.0 }));
    let pq = dir.path().join("pq.csv");
    std::fs::write(&pq, "q,p\n0.1,2\n0.2,oops\n").unwrap();
    let json = dir.path().join("fit.json");
    fdtemp()
        .arg("fit")
        .arg(&file)
        .args(["-T", "0.6", "--model", "smooth", "--overlap"])
        .arg(&pq)
        .arg("--json")
        .arg(&json)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "pq.csv:3:2: p is \"oops\", expected a finite number",
        ));
    assert!(!json.exists());
}

/// The smooth curve sets X = 1 at the largest C, so a missing equilibrium branch (the fit
/// stopped below the plateau) or a tilted one (a temperature 15% off) also rejects one
/// break; neither may be called continuous. `synth two-baths` (X = 0.4 below q = 0.5).
#[test]
fn an_imposed_top_is_not_read_as_a_continuous_shape() {
    let dir = tempfile::tempdir().unwrap();
    let tb = dir.path().join("tb.csv");
    fdtemp()
        .args(["synth", "two-baths", "--samples", "200", "--out"])
        .arg(&tb)
        .assert()
        .success();
    for (args, why) in [
        (
            &["-T", "1", "--range=-0.1:0.45"][..],
            "but the one-break fit's break sits at the edge of the points",
        ),
        // A thermometer 15% or 4% low: the points above where the smooth X leaves 1 are too
        // few, or do not show X within 1 ± 0.02.
        (&["-T", "0.85"][..], "points above where X leaves 1"),
        (
            &["-T", "0.96"][..],
            "but the points above where X leaves 1 have X = ",
        ),
    ] {
        fdtemp()
            .arg("fit")
            .arg(&tb)
            .args(args)
            .args(["--model", "smooth", "-B", "400"])
            .assert()
            .success()
            .stdout(predicate::str::contains(
                "shape      undecided at this precision: one break is rejected by the smooth \
                 curve, but ",
            ))
            .stdout(predicate::str::contains(why))
            .stdout(predicate::str::contains(
                "so there it is imposed, not measured",
            ))
            .stdout(predicate::str::contains("continuous X(C):").not());
    }
}

/// The T = 0 Glauber–Ising chain at fixed later time t: X(C) = (1 + v)/2 with
/// C = (2/π) arctan √(2v/(1 − v)), v = s/t. Source: Godrèche & Luck, J. Phys. A 33, 1151
/// (2000) (the scaling forms of C and T·chi; X is their ratio of derivatives). The chain is
/// simulated at T = 0.25 (ξ ≈ 1500 sites, so t = 2000 and 4000 sweeps are in the scaling
/// regime) with the field-free response; the joint band must cover the exact curve on at
/// least 90% of the grid. The largest-C grid point is X = 1 by the model's construction
/// (the truth there is 0.995), so 40 of 41 is the most it can reach.
#[test]
fn the_glauber_chain_at_fixed_t_gives_the_exact_continuous_x_of_c() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("chain.csv");
    fdtemp()
        .args([
            "synth",
            "ising-chain",
            "--hold",
            "t",
            "--samples",
            "100",
            "--out",
        ])
        .arg(&data)
        .assert()
        .success();
    let curve = dir.path().join("x.csv");
    fdtemp()
        .arg("fit")
        .arg(&data)
        .args([
            "-T", "0.25", "--hold", "t", "--axes", "plain", "--model", "smooth",
        ])
        .args(["-B", "999", "--x-of-c"])
        .arg(&curve)
        .assert()
        .success();
    let text = std::fs::read_to_string(&curve).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| head.iter().position(|h| *h == name).unwrap();
    let (c, lo, hi) = (col("c"), col("x_low"), col("x_high"));
    let (mut covered, mut points) = (0, 0);
    for l in lines.filter(|l| l.starts_with("all,")) {
        let f: Vec<f64> = l
            .split(',')
            .map(|v| v.parse().unwrap_or(f64::NAN))
            .collect();
        let truth = fdtemp::scenarios::sim::ratio_at_fixed_t(f[c]);
        points += 1;
        covered += usize::from(f[lo] - 1e-9 <= truth && truth <= f[hi] + 1e-9);
    }
    assert_eq!(points, 41);
    assert!(covered * 10 >= points * 9, "covered {covered} of {points}");
}
