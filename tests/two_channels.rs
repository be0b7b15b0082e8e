//! Two channels and a subtracted amplifier noise (`noise --cross-with`, `--amplifier-noise`):
//! Johnson–Nyquist recovered through two noisy amplifiers where one channel is biased, the
//! cross-spectrum's variance against its Gaussian formula, refusals of inconsistent inputs
//! and options, the cautions, the JSON; (ignored) the coverage study of both estimators.

use assert_cmd::Command;
use fdtemp::scenarios::sim::resistor::two_channels as tc;
use fdtemp::spectral::analysis::{ErrorModel, SpectrumReport};
use fdtemp::spectral::cross::{PairPsd, cross_welch, to_cross_group};
use fdtemp::spectral::findings::SpectralFinding;
use fdtemp::spectral::noise::{Dissipation, RecordPsd};
use fdtemp::spectral::subtract::{AmplifierNoise, subtract};
use fdtemp::spectral::welch::{Psd, Welch, WelchSettings, bin_correlation, hann};
use fdtemp::spectral::{Convention, Estimator, SpectrumSettings, analyze_estimates};
use rayon::prelude::*;
use std::path::Path;

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

fn json_of(path: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

fn band(v: &serde_json::Value) -> (f64, f64, f64) {
    let e = &v["band"]["t_eff"];
    (
        e["estimate"].as_f64().unwrap(),
        e["low"].as_f64().unwrap(),
        e["high"].as_f64().unwrap(),
    )
}

/// Writes the two-channel scenario (2 records of 2^16 samples) into `dir`.
fn scenario(dir: &Path) {
    fdtemp()
        .current_dir(dir)
        .args([
            "synth",
            "resistor-two-channels",
            "--samples",
            "2",
            "--quick",
            "--out",
            "jn.csv",
        ])
        .assert()
        .success();
}

/// `noise` on the scenario's first channel with its gain, resistor and bath.
fn noise(dir: &Path) -> Command {
    let mut c = fdtemp();
    c.current_dir(dir).args([
        "noise",
        "jn.csv",
        "--gain",
        "100",
        "--sample-rate",
        "10000",
        "--resistance",
        "1000",
        "--temperature",
        "300",
        "--segment",
        "1024",
    ]);
    c
}

#[test]
fn the_cross_spectrum_recovers_4ktr_through_two_noisy_amplifiers_and_one_channel_does_not() {
    // Source: Nyquist, Phys. Rev. 32, 110 (1928): a resistor's one-sided voltage noise is
    // 4kTR, so T_eff = 300 K for the 1 kΩ resistor at 300 K. Each amplifier adds its own
    // (invented) white and 1/f-like noise, about half of 4kTR (channel 1) at high f.
    let dir = tempfile::tempdir().unwrap();
    scenario(dir.path());
    noise(dir.path())
        .args([
            "--cross-with",
            "jn.ch2.csv",
            "--cross-gain",
            "1000",
            "--json",
            "cross.json",
        ])
        .assert()
        .success()
        .stdout(predicates::str::contains(
            "estimate    real part of the cross-spectrum",
        ))
        .stdout(predicates::str::contains("95% normal"));
    let cross = json_of(&dir.path().join("cross.json"));
    let (t, lo, hi) = band(&cross);
    assert!(lo <= 300.0 && 300.0 <= hi, "cross: {t} [{lo}, {hi}]");
    assert!(hi - lo < 20.0, "cross interval too wide: [{lo}, {hi}]");
    assert_eq!(cross["settings"]["estimator"], "cross_spectrum");
    assert_eq!(cross["settings"]["gain"].as_f64(), Some(100.0));
    assert_eq!(cross["settings"]["second_gain"].as_f64(), Some(1000.0));
    assert_eq!(cross["schema"].as_u64(), Some(3));
    assert_eq!(cross["second_input"], "jn.ch2.csv");
    assert_eq!(cross["spectra"][0]["errors"], "normal");

    noise(dir.path())
        .args(["--json", "one.json"])
        .assert()
        .success();
    let one = json_of(&dir.path().join("one.json"));
    let (t1, lo1, _) = band(&one);
    assert!(
        lo1 > 400.0,
        "single channel: {t1} from {lo1}, expected far above 300 K"
    );
    assert_eq!(one["settings"]["estimator"], "single_channel");
    assert_eq!(one["spectra"][0]["verdict"]["relation"], "above");
}

#[test]
fn a_measured_amplifier_noise_subtracted_recovers_4ktr_with_a_caution_where_it_dominates() {
    // Source: Nyquist (1928) as above; the amplifier alone is recorded with its input
    // shorted (an independent record of the same amplifier), its PSD subtracted.
    let dir = tempfile::tempdir().unwrap();
    scenario(dir.path());
    fdtemp()
        .current_dir(dir.path())
        .args([
            "noise",
            "jn.amp.csv",
            "--gain",
            "100",
            "--sample-rate",
            "10000",
            "--segment",
            "1024",
            "--psd-out",
            "amp_psd.csv",
        ])
        .assert()
        .success();
    noise(dir.path())
        .args(["--amplifier-noise", "amp_psd.csv", "--json", "sub.json"])
        .assert()
        .success()
        .stdout(predicates::str::contains("subtracted from the PSD"))
        .stdout(predicates::str::contains(
            "more than 50% of the measured PSD in 19.53–",
        ));
    let v = json_of(&dir.path().join("sub.json"));
    let (t, lo, hi) = band(&v);
    assert!(lo <= 300.0 && 300.0 <= hi, "subtracted: {t} [{lo}, {hi}]");
    assert_eq!(v["settings"]["estimator"], "subtracted");
    assert_eq!(v["amplifier_noise"], "amp_psd.csv");
    let codes: Vec<&str> = v["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .filter_map(|c| c["code"].as_str())
        .collect();
    assert!(codes.contains(&"large_subtraction"), "{codes:?}");
    let large = v["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["code"] == "large_subtraction")
        .unwrap();
    let first = &large["bands"][0];
    assert!(first["fmin"].as_f64().unwrap() < 20.0);
    assert!(first["fraction"].as_f64().unwrap() > 0.5);
}

#[test]
fn the_cross_spectrum_scatters_as_its_gaussian_variance_says() {
    // Source: Bendat & Piersol, Random Data (4th ed., 2010), ch. 9: the co-spectrum
    // estimate from n_d averages has variance (G11 G22 + C12² − Q12²)/(2 n_d) (from memory;
    // it also follows from Isserlis' theorem for Gaussian records). With overlap, n_d is
    // Welch's (1967) effective number ν/2. Measured here over 4000 records.
    let settings = WelchSettings {
        sample_rate: tc::RATE,
        segment: 128,
        overlap: 64,
    };
    let n = 128 * 32;
    let bin = 40;
    let runs: Vec<(f64, f64)> = (0..4000u64)
        .into_par_iter()
        .map(|r| {
            let (a, b) = tc::record(7, r, n);
            let c = cross_welch(&a, &b, settings).unwrap();
            let predicted = (c.a.psd[bin] * c.b.psd[bin] + c.re[bin].powi(2) - c.im[bin].powi(2))
                / c.a.dof[bin];
            (c.re[bin], predicted)
        })
        .collect();
    let m = runs.len() as f64;
    let mean = runs.iter().map(|r| r.0).sum::<f64>() / m;
    let var = runs.iter().map(|r| (r.0 - mean).powi(2)).sum::<f64>() / (m - 1.0);
    let predicted = runs.iter().map(|r| r.1).sum::<f64>() / m;
    println!("measured / predicted variance: {:.3}", var / predicted);
    // The sample variance of 4000 values has a relative SE of about √(2/3999) = 2.2%;
    // measured 1.034.
    assert!(
        (var / predicted - 1.0).abs() < 0.1,
        "measured variance {var:e}, predicted {predicted:e}"
    );
    // And the mean is 4kTR times the product of the gains.
    let four_ktr = 4.0 * 1.380649e-23 * tc::TEMPERATURE * tc::RESISTANCE;
    let expected = four_ktr * tc::GAINS[0] * tc::GAINS[1];
    assert!(
        (mean / expected - 1.0).abs() < 0.05,
        "mean {mean:e}, expected {expected:e}"
    );
}

#[test]
fn two_channels_without_common_noise_report_negative_t_eff_with_a_caution() {
    let settings = WelchSettings {
        sample_rate: tc::RATE,
        segment: 256,
        overlap: 128,
    };
    // Two independent records (two runs' first channels): nothing in common.
    let a = tc::amplifier_alone(3, 0, 0, 1 << 14);
    let b = tc::amplifier_alone(3, 1, 1, 1 << 14);
    let c = cross_welch(&a, &b, settings).unwrap();
    let pair = PairPsd::from_runs(
        vec![c],
        vec!["1".into()],
        vec!["1".into()],
        tc::RATE,
        settings.segment,
    );
    let (g, var, _) = to_cross_group(&pair, &Dissipation::Constant(1e3)).unwrap();
    let s = SpectrumSettings {
        temperature: Some(300.0),
        convention: Convention::Voltage,
        estimator: Estimator::CrossSpectrum,
        ..SpectrumSettings::default()
    };
    let r = analyze_estimates(&[g], &[Some(var)], &pair.a.bin_rho2, &s, None).unwrap();
    let negative = r.points.iter().filter(|p| p.t_eff < 0.0).count();
    assert!(negative > 20, "{negative} negative of {}", r.points.len());
    let fired = r.spectra[0].cautions.iter().find_map(|c| match &c.finding {
        SpectralFinding::NonPositiveTeff { frequencies, .. } => Some(*frequencies),
        _ => None,
    });
    assert_eq!(fired, Some(negative));
    let text = String::from_utf8(fdtemp::report::spectrum::render(&r, &[])).unwrap();
    assert!(text.contains("T_eff <= 0 at"), "{text}");
}

#[test]
fn the_second_channel_must_match_the_first_and_options_must_not_conflict() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let write = |name: &str, runs: usize, n: usize| {
        let mut s = String::from(
            &(1..=runs)
                .map(|r| format!("r{r}"))
                .collect::<Vec<_>>()
                .join(","),
        );
        s.push('\n');
        for i in 0..n {
            let row: Vec<String> = (0..runs)
                .map(|r| format!("{}", ((i * 7 + r * 3) % 11) as f64 - 5.0))
                .collect();
            s.push_str(&row.join(","));
            s.push('\n');
        }
        std::fs::write(d.join(name), s).unwrap();
    };
    write("a.csv", 2, 600);
    write("b_runs.csv", 3, 600);
    write("b_short.csv", 2, 500);
    write("b_long.csv", 2, 700);
    let base = |second: &str| {
        let mut c = fdtemp();
        c.current_dir(d).args([
            "noise",
            "a.csv",
            "--sample-rate",
            "100",
            "--segment",
            "64",
            "--resistance",
            "10",
            "--cross-with",
            second,
            "--json",
            "out.json",
        ]);
        c
    };
    base("b_runs.csv")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "b_runs.csv:1: the second channel has 3 run(s) and a.csv has 2",
        ));
    base("b_short.csv")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "b_short.csv: run 'r1' of the second channel has only 500 samples where a.csv has more",
        ));
    base("b_long.csv")
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "b_long.csv: run 'r1' of the second channel has 700 samples where a.csv has 600",
        ));
    // A bad number in the second channel is named by its own file, line and column.
    let bad = std::fs::read_to_string(d.join("a.csv")).unwrap();
    let mut lines: Vec<String> = bad.lines().map(String::from).collect();
    lines[4] = "1,n/a".into();
    std::fs::write(d.join("b_bad.csv"), lines.join("\n") + "\n").unwrap();
    base("b_bad.csv")
        .assert()
        .code(2)
        .stderr(predicates::str::contains("b_bad.csv:5:2:"));
    assert!(!d.join("out.json").exists(), "no output after a refusal");
    // chi-square is one channel's law, not the cross-spectrum's.
    base("a.csv")
        .args(["--errors", "chi-square"])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "--errors chi-square is the law of one channel's PSD",
        ));
    // A cross-spectrum cannot be written as a PSD for `spectrum`; nor combined with a
    // subtraction.
    base("a.csv").args(["--psd-out", "p.csv"]).assert().code(2);
    base("a.csv")
        .args(["--amplifier-noise", "a.csv"])
        .assert()
        .code(2);
    // Without a dissipation there is no T_eff.
    fdtemp()
        .current_dir(d)
        .args([
            "noise",
            "a.csv",
            "--sample-rate",
            "100",
            "--segment",
            "64",
            "--cross-with",
            "a.csv",
        ])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "--cross-with gives T_eff, which needs a dissipation",
        ));
    // An amplifier table without its dof column names the file and the header line.
    std::fs::write(d.join("amp.csv"), "f,psd\n1,2\n3,4\n").unwrap();
    fdtemp()
        .current_dir(d)
        .args([
            "noise",
            "a.csv",
            "--sample-rate",
            "100",
            "--segment",
            "64",
            "--resistance",
            "10",
            "--amplifier-noise",
            "amp.csv",
        ])
        .assert()
        .code(2)
        .stderr(predicates::str::contains("amp.csv:1"))
        .stderr(predicates::str::contains("dof"));
    std::fs::write(d.join("amp0.csv"), "f,psd,dof\n1,2,10\n3,0,10\n").unwrap();
    fdtemp()
        .current_dir(d)
        .args([
            "noise",
            "a.csv",
            "--sample-rate",
            "100",
            "--segment",
            "64",
            "--resistance",
            "10",
            "--amplifier-noise",
            "amp0.csv",
        ])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(
            "amp0.csv:3:2: column 'psd' is 0, expected a positive amplifier-noise PSD",
        ));
}

