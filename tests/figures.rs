//! Figures from the command line: SVG content, PNG size, and clear refusals.

use assert_cmd::Command;
use predicates::prelude::*;
use std::path::{Path, PathBuf};

fn fdtemp() -> Command {
    Command::cargo_bin("fdtemp").unwrap()
}

fn campaign(dir: &Path, noise: f64) -> PathBuf {
    let spec = fdtemp::scenarios::synth::SynthSpec {
        samples: 24,
        points_per_tw: 20,
        noise,
        ..Default::default()
    };
    let path = dir.join("c.csv");
    std::fs::write(
        &path,
        fdtemp::input::write_campaign(&fdtemp::scenarios::synth::generate(&spec).unwrap()),
    )
    .unwrap();
    path
}

fn png_size(path: &Path) -> (u32, u32) {
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let reader = decoder.read_info().unwrap();
    let info = reader.info();
    (info.width, info.height)
}

/// The PNG's resolution from its pHYs chunk, in dots per inch.
fn png_dpi(path: &Path) -> Option<f64> {
    let decoder = png::Decoder::new(std::io::BufReader::new(std::fs::File::open(path).unwrap()));
    let reader = decoder.read_info().unwrap();
    let d = reader.info().pixel_dims?;
    assert_eq!(d.xppu, d.yppu);
    (d.unit == png::Unit::Meter).then(|| f64::from(d.xppu) * 0.0254)
}

#[test]
fn the_fluctuation_dissipation_plot_has_every_element_in_svg_and_png() {
    let dir = tempfile::tempdir().unwrap();
    let input = campaign(dir.path(), 0.03);
    let svg = dir.path().join("fd.svg");
    let hist = dir.path().join("x.svg");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "-B", "300", "--plot"])
        .arg(&svg)
        .arg("--plot-resamples")
        .arg(&hist)
        .assert()
        .success();
    let text = std::fs::read_to_string(&svg).unwrap();
    for label in [
        "\ntw = 100\n",
        "\ntw = 1000\n",
        "\ntw = 10000\n",
        "equilibrium, slope −1",
        "fit: X = ",
        "Teff = ",
        "break q = ",
        "95% resampling band",
        "C(t,tw)",
        "k T χ(t,tw)",
    ] {
        assert!(text.contains(label), "the SVG lacks '{label}'");
    }
    let h = std::fs::read_to_string(&hist).unwrap();
    assert!(h.contains("300 resamples of whole samples") && h.contains("95% BCa interval ["));

    let png = dir.path().join("fd.png");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "-B", "200", "--plot-size", "850x600", "--plot"])
        .arg(&png)
        .assert()
        .success();
    assert_eq!(png_size(&png), (850, 600));
    // WxH is drawn as one column wide: 850 px over 8.5 cm is 254 dpi.
    assert!((png_dpi(&png).unwrap() - 254.0).abs() < 0.1);
    // PDF: the same drawing on a page of the physical size, DejaVu Sans embedded.
    let pdf = dir.path().join("fd.pdf");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "-B", "200", "--plot"])
        .arg(&pdf)
        .assert()
        .success();
    let bytes = std::fs::read(&pdf).unwrap();
    let text = String::from_utf8_lossy(&bytes);
    assert!(text.starts_with("%PDF-"));
    assert!(text.contains("DejaVuSans") && text.contains("/FontFile2"));
    // 8.5 cm is 240.9 pt.
    assert!(
        text.contains("/MediaBox [0 0 240.9"),
        "the page is not 8.5 cm wide"
    );
    for (size, px) in [("double", (2102, 1299)), ("slide", (1920, 1080))] {
        let p = dir.path().join(format!("{size}.png"));
        fdtemp()
            .arg("fit")
            .arg(&input)
            .args(["-T", "0.6", "-B", "200", "--plot-size", size, "--plot"])
            .arg(&p)
            .assert()
            .success();
        assert_eq!(png_size(&p), px, "{size}");
    }
}

