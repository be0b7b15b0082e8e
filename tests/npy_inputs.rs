//! NumPy inputs of the command line: `.npz` campaigns and `.npy` noise records.
//!
//! - files written by numpy itself (fixtures/npy/, made by fixtures/npy/make_fixtures.py
//!   with float32, big-endian and compressed arrays) give the same result as the same
//!   numbers in the text formats;
//! - files written here (ndarray-npy) in every element type fdtemp reads, with mapped
//!   array names;
//! - every bad archive or array is an error naming the file and the array and what was
//!   expected (exit code 2).
//!
//! Source of the format: the NumPy `.npy` format specification (numpy.lib.format); an
//! `.npz` file is a zip archive of `.npy` files, one per array (numpy.savez).

use assert_cmd::Command;
use ndarray::{Array1, Array2};
use ndarray_npy::{NpzWriter, WriteNpyExt};
use std::path::{Path, PathBuf};

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

/// Stdout and JSON (without its input name) of a successful run of `args` + `--json`.
fn run_json(args: &[&str], file: &Path, json: &Path) -> (String, serde_json::Value) {
    let out = fdtemp()
        .args(&args[..1])
        .arg(file)
        .args(&args[1..])
        .arg("--overwrite")
        .arg("--json")
        .arg(json)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let mut v: serde_json::Value = serde_json::from_slice(&std::fs::read(json).unwrap()).unwrap();
    v.as_object_mut().unwrap().remove("input");
    let text = String::from_utf8(out.stdout)
        .unwrap()
        .replace(&file.display().to_string(), "FILE");
    (text, v)
}

/// The error of a run that must fail with exit code 2.
fn error_of(args: &[&str], file: &Path) -> String {
    let out = fdtemp()
        .args(&args[..1])
        .arg(file)
        .args(&args[1..])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(2), "{:?}", out);
    String::from_utf8(out.stderr).unwrap()
}

const FIT: &[&str] = &["fit", "-T", "1", "-B", "200"];

#[test]
fn a_campaign_that_numpy_wrote_reads_as_the_same_numbers_in_a_table() {
    let dir = tempfile::tempdir().unwrap();
    let j = |n: &str| dir.path().join(n);
    let npz = run_json(FIT, Path::new("fixtures/npy/campaign.npz"), &j("a.json"));
    let csv = run_json(FIT, Path::new("fixtures/npy/campaign.csv"), &j("b.json"));
    assert_eq!(npz, csv);
    assert!(
        npz.0
            .contains("FILE: 8 samples, 2 waiting times (10, 100), 28 points")
    );
}

#[test]
fn nan_marks_a_missing_point_refused_or_left_out_as_in_a_table() {
    let holes = Path::new("fixtures/npy/campaign_holes.npz");
    assert_eq!(
        error_of(FIT, holes),
        "error: fixtures/npy/campaign_holes.npz: corr[2, 0] is NaN: sample '103' has no value \
         at tw = 10, t = 10.1; expected finite numbers (--drop-incomplete leaves out the \
         samples that miss points)\n"
    );
    let dir = tempfile::tempdir().unwrap();
    let args = [FIT, &["--drop-incomplete"]].concat();
    let npz = run_json(&args, holes, &dir.path().join("a.json"));
    let csv = run_json(
        &args,
        Path::new("fixtures/npy/campaign_holes.csv"),
        &dir.path().join("b.json"),
    );
    assert_eq!(npz, csv);
    let ex = npz.1["excluded_samples"].as_array().unwrap();
    let names: Vec<&str> = ex.iter().map(|e| e["sample"].as_str().unwrap()).collect();
    assert_eq!(names, ["103", "107"]);
    assert_eq!(ex[0]["missing"].as_array().unwrap().len(), 2);
}

#[test]
fn a_noise_record_that_numpy_wrote_gives_the_text_records_spectrum() {
    let dir = tempfile::tempdir().unwrap();
    let args = &[
        "noise",
        "--sample-rate",
        "100",
        "--segment",
        "256",
        "--resistance",
        "1e3",
        "-T",
        "300",
    ];
    let npy = run_json(
        args,
        Path::new("fixtures/npy/noise.npy"),
        &dir.path().join("a.json"),
    );
    let csv = run_json(
        args,
        Path::new("fixtures/npy/noise.csv"),
        &dir.path().join("b.json"),
    );
    assert_eq!(npy, csv);
    assert!(npy.0.contains("FILE: 2 run(s) of 2048 samples at 100 Hz"));
}

