//! The frequency domain: Welch PSD against a reference library, Johnson–Nyquist noise,
//! the four conventions, interval coverage, run resampling, departure detection, and bad
//! inputs with their exact messages.

use assert_cmd::Command;
use fdtemp::common::Units;
use fdtemp::report::spectrum::verdict;
use fdtemp::spectral::analysis::{Direction, ErrorModel, SpectrumSettings};
use fdtemp::spectral::findings::{SpectralFinding, SpectralVerdict};
use fdtemp::spectral::input::{SpectrumGroup, parse_spectra};
use fdtemp::spectral::welch::{Welch, WelchSettings};
use fdtemp::spectral::{Convention, analyze_spectra};
use ndarray::Array2;
use predicates::prelude::*;
use rand::RngExt;
use rand_distr::{ChiSquared, Distribution, StandardNormal};
use std::path::Path;

const K_B: f64 = 1.380649e-23;

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

#[test]
fn welch_psd_matches_scipy_signal_welch() {
    // Source: scipy.signal.welch (scipy 1.17.1), values frozen in fixtures/welch by
    // fixtures/welch/make_reference.py (Hann, nperseg 64, noverlap 32, constant detrend,
    // density scaling, fs = 100 Hz).
    let mut w = Welch::new(WelchSettings {
        sample_rate: 100.0,
        segment: 64,
        overlap: 32,
    })
    .unwrap();
    fdtemp::spectral::input::stream_records(Path::new("fixtures/welch/series.txt"), |_, v| {
        w.push(v)
    })
    .unwrap();
    let psd = w.finish().unwrap();
    let reference: Vec<(f64, f64)> = std::fs::read_to_string("fixtures/welch/reference.csv")
        .unwrap()
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with('f'))
        .map(|l| {
            let (a, b) = l.split_once(',').unwrap();
            (a.parse().unwrap(), b.parse().unwrap())
        })
        .collect();
    assert_eq!(psd.freqs.len(), reference.len());
    let nyquist = reference.len() - 1;
    for (j, (f, p)) in reference.iter().enumerate() {
        // scipy's density scaling leaves the Nyquist bin undoubled; fdtemp doubles it to
        // the one-sided density (docs/spectral.md), so there it reads twice scipy's value.
        let p = if j == nyquist { 2.0 * p } else { *p };
        assert!((psd.freqs[j] - f).abs() < 1e-12);
        assert!(
            ((psd.psd[j] - p) / p).abs() < 1e-10,
            "bin {j}: {} vs {p}",
            psd.psd[j]
        );
    }
    assert_eq!(psd.segments, 30);
}

/// Writes a white Gaussian record whose one-sided PSD is `level` (variance level·fs/2).
fn white_record(path: &Path, n: usize, level: f64, fs: f64, seed: u64) {
    use std::fmt::Write;
    let mut rng = fdtemp::resample::replicate_rng(seed, 0);
    let sd = (level * fs / 2.0).sqrt();
    let mut s = String::with_capacity(n * 24);
    for _ in 0..n {
        let z: f64 = rng.sample(StandardNormal);
        let _ = writeln!(s, "{:e}", sd * z);
    }
    std::fs::write(path, s).unwrap();
}

