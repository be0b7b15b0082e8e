//! End-to-end tests of the command line: the demo, a fit with its outputs, the safety of
//! output files, determinism across thread counts, and bad inputs with their exact
//! messages (exit code 2).

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::Path;

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

/// A campaign written the way a user would: a small script's output, with their own
/// column names (run, age, time, C, chi).
fn user_campaign(dir: &Path) -> std::path::PathBuf {
    let spec = fdtemp::scenarios::synth::SynthSpec {
        samples: 24,
        points_per_tw: 20,
        ..Default::default()
    };
    let c = fdtemp::scenarios::synth::generate(&spec).unwrap();
    let text = String::from_utf8(fdtemp::input::write_campaign(&c)).unwrap();
    let text = text.replacen("sample,tw,t,corr,resp", "run,age,time,C,chi", 1);
    let path = dir.join("my campaign.csv");
    std::fs::write(&path, text).unwrap();
    path
}

/// `fdtemp fit FILE` with the column mapping of [`user_campaign`] and `-T 0.6`.
fn fit_user(input: &Path) -> Command {
    let mut cmd = fdtemp();
    cmd.arg("fit").arg(input).args(["-T", "0.6"]);
    for m in ["sample=run", "tw=age", "t=time", "corr=C", "resp=chi"] {
        cmd.args(["--column", m]);
    }
    cmd
}

#[test]
fn demo_writes_its_files_and_says_how_close_it_came() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    fdtemp()
        .args(["demo", "--out"])
        .arg(&out)
        .assert()
        .success()
        .stdout(predicate::str::contains("estimate against the truth"))
        .stdout(predicate::str::contains("X        truth 0.4500"))
        .stdout(predicate::str::contains("inside the interval"))
        .stdout(predicate::str::contains(
            "T_eff over 20.0–500 Hz: truth 295.0 K (the bath)",
        ))
        .stdout(predicate::str::contains("departure: truth"));
    for f in [
        "campaign.csv",
        "truth.json",
        "fit.json",
        "points.csv",
        "spectrum.csv",
        "spectrum-fit.json",
    ] {
        assert!(out.join(f).is_file(), "{f}");
    }
    // A second run finds identical files and leaves them alone.
    fdtemp()
        .args(["demo", "--out"])
        .arg(&out)
        .assert()
        .success();
    // A file the user changed is not overwritten without asking.
    std::fs::write(out.join("points.csv"), "mine\n").unwrap();
    fdtemp()
        .args(["demo", "--out"])
        .arg(&out)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "points.csv: exists with other content; pass --overwrite",
        ));
    assert_eq!(
        std::fs::read_to_string(out.join("points.csv")).unwrap(),
        "mine\n"
    );
}

#[test]
fn fit_reads_a_user_file_with_mapped_columns_and_writes_json_and_points() {
    let dir = tempfile::tempdir().unwrap();
    let input = user_campaign(dir.path());
    let json = dir.path().join("fit.json");
    let points = dir.path().join("points.csv");
    fit_user(&input)
        .args(["-B", "400", "--seed", "5", "--json"])
        .arg(&json)
        .arg("--points")
        .arg(&points)
        .assert()
        .success()
        .stdout(predicate::str::contains(
            "24 samples, 3 waiting times (100, 1000, 10000), 60 points",
        ))
        .stdout(predicate::str::contains("verdict    one break"))
        .stdout(predicate::str::contains("methods"))
        .stdout(predicate::str::contains("only 24 samples").not());
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    assert_eq!(v["settings"]["seed"], 5);
    assert_eq!(v["fits"].as_array().unwrap().len(), 4);
    let x = v["fits"][0]["x"]["estimate"].as_f64().unwrap();
    assert!((x - 0.45).abs() < 0.05, "X = {x}");
    let csv = std::fs::read_to_string(&points).unwrap();
    assert_eq!(csv.lines().next(), Some("tw,t,x,x_se,y,y_se"));
    assert_eq!(csv.lines().count(), 61);
}