// ---------------------------------------------------------------------------------------
// Coverage study (ignored): many known-truth campaigns through the library.

/// One campaign's T_eff report from the two channels' cross-spectrum and from channel 1
/// minus its separately measured amplifier noise. `n` samples per channel.
fn campaign(
    seed: u64,
    i: u64,
    n: usize,
    settings: WelchSettings,
) -> (SpectrumReport, SpectrumReport) {
    let (a, b) = tc::record(seed, i, n);
    let c = cross_welch(&a, &b, settings).unwrap();
    let mut pair = PairPsd::from_runs(
        vec![c],
        vec!["1".into()],
        vec!["1".into()],
        tc::RATE,
        settings.segment,
    );
    pair.divide_gains(tc::GAINS[0], tc::GAINS[1]);
    let diss = Dissipation::Constant(tc::RESISTANCE);
    let s = SpectrumSettings {
        temperature: Some(tc::TEMPERATURE),
        convention: Convention::Voltage,
        band: Some([100.0, 5000.0]),
        ..SpectrumSettings::default()
    };
    let (g, var, _) = to_cross_group(&pair, &diss).unwrap();
    let cross = analyze_estimates(
        &[g],
        &[Some(var)],
        &pair.a.bin_rho2,
        &SpectrumSettings {
            estimator: Estimator::CrossSpectrum,
            ..s.clone()
        },
        None,
    )
    .unwrap();
    // The amplifier alone, an independent record of the same length.
    let amp = tc::amplifier_alone(seed, i, 0, n);
    let mut w = Welch::new(settings).unwrap();
    for v in amp {
        w.push(v / tc::GAINS[0]);
    }
    let p: Psd = w.finish().unwrap();
    let rows =
        |v: &[f64]| -> Vec<(f64, f64)> { (1..p.freqs.len()).map(|j| (p.freqs[j], v[j])).collect() };
    let amp = AmplifierNoise {
        psd: Dissipation::Table(rows(&p.psd)),
        dof: Dissipation::Table(rows(&p.dof)),
        range: [p.freqs[1], p.freqs[p.freqs.len() - 1]],
        runs: 1,
    };
    let rec: RecordPsd = pair.a.clone();
    let sub = subtract(&rec, &amp, &diss).unwrap();
    let subtracted = analyze_estimates(
        &[sub.group],
        &[Some(sub.var)],
        &bin_correlation(&hann(settings.segment)),
        &SpectrumSettings {
            estimator: Estimator::Subtracted,
            ..s
        },
        None,
    )
    .unwrap();
    assert_eq!(cross.spectra[0].errors, ErrorModel::Normal);
    (cross, subtracted)
}