#[test]
fn johnson_nyquist_noise_of_a_resistor_gives_back_its_temperature() {
    // Source: Nyquist, Phys. Rev. 32, 110 (1928): one-sided voltage noise 4 k T R.
    // 1 kΩ at 300 K: sqrt(4kTR) = 4.0704 nV/√Hz (handbook value).
    let (t, r, fs) = (300.0, 1e3, 1e4);
    assert!(((4.0 * K_B * t * r).sqrt() / 4.0704e-9 - 1.0).abs() < 1e-4);
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("resistor.txt");
    white_record(&rec, 1 << 20, 4.0 * K_B * t * r, fs, 7);
    let json = dir.path().join("j.json");
    let psd = dir.path().join("psd.csv");
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args([
            "--sample-rate",
            "1e4",
            "--resistance",
            "1000",
            "-T",
            "300",
            "--json",
        ])
        .arg(&json)
        .arg("--psd-out")
        .arg(&psd)
        .assert()
        .success()
        .stdout(predicate::str::contains("G_V / (4 k Re Z)"))
        .stdout(predicate::str::contains(
            "equal to the bath temperature 300.0 K within errors",
        ));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    let band = &v["band"]["t_eff"];
    let (est, lo, hi) = (
        band["estimate"].as_f64().unwrap(),
        band["low"].as_f64().unwrap(),
        band["high"].as_f64().unwrap(),
    );
    assert!((est / t - 1.0).abs() < 0.01, "T_eff {est}");
    assert!(lo <= t && t <= hi, "[{lo}, {hi}]");
    assert!(v["departure"].is_null());
    assert_eq!(v["schema"], 3);
    // Band edges print as plain numbers: the top edge is the Nyquist frequency, 5000 Hz.
    let tests = v["spectra"][0]["test_bands"].as_array().unwrap();
    assert_eq!(tests.last().unwrap()["fmax"].as_f64(), Some(5000.0));
    // The PSD file reads back into `spectrum` with the same band average.
    fdtemp()
        .arg("spectrum")
        .arg(&psd)
        .args(["-T", "300", "--convention", "voltage"])
        .assert()
        .success()
        .stdout(predicate::str::contains("window      Hann"))
        .stdout(predicate::str::contains(format!(
            "T_eff = {}",
            fdtemp::report::sig(est, 4)
        )));
}

fn group(freqs: &[f64], psd: Vec<f64>, loss: Vec<f64>, dof: f64) -> SpectrumGroup {
    let n = freqs.len();
    SpectrumGroup {
        tw: None,
        runs: vec![String::new()],
        freqs: freqs.to_vec(),
        psd: Array2::from_shape_vec((1, n), psd).unwrap(),
        loss: Array2::from_shape_vec((1, n), loss).unwrap(),
        dof: Some(Array2::from_elem((1, n), dof)),
    }
}

#[test]
fn each_convention_gives_back_the_temperature_its_formula_was_built_with() {
    // Source: the fluctuation–dissipation theorem in its usual forms (common practice):
    // G = 2kTχ''/(πf) one-sided per Hz; S = 2kTχ''/ω two-sided per rad/s;
    // G_V = 4kT Re Z; G_I = 4kT Re Y.
    let t = 4.2;
    let freqs: Vec<f64> = (1..=50).map(|i| i as f64 * 0.7).collect();
    let loss: Vec<f64> = freqs.iter().map(|f| 1e-3 * (1.0 + f / 10.0)).collect();
    let pi = std::f64::consts::PI;
    type PsdOf = Box<dyn Fn(f64, f64) -> f64>;
    let cases: [(Convention, PsdOf); 4] = [
        (
            Convention::Loss,
            Box::new(move |f, l| 2.0 * K_B * t * l / (pi * f)),
        ),
        (
            Convention::Angular,
            Box::new(move |f, l| 2.0 * K_B * t * l / (2.0 * pi * f)),
        ),
        (Convention::Voltage, Box::new(move |_, l| 4.0 * K_B * t * l)),
        (Convention::Current, Box::new(move |_, l| 4.0 * K_B * t * l)),
    ];
    for (conv, psd_of) in cases {
        let psd: Vec<f64> = freqs
            .iter()
            .zip(&loss)
            .map(|(&f, &l)| psd_of(f, l))
            .collect();
        let g = group(&freqs, psd, loss.clone(), 100.0);
        let s = SpectrumSettings {
            temperature: Some(t),
            convention: conv,
            ..SpectrumSettings::default()
        };
        let r = analyze_spectra(&[g], &[], &s, None).unwrap();
        for p in &r.points {
            assert!(
                (p.t_eff / t - 1.0).abs() < 1e-12,
                "{conv:?} at {} Hz: {}",
                p.f,
                p.t_eff
            );
        }
        assert!(r.departure.is_none(), "{conv:?}");
    }
}

