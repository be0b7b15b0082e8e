//! `fdtemp reduce`: raw twin runs reduced to a campaign, checked against closed forms and
//! known-truth nonlinear responses; the linear-response test's false-alarm rate (ignored
//! study); bad inputs with their exact messages.

use assert_cmd::Command;
use fdtemp::reduce::twin::{Combine, TwinRuns, TwinSettings, parse_twins, reduce_twins};
use fdtemp::scenarios::sim::twins::{TwinSpec, exact_chi, exact_corr, twin_csv};
use fdtemp::twotime::campaign::GridPoint;
use ndarray::Array2;
use predicates::prelude::*;
use rand::RngExt;
use rand_distr::StandardNormal;
use std::path::Path;

fn reduce(spec: &TwinSpec, combine: Combine) -> fdtemp::reduce::TwinReduction {
    let bytes = twin_csv(spec);
    let runs = parse_twins(bytes.as_slice(), Path::new("raw.csv")).unwrap();
    let settings = TwinSettings {
        combine,
        resamples: 499,
        ..Default::default()
    };
    reduce_twins(&runs, &settings).unwrap()
}

#[test]
fn reduced_two_bath_twins_match_the_closed_forms() {
    let r = reduce(&TwinSpec::linear(40, 3, true), Combine::Extrapolate);
    let c = &r.campaign;
    let n = c.n_samples() as f64;
    let mut worst_z: f64 = 0.0;
    for (j, g) in c.points().iter().enumerate() {
        let lag = g.t - g.tw;
        let col = c.corr().column(j);
        let mean = col.sum() / n;
        let se = (col.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0) / n).sqrt();
        worst_z = worst_z.max(((mean - exact_corr(lag)) / se).abs());
        // Source: closed-form mean response of independent Ornstein–Uhlenbeck modes to a
        // constant force (Gardiner, Stochastic Methods, 4th ed. (2009), §3.8.4, section
        // from memory); the twins share the noise, so χ is exact to rounding.
        let chi = c.resp().column(j).sum() / n;
        assert!(
            ((chi - exact_chi(lag)) / exact_chi(lag)).abs() < 1e-9,
            "chi at lag {lag}: {chi} against {}",
            exact_chi(lag)
        );
    }
    // Source: stationary covariance of the Ornstein–Uhlenbeck process (same reference).
    // 32 points: the largest |z| of correlated normal errors stays below 4.
    assert!(
        worst_z < 4.0,
        "C off its closed form by {worst_z} standard errors"
    );
    let t = r.test.as_ref().unwrap();
    assert!(!t.rejects, "a linear system flagged as nonlinear: {t:?}");
    assert!(r.early.is_none());
}

#[test]
fn an_injected_cubic_response_is_detected_and_removed_by_the_extrapolation() {
    let spec = TwinSpec {
        cubic: 30.0,
        ..TwinSpec::linear(20, 5, true)
    };
    let ex = reduce(&spec, Combine::Extrapolate);
    let t = ex.test.as_ref().unwrap();
    assert!(t.rejects, "cubic response not detected: {t:?}");
    let small = reduce(&spec, Combine::Smallest);
    let n = ex.campaign.n_samples() as f64;
    for (j, g) in ex.campaign.points().iter().enumerate() {
        let exact = exact_chi(g.t - g.tw);
        let e = ex.campaign.resp().column(j).sum() / n;
        let s = small.campaign.resp().column(j).sum() / n;
        // χ(h) = χ₁(1 + κ₃h²): two-level Richardson in h² is exact (common practice).
        assert!(
            ((e - exact) / exact).abs() < 1e-9,
            "extrapolated {e} vs {exact}"
        );
        // The smallest amplitude alone keeps κ₃h² = 30 × 0.05² = 7.5% of bias.
        assert!((s / exact - 1.075).abs() < 1e-9, "smallest {s} vs {exact}");
    }
}

#[test]
fn a_quadratic_response_is_cancelled_by_the_plus_minus_combination() {
    let spec = TwinSpec {
        quadratic: 3.0,
        ..TwinSpec::linear(20, 6, true)
    };
    let sym = reduce(&spec, Combine::Extrapolate);
    assert!(sym.design.symmetric);
    assert!(!sym.test.as_ref().unwrap().rejects);
    let n = sym.campaign.n_samples() as f64;
    for (j, g) in sym.campaign.points().iter().enumerate() {
        let exact = exact_chi(g.t - g.tw);
        let v = sym.campaign.resp().column(j).sum() / n;
        assert!(((v - exact) / exact).abs() < 1e-9);
    }
    // The same system with positive fields only: the h² term shows as a dependence on h.
    let one_sided = reduce(
        &TwinSpec {
            fields: vec![0.05, 0.1],
            ..spec
        },
        Combine::Extrapolate,
    );
    assert!(!one_sided.design.symmetric);
    assert!(one_sided.test.as_ref().unwrap().rejects);
}

