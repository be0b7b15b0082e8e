//! The input conveniences of the command line, each with its exact messages (exit code 2):
//!
//! - `--delimiter` (semicolon, tab, whitespace) reads the same campaign, spectrum, loss
//!   table and noise record as the comma file, decimal commas included;
//! - a decimal comma with the comma delimiter is an error that says so;
//! - `--drop-incomplete` leaves out the samples that miss points and lists them in the
//!   text report and the JSON; without it the error names the sample, the point and the
//!   flag;
//! - `fdtemp completions` and `fdtemp man-pages` come from the clap definitions.
//!
//! The campaigns are invented data (`fdtemp::scenarios::synth`).

use assert_cmd::Command;
use predicates::prelude::*;
use rand::RngExt;
use std::path::{Path, PathBuf};

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

/// A small invented campaign in the tidy comma format.
fn campaign_text() -> String {
    let spec = fdtemp::scenarios::synth::SynthSpec {
        samples: 12,
        points_per_tw: 12,
        ..Default::default()
    };
    let c = fdtemp::scenarios::synth::generate(&spec).unwrap();
    String::from_utf8(fdtemp::input::write_campaign(&c)).unwrap()
}

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

/// The JSON of `fit FILE -T 0.6 -B 200` with `extra` options, without its input name.
fn fit_json(file: &Path, extra: &[&str]) -> serde_json::Value {
    let json = file.with_extension("json");
    fdtemp()
        .arg("fit")
        .arg(file)
        .args(["-T", "0.6", "-B", "200", "--overwrite", "--json"])
        .arg(&json)
        .args(extra)
        .assert()
        .success();
    let mut v: serde_json::Value = serde_json::from_slice(&std::fs::read(&json).unwrap()).unwrap();
    v.as_object_mut().unwrap().remove("input");
    v
}

/// Decimal commas: every `.` of a number becomes `,`.
fn decimal_commas(text: &str, sep: &str) -> String {
    text.lines()
        .map(|l| {
            l.split(',')
                .map(|f| f.replace('.', ","))
                .collect::<Vec<_>>()
                .join(sep)
        })
        .collect::<Vec<_>>()
        .join("\n")
}

#[test]
fn semicolon_tab_and_whitespace_tables_with_decimal_commas_give_the_comma_files_result() {
    let dir = tempfile::tempdir().unwrap();
    let text = campaign_text();
    let comma = write(dir.path(), "comma.csv", &text);
    let reference = fit_json(&comma, &[]);
    let semi = write(dir.path(), "semi.csv", &decimal_commas(&text, ";"));
    assert_eq!(fit_json(&semi, &["--delimiter", "semicolon"]), reference);
    let tab = write(dir.path(), "tab.tsv", &text.replace(',', "\t"));
    assert_eq!(fit_json(&tab, &["--delimiter", "tab"]), reference);
    // Aligned columns: runs of spaces and tabs, leading and trailing blanks.
    let aligned: String = decimal_commas(&text, "  \t ")
        .lines()
        .map(|l| format!("   {l}  \n"))
        .collect();
    let ws = write(dir.path(), "aligned.txt", &aligned);
    assert_eq!(fit_json(&ws, &["--delimiter", "whitespace"]), reference);
}

#[test]
fn a_semicolon_file_read_with_commas_says_which_delimiter_to_give() {
    let dir = tempfile::tempdir().unwrap();
    let semi = write(
        dir.path(),
        "semi.csv",
        "sample;tw;t;corr;resp\na;1;2;0,5;0,1\n",
    );
    fdtemp()
        .arg("fit")
        .arg(&semi)
        .args(["-T", "1"])
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}:1: no column 'sample' in the header (found: sample;tw;t;corr;resp); \
             expected columns sample, tw, t, corr, resp (the header has a single column with \
             --delimiter comma: give --delimiter semicolon)\n",
            semi.display()
        ));
}

#[test]
fn a_decimal_comma_with_the_comma_delimiter_is_an_error_that_says_so() {
    let dir = tempfile::tempdir().unwrap();
    let quoted = write(
        dir.path(),
        "quoted.csv",
        "sample,tw,t,corr,resp\na,1,2,\"0,5\",0.1\n",
    );
    fdtemp()
        .arg("fit")
        .arg(&quoted)
        .args(["-T", "1"])
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}:2:4: column 'corr' is '0,5', a decimal comma? With --delimiter comma \
             (the default) numbers need a decimal point; give --delimiter semicolon, tab or \
             whitespace for a file with decimal commas\n",
            quoted.display()
        ));
    let bare = write(
        dir.path(),
        "bare.csv",
        "sample,tw,t,corr,resp\na,1,2,0,5,0,1\n",
    );
    fdtemp()
        .arg("fit")
        .arg(&bare)
        .args(["-T", "1"])
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}:2: the line has 7 fields, expected 5 as in the header (a stray \
             delimiter, or a decimal comma? With --delimiter comma (the default) numbers need \
             a decimal point; give --delimiter semicolon, tab or whitespace for a file with \
             decimal commas)\n",
            bare.display()
        ));
}