#[test]
fn chi_square_intervals_cover_the_truth_95_percent_of_the_time() {
    // Per-frequency coverage over 200 synthetic spectra × 100 frequencies, PSD values drawn
    // from G χ²_ν/ν (ν = 20). 20,000 independent trials: the binomial SD of the coverage is
    // 0.0015; the tolerance is 0.01.
    let (t, nu) = (2.0, 20.0);
    let freqs: Vec<f64> = (1..=100).map(f64::from).collect();
    let chi = ChiSquared::new(nu).unwrap();
    let (mut hits, mut total) = (0usize, 0usize);
    for seed in 0..200 {
        let mut rng = fdtemp::resample::replicate_rng(1000 + seed, 0);
        let loss = vec![1.0; 100];
        let psd: Vec<f64> = freqs
            .iter()
            .map(|&f| 2.0 * t / (std::f64::consts::PI * f) * chi.sample(&mut rng) / nu)
            .collect();
        let s = SpectrumSettings {
            units: Units::Reduced,
            ..SpectrumSettings::default()
        };
        let r = analyze_spectra(&[group(&freqs, psd, loss, nu)], &[], &s, None).unwrap();
        for p in &r.points {
            total += 1;
            hits += usize::from(p.low.unwrap() <= t && t <= p.high.unwrap());
        }
    }
    let cov = hits as f64 / total as f64;
    assert!((cov - 0.95).abs() < 0.01, "coverage {cov}");
}

#[test]
fn hann_band_average_interval_covers_the_truth_95_percent_of_the_time() {
    // 300 white records through Welch (Hann, 50% overlap): the band average's interval uses
    // Welch's overlap dof and the correlation of neighbouring bins (4/9, 1/36). With
    // independent-bin dof it would cover far less. Binomial SD at 300 trials: 1.3%;
    // tolerance 4%.
    let (level, fs) = (1.0, 1.0);
    let mut hits = 0;
    let trials = 300;
    for seed in 0..trials {
        let mut w = Welch::new(WelchSettings {
            sample_rate: fs,
            segment: 64,
            overlap: 32,
        })
        .unwrap();
        let mut rng = fdtemp::resample::replicate_rng(5000 + seed, 0);
        for _ in 0..(64 * 40) {
            let z: f64 = rng.sample(StandardNormal);
            w.push(z * (level * fs / 2.0f64).sqrt());
        }
        let p = w.finish().unwrap();
        let n = p.freqs.len();
        let keep: Vec<usize> = (2..n - 1).collect();
        let g = SpectrumGroup {
            tw: None,
            runs: vec![String::new()],
            freqs: keep.iter().map(|&j| p.freqs[j]).collect(),
            psd: Array2::from_shape_fn((1, keep.len()), |(_, j)| p.psd[keep[j]]),
            loss: Array2::from_elem((1, keep.len()), 0.25),
            dof: Some(Array2::from_shape_fn((1, keep.len()), |(_, j)| {
                p.dof[keep[j]]
            })),
        };
        let s = SpectrumSettings {
            units: Units::Reduced,
            convention: Convention::Voltage,
            ..SpectrumSettings::default()
        };
        let r = analyze_spectra(
            &[g],
            &fdtemp::spectral::input::Window::Hann.bin_rho2(),
            &s,
            None,
        )
        .unwrap();
        let b = r.band.unwrap().t_eff;
        // PSD level 1 with Re Z = 0.25 and k = 1 gives T = 1.
        hits += usize::from(b.low.unwrap() <= 1.0 && 1.0 <= b.high.unwrap());
    }
    let cov = hits as f64 / trials as f64;
    assert!((cov - 0.95).abs() < 0.04, "coverage {cov}");
}

/// A spectrum CSV with `runs` runs whose T_eff(f) = t (1 + (f0/f)²), PSD noise χ²_ν/ν.
fn spectrum_csv(path: &Path, runs: usize, t: f64, f0: f64, nu: f64, seed: u64, with_dof: bool) {
    let teff = move |f: f64| t * (1.0 + (f0 / f).powi(2));
    spectrum_csv_with(path, runs, &teff, nu, seed, with_dof);
}

