//! Noise records after a quench: windows at chosen ages, T_eff(f, tw) from the per-window
//! Welch PSDs with intervals from resampling runs, against invented records with a known
//! T_eff(f, tw) (`fdtemp::scenarios::aging_noise`: a slow mode whose temperature relaxes
//! with age beside a fast one at the bath temperature).
//!
//! The coverage study is ignored:
//! `cargo test --release --test aging_noise -- --ignored --nocapture`
//! (`FDTEMP_AGING_CAMPAIGNS`, default 200).

use fdtemp::common::Units;
use fdtemp::scenarios::aging_noise::AgingNoiseSpec;
use fdtemp::spectral::aging::{AgeSettings, Width, age_groups, age_windows};
use fdtemp::spectral::analysis::{ErrorModel, SpectrumReport};
use fdtemp::spectral::noise::Dissipation;
use fdtemp::spectral::welch::WelchSettings;
use fdtemp::spectral::{Convention, SpectrumSettings, analyze_spectra};

const AGES: [f64; 3] = [50.0, 200.0, 800.0];
/// The band, and the lowest frequency whose coverage is counted: below about 3 Hz (bin
/// 15 of a 512-sample segment at 100 Hz) the Hann window's main lobe carries power from
/// the steep slow-mode spectrum into each bin (+41% at bin 2 for an f⁻² spectrum, about 1%
/// at bin 10), a bias of the window, not of the ages (docs/spectral.md, window leakage).
const BAND: [f64; 2] = [3.0, 15.0];
const F_MIN: f64 = 3.0;

fn settings() -> AgeSettings {
    AgeSettings {
        ages: AGES.to_vec(),
        width: Width::Fraction(0.5),
        quench_at: 0.0,
    }
}

/// The analysis of one campaign of `runs` records.
fn analyse(spec: &AgingNoiseSpec, resamples: usize) -> SpectrumReport {
    let records = spec.records();
    let names: Vec<String> = (0..spec.runs).map(|r| format!("r{r}")).collect();
    let welch = WelchSettings {
        sample_rate: spec.fs,
        segment: 512,
        overlap: 256,
    };
    let (ages, cautions) = age_windows(&names, &records, spec.fs, &settings(), welch).unwrap();
    // The 25 s window at tw = 50 holds fewer than 10 periods below 10/25 = 0.4 Hz, and bin 2
    // is at 0.39 Hz: the caution is true there and only there.
    assert_eq!(
        cautions,
        vec![fdtemp::spectral::findings::SpectralCaution {
            tw: Some(50.0),
            finding: fdtemp::spectral::findings::SpectralFinding::AgeWindowFewPeriods {
                below: 0.4,
                periods: 10.0
            }
        }]
    );
    // The loss at every bin (exact values: the table is hit at its rows).
    let bins: Vec<(f64, f64)> = (1..=256)
        .map(|k| {
            let f = k as f64 * spec.fs / 512.0;
            (f, spec.loss(f))
        })
        .collect();
    let groups: Vec<_> = age_groups(&ages, |_| Ok(Dissipation::Table(bins.clone())))
        .unwrap()
        .into_iter()
        .map(|(g, dropped)| {
            assert_eq!(dropped, 0);
            g
        })
        .collect();
    let s = SpectrumSettings {
        temperature: Some(spec.temperature),
        units: Units::Reduced,
        convention: Convention::Loss,
        errors: ErrorModel::Runs,
        resamples,
        seed: spec.seed,
        band: Some(BAND),
        ..SpectrumSettings::default()
    };
    analyze_spectra(&groups, &ages[0].psd.bin_rho2, &s, None).unwrap()
}

/// Per age: (points covered, points, band average covered).
fn coverage(spec: &AgingNoiseSpec, r: &SpectrumReport) -> Vec<(usize, usize, bool)> {
    r.spectra
        .iter()
        .map(|sp| {
            let tw = sp.tw.unwrap();
            let window = settings().window(tw);
            let pts: Vec<_> = sp
                .points
                .iter()
                .filter(|p| F_MIN <= p.f && p.f <= 20.0)
                .collect();
            let covered = pts
                .iter()
                .filter(|p| {
                    let t = spec.t_eff(p.f, window);
                    p.low.is_some_and(|lo| lo <= t) && p.high.is_some_and(|hi| t <= hi)
                })
                .count();
            let in_band: Vec<f64> = sp
                .points
                .iter()
                .filter(|p| BAND[0] <= p.f && p.f <= BAND[1])
                .map(|p| spec.t_eff(p.f, window))
                .collect();
            let truth = in_band.iter().sum::<f64>() / in_band.len() as f64;
            let b = &sp.band.as_ref().unwrap().t_eff;
            let band_ok =
                b.low.is_some_and(|lo| lo <= truth) && b.high.is_some_and(|hi| truth <= hi);
            (covered, pts.len(), band_ok)
        })
        .collect()
}