/// Invented known-truth twin runs with sample-to-sample noise: per sample and point
/// χ_k = c_p (1 + κ u_k) + e_i(p) + d_ik(p), with e and d correlated along the points
/// (AR(1), ρ = 0.8), fields ±0.05, ±0.1 (u = h²). κ = 0 is the null of the linearity test.
fn noisy_twins(seed: u64, n: usize, kappa: f64) -> TwinRuns {
    let np = 24;
    let amps = [0.05, 0.1];
    let mut rng = fdtemp::resample::replicate_rng(seed, 0);
    let points: Vec<GridPoint> = (0..np)
        .map(|j| GridPoint {
            tw: 10.0,
            t: 11.0 + j as f64,
        })
        .collect();
    let c: Vec<f64> = (0..np)
        .map(|j| 1.0 - (-(j as f64 + 1.0) / 8.0).exp())
        .collect();
    let ar = |rng: &mut rand_chacha::ChaCha8Rng, sd: f64| {
        let mut x: f64 = rng.sample(StandardNormal);
        (0..np)
            .map(|_| {
                let v = x * sd;
                x = 0.8 * x + (1.0f64 - 0.64).sqrt() * rng.sample::<f64, _>(StandardNormal);
                v
            })
            .collect::<Vec<f64>>()
    };
    let corr = Array2::<f64>::from_elem((n, np), 0.5);
    let m0 = Array2::<f64>::zeros((n, np));
    let fields = vec![-0.1, -0.05, 0.05, 0.1];
    let mut mh = vec![Array2::<f64>::zeros((n, np)); 4];
    for i in 0..n {
        let e = ar(&mut rng, 0.05);
        for (k, &a) in amps.iter().enumerate() {
            let d = ar(&mut rng, 0.02);
            for p in 0..np {
                let chi = c[p] * (1.0 + kappa * a * a) + e[p] + d[p];
                // m(±a) = ±a χ: the ±h combination gives χ back.
                mh[if k == 0 { 1 } else { 0 }][[i, p]] = -a * chi;
                mh[if k == 0 { 2 } else { 3 }][[i, p]] = a * chi;
            }
        }
    }
    let ids = (0..n).map(|i| format!("s{i:03}")).collect();
    TwinRuns::new(ids, points, fields, corr, m0, mh).unwrap()
}

fn rejection_rate(campaigns: usize, n: usize, kappa: f64, resamples: usize) -> f64 {
    let settings = TwinSettings {
        resamples,
        ..Default::default()
    };
    let hits = (0..campaigns)
        .filter(|&s| {
            let r = reduce_twins(&noisy_twins(1000 + s as u64, n, kappa), &settings).unwrap();
            r.test.unwrap().rejects
        })
        .count();
    hits as f64 / campaigns as f64
}

#[test]
fn the_linearity_test_rarely_fires_on_a_linear_response_and_finds_a_strong_cubic() {
    // 60 null campaigns at nominal 5%: more than 12 rejections (20%) is a broken test.
    let null = rejection_rate(60, 20, 0.0, 199);
    assert!(null <= 0.2, "false alarms {null}");
    // κ = 20: χ changes by 15% of c between the amplitudes, several standard errors.
    let power = rejection_rate(20, 20, 20.0, 199);
    assert!(power >= 0.9, "power {power}");
}

/// The false-alarm rate and the power of the linearity test over many invented campaigns
/// (docs/validation.md, section "reduce").
///
/// `cargo test --release --test reduce -- --ignored --nocapture linearity_study`
#[test]
#[ignore]
fn linearity_study() {
    let m = 400;
    for n in [12, 20, 48] {
        let p = rejection_rate(m, n, 0.0, 999);
        let sd = (p * (1.0 - p) / m as f64).sqrt();
        println!("null n = {n}: false alarms {p:.4} ± {sd:.4} over {m} campaigns (nominal 0.05)");
    }
    for kappa in [2.0, 5.0, 10.0] {
        let p = rejection_rate(200, 20, kappa, 999);
        let sd = (p * (1.0 - p) / 200.0).sqrt();
        println!("kappa = {kappa}, n = 20: rejections {p:.4} ± {sd:.4} over 200 campaigns");
    }
}

/// Coverage of X when `fit` runs on reduced twin campaigns: `two-baths-twins --quick`
/// reduced (±h, Richardson), fitted with the defaults (broken stick, BCa, B = 999), X
/// against the exact T/T_slow = 0.4 (docs/validation.md, section "reduce").
///
/// `FDTEMP_REDUCE_SAMPLES=40 cargo test --release --test reduce -- --ignored --nocapture twin_fit_coverage`
/// (samples per campaign, 20 by default; `FDTEMP_REDUCE_FULL=1` for the full time grid)
#[test]
#[ignore]
fn twin_fit_coverage() {
    // 1000 campaigns: at 200 the standard error (0.02) cannot tell 0.92 from 0.95, and one
    // block of 200 came out at 0.84 by chance (docs/validation.md).
    let campaigns = 1000;
    let samples: usize = std::env::var("FDTEMP_REDUCE_SAMPLES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20);
    let quick = std::env::var("FDTEMP_REDUCE_FULL").is_err();
    let mut hits = 0usize;
    for s in 0..campaigns {
        let spec = TwinSpec::linear(samples, 20_000 + s as u64, quick);
        let r = reduce(&spec, Combine::Extrapolate);
        let fit = fdtemp::FitSettings {
            temperature: 1.0,
            resamples: 999,
            seed: s as u64,
            ..Default::default()
        };
        let f = fdtemp::analyze(&r.campaign, &fit, None, &fdtemp::twotime::Silent)
            .unwrap()
            .fits
            .remove(0);
        hits += usize::from(
            matches!((f.ratio.low, f.ratio.high), (Some(lo), Some(hi)) if lo <= 0.4 && 0.4 <= hi),
        );
    }
    let p = hits as f64 / campaigns as f64;
    let sd = (p * (1.0 - p) / campaigns as f64).sqrt();
    println!(
        "X coverage of fit on reduced twin campaigns ({samples} samples): {p:.4} ± {sd:.4} over {campaigns} (nominal 0.95)"
    );
}

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

fn raw_file(dir: &Path) -> std::path::PathBuf {
    let p = dir.join("raw.csv");
    std::fs::write(&p, twin_csv(&TwinSpec::linear(6, 2, true))).unwrap();
    p
}

#[test]
fn reduce_writes_a_campaign_that_fit_reads() {
    let dir = tempfile::tempdir().unwrap();
    let raw = raw_file(dir.path());
    let out = dir.path().join("campaign.csv");
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(&out)
        .args(["-B", "199"])
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "twin runs  ",
        ))
        .stdout(predicate::str::contains(
            ": 6 samples, 2 waiting times, 32 points; fields ±0.05, ±0.1",
        ))
        .stdout(predicate::str::contains(
            "linearity  no dependence of chi on h detected: max |t| = 0 over 32 points (p = 1.000; level 0.05)",
        ));
    let text = std::fs::read_to_string(&out).unwrap();
    assert!(text.starts_with("sample,tw,t,corr,resp\n"));
    fdtemp()
        .arg("fit")
        .arg(&out)
        .args(["-T", "1", "-B", "199"])
        .assert()
        .success();
    // The campaign is not replaced without --overwrite.
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(&out)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "exists already; pass --overwrite to replace it",
        ));
}