/// A spectrum CSV (200 log-spaced frequencies, 0.1 Hz to 1 kHz) with the given T_eff(f).
fn spectrum_csv_with(
    path: &Path,
    runs: usize,
    teff: &dyn Fn(f64) -> f64,
    nu: f64,
    seed: u64,
    with_dof: bool,
) {
    use std::fmt::Write;
    let chi = ChiSquared::new(nu).unwrap();
    let mut rng = fdtemp::resample::replicate_rng(seed, 0);
    let mut s = String::from(if with_dof {
        "run,f,psd,loss,dof\n"
    } else {
        "run,f,psd,loss\n"
    });
    for r in 0..runs {
        for i in 0..200 {
            let f = 10f64.powf(-1.0 + 4.0 * f64::from(i) / 199.0);
            let loss = 1e-20 * (1.0 + f);
            let g =
                2.0 * K_B * teff(f) * loss / (std::f64::consts::PI * f) * chi.sample(&mut rng) / nu;
            let _ = write!(s, "r{r},{f:e},{g:e},{loss:e}");
            if with_dof {
                let _ = write!(s, ",{nu}");
            }
            s.push('\n');
        }
    }
    std::fs::write(path, s).unwrap();
}

#[test]
fn runs_are_resampled_and_the_band_average_covers_the_bath_temperature() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("runs.csv");
    spectrum_csv(&file, 20, 300.0, 0.0, 8.0, 3, false);
    let json = dir.path().join("r.json");
    fdtemp()
        .arg("spectrum")
        .arg(&file)
        .args(["-T", "300", "-B", "1000", "--json"])
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains("from 1000 resamples of runs"));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    assert_eq!(v["spectra"][0]["errors"], "runs");
    assert_eq!(v["spectra"][0]["n_runs"], 20);
    let b = &v["band"]["t_eff"];
    assert!(
        b["low"].as_f64().unwrap() <= 300.0 && 300.0 <= b["high"].as_f64().unwrap(),
        "{b}"
    );
    assert!(v["points"][0]["low"].is_number());
}

#[test]
fn a_hot_low_frequency_regime_is_detected_and_a_flat_one_is_not() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("hot.csv");
    // T_eff = T (1 + (1 Hz / f)²): twice T at 1 Hz, 1% above T at 10 Hz.
    spectrum_csv(&file, 1, 300.0, 1.0, 200.0, 11, true);
    let groups = fdtemp::spectral::input::read_spectra(&file).unwrap();
    let s = SpectrumSettings {
        temperature: Some(300.0),
        ..SpectrumSettings::default()
    };
    let r = analyze_spectra(&groups, &[], &s, None).unwrap();
    let d = r.departure.expect("a departure");
    assert_eq!(d.direction, Direction::Hot);
    assert!(
        (0.5..=10.0).contains(&d.below_hz),
        "departure below {} Hz",
        d.below_hz
    );
    assert!((d.from_hz - 0.1).abs() < 1e-12, "from {} Hz", d.from_hz);
    assert!(matches!(
        r.spectra[0].verdict,
        SpectralVerdict::BandAverage {
            departure: Some((Direction::Hot, _)),
            ..
        }
    ));
    assert!(verdict(&r.spectra[0].verdict).contains("detectably above T (hot)"));
    // Flat spectra: the corrected test rarely reports a departure (at most 5% of runs
    // by construction; allow 2 of 20).
    let mut false_alarms = 0;
    for seed in 0..20 {
        let flat = dir.path().join(format!("flat{seed}.csv"));
        spectrum_csv(&flat, 1, 300.0, 0.0, 200.0, 100 + seed, true);
        let g = fdtemp::spectral::input::read_spectra(&flat).unwrap();
        let r = analyze_spectra(&g, &[], &s, None).unwrap();
        false_alarms += usize::from(r.departure.is_some());
        assert_eq!(r.spectra[0].errors, ErrorModel::ChiSquare);
    }
    assert!(false_alarms <= 2, "{false_alarms} false departures in 20");
}

