//! The text report, the JSON and the PSD CSV of `fdtemp spectrum` and `fdtemp noise`,
//! pinned byte for byte on a set of invented inputs that covers both error models
//! (chi-square and the bootstrap over runs), a user band, a Hann window, waiting-time
//! groups, a hot and a cold low-frequency departure, an isolated band, and `noise` on a
//! white record with a resistor and with an interpolated loss table. A change of layout
//! of the spectral code cannot change what a user reads. The pinned files are in
//! `fixtures/pinned/spectral/`; after an intended change of the output, remake them with
//!
//!     FDTEMP_BLESS=1 cargo test --release --test pinned_spectral
//!
//! and review the diff. The tool version is replaced by `{VERSION}` before comparing, so
//! that a version bump alone does not break the pins.
//!
//! The inputs are invented data written by this test from fixed seeds (through
//! `fdtemp::resample::replicate_rng`); they are small and not committed.

use assert_cmd::Command;
use rand::RngExt;
use rand_distr::{ChiSquared, Distribution, StandardNormal};
use std::fmt::Write;
use std::path::{Path, PathBuf};

const K_B: f64 = 1.380649e-23;

fn pinned_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/pinned/spectral")
}

/// A spectrum table: `runs` runs per waiting time (none: no `tw` column), `n` log-spaced
/// frequencies from 0.1 Hz to 1 kHz, T_eff(f) given, PSD noise χ²_ν/ν.
struct Table {
    tws: &'static [f64],
    runs: usize,
    n: usize,
    teff: fn(f64) -> f64,
    nu: f64,
    with_dof: bool,
    seed: u64,
}

/// A noise record: white Gaussian samples of one-sided PSD 4 k T R, one column per run.
struct Record {
    runs: usize,
    samples: usize,
    t: f64,
    r: f64,
    fs: f64,
    seed: u64,
}

enum Input {
    Spectrum(Table),
    Noise {
        record: Record,
        /// A dissipation table (`f,re_z` rows), when the case uses `--loss-file`.
        loss_table: Option<&'static str>,
    },
}

/// One case: its input, the command's arguments after the input file, and whether it
/// writes a PSD CSV (`--psd-out psd.csv`).
struct Case {
    name: &'static str,
    input: Input,
    args: &'static [&'static str],
    psd_out: bool,
}

fn flat(_: f64) -> f64 {
    300.0
}

/// Twice the bath temperature at 1 Hz, 1% above it at 10 Hz, and twice it between 100
/// and 200 Hz (a line): a hot departure and an isolated band.
fn hot_low_and_line(f: f64) -> f64 {
    if (100.0..200.0).contains(&f) {
        600.0
    } else {
        300.0 * (1.0 + (1.0 / f).powi(2))
    }
}

/// Half the bath temperature at low frequency.
fn cold_low(f: f64) -> f64 {
    300.0 * (1.0 - 0.5 / (1.0 + f * f))
}

