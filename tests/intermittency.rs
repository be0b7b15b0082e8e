//! The intermittency test (`spectral::intermittency`) on known-truth records.
//!
//! Fast checks: the per-segment periodograms are exactly Welch's, one bin's values follow
//! the Exp(1) law, Gaussian records (white; AR(1) plus white, an f⁻² spectrum over white)
//! are not flagged and sit inside their null, strong bursts are flagged, the kurtosis'
//! standard error matches its scatter, and the messages of bad inputs.
//!
//! Ignored studies (numbers in docs/validation.md, "Intermittency"):
//!
//! ```sh
//! cargo test --release --test intermittency -- --ignored --nocapture --test-threads=1   # ~20 min on 2 shared cores
//! FDTEMP_BURST_CAMPAIGNS=200 cargo test --release --test intermittency -- --ignored --nocapture false_alarm_study
//! ```
//!
//! `FDTEMP_BURST_CAMPAIGNS` (default 1000) sets the Gaussian campaigns per row of the
//! false-alarm study and the campaigns of the coverage study; the power study runs a fifth
//! of that per row (at least 200 by default).
//!
//! The records are invented: Gaussian noise, and Gaussian noise plus rare bursts — an
//! alpha-function pulse `A (t/τ) e^{1 − t/τ}` of random sign starting at each sample with
//! probability `λ`.

use fdtemp::spectral::analysis::chi2_quantile;
use fdtemp::spectral::intermittency::{
    IntermittencyCode, IntermittencySettings, IntermittencyVerdict, intermittency,
    segment_periodograms,
};
use fdtemp::spectral::welch::{Welch, WelchSettings, bin_correlation, equivalent_dof, hann};
use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;

/// Pulse time constant (samples).
const TAU: f64 = 3.0;
/// Pulse support (samples): `e^{−PULSE/τ}` is below 1e-8.
const PULSE: usize = 60;

fn welch(segment: usize, overlap: usize) -> WelchSettings {
    WelchSettings {
        sample_rate: 1.0,
        segment,
        overlap,
    }
}

/// White Gaussian noise of unit variance.
fn white(n: usize, seed: u64) -> Vec<f64> {
    let mut rng = fdtemp::resample::replicate_rng(seed, 0);
    (0..n).map(|_| rng.sample(StandardNormal)).collect()
}

/// AR(1) with `φ = 0.99` and innovations of standard deviation 0.3 (an f⁻² spectrum above
/// 0.0016 cycles per sample, begun in its stationary law) plus unit white noise: the two
/// cross near bin 12 of a 256-sample segment.
fn coloured(n: usize, seed: u64) -> Vec<f64> {
    let mut rng = fdtemp::resample::replicate_rng(seed, 1);
    let (phi, sd) = (0.99f64, 0.3);
    let z: f64 = rng.sample(StandardNormal);
    let mut x = z * sd / (1.0 - phi * phi).sqrt();
    (0..n)
        .map(|_| {
            let e: f64 = rng.sample(StandardNormal);
            let w: f64 = rng.sample(StandardNormal);
            x = phi * x + sd * e;
            x + w
        })
        .collect()
}

/// The pulse shape at `t` samples after its start.
fn pulse(t: usize) -> f64 {
    let u = t as f64 / TAU;
    u * (1.0 - u).exp()
}

/// Adds bursts of amplitude `a` starting at each sample (also up to [`PULSE`] samples
/// before the record) with probability `rate`, random signs.
fn add_bursts(x: &mut [f64], a: f64, rate: f64, seed: u64) {
    let mut rng = fdtemp::resample::replicate_rng(seed, 2);
    let n = x.len() as i64;
    for start in -(PULSE as i64)..n {
        if rng.random::<f64>() < rate {
            let sign = if rng.random::<bool>() { a } else { -a };
            for t in 0..PULSE {
                let i = start + t as i64;
                if (0..n).contains(&i) {
                    x[i as usize] += sign * pulse(t);
                }
            }
        }
    }
}

/// Gaussian (white or coloured) noise plus bursts.
fn bursty(n: usize, coloured_base: bool, a: f64, rate: f64, seed: u64) -> Vec<f64> {
    let mut x = if coloured_base {
        coloured(n, seed)
    } else {
        white(n, seed)
    };
    add_bursts(&mut x, a, rate, seed);
    x
}