/// The campaign without the rows of sample `drop` at its `which`-th points.
fn without_rows(text: &str, drop: &[(&str, usize)]) -> String {
    let mut seen = std::collections::HashMap::<String, usize>::new();
    let mut out = String::new();
    for (i, l) in text.lines().enumerate() {
        if i > 0 {
            let s = l.split(',').next().unwrap().to_string();
            let k = seen.entry(s.clone()).or_insert(0);
            *k += 1;
            if drop.iter().any(|&(d, j)| d == s && j + 1 == *k) {
                continue;
            }
        }
        out.push_str(l);
        out.push('\n');
    }
    out
}

#[test]
fn samples_that_miss_points_are_refused_with_the_flag_named_or_left_out_and_listed() {
    let dir = tempfile::tempdir().unwrap();
    let text = campaign_text();
    let ids: Vec<String> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap().to_string())
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .collect();
    let (a, b) = (ids[2].as_str(), ids[5].as_str());
    let holes = write(
        dir.path(),
        "holes.csv",
        &without_rows(&text, &[(a, 0), (a, 3), (b, 7)]),
    );
    let first = text.lines().nth(1).unwrap();
    let f: Vec<&str> = first.split(',').collect();
    let (tw0, t0): (f64, f64) = (f[1].parse().unwrap(), f[2].parse().unwrap());
    fdtemp()
        .arg("fit")
        .arg(&holes)
        .args(["-T", "0.6", "-B", "200"])
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}: sample '{a}' has no row for tw = {tw0}, t = {t0}, which sample '{}' \
             has on line 2 (1 more sample misses points); every sample needs the same (tw, t) \
             points (--drop-incomplete leaves out the samples that miss points)\n",
            holes.display(),
            ids[0]
        ));
    let v = fit_json(&holes, &["--drop-incomplete"]);
    assert_eq!(v["schema"], fdtemp::twotime::SCHEMA);
    assert_eq!(v["n_samples"], 10);
    let ex = v["excluded_samples"].as_array().unwrap();
    assert_eq!(ex.len(), 2);
    assert_eq!(ex[0]["sample"], a);
    assert_eq!(ex[0]["missing"].as_array().unwrap().len(), 2);
    assert_eq!(ex[0]["missing"][0]["tw"], tw0);
    assert_eq!(ex[0]["missing"][0]["t"], t0);
    assert_eq!(ex[1]["sample"], b);
    assert_eq!(ex[1]["missing"].as_array().unwrap().len(), 1);
    // The text report lists them under its data line.
    fdtemp()
        .arg("fit")
        .arg(&holes)
        .args(["-T", "0.6", "-B", "200", "--drop-incomplete"])
        .assert()
        .success()
        .stdout(predicate::str::contains("10 samples, 3 waiting times"))
        .stdout(predicate::str::contains(format!(
            "\nexcluded   2 samples that miss points, left out by --drop-incomplete: '{a}' (no"
        )));
    // A full campaign reads the same with or without the flag, and lists nobody.
    let full = write(dir.path(), "full.csv", &text);
    let v = fit_json(&full, &["--drop-incomplete"]);
    assert_eq!(v["excluded_samples"], serde_json::json!([]));
    assert_eq!(v, fit_json(&full, &[]));
}

#[test]
fn dropping_that_leaves_fewer_than_two_samples_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let p = write(
        dir.path(),
        "two_short.csv",
        "sample,tw,t,corr,resp\na,1,2,0.5,0.1\na,1,3,0.4,0.2\nb,1,2,0.4,0.2\nc,1,3,0.4,0.2\n",
    );
    fdtemp()
        .arg("fit")
        .arg(&p)
        .args(["-T", "1", "--drop-incomplete"])
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}: only 1 of 3 samples has every (tw, t) point; --drop-incomplete needs \
             at least 2 complete samples\n",
            p.display()
        ));
}

