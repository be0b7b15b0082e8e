//! The weighted line fit against NIST StRD certified values.

use fdtemp::fit::fit_line;

fn norris() -> (Vec<f64>, Vec<f64>) {
    let text = std::fs::read_to_string("fixtures/Norris.dat").unwrap();
    // The data block follows the last line that starts with "Data:" (its column heading).
    let all: Vec<&str> = text.lines().collect();
    let start = all
        .iter()
        .rposition(|l| l.trim_start().starts_with("Data:"))
        .unwrap();
    let lines = text.lines().skip(start + 1);
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for l in lines {
        let v: Vec<f64> = l
            .split_whitespace()
            .filter_map(|s| s.parse().ok())
            .collect();
        if v.len() == 2 {
            y.push(v[0]);
            x.push(v[1]);
        }
    }
    (x, y)
}

/// Relative error, as NIST's "log relative error" checks count agreeing digits.
fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

#[test]
fn norris_line_matches_nist_certified_values() {
    let (x, y) = norris();
    assert_eq!(x.len(), 36, "{x:?}");
    let f = fit_line(&x, &y, None).unwrap();
    // Source: NIST StRD, Norris (Norris.dat header), certified values.
    assert!(
        rel(f.intercept, -0.262323073774029) < 1e-9,
        "B0 {}",
        f.intercept
    );
    assert!(rel(f.slope, 1.00211681802045) < 1e-12, "B1 {}", f.slope);
    assert!(rel(f.intercept_sd, 0.232818234301152) < 1e-9);
    assert!(rel(f.slope_sd, 0.429796848199937e-3) < 1e-9);
    assert!(rel(f.residual_sd, 0.884796396144373) < 1e-10);
    assert!(rel(f.r_squared, 0.999993745883712) < 1e-12);
}

#[test]
fn equal_weights_give_the_unweighted_fit_and_scaling_weights_changes_nothing() {
    // Common practice: weighted least squares is invariant to a common factor on all
    // weights, and unit weights reproduce ordinary least squares.
    let (x, y) = norris();
    let plain = fit_line(&x, &y, None).unwrap();
    let w = vec![3.7; x.len()];
    let weighted = fit_line(&x, &y, Some(&w)).unwrap();
    assert!(rel(weighted.slope, plain.slope) < 1e-13);
    assert!(rel(weighted.intercept, plain.intercept) < 1e-10);
    assert!(rel(weighted.slope_sd, plain.slope_sd) < 1e-10);
}

#[test]
fn integer_weights_equal_repeating_points() {
    // Common practice: a weight of 2 on a point is the same as listing the point twice
    // (for the coefficients).
    let (x, y) = norris();
    let mut w = vec![1.0; x.len()];
    w[3] = 2.0;
    w[10] = 2.0;
    let weighted = fit_line(&x, &y, Some(&w)).unwrap();
    let mut xr = x.clone();
    let mut yr = y.clone();
    for i in [3, 10] {
        xr.push(x[i]);
        yr.push(y[i]);
    }
    let repeated = fit_line(&xr, &yr, None).unwrap();
    assert!(rel(weighted.slope, repeated.slope) < 1e-12);
    assert!(rel(weighted.intercept, repeated.intercept) < 1e-9);
}