#[test]
fn a_cold_low_frequency_regime_is_reported_as_cold() {
    // Invented known truth: T_eff = T (1 − 0.5 / (1 + (f / 1 Hz)²)), half of T at low f.
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("cold.csv");
    let teff = |f: f64| 300.0 * (1.0 - 0.5 / (1.0 + f * f));
    spectrum_csv_with(&file, 1, &teff, 200.0, 12, true);
    let groups = fdtemp::spectral::input::read_spectra(&file).unwrap();
    let s = SpectrumSettings {
        temperature: Some(300.0),
        ..SpectrumSettings::default()
    };
    let r = analyze_spectra(&groups, &[], &s, None).unwrap();
    let d = r.departure.expect("a departure");
    assert_eq!(d.direction, Direction::Cold);
    assert!(
        (0.2..=10.0).contains(&d.below_hz),
        "below {} Hz",
        d.below_hz
    );
    assert!(verdict(&r.spectra[0].verdict).contains("detectably below T (cold)"));
    assert!(r.spectra[0].separate_bands.is_empty());
}

#[test]
fn one_isolated_hot_band_is_a_separate_finding_not_a_departure_frequency() {
    // Invented known truth: T_eff = T except twice T between 100 and 150 Hz (a line).
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("line.csv");
    let teff = |f: f64| {
        if (100.0..150.0).contains(&f) {
            600.0
        } else {
            300.0
        }
    };
    spectrum_csv_with(&file, 1, &teff, 200.0, 13, true);
    let groups = fdtemp::spectral::input::read_spectra(&file).unwrap();
    let s = SpectrumSettings {
        temperature: Some(300.0),
        ..SpectrumSettings::default()
    };
    let r = analyze_spectra(&groups, &[], &s, None).unwrap();
    assert!(r.departure.is_none(), "{:?}", r.departure);
    let fit = &r.spectra[0];
    assert!(!fit.separate_bands.is_empty());
    assert!(
        fit.separate_bands
            .iter()
            .all(|b| b.direction == Direction::Hot && b.fmax > 90.0 && b.fmin < 160.0)
    );
    assert!(
        fit.cautions
            .iter()
            .any(|c| matches!(c.finding, SpectralFinding::SeparateBands { .. })),
        "{:?}",
        fit.cautions
    );
    assert!(verdict(&fit.verdict).contains("no low-frequency departure"));
}

#[test]
fn a_white_record_reads_t_in_its_nyquist_bin_within_its_interval() {
    // Source: Nyquist (1928), one-sided G_V = 4kTR for a resistor; white Gaussian samples
    // of variance G fs / 2 have one-sided density G at every frequency up to fs/2 (common
    // practice). The undoubled Nyquist bin would read T/2, far outside its interval.
    use fdtemp::spectral::noise::{Dissipation, RecordPsd, to_group};
    let (t, r, fs) = (300.0, 1e3, 1e4);
    let settings = WelchSettings {
        sample_rate: fs,
        segment: 256,
        overlap: 128,
    };
    let mut w = Welch::new(settings).unwrap();
    let mut rng = fdtemp::resample::replicate_rng(31, 0);
    let sd = (4.0 * K_B * t * r * fs / 2.0).sqrt();
    for _ in 0..(256 * 200) {
        let z: f64 = rng.sample(StandardNormal);
        w.push(sd * z);
    }
    let rec = RecordPsd {
        runs: vec![String::new()],
        psd: vec![w.finish().unwrap()],
        bin_rho2: fdtemp::spectral::input::Window::Hann.bin_rho2(),
        sample_rate: fs,
        time: None,
        gain: 1.0,
    };
    let (g, _) = to_group(&rec, &Dissipation::Constant(r)).unwrap();
    let s = SpectrumSettings {
        temperature: Some(t),
        convention: Convention::Voltage,
        ..SpectrumSettings::default()
    };
    let rep = analyze_spectra(&[g], &rec.bin_rho2, &s, None).unwrap();
    let top = rep.points.last().unwrap();
    assert_eq!(top.f, fs / 2.0);
    let (lo, hi) = (top.low.unwrap(), top.high.unwrap());
    assert!(
        lo <= t && t <= hi,
        "Nyquist bin: {} K [{lo}, {hi}]",
        top.t_eff
    );
    // Half the degrees of freedom of its neighbour (a real transform at fs/2).
    let below = &rep.points[rep.points.len() - 2];
    assert!((top.dof.unwrap() / below.dof.unwrap() - 0.5).abs() < 1e-12);
}