#[test]
fn the_json_uses_the_report_words_and_the_text_says_p_at_its_floor_as_a_bound() {
    let dir = tempfile::tempdir().unwrap();
    let input = user_campaign(dir.path());
    let json = dir.path().join("fit.json");
    fit_user(&input)
        .args(["-B", "400", "--json"])
        .arg(&json)
        .assert()
        .success()
        .stdout(predicate::str::contains("(p ≤ 0.002 for equilibrium)"))
        // The methods paragraph is wrapped: compare with its lines joined.
        .stdout(predicate::function(|out: &str| {
            out.split_whitespace()
                .collect::<Vec<_>>()
                .join(" ")
                .contains("for the joint fit p ≤ 0.002")
        }))
        .stdout(predicate::str::contains("p = ≤").not());
    let v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    assert_eq!(v["schema"], fdtemp::twotime::SCHEMA);
    let f = &v["fits"][0];
    for key in [
        "x",
        "slope_above",
        "p_equilibrium",
        "p_slope_minus_one",
        "equilibrium_statistic",
    ] {
        assert!(f.get(key).is_some(), "{key} missing");
    }
    for old in [
        "ratio",
        "fast_slope",
        "equilibrium_p",
        "thermometer_p",
        "equilibrium_stat",
    ] {
        assert!(f.get(old).is_none(), "old name {old} still written");
    }
    assert!(v["verdict"]["x"].is_array() && v["verdict"].get("ratio").is_none());
}

#[test]
fn the_si_header_writes_k_in_scientific_notation() {
    let dir = tempfile::tempdir().unwrap();
    let input = user_campaign(dir.path());
    fit_user(&input)
        .args(["-B", "200", "--units", "si"])
        .assert()
        .success()
        .stdout(predicate::str::contains("(k = 1.380649e-23 J/K, SI)"))
        .stdout(predicate::str::contains("0.0000000").not());
}

#[test]
fn fit_never_overwrites_an_existing_output_or_its_input() {
    let dir = tempfile::tempdir().unwrap();
    let input = user_campaign(dir.path());
    let json = dir.path().join("old.json");
    std::fs::write(&json, "keep me").unwrap();
    fit_user(&input)
        .args(["-B", "200", "--json"])
        .arg(&json)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "old.json: exists already; pass --overwrite to replace it",
        ));
    assert_eq!(std::fs::read_to_string(&json).unwrap(), "keep me");
    fit_user(&input)
        .args(["-B", "200", "--overwrite", "--json"])
        .arg(&input)
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "is an input file; refusing to write over it",
        ));
    fit_user(&input)
        .args(["-B", "200", "--json"])
        .arg(dir.path().join("no/such/folder/out.json"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("does not exist"));
}

#[test]
fn a_failed_fit_leaves_no_output_file() {
    let dir = tempfile::tempdir().unwrap();
    let json = dir.path().join("out.json");
    fdtemp()
        .args(["fit", "fixtures/bad/nan_value.csv", "-T", "1", "--json"])
        .arg(&json)
        .assert()
        .code(2);
    assert!(!json.exists());
}

#[test]
fn the_same_seed_gives_byte_identical_json_at_one_and_two_threads() {
    let dir = tempfile::tempdir().unwrap();
    let input = user_campaign(dir.path());
    let run = |threads: &str, name: &str| {
        let out = dir.path().join(name);
        fit_user(&input)
            .args(["-B", "500", "--seed", "42", "--threads", threads, "--json"])
            .arg(&out)
            .assert()
            .success();
        std::fs::read(out).unwrap()
    };
    assert_eq!(run("1", "one.json"), run("2", "two.json"));
}

/// Each malformed input, and the exact message it must produce (exit code 2).
const BAD_INPUTS: &[(&str, &str)] = &[
    (
        "missing_column.csv",
        "fixtures/bad/missing_column.csv:1: no column 'resp' in the header (found: sample, tw, t, corr); expected columns sample, tw, t, corr, resp",
    ),
    (
        "text_in_number.csv",
        "fixtures/bad/text_in_number.csv:3:4: column 'corr' is 'n/a', expected a number",
    ),
    (
        "nan_value.csv",
        "fixtures/bad/nan_value.csv:3:4: column 'corr' is 'NaN', expected a finite number",
    ),
    (
        "duplicate_row.csv",
        "fixtures/bad/duplicate_row.csv:4: sample 'a' at tw = 1, t = 2 appears again (first on line 2); expected one row per (sample, tw, t)",
    ),
    (
        "missing_point.csv",
        "fixtures/bad/missing_point.csv: sample 'b' has no row for tw = 1, t = 3, which sample 'a' has on line 3; every sample needs the same (tw, t) points (--drop-incomplete leaves out the samples that miss points)",
    ),
    (
        "t_before_tw.csv",
        "fixtures/bad/t_before_tw.csv:2:3: t = 5 is not later than tw = 10; expected t > tw",
    ),
    (
        "single_sample.csv",
        "fixtures/bad/single_sample.csv: only 1 sample ('a') in the file; at least 2 independent samples are needed to estimate errors",
    ),
    (
        "truncated_line.csv",
        "fixtures/bad/truncated_line.csv:3: the line has 4 fields, expected 5 as in the header (a cut-off line or a stray delimiter?)",
    ),
    (
        "semicolons.csv",
        "fixtures/bad/semicolons.csv:1: no column 'sample' in the header (found: sample;tw;t;corr;resp); expected columns sample, tw, t, corr, resp (the header has a single column with --delimiter comma: give --delimiter semicolon)",
    ),
    (
        "empty.csv",
        "fixtures/bad/empty.csv: the file is empty; expected a header line with columns sample, tw, t, corr, resp",
    ),
    (
        "duplicate_header.csv",
        "fixtures/bad/duplicate_header.csv:1:5: column 'tw' appears twice in the header (columns 2 and 5); expected each name once",
    ),
    (
        "constant_correlation.csv",
        "fixtures/bad/constant_correlation.csv: the mean correlation is 0.5 at every point; the parametric plot needs C to vary",
    ),
    (
        "too_few_points.csv",
        "fixtures/bad/too_few_points.csv: cannot fit a break: 8 points in all, and each branch needs at least 5 points with distinct C values (lower --min-branch, or add points)",
    ),
];