#[test]
fn reduce_json_carries_the_design_the_test_and_the_cautions() {
    let dir = tempfile::tempdir().unwrap();
    let raw = raw_file(dir.path());
    let (out, json) = (dir.path().join("c.csv"), dir.path().join("r.json"));
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(&out)
        .arg("--json")
        .arg(&json)
        .args(["-B", "199"])
        .assert()
        .success()
        .stdout(predicate::str::contains("wrote      ").and(predicate::str::contains("r.json")));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    assert_eq!(v["command"], "reduce");
    assert_eq!(v["protocol"], "twins");
    assert_eq!(v["n_samples"], 6);
    assert_eq!(v["n_points"], 32);
    assert_eq!(v["design"]["levels"].as_array().unwrap().len(), 2);
    assert_eq!(v["linearity"]["rejects"], false);
    assert_eq!(v["points"].as_array().unwrap().len(), 32);
    assert!(v["cautions"].as_array().unwrap().is_empty());
    // A second run is refused before anything is written: the JSON is an output too.
    std::fs::remove_file(&out).unwrap();
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(&out)
        .arg("--json")
        .arg(&json)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("r.json"));
    assert!(!out.exists(), "a partial output was written");
}

#[test]
fn twins_whose_times_do_not_line_up_are_refused_with_sample_run_and_time() {
    let dir = tempfile::tempdir().unwrap();
    let raw = raw_file(dir.path());
    let text = std::fs::read_to_string(&raw).unwrap();
    // Move one time of the h = 0.05 twin of sample s0002 at tw = 50.
    let bad = text.replacen("s0002,50.0,50.02,0.05,", "s0002,50.0,50.025,0.05,", 1);
    assert_ne!(bad, text);
    std::fs::write(&raw, &bad).unwrap();
    let line = bad
        .lines()
        .position(|l| l.starts_with("s0002,50.0,50.025,0.05,"))
        .unwrap()
        + 1;
    let out = dir.path().join("campaign.csv");
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(&out)
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}:{line}: sample 's0002', run tw = 50, h = 0.05: time t = 50.025 is not among \
             the times of its unperturbed run; twin runs must be recorded at the same times\n",
            raw.display()
        ));
    assert!(!out.exists());
}

#[test]
fn a_field_that_moves_the_observable_before_tw_is_flagged() {
    let dir = tempfile::tempdir().unwrap();
    let raw = raw_file(dir.path());
    let text = std::fs::read_to_string(&raw).unwrap();
    // The h = 0.1 twin of s0003 differs from its unperturbed run at t = tw = 500.
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let i = lines
        .iter()
        .position(|l| l.starts_with("s0003,500.0,500.0,0.1,"))
        .unwrap();
    let m: f64 = lines[i].rsplit(',').next().unwrap().parse().unwrap();
    lines[i] = format!("s0003,500.0,500.0,0.1,,{:?}", m + 0.25);
    std::fs::write(&raw, lines.join("\n") + "\n").unwrap();
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(dir.path().join("c.csv"))
        .args(["-B", "199"])
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "caution    the field moved the observable before tw: sample 's0003', tw = 500, h = 0.1: m(h) − m(0) = 0.250 at t = 500 (1 perturbed run(s) differ before tw)",
        ));
}

#[test]
fn reduce_can_fit_at_once() {
    let dir = tempfile::tempdir().unwrap();
    let raw = raw_file(dir.path());
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(dir.path().join("c.csv"))
        .args(["-B", "199", "--fit"])
        .assert()
        .code(2)
        .stderr("error: --fit needs --temperature (the bath temperature T)\n");
    fdtemp()
        .arg("reduce")
        .arg(&raw)
        .arg("--out")
        .arg(dir.path().join("c.csv"))
        .args(["-B", "199", "--fit", "-T", "1"])
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "fluctuation–dissipation fit in the time domain",
        ));
}

mod quenches {
    use fdtemp::reduce::quench::{QuenchReduction, QuenchSettings, reduce_quenches};
    use fdtemp::reduce::quench_fit::{QuenchFitSettings, fit_quenches};
    use fdtemp::reduce::twin::Combine;
    use fdtemp::scenarios::sim::twins::{QuenchSpec, exact_chi, exact_corr, quench_csv};
    use predicates::prelude::*;

    fn write(dir: &std::path::Path, spec: &QuenchSpec) -> std::path::PathBuf {
        let p = dir.join("quenches.csv");
        std::fs::write(&p, quench_csv(spec)).unwrap();
        p
    }

    /// The standard quenches of `runs` runs reduced with 499 replicates.
    fn reduced(runs: usize, seed: u64) -> fdtemp::reduce::quench::QuenchReduction {
        let dir = tempfile::tempdir().unwrap();
        let file = write(dir.path(), &QuenchSpec::standard(runs, seed, true));
        let settings = QuenchSettings {
            resamples: 499,
            ..Default::default()
        };
        reduce_quenches(&file, &settings).unwrap()
    }

