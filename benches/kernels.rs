//! Speed of fdtemp's kernels (criterion). Run: `cargo bench --bench kernels`.
//! Whole-process, side-by-side timings are in benches/compare.py (DEVELOPERS.md).

use criterion::{Criterion, criterion_group, criterion_main};
use fdtemp::FitSettings;
use fdtemp::fit::{Base, Workspace, broken::search};
use fdtemp::scenarios::synth::{SynthSpec, generate};
use fdtemp::twotime::{Silent, analyze};
use ndarray::Array2;
use std::hint::black_box;

fn w_shape(samples: usize) -> fdtemp::Campaign {
    let spec = SynthSpec {
        samples,
        waiting_times: (0..12).map(|k| 100.0 * 2f64.powi(k)).collect(),
        points_per_tw: 100,
        ..SynthSpec::default()
    };
    generate(&spec).unwrap()
}

fn break_search(c: &mut Criterion) {
    // The joint curve of W3 (100 samples, 12 waiting times × 100 points, listed curve by
    // curve): x from the full data and from two bootstrap resamples, so that a resample's
    // x must be sorted again from the full data's order, as in the fit (12 overlapping
    // curves: a few shifts per point).
    let camp = w_shape(100);
    let (n, p) = (camp.n_samples(), camp.n_points());
    let d = fdtemp::twotime::points::DataMatrix::of_campaign(&camp, false);
    let mut counts = vec![0u32; n];
    let means = d.product(&fdtemp::resample::weight_rows(1, 0, 2, &mut counts));
    let full = d.means();
    // x = C̄, r = C̄ + 0.6 χ̄ (the fixed-slope response at k T = 0.6).
    let point = |m: ndarray::ArrayView1<'_, f64>| -> (Vec<f64>, Vec<f64>) {
        let x: Vec<f64> = m.iter().take(p).copied().collect();
        let r = x
            .iter()
            .zip(m.iter().skip(p))
            .map(|(x, c)| x + 0.6 * c)
            .collect();
        (x, r)
    };
    let (x0, _) = point(full.view());
    let (x1, r1) = point(means.row(0));
    let (x2, r2) = point(means.row(1));
    let w = vec![1.0; p];
    let mut ws = Workspace::sorted_by(&x0);
    // Each call alternates between two inputs: new x (the x part made afresh, as in a
    // resample's fit), or the same x with other responses (the x part reused).
    let cases = [
        ("resampled x each call", [&x1, &x2], [&r1, &r2]),
        ("same x (x part reused)", [&x1, &x1], [&r1, &r2]),
    ];
    for (label, xs, rs) in cases {
        c.bench_function(&format!("break search, {p} points, {label}"), |b| {
            let mut k = 0;
            b.iter(|| {
                k ^= 1;
                let (x, r) = (black_box(xs[k]), black_box(rs[k]));
                search(x, r, &w, Base::Constant, 5, &mut ws, None)
            })
        });
    }
}

fn resampling_product(c: &mut Criterion) {
    let camp = w_shape(1000);
    // The fit's data matrix: the campaign's C and χ borrowed, one moment column per point.
    let mut d = fdtemp::twotime::points::DataMatrix::of_campaign(&camp, false);
    let n = camp.n_samples();
    d.push(Array2::<f64>::from_elem((n, camp.n_points()), 0.5));
    // One chunk of replicates, as the fit makes them (faer's product, block by block).
    let rows = fdtemp::twotime::chunk_rows(d.ncols());
    let mut wm = Array2::<f64>::zeros((rows, n));
    let mut counts = vec![0u32; n];
    for row in 0..rows {
        fdtemp::resample::draw_counts(1, row as u64, n, &mut counts);
        for (i, &k) in counts.iter().enumerate() {
            wm[[row, i]] = f64::from(k) / n as f64;
        }
    }
    let label = format!(
        "resampling product, {rows} resamples x {n} samples x {} columns",
        d.ncols()
    );
    c.bench_function(&label, |b| b.iter(|| black_box(d.product(&wm))));
}

fn reading(c: &mut Criterion) {
    // The tidy table of W3 (8 MB) parsed from memory: the reader without the disk.
    let text = fdtemp::input::write_campaign(&w_shape(100));
    let names = fdtemp::input::ColumnNames::default();
    let label = format!(
        "reading the W3 table from memory ({} MB)",
        text.len() / 1_000_000
    );
    c.bench_function(&label, |b| {
        b.iter(|| {
            fdtemp::input::tidy::parse_campaign(
                black_box(text.as_slice()),
                std::path::Path::new("w3.csv"),
                &names,
            )
            .unwrap()
        })
    });
}

fn whole_fit(c: &mut Criterion) {
    let camp = w_shape(100);
    let s = FitSettings {
        temperature: 0.6,
        resamples: 2000,
        ..FitSettings::default()
    };
    let mut g = c.benchmark_group("whole fit");
    g.sample_size(10);
    g.bench_function("W3: 100 samples x 1200 points, B = 2000, BCa", |b| {
        b.iter(|| analyze(black_box(&camp), &s, None, &Silent).unwrap())
    });
    // The smooth X(C) beside the broken stick: two more NNLS fits per resample and curve.
    let smooth = FitSettings {
        model: fdtemp::twotime::Model::Smooth,
        ..s.clone()
    };
    g.bench_function(
        "W3 --model smooth: 100 samples x 1200 points, B = 2000",
        |b| b.iter(|| analyze(black_box(&camp), &smooth, None, &Silent).unwrap()),
    );
    g.finish();
}

/// `fit --calibrate 200` on a 100-sample × 120-point campaign (3 × 40 points), B = 2000:
/// the budget is under a minute on 2 cores for the default design check (twice
/// this: 200 campaigns about each of two truths).
fn calibrated_fit(c: &mut Criterion) {
    let camp = generate(&SynthSpec {
        samples: 100,
        ..SynthSpec::default()
    })
    .unwrap();
    let s = FitSettings {
        temperature: 0.6,
        resamples: 2000,
        ..FitSettings::default()
    };
    let d = fdtemp::twotime::design::DesignSettings {
        campaigns: 200,
        noise: fdtemp::twotime::design::Noise::Gaussian,
        seed: 1,
    };
    let mut g = c.benchmark_group("design check");
    g.sample_size(10);
    g.bench_function(
        "fit --calibrate 200: 100 samples x 120 points, B = 2000",
        |b| {
            b.iter(|| {
                fdtemp::twotime::design::calibrated_fit(black_box(&camp), &s, &d, None, &Silent)
                    .unwrap()
            })
        },
    );
    g.finish();
}

criterion_group!(
    benches,
    break_search,
    resampling_product,
    reading,
    whole_fit,
    calibrated_fit
);
criterion_main!(benches);