/// One campaign of `runs` runs of `n` samples: the cross-spectrum's T_eff with intervals
/// from resampling runs (`resamples` replicates, BCa read at Student's width).
fn runs_campaign(seed: u64, i: u64, runs: u64, n: usize, resamples: usize) -> SpectrumReport {
    let settings = WelchSettings {
        sample_rate: tc::RATE,
        segment: 256,
        overlap: 128,
    };
    let crosses = (0..runs)
        .map(|r| {
            let (a, b) = tc::record(seed, i * runs + r, n);
            cross_welch(&a, &b, settings).unwrap()
        })
        .collect();
    let names: Vec<String> = (0..runs).map(|r| r.to_string()).collect();
    let mut pair = PairPsd::from_runs(crosses, names.clone(), names, tc::RATE, 256);
    pair.divide_gains(tc::GAINS[0], tc::GAINS[1]);
    let (g, var, _) = to_cross_group(&pair, &Dissipation::Constant(tc::RESISTANCE)).unwrap();
    let s = SpectrumSettings {
        temperature: Some(tc::TEMPERATURE),
        convention: Convention::Voltage,
        band: Some([100.0, 5000.0]),
        estimator: Estimator::CrossSpectrum,
        errors: ErrorModel::Runs,
        resamples,
        seed: i + 1,
        ..SpectrumSettings::default()
    };
    analyze_estimates(&[g], &[Some(var)], &pair.a.bin_rho2, &s, None).unwrap()
}