    #[test]
    fn reduced_quenches_cover_the_closed_forms() {
        let r = reduced(3000, 7);
        assert_eq!(r.unperturbed, 1000);
        assert_eq!(r.perturbed, vec![(50.0, 1000), (500.0, 1000)]);
        assert!(r.early.is_none());
        let n = r.points.len() as f64;
        // Source: stationary covariance and mean response of independent Ornstein–Uhlenbeck
        // modes (Gardiner, Stochastic Methods, 4th ed. (2009), §3.8.4, section from
        // memory). 95% pointwise intervals; the points of one tw are strongly correlated,
        // so the covered fraction of one campaign varies a lot: at least 70% is required.
        let c_cov = r
            .points
            .iter()
            .filter(|p| {
                let e = exact_corr(p.t - p.tw);
                p.corr_low <= e && e <= p.corr_high
            })
            .count() as f64
            / n;
        let x_cov = r
            .points
            .iter()
            .filter(|p| {
                let e = exact_chi(p.t - p.tw);
                p.chi_low.unwrap() <= e && e <= p.chi_high.unwrap()
            })
            .count() as f64
            / n;
        assert!(
            c_cov >= 0.7 && x_cov >= 0.7,
            "covered: C {c_cov}, chi {x_cov}"
        );
    }

    /// X of the two-bath system, T/T_slow (the synth scenario's truth, `ratio`).
    const X_TRUE: f64 = 0.4;

    #[test]
    fn the_direct_fit_of_quenches_finds_the_two_temperatures() {
        let r = reduced(12_000, 11);
        let f = fit_quenches(&r, &QuenchFitSettings::default()).unwrap();
        assert_eq!(f.fits.len(), 3, "all tw, then tw = 50 and 500");
        let all = &f.fits[0];
        assert!(all.tw.is_none());
        let (lo, hi) = (all.x.low.unwrap(), all.x.high.unwrap());
        // Source: X = T/T_slow of two Ornstein–Uhlenbeck modes at their own temperatures
        // (Gardiner, Stochastic Methods, 4th ed. (2009), §3.8.4, from memory); the break
        // is not sharp (the modes' times are 1 and 100), so only the interval is asserted.
        assert!(lo <= X_TRUE && X_TRUE <= hi, "X [{lo}, {hi}]");
        assert!(all.violates_equilibrium, "{all:?}");
        let t_eff = all.t_eff.estimate.unwrap();
        assert!((t_eff - 1.0 / all.x.estimate.unwrap()).abs() < 1e-12);
    }

    #[test]
    fn a_field_switched_on_before_tw_is_flagged() {
        let dir = tempfile::tempdir().unwrap();
        let spec = QuenchSpec {
            lead: 100.0,
            ..QuenchSpec::standard(3000, 7, true)
        };
        let file = write(dir.path(), &spec);
        let settings = QuenchSettings {
            resamples: 199,
            ..Default::default()
        };
        let e = reduce_quenches(&file, &settings).unwrap().early.unwrap();
        assert!(e.t < e.tw && e.z.abs() > e.bound, "{e:?}");
    }

    #[test]
    fn quench_runs_that_do_not_line_up_are_refused_with_run_and_time() {
        let dir = tempfile::tempdir().unwrap();
        let file = write(dir.path(), &QuenchSpec::standard(30, 1, true));
        let text = std::fs::read_to_string(&file).unwrap();
        let bad = text.replacen("q00005,25.0,", "q00005,26.0,", 1);
        std::fs::write(&file, &bad).unwrap();
        let line = bad
            .lines()
            .position(|l| l.starts_with("q00005,26.0,"))
            .unwrap()
            + 1;
        super::fdtemp()
            .arg("reduce")
            .arg(&file)
            .arg("--out")
            .arg(dir.path().join("p.csv"))
            .assert()
            .code(2)
            .stderr(format!(
                "error: {}:{line}:2: run 'q00005' (tw = 50, h = 0.5): time t = 26 is not among \
                 the times of run 'q00001'; every run needs the same times\n",
                file.display()
            ));
        // A run split in two places.
        let mut lines: Vec<&str> = text.lines().collect();
        let moved = lines.remove(1);
        lines.push(moved);
        std::fs::write(&file, lines.join("\n") + "\n").unwrap();
        super::fdtemp()
            .arg("reduce")
            .arg(&file)
            .arg("--out")
            .arg(dir.path().join("p.csv"))
            .assert()
            .code(2)
            .stderr(predicate::str::contains(
                "run 'q00001' appears again after other runs; expected the rows of one run together",
            ));
        assert!(!dir.path().join("p.csv").exists());
    }

    #[test]
    fn quenches_are_reduced_and_fitted_from_the_cli() {
        let dir = tempfile::tempdir().unwrap();
        let file = write(dir.path(), &QuenchSpec::standard(300, 1, true));
        let out = dir.path().join("p.csv");
        super::fdtemp()
            .arg("reduce")
            .arg(&file)
            .arg("--out")
            .arg(&out)
            .args(["-B", "199"])
            .assert()
            .success()
            .stdout(predicate::str::contains(
                ": 100 unperturbed runs, perturbed 100 from tw = 50, 100 from tw = 500; 36 times, 53 points",
            ));
        assert!(
            std::fs::read_to_string(&out)
                .unwrap()
                .starts_with("tw,t,corr,corr_low,corr_high,chi,chi_low,chi_high\n")
        );
        super::fdtemp()
            .arg("reduce")
            .arg(&file)
            .arg("--out")
            .arg(dir.path().join("q.csv"))
            .args(["--fit", "-T", "1", "-B", "199"])
            .assert()
            .success()
            .stdout(predicate::str::contains(
                "fit        broken stick on y = T·chi against C (slope −1 above q, −X below), T = 1;",
            ))
            .stdout(predicate::str::contains("verdict    all tw: "));
        super::fdtemp()
            .arg("reduce")
            .arg(&file)
            .arg("--out")
            .arg(dir.path().join("q2.csv"))
            .arg("--table")
            .arg(dir.path().join("t.csv"))
            .assert()
            .code(2)
            .stderr(
                "error: --table is for twin runs and for repeated quenches with several fields \
                 at a tw; with one field per tw --out is already the per-point table\n",
            );
        assert!(
            !dir.path().join("q2.csv").exists(),
            "a partial output was written"
        );
    }

    /// Quenches at several fields reduced with `resamples` replicates.
    fn reduced_with(spec: &QuenchSpec, resamples: usize, combine: Combine) -> QuenchReduction {
        let dir = tempfile::tempdir().unwrap();
        let file = write(dir.path(), spec);
        let settings = QuenchSettings {
            resamples,
            combine,
            ..Default::default()
        };
        reduce_quenches(&file, &settings).unwrap()
    }