#[test]
fn spectra_per_waiting_time_are_analysed_separately() {
    let text =
        "tw,f,psd,loss,dof\n10,1,1e-20,1,50\n10,2,2e-20,1,50\n100,1,3e-20,1,50\n100,2,4e-20,1,50\n";
    let g = parse_spectra(text.as_bytes(), Path::new("tw.csv")).unwrap();
    assert_eq!(g.len(), 2);
    assert_eq!(g[0].tw, Some(10.0));
    assert_eq!(g[1].freqs, vec![1.0, 2.0]);
}

/// Each malformed input, and the exact message it must produce (exit code 2).
#[test]
fn bad_spectral_inputs_give_their_exact_message_and_exit_code_2() {
    let dir = tempfile::tempdir().unwrap();
    let spectra: &[(&str, &str, &str)] = &[
        (
            "zero_f.csv",
            "f,psd,loss,dof\n0,1,1,10\n",
            ":2:1: column 'f' is 0, expected a positive frequency in hertz",
        ),
        (
            "negative_f.csv",
            "f,psd,loss,dof\n-1,1,1,10\n",
            ":2:1: column 'f' is -1, expected a positive frequency in hertz",
        ),
        (
            "zero_loss.csv",
            "f,psd,loss,dof\n1,1,0,10\n",
            ":2:3: column 'loss' is 0, expected a positive number (the dissipative part is positive for a passive system)",
        ),
        (
            "negative_psd.csv",
            "f,psd,loss,dof\n1,-2,1,10\n",
            ":2:2: column 'psd' is -2, expected a number >= 0 (a power spectral density)",
        ),
        (
            "unsorted.csv",
            "f,psd,loss,dof\n1,1,1,10\n3,1,1,10\n2,1,1,10\n",
            ":4:1: f = 2 is not above the previous frequency 3 (line 3); expected increasing frequencies",
        ),
        (
            "mismatched.csv",
            "run,f,psd,loss,dof\na,1,1,1,10\na,2,1,1,10\nb,1,1,1,10\n",
            ": run 'b' has 1 frequencies and run 'a' has 2; expected the same frequencies in every run",
        ),
        (
            "no_dof.csv",
            "f,psd,loss\n1,1,1\n2,1,1\n",
            ": no way to form intervals: a single run and no degrees of freedom; add a 'dof' column, give --dof, or give several runs in a 'run' column",
        ),
        (
            "no_loss.csv",
            "f,psd\n1,1\n",
            ":1: no column 'loss' in the header (found: f, psd); expected columns f, psd, loss",
        ),
    ];
    for (name, text, message) in spectra {
        let path = dir.path().join(name);
        std::fs::write(&path, text).unwrap();
        fdtemp()
            .arg("spectrum")
            .arg(&path)
            .args(["-T", "300"])
            .assert()
            .code(2)
            .stdout("")
            .stderr(format!("error: {}{message}\n", path.display()));
    }
    // `noise FILE ARGS` must fail with exit code 2 and exactly this message.
    let refuses = |name: &str, content: &str, args: &[&str], message: &dyn Fn(&Path) -> String| {
        let path = dir.path().join(name);
        std::fs::write(&path, content).unwrap();
        fdtemp()
            .arg("noise")
            .arg(&path)
            .args(args)
            .assert()
            .code(2)
            .stderr(message(&path));
        path
    };
    refuses("empty.txt", "", &["--sample-rate", "10"], &|p| {
        format!(
            "error: {}: the record is empty; expected one number per line (or one column per run)\n",
            p.display()
        )
    });
    let short = refuses("short.txt", "1\n2\n3\n", &["--sample-rate", "10"], &|p| {
        format!(
            "error: {}: the record has 3 samples, fewer than one segment of 4096; lower --segment\n",
            p.display()
        )
    });
    refuses(
        "text.txt",
        "v\n1\nx\n",
        &["--sample-rate", "10", "--segment", "8"],
        &|p| {
            format!(
                "error: {}:3:1: column 'v' is 'x', expected a number\n",
                p.display()
            )
        },
    );
    for rate in ["0", "-5", "nan"] {
        fdtemp()
            .arg("noise")
            .arg(&short)
            .args(["--sample-rate", rate])
            .assert()
            .code(2)
            .stderr(
                predicate::str::contains("--sample-rate is").and(predicate::str::contains(
                    "expected a positive number of samples per second",
                )),
            );
    }
}

