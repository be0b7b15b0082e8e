//! Invariants the physics and the statistics give, checked on random small campaigns.
//!
//! Each property says why it holds. Resampling draws the same sample indices for the same
//! seed, so where an invariant holds for every resample it holds for the intervals too.

use fdtemp::twotime::{FitReport, Silent, analyze};
use fdtemp::{Campaign, FitSettings, GridPoint};
use ndarray::Array2;
use proptest::prelude::*;

/// A random campaign: `n` samples on 2 waiting times × 12 times, means near a broken
/// stick with ratio `x` and break 0.55, plus per-sample noise.
fn campaign(n: usize, x: f64, noise: &[f64]) -> Campaign {
    let points: Vec<GridPoint> = [10.0, 100.0]
        .iter()
        .flat_map(|&tw| {
            (1..=12).map(move |k| GridPoint {
                tw,
                t: tw + f64::from(k) * tw / 3.0,
            })
        })
        .collect();
    let p = points.len();
    let mut corr = Array2::zeros((n, p));
    let mut resp = Array2::zeros((n, p));
    for i in 0..n {
        for j in 0..p {
            let c = 1.0 - (j % 12) as f64 / 12.0;
            let y = if c >= 0.55 {
                1.0 - c
            } else {
                0.45 + x * (0.55 - c)
            };
            let e = noise[(i * p + j) % noise.len()];
            corr[[i, j]] = c + 0.02 * e;
            resp[[i, j]] = y - 0.01 * e;
        }
    }
    let ids = (0..n).map(|i| format!("s{i:02}")).collect();
    Campaign::new(ids, points, corr, resp, None).unwrap()
}

fn run(c: &Campaign, s: &FitSettings) -> FitReport {
    analyze(c, s, None, &Silent).unwrap()
}

fn settings() -> FitSettings {
    FitSettings {
        temperature: 1.0,
        resamples: 200,
        min_branch: 3,
        ..FitSettings::default()
    }
}

fn close(a: Option<f64>, b: Option<f64>, tol: f64) -> bool {
    match (a, b) {
        (Some(a), Some(b)) => (a - b).abs() <= tol * (1.0 + a.abs()),
        (None, None) => true,
        _ => false,
    }
}

