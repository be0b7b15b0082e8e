//! Everyday inputs of `fdtemp noise`: a time column, a recorder gain, the convention read
//! from the loss file's column name, log-spaced dissipation tables, and the caution when
//! T_eff is implausibly far from the bath at every frequency.

use assert_cmd::Command;
use fdtemp::spectral::noise::{Dissipation, convention_named};
use fdtemp::spectral::{Convention, SpectrumSettings, analyze_spectra};
use predicates::prelude::*;
use rand::RngExt;
use rand_distr::StandardNormal;
use std::fmt::Write;
use std::path::{Path, PathBuf};

/// Boltzmann's constant (SI, exact since 2019).
const K_B: f64 = 1.380649e-23;

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

/// A Johnson–Nyquist record of `r` ohm at `t` kelvin sampled at `fs`, times `gain`, with a
/// first column of times when `time` names it (`""`: a column without a header).
/// Source: Nyquist, Phys. Rev. 32, 110 (1928): one-sided voltage PSD 4 k T R.
fn resistor_record(dir: &Path, time: Option<&str>, gain: f64, seed: u64) -> PathBuf {
    let (t, r, fs) = (300.0, 1e3, 1e4);
    let sd = (4.0 * K_B * t * r * fs / 2.0).sqrt();
    let mut rng = fdtemp::resample::replicate_rng(seed, 0);
    let mut s = String::new();
    match time {
        Some("") | None => {}
        Some(name) => {
            let _ = writeln!(s, "{name},V");
        }
    }
    for i in 0..(1 << 17) {
        let z: f64 = rng.sample(StandardNormal);
        if time.is_some() {
            let _ = write!(s, "{:.6},", i as f64 / fs);
        }
        let _ = writeln!(s, "{:e}", gain * sd * z);
    }
    let path = dir.join(format!("rec-{seed}.csv"));
    std::fs::write(&path, s).unwrap();
    path
}

fn json_of(path: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

/// The band average and its interval from a noise JSON.
fn band(v: &serde_json::Value) -> (f64, f64, f64) {
    let e = &v["band"]["t_eff"];
    (
        e["estimate"].as_f64().unwrap(),
        e["low"].as_f64().unwrap(),
        e["high"].as_f64().unwrap(),
    )
}

fn codes(v: &serde_json::Value) -> Vec<String> {
    v["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["code"].as_str().unwrap().to_string())
        .collect()
}

#[test]
fn a_named_time_column_is_the_sample_rate_not_a_run() {
    let dir = tempfile::tempdir().unwrap();
    let rec = resistor_record(dir.path(), Some("time_s"), 1.0, 1);
    let json = dir.path().join("n.json");
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["--resistance", "1000", "-T", "300", "--json"])
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "1 run(s) of 131072 samples at 10000 Hz",
        ))
        .stdout(predicate::str::contains(
            "column 'time_s' (recognised by its name) holds the times",
        ));
    let v = json_of(&json);
    let (_, lo, hi) = band(&v);
    assert!(lo <= 300.0 && 300.0 <= hi, "[{lo}, {hi}]");
    assert!(!codes(&v).contains(&"implausible_scale".to_string()));
}

#[test]
fn an_evenly_rising_first_column_without_a_header_is_recognised_and_checked() {
    let dir = tempfile::tempdir().unwrap();
    let rec = resistor_record(dir.path(), Some(""), 1.0, 2);
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["--resistance", "1000", "-T", "300", "--sample-rate", "1e4"])
        .assert()
        .success()
        .stdout(predicate::str::contains("1 run(s) of 131072 samples"))
        .stdout(predicate::str::contains("recognised by its even steps"))
        .stdout(predicate::str::contains("agreeing with --sample-rate"));
    // A rate that disagrees with the time column is refused.
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["--resistance", "1000", "--sample-rate", "1000"])
        .assert()
        .code(2)
        .stdout("")
        .stderr(predicate::str::contains(
            "time column 'column 1' steps by 1.000e-4 (a sample rate of 10000 Hz), but \
             --sample-rate is 1000",
        ));
}

#[test]
fn a_gap_in_the_time_column_is_an_error_at_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("gap.csv");
    let mut s = String::from("t,V\n");
    for i in 0..100 {
        // Line 52 (row 51) jumps by three steps: two samples are missing.
        let t = if i < 50 { i } else { i + 2 };
        let _ = writeln!(s, "{:.4},{}", t as f64 * 1e-3, (i % 7) as f64 - 3.0);
    }
    std::fs::write(&path, s).unwrap();
    fdtemp()
        .arg("noise")
        .arg(&path)
        .args(["--segment", "16"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "gap.csv:52:1: time column 't' goes from 0.049 to 0.052, a step of",
        ));
}