/// Coverage of the cross-spectrum's intervals from resampling runs:
/// `FDTEMP_TWO_CHANNEL_RUNS` runs (default 40) of 16 segments per campaign,
/// `FDTEMP_TWO_CHANNEL_CAMPAIGNS` campaigns (default 500), B = 999.
#[test]
#[ignore = "coverage study: cargo test --release --test two_channels -- --ignored --nocapture"]
fn runs_coverage_study() {
    let env = |k: &str, d: u64| {
        std::env::var(k)
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(d)
    };
    let campaigns = env("FDTEMP_TWO_CHANNEL_CAMPAIGNS", 500);
    let runs = env("FDTEMP_TWO_CHANNEL_RUNS", 40);
    let t = tc::TEMPERATURE;
    let reps: Vec<SpectrumReport> = (0..campaigns)
        .into_par_iter()
        .map(|i| runs_campaign(13, i, runs, 256 * 16, 999))
        .collect();
    let nf = reps[0].points.len();
    let pooled: usize = reps
        .iter()
        .map(|r| {
            r.points
                .iter()
                .filter(|p| matches!((p.low, p.high), (Some(lo), Some(hi)) if lo <= t && t <= hi))
                .count()
        })
        .sum();
    let band = reps
        .iter()
        .filter(|r| {
            let e = &r.band.as_ref().unwrap().t_eff;
            e.low.unwrap() <= t && t <= e.high.unwrap()
        })
        .count();
    println!(
        "\n{campaigns} campaigns of {runs} runs (16 segments of 256 each), cross-spectrum, runs resampled (B = 999)"
    );
    println!(
        "  T_eff(f) pooled over {nf} bins: {:.3}",
        pooled as f64 / (reps.len() * nf) as f64
    );
    println!("  band 100–5000 Hz: {}", rate(band, reps.len()));
}