/// A synthetic campaign as arrays: corr, resp (samples × points), tw, t, and its table.
struct Arrays {
    corr: Array2<f64>,
    resp: Array2<f64>,
    tw: Array1<f64>,
    t: Array1<f64>,
}

fn arrays() -> Arrays {
    let spec = fdtemp::scenarios::synth::SynthSpec {
        samples: 10,
        points_per_tw: 12,
        ..Default::default()
    };
    let c = fdtemp::scenarios::synth::generate(&spec).unwrap();
    Arrays {
        corr: c.corr().to_owned(),
        resp: c.resp().to_owned(),
        tw: c.points().iter().map(|g| g.tw).collect(),
        t: c.points().iter().map(|g| g.t).collect(),
    }
}

/// The table of `a`, samples named by their row numbers.
fn table(a: &Arrays) -> String {
    let mut s = String::from("sample,tw,t,corr,resp\n");
    for i in 0..a.corr.nrows() {
        for j in 0..a.tw.len() {
            s.push_str(&format!(
                "{i},{:?},{:?},{:?},{:?}\n",
                a.tw[j],
                a.t[j],
                a.corr[[i, j]],
                a.resp[[i, j]]
            ));
        }
    }
    s
}

/// Adds one named array to an archive being written.
type AddArray<'a> = &'a dyn Fn(&mut NpzWriter<std::fs::File>, &str);

fn npz(path: &Path, arrays: &[(&str, AddArray)]) {
    let mut w = NpzWriter::new(std::fs::File::create(path).unwrap());
    for (name, add) in arrays {
        add(&mut w, name);
    }
    w.finish().unwrap();
}

#[test]
fn arrays_written_here_in_every_element_type_and_with_mapped_names_read_as_the_table() {
    let a = arrays();
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("c.csv");
    std::fs::write(&csv, table(&a)).unwrap();
    let reference = run_json(FIT, &csv, &dir.path().join("c.json"));
    // float64 throughout, with the archive's names mapped by --column.
    let mapped = dir.path().join("mapped.npz");
    npz(
        &mapped,
        &[
            ("C", &|w, n| w.add_array(n, &a.corr).unwrap()),
            ("chi", &|w, n| w.add_array(n, &a.resp).unwrap()),
            ("tw", &|w, n| w.add_array(n, &a.tw).unwrap()),
            ("t", &|w, n| w.add_array(n, &a.t).unwrap()),
        ],
    );
    let args = [FIT, &["--column", "corr=C", "--column", "resp=chi"]].concat();
    assert_eq!(
        run_json(&args, &mapped, &dir.path().join("m.json")),
        reference
    );
    // Integer times (int64, int32) read as the same numbers when they are whole.
    let whole = Arrays {
        tw: a.tw.mapv(f64::round),
        t: a.t.mapv(|v| (v * 4.0).round()),
        ..arrays()
    };
    let csv2 = dir.path().join("whole.csv");
    std::fs::write(&csv2, table(&whole)).unwrap();
    let reference2 = run_json(FIT, &csv2, &dir.path().join("w.json"));
    let ints = dir.path().join("ints.npz");
    npz(
        &ints,
        &[
            ("corr", &|w, n| w.add_array(n, &whole.corr).unwrap()),
            ("resp", &|w, n| w.add_array(n, &whole.resp).unwrap()),
            ("tw", &|w, n| {
                w.add_array(n, &whole.tw.mapv(|v| v as i64)).unwrap()
            }),
            ("t", &|w, n| {
                w.add_array(n, &whole.t.mapv(|v| v as i32)).unwrap()
            }),
        ],
    );
    assert_eq!(run_json(FIT, &ints, &dir.path().join("i.json")), reference2);
    // A float32 noise record of one run (1-D).
    let rec = dir.path().join("one.npy");
    let x: Array1<f32> = (0..4096)
        .map(|i| ((i * 7919) % 1000) as f32 / 1000.0 - 0.5)
        .collect();
    x.write_npy(std::fs::File::create(&rec).unwrap()).unwrap();
    let text = dir.path().join("one.csv");
    let lines: String = x.iter().map(|v| format!("{:?}\n", f64::from(*v))).collect();
    std::fs::write(&text, lines).unwrap();
    let args = &[
        "noise",
        "--sample-rate",
        "10",
        "--segment",
        "256",
        "--resistance",
        "1",
        "-T",
        "1",
    ];
    let (a1, _) = run_json(args, &rec, &dir.path().join("r1.json"));
    let (a2, _) = run_json(args, &text, &dir.path().join("r2.json"));
    assert_eq!(a1, a2);
}