#[test]
fn without_a_time_column_or_a_rate_the_error_says_what_to_give() {
    let dir = tempfile::tempdir().unwrap();
    let rec = resistor_record(dir.path(), None, 1.0, 3);
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["--resistance", "1000"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "give --sample-rate in samples per second",
        ));
}

#[test]
fn the_gain_is_divided_out_and_forgetting_it_raises_the_scale_caution() {
    let dir = tempfile::tempdir().unwrap();
    let rec = resistor_record(dir.path(), Some("time"), 1000.0, 4);
    let run = |extra: &[&str], name: &str| {
        let json = dir.path().join(name);
        fdtemp()
            .arg("noise")
            .arg(&rec)
            .args(["--resistance", "1000", "-T", "300", "--json"])
            .arg(&json)
            .args(extra)
            .assert()
            .success();
        json_of(&json)
    };
    let with = run(&["--gain", "1000"], "with.json");
    let (_, lo, hi) = band(&with);
    assert!(lo <= 300.0 && 300.0 <= hi, "[{lo}, {hi}]");
    assert!(!codes(&with).contains(&"implausible_scale".to_string()));
    let without = run(&[], "without.json");
    let (est, _, _) = band(&without);
    assert!((est / 3e8 - 1.0).abs() < 0.05, "{est}");
    assert!(codes(&without).contains(&"implausible_scale".to_string()));
}

#[test]
fn the_loss_files_column_name_sets_the_convention_and_an_unclear_one_is_refused() {
    assert_eq!(convention_named("Re Z (ohm)"), Some(Convention::Voltage));
    assert_eq!(convention_named("re_z"), Some(Convention::Voltage));
    assert_eq!(convention_named("ReY_S"), Some(Convention::Current));
    assert_eq!(convention_named("chi''"), Some(Convention::Loss));
    assert_eq!(convention_named("loss"), Some(Convention::Loss));
    assert_eq!(convention_named("value"), None);
    let dir = tempfile::tempdir().unwrap();
    let rec = resistor_record(dir.path(), Some("time_s"), 1.0, 5);
    let named = dir.path().join("rez.csv");
    std::fs::write(&named, "f_Hz,Re Z (ohm)\n1,1000\n100000,1000\n").unwrap();
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["-T", "300", "--loss-file"])
        .arg(&named)
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "column 'Re Z (ohm)' read as Re Z (convention voltage)",
        ))
        .stdout(predicate::str::contains("equal to the bath temperature"));
    let unclear = dir.path().join("unclear.csv");
    std::fs::write(&unclear, "f,value\n1,1000\n100000,1000\n").unwrap();
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["-T", "300", "--loss-file"])
        .arg(&unclear)
        .assert()
        .code(2)
        .stdout("")
        .stderr(format!(
            "error: {}:1:2: column 'value' does not say which dissipation it is; expected a \
             name such as loss, Re Z or Re Y, or give --convention loss|angular|voltage|current\n",
            unclear.display()
        ));
}

/// Re Z of a resistor R in parallel with a capacitor C: R / (1 + (ωRC)²) (circuit
/// theory; common practice).
fn rc_re_z(f: f64) -> f64 {
    let (r, c) = (1e3, 1e-9);
    let w = 2.0 * std::f64::consts::PI * f;
    r / (1.0 + (w * r * c).powi(2))
}

#[test]
fn a_log_spaced_rc_impedance_table_is_interpolated_within_0_2_percent() {
    // 10 rows per decade from 1 Hz to 10 MHz (corner at 159 kHz); every bin of a 10 kHz ×
    // 4096 Welch grid and of a 1 MHz one.
    let table: Vec<(f64, f64)> = (0..=70)
        .map(|k| {
            let f = 10f64.powf(k as f64 / 10.0);
            (f, rc_re_z(f))
        })
        .collect();
    let d = Dissipation::Table(table);
    let mut worst: f64 = 0.0;
    for fs in [1e4, 1e6, 1.6e7] {
        for k in 1..=2048 {
            let f = k as f64 * fs / 4096.0;
            if let Some(v) = d.at(f) {
                worst = worst.max((v / rc_re_z(f) - 1.0).abs());
            }
        }
    }
    println!("worst relative error {worst:.2e}");
    // Measured 1.6e-4; linear interpolation in f is off by 4% here.
    assert!(worst < 0.002, "worst relative error {worst}");
    assert_eq!(d.at(0.5), None, "never extrapolated below the table");
    assert_eq!(d.at(2e7), None, "never extrapolated above the table");
}