#[test]
fn the_effective_temperature_plot_marks_the_bath_and_the_departure() {
    let dir = tempfile::tempdir().unwrap();
    let spec = fdtemp::scenarios::synth::SpectrumSpec::default();
    let file = dir.path().join("s.csv");
    std::fs::write(
        &file,
        fdtemp::spectral::input::write_spectra(&[fdtemp::scenarios::synth::generate_spectrum(
            &spec,
        )]),
    )
    .unwrap();
    let svg = dir.path().join("t.svg");
    fdtemp()
        .arg("spectrum")
        .arg(&file)
        .args(["-T", "295", "-B", "300", "--plot"])
        .arg(&svg)
        .assert()
        .success();
    let text = std::fs::read_to_string(&svg).unwrap();
    for label in [
        "bath T = 295",
        "departs below",
        "95% interval",
        "f (Hz)",
        "Teff (K)",
    ] {
        assert!(text.contains(label), "the SVG lacks '{label}'");
    }
    let png = dir.path().join("t.png");
    fdtemp()
        .arg("spectrum")
        .arg(&file)
        .args(["-T", "295", "-B", "300", "--plot"])
        .arg(&png)
        .assert()
        .success();
    // The default is one column (8.5 cm × 6.8 cm) at 300 dpi, stated in the file.
    assert_eq!(png_size(&png), (1004, 803));
    assert!((png_dpi(&png).unwrap() - 300.0).abs() < 0.1);
}

#[test]
fn noise_draws_its_effective_temperature_and_refuses_without_a_dissipation() {
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("r.txt");
    let mut rng = fdtemp::resample::replicate_rng(3, 0);
    let text: String = (0..20_000)
        .map(|_| {
            format!(
                "{:e}\n",
                rand::RngExt::sample::<f64, _>(&mut rng, rand_distr::StandardNormal)
            )
        })
        .collect();
    std::fs::write(&rec, text).unwrap();
    let png = dir.path().join("n.png");
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args([
            "--sample-rate",
            "100",
            "--segment",
            "256",
            "--resistance",
            "1",
            "--units",
            "reduced",
            "--plot",
        ])
        .arg(&png)
        .assert()
        .success();
    assert_eq!(png_size(&png), (1004, 803));
    fdtemp()
        .arg("noise")
        .arg(&rec)
        .args(["--sample-rate", "100", "--plot"])
        .arg(dir.path().join("m.png"))
        .assert()
        .code(2)
        .stderr("error: --plot draws T_eff(f), which needs a dissipation: give --resistance R or --loss-file FILE\n");
}

#[test]
fn figure_requests_that_cannot_be_met_are_refused_clearly() {
    let dir = tempfile::tempdir().unwrap();
    let input = campaign(dir.path(), 0.03);
    let bad = dir.path().join("fd.jpg");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "--plot"])
        .arg(&bad)
        .assert()
        .code(2)
        .stderr(format!(
            "error: {}: a figure's file name must end in .svg, .png or .pdf\n",
            bad.display()
        ));
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "--plot-size", "10x10", "--plot"])
        .arg(dir.path().join("a.png"))
        .assert()
        .code(2)
        .stderr("error: --plot-size is 10x10, expected between 200x150 and 8000x8000 pixels\n");
    // Noise-free samples: every resample is the same campaign, so there is no
    // distribution to draw; the fit itself still reports.
    let flat = campaign(&dir.path().join(""), 0.0);
    let hist = dir.path().join("h.svg");
    fdtemp()
        .arg("fit")
        .arg(&flat)
        .args(["-T", "0.6", "-B", "200", "--plot-resamples"])
        .arg(&hist)
        .assert()
        .code(2)
        .stdout("")
        .stderr(predicate::str::starts_with(
            "error: cannot draw the resample histogram: every resample gives X = 0.45",
        ));
    assert!(!hist.exists());
}