/// Rate and binomial standard error of `hits` out of `n`.
fn rate(hits: usize, n: usize) -> String {
    let p = hits as f64 / n as f64;
    format!(
        "{p:.3} ± {:.3} ({hits}/{n})",
        (p * (1.0 - p) / n as f64).sqrt()
    )
}

/// Coverage of the 95% intervals over known-truth campaigns (T = 300 K everywhere):
/// per frequency at a low, a middle and a high bin and pooled over all bins, for the
/// band average over 100–5000 Hz and the lowest test band, for both estimators.
/// `FDTEMP_TWO_CHANNEL_CAMPAIGNS` (default 1000), `FDTEMP_TWO_CHANNEL_SEGMENTS` (segments
/// of 256 samples per record, default 128; 16 for the few-segment row).
#[test]
#[ignore = "coverage study: cargo test --release --test two_channels -- --ignored --nocapture"]
fn coverage_study() {
    let campaigns: u64 = std::env::var("FDTEMP_TWO_CHANNEL_CAMPAIGNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1000);
    let seg_list: Vec<usize> = std::env::var("FDTEMP_TWO_CHANNEL_SEGMENTS")
        .ok()
        .map(|v| v.split(',').filter_map(|x| x.parse().ok()).collect())
        .unwrap_or_else(|| vec![128, 16]);
    let t = tc::TEMPERATURE;
    for segs in seg_list {
        let settings = WelchSettings {
            sample_rate: tc::RATE,
            segment: 256,
            overlap: 128,
        };
        let n = 256 * segs;
        let results: Vec<(SpectrumReport, SpectrumReport)> = (0..campaigns)
            .into_par_iter()
            .map(|i| campaign(11, i, n, settings))
            .collect();
        let nu = {
            let (a, b) = tc::record(11, 0, n);
            cross_welch(&a, &b, settings).unwrap().a.dof[10]
        };
        println!(
            "\n{campaigns} campaigns, records of {n} samples, segments of 256 (half overlap): {nu:.1} degrees of freedom per bin"
        );
        for (name, pick) in [("cross-spectrum", 0usize), ("subtracted", 1)] {
            let reps: Vec<&SpectrumReport> = results
                .iter()
                .map(|r| if pick == 0 { &r.0 } else { &r.1 })
                .collect();
            let nf = reps[0].points.len();
            let covers = |p: &fdtemp::spectral::analysis::SpectrumPoint| matches!((p.low, p.high), (Some(lo), Some(hi)) if lo <= t && t <= hi);
            for (label, j) in [
                ("lowest bin", 0),
                ("middle bin", nf / 2),
                ("top bin", nf - 1),
            ] {
                let hits = reps.iter().filter(|r| covers(&r.points[j])).count();
                println!(
                    "  {name:>14}  f = {:>7.1} Hz ({label}): {}",
                    reps[0].points[j].f,
                    rate(hits, reps.len())
                );
            }
            let pooled: usize = reps
                .iter()
                .map(|r| r.points.iter().filter(|p| covers(p)).count())
                .sum();
            println!(
                "  {name:>14}  pooled over {nf} bins: {} (bins of one campaign are correlated; the SE is a lower bound)",
                rate(pooled, reps.len() * nf)
            );
            let band_hits = reps
                .iter()
                .filter(|r| {
                    let e = &r.band.as_ref().unwrap().t_eff;
                    e.low.unwrap() <= t && t <= e.high.unwrap()
                })
                .count();
            println!(
                "  {name:>14}  band 100–5000 Hz: {}",
                rate(band_hits, reps.len())
            );
            let low_hits = reps
                .iter()
                .filter(|r| {
                    let b = &r.spectra[0].test_bands[0].band;
                    b.t_eff.low.unwrap() <= t && t <= b.t_eff.high.unwrap()
                })
                .count();
            let b0 = &reps[0].spectra[0].test_bands[0].band;
            println!(
                "  {name:>14}  lowest test band {:.1}–{:.1} Hz at its corrected level {:.4}: {}",
                b0.fmin,
                b0.fmax,
                reps[0].spectra[0].test_level.unwrap(),
                rate(low_hits, reps.len())
            );
        }
    }
}
