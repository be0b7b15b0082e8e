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

/// The SVG with its `<tspan>` tags taken out, so "T<tspan …>eff</tspan>" reads "Teff".
fn flat(svg: &str) -> String {
    let mut out = String::new();
    let mut rest = svg;
    while let Some(i) = rest.find("<tspan") {
        out.push_str(&rest[..i]);
        rest = &rest[i + rest[i..].find('>').unwrap() + 1..];
    }
    out.push_str(rest);
    out.replace("</tspan>", "")
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
    let text = flat(&std::fs::read_to_string(&svg).unwrap());
    for label in [
        "\ntw = 100\n",
        "\ntw = 1000\n",
        "\ntw = 10000\n",
        "equilibrium, slope −1",
        "fit: X = ",
        "Teff = ",
        "break q = ",
        // "95% resampling band", or "95% band: within the line" when it is hidden.
        "95% ",
        "band",
        "C(t, tw)",
        "kB T χ(t, tw)",
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
    let text = flat(&std::fs::read_to_string(&svg).unwrap());
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

/// One `<text>` of a plotters SVG: its box (x0, y0, x1, y1) in pixels, estimated from
/// the font size, the anchor and the character count, and its font size.
struct TextBox {
    text: String,
    font_px: f64,
    rect: [f64; 4],
}

fn attr(tag: &str, name: &str) -> Option<String> {
    let start = tag.find(&format!(" {name}=\""))? + name.len() + 3;
    let len = tag[start..].find('"')?;
    Some(tag[start..start + len].to_string())
}

/// Every text of the SVG, and the points per pixel at the physical size it states.
fn svg_texts(svg: &str) -> (Vec<TextBox>, f64) {
    let head = &svg[..svg.find('>').unwrap()];
    let cm: f64 = attr(head, "width")
        .unwrap()
        .trim_end_matches("cm")
        .parse()
        .unwrap();
    let view: Vec<f64> = attr(head, "viewBox")
        .unwrap()
        .split(' ')
        .map(|v| v.parse().unwrap())
        .collect();
    let pt_per_px = cm / 2.54 * 72.0 / view[2];
    let mut out = Vec::new();
    for chunk in svg.split("<text").skip(1) {
        let tag = &chunk[..chunk.find('>').unwrap()];
        let body = &chunk[tag.len() + 1..chunk.find("</text>").unwrap()];
        let num = |n: &str| attr(tag, n).unwrap().parse::<f64>().unwrap();
        let (x, y, fs) = (num("x"), num("y"), num("font-size"));
        let runs = text_runs(body, fs);
        let text: String = runs.iter().map(|r| r.0.as_str()).collect::<String>();
        let text = text.trim().to_string();
        // DejaVu Sans averages about 0.6 em per character in these labels (from memory);
        // a subscript's characters count at its own, smaller size.
        let w: f64 = runs
            .iter()
            .map(|(t, size)| 0.6 * size * t.trim_matches('\n').chars().count() as f64)
            .sum();
        let x0 = match attr(tag, "text-anchor").as_deref() {
            Some("end") => x - w,
            Some("middle") => x - w / 2.0,
            _ => x,
        };
        let y0 = match attr(tag, "dy").as_deref() {
            Some("0.76em") => y,
            Some("0.5ex") => y - fs / 2.0,
            _ => y - fs,
        };
        let mut rect = [x0, y0, x0 + w, y0 + fs];
        if tag.contains("rotate(") {
            // A rotated axis title: its box turns about (x, y).
            rect = [x - fs / 2.0, y - w / 2.0, x + fs / 2.0, y + w / 2.0];
        }
        out.push(TextBox {
            text,
            font_px: fs,
            rect,
        });
    }
    (out, pt_per_px)
}

/// The runs of a `<text>`'s content with their font sizes: the text's own size, or a
/// `<tspan>`'s `font-size` (a subscript).
fn text_runs(body: &str, fs: f64) -> Vec<(String, f64)> {
    let mut runs = Vec::new();
    for (i, part) in body.split("<tspan").enumerate() {
        let part = part.replace("</tspan>", "");
        if i == 0 {
            runs.push((part, fs));
            continue;
        }
        let end = part.find('>').unwrap();
        let size = attr(&part[..end], "font-size").map_or(fs, |v| v.parse().unwrap());
        runs.push((part[end + 1..].to_string(), size));
    }
    runs
}

/// Every subscript of a figure: (the text it belongs to, the subscript, its size in
/// points, the text's size in points, how far it is lowered in pixels).
fn subscripts(svg: &str) -> Vec<(String, String, f64, f64, f64)> {
    let (_, pt_per_px) = svg_texts(svg);
    let mut out = Vec::new();
    for chunk in svg.split("<text").skip(1) {
        let tag = &chunk[..chunk.find('>').unwrap()];
        let fs: f64 = attr(tag, "font-size").unwrap().parse().unwrap();
        let body = &chunk[tag.len() + 1..chunk.find("</text>").unwrap()];
        let whole: String = text_runs(body, fs).into_iter().map(|r| r.0).collect();
        for part in body.split("<tspan").skip(1) {
            let end = part.find('>').unwrap();
            let (Some(size), Some(dy)) =
                (attr(&part[..end], "font-size"), attr(&part[..end], "dy"))
            else {
                continue;
            };
            let sub = part[end + 1..part.find("</tspan>").unwrap()].to_string();
            out.push((
                whole.trim().to_string(),
                sub,
                size.parse::<f64>().unwrap() * pt_per_px,
                fs * pt_per_px,
                dy.parse().unwrap(),
            ));
        }
    }
    out
}

#[test]
fn subscripts_are_smaller_lowered_tspans_of_at_least_seven_points() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    fdtemp()
        .args(["demo", "--out"])
        .arg(&out)
        .assert()
        .success();
    let fd = std::fs::read_to_string(out.join("fd-plot.svg")).unwrap();
    let teff = std::fs::read_to_string(out.join("teff-spectrum.svg")).unwrap();
    for (name, svg) in [("fd", &fd), ("teff", &teff)] {
        assert!(
            !svg.contains("_{"),
            "{name}: subscript markup left in the SVG"
        );
        assert!(
            !svg.contains("Teff") && !svg.contains("tw ="),
            "{name}: flat subscript"
        );
        for (text, sub, size, base, dy) in subscripts(svg) {
            assert!(size >= 7.0, "{name}: '{sub}' of '{text}' at {size:.2} pt");
            assert!(size < base, "{name}: '{sub}' of '{text}' not smaller");
            assert!(dy > 0.0, "{name}: '{sub}' of '{text}' not lowered");
        }
    }
    let fd_subs = subscripts(&fd);
    let has = |text: &str, sub: &str| fd_subs.iter().any(|s| s.0 == text && s.1 == sub);
    assert!(has("kB T χ(t, tw)   (kB = 1)", "B"), "{fd_subs:?}");
    assert!(has("kB T χ(t, tw)   (kB = 1)", "w"));
    assert!(has("C(t, tw)", "w"));
    assert!(
        fd_subs
            .iter()
            .any(|s| s.0.starts_with("Teff = ") && s.1 == "eff")
    );
    assert!(fd_subs.iter().any(|s| s.0 == "tw = 100" && s.1 == "w"));
    assert!(
        subscripts(&teff)
            .iter()
            .any(|s| s.0 == "Teff (K)" && s.1 == "eff")
    );
}

/// Font sizes of at least 7 pt at the stated size, and no two text boxes overlapping
/// (shrunk by a tenth of the font size, as the estimate is rough).
fn check_print_text(name: &str, svg: &str) -> (f64, f64) {
    let (texts, pt_per_px) = svg_texts(svg);
    assert!(texts.len() >= 8, "{name}: only {} texts", texts.len());
    let sizes: Vec<f64> = texts.iter().map(|t| t.font_px * pt_per_px).collect();
    let (min, max) = sizes
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &s| (a.min(s), b.max(s)));
    assert!(min >= 7.0, "{name}: text at {min:.2} pt");
    let live: Vec<&TextBox> = texts.iter().filter(|t| !t.text.is_empty()).collect();
    for (i, a) in live.iter().enumerate() {
        for b in &live[i + 1..] {
            let m = 0.1 * a.font_px.min(b.font_px);
            let apart = a.rect[2] - m <= b.rect[0]
                || b.rect[2] - m <= a.rect[0]
                || a.rect[3] - m <= b.rect[1]
                || b.rect[3] - m <= a.rect[1];
            assert!(apart, "{name}: '{}' overlaps '{}'", a.text, b.text);
        }
    }
    (min, max)
}