    /// The fraction of points whose χ interval covers the closed form.
    fn chi_covered(r: &QuenchReduction) -> f64 {
        r.points
            .iter()
            .filter(|p| {
                let e = exact_chi(p.t - p.tw);
                p.chi_low.unwrap() <= e && e <= p.chi_high.unwrap()
            })
            .count() as f64
            / r.points.len() as f64
    }

    #[test]
    fn linear_quenches_at_two_amplitudes_are_not_flagged_and_match_the_closed_form() {
        let spec = QuenchSpec {
            fields: vec![-1.0, -0.5, 0.5, 1.0],
            ..QuenchSpec::standard(6000, 21, true)
        };
        let r = reduced_with(&spec, 499, Combine::Extrapolate);
        assert_eq!(r.designs.len(), 2);
        assert!(r.designs.iter().all(|d| d.design.symmetric
            && d.design.levels == vec![0.5, 1.0]
            && d.runs == vec![500; 4]));
        assert!(r.untested.is_empty());
        let t = r.test.as_ref().unwrap();
        // The two-bath system is linear: the test must stay silent (at 5%, for this seed).
        assert!(!t.rejects, "a linear response flagged: {t:?}");
        assert!(
            r.points
                .iter()
                .all(|p| p.p.is_some() && p.chi_levels.as_ref().is_some_and(|c| c.len() == 2))
        );
        // Source: mean response of independent Ornstein–Uhlenbeck modes to a constant
        // force (Gardiner, Stochastic Methods, 4th ed. (2009), §3.8.4, section from memory):
        // the extrapolated χ is unbiased, its pointwise 95% intervals cover the closed
        // form at most points (correlated along t: at least 70% required, as for one field).
        let cov = chi_covered(&r);
        assert!(cov >= 0.7, "chi covered at {cov} of the points");
        // Two levels in h²: (4 χ(0.5) − χ(1))/3 at every point (common practice).
        for p in &r.points {
            let c = p.chi_levels.as_ref().unwrap();
            let rich = (4.0 * c[0] - c[1]) / 3.0;
            assert!((p.chi.unwrap() - rich).abs() < 1e-9 * (1.0 + rich.abs()));
        }
        // The direct fit runs on the combined χ.
        let f = fit_quenches(&r, &QuenchFitSettings::default()).unwrap();
        assert_eq!(f.fits.len(), 3);
    }

    #[test]
    fn an_injected_cubic_quench_response_is_flagged_and_removed_by_the_extrapolation() {
        // Force h + 0.3 h³: χ(h) = χ₁ (1 + 0.3 h²), so χ at the smallest amplitude (|h| = 1)
        // is 30% high and χ(2) 120% high.
        let spec = QuenchSpec {
            fields: vec![-2.0, -1.0, 1.0, 2.0],
            cubic: 0.3,
            ..QuenchSpec::standard(6000, 22, true)
        };
        let ex = reduced_with(&spec, 499, Combine::Extrapolate);
        let t = ex.test.as_ref().unwrap();
        assert!(t.rejects, "cubic response not detected: {t:?}");
        // Two-level Richardson in h² is exact for χ₁(1 + κ₃h²) (common practice): the
        // intervals cover the closed form as for a linear system.
        let cov = chi_covered(&ex);
        assert!(
            cov >= 0.7,
            "extrapolated chi covered at {cov} of the points"
        );
        // The smallest amplitude alone keeps the +30% bias: it misses at the later times.
        let small = reduced_with(&spec, 499, Combine::Smallest);
        let late: Vec<f64> = small
            .points
            .iter()
            .filter(|p| p.t - p.tw > 100.0)
            .map(|p| p.chi.unwrap() / exact_chi(p.t - p.tw))
            .collect();
        let mean = late.iter().sum::<f64>() / late.len() as f64;
        assert!(
            (mean - 1.3).abs() < 0.1,
            "smallest amplitude: chi/exact {mean}"
        );
        assert!(chi_covered(&small) < 0.5);
    }

    #[test]
    fn quench_fields_that_do_not_line_up_are_refused_with_line_and_column() {
        let dir = tempfile::tempdir().unwrap();
        let spec = QuenchSpec {
            fields: vec![0.5, 1.0],
            ..QuenchSpec::standard(60, 3, true)
        };
        let file = write(dir.path(), &spec);
        let text = std::fs::read_to_string(&file).unwrap();
        let out = dir.path().join("p.csv");
        let run = |bad: &str| {
            std::fs::write(&file, bad).unwrap();
            super::fdtemp()
                .arg("reduce")
                .arg(&file)
                .arg("--out")
                .arg(&out)
                .args(["-B", "199"])
                .assert()
                .code(2)
        };
        let line_of =
            |bad: &str, start: &str| bad.lines().position(|l| l.starts_with(start)).unwrap() + 1;
        // Run q00005 (tw = 50, h = 1) recorded at another time than the h = 0.5 runs.
        let bad = text.replacen("q00005,25.0,", "q00005,26.0,", 1);
        let line = line_of(&bad, "q00005,26.0,");
        run(&bad).stderr(format!(
            "error: {}:{line}:2: run 'q00005' (tw = 50, h = 1): time t = 26 is not among the \
             times of run 'q00001'; every run needs the same times\n",
            file.display()
        ));
        // Run q00006 (tw = 500, h = 1) without its row at t = 25: named at its last row.
        let lines: Vec<&str> = text
            .lines()
            .filter(|l| !l.starts_with("q00006,25.0,"))
            .collect();
        let bad = lines.join("\n") + "\n";
        let last = bad
            .lines()
            .collect::<Vec<_>>()
            .iter()
            .rposition(|l| l.starts_with("q00006,"))
            .unwrap()
            + 1;
        run(&bad).stderr(format!(
            "error: {}:{last}:2: run 'q00006' (tw = 500, h = 1) has no row at t = 25, which run \
             'q00001' has; every run needs the same times\n",
            file.display()
        ));
        // One run at a third field: too few runs for its χ and the test.
        let bad: String = text
            .lines()
            .map(|l| {
                if l.starts_with("q00005,") {
                    l.replacen(",1.0,50.0", ",2.0,50.0", 1)
                } else {
                    l.to_string()
                }
            })
            .collect::<Vec<_>>()
            .join("\n")
            + "\n";
        let line = line_of(&bad, "q00005,");
        run(&bad).stderr(format!(
            "error: {}:{line}:4: only 1 run switched on at tw = 50 with h = 2; with several \
             fields at a tw each field needs at least 2 runs (for χ per field and the linearity \
             test)\n",
            file.display()
        ));
        assert!(!out.exists(), "a partial output was written");
    }

