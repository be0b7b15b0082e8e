//! Known-truth recovery on synthetic campaigns (invented data with a built-in answer).
//!
//! Each campaign's sample means lie exactly on a broken stick with known X and q
//! (`fdtemp::scenarios::synth`), so a correct estimator with correct intervals recovers them.

use fdtemp::FitSettings;
use fdtemp::scenarios::synth::{SynthSpec, generate};
use fdtemp::twotime::{Caution, Finding, Silent, Verdict, analyze};

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
        if f.equilibrium_p.unwrap() <= 0.05 {
            flagged += 1;
        } else {
            assert!(
                f.brk.estimate.is_none(),
                "no break is reported under equilibrium"
            );
            assert!(
                matches!(r.verdict, Verdict::Equilibrium { .. }),
                "{:?}",
                r.verdict
            );
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
                matches!(r.verdict, Verdict::NoSlowResponse { .. }),
                "{:?}",
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
    let text = String::from_utf8(fdtemp::report::json::fit_json(&r)).unwrap();
    assert!(!text.contains("NaN") && !text.contains("inf"));
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["schema"], 5);
    assert_eq!(v["settings"]["resamples"], 200);
    assert_eq!(v["settings"]["interval"], "bca");
    assert!(v["fits"][0]["tw"].is_null());
    assert_eq!(v["fits"][1]["tw"], 100.0);
    for key in ["x", "t_eff", "break", "slope_above"] {
        assert!(v["fits"][0][key].get("estimate").is_some(), "{key}");
    }
    assert!(v["fits"][0]["p_equilibrium"].is_number());
}

#[test]
fn a_ratio_that_still_changes_with_age_is_flagged() {
    // X = 0.35, 0.45, 0.55 at tw = 100, 1000, 10000.
    let spec = SynthSpec {
        samples: 100,
        ratio: 0.35,
        ratio_per_decade: 0.1,
        ..SynthSpec::default()
    };
    let r = fit(&spec, 1000);
    let a = r.aging.as_ref().unwrap();
    // A line in log10(tw) over the three curves: 0.1 per decade.
    let change = a.change_per_decade.estimate.unwrap();
    assert!((change - 0.1).abs() < 0.025, "change {change}");
    assert!(a.change_per_decade.low.unwrap() > 0.0 && a.changes);
    assert_eq!(a.curves_used.len(), 3);
    assert!(
        r.cautions
            .iter()
            .any(|c| matches!(c.finding, Finding::XChangesWithAge { .. })),
        "{:?}",
        r.cautions
    );
    // Per-tw estimates follow the truth.
    for f in &r.fits[1..] {
        let truth = spec.ratio_at(f.tw.unwrap());
        assert!(
            (f.ratio.estimate.unwrap() - truth).abs() < 0.04,
            "tw {:?}",
            f.tw
        );
    }
    // A campaign aged at every tw gives no such warning.
    let steady = fit(
        &SynthSpec {
            samples: 100,
            ..SynthSpec::default()
        },
        1000,
    );
    assert!(!steady.cautions.iter().any(|c| matches!(
        c.finding,
        Finding::XChangesWithAge { .. } | Finding::XChangesWithAgeCurved { .. }
    )));
}

