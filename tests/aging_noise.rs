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