#[test]
fn each_bad_input_gives_its_exact_message_and_exit_code_2() {
    for (file, message) in BAD_INPUTS {
        fdtemp()
            .args([
                "fit",
                &format!("fixtures/bad/{file}"),
                "-T",
                "1",
                "-B",
                "200",
            ])
            .assert()
            .code(2)
            .stdout("")
            .stderr(format!("error: {message}\n"));
    }
}

#[test]
fn bad_settings_give_their_exact_message_and_exit_code_2() {
    let cases: &[(&[&str], &str)] = &[
        (
            &["-T", "-1"],
            "error: --temperature is -1, expected a positive number\n",
        ),
        (
            &["-T", "1", "--level", "1.5"],
            "error: --level is 1.5, expected a number between 0 and 1 (for example 0.95)\n",
        ),
        (
            &["-T", "1", "-B", "0"],
            "error: --resamples is 0, expected at least 100 (2000 or more for intervals a paper can quote)\n",
        ),
        (
            &["-T", "1", "--threads", "0"],
            "error: --threads is 0, expected at least 1\n",
        ),
        (
            &["-T", "1", "--column", "chi"],
            "error: column mapping 'chi' is not ROLE=NAME (for example resp=chi_zfc)\n",
        ),
        (
            &["-T", "1", "--axes", "normalized"],
            "error: --axes normalized needs the column corr_eq (C(t,t)) in the input\n",
        ),
    ];
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("c.csv");
    let spec = fdtemp::scenarios::synth::SynthSpec {
        samples: 4,
        points_per_tw: 12,
        ..Default::default()
    };
    std::fs::write(
        &input,
        fdtemp::input::write_campaign(&fdtemp::scenarios::synth::generate(&spec).unwrap()),
    )
    .unwrap();
    for (args, message) in cases {
        fdtemp()
            .arg("fit")
            .arg(&input)
            .args(*args)
            .assert()
            .code(2)
            .stderr(*message);
    }
    fdtemp()
        .args(["fit", "no/such/file.csv", "-T", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::starts_with(
            "error: no/such/file.csv: cannot read:",
        ));
}

#[test]
fn a_byte_order_mark_windows_line_ends_and_comments_are_accepted() {
    let dir = tempfile::tempdir().unwrap();
    let spec = fdtemp::scenarios::synth::SynthSpec {
        samples: 6,
        points_per_tw: 12,
        ..Default::default()
    };
    let text = String::from_utf8(fdtemp::input::write_campaign(
        &fdtemp::scenarios::synth::generate(&spec).unwrap(),
    ))
    .unwrap();
    let text = format!(
        "\u{feff}# exported by a lab script\n{}",
        text.replace('\n', "\r\n")
    );
    let input = dir.path().join("win.csv");
    std::fs::write(&input, text).unwrap();
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "-B", "200"])
        .assert()
        .success()
        .stdout(predicate::str::contains("6 samples"))
        .stdout(predicate::str::contains(
            "only 6 samples: bootstrap intervals from fewer than 20 samples are unreliable",
        ));
}

/// A file with Windows line ends names the same line as with Unix ones (the CSV layer
/// counted lines at `\n` only and named the line before).
#[test]
fn crlf_files_name_the_right_line() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("crlf.csv");
    std::fs::write(&file, "sample,tw,t,corr,resp\r\na,1,2,x,1\r\n").unwrap();
    fdtemp()
        .arg("fit")
        .arg(&file)
        .args(["-T", "1"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "crlf.csv:2:4: column 'corr' is 'x', expected a number",
        ));
}