fn settings(seed: u64) -> IntermittencySettings {
    IntermittencySettings {
        seed,
        ..IntermittencySettings::default()
    }
}

#[test]
fn segment_periodograms_average_to_welchs_psd() {
    let x = coloured(5000, 7);
    let w = welch(256, 100);
    let segs = segment_periodograms(&x, &w).unwrap();
    let mut acc = Welch::new(w).unwrap();
    x.iter().for_each(|&v| acc.push(v));
    let p = acc.finish().unwrap();
    assert_eq!(segs.len(), p.segments);
    for k in 0..p.psd.len() {
        // The Nyquist bin: Welch doubles it like the interior bins (welch.rs), so do we.
        let mean = segs.iter().map(|s| s[k]).sum::<f64>() / segs.len() as f64;
        assert!(
            (mean - p.psd[k]).abs() <= 1e-12 * p.psd[k].abs().max(1e-300),
            "bin {k}: {mean} against Welch's {}",
            p.psd[k]
        );
    }
}

#[test]
fn one_bins_windowed_values_follow_the_exponential_law() {
    // Source: Percival & Walden, Spectral Analysis for Physical Applications (1993), ch. 6:
    // a (tapered) periodogram value of Gaussian noise away from 0 and Nyquist, over its
    // expectation, is χ²₂/2 = Exp(1). White noise of variance 1 at rate 1 has one-sided
    // density 2. Bins 4, 8, …, 124 of non-overlapping segments are independent (Hann
    // bins 3 or more apart do not correlate), so the Kolmogorov–Smirnov bound applies.
    let x = white(256 * 400, 11);
    let segs = segment_periodograms(&x, &welch(256, 0)).unwrap();
    let mut v: Vec<f64> = segs
        .iter()
        .flat_map(|s| (4..128).step_by(4).map(move |k| s[k] / 2.0))
        .collect();
    v.sort_by(f64::total_cmp);
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let d = v
        .iter()
        .enumerate()
        .map(|(i, &x)| {
            let f = 1.0 - (-x).exp();
            (f - i as f64 / n).abs().max((f - (i + 1) as f64 / n).abs())
        })
        .fold(0.0, f64::max);
    // KS critical value at the 0.1% level: 1.95 / √n (common practice).
    assert!(d < 1.95 / n.sqrt(), "KS distance {d} over {n} values");
    assert!((mean - 1.0).abs() < 4.0 / n.sqrt(), "mean {mean}");
}

#[test]
fn gaussian_records_are_not_flagged_and_sit_inside_their_null() {
    for seed in 0..3 {
        for (name, x) in [
            ("white", white(16384, 100 + seed)),
            ("coloured", coloured(16384, 200 + seed)),
        ] {
            let r = intermittency(&[x], &welch(256, 128), &settings(seed)).unwrap();
            assert_eq!(
                r.verdict,
                IntermittencyVerdict::ConsistentWithGaussian,
                "{name} {seed}: p = {}",
                r.p_value
            );
            assert!(!r.needs_run_resampling && r.findings.is_empty());
            assert!(r.interval_note.contains("chi-square intervals are usable"));
            let nb = r.bands.len() as f64;
            let ratio = r.bands.iter().map(|b| b.variance_ratio).sum::<f64>() / nb;
            let teff = r.bands.iter().map(|b| b.teff_median_over_mean).sum::<f64>() / nb;
            let z = r
                .bands
                .iter()
                .map(|b| b.excess_kurtosis.unwrap() / b.kurtosis_se.unwrap())
                .fold(0.0, |m: f64, v| m.max(v.abs()));
            assert!((ratio - 1.0).abs() < 0.15, "{name} {seed}: ratio {ratio}");
            assert!(
                (teff - 1.0).abs() < 0.1,
                "{name} {seed}: median/mean {teff}"
            );
            assert!(z < 4.0, "{name} {seed}: kurtosis z {z}");
            if name == "white" {
                // A flat spectrum: the surrogates' mean statistic is the nominal χ² law's
                // normalized variance 2/ν (Hann bin correlation by Satterthwaite; common
                // practice), whatever the overlap of the segments.
                for b in &r.bands {
                    let nominal = 2.0 / b.nominal_dof;
                    assert!(
                        (b.null_normalized_variance / nominal - 1.0).abs() < 0.1,
                        "{seed}: {b:?}"
                    );
                }
            }
        }
    }
}

