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

/// A campaign table written with a random mix of what files in the wild hold: delimiter,
/// CRLF or LF ends, a byte-order mark, comment and blank lines, spaces around fields,
/// quoted sample names that hold the delimiter. Returns the text, the delimiter, and the
/// 1-based line number of each data row.
fn decorated(style: &[u8], values: &[f64], n: usize, m: usize) -> (String, u8, Vec<u64>) {
    let d = [b',', b';', b'\t'][style[0] as usize % 3];
    let sep = (d as char).to_string();
    let mut s = String::new();
    let mut line = 1u64;
    let mut rows = Vec::new();
    if style[1].is_multiple_of(2) {
        s.push('\u{feff}');
    }
    s.push_str(&["sample", "tw", "t", "corr", "resp"].join(&sep));
    s.push('\n');
    let mut k = 2;
    for i in 0..n {
        for j in 0..m {
            let b = style[k % style.len()];
            k += 1;
            let end = if b & 1 == 0 { "\n" } else { "\r\n" };
            if b & 6 == 2 {
                s.push_str(&format!("# note{sep} row {i}{end}"));
                line += 1;
            }
            if b & 6 == 4 {
                s.push_str(end);
                line += 1;
            }
            let pad = if b & 8 == 0 { "" } else { " " };
            // One spelling per sample: quoted (holding the delimiter) or plain.
            let name = if style[i % style.len()] & 16 == 0 {
                format!("s{i}")
            } else {
                format!("\"s{sep} {i}\"")
            };
            let v = values[(i * m + j) % values.len()];
            let fields = [
                name,
                "1".to_string(),
                format!("{}", j + 2),
                format!("{v:?}"),
                format!("{:e}", v * 0.5),
            ];
            // Spaces around fields, but not outside quotes (RFC 4180 opens a quoted field
            // with its first character only; fdtemp is laxer there).
            let fields: Vec<String> = fields
                .iter()
                .map(|f| {
                    if f.starts_with('"') {
                        f.clone()
                    } else {
                        format!("{pad}{f}{pad}")
                    }
                })
                .collect();
            s.push_str(&fields.join(&sep));
            s.push_str(end);
            line += 1;
            rows.push(line);
        }
    }
    (s, d, rows)
}

/// The (sample, tw, t) → (corr, resp) map of a campaign.
fn table_of(c: &Campaign) -> Vec<(String, u64, u64, u64, u64)> {
    let mut out = Vec::new();
    for (i, id) in c.sample_ids().iter().enumerate() {
        for (j, g) in c.points().iter().enumerate() {
            out.push((
                id.clone(),
                g.tw.to_bits(),
                g.t.to_bits(),
                c.corr()[[i, j]].to_bits(),
                c.resp()[[i, j]].to_bits(),
            ));
        }
    }
    out.sort();
    out
}

fn delimiter_of(d: u8) -> fdtemp::input::Delimiter {
    match d {
        b',' => fdtemp::input::Delimiter::Comma,
        b';' => fdtemp::input::Delimiter::Semicolon,
        _ => fdtemp::input::Delimiter::Tab,
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// fdtemp's own table reader reads what a general-purpose CSV parser reads.
    /// Source: the `csv` crate (a general-purpose reference library), with comment lines,
    /// trimming and flexible widths switched on as fdtemp documents its format.
    #[test]
    fn the_table_reader_agrees_with_the_csv_crate(
        style in prop::collection::vec(any::<u8>(), 3..40),
        values in prop::collection::vec(-1e3f64..1e3, 1..20),
        n in 2usize..6, m in 1usize..6,
    ) {
        let (text, d, _) = decorated(&style, &values, n, m);
        let how = fdtemp::input::CampaignRead { delimiter: delimiter_of(d), ..Default::default() };
        let ours = fdtemp::input::tidy::parse_campaign_with(text.as_bytes(), std::path::Path::new("t.csv"), &how).unwrap();
        let plain = text.trim_start_matches('\u{feff}');
        let mut rdr = csv::ReaderBuilder::new().has_headers(false).flexible(true).comment(Some(b'#'))
            .trim(csv::Trim::All).delimiter(d).from_reader(plain.as_bytes());
        let mut want = Vec::new();
        for rec in rdr.records().skip(1) {
            let rec = rec.unwrap();
            if rec.len() == 1 && rec[0].is_empty() { continue; }
            let num = |i: usize| rec[i].parse::<f64>().unwrap().to_bits();
            want.push((rec[0].to_string(), num(1), num(2), num(3), num(4)));
        }
        want.sort();
        prop_assert_eq!(table_of(&ours.campaign), want);
    }

    /// A bad number is reported at its own line and column whatever precedes it.
    /// Source: common practice (file:line:column errors).
    #[test]
    fn a_bad_number_is_named_at_its_line(
        style in prop::collection::vec(any::<u8>(), 3..40),
        n in 2usize..6, m in 1usize..6, which in any::<prop::sample::Index>(),
    ) {
        let (text, d, rows) = decorated(&style, &[0.5], n, m);
        let at = which.index(rows.len());
        // Break the corr field of the chosen row: it is the only "0.5" on that line.
        let mut lines: Vec<&str> = text.split_inclusive('\n').collect();
        let broken = lines[rows[at] as usize - 1].replacen("0.5", "0.5x", 1);
        lines[rows[at] as usize - 1] = &broken;
        let text = lines.concat();
        let how = fdtemp::input::CampaignRead { delimiter: delimiter_of(d), ..Default::default() };
        let e = fdtemp::input::tidy::parse_campaign_with(text.as_bytes(), std::path::Path::new("t.csv"), &how).unwrap_err();
        let want = format!("t.csv:{}:4:", rows[at]);
        prop_assert!(e.to_string().starts_with(&want), "{} vs {}", e, want);
    }
}