#[test]
fn spectrum_and_loss_tables_and_noise_records_take_the_delimiter() {
    let dir = tempfile::tempdir().unwrap();
    // A spectrum table, read the same from commas and from spaces with decimal commas.
    let mut comma = String::from("f,psd,loss,dof\n");
    for j in 1..=40 {
        let f = j as f64 * 2.5;
        let _ = std::fmt::Write::write_fmt(
            &mut comma,
            format_args!(
                "{f},{:e},{:e},20\n",
                1.1e-20 * (1.0 + 0.01 * j as f64),
                2.0e-2
            ),
        );
    }
    let c = write(dir.path(), "spec.csv", &comma);
    let s = write(dir.path(), "spec.txt", &decimal_commas(&comma, " "));
    let run = |file: &Path, extra: &[&str]| {
        let out = fdtemp()
            .arg("spectrum")
            .arg(file)
            .args(["-T", "300", "-B", "200"])
            .args(extra)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout)
            .unwrap()
            .replace(&file.display().to_string(), "FILE")
    };
    assert_eq!(run(&s, &["--delimiter", "whitespace"]), run(&c, &[]));
    // A noise record with a time column and a loss table, both with semicolons and
    // decimal commas.
    let mut rec = String::from("time,V\n");
    let mut rng = fdtemp::resample::replicate_rng(3, 0);
    for i in 0..8192 {
        let z: f64 = rng.sample(rand_distr::StandardNormal);
        rec.push_str(&format!("{},{z}\n", i as f64 / 100.0));
    }
    let loss = "f,Re Z\n0.01,1.5e3\n100.0,1.5e3\n";
    let (rc, lc) = (
        write(dir.path(), "rec.csv", &rec),
        write(dir.path(), "loss.csv", loss),
    );
    let (rs, ls) = (
        write(dir.path(), "rec_semi.csv", &decimal_commas(&rec, ";")),
        write(dir.path(), "loss_semi.csv", &decimal_commas(loss, ";")),
    );
    let noise = |rec: &Path, loss: &Path, extra: &[&str]| {
        let out = fdtemp()
            .arg("noise")
            .arg(rec)
            .args(["-T", "300", "--segment", "256", "-B", "200", "--loss-file"])
            .arg(loss)
            .args(extra)
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout)
            .unwrap()
            .replace(&rec.display().to_string(), "REC")
            .replace(&loss.display().to_string(), "LOSS")
    };
    let reference = noise(&rc, &lc, &[]);
    assert!(reference.contains("8192"), "{reference}");
    assert_eq!(noise(&rs, &ls, &["--delimiter", "semicolon"]), reference);
    // Without the delimiter the semicolon record is refused with the hint.
    fdtemp()
        .arg("noise")
        .arg(&rs)
        .args(["--sample-rate", "100"])
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}:1:1: the line is 'time;V': with --delimiter comma it is a single field; \
             give --delimiter semicolon (a record is one number per line, or one column per \
             run)\n",
            rs.display()
        ));
}

#[test]
fn completions_and_man_pages_come_from_the_command_definitions() {
    for shell in ["bash", "zsh", "fish", "elvish", "powershell"] {
        let out = fdtemp().args(["completions", shell]).output().unwrap();
        assert!(out.status.success());
        let text = String::from_utf8(out.stdout).unwrap();
        assert!(text.contains("drop-incomplete"), "{shell}");
        assert!(text.contains("design-check"), "{shell}");
    }
    fdtemp()
        .args(["completions", "tcsh"])
        .assert()
        .code(2)
        .stderr(predicate::str::contains(
            "error: invalid value 'tcsh' for '<SHELL>'",
        ));
    let dir = tempfile::tempdir().unwrap();
    let listing: String = [
        "fdtemp",
        "fdtemp-fit",
        "fdtemp-design-check",
        "fdtemp-spectrum",
        "fdtemp-noise",
        "fdtemp-reduce",
        "fdtemp-synth",
        "fdtemp-demo",
        "fdtemp-completions",
        "fdtemp-man-pages",
    ]
    .iter()
    .map(|n| format!("wrote {}\n", dir.path().join(format!("{n}.1")).display()))
    .collect();
    fdtemp()
        .arg("man-pages")
        .arg(dir.path())
        .assert()
        .success()
        .stdout(listing);
    let fit = std::fs::read_to_string(dir.path().join("fdtemp-fit.1")).unwrap();
    assert!(fit.starts_with(".ie \\n(.g .ds Aq \\(aq"), "{}", &fit[..80]);
    assert!(fit.contains(".TH fdtemp-fit 1"));
    assert!(fit.contains("drop\\-incomplete"));
    // Pages that exist are not replaced without --overwrite.
    fdtemp()
        .arg("man-pages")
        .arg(dir.path())
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}: exists already; pass --overwrite to replace it\n",
            dir.path().join("fdtemp.1").display()
        ));
    fdtemp()
        .arg("man-pages")
        .arg(dir.path())
        .arg("--overwrite")
        .assert()
        .success();
    let missing = dir.path().join("nowhere");
    fdtemp()
        .arg("man-pages")
        .arg(&missing)
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}: the folder {} does not exist\n",
            missing.join("fdtemp.1").display(),
            missing.display()
        ));
}