#[test]
fn a_wrong_thermometer_shows_in_the_slope_above_the_break() {
    // The data are made at T = 0.6 but analysed with T = 0.5: every y shrinks by 5/6, so
    // the slope above the break is -5/6 and X appears as 5/6 of the truth.
    let spec = SynthSpec {
        samples: 60,
        ..SynthSpec::default()
    };
    let campaign = generate(&spec).unwrap();
    for model in [
        fdtemp::twotime::settings::Model::Broken,
        fdtemp::twotime::settings::Model::Free,
    ] {
        let settings = FitSettings {
            temperature: 0.5,
            resamples: 1000,
            model,
            ..FitSettings::default()
        };
        let r = analyze(&campaign, &settings, None, &Silent).unwrap();
        let f = &r.fits[0];
        let slope = f.fast_slope.estimate.unwrap();
        assert!((slope + 5.0 / 6.0).abs() < 0.03, "{model:?}: slope {slope}");
        // With the upper slope fixed at −1 a tilted upper branch is also lack of fit, and
        // the caution then names curvature as a possible cause (`slope_above_curved`);
        // with both slopes free the upper line fits and the caution blames the thermometer.
        let fixed = model == fdtemp::twotime::settings::Model::Broken;
        assert!(
            f.cautions.iter().any(|c| match c.finding {
                Finding::SlopeAboveNotMinusOne { p, .. } => p <= 0.05,
                Finding::SlopeAboveCurved { p, .. } => fixed && p <= 0.05,
                _ => false,
            }),
            "{model:?}: {:?}",
            f.cautions
        );
        if model == fdtemp::twotime::settings::Model::Free {
            let x = f.ratio.estimate.unwrap();
            assert!((x - 0.45 * 5.0 / 6.0).abs() < 0.03, "free X {x}");
        }
    }
}

#[test]
fn normalized_axes_recover_the_ratio_when_c_tt_is_not_one() {
    // Common practice (continuous variables): with C(t,t) ≠ 1, the plot of
    // k T chi / C(t,t) against C / C(t,t) has slope -1 in equilibrium. Scale each point's
    // C and chi by a known C(t,t) and give it as corr_eq.
    let spec = SynthSpec {
        samples: 60,
        ..SynthSpec::default()
    };
    let base = generate(&spec).unwrap();
    let scale: Vec<f64> = base
        .points()
        .iter()
        .map(|g| 2.0 + (g.t / g.tw).ln().sin())
        .collect();
    let mut corr = base.corr().clone();
    let mut resp = base.resp().clone();
    for (j, s) in scale.iter().enumerate() {
        corr.column_mut(j).mapv_inplace(|v| v * s);
        resp.column_mut(j).mapv_inplace(|v| v * s);
    }
    let eq = ndarray::Array2::from_shape_fn(corr.dim(), |(_, j)| scale[j]);
    let c = fdtemp::Campaign::new(
        base.sample_ids().to_vec(),
        base.points().to_vec(),
        corr,
        resp,
        Some(eq),
    )
    .unwrap();
    let settings = FitSettings {
        temperature: 0.6,
        resamples: 500,
        ..FitSettings::default()
    };
    let r = analyze(&c, &settings, None, &Silent).unwrap();
    assert_eq!(
        r.settings.axes_used,
        fdtemp::twotime::points::Axes::Normalized
    );
    let x = r.fits[0].ratio.estimate.unwrap();
    assert!((x - 0.45).abs() < 0.02, "normalized X {x}");
    let plain = FitSettings {
        axes: fdtemp::twotime::points::Axes::Plain,
        ..settings
    };
    let rp = analyze(&c, &plain, None, &Silent).unwrap();
    assert!(
        (rp.fits[0].ratio.estimate.unwrap() - 0.45).abs() > 0.05,
        "plain axes are off"
    );
}

#[test]
fn a_break_near_the_edge_of_the_data_is_flagged() {
    // The plateau at C = 0.993 leaves only a few points above the break.
    let spec = SynthSpec {
        plateau: 0.993,
        samples: 30,
        ..SynthSpec::default()
    };
    let r = fit(&spec, 300);
    let f = &r.fits[0];
    let edge = |c: &Caution| {
        matches!(
            c.finding,
            Finding::FewPointsOneSide { .. } | Finding::BreakAtEdgeInResamples { .. }
        )
    };
    assert!(f.cautions.iter().any(edge), "{:?}", f.cautions);
    assert!(
        !f.cautions.iter().any(|c| matches!(
            c.finding,
            Finding::SlopeAboveNotMinusOne { .. } | Finding::SlopeAboveCurved { .. }
        )),
        "{:?}",
        f.cautions
    );
    // A well-placed break gives no such caution.
    let ok = fit(
        &SynthSpec {
            samples: 30,
            ..SynthSpec::default()
        },
        300,
    );
    assert!(
        !ok.fits[0].cautions.iter().any(edge),
        "{:?}",
        ok.fits[0].cautions
    );
}