#[test]
fn a_two_run_record_with_an_interpolated_impedance_table_gives_back_the_temperature() {
    // Two columns = two independent runs of a 2 kΩ resistor at 77 K; Re Z from a table
    // that covers 10 Hz to 4 kHz only, so the frequencies outside are left out (with a
    // caution). Source: Nyquist (1928), G_V = 4 k T R.
    let dir = tempfile::tempdir().unwrap();
    let (t, r, fs) = (77.0, 2000.0, 1e4);
    let sd = (4.0 * K_B * t * r * fs / 2.0).sqrt();
    let mut rng = fdtemp::resample::replicate_rng(21, 0);
    let mut text = String::from("left,right\n");
    for _ in 0..(1 << 18) {
        let (a, b): (f64, f64) = (rng.sample(StandardNormal), rng.sample(StandardNormal));
        text.push_str(&format!("{:e},{:e}\n", sd * a, sd * b));
    }
    let rec = dir.path().join("two.csv");
    std::fs::write(&rec, text).unwrap();
    let table = dir.path().join("rez.csv");
    std::fs::write(&table, "f,re_z\n10,2000\n1000,2000\n4000,2000\n").unwrap();
    let json = dir.path().join("two.json");
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args([
            "--sample-rate",
            "1e4",
            "--segment",
            "1024",
            "--convention",
            "voltage",
            "--loss-file",
        ])
        .arg(&table)
        .arg("--json")
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains("2 run(s) of 262144 samples"))
        .stdout(predicate::str::contains(
            "frequencies outside the dissipation table's range (10–4000 Hz) were left out",
        ));
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    assert_eq!(v["spectra"][0]["n_runs"], 2);
    assert_eq!(v["spectra"][0]["errors"], "chi-square");
    let b = &v["band"];
    assert!(b["fmin"].as_f64().unwrap() >= 10.0 && b["fmax"].as_f64().unwrap() <= 4000.0);
    let e = &b["t_eff"];
    assert!(
        (e["estimate"].as_f64().unwrap() / t - 1.0).abs() < 0.01,
        "{e}"
    );
    assert!(
        e["low"].as_f64().unwrap() <= t && t <= e["high"].as_f64().unwrap(),
        "{e}"
    );
}

#[test]
fn chi_square_quantiles_match_tables_and_stay_continuous_at_large_dof() {
    use fdtemp::spectral::analysis::chi2_quantile;
    // Source: standard chi-square tables (e.g. Abramowitz & Stegun, Table 26.8):
    // χ²(1; 0.95) = 3.841, χ²(10; 0.975) = 20.483, χ²(100; 0.05) = 77.929.
    assert!((chi2_quantile(1.0, 0.95).unwrap() - 3.841).abs() < 1e-3);
    assert!((chi2_quantile(10.0, 0.975).unwrap() - 20.483).abs() < 1e-3);
    assert!((chi2_quantile(100.0, 0.05).unwrap() - 77.929).abs() < 1e-3);
    // Wilson–Hilferty takes over above 1e5: both sides agree to 1e-7 relative.
    for p in [0.025, 0.5, 0.975] {
        let below = chi2_quantile(1e5 * (1.0 - 1e-12), p).unwrap();
        let above = chi2_quantile(1e5 * (1.0 + 1e-12), p).unwrap();
        assert!(
            (below / above - 1.0).abs() < 1e-7,
            "p = {p}: {below} vs {above}"
        );
    }
    // Absurd degrees of freedom return at once.
    assert!(chi2_quantile(1e33, 0.975).unwrap().is_finite());
}