/// Writes an archive of `a` with one array replaced (or removed, with `None`).
fn archive_with(
    dir: &Path,
    name: &str,
    a: &Arrays,
    change: (&str, Option<Array2<f64>>),
) -> PathBuf {
    let path = dir.join(name);
    let mut w = NpzWriter::new(std::fs::File::create(&path).unwrap());
    let as2 = |v: &Array1<f64>| v.clone().insert_axis(ndarray::Axis(0));
    let all = [
        ("corr", a.corr.clone()),
        ("resp", a.resp.clone()),
        ("tw", as2(&a.tw)),
        ("t", as2(&a.t)),
    ];
    for (n, arr) in all {
        let arr = if n == change.0 {
            match &change.1 {
                None => continue,
                Some(x) => x.clone(),
            }
        } else {
            arr
        };
        if (n == "tw" || n == "t") && arr.nrows() == 1 {
            w.add_array(n, &arr.row(0).to_owned()).unwrap();
        } else {
            w.add_array(n, &arr).unwrap();
        }
    }
    w.finish().unwrap();
    path
}

#[test]
fn bad_archives_and_arrays_are_errors_naming_the_file_and_the_array() {
    let a = arrays();
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let check = |path: PathBuf, expected: &str| {
        assert_eq!(
            error_of(FIT, &path),
            format!("error: {}: {expected}\n", path.display())
        );
    };
    check(
        archive_with(d, "no_resp.npz", &a, ("resp", None)),
        "no array 'resp' in the archive (found: corr, tw, t); expected arrays corr, resp \
         (samples × points), tw, t (one per point) and optionally corr_eq, sample",
    );
    check(
        archive_with(
            d,
            "short_resp.npz",
            &a,
            ("resp", Some(a.resp.slice(ndarray::s![..4, ..]).to_owned())),
        ),
        "array 'resp' has shape (4, 36); expected (10, 36) as 'corr' (samples × points)",
    );
    check(
        archive_with(d, "tw_2d.npz", &a, ("tw", Some(Array2::zeros((2, 36))))),
        "array 'tw' has shape (2, 36); expected (36,): one value per point (per column of \
         'corr')",
    );
    let mut inf = a.corr.clone();
    inf[[3, 4]] = f64::INFINITY;
    check(
        archive_with(d, "inf.npz", &a, ("corr", Some(inf))),
        "corr[3, 4] is inf; expected a finite number",
    );
    let mut late = a.t.clone().insert_axis(ndarray::Axis(0));
    late[[0, 1]] = a.tw[1];
    check(
        archive_with(d, "t_at_tw.npz", &a, ("t", Some(late))),
        &format!(
            "t[1] = {} is not later than tw[1] = {}; expected t > tw",
            a.tw[1], a.tw[1]
        ),
    );
    check(
        archive_with(d, "one.npz", &a, ("corr", None)),
        "no array 'corr' in the archive (found: resp, tw, t); expected arrays corr, resp \
         (samples × points), tw, t (one per point) and optionally corr_eq, sample",
    );
    let single = Arrays {
        corr: a.corr.slice(ndarray::s![..1, ..]).to_owned(),
        resp: a.resp.slice(ndarray::s![..1, ..]).to_owned(),
        tw: a.tw.clone(),
        t: a.t.clone(),
    };
    check(
        archive_with(d, "single.npz", &single, ("", None)),
        "array 'corr' has 1 sample(s) (rows); at least 2 independent samples are needed to \
         estimate errors",
    );
    // An element type that is not a number fdtemp reads (unsigned bytes).
    let bytes = d.join("bytes.npz");
    npz(
        &bytes,
        &[
            ("corr", &|w, n| {
                w.add_array(n, &a.corr.mapv(|v| v as u8)).unwrap()
            }),
            ("resp", &|w, n| w.add_array(n, &a.resp).unwrap()),
            ("tw", &|w, n| w.add_array(n, &a.tw).unwrap()),
            ("t", &|w, n| w.add_array(n, &a.t).unwrap()),
        ],
    );
    check(
        bytes,
        "array 'corr' has element type '|u1'; expected numbers (float64, float32, int64 or \
         int32)",
    );
    let zip = d.join("text.npz");
    std::fs::write(&zip, "sample,tw,t\n").unwrap();
    let e = error_of(FIT, &zip);
    assert!(
        e.starts_with(&format!(
            "error: {}: the file is not a NumPy .npz archive (",
            zip.display()
        )) && e.ends_with("); expected the zip file that numpy.savez writes\n"),
        "{e}"
    );
    let one = d.join("corr.npy");
    a.corr
        .write_npy(std::fs::File::create(&one).unwrap())
        .unwrap();
    check(
        one.clone(),
        "a .npy file holds one array, and a campaign needs several (corr, resp, tw, t); \
         expected a .npz archive (numpy.savez) or a text table",
    );
    // Noise records: a transposed array, three dimensions, a NaN.
    let noise = |path: &Path| error_of(&["noise", "--sample-rate", "10"], path);
    let tall = d.join("tall.npy");
    Array2::<f64>::zeros((5000, 3))
        .write_npy(std::fs::File::create(&tall).unwrap())
        .unwrap();
    assert_eq!(
        noise(&tall),
        format!(
            "error: {}: the array has shape (5000, 3): 5000 runs of 3 samples; expected runs × \
             samples, one row per run (save the transpose: numpy.save(path, x.T))\n",
            tall.display()
        )
    );
    let cube = d.join("cube.npy");
    ndarray::Array3::<f64>::zeros((2, 3, 4))
        .write_npy(std::fs::File::create(&cube).unwrap())
        .unwrap();
    assert_eq!(
        noise(&cube),
        format!(
            "error: {}: the array has shape (2, 3, 4); expected one run (1 dimension) or runs × \
             samples (2 dimensions, one row per run)\n",
            cube.display()
        )
    );
    let mut x = Array2::<f64>::zeros((2, 5000));
    x[[1, 17]] = f64::NAN;
    let nan = d.join("nan.npy");
    x.write_npy(std::fs::File::create(&nan).unwrap()).unwrap();
    assert_eq!(
        noise(&nan),
        format!(
            "error: {}: the array is NaN at [1, 17]; expected finite samples\n",
            nan.display()
        )
    );
}