#[test]
fn t_eff_follows_the_age_of_the_slow_mode() {
    // Invented truth: T_s(t) = 1 + 4/(1 + t/50), so the slow mode is at 3 near tw = 50 and
    // 1.24 near tw = 800, while the fast mode stays at T = 1.
    let spec = AgingNoiseSpec::default();
    let r = analyse(&spec, 999);
    assert_eq!(r.spectra.len(), 3);
    let cov = coverage(&spec, &r);
    for (i, (c, n, band)) in cov.iter().enumerate() {
        assert!(*band, "tw = {}: band average misses the truth", AGES[i]);
        assert!(
            *c as f64 >= 0.8 * *n as f64,
            "tw = {}: {c} of {n} points covered",
            AGES[i]
        );
    }
    let band = |i: usize| r.spectra[i].band.as_ref().unwrap().t_eff.estimate.unwrap();
    assert!(
        band(0) > band(1) && band(1) > band(2),
        "{} {} {}",
        band(0),
        band(1),
        band(2)
    );
    // Hot at low frequency at every age: a departure from T is found.
    assert!(r.spectra.iter().all(|s| s.departure.is_some()));
}

#[test]
#[ignore = "coverage study, minutes: FDTEMP_AGING_CAMPAIGNS (default 200)"]
fn aging_noise_coverage_study() {
    let campaigns: usize = std::env::var("FDTEMP_AGING_CAMPAIGNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(200);
    let mut points = [(0usize, 0usize); 3];
    let mut bands = [0usize; 3];
    for c in 0..campaigns {
        let spec = AgingNoiseSpec {
            seed: 1000 + c as u64,
            ..AgingNoiseSpec::default()
        };
        let r = analyse(&spec, 999);
        for (i, (k, n, b)) in coverage(&spec, &r).into_iter().enumerate() {
            points[i].0 += k;
            points[i].1 += n;
            bands[i] += usize::from(b);
        }
    }
    println!(
        "| tw | window | per-frequency coverage ({F_MIN}–20 Hz) | band {BAND:?} Hz coverage |"
    );
    println!("|---|---|---|---|");
    for i in 0..3 {
        let p = points[i].0 as f64 / points[i].1 as f64;
        let b = bands[i] as f64 / campaigns as f64;
        let se = (b * (1.0 - b) / campaigns as f64).sqrt();
        println!(
            "| {} | {:?} | {p:.3} (of {} points) | {b:.3} ± {se:.3} |",
            AGES[i],
            settings().window(AGES[i]),
            points[i].1
        );
    }
}

fn fdtemp() -> assert_cmd::Command {
    assert_cmd::Command::cargo_bin("fdtemp").unwrap()
}

#[test]
fn the_noise_command_reads_aging_records_end_to_end() {
    let dir = tempfile::tempdir().unwrap();
    fdtemp()
        .current_dir(dir.path())
        .args([
            "synth",
            "aging-noise",
            "--quick",
            "--samples",
            "20",
            "--out",
            "ag.csv",
        ])
        .assert()
        .success();
    let truth: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("ag.truth.json")).unwrap()).unwrap();
    let args = [
        "noise",
        "ag.csv",
        "--ages",
        "50,200",
        "--age-span",
        "0.5",
        "--loss-file",
        "ag.loss.csv",
        "-T",
        "1",
        "--units",
        "reduced",
        "--convention",
        "loss",
        "--segment",
        "512",
        "--band",
        "3:15",
        "-B",
        "999",
    ];
    let out = fdtemp()
        .current_dir(dir.path())
        .args(args)
        .args(["--json", "ag.json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    assert!(
        text.contains("tw = 50 s: window 37.5–62.5 s after the quench"),
        "{text}"
    );
    assert!(
        text.contains("centred at the ages tw = 50.00, 200.0 s"),
        "{text}"
    );
    let r: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("ag.json")).unwrap()).unwrap();
    assert_eq!(
        r["settings"]["ages"]["ages"],
        serde_json::json!([50.0, 200.0])
    );
    for (i, sp) in r["spectra"].as_array().unwrap().iter().enumerate() {
        let want = truth["ages"][i]["t_eff_band"].as_f64().unwrap();
        let b = &sp["band"]["t_eff"];
        let (lo, hi) = (b["low"].as_f64().unwrap(), b["high"].as_f64().unwrap());
        assert!(
            lo <= want && want <= hi,
            "tw index {i}: [{lo}, {hi}] against {want}"
        );
    }
    // The few-periods caution is true at tw = 50 (25 s window, bin 2 at 0.39 Hz < 0.4 Hz)
    // and only there.
    let codes: Vec<(f64, String)> = r["spectra"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|s| s["cautions"].as_array().unwrap().clone())
        .map(|c| {
            (
                c["tw"].as_f64().unwrap_or(0.0),
                c["code"].as_str().unwrap().to_string(),
            )
        })
        .filter(|(_, c)| c.starts_with("age_window"))
        .collect();
    assert_eq!(codes, vec![(50.0, "age_window_few_periods".to_string())]);

    // A loss table by age: the same table under each tw, and one missing age refused.
    let loss = std::fs::read_to_string(dir.path().join("ag.loss.csv")).unwrap();
    let rows: Vec<&str> = loss.lines().skip(1).collect();
    let mut by_age = String::from("tw,f,loss\n");
    for tw in ["50", "200"] {
        for r in &rows {
            by_age.push_str(&format!("{tw},{r}\n"));
        }
    }
    std::fs::write(dir.path().join("by_age.csv"), &by_age).unwrap();
    let mut with_table = args.to_vec();
    with_table[7] = "by_age.csv";
    fdtemp()
        .current_dir(dir.path())
        .args(&with_table)
        .assert()
        .success()
        .stdout(predicates::str::contains("one table per age"));
    let mut other_ages = with_table.clone();
    other_ages[3] = "50,100";
    fdtemp()
        .current_dir(dir.path())
        .args(&other_ages)
        .assert()
        .code(2)
        .stderr(predicates::str::contains("no rows for tw = 100"));
    // A window past the end of the records (300 s): exit 2, the run named, no output.
    let mut late = args.to_vec();
    late[3] = "50,280";
    fdtemp()
        .current_dir(dir.path())
        .args(&late)
        .args(["--json", "late.json"])
        .assert()
        .code(2)
        .stderr(predicates::str::contains("but run 'run001' ends"));
    assert!(!dir.path().join("late.json").exists());
    // Without a dissipation, and with --psd-out: refused.
    fdtemp()
        .current_dir(dir.path())
        .args(["noise", "ag.csv", "--ages", "50"])
        .assert()
        .code(2);
    fdtemp()
        .current_dir(dir.path())
        .args([
            "noise",
            "ag.csv",
            "--ages",
            "50",
            "--resistance",
            "1",
            "--psd-out",
            "p.csv",
        ])
        .assert()
        .code(2)
        .stderr(predicates::str::contains("--psd-out"));
    assert!(!dir.path().join("p.csv").exists());
}