fn cases() -> Vec<Case> {
    let table = Table {
        tws: &[],
        runs: 1,
        n: 8,
        teff: flat,
        nu: 400.0,
        with_dof: true,
        seed: 1,
    };
    vec![
        Case {
            name: "spectrum_tw_chi_square_band_hann",
            input: Input::Spectrum(Table {
                tws: &[10.0, 1000.0],
                ..table
            }),
            args: &[
                "-T",
                "300",
                "--band",
                "1:100",
                "--window",
                "hann",
                "--bands-per-decade",
                "1",
            ],
            psd_out: false,
        },
        Case {
            name: "spectrum_runs_bootstrap",
            input: Input::Spectrum(Table {
                runs: 12,
                nu: 8.0,
                with_dof: false,
                seed: 2,
                ..table
            }),
            args: &["-T", "300", "-B", "300", "--bands-per-decade", "1"],
            psd_out: false,
        },
        Case {
            name: "spectrum_tw_few_runs_percentile",
            input: Input::Spectrum(Table {
                tws: &[5.0, 50.0],
                runs: 3,
                n: 8,
                nu: 20.0,
                with_dof: false,
                seed: 3,
                ..table
            }),
            args: &[
                "-T",
                "300",
                "--interval",
                "percentile",
                "-B",
                "200",
                "--band",
                "0.5:50",
                "--bands-per-decade",
                "1",
            ],
            psd_out: false,
        },
        Case {
            name: "spectrum_forced_runs_few_with_dof_option",
            input: Input::Spectrum(Table {
                runs: 4,
                n: 8,
                nu: 50.0,
                with_dof: false,
                seed: 4,
                ..table
            }),
            args: &["-T", "300", "--errors", "runs", "-B", "200", "--dof", "50"],
            psd_out: false,
        },
        Case {
            name: "spectrum_hot_departure_and_isolated_band",
            input: Input::Spectrum(Table {
                n: 20,
                teff: hot_low_and_line,
                nu: 2000.0,
                seed: 5,
                ..table
            }),
            args: &["-T", "300", "--bands-per-decade", "2"],
            psd_out: false,
        },
        Case {
            name: "spectrum_cold_departure",
            input: Input::Spectrum(Table {
                teff: cold_low,
                seed: 7,
                ..table
            }),
            args: &["-T", "300", "--level", "0.9", "--bands-per-decade", "2"],
            psd_out: false,
        },
        Case {
            name: "noise_resistor",
            input: Input::Noise {
                record: Record {
                    runs: 1,
                    samples: 16 * 40,
                    t: 300.0,
                    r: 1e3,
                    fs: 1e4,
                    seed: 9,
                },
                loss_table: None,
            },
            args: &[
                "--sample-rate",
                "1e4",
                "--segment",
                "16",
                "--resistance",
                "1000",
                "-T",
                "300",
            ],
            psd_out: true,
        },
        Case {
            name: "noise_loss_table_two_runs",
            input: Input::Noise {
                record: Record {
                    runs: 2,
                    samples: 16 * 24,
                    t: 77.0,
                    r: 2e3,
                    fs: 1e4,
                    seed: 10,
                },
                loss_table: Some("f,re_z\n10,2000\n1000,2100\n4000,1900\n"),
            },
            args: &[
                "--sample-rate",
                "1e4",
                "--segment",
                "16",
                "--overlap",
                "4",
                "--convention",
                "voltage",
                "--loss-file",
                "rez.csv",
                "-T",
                "77",
                "--bands-per-decade",
                "2",
            ],
            psd_out: true,
        },
    ]
}

fn spectrum_csv(t: &Table) -> String {
    let chi = ChiSquared::new(t.nu).unwrap();
    let mut rng = fdtemp::resample::replicate_rng(t.seed, 0);
    let mut cols = Vec::new();
    if !t.tws.is_empty() {
        cols.push("tw");
    }
    cols.extend(["run", "f", "psd", "loss"]);
    if t.with_dof {
        cols.push("dof");
    }
    let mut s = cols.join(",");
    s.push('\n');
    let tws: Vec<Option<f64>> = if t.tws.is_empty() {
        vec![None]
    } else {
        t.tws.iter().copied().map(Some).collect()
    };
    for tw in tws {
        for r in 0..t.runs {
            for i in 0..t.n {
                let f = 10f64.powf(-1.0 + 4.0 * i as f64 / (t.n - 1) as f64);
                let loss = 1e-20 * (1.0 + f);
                let g = 2.0 * K_B * (t.teff)(f) * loss / (std::f64::consts::PI * f)
                    * chi.sample(&mut rng)
                    / t.nu;
                if let Some(tw) = tw {
                    let _ = write!(s, "{tw},");
                }
                let _ = write!(s, "r{r},{f:e},{g:e},{loss:e}");
                if t.with_dof {
                    let _ = write!(s, ",{}", t.nu);
                }
                s.push('\n');
            }
        }
    }
    s
}

fn record(r: &Record) -> String {
    let mut rng = fdtemp::resample::replicate_rng(r.seed, 0);
    let sd = (4.0 * K_B * r.t * r.r * r.fs / 2.0).sqrt();
    let mut s = String::new();
    if r.runs > 1 {
        let names: Vec<String> = (0..r.runs).map(|i| format!("run{i}")).collect();
        let _ = writeln!(s, "{}", names.join(","));
    }
    for _ in 0..r.samples {
        let row: Vec<String> = (0..r.runs)
            .map(|_| {
                let z: f64 = rng.sample(StandardNormal);
                format!("{:e}", sd * z)
            })
            .collect();
        let _ = writeln!(s, "{}", row.join(","));
    }
    s
}

