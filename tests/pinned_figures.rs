//! The three figures (fluctuation–dissipation plot, resample histogram, T_eff(f)) pinned
//! byte for byte as SVG on invented campaigns and spectra, so that a change of layout in
//! `src/report/plot/` cannot change what is drawn. The pinned files are in
//! `fixtures/pinned/figures/`; after an intended change of a figure, remake them with
//!
//!     FDTEMP_BLESS=1 cargo test --release --test pinned_figures
//!
//! and look at the figures (DEVELOPERS.md, "Looking at figures") before committing.
//! Only SVG is pinned: PNG bytes may depend on the rasterizer.
//!
//! The campaigns and spectra are invented data (`fdtemp::scenarios::synth`) or runs of
//! `fdtemp synth`, kept small (few points, `-B 200`) so the pinned files stay small.

use assert_cmd::Command;
use fdtemp::scenarios::synth::{SpectrumSpec, SynthSpec, generate, generate_spectrum};
use std::path::{Path, PathBuf};

fn pinned_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("fixtures/pinned/figures")
}

fn fdtemp(dir: &Path) -> Command {
    let mut c = Command::cargo_bin("fdtemp").unwrap();
    c.current_dir(dir);
    c
}

/// One run of the command line and the figures it writes, each with its pinned name.
struct Case {
    /// What to write into the folder before the run.
    input: Input,
    /// The arguments of the run (the input file is `input.csv`).
    args: &'static [&'static str],
    /// (file the run writes, pinned file name).
    figures: &'static [(&'static str, &'static str)],
}

enum Input {
    Campaign(SynthSpec),
    Synth(&'static [&'static str]),
    Spectra(Vec<SpectrumSpec>, Vec<Option<f64>>),
}

fn cases() -> Vec<Case> {
    let two_lines = SynthSpec {
        samples: 24,
        points_per_tw: 8,
        noise: 0.03,
        ..SynthSpec::default()
    };
    let hot = SpectrumSpec {
        points: 40,
        ..SpectrumSpec::default()
    };
    let aged = SpectrumSpec {
        f_hot: 0.5,
        range: [0.5, 300.0],
        points: 30,
        runs: 8,
        seed: 78,
        ..SpectrumSpec::default()
    };
    let equilibrium = SpectrumSpec {
        f_hot: 0.0,
        range: [0.5, 300.0],
        points: 30,
        runs: 8,
        seed: 79,
        ..SpectrumSpec::default()
    };
    vec![
        // The broken stick with its break interval, band, three waiting times.
        Case {
            input: Input::Campaign(two_lines),
            args: &[
                "fit",
                "input.csv",
                "-T",
                "0.6",
                "-B",
                "200",
                "--plot",
                "fd.svg",
                "--plot-resamples",
                "hist.svg",
            ],
            figures: &[("fd.svg", "fd_broken.svg"), ("hist.svg", "hist_broken.svg")],
        },
        // Normalized axes, one straight line (no break), another size and interval.
        Case {
            input: Input::Synth(&["two-baths", "--quick", "--samples", "30"]),
            args: &[
                "fit",
                "input.csv",
                "-T",
                "1",
                "-B",
                "200",
                "--model",
                "line",
                "--interval",
                "percentile",
                "--plot-size",
                "640x480",
                "--plot",
                "fd.svg",
                "--plot-resamples",
                "hist.svg",
            ],
            figures: &[
                ("fd.svg", "fd_normalized_line.svg"),
                ("hist.svg", "hist_normalized_line.svg"),
            ],
        },
        // Hot at low frequency: log T_eff axis, the bath and the departure.
        Case {
            input: Input::Spectra(vec![hot], vec![None]),
            args: &[
                "spectrum",
                "input.csv",
                "-T",
                "295",
                "-B",
                "200",
                "--plot",
                "teff.svg",
            ],
            figures: &[("teff.svg", "teff_hot.svg")],
        },
        // Two waiting times, mildly hot and at equilibrium: linear T_eff axis.
        Case {
            input: Input::Spectra(vec![aged, equilibrium], vec![Some(10.0), Some(1000.0)]),
            args: &[
                "spectrum",
                "input.csv",
                "-T",
                "295",
                "-B",
                "200",
                "--plot-size",
                "800x600",
                "--plot",
                "teff.svg",
            ],
            figures: &[("teff.svg", "teff_two_ages.svg")],
        },
    ]
}

fn write_input(dir: &Path, input: &Input) {
    let path = dir.join("input.csv");
    match input {
        Input::Campaign(spec) => std::fs::write(
            &path,
            fdtemp::input::write_campaign(&generate(spec).unwrap()),
        )
        .unwrap(),
        Input::Synth(args) => {
            fdtemp(dir)
                .arg("synth")
                .args(*args)
                .args(["--out", "input.csv"])
                .assert()
                .success();
        }
        Input::Spectra(specs, tws) => {
            let groups: Vec<_> = specs
                .iter()
                .zip(tws)
                .map(|(s, &tw)| fdtemp::spectral::input::SpectrumGroup {
                    tw,
                    ..generate_spectrum(s)
                })
                .collect();
            std::fs::write(&path, fdtemp::spectral::input::write_spectra(&groups)).unwrap();
        }
    }
}

#[test]
fn every_figure_is_unchanged_on_the_pinned_campaigns_and_spectra() {
    let bless = std::env::var_os("FDTEMP_BLESS").is_some();
    let mut failures = Vec::new();
    for case in cases() {
        let dir = tempfile::tempdir().unwrap();
        write_input(dir.path(), &case.input);
        fdtemp(dir.path()).args(case.args).assert().success();
        for &(written, pinned) in case.figures {
            let svg = std::fs::read(dir.path().join(written)).unwrap();
            let path = pinned_dir().join(pinned);
            if bless {
                std::fs::create_dir_all(pinned_dir()).unwrap();
                std::fs::write(&path, &svg).unwrap();
                continue;
            }
            match std::fs::read(&path) {
                Ok(p) if p == svg => {}
                Ok(_) => failures.push(format!("{pinned}: the SVG differs")),
                Err(e) => failures.push(format!("{pinned}: cannot read the pin: {e}")),
            }
        }
    }
    assert!(failures.is_empty(), "{failures:#?}");
}