    #[test]
    fn quenches_at_several_fields_report_the_test_like_twins() {
        let dir = tempfile::tempdir().unwrap();
        let spec = QuenchSpec {
            fields: vec![0.5, 1.0],
            cubic: 2.0,
            ..QuenchSpec::standard(3000, 4, true)
        };
        let file = write(dir.path(), &spec);
        let (out, table, json) = (
            dir.path().join("p.csv"),
            dir.path().join("t.csv"),
            dir.path().join("r.json"),
        );
        super::fdtemp()
            .arg("reduce")
            .arg(&file)
            .arg("--out")
            .arg(&out)
            .arg("--table")
            .arg(&table)
            .arg("--json")
            .arg(&json)
            .args(["-B", "199"])
            .assert()
            .success()
            .stdout(predicate::str::contains(
                "perturbed 1000 from tw = 50 (500 at h = 0.5, 500 at h = 1), 1000 from tw = 500 \
                 (500 at h = 0.5, 500 at h = 1)",
            ))
            .stdout(predicate::str::contains(
                "chi        tw = 50: chi = (<A(t)>_h − <A(t)>_0)/h per field; Richardson \
                 extrapolation to h → 0: least-squares line in h over 2 levels, its intercept",
            ))
            .stdout(predicate::str::contains(
                "linearity  chi depends on h: max |t| = ",
            ))
            .stdout(predicate::str::contains(
                "           test of (<A(t)>_h − <A(t)>_0)/h against h (second-order response), \
                 199 Poisson-bootstrap replicates of runs stratified by (tw, h)",
            ));
        let t = std::fs::read_to_string(&table).unwrap();
        assert!(
            t.starts_with("tw,t,corr,chi,chi_low,chi_high,chi_level1_0.5,chi_level2_1.0,shift,p\n")
        );
        assert_eq!(t.lines().count(), 54);
        let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
        assert_eq!(v["linearity"]["rejects"], true);
        assert_eq!(v["design"].as_array().unwrap().len(), 2);
        assert_eq!(v["design"][0]["fields"], serde_json::json!([0.5, 1.0]));
        assert_eq!(v["settings"]["combine"], "extrapolate");
        let codes: Vec<&str> = v["cautions"]
            .as_array()
            .unwrap()
            .iter()
            .map(|c| c["code"].as_str().unwrap())
            .collect();
        assert!(codes.contains(&"nonlinear_response") && codes.contains(&"pointwise_only"));
        assert!(!codes.contains(&"linearity_untested"));
        assert!(v["points"][0]["p"].is_number());
        // One field per tw: the test is not run, and the caution says so.
        let one = write(dir.path(), &QuenchSpec::standard(300, 4, true));
        super::fdtemp()
            .arg("reduce")
            .arg(&one)
            .arg("--out")
            .arg(dir.path().join("p1.csv"))
            .arg("--json")
            .arg(dir.path().join("r1.json"))
            .args(["-B", "199"])
            .assert()
            .success()
            .stdout(predicate::str::contains(
                "linearity  not tested: one field per waiting time (run a second amplitude to \
                 test that chi does not depend on h)",
            ));
        let v: serde_json::Value =
            serde_json::from_slice(&std::fs::read(dir.path().join("r1.json")).unwrap()).unwrap();
        assert!(v["linearity"].is_null());
        assert_eq!(v["cautions"][0]["code"], "linearity_untested");
        assert!(v["points"][0].get("p").is_none());
    }

    /// Rejection rate of the overall linearity test over `campaigns` quench campaigns of
    /// `runs` runs at `fields` with force h + κ₃h³ (B = 499, level 0.05).
    fn quench_rejections(campaigns: usize, runs: usize, fields: &[f64], cubic: f64) -> (f64, f64) {
        let dir = tempfile::tempdir().unwrap();
        let settings = QuenchSettings {
            resamples: 499,
            ..Default::default()
        };
        let mut hits = 0usize;
        for s in 0..campaigns {
            let spec = QuenchSpec {
                fields: fields.to_vec(),
                cubic,
                ..QuenchSpec::standard(runs, 70_000 + s as u64, true)
            };
            let file = write(dir.path(), &spec);
            let r = reduce_quenches(&file, &settings).unwrap();
            hits += usize::from(r.test.unwrap().rejects);
        }
        let p = hits as f64 / campaigns as f64;
        (p, (p * (1.0 - p) / campaigns as f64).sqrt())
    }