fn noise() -> impl Strategy<Value = Vec<f64>> {
    prop::collection::vec(-1.0f64..1.0, 64..200)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 12, ..ProptestConfig::default() })]

    /// y = k·T·χ: multiplying χ by a and T by 1/a leaves every parametric point, hence
    /// every fit and resample, the same (up to rounding).
    #[test]
    fn scaling_chi_up_and_temperature_down_leaves_x_unchanged(n in 6usize..14, x in 0.1f64..0.9, a in 0.01f64..100.0, e in noise()) {
        let c = campaign(n, x, &e);
        let scaled = Campaign::new(c.sample_ids().to_vec(), c.points().to_vec(), c.corr().clone(), c.resp() * a, None).unwrap();
        let r1 = run(&c, &settings());
        let r2 = run(&scaled, &FitSettings { temperature: 1.0 / a, ..settings() });
        for (f1, f2) in r1.fits.iter().zip(&r2.fits) {
            prop_assert!(close(f1.ratio.estimate, f2.ratio.estimate, 1e-8));
            prop_assert!(close(f1.ratio.low, f2.ratio.low, 1e-8) && close(f1.ratio.high, f2.ratio.high, 1e-8));
            prop_assert!(close(f1.brk.estimate, f2.brk.estimate, 1e-8));
        }
    }

    /// The order of rows in a file is not information: samples are kept in a canonical
    /// order, so any permutation of the rows gives byte-identical JSON.
    #[test]
    fn permuting_the_rows_of_a_file_changes_nothing(n in 4usize..10, x in 0.1f64..0.9, e in noise(), seed in any::<u64>()) {
        let c = campaign(n, x, &e);
        let text = String::from_utf8(fdtemp::input::write_campaign(&c)).unwrap();
        let mut lines: Vec<&str> = text.lines().skip(1).collect();
        // A seeded Fisher–Yates shuffle.
        let mut state = seed | 1;
        for i in (1..lines.len()).rev() {
            state ^= state << 13; state ^= state >> 7; state ^= state << 17;
            lines.swap(i, (state % (i as u64 + 1)) as usize);
        }
        let shuffled = format!("sample,tw,t,corr,resp\n{}\n", lines.join("\n"));
        let names = fdtemp::input::ColumnNames::default();
        let c2 = fdtemp::input::tidy::parse_campaign(shuffled.as_bytes(), std::path::Path::new("p.csv"), &names).unwrap();
        let j1 = fdtemp::report::json::fit_json(&run(&c, &settings()));
        let j2 = fdtemp::report::json::fit_json(&run(&c2, &settings()));
        prop_assert_eq!(j1, j2);
    }

    /// Every sample exactly on the equilibrium line y = 1 − x: the no-break model fits
    /// perfectly in the data and in every resample, so the test finds nothing, the slope
    /// is −1, and X below a break that does not exist is not quoted.
    #[test]
    fn data_on_the_equilibrium_line_give_slope_minus_one_and_no_violation(n in 4usize..12, e in noise()) {
        let c = campaign(n, 1.0, &e);
        let on_line = Campaign::new(c.sample_ids().to_vec(), c.points().to_vec(), c.corr().clone(), c.corr().mapv(|v| 1.0 - v), None).unwrap();
        let r = run(&on_line, &settings());
        let f = &r.fits[0];
        prop_assert!((f.fast_slope.estimate.unwrap() + 1.0).abs() < 1e-6, "slope = {:?}", f.fast_slope.estimate);
        prop_assert!(f.ratio.estimate.is_none() && !f.x_quotable);
        prop_assert!(f.equilibrium_p.unwrap() > 0.05);
        prop_assert!(f.brk.estimate.is_none());
    }

    /// A constant offset in the response (an instrument's zero) moves the equilibrium line
    /// up but changes no slope or break; an offset a in C moves the break by a.
    #[test]
    fn offsets_change_no_slope(n in 6usize..12, x in 0.1f64..0.9, b in -0.5f64..0.5, a in -0.3f64..0.3, e in noise()) {
        let c = campaign(n, x, &e);
        let r0 = run(&c, &settings());
        let shifted_resp = Campaign::new(c.sample_ids().to_vec(), c.points().to_vec(), c.corr().clone(), c.resp() + b, None).unwrap();
        let r1 = run(&shifted_resp, &settings());
        let shifted_corr = Campaign::new(c.sample_ids().to_vec(), c.points().to_vec(), c.corr() + a, c.resp() + a, None).unwrap();
        let r2 = run(&shifted_corr, &settings());
        let (f0, f1, f2) = (&r0.fits[0], &r1.fits[0], &r2.fits[0]);
        prop_assert!(close(f0.ratio.estimate, f1.ratio.estimate, 1e-6));
        prop_assert!(close(f0.ratio.estimate, f2.ratio.estimate, 1e-6));
        prop_assert!(close(f0.ratio.low, f1.ratio.low, 1e-6) && close(f0.ratio.high, f2.ratio.high, 1e-6));
        if let (Some(q0), Some(q2)) = (f0.brk.estimate, f2.brk.estimate) {
            prop_assert!((q2 - q0 - a).abs() < 1e-6, "break moved by {} for a shift {a}", q2 - q0);
        }
    }
}

#[test]
fn results_for_a_seed_are_byte_identical_at_1_2_and_8_threads() {
    let e: Vec<f64> = (0..97)
        .map(|i| ((i * 37 % 101) as f64 / 50.0) - 1.0)
        .collect();
    let c = campaign(30, 0.4, &e);
    let json = |threads| {
        fdtemp::with_threads(Some(threads), || {
            Ok(fdtemp::report::json::fit_json(&run(
                &c,
                &FitSettings {
                    resamples: 1000,
                    ..settings()
                },
            )))
        })
        .unwrap()
    };
    let one = json(1);
    assert_eq!(one, json(2));
    assert_eq!(one, json(8));
}