/// Reading speed of a large campaign: `.npz` against the tidy table (printed, not
/// asserted). Run with
///
///     cargo test --release --test npy_inputs -- --ignored --nocapture
#[test]
#[ignore]
fn reading_a_large_campaign_npz_against_csv() {
    let (n, np) = (2000, 500);
    let corr = Array2::from_shape_fn((n, np), |(i, j)| ((i * 31 + j * 17) % 997) as f64 / 997.0);
    let resp = corr.mapv(|v| 1.0 - v);
    let tw: Array1<f64> = (0..np).map(|j| (10 * (1 + j / 50)) as f64).collect();
    let t: Array1<f64> = (0..np)
        .map(|j| tw[j] * (1.0 + (1 + j % 50) as f64 / 10.0))
        .collect();
    let a = Arrays { corr, resp, tw, t };
    let dir = tempfile::tempdir().unwrap();
    let z = archive_with(dir.path(), "big.npz", &a, ("", None));
    let c = dir.path().join("big.csv");
    std::fs::write(&c, table(&a)).unwrap();
    let how = fdtemp::input::CampaignRead::default();
    for path in [&z, &c] {
        let start = std::time::Instant::now();
        let r = fdtemp::input::read_campaign_with(path, &how).unwrap();
        println!(
            "{}: {} bytes, {} samples × {} points read in {:.3} s",
            path.file_name().unwrap().to_string_lossy(),
            std::fs::metadata(path).unwrap().len(),
            r.campaign.n_samples(),
            r.campaign.n_points(),
            start.elapsed().as_secs_f64()
        );
    }
}