    /// False alarms of the quench linearity test on the linear two-bath system and its
    /// power on a small cubic term (docs/validation.md, section "reduce").
    ///
    /// `cargo test --release --test reduce -- --ignored --nocapture quench_linearity_study`
    /// (`FDTEMP_QLIN_CAMPAIGNS`: campaigns per false-alarm row, 200 by default; the power
    /// rows run at most 200)
    #[test]
    #[ignore]
    fn quench_linearity_study() {
        let m: usize = std::env::var("FDTEMP_QLIN_CAMPAIGNS")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(200);
        let runs = 2400;
        let rows: [(&str, &[f64], f64); 5] = [
            ("±0.5, ±1 (h²)", &[-1.0, -0.5, 0.5, 1.0], 0.0),
            ("0.5, 1 (h)", &[0.5, 1.0], 0.0),
            ("±0.5, ±1 (h²)", &[-1.0, -0.5, 0.5, 1.0], 0.1),
            ("±0.5, ±1 (h²)", &[-1.0, -0.5, 0.5, 1.0], 0.3),
            ("0.5, 1 (h)", &[0.5, 1.0], 0.3),
        ];
        println!(
            "{runs} runs per campaign (a third unperturbed, a third per tw), 53 points, B = 499, level 0.05"
        );
        for (name, fields, cubic) in rows {
            // The power rows need fewer campaigns than the false-alarm rows.
            let m = if cubic == 0.0 { m } else { m.min(200) };
            let (p, sd) = quench_rejections(m, runs, fields, cubic);
            println!(
                "fields {name}, force h + {cubic} h³: rejections {p:.4} ± {sd:.4} over {m} campaigns"
            );
        }
    }

    /// Coverage of X (the fit over all tw and per tw) and the equilibrium verdict of the
    /// direct fit of repeated quenches over many campaigns (docs/validation.md, "reduce").
    ///
    /// `FDTEMP_QUENCH_RUNS=3000 cargo test --release --test reduce -- --ignored --nocapture quench_fit_coverage`
    #[test]
    #[ignore]
    fn quench_fit_coverage() {
        let campaigns: usize = std::env::var("FDTEMP_QUENCH_CAMPAIGNS")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(200);
        let runs: usize = std::env::var("FDTEMP_QUENCH_RUNS")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(3000);
        // FDTEMP_QUENCH_EQUILIBRIUM=1: the slow mode at the bath temperature (X = 1), where
        // the violation must be shown at most at the test's level.
        let equilibrium = std::env::var("FDTEMP_QUENCH_EQUILIBRIUM").is_ok_and(|v| v == "1");
        let x_true = if equilibrium { 1.0 } else { X_TRUE };
        let dir = tempfile::tempdir().unwrap();
        let settings = QuenchSettings {
            resamples: 999,
            ..Default::default()
        };
        let mut covered = [0usize; 3];
        let mut fitted = [0usize; 3];
        let mut violated = [0usize; 3];
        let mut reaches_zero = [0usize; 3];
        let mut xs = [0.0f64; 3];
        for s in 0..campaigns {
            let spec = QuenchSpec {
                slow_temperature: if equilibrium { 1.0 } else { 2.5 },
                ..QuenchSpec::standard(runs, 9000 + s as u64, true)
            };
            let file = write(dir.path(), &spec);
            let r = reduce_quenches(&file, &settings).unwrap();
            let f = fit_quenches(&r, &QuenchFitSettings::default()).unwrap();
            for (k, g) in f.fits.iter().enumerate().take(3) {
                let (Some(lo), Some(hi)) = (g.x.low, g.x.high) else {
                    continue;
                };
                fitted[k] += 1;
                covered[k] += usize::from(lo <= x_true && x_true <= hi);
                violated[k] += usize::from(g.violates_equilibrium);
                reaches_zero[k] += usize::from(lo <= 0.0);
                xs[k] += g.x.estimate.unwrap();
            }
        }
        println!(
            "{campaigns} campaigns of {runs} runs (a third unperturbed, a third per tw), B = 999, X = {x_true}"
        );
        for (k, name) in ["all tw", "tw = 50", "tw = 500"].iter().enumerate() {
            let n = fitted[k] as f64;
            let rate = |c: usize| {
                let p = c as f64 / n;
                (p, (p * (1.0 - p) / n).sqrt())
            };
            let (c, sc) = rate(covered[k]);
            let (v, sv) = rate(violated[k]);
            let (z, sz) = rate(reaches_zero[k]);
            println!(
                "{name:<9} fitted {:>4}: 95% coverage of X {c:.3} ± {sc:.3}; mean X {:.4}; violation shown {v:.3} ± {sv:.3}; interval reaches 0 {z:.3} ± {sz:.3}",
                fitted[k],
                xs[k] / n
            );
        }
    }

    /// Pointwise coverage of the quench intervals (C and χ against the closed forms,
    /// averaged over the points) and the early-field caution's false alarms, over many
    /// campaigns of the two-bath system (docs/validation.md, section "reduce").
    ///
    /// `cargo test --release --test reduce -- --ignored --nocapture quench_study`
    #[test]
    #[ignore]
    fn quench_study() {
        let campaigns = 200;
        let dir = tempfile::tempdir().unwrap();
        let settings = QuenchSettings {
            resamples: 399,
            ..Default::default()
        };
        let (mut c_frac, mut x_frac, mut alarms) = (Vec::new(), Vec::new(), 0usize);
        for s in 0..campaigns {
            let file = write(
                dir.path(),
                &QuenchSpec::standard(900, 5000 + s as u64, true),
            );
            let r = reduce_quenches(&file, &settings).unwrap();
            let n = r.points.len() as f64;
            let (mut c_in, mut x_in) = (0.0, 0.0);
            for p in &r.points {
                let (ec, ex) = (exact_corr(p.t - p.tw), exact_chi(p.t - p.tw));
                c_in += f64::from(u8::from(p.corr_low <= ec && ec <= p.corr_high));
                x_in += f64::from(u8::from(
                    p.chi_low.unwrap() <= ex && ex <= p.chi_high.unwrap(),
                ));
            }
            c_frac.push(c_in / n);
            x_frac.push(x_in / n);
            alarms += usize::from(r.early.is_some());
        }
        // Mean over campaigns ± its standard error (the points of one campaign are
        // correlated, the campaigns independent).
        let summary = |v: &[f64]| {
            let m = v.len() as f64;
            let mean = v.iter().sum::<f64>() / m;
            let sd = (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (m - 1.0)).sqrt();
            (mean, sd / m.sqrt())
        };
        let (pc, sc) = summary(&c_frac);
        let (px, sx) = summary(&x_frac);
        let pa = alarms as f64 / campaigns as f64;
        let sa = (pa * (1.0 - pa) / campaigns as f64).sqrt();
        println!("{campaigns} campaigns of 900 runs (300 unperturbed, 300 per tw)");
        println!(
            "pointwise 95% coverage averaged over points: C {pc:.4} ± {sc:.4}, chi {px:.4} ± {sx:.4}"
        );
        println!(
            "early-field caution with the field switched on at tw: {pa:.4} ± {sa:.4} (level at most 0.05)"
        );
    }
}