/// The output with the tool version replaced by a placeholder.
fn without_version(text: &str) -> String {
    let v = env!("CARGO_PKG_VERSION");
    text.replace(&format!("fdtemp {v}"), "fdtemp {VERSION}")
        .replace(
            &format!("\"version\": \"{v}\""),
            "\"version\": \"{VERSION}\"",
        )
}

/// The JSON with the whitespace between its tokens taken out (strings and numbers kept
/// exactly as written), so the pinned files stay small.
fn compact_json(text: &str) -> String {
    let (mut out, mut in_string, mut escaped) = (String::with_capacity(text.len()), false, false);
    for c in text.chars() {
        if in_string {
            out.push(c);
            match c {
                _ if escaped => escaped = false,
                '\\' => escaped = true,
                '"' => in_string = false,
                _ => {}
            }
        } else if c == '"' {
            in_string = true;
            out.push(c);
        } else if !c.is_whitespace() {
            out.push(c);
        }
    }
    out.push('\n');
    out
}

/// Runs one case in `dir`: (text report, JSON, PSD CSV if asked for).
fn run(case: &Case, dir: &Path) -> (String, String, Option<String>) {
    let mut cmd = Command::cargo_bin("fdtemp").unwrap();
    cmd.current_dir(dir);
    match &case.input {
        Input::Spectrum(t) => {
            std::fs::write(dir.join("spectrum.csv"), spectrum_csv(t)).unwrap();
            cmd.args(["spectrum", "spectrum.csv"]);
        }
        Input::Noise {
            record: r,
            loss_table,
        } => {
            std::fs::write(dir.join("record.csv"), record(r)).unwrap();
            if let Some(t) = loss_table {
                std::fs::write(dir.join("rez.csv"), t).unwrap();
            }
            cmd.args(["noise", "record.csv"]);
        }
    }
    cmd.args(case.args).args(["--json", "out.json"]);
    if case.psd_out {
        cmd.args(["--psd-out", "psd.csv"]);
    }
    let out = cmd.assert().success();
    let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
    let json = std::fs::read_to_string(dir.join("out.json")).unwrap();
    let psd = case
        .psd_out
        .then(|| std::fs::read_to_string(dir.join("psd.csv")).unwrap());
    (
        without_version(&text),
        compact_json(&without_version(&json)),
        psd,
    )
}

/// Where two texts first differ, for the failure message.
fn first_difference(a: &str, b: &str) -> String {
    match a.lines().zip(b.lines()).position(|(x, y)| x != y) {
        Some(i) => format!(
            "line {}: now {:?}, pinned {:?}",
            i + 1,
            a.lines().nth(i).unwrap_or(""),
            b.lines().nth(i).unwrap_or("")
        ),
        None => format!(
            "{} lines now, {} pinned",
            a.lines().count(),
            b.lines().count()
        ),
    }
}

#[test]
fn spectral_reports_json_and_psd_files_are_unchanged_on_every_pinned_input() {
    let bless = std::env::var_os("FDTEMP_BLESS").is_some();
    let mut failures = Vec::new();
    for case in cases() {
        let dir = tempfile::tempdir().unwrap();
        let (text, json, psd) = run(&case, dir.path());
        let outputs = [("txt", Some(text)), ("json", Some(json)), ("psd.csv", psd)];
        for (ext, now) in outputs {
            let Some(now) = now else { continue };
            let path = pinned_dir().join(format!("{}.{ext}", case.name));
            if bless {
                std::fs::create_dir_all(pinned_dir()).unwrap();
                std::fs::write(&path, &now).unwrap();
                continue;
            }
            let pinned = std::fs::read_to_string(&path)
                .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
            if now != pinned {
                failures.push(format!(
                    "{}.{ext} differs: {}",
                    case.name,
                    first_difference(&now, &pinned)
                ));
            }
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}