#[test]
fn aging_windows_are_tested_for_intermittency_age_by_age() {
    // Gaussian records (invented, scenarios::aging_noise): each age's windows are tested on
    // their own, and the verdicts and the per-age tables reach the JSON and the text.
    let dir = tempfile::tempdir().unwrap();
    fdtemp()
        .current_dir(dir.path())
        .args([
            "synth",
            "aging-noise",
            "--quick",
            "--samples",
            "6",
            "--out",
            "ag.csv",
        ])
        .assert()
        .success();
    let out = fdtemp()
        .current_dir(dir.path())
        .args([
            "noise",
            "ag.csv",
            "--ages",
            "50,200",
            "--age-span",
            "0.5",
            "--loss-file",
        ])
        .args([
            "ag.loss.csv",
            "--units",
            "reduced",
            "--convention",
            "loss",
            "--segment",
            "512",
        ])
        .args(["--intermittency", "-B", "199", "--json", "ag.json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let text = String::from_utf8(out).unwrap();
    assert!(text.contains("gaussian?   tw = 50 s:"), "{text}");
    assert!(text.contains("intermittency at tw = 200:"), "{text}");
    let r: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.path().join("ag.json")).unwrap()).unwrap();
    let by_age = r["intermittency_by_age"].as_array().unwrap();
    assert_eq!(by_age.len(), 2);
    assert_eq!(by_age[1]["tw"], 200.0);
    assert!(by_age[0]["test"]["p_value"].as_f64().is_some());
}