/// The worked examples of docs/reduce.md run as written and print what the doc shows.
#[test]
fn the_worked_examples_in_the_docs_print_what_the_docs_show() {
    let doc =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/docs/reduce.md")).unwrap();
    let mut checked = 0;
    for section in doc.split("### Worked example").skip(1) {
        let mut blocks = section.split("```").skip(1).step_by(2);
        let commands = blocks.next().unwrap().trim_start_matches("sh\n");
        let shown = blocks.next().unwrap().trim_start_matches('\n');
        let dir = tempfile::tempdir().unwrap();
        let mut reduce_out = String::new();
        for line in commands.lines().filter(|l| l.starts_with("fdtemp ")) {
            let args: Vec<&str> = line.split_whitespace().skip(1).collect();
            let out = fdtemp()
                .current_dir(dir.path())
                .args(&args)
                .output()
                .unwrap();
            assert!(
                out.status.success(),
                "{line}: {}",
                String::from_utf8_lossy(&out.stderr)
            );
            if args[0] == "reduce" {
                reduce_out = String::from_utf8(out.stdout).unwrap();
            }
        }
        for want in shown.lines().filter(|l| !l.trim().is_empty()) {
            assert!(
                reduce_out.contains(want),
                "docs show {want:?}; reduce printed:\n{reduce_out}"
            );
        }
        checked += 1;
    }
    assert_eq!(checked, 3);
}

/// The Glauber–Ising chain as twin runs with a random-sign field: the reduced χ (±h,
/// extrapolated to h → 0) agrees with the field-free estimator of the same runs, and the
/// linearity test sees that β h = 0.2 and 0.4 are not small.
#[test]
fn ising_twins_agree_with_the_field_free_estimator() {
    let bytes = fdtemp::scenarios::sim::ising_twins::ising_twin_csv(30, 3, true);
    let runs = parse_twins(bytes.as_slice(), Path::new("ising.csv")).unwrap();
    let settings = TwinSettings {
        resamples: 499,
        ..Default::default()
    };
    let r = reduce_twins(&runs, &settings).unwrap();
    assert!(r.test.as_ref().unwrap().rejects);
    // chi_free per (sample, tw, t) from the unperturbed rows.
    let text = String::from_utf8(bytes).unwrap();
    let mut free = std::collections::HashMap::new();
    for line in text.lines().skip(1) {
        let f: Vec<&str> = line.split(',').collect();
        let (tw, t): (f64, f64) = (f[1].parse().unwrap(), f[2].parse().unwrap());
        if f[3] == "0" && t > tw {
            free.insert(
                (f[0].to_string(), tw.to_bits(), t.to_bits()),
                f[6].parse::<f64>().unwrap(),
            );
        }
    }
    let c = &r.campaign;
    let n = c.n_samples() as f64;
    let mut worst: f64 = 0.0;
    for (j, g) in c.points().iter().enumerate() {
        let d: Vec<f64> = c
            .sample_ids()
            .iter()
            .enumerate()
            .map(|(i, id)| c.resp()[[i, j]] - free[&(id.clone(), g.tw.to_bits(), g.t.to_bits())])
            .collect();
        let m = d.iter().sum::<f64>() / n;
        let se = (d.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0) / n).sqrt();
        worst = worst.max((m / se).abs());
    }
    // Source: the field-free estimator (Ricci-Tersenghi, Phys. Rev. E 68, 065104(R) (2003))
    // estimates the same linear response; paired per sample over 24 correlated points.
    assert!(
        worst < 4.0,
        "reduced chi off the field-free estimator by {worst} SE"
    );
}

/// The same seed gives byte-identical files at 1 and 2 worker threads (both protocols;
/// quenches with one field and with several).
#[test]
fn reduce_output_does_not_depend_on_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let twins = raw_file(dir.path());
    let quenches = dir.path().join("q.csv");
    std::fs::write(
        &quenches,
        fdtemp::scenarios::sim::twins::quench_csv(
            &fdtemp::scenarios::sim::twins::QuenchSpec::standard(600, 2, true),
        ),
    )
    .unwrap();
    let fields = dir.path().join("qf.csv");
    std::fs::write(
        &fields,
        fdtemp::scenarios::sim::twins::quench_csv(&fdtemp::scenarios::sim::twins::QuenchSpec {
            fields: vec![-1.0, -0.5, 0.5, 1.0],
            ..fdtemp::scenarios::sim::twins::QuenchSpec::standard(600, 2, true)
        }),
    )
    .unwrap();
    for (input, extra) in [(&twins, true), (&quenches, false), (&fields, true)] {
        let mut outs = Vec::new();
        for threads in ["1", "2"] {
            let out = dir.path().join(format!("out{threads}.csv"));
            let table = dir.path().join(format!("table{threads}.csv"));
            let mut cmd = fdtemp();
            cmd.arg("reduce").arg(input).arg("--out").arg(&out).args([
                "-B",
                "199",
                "--overwrite",
                "--threads",
                threads,
            ]);
            if extra {
                cmd.arg("--table").arg(&table);
            }
            cmd.assert().success();
            let mut bytes = std::fs::read(&out).unwrap();
            if extra {
                bytes.extend(std::fs::read(&table).unwrap());
            }
            outs.push(bytes);
        }
        assert!(
            outs[0] == outs[1],
            "{} differs between 1 and 2 threads",
            input.display()
        );
    }
}