#[test]
fn an_aging_spectrum_hot_at_low_frequencies_is_not_called_implausible() {
    // Invented known truth: T_eff = T (1 + (1 kHz / f)²), 10⁶ T at 1 Hz, T at high f.
    let freqs: Vec<f64> = (1..=2000).map(|k| k as f64 * 5.0).collect();
    let t = 300.0;
    let loss: Vec<f64> = freqs.iter().map(|_| 1e-3).collect();
    let psd: Vec<f64> = freqs
        .iter()
        .map(|&f| {
            let teff = t * (1.0 + (1e3 / f).powi(2));
            2.0 * K_B * teff * 1e-3 / (std::f64::consts::PI * f)
        })
        .collect();
    let n = freqs.len();
    let group = fdtemp::spectral::input::SpectrumGroup {
        tw: None,
        runs: vec!["1".into()],
        psd: ndarray::Array2::from_shape_vec((1, n), psd).unwrap(),
        loss: ndarray::Array2::from_shape_vec((1, n), loss).unwrap(),
        dof: Some(ndarray::Array2::from_elem((1, n), 60.0)),
        freqs,
    };
    let s = SpectrumSettings {
        temperature: Some(t),
        ..SpectrumSettings::default()
    };
    let r = analyze_spectra(&[group], &[], &s, None).unwrap();
    assert!(r.departure.is_some());
    assert!(
        !r.cautions.iter().any(|c| matches!(
            c.finding,
            fdtemp::spectral::findings::SpectralFinding::ImplausibleScale { .. }
        )),
        "{:?}",
        r.cautions
    );
}

/// One spectrum of `n` bins with chi-square noise of `nu` degrees of freedom about
/// T_eff(f) = `t_of(f)`, in the loss convention with χ'' = 10⁻³.
fn noisy_spectrum(
    seed: u64,
    nu: f64,
    t_of: &dyn Fn(f64) -> f64,
) -> fdtemp::spectral::input::SpectrumGroup {
    use rand_distr::{ChiSquared, Distribution};
    let mut rng = fdtemp::resample::replicate_rng(seed, 0);
    let chi = ChiSquared::new(nu).unwrap();
    let freqs: Vec<f64> = (1..=400).map(|k| k as f64 * 5.0).collect();
    let n = freqs.len();
    let psd: Vec<f64> = freqs
        .iter()
        .map(|&f| {
            let mean = 2.0 * K_B * t_of(f) * 1e-3 / (std::f64::consts::PI * f);
            mean * chi.sample(&mut rng) / nu
        })
        .collect();
    fdtemp::spectral::input::SpectrumGroup {
        tw: None,
        runs: vec!["1".into()],
        psd: ndarray::Array2::from_shape_vec((1, n), psd).unwrap(),
        loss: ndarray::Array2::from_elem((1, n), 1e-3),
        dof: Some(ndarray::Array2::from_elem((1, n), nu)),
        freqs,
    }
}

/// The share of 200 noisy spectra (chi-square, ν = 20 per bin) on which the scale caution
/// fires, for the truth `t_of` against a bath of 300 K.
fn scale_caution_rate(t_of: &dyn Fn(f64) -> f64, seed0: u64) -> f64 {
    let s = SpectrumSettings {
        temperature: Some(300.0),
        ..SpectrumSettings::default()
    };
    let fired = (0..200)
        .filter(|i| {
            let g = noisy_spectrum(seed0 + i, 20.0, t_of);
            let r = analyze_spectra(&[g], &[], &s, None).unwrap();
            r.cautions.iter().any(|c| {
                matches!(
                    c.finding,
                    fdtemp::spectral::findings::SpectralFinding::ImplausibleScale { .. }
                )
            })
        })
        .count();
    fired as f64 / 200.0
}

#[test]
fn the_scale_caution_fires_where_it_is_true_and_not_elsewhere() {
    // Measured rates over 200 spectra each (docs/validation.md).
    let at_bath = scale_caution_rate(&|_| 300.0, 1000);
    let hot_at_low_f = scale_caution_rate(&|f| 300.0 * (1.0 + (500.0 / f).powi(2)), 2000);
    let ten_times = scale_caution_rate(&|_| 3000.0, 3000);
    let gain_left_in = scale_caution_rate(&|_| 300.0 * 1e6, 4000);
    println!(
        "at bath {at_bath}, hot below 500 Hz {hot_at_low_f}, 10 T {ten_times}, gain 1e6 {gain_left_in}"
    );
    assert_eq!(at_bath, 0.0);
    assert_eq!(hot_at_low_f, 0.0);
    assert_eq!(gain_left_in, 1.0);
    // A factor exactly 10: the intervals straddle the threshold; it fires in some only.
    assert!(ten_times < 1.0, "{ten_times}");
}
