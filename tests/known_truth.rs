//! Known-truth recovery on synthetic campaigns (invented data with a built-in answer).
//!
//! Each campaign's sample means lie exactly on a broken stick with known X and q
//! (`fdtemp::synth`), so a correct estimator with correct intervals recovers them.

use fdtemp::FitSettings;
use fdtemp::analysis::{Silent, analyze};
use fdtemp::synth::{SynthSpec, generate};

fn fit(spec: &SynthSpec, resamples: usize) -> fdtemp::FitReport {
    let campaign = generate(spec).unwrap();
    let settings = FitSettings {
        temperature: spec.temperature,
        resamples,
        seed: spec.seed,
        ..FitSettings::default()
    };
    analyze(&campaign, &settings, None, &Silent).unwrap()
}

#[test]
fn recovers_the_ratio_and_break_of_a_two_line_campaign() {
    let mut covered = 0;
    let mut mean_x = 0.0;
    let seeds = 10;
    for seed in 0..seeds {
        let spec = SynthSpec {
            seed,
            ..SynthSpec::default()
        };
        let r = fit(&spec, 1000);
        let f = &r.fits[0];
        let (x, lo, hi) = (
            f.ratio.estimate.unwrap(),
            f.ratio.low.unwrap(),
            f.ratio.high.unwrap(),
        );
        covered += usize::from(lo <= spec.ratio && spec.ratio <= hi);
        mean_x += x / seeds as f64;
        // The break is detected and located near the truth.
        assert!(f.equilibrium_p.unwrap() < 0.01, "seed {seed}");
        assert!(
            (f.brk.estimate.unwrap() - spec.plateau).abs() < 0.03,
            "seed {seed}"
        );
        // T_eff's interval is the image of X's.
        let t = spec.temperature;
        assert!((f.t_eff.low.unwrap() - t / hi).abs() < 1e-12);
        assert!((f.t_eff.high.unwrap() - t / lo).abs() < 1e-12);
    }
    // 95% intervals: at least 8 of 10 cover (probability 0.99 if coverage is 95%).
    assert!(covered >= 8, "X covered in {covered} of {seeds}");
    assert!((mean_x / 0.45 - 1.0).abs() < 0.02, "mean X {mean_x}");
}

#[test]
fn an_equilibrium_campaign_is_rarely_flagged() {
    // X = 1: the mean data lie on the line of slope -1. A test at the 5% level should
    // reject in about 1 of 20 seeds; more than 4 has probability 0.003.
    let mut flagged = 0;
    for seed in 100..120 {
        let spec = SynthSpec {
            ratio: 1.0,
            seed,
            ..SynthSpec::default()
        };
        let r = fit(&spec, 500);
        let f = &r.fits[0];
        if f.equilibrium_p.unwrap() < 0.05 {
            flagged += 1;
        } else {
            assert!(
                f.brk.estimate.is_none(),
                "no break is reported under equilibrium"
            );
            assert!(r.verdict.starts_with("equilibrium"), "{}", r.verdict);
        }
    }
    assert!(flagged <= 4, "flagged {flagged} of 20");
}

#[test]
fn a_coarsening_campaign_reports_an_unbounded_effective_temperature() {
    let mut unbounded = 0;
    for seed in 200..210 {
        let spec = SynthSpec {
            ratio: 0.0,
            seed,
            ..SynthSpec::default()
        };
        let r = fit(&spec, 500);
        let f = &r.fits[0];
        let (lo, hi) = (f.ratio.low.unwrap(), f.ratio.high.unwrap());
        if lo <= 0.0 && hi >= 0.0 {
            unbounded += 1;
            assert!(f.t_eff.high.is_none(), "unbounded end is null");
            assert!(f.t_eff.note.as_deref().unwrap().contains("unbounded"));
            assert!(
                r.verdict.contains("no response in the slow regime"),
                "{}",
                r.verdict
            );
        }
        assert!(f.ratio.estimate.unwrap().abs() < 0.05);
    }
    assert!(
        unbounded >= 8,
        "X's interval reached 0 in {unbounded} of 10"
    );
}

#[test]
fn json_has_the_documented_shape_and_no_nan() {
    let r = fit(
        &SynthSpec {
            ratio: 0.0,
            ..SynthSpec::default()
        },
        200,
    );
    let text = String::from_utf8(fdtemp::report::json::to_json(&r)).unwrap();
    assert!(!text.contains("NaN") && !text.contains("inf"));
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["schema"], 1);
    assert_eq!(v["settings"]["resamples"], 200);
    assert_eq!(v["settings"]["interval"], "bca");
    assert!(v["fits"][0]["tw"].is_null());
    assert_eq!(v["fits"][1]["tw"], 100.0);
    for key in ["ratio", "t_eff", "break"] {
        assert!(v["fits"][0][key].get("estimate").is_some(), "{key}");
    }
    assert!(v["fits"][0]["equilibrium_p"].is_number());
}