#[test]
fn runs_at_different_levels_are_not_intermittency() {
    let runs: Vec<Vec<f64>> = (0..4)
        .map(|r| {
            let g = [1.0, 10.0, 0.1, 3.0][r];
            white(4096, 300 + r as u64)
                .into_iter()
                .map(|v| g * v)
                .collect()
        })
        .collect();
    let r = intermittency(&runs, &welch(256, 128), &settings(2)).unwrap();
    assert_eq!(r.verdict, IntermittencyVerdict::ConsistentWithGaussian);
    assert_eq!(r.segments_per_run, vec![31; 4]);
}

#[test]
fn strong_rare_bursts_are_flagged() {
    // About 4 bursts of amplitude 15 in 16384 samples of unit white noise: each carries
    // about 1200 in energy, over four times a segment's noise, in the lowest bands.
    for seed in 0..3 {
        let x = bursty(16384, seed == 2, 15.0, 1.0 / 4000.0, 400 + seed);
        let r = intermittency(&[x], &welch(256, 128), &settings(seed)).unwrap();
        assert_eq!(r.verdict, IntermittencyVerdict::Intermittent, "seed {seed}");
        assert!(r.needs_run_resampling);
        assert!(r.p_value <= 0.01, "seed {seed}: p = {}", r.p_value);
        // The most intermittent band: bursty by every measure.
        let top = r
            .bands
            .iter()
            .max_by(|a, b| a.variance_ratio.total_cmp(&b.variance_ratio))
            .unwrap();
        assert!(
            top.flagged && top.variance_ratio > 3.0,
            "seed {seed}: {top:?}"
        );
        assert!(
            top.excess_kurtosis.unwrap() > 5.0 * top.kurtosis_se.unwrap(),
            "{top:?}"
        );
        assert!(top.teff_median_over_mean < 0.9, "{top:?}");
        let codes: Vec<IntermittencyCode> = r.findings.iter().map(|f| f.code).collect();
        assert!(codes.contains(&IntermittencyCode::IntermittentBand));
        assert!(codes.contains(&IntermittencyCode::NonGaussianIntervals));
        assert!(codes.contains(&IntermittencyCode::SingleRunNoResampling));
        assert!(
            r.interval_note
                .contains("intervals should come from resampling runs")
        );
        let json = serde_json::to_value(&r).unwrap();
        assert_eq!(json["verdict"], "intermittent");
        assert_eq!(json["needs_run_resampling"], true);
    }
}

#[test]
fn kurtosis_standard_error_matches_its_scatter_over_gaussian_records() {
    // Under Gaussianity the excess kurtosis of n correlated values has variance
    // 24 Σ_τ ρ(τ)⁴ / n (fourth Hermite polynomial; from memory, e.g. the delta method on
    // the Hermite expansion). The scatter over 200 coloured records must match the
    // reported standard error band by band (the scatter's own relative error is 5%). The
    // formula is asymptotic: records long against the narrowest band's correlation time.
    let s = IntermittencySettings {
        surrogates: 19,
        ..IntermittencySettings::default()
    };
    let reps: Vec<Vec<(f64, f64)>> = (0..200u64)
        .into_par_iter()
        .map(|seed| {
            let r = intermittency(&[coloured(16384, 500 + seed)], &welch(256, 128), &s).unwrap();
            r.bands
                .iter()
                .map(|b| (b.excess_kurtosis.unwrap(), b.kurtosis_se.unwrap()))
                .collect()
        })
        .collect();
    for b in 0..reps[0].len() {
        let g: Vec<f64> = reps.iter().map(|r| r[b].0).collect();
        let n = g.len() as f64;
        let mean = g.iter().sum::<f64>() / n;
        let sd = (g.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let se = reps.iter().map(|r| r[b].1).sum::<f64>() / n;
        println!("band {b}: scatter {sd:.4}, SE {se:.4}");
        assert!(
            (sd / se - 1.0).abs() < 0.2,
            "band {b}: scatter {sd}, SE {se}"
        );
    }
}

#[test]
fn bad_inputs_name_what_is_wrong() {
    let short = intermittency(&[white(300, 1)], &welch(256, 128), &settings(1))
        .unwrap_err()
        .to_string();
    assert!(
        short.contains("run 1 has 300 samples, fewer than two segments of 256 (hop 128)"),
        "{short}"
    );
    let few = IntermittencySettings {
        surrogates: 10,
        ..IntermittencySettings::default()
    };
    let e = intermittency(&[white(4096, 1)], &welch(256, 128), &few)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("--surrogates is 10, expected at least 19 at level 0.95"),
        "{e}"
    );
    let band = IntermittencySettings {
        bands: Some(vec![[0.0, 0.005]]),
        ..IntermittencySettings::default()
    };
    let e = intermittency(&[white(4096, 1)], &welch(256, 128), &band)
        .unwrap_err()
        .to_string();
    assert!(e.contains("band 0:0.005 holds no Welch bin"), "{e}");
    let mut x = white(4096, 1);
    x[99] = f64::NAN;
    let e = intermittency(&[x], &welch(256, 128), &settings(1))
        .unwrap_err()
        .to_string();
    assert!(e.contains("run 1 holds NaN at sample 100"), "{e}");
}

