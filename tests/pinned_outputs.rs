//! The text report and the JSON of `fdtemp fit`, pinned byte for byte on a set of
//! campaigns that covers every model, weighting, axis choice and held time, so that a
//! change of layout cannot change what a user reads. The pinned files are in
//! `fixtures/pinned/`; after an intended change of the output, remake them with
//!
//!     FDTEMP_BLESS=1 cargo test --release --test pinned_outputs
//!
//! and review the diff. Cautions and verdicts in the JSON are compared through their
//! `message` (or as the plain strings of schema 1), so the pins also hold across the
//! change to structured findings.
//!
//! The campaigns are invented data (`fdtemp::scenarios::synth`) or runs of `fdtemp synth`.

use assert_cmd::Command;
use fdtemp::scenarios::synth::{SynthSpec, generate};
use std::path::{Path, PathBuf};

fn pinned_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/pinned")
}

/// One case: how its campaign is made and the `fit` arguments.
struct Case {
    name: &'static str,
    campaign: Source,
    args: &'static [&'static str],
}

enum Source {
    Spec(SynthSpec),
    Synth(&'static [&'static str]),
}

fn cases() -> Vec<Case> {
    let two_lines = SynthSpec {
        samples: 24,
        points_per_tw: 20,
        noise_growth: 2.0,
        ..SynthSpec::default()
    };
    let edge = SynthSpec {
        samples: 48,
        plateau: 0.95,
        ratio: 0.25,
        first_lag: 0.3,
        noise: 0.01,
        ..two_lines.clone()
    };
    let equilibrium = SynthSpec {
        ratio: 1.0,
        ..two_lines.clone()
    };
    let aging = SynthSpec {
        samples: 60,
        ratio: 0.35,
        ratio_per_decade: 0.1,
        ..two_lines.clone()
    };
    let curved = SynthSpec {
        samples: 48,
        noise: 0.01,
        ratio: 0.3,
        shape: fdtemp::scenarios::synth::Shape::Smooth { power: 1.0 },
        ..two_lines.clone()
    };
    vec![
        Case {
            name: "smooth_curved",
            campaign: Source::Spec(curved),
            args: &["-T", "0.6", "--model", "smooth"],
        },
        Case {
            name: "smooth_one_step",
            campaign: Source::Spec(SynthSpec {
                samples: 48,
                noise: 0.01,
                ratio: 0.3,
                ..two_lines.clone()
            }),
            args: &["-T", "0.6", "--model", "smooth"],
        },
        Case {
            name: "broken",
            campaign: Source::Spec(two_lines.clone()),
            args: &["-T", "0.6"],
        },
        Case {
            name: "free",
            campaign: Source::Spec(two_lines.clone()),
            args: &["-T", "0.6", "--model", "free"],
        },
        Case {
            name: "line",
            campaign: Source::Spec(two_lines.clone()),
            args: &["-T", "0.6", "--model", "line"],
        },
        Case {
            name: "uniform_percentile_range",
            campaign: Source::Spec(two_lines.clone()),
            args: &[
                "-T",
                "0.6",
                "--weights",
                "uniform",
                "--interval",
                "percentile",
                "--range",
                "0.1:0.95",
            ],
        },
        Case {
            name: "hold_t",
            campaign: Source::Spec(two_lines),
            args: &["-T", "0.6", "--hold", "t"],
        },
        Case {
            name: "equilibrium",
            campaign: Source::Spec(equilibrium),
            args: &["-T", "0.6"],
        },
        Case {
            name: "edge",
            campaign: Source::Spec(edge),
            args: &["-T", "0.6"],
        },
        Case {
            name: "aging_wrong_thermometer",
            campaign: Source::Spec(aging),
            args: &["-T", "0.55"],
        },
        Case {
            name: "two_baths_normalized",
            campaign: Source::Synth(&["two-baths", "--quick", "--samples", "30"]),
            args: &["-T", "1"],
        },
        Case {
            name: "brownian_hold_t_line",
            campaign: Source::Synth(&["brownian", "--quick", "--samples", "30"]),
            args: &["-T", "1", "--hold", "t", "--model", "line"],
        },
    ]
}

fn fdtemp(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("fdtemp").unwrap();
    c.current_dir(dir);
    c
}