#[test]
fn the_print_text_check_catches_small_and_overlapping_labels() {
    let head = r#"<svg width="8.50cm" height="6.80cm" viewBox="0 0 1004 803">"#;
    let text = |x: u32, fs: f64, s: &str| {
        format!(
            r#"<text x="{x}" y="700" dy="0.76em" text-anchor="middle" font-size="{fs}">{s}</text>"#
        )
    };
    let row = |fs: f64, step: u32| -> String {
        let labels: String = (0..8).map(|i| text(100 + i * step, fs, "10000")).collect();
        format!("{head}{labels}</svg>")
    };
    assert!(std::panic::catch_unwind(|| check_print_text("apart", &row(34.0, 120))).is_ok());
    assert!(std::panic::catch_unwind(|| check_print_text("overlap", &row(34.0, 60))).is_err());
    assert!(std::panic::catch_unwind(|| check_print_text("small", &row(20.0, 120))).is_err());
}

#[test]
fn the_demo_figures_have_print_sized_text_without_overlaps_at_one_and_two_columns() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    fdtemp()
        .args(["demo", "--out"])
        .arg(&out)
        .assert()
        .success();
    // The demo's band is hidden under the fit's line: the legend says so.
    let fd_svg = std::fs::read_to_string(out.join("fd-plot.svg")).unwrap();
    assert!(fd_svg.contains("95% band: within the line"));
    for f in ["fd-plot", "ratio-resamples", "teff-spectrum"] {
        let svg = std::fs::read_to_string(out.join(format!("{f}.svg"))).unwrap();
        check_print_text(&format!("{f} single"), &svg);
        assert!(
            std::fs::read(out.join(format!("{f}.pdf")))
                .unwrap()
                .starts_with(b"%PDF-")
        );
        assert!((png_dpi(&out.join(format!("{f}.png"))).unwrap() - 300.0).abs() < 0.1);
    }
    let fd = dir.path().join("fd.svg");
    let hist = dir.path().join("hist.svg");
    fdtemp()
        .arg("fit")
        .arg(out.join("campaign.csv"))
        .args(["-T", "0.6", "-B", "200", "--plot-size", "double", "--plot"])
        .arg(&fd)
        .arg("--plot-resamples")
        .arg(&hist)
        .assert()
        .success();
    let teff = dir.path().join("teff.svg");
    fdtemp()
        .arg("spectrum")
        .arg(out.join("spectrum.csv"))
        .args(["-T", "295", "-B", "200", "--plot-size", "double", "--plot"])
        .arg(&teff)
        .assert()
        .success();
    for p in [fd, hist, teff] {
        let svg = std::fs::read_to_string(&p).unwrap();
        assert!(svg.starts_with("<svg width=\"17.8cm\""));
        check_print_text(&format!("{} double", p.display()), &svg);
    }
}