#[test]
#[ignore = "study, ~5 min: FDTEMP_AGING_CAMPAIGNS (default 200)"]
fn aging_intermittency_false_alarm_study() {
    // Gaussian records whose slow mode cools with age: how often does the per-age test call
    // them intermittent? Its power drift inside a window is not Gaussian stationarity, so
    // this measures what the drift costs at each age.
    use fdtemp::spectral::intermittency::{
        IntermittencySettings, IntermittencyVerdict, intermittency,
    };
    let campaigns: usize = std::env::var("FDTEMP_AGING_CAMPAIGNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(200);
    let ages = [50.0, 200.0];
    let mut flagged = [0usize; 2];
    for c in 0..campaigns {
        let spec = AgingNoiseSpec {
            runs: 6,
            duration: 300.0,
            seed: 5000 + c as u64,
            ..AgingNoiseSpec::default()
        };
        let records = spec.records();
        let s = AgeSettings {
            ages: ages.to_vec(),
            width: Width::Fraction(0.5),
            quench_at: 0.0,
        };
        let w = WelchSettings {
            sample_rate: spec.fs,
            segment: 512,
            overlap: 256,
        };
        for (i, &tw) in ages.iter().enumerate() {
            let (first, last) = s.samples(tw, spec.fs);
            let slices: Vec<Vec<f64>> = records.iter().map(|r| r[first..last].to_vec()).collect();
            let t = intermittency(
                &slices,
                &w,
                &IntermittencySettings {
                    seed: c as u64 + 1,
                    ..IntermittencySettings::default()
                },
            )
            .unwrap();
            flagged[i] += usize::from(t.verdict == IntermittencyVerdict::Intermittent);
        }
    }
    println!("| tw | window | campaigns | called intermittent (level 0.05) |");
    println!("|---|---|---|---|");
    for (i, tw) in ages.iter().enumerate() {
        let p = flagged[i] as f64 / campaigns as f64;
        let se = (p * (1.0 - p) / campaigns as f64).sqrt();
        println!(
            "| {tw} | {:?} | {campaigns} | {p:.3} ± {se:.3} |",
            settings_window(*tw)
        );
    }
}

fn settings_window(tw: f64) -> [f64; 2] {
    AgeSettings {
        ages: vec![tw],
        width: Width::Fraction(0.5),
        quench_at: 0.0,
    }
    .window(tw)
}

#[test]
fn aging_windows_take_two_channels_and_a_subtracted_amplifier() {
    // Source: Nyquist, Phys. Rev. 32, 110 (1928) — the resistor's 4kTR in both channels of
    // `synth resistor-two-channels` (stationary records, so every window holds T = 300 K),
    // each amplifier adding its own invented noise that the cross-spectrum removes.
    let dir = tempfile::tempdir().unwrap();
    let run = |args: &[&str]| {
        fdtemp()
            .current_dir(dir.path())
            .args(args)
            .assert()
            .success()
            .get_output()
            .stdout
            .clone()
    };
    run(&[
        "synth",
        "resistor-two-channels",
        "--quick",
        "--samples",
        "12",
        "--out",
        "rt.csv",
    ]);
    run(&[
        "noise",
        "rt.amp.csv",
        "--sample-rate",
        "10000",
        "--gain",
        "100",
        "--segment",
        "1024",
        "--psd-out",
        "amp.csv",
    ]);
    let common = [
        "--gain",
        "100",
        "--sample-rate",
        "10000",
        "--resistance",
        "1000",
        "-T",
        "300",
        "--ages",
        "2,4",
        "--age-window",
        "2",
        "--segment",
        "1024",
        "-B",
        "499",
    ];
    for (extra, json) in [
        (
            vec![
                "--cross-with",
                "rt.ch2.csv",
                "--cross-gain",
                "1000",
                "--intermittency",
            ],
            "cross.json",
        ),
        (
            vec!["--amplifier-noise", "amp.csv", "--errors", "normal"],
            "sub.json",
        ),
    ] {
        let mut args = vec!["noise", "rt.csv"];
        args.extend(common);
        args.extend(extra);
        args.extend(["--json", json]);
        run(&args);
        let r: serde_json::Value =
            serde_json::from_slice(&std::fs::read(dir.path().join(json)).unwrap()).unwrap();
        assert_eq!(r["spectra"].as_array().unwrap().len(), 2, "{json}");
        if json == "cross.json" {
            assert_eq!(r["intermittency_by_age"].as_array().unwrap().len(), 2);
        }
        for sp in r["spectra"].as_array().unwrap() {
            let b = &sp["band"]["t_eff"];
            let (lo, hi) = (b["low"].as_f64().unwrap(), b["high"].as_f64().unwrap());
            assert!(
                lo <= 300.0 && 300.0 <= hi,
                "{json} tw = {}: [{lo}, {hi}]",
                sp["tw"]
            );
        }
    }
}