// ---------------------------------------------------------------------------------------
// Ignored studies.

fn campaigns() -> usize {
    std::env::var("FDTEMP_BURST_CAMPAIGNS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(1000)
}

/// Rate with its binomial standard error.
fn rate(hits: usize, n: usize) -> String {
    let p = hits as f64 / n as f64;
    format!("{p:.4} ± {:.4}", (p * (1.0 - p) / n as f64).sqrt())
}

/// How often `make(seed)` records are flagged at level 0.95.
fn flag_rate(
    make: &(dyn Fn(u64) -> Vec<Vec<f64>> + Sync),
    w: WelchSettings,
    n: usize,
    base: u64,
) -> usize {
    (0..n as u64)
        .into_par_iter()
        .filter(|&c| {
            let runs = make(base + c);
            let r = intermittency(&runs, &w, &settings(base + c)).unwrap();
            r.verdict == IntermittencyVerdict::Intermittent
        })
        .count()
}

#[test]
#[ignore = "long statistical study; see the module header for the command"]
fn false_alarm_study() {
    let n = campaigns();
    println!(
        "false alarms of the intermittency test at level 0.95 (199 surrogates), {n} Gaussian campaigns per row"
    );
    type Make = Box<dyn Fn(u64) -> Vec<Vec<f64>> + Sync>;
    let rows: Vec<(&str, WelchSettings, Make)> = vec![
        (
            "white, 1 run x 16384, L = 256, half overlap (127 segments)",
            welch(256, 128),
            Box::new(|s| vec![white(16384, s)]),
        ),
        (
            "white, 1 run x 2048, L = 256, half overlap (15 segments)",
            welch(256, 128),
            Box::new(|s| vec![white(2048, s)]),
        ),
        (
            "coloured, 1 run x 16384, L = 256, half overlap (127 segments)",
            welch(256, 128),
            Box::new(|s| vec![coloured(16384, s)]),
        ),
        (
            "coloured, 4 runs x 4096, L = 512, half overlap (4 x 15 segments)",
            welch(512, 256),
            Box::new(|s| (0..4).map(|r| coloured(4096, s * 8 + r)).collect()),
        ),
        (
            "coloured, 1 run x 8192, L = 256, no overlap (32 segments)",
            welch(256, 0),
            Box::new(|s| vec![coloured(8192, s)]),
        ),
    ];
    for (i, (name, w, make)) in rows.iter().enumerate() {
        let t = std::time::Instant::now();
        let hits = flag_rate(make.as_ref(), *w, n, 1_000_000 * (i as u64 + 1));
        println!(
            "  {name}: {} ({:.0} s)",
            rate(hits, n),
            t.elapsed().as_secs_f64()
        );
    }
}

#[test]
#[ignore = "long statistical study; see the module header for the command"]
fn power_study() {
    let n = (campaigns() / 5).max(200);
    println!(
        "power of the intermittency test at level 0.95 (199 surrogates), {n} bursty campaigns per row"
    );
    println!(
        "  1 run x 16384 samples, L = 256, half overlap; bursts A (t/3) e^(1 - t/3), random sign"
    );
    let rows: [(bool, f64, f64); 7] = [
        (false, 10.0, 1.0 / 16000.0),
        (false, 15.0, 1.0 / 8000.0),
        (false, 8.0, 1.0 / 2000.0),
        (false, 5.0, 1.0 / 500.0),
        (false, 4.0, 1.0 / 2000.0),
        (false, 3.0, 1.0 / 2000.0),
        (true, 8.0, 1.0 / 2000.0),
    ];
    for (i, &(col, a, lambda)) in rows.iter().enumerate() {
        let t = std::time::Instant::now();
        let make = move |s: u64| vec![bursty(16384, col, a, lambda, s)];
        let hits = flag_rate(&make, welch(256, 128), n, 50_000_000 * (i as u64 + 1));
        println!(
            "  {} noise, A = {a}, rate 1/{:.0} per sample (~{:.0} bursts): {} ({:.0} s)",
            if col { "coloured" } else { "white" },
            1.0 / lambda,
            16384.0 * lambda,
            rate(hits, n),
            t.elapsed().as_secs_f64()
        );
    }
}

/// The exact expectation of Welch's PSD at bin `k` (rate 1, segment `l`) of unit white
/// noise plus bursts of amplitude `a` at rate `rate`: `2` from the noise (the Hann window
/// carries nothing from 0 Hz beyond bin 1), plus each placement of a pulse relative to a
/// segment, mean removed and windowed, weighted by `rate a²` (random signs: pulses add in
/// power).
fn true_psd(l: usize, k: usize, a: f64, rate: f64) -> f64 {
    let w = hann(l);
    let norm: f64 = w.iter().map(|v| v * v).sum();
    let mut burst = 0.0;
    for start in -(PULSE as i64)..l as i64 {
        let h: Vec<f64> = (0..l as i64)
            .map(|n| {
                let t = n - start;
                if (0..PULSE as i64).contains(&t) {
                    pulse(t as usize)
                } else {
                    0.0
                }
            })
            .collect();
        let mean = h.iter().sum::<f64>() / l as f64;
        let (mut re, mut im) = (0.0, 0.0);
        for n in 0..l {
            let ph = -std::f64::consts::TAU * (k * n) as f64 / l as f64;
            re += w[n] * (h[n] - mean) * ph.cos();
            im += w[n] * (h[n] - mean) * ph.sin();
        }
        burst += re * re + im * im;
    }
    2.0 + 2.0 * rate * a * a * burst / norm
}

#[test]
#[ignore = "long statistical study; see the module header for the command"]
fn interval_coverage_study() {
    // 95% intervals of the band-averaged PSD: chi-square (Welch's dof, Hann bin correlation
    // by Satterthwaite, as `spectrum` forms them) against a percentile bootstrap over runs
    // read at Student's width (`resample::widened_level`), on Gaussian and bursty runs.
    let n = campaigns();
    let (l, hop, runs, len) = (256usize, 128usize, 20usize, 4096usize);
    let w = welch(l, l - hop);
    let k_seg = (len - l) / hop + 1;
    let nu = equivalent_dof(&hann(l), hop, k_seg);
    let rho2 = bin_correlation(&hann(l));
    println!(
        "coverage of 95% intervals of the band-averaged PSD, {n} campaigns of {runs} runs x {len} samples (L = {l}, half overlap)"
    );
    for (a, lambda) in [(0.0, 0.0), (8.0, 1.0 / 2000.0), (15.0, 1.0 / 8000.0)] {
        for (k0, k1) in [(2usize, 6usize), (2, 127)] {
            let m = k1 - k0 + 1;
            let truth = (k0..=k1).map(|k| true_psd(l, k, a, lambda)).sum::<f64>() / m as f64;
            let corr: f64 = rho2
                .iter()
                .enumerate()
                .filter(|(i, _)| i + 1 < m)
                .map(|(i, r)| (1.0 - (i + 1) as f64 / m as f64) * r)
                .sum();
            let nu_band = m as f64 * nu * runs as f64 / (1.0 + 2.0 * corr);
            let (lo_q, hi_q) = (
                chi2_quantile(nu_band, 0.975).unwrap(),
                chi2_quantile(nu_band, 0.025).unwrap(),
            );
            let hits: Vec<(bool, bool)> = (0..n as u64)
                .into_par_iter()
                .map(|c| {
                    let per_run: Vec<f64> = (0..runs as u64)
                        .map(|r| {
                            let seed = 7_000_000 + c * 64 + r;
                            let x = if a > 0.0 {
                                bursty(len, false, a, lambda, seed)
                            } else {
                                white(len, seed)
                            };
                            let segs = segment_periodograms(&x, &w).unwrap();
                            segs.iter()
                                .map(|s| s[k0..=k1].iter().sum::<f64>() / m as f64)
                                .sum::<f64>()
                                / segs.len() as f64
                        })
                        .collect();
                    let g = per_run.iter().sum::<f64>() / runs as f64;
                    let chi = g * nu_band / lo_q <= truth && truth <= g * nu_band / hi_q;
                    let reps = fdtemp::resample::bootstrap(runs, 999, c, |idx| {
                        idx.iter().map(|&i| per_run[i]).sum::<f64>() / idx.len() as f64
                    });
                    let iv = fdtemp::resample::interval(
                        g,
                        &reps,
                        None,
                        fdtemp::resample::IntervalMethod::Percentile,
                        fdtemp::resample::widened_level(0.95, runs),
                    )
                    .unwrap();
                    (chi, iv.low <= truth && truth <= iv.high)
                })
                .collect();
            let chi = hits.iter().filter(|h| h.0).count();
            let boot = hits.iter().filter(|h| h.1).count();
            println!(
                "  {}, bins {k0}-{k1} (truth {truth:.3}, chi-square dof {nu_band:.0}): chi-square {}, runs {}",
                if a > 0.0 {
                    format!("bursts A = {a}, rate 1/{:.0}", 1.0 / lambda)
                } else {
                    "Gaussian".into()
                },
                rate(chi, n),
                rate(boot, n)
            );
        }
    }
}

/// Runs as the columns of a record CSV (a header of run names).
fn record_csv(runs: &[Vec<f64>]) -> String {
    let mut s: String = (1..=runs.len())
        .map(|r| format!("run{r}"))
        .collect::<Vec<_>>()
        .join(",");
    s.push('\n');
    for i in 0..runs[0].len() {
        let row: Vec<String> = runs.iter().map(|r| format!("{:.6}", r[i])).collect();
        s.push_str(&row.join(","));
        s.push('\n');
    }
    s
}

#[test]
fn the_noise_command_tests_the_records_and_resamples_runs_when_they_are_bursty() {
    let dir = tempfile::tempdir().unwrap();
    let bursty: Vec<Vec<f64>> = (0..4)
        .map(|r| bursty(16384, false, 8.0, 1.0 / 2000.0, 40 + r))
        .collect();
    let calm: Vec<Vec<f64>> = (0..4).map(|r| white(16384, 60 + r)).collect();
    std::fs::write(dir.path().join("bursty.csv"), record_csv(&bursty)).unwrap();
    std::fs::write(dir.path().join("calm.csv"), record_csv(&calm)).unwrap();
    let run = |file: &str| -> serde_json::Value {
        let json = format!("{file}.json");
        assert_cmd::Command::cargo_bin("fdtemp")
            .unwrap()
            .current_dir(dir.path())
            .args(["noise", file, "--sample-rate", "1000", "--resistance", "1"])
            .args([
                "--segment",
                "512",
                "--intermittency",
                "-B",
                "499",
                "--json",
                &json,
            ])
            .assert()
            .success()
            .stdout(predicates::str::contains(
                "intermittency: per-segment band powers",
            ));
        serde_json::from_slice(&std::fs::read(dir.path().join(json)).unwrap()).unwrap()
    };
    let b = run("bursty.csv");
    assert_eq!(b["intermittency"]["verdict"], "intermittent");
    assert_eq!(
        b["spectra"][0]["errors"], "runs",
        "bursty records resample runs"
    );
    let c = run("calm.csv");
    assert_eq!(c["intermittency"]["verdict"], "consistent_with_gaussian");
    assert_eq!(c["spectra"][0]["errors"], "chi-square");
}

#[test]
fn narrow_low_bands_of_gaussian_noise_have_no_excess_kurtosis() {
    // Source: common practice — Gaussian noise, band-passed, stays Gaussian (excess
    // kurtosis 0). A 4096-sample segment on 65 536-sample runs gives low bands of ~16–32
    // record bins, where the end-point line of the surrogates (a ramp, 1/f in its
    // transform) and the record's wrap-around once put the excess at +2.5 to +9.5.
    let runs: Vec<Vec<f64>> = (0..4).map(|r| white(65_536, 90 + r)).collect();
    let r = intermittency(&runs, &welch(4096, 2048), &settings(3)).unwrap();
    for b in r.bands.iter().take(4) {
        let (k, se) = (b.excess_kurtosis.unwrap(), b.kurtosis_se.unwrap());
        assert!((k / se).abs() < 4.0, "{}–{}: {k} ± {se}", b.fmin, b.fmax);
    }
}