#[test]
fn the_panels_figure_is_drawn_at_double_size_and_refused_at_another() {
    let dir = tempfile::tempdir().unwrap();
    let input = campaign(dir.path(), 0.03);
    let png = dir.path().join("panels.png");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args([
            "-T",
            "0.6",
            "-B",
            "200",
            "--plot-size",
            "double",
            "--plot-panels",
        ])
        .arg(&png)
        .assert()
        .success();
    assert_eq!(png_size(&png), (2102, 1299));
    let single = dir.path().join("single.png");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "-B", "200", "--plot-panels"])
        .arg(&single)
        .assert()
        .code(2)
        .stdout("")
        .stderr("error: --plot-panels draws two panels side by side at double-column size: give --plot-size double\n");
    assert!(!single.exists());
}

#[test]
fn the_panels_figure_shows_the_long_age_limit_when_asked_for() {
    let dir = tempfile::tempdir().unwrap();
    let input = campaign(dir.path(), 0.03);
    let svg = dir.path().join("panels.svg");
    fdtemp()
        .arg("fit")
        .arg(&input)
        .args(["-T", "0.6", "-B", "200", "--limit", "--plot-size", "double"])
        .arg("--plot-panels")
        .arg(&svg)
        .assert()
        .success();
    let text = std::fs::read_to_string(&svg).unwrap();
    assert!(text.contains("X∞ = "), "no X∞ legend entry");
    assert!(text.contains("--limit)"));
}