/// The JSON with every caution and verdict reduced to its sentence and the schema
/// number removed, so schema 1 (strings) and later schemas (findings with a message)
/// compare equal when the words are.
fn comparable_json(text: &str) -> String {
    let mut v: serde_json::Value = serde_json::from_str(text).unwrap();
    fn reduce(v: &mut serde_json::Value) {
        match v {
            serde_json::Value::Object(m) => {
                for (k, x) in m.iter_mut() {
                    if k == "warnings" || k == "cautions" {
                        if let serde_json::Value::Array(a) = x {
                            for c in a.iter_mut() {
                                if let Some(s) = c.get("message").cloned() {
                                    *c = s;
                                }
                            }
                        }
                    } else if k == "verdict" {
                        if let Some(s) = x.get("message").cloned() {
                            *x = s;
                        }
                    } else {
                        reduce(x);
                    }
                }
                m.remove("schema");
                if let Some(c) = m.remove("cautions") {
                    m.insert("warnings".into(), c);
                }
            }
            serde_json::Value::Array(a) => a.iter_mut().for_each(reduce),
            _ => {}
        }
    }
    reduce(&mut v);
    serde_json::to_string_pretty(&v).unwrap()
}

/// Where two JSON texts differ: the same keys, strings and flags, and numbers equal to
/// 1e-9 relative (a change in the order of a sum moves the last digits of a number, not
/// what the tool says; the text report, compared exactly, prints fewer digits).
fn json_difference(a: &str, b: &str) -> Option<String> {
    fn walk(a: &serde_json::Value, b: &serde_json::Value, at: &str) -> Option<String> {
        use serde_json::Value as V;
        match (a, b) {
            (V::Number(x), V::Number(y)) => {
                let (x, y) = (x.as_f64()?, y.as_f64()?);
                ((x - y).abs() > 1e-9 * x.abs().max(y.abs()).max(1e-300))
                    .then(|| format!("{at}: {x} vs {y}"))
            }
            (V::Array(x), V::Array(y)) if x.len() == y.len() => x
                .iter()
                .zip(y)
                .enumerate()
                .find_map(|(i, (u, v))| walk(u, v, &format!("{at}[{i}]"))),
            (V::Object(x), V::Object(y)) if x.len() == y.len() => {
                x.iter().find_map(|(k, u)| match y.get(k) {
                    Some(v) => walk(u, v, &format!("{at}/{k}")),
                    None => Some(format!("{at}/{k}: missing")),
                })
            }
            _ => (a != b).then(|| format!("{at}: {a} vs {b}")),
        }
    }
    let (a, b): (serde_json::Value, serde_json::Value) =
        (serde_json::from_str(a).ok()?, serde_json::from_str(b).ok()?);
    walk(&a, &b, "")
}

#[test]
fn reports_and_json_are_unchanged_on_every_pinned_campaign() {
    let bless = std::env::var_os("FDTEMP_BLESS").is_some();
    let mut failures = Vec::new();
    for case in cases() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("campaign.csv");
        match &case.campaign {
            Source::Spec(spec) => std::fs::write(
                &input,
                fdtemp::input::write_campaign(&generate(spec).unwrap()),
            )
            .unwrap(),
            Source::Synth(args) => {
                fdtemp(dir.path())
                    .arg("synth")
                    .args(*args)
                    .args(["--out", "campaign.csv"])
                    .assert()
                    .success();
            }
        }
        let out = fdtemp(dir.path())
            .args(["fit", "campaign.csv", "-B", "400", "--json", "fit.json"])
            .args(case.args)
            .assert()
            .success();
        let text = String::from_utf8(out.get_output().stdout.clone()).unwrap();
        let json = std::fs::read_to_string(dir.path().join("fit.json")).unwrap();
        let txt_path = pinned_dir().join(format!("{}.txt", case.name));
        let json_path = pinned_dir().join(format!("{}.json", case.name));
        if bless {
            std::fs::create_dir_all(pinned_dir()).unwrap();
            std::fs::write(&txt_path, &text).unwrap();
            std::fs::write(&json_path, &json).unwrap();
            continue;
        }
        let pinned_text = std::fs::read_to_string(&txt_path).unwrap();
        let pinned_json = std::fs::read_to_string(&json_path).unwrap();
        if text != pinned_text {
            failures.push(format!("{}: text report differs", case.name));
        }
        if let Some(at) = json_difference(&comparable_json(&json), &comparable_json(&pinned_json)) {
            failures.push(format!("{}: JSON differs at {at}", case.name));
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}
