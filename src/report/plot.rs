//! Figures: the fluctuation–dissipation plot, T_eff(f), and the resampled X.
//!
//! Each figure is drawn into memory and returned as SVG or PNG bytes, so it is written
//! like every other output (atomically, never over a file without asking). Text uses the
//! DejaVu Sans font compiled into the binary: no system font is needed. A figure is drawn
//! for a physical size ([`PlotSize`]: one column, two columns, a slide) and every font
//! size and line width is set in points at that size (docs/figures.md). The palette is fdtemp's own: four hues of clearly different lightness,
//! each with its own marker shape, so the series stay apart in greyscale and for readers
//! with colour-vision deficiencies.

use crate::common::Units;
use crate::error::{Error, Result};
use crate::resample::quantile_sorted;
use crate::spectral::analysis::{SpectrumFit, SpectrumReport};
use crate::twotime::points::Axes;
use crate::twotime::{Curve, FitReport, GroupFit, PointRecord};
use plotters::coord::Shift;
use plotters::coord::ranged1d::ValueFormatter;
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;
use std::ops::Range;
use std::path::Path;
use std::sync::Once;

static FONT: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");
static REGISTER: Once = Once::new();

fn register_font() {
    REGISTER.call_once(|| {
        // The bytes are a valid TrueType font compiled in; registration cannot fail.
        let _ = plotters::style::register_font("sans-serif", FontStyle::Normal, FONT);
    });
}

/// The file format of a figure.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Scalable vector graphics.
    Svg,
    /// Portable network graphics (RGB, 8 bit).
    Png,
    /// Portable document format: the SVG drawing converted, with the font embedded.
    Pdf,
}

/// The size a figure is drawn for: a physical width and height and a resolution.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PlotSize {
    /// One column of a two-column paper: 8.5 cm × 6.8 cm at 300 dpi (1004 × 803 px).
    Single,
    /// The full width of a two-column paper: 17.8 cm × 11 cm at 300 dpi (2102 × 1299 px).
    Double,
    /// A 16:9 slide: 10 in × 5.625 in at 192 dpi (1920 × 1080 px), text and lines twice
    /// their print size.
    Slide,
    /// A size in pixels, drawn as if printed one column wide (8.5 cm), so text scales
    /// with the width as before presets existed.
    Pixels(u32, u32),
}

/// Centimetres per inch.
const CM_PER_IN: f64 = 2.54;
/// Points per inch (1 pt = 1/72 in).
const PT_PER_IN: f64 = 72.0;
/// One column's width in cm.
const SINGLE_CM: f64 = 8.5;

impl PlotSize {
    /// (physical width in inches, physical height in inches, dots per inch).
    fn physical(self) -> (f64, f64, f64) {
        match self {
            PlotSize::Single => (SINGLE_CM / CM_PER_IN, 6.8 / CM_PER_IN, 300.0),
            PlotSize::Double => (17.8 / CM_PER_IN, 11.0 / CM_PER_IN, 300.0),
            PlotSize::Slide => (10.0, 5.625, 192.0),
            PlotSize::Pixels(w, h) => {
                let w_in = SINGLE_CM / CM_PER_IN;
                let dpi = f64::from(w) / w_in;
                (w_in, f64::from(h) / dpi, dpi)
            }
        }
    }

    /// The size in pixels.
    pub fn pixels(self) -> (u32, u32) {
        match self {
            PlotSize::Pixels(w, h) => (w, h),
            _ => {
                let (w, h, dpi) = self.physical();
                ((w * dpi).round() as u32, (h * dpi).round() as u32)
            }
        }
    }
}

/// What to draw where.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Figure {
    /// File format.
    pub format: Format,
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// Dots per inch at the physical size the figure is drawn for.
    pub dpi: f64,
    /// Whether the SVG states its physical size (presets) or only pixels (`WxH`).
    pub physical: bool,
    /// Text and lines relative to print (2 on a slide, seen from afar; 1 otherwise).
    pub emphasis: f64,
}

impl Figure {
    /// The figure for a path: the format from its extension (`.svg` or `.png`).
    ///
    /// # Errors
    /// [`Error::Setting`] for another extension or a size out of range.
    pub fn for_path(path: &Path, size: PlotSize) -> Result<Self> {
        let ext = path
            .extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase);
        let format = match ext.as_deref() {
            Some("svg") => Format::Svg,
            Some("png") => Format::Png,
            Some("pdf") => Format::Pdf,
            _ => {
                return Err(Error::Setting(format!(
                    "{}: a figure's file name must end in .svg, .png or .pdf",
                    path.display()
                )));
            }
        };
        let (width, height) = size.pixels();
        if !(200..=8000).contains(&width) || !(150..=8000).contains(&height) {
            return Err(Error::Setting(format!(
                "--plot-size is {width}x{height}, expected between 200x150 and 8000x8000 pixels"
            )));
        }
        Ok(Figure {
            format,
            width,
            height,
            dpi: size.physical().2,
            physical: !matches!(size, PlotSize::Pixels(..)),
            emphasis: if size == PlotSize::Slide { 2.0 } else { 1.0 },
        })
    }

    /// Pixels per point (1/72 in) at the figure's physical size, times its emphasis.
    fn px_per_pt(&self) -> f64 {
        self.dpi / PT_PER_IN * self.emphasis
    }
}

/// Parses `single`, `double`, `slide` or `WIDTHxHEIGHT` (pixels).
///
/// # Errors
/// A message when the text is none of those.
pub fn parse_size(s: &str) -> std::result::Result<PlotSize, String> {
    match s.trim().to_ascii_lowercase().as_str() {
        "single" => return Ok(PlotSize::Single),
        "double" => return Ok(PlotSize::Double),
        "slide" => return Ok(PlotSize::Slide),
        _ => {}
    }
    let (w, h) = s
        .split_once(['x', 'X'])
        .ok_or_else(|| format!("'{s}' is not single, double, slide or WIDTHxHEIGHT"))?;
    let num = |t: &str| {
        t.trim()
            .parse::<u32>()
            .map_err(|_| format!("'{t}' in '{s}' is not a whole number"))
    };
    Ok(PlotSize::Pixels(num(w)?, num(h)?))
}

/// fdtemp's series colours (navy, amber, teal, plum, slate, ochre) with marker shapes.
const PALETTE: [RGBColor; 6] = [
    RGBColor(0x1f, 0x3b, 0x73),
    RGBColor(0xe0, 0x8a, 0x1e),
    RGBColor(0x3f, 0xa7, 0xa0),
    RGBColor(0xa2, 0x3b, 0x72),
    RGBColor(0x6b, 0x6f, 0x78),
    RGBColor(0xb8, 0x9b, 0x2c),
];
const INK: RGBColor = RGBColor(0x20, 0x20, 0x20);
const BAND: RGBColor = RGBColor(0x9a, 0xa5, 0xb8);
const REFERENCE: RGBColor = RGBColor(0x80, 0x80, 0x80);

/// Sizes in points (1/72 in) at the figure's physical size, turned into pixels.
///
/// Font sizes are what plotters is given: its SVG writes `size / 1.24` as the
/// `font-size` (plotters-svg 0.3.7, `draw_text`), so each is multiplied by that factor to
/// put the stated point size into the file.
struct Scale {
    /// Axis titles.
    label: f64,
    /// Tick labels.
    tick: f64,
    /// Legend entries.
    legend: f64,
    /// Marker radius.
    marker: i32,
    /// Data and fit lines.
    line: u32,
    /// Error bars and thin rules.
    thin: u32,
    /// Dash and gap of dashed lines.
    dash: (u32, u32),
    /// Length of a legend's line sample.
    sample: i32,
    /// Pixels per point.
    px: f64,
}

/// plotters' SVG font size divisor (plotters-svg 0.3.7).
const PLOTTERS_EM: f64 = 1.24;
/// Point sizes of the axis titles, tick labels and legend (journals ask for ≥ 7 pt).
const LABEL_PT: f64 = 9.0;
const TICK_PT: f64 = 8.0;
const LEGEND_PT: f64 = 7.5;

fn scale(fig: Figure) -> Scale {
    let px = fig.px_per_pt();
    let len = |pt: f64| (pt * px).round().max(1.0);
    Scale {
        // plotters keeps whole pixels of its font size: round up, never under the size.
        label: (LABEL_PT * px * PLOTTERS_EM).ceil(),
        tick: (TICK_PT * px * PLOTTERS_EM).ceil(),
        legend: (LEGEND_PT * px * PLOTTERS_EM).ceil(),
        marker: len(2.0).max(2.0) as i32,
        line: len(1.0) as u32,
        thin: len(0.5) as u32,
        dash: (len(4.0) as u32, len(2.5) as u32),
        sample: len(12.0) as i32,
        px,
    }
}

fn err<E: std::fmt::Debug>(what: &str) -> impl Fn(E) -> Error + '_ {
    move |e| Error::Analysis(format!("cannot draw the {what}: {e:?}"))
}

/// A point on the backend, in pixels.
type Px = (i32, i32);

/// A legend's filled swatch, `len` pixels wide.
fn swatch(style: ShapeStyle, len: i32) -> impl Fn(Px) -> Rectangle<Px> {
    let h = len / 4;
    move |(x, y)| Rectangle::new([(x, y - h), (x + len, y + h)], style)
}

/// A legend's line sample, `len` pixels long.
fn stroke(style: ShapeStyle, len: i32) -> impl Fn(Px) -> PathElement<Px> {
    move |(x, y)| PathElement::new(vec![(x, y), (x + len, y)], style)
}

/// The legend, in the same place and style on every figure.
fn legend<'a, DB, CT>(chart: &mut ChartContext<'a, DB, CT>, sc: &Scale) -> Result<()>
where
    DB: DrawingBackend + 'a,
    CT: plotters::coord::CoordTranslate,
{
    legend_at(chart, sc, SeriesLabelPosition::UpperRight)
}

/// The legend in a chosen corner.
fn legend_at<'a, DB, CT>(
    chart: &mut ChartContext<'a, DB, CT>,
    sc: &Scale,
    corner: SeriesLabelPosition,
) -> Result<()>
where
    DB: DrawingBackend + 'a,
    CT: plotters::coord::CoordTranslate,
{
    chart
        .configure_series_labels()
        .position(corner)
        .background_style(WHITE.filled())
        .border_style(REFERENCE)
        .label_font(("sans-serif", sc.legend))
        .legend_area_size(sc.sample + (4.0 * sc.px) as i32)
        .margin((4.0 * sc.px) as u32)
        .draw()
        .map_err(err::<DrawingAreaErrorKind<DB::ErrorType>>("legend"))
}

/// Renders with the backend of the figure's format.
fn render(
    fig: Figure,
    what: &str,
    draw: impl Fn(DrawingArea<SVGBackend<'_>, Shift>) -> Result<()>,
    draw_png: impl Fn(DrawingArea<BitMapBackend<'_>, Shift>) -> Result<()>,
) -> Result<Vec<u8>> {
    register_font();
    match fig.format {
        Format::Svg => Ok(physical_svg(svg_string(fig, what, &draw)?, fig).into_bytes()),
        Format::Pdf => {
            // The PDF page takes the physical size the SVG states.
            let fig = Figure {
                physical: true,
                ..fig
            };
            pdf_from_svg(&physical_svg(svg_string(fig, what, &draw)?, fig))
        }
        Format::Png => {
            let mut buf = vec![0u8; fig.width as usize * fig.height as usize * 3];
            {
                let root = BitMapBackend::with_buffer(&mut buf, (fig.width, fig.height))
                    .into_drawing_area();
                root.fill(&WHITE).map_err(err(what))?;
                draw_png(root.clone())?;
                root.present().map_err(err(what))?;
            }
            encode_png(&buf, fig)
        }
    }
}

/// The drawing as SVG text, sized in pixels.
fn svg_string(
    fig: Figure,
    what: &str,
    draw: &impl Fn(DrawingArea<SVGBackend<'_>, Shift>) -> Result<()>,
) -> Result<String> {
    let mut s = String::new();
    {
        let root = SVGBackend::with_string(&mut s, (fig.width, fig.height)).into_drawing_area();
        root.fill(&WHITE).map_err(err(what))?;
        draw(root.clone())?;
        root.present().map_err(err(what))?;
    }
    Ok(s)
}

/// SVG text converted to PDF (svg2pdf), with DejaVu Sans as the sans-serif face so the
/// text is embedded as text in that font. The page is the SVG's stated size.
fn pdf_from_svg(svg: &str) -> Result<Vec<u8>> {
    use svg2pdf::usvg;
    // usvg reads cm at its dpi; the page at the same dpi keeps the physical size.
    const DPI: f32 = 96.0;
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(FONT.to_vec());
    db.set_sans_serif_family("DejaVu Sans");
    let opt = usvg::Options {
        dpi: DPI,
        font_family: "DejaVu Sans".into(),
        fontdb: std::sync::Arc::new(db),
        ..usvg::Options::default()
    };
    let tree = usvg::Tree::from_str(svg, &opt).map_err(err("PDF"))?;
    let page = svg2pdf::PageOptions { dpi: DPI };
    let pdf =
        svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page).map_err(err("PDF"))?;
    Ok(sorted_resources(pdf))
}

/// svg2pdf 0.13 writes the entries of a page's resource dictionaries (`/xo0 8 0 R`, one
/// per line) in hash-map order, so two runs differ. Sorting each run of such lines that
/// follows a line ending in `<<` gives the same bytes every time; the run keeps its
/// length, so the cross-reference offsets stay right.
fn sorted_resources(pdf: Vec<u8>) -> Vec<u8> {
    let is_entry = |l: &[u8]| {
        let t = l.trim_ascii();
        t.first() == Some(&b'/')
            && t.ends_with(b" 0 R")
            && t.iter().all(|b| b.is_ascii_graphic() || *b == b' ')
    };
    let mut lines: Vec<&[u8]> = pdf.split(|&b| b == b'\n').collect();
    let mut i = 0;
    while i < lines.len() {
        if lines[i].trim_ascii_end().ends_with(b"<<") {
            let start = i + 1;
            let mut end = start;
            while end < lines.len() && is_entry(lines[end]) {
                end += 1;
            }
            lines[start..end].sort_unstable();
            i = end.max(i + 1);
        } else {
            i += 1;
        }
    }
    lines.join(&b'\n')
}

/// States the physical size on the `<svg>` element (a preset's width and height in cm,
/// the pixels kept as the view box), so a viewer or a journal's system places it at
/// that size.
fn physical_svg(s: String, fig: Figure) -> String {
    if !fig.physical {
        return s;
    }
    let cm = |px: u32| super::sig(f64::from(px) / fig.dpi * CM_PER_IN, 3);
    let old = format!("<svg width=\"{}\" height=\"{}\"", fig.width, fig.height);
    let new = format!(
        "<svg width=\"{}cm\" height=\"{}cm\"",
        cm(fig.width),
        cm(fig.height)
    );
    s.replacen(&old, &new, 1)
}

/// RGB bytes as PNG, with a pHYs chunk stating the figure's resolution.
fn encode_png(rgb: &[u8], fig: Figure) -> Result<Vec<u8>> {
    let mut out = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut out, fig.width, fig.height);
        let ppm = (fig.dpi / CM_PER_IN * 100.0).round() as u32;
        enc.set_pixel_dims(Some(png::PixelDimensions {
            xppu: ppm,
            yppu: ppm,
            unit: png::Unit::Meter,
        }));
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut w = enc.write_header().map_err(err("PNG"))?;
        w.write_image_data(rgb).map_err(err("PNG"))?;
    }
    Ok(out)
}

/// A compact tick label: powers of ten as 10ⁿ outside [1e-3, 1e4), others trimmed.
fn tick(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let a = v.abs();
    let l = a.log10();
    if !(1e-3..1e4).contains(&a) && (l - l.round()).abs() < 1e-9 {
        let sign = if v < 0.0 { "−" } else { "" };
        return format!("{sign}{}", superscript_power(l.round() as i64));
    }
    if !(1e-3..1e5).contains(&a) {
        return format!("{v:.1e}");
    }
    crate::report::format::fmt_num(v)
}

/// An estimate and its interval, with 3 significant digits or more: digits are added
/// (up to 6) until an end that differs from the estimate also prints differently.
/// A log axis's label: decades only, all as 10ⁿ (other ticks stay, unlabelled, as minor
/// ticks). When the range holds fewer than two decades, every tick is labelled.
fn log_tick(v: f64, (lo, hi): (f64, f64)) -> String {
    let decades = (hi.log10().floor() - lo.log10().ceil()) as i64 + 1;
    if decades < 2 {
        return tick(v);
    }
    let l = v.log10();
    if (l - l.round()).abs() > 1e-9 {
        return String::new();
    }
    superscript_power(l.round() as i64)
}

/// 10 to the power `n` with superscript digits (10⁻¹, 10⁰, 10³).
fn superscript_power(n: i64) -> String {
    const SUP: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let digits: String = n
        .abs()
        .to_string()
        .chars()
        .map(|d| SUP[d as usize - '0' as usize])
        .collect();
    format!("10{}{digits}", if n < 0 { "⁻" } else { "" })
}

fn fmt_iv(v: Option<f64>, lo: Option<f64>, hi: Option<f64>) -> String {
    let digits = v.map_or(3, |v| {
        (3..=6)
            .find(|&d| {
                [lo, hi]
                    .into_iter()
                    .flatten()
                    .all(|e| e.total_cmp(&v).is_eq() || super::sig(e, d) != super::sig(v, d))
            })
            .unwrap_or(6)
    });
    let f = |x: f64| super::sig(x, digits);
    match (v, lo, hi) {
        (Some(v), Some(lo), Some(hi)) => format!("{} [{}, {}]", f(v), f(lo), f(hi)),
        (Some(v), Some(lo), None) => format!("{} [{}, unbounded]", f(v), f(lo)),
        (Some(v), _, _) => f(v),
        _ => "undefined".into(),
    }
}

/// The effective temperature as figures write it (no literal underscore).
const T_EFF: &str = "Teff";

/// What each figure is called in a drawing error.
const FD: &str = "fluctuation–dissipation plot";
const HIST: &str = "resample histogram";
const TEFF: &str = "T_eff(f) figure";

/// The fluctuation–dissipation plot of a fit.
///
/// # Errors
/// [`Error::Analysis`] when the joint fit has no curve or the drawing fails.
pub fn fd_plot(r: &FitReport, fig: Figure) -> Result<Vec<u8>> {
    let joint = &r.fits[0];
    let curve = joint.curve.ok_or_else(|| {
        Error::Analysis(
            "cannot draw the fluctuation–dissipation plot: the joint fit has no curve".into(),
        )
    })?;
    if r.points.is_empty() {
        return Err(Error::Analysis(
            "cannot draw the fluctuation–dissipation plot: no points".into(),
        ));
    }
    render(
        fig,
        FD,
        |a| draw_fd(a, r, curve, fig),
        |a| draw_fd(a, r, curve, fig),
    )
}

/// The linear chart of the fluctuation–dissipation plot and the resample histogram.
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// The margin, label areas and mesh (no grid, 6 ticks on x) of a linear chart.
fn linear_chart<'a, DB: DrawingBackend + 'a>(
    root: &'a DrawingArea<DB, Shift>,
    fig: Figure,
    (x, y): (Range<f64>, Range<f64>),
    (xlabel, ylabel): (&str, String),
    y_labels: usize,
    what: &str,
) -> Result<Chart<'a, DB>> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(what);
    let sc = scale(fig);
    let mut chart = ChartBuilder::on(root)
        .margin((6.0 * sc.px) as i32)
        .x_label_area_size((sc.label * 2.4) as i32)
        .y_label_area_size((sc.label * 3.0) as i32)
        .build_cartesian_2d(x, y)
        .map_err(&e)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(xlabel)
        .y_desc(ylabel)
        .axis_desc_style(("sans-serif", sc.label))
        .label_style(("sans-serif", sc.tick))
        .x_labels(6)
        .y_labels(y_labels)
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .draw()
        .map_err(&e)?;
    Ok(chart)
}

/// The extent of the fluctuation–dissipation plot's data (with standard errors) and its
/// axes' ranges.
struct FdRanges {
    xmin_data: f64,
    xmax_data: f64,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
}

fn fd_ranges(pts: &[PointRecord], curve: Curve) -> FdRanges {
    let xmax_data = pts
        .iter()
        .map(|p| p.x + p.x_se)
        .fold(f64::NEG_INFINITY, f64::max);
    let xmin_data = pts
        .iter()
        .map(|p| p.x - p.x_se)
        .fold(f64::INFINITY, f64::min);
    let ymax_data = pts
        .iter()
        .map(|p| p.y + p.y_se)
        .fold(f64::NEG_INFINITY, f64::max);
    let ymin_data = pts
        .iter()
        .map(|p| p.y - p.y_se)
        .fold(f64::INFINITY, f64::min);
    // The data, the fitted curve's level and the origin, with a 4% margin at the top.
    let y0 = ymin_data.min(0.0);
    let top = ymax_data.max(curve.intercept);
    FdRanges {
        xmin_data,
        xmax_data,
        x0: xmin_data.min(0.0),
        x1: xmax_data.max(curve.intercept.max(1.0)),
        y0,
        y1: top + 0.04 * (top - y0),
    }
}

/// The axis titles: normalized or plain, with `(k = 1)` in reduced units.
fn fd_labels(r: &FitReport) -> (&'static str, String) {
    let normalized = r.settings.axes_used == Axes::Normalized;
    let xlabel = if normalized {
        "C(t,tw) / C(t,t)"
    } else {
        "C(t,tw)"
    };
    let k = if r.settings.given.units == Units::Si {
        ""
    } else {
        "   (k = 1)"
    };
    let ylabel = if normalized {
        format!("k T χ(t,tw) / C(t,t){k}")
    } else {
        format!("k T χ(t,tw){k}")
    };
    (xlabel, ylabel)
}

fn draw_fd<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    r: &FitReport,
    curve: Curve,
    fig: Figure,
) -> Result<()> {
    let sc = scale(fig);
    let joint = &r.fits[0];
    let mut rg = fd_ranges(&r.points, curve);
    let (corner, y1) = fd_layout(r, curve, &rg, fig);
    rg.y1 = y1;
    let ranges = (rg.x0..rg.x1, rg.y0..rg.y1);
    let mut chart = linear_chart(&root, fig, ranges, fd_labels(r), 9, FD)?;
    fd_references(&mut chart, joint, curve, &rg, &sc)?;
    fd_band(&mut chart, joint, r.settings.given.level, &rg, &sc)?;
    fd_points(&mut chart, r, &sc)?;
    fd_fit(&mut chart, joint, curve, &rg, &sc)?;
    legend_at(&mut chart, &sc, corner)?;
    Ok(())
}

/// The break's interval and the equilibrium line.
fn fd_references<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    joint: &GroupFit,
    curve: Curve,
    rg: &FdRanges,
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    let (x0, x1, y0, y1) = (rg.x0, rg.x1, rg.y0, rg.y1);
    // The break's interval as a bracket standing on the C axis.
    if let (Some(lo), Some(hi)) = (joint.brk.low, joint.brk.high) {
        let h = 0.05 * (y1 - y0);
        chart
            .draw_series(std::iter::once(PathElement::new(
                vec![(lo, y0 + h), (lo, y0), (hi, y0), (hi, y0 + h)],
                PALETTE[4].stroke_width(sc.line * 2),
            )))
            .map_err(&e)?
            .label(break_label(joint))
            .legend(stroke(PALETTE[4].stroke_width(sc.line * 2), sc.sample));
    }
    // Equilibrium: slope -1 through the fitted upper segment's level.
    let eq = curve.intercept;
    chart
        .draw_series(DashedLineSeries::new(
            vec![(x0, eq - x0), (x1, eq - x1)],
            sc.dash.0,
            sc.dash.1,
            REFERENCE.stroke_width(sc.line),
        ))
        .map_err(&e)?
        .label("equilibrium, slope −1")
        .legend(stroke(REFERENCE.stroke_width(sc.line), sc.sample));
    Ok(())
}

fn break_label(joint: &GroupFit) -> String {
    format!(
        "break q = {}",
        fmt_iv(joint.brk.estimate, joint.brk.low, joint.brk.high)
    )
}

fn fit_label(joint: &GroupFit) -> String {
    format!(
        "fit: X = {}",
        fmt_iv(joint.ratio.estimate, joint.ratio.low, joint.ratio.high)
    )
}

fn teff_label(joint: &GroupFit) -> String {
    let t_eff = fmt_iv(joint.t_eff.estimate, joint.t_eff.low, joint.t_eff.high);
    format!("{T_EFF} = {t_eff}")
}

/// Where the FD plot's legend goes and how high the y axis runs: lower left (the empty
/// side below a fluctuation–dissipation curve) when no point or fitted curve falls under
/// it, else upper right, with the y axis raised (by 8% steps, up to 1.6 times) until the
/// data clear it. The legend's box is estimated from its rows and longest label, and the
/// plot area from the chart's margins (`linear_chart`).
fn fd_layout(
    r: &FitReport,
    curve: Curve,
    rg: &FdRanges,
    fig: Figure,
) -> (SeriesLabelPosition, f64) {
    let sc = scale(fig);
    let joint = &r.fits[0];
    let fs = sc.legend / PLOTTERS_EM;
    let labels = [break_label(joint), fit_label(joint), teff_label(joint)];
    let chars = labels
        .iter()
        .map(|l| l.chars().count())
        .max()
        .unwrap_or(0)
        .max(22);
    let rows = r.waiting_times.len() + 5;
    let pad = 4.0 * sc.px;
    let w = f64::from(sc.sample) + 3.0 * pad + 0.6 * fs * chars as f64;
    let h = rows as f64 * 1.6 * fs + 2.0 * pad;
    let margin = 6.0 * sc.px;
    let plot_w = f64::from(fig.width) - 2.0 * margin - sc.label * 3.0;
    let plot_h = f64::from(fig.height) - 2.0 * margin - sc.label * 2.4;
    // The legend's box as fractions of the axes.
    let (fx, fy) = ((w + pad) / plot_w, (h + pad) / plot_h);
    let marks = |y1: f64| -> Vec<(f64, f64)> {
        let frac = |x: f64, y: f64| ((x - rg.x0) / (rg.x1 - rg.x0), (y - rg.y0) / (y1 - rg.y0));
        let curve_pts = (0..=50).map(|i| {
            let x = rg.x0 + (rg.x1 - rg.x0) * f64::from(i) / 50.0;
            frac(x, curve.eval(x))
        });
        r.points
            .iter()
            .map(|p| frac(p.x, p.y + p.y_se))
            .chain(curve_pts)
            .collect()
    };
    if marks(rg.y1).iter().all(|&(x, y)| !(x < fx && y < fy)) {
        return (SeriesLabelPosition::LowerLeft, rg.y1);
    }
    let mut y1 = rg.y1;
    let limit = rg.y0 + 1.6 * (rg.y1 - rg.y0);
    while y1 < limit
        && !marks(y1)
            .iter()
            .all(|&(x, y)| !(x > 1.0 - fx && y > 1.0 - fy))
    {
        y1 += 0.08 * (rg.y1 - rg.y0);
    }
    (SeriesLabelPosition::UpperRight, y1)
}

/// Bootstrap band of the fitted curve.
fn fd_band<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    joint: &GroupFit,
    level: f64,
    rg: &FdRanges,
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    if joint.curve_replicates.len() >= 20 {
        let n = 160;
        let (a, b) = (rg.xmin_data.max(rg.x0), rg.xmax_data.min(rg.x1));
        let mut upper = Vec::with_capacity(n);
        let mut lower = Vec::with_capacity(n);
        let mut ys = vec![0.0; joint.curve_replicates.len()];
        for i in 0..n {
            let x = a + (b - a) * i as f64 / (n - 1) as f64;
            for (y, c) in ys.iter_mut().zip(&joint.curve_replicates) {
                *y = c.eval(x);
            }
            ys.sort_by(f64::total_cmp);
            lower.push((x, quantile_sorted(&ys, (1.0 - level) / 2.0)));
            upper.push((x, quantile_sorted(&ys, (1.0 + level) / 2.0)));
        }
        upper.extend(lower.into_iter().rev());
        chart
            .draw_series(std::iter::once(Polygon::new(
                upper,
                PALETTE[0].mix(0.22).filled(),
            )))
            .map_err(&e)?
            .label(format!("{:.0}% resampling band", 100.0 * level))
            .legend(swatch(PALETTE[0].mix(0.3).filled(), sc.sample));
    }
    Ok(())
}

/// Points per waiting time, with standard errors.
fn fd_points<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    r: &FitReport,
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    for (i, &tw) in r.waiting_times.iter().enumerate() {
        let c = PALETTE[i % PALETTE.len()];
        let mine: Vec<_> = r
            .points
            .iter()
            .filter(|p| p.tw.total_cmp(&tw).is_eq())
            .collect();
        chart
            .draw_series(mine.iter().map(|p| {
                ErrorBar::new_vertical(
                    p.x,
                    p.y - p.y_se,
                    p.y,
                    p.y + p.y_se,
                    c.stroke_width(sc.thin),
                    sc.marker as u32,
                )
            }))
            .map_err(&e)?;
        chart
            .draw_series(mine.iter().map(|p| {
                ErrorBar::new_horizontal(
                    p.y,
                    p.x - p.x_se,
                    p.x,
                    p.x + p.x_se,
                    c.stroke_width(sc.thin),
                    sc.marker as u32,
                )
            }))
            .map_err(&e)?;
        let (ms, line, half) = (sc.marker, sc.line, sc.sample / 2);
        let label = format!("tw = {}", crate::report::format::fmt_num(tw));
        // Shapes differ per series (filled circle, filled triangle, cross, open circle) so
        // the series stay apart without colour.
        macro_rules! series {
            ($shape:expr) => {
                chart
                    .draw_series(mine.iter().map(|p| $shape((p.x, p.y))))
                    .map_err(&e)?
                    .label(label)
                    .legend(move |(x, y)| $shape((x + half, y)))
            };
        }
        match i % 4 {
            0 => series!(|at| Circle::new(at, ms, c.filled())),
            1 => series!(|at| TriangleMarker::new(at, ms + 2, c.filled())),
            2 => series!(|at| Cross::new(at, ms, c.stroke_width(line))),
            _ => series!(|at| Circle::new(at, ms, c.stroke_width(line))),
        };
    }
    Ok(())
}

/// The fitted broken stick, with X and T_eff in the legend.
fn fd_fit<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    joint: &GroupFit,
    curve: Curve,
    rg: &FdRanges,
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    // The fitted broken stick.
    let fit_pts: Vec<(f64, f64)> = [rg.xmin_data.max(rg.x0), curve.q, rg.xmax_data.min(rg.x1)]
        .iter()
        .map(|&x| (x, curve.eval(x)))
        .collect();
    chart
        .draw_series(LineSeries::new(fit_pts, INK.stroke_width(sc.line)))
        .map_err(&e)?
        .label(fit_label(joint))
        .legend(stroke(INK.stroke_width(sc.line), sc.sample));
    chart
        .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
        .map_err(&e)?
        .label(teff_label(joint))
        .legend(|(x, y)| EmptyElement::at((x, y)));
    Ok(())
}

/// The histogram of the resampled X of the joint fit, with the estimate and interval.
///
/// # Errors
/// [`Error::Analysis`] when there are no resamples, they do not vary, or drawing fails.
pub fn ratio_histogram(r: &FitReport, fig: Figure) -> Result<Vec<u8>> {
    let joint = &r.fits[0];
    let mut reps: Vec<f64> = joint
        .ratio_replicates
        .iter()
        .copied()
        .filter(|v| v.is_finite())
        .collect();
    if reps.len() < 2 {
        return Err(Error::Analysis(
            "cannot draw the resample histogram: no resampled X".into(),
        ));
    }
    reps.sort_by(f64::total_cmp);
    let (lo, hi) = (reps[0], reps[reps.len() - 1]);
    // Identical resamples differ only by rounding: no distribution to draw.
    if !(hi - lo > 1e-9 * lo.abs().max(hi.abs()).max(f64::MIN_POSITIVE)) {
        return Err(Error::Analysis(format!(
            "cannot draw the resample histogram: every resample gives X = {}",
            super::sig(lo, 4)
        )));
    }
    render(
        fig,
        HIST,
        |a| draw_hist(a, r, &reps, fig),
        |a| draw_hist(a, r, &reps, fig),
    )
}

/// Freedman–Diaconis bins of the sorted resamples: the counts, the first edge and the
/// bin width.
fn hist_bins(reps: &[f64]) -> (Vec<u32>, f64, f64) {
    let n = reps.len();
    // Freedman–Diaconis bin width.
    let iqr = quantile_sorted(reps, 0.75) - quantile_sorted(reps, 0.25);
    let (lo, hi) = (reps[0], reps[n - 1]);
    let width = if iqr > 0.0 {
        2.0 * iqr / (n as f64).cbrt()
    } else {
        (hi - lo) / 30.0
    };
    let bins = (((hi - lo) / width).ceil() as usize).clamp(10, 120);
    let w = (hi - lo) / bins as f64;
    let mut counts = vec![0u32; bins];
    for v in reps {
        counts[(((v - lo) / w) as usize).min(bins - 1)] += 1;
    }
    (counts, lo, w)
}

/// The resample histogram's y range over its tallest bar.
const HIST_ROOM: f64 = 1.6;

fn draw_hist<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    r: &FitReport,
    reps: &[f64],
    fig: Figure,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(HIST);
    let sc = scale(fig);
    let n = reps.len();
    let (counts, lo, w) = hist_bins(reps);
    let hi = reps[n - 1];
    // Head room for the three-row legend above the tallest bar.
    let ymax = f64::from(*counts.iter().max().unwrap_or(&1)) * HIST_ROOM;
    let pad = 0.05 * (hi - lo);
    let mut chart = linear_chart(
        &root,
        fig,
        ((lo - pad)..(hi + pad), 0.0..ymax),
        (
            "X, fluctuation–dissipation ratio (joint fit)",
            "resamples".into(),
        ),
        5,
        HIST,
    )?;
    chart
        .draw_series(counts.iter().enumerate().map(|(i, &c)| {
            let x = lo + i as f64 * w;
            Rectangle::new(
                [(x, 0.0), (x + w, f64::from(c))],
                PALETTE[0].mix(0.55).filled(),
            )
        }))
        .map_err(&e)?
        .label(format!("{n} resamples of whole samples"))
        .legend(swatch(PALETTE[0].mix(0.55).filled(), sc.sample));
    hist_marks(&mut chart, r, ymax / HIST_ROOM, &sc)?;
    legend(&mut chart, &sc)?;
    Ok(())
}

/// The estimate and the interval's ends as vertical lines up to `top`.
fn hist_marks<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    r: &FitReport,
    top: f64,
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(HIST);
    let joint = &r.fits[0];
    if let Some(est) = joint.ratio.estimate {
        chart
            .draw_series(LineSeries::new(
                vec![(est, 0.0), (est, top)],
                INK.stroke_width(sc.line),
            ))
            .map_err(&e)?
            .label(format!("estimate X = {}", super::sig(est, 3)))
            .legend(stroke(INK.stroke_width(sc.line), sc.sample));
    }
    if let (Some(a), Some(b)) = (joint.ratio.low, joint.ratio.high) {
        for (i, v) in [a, b].into_iter().enumerate() {
            let s = chart
                .draw_series(DashedLineSeries::new(
                    vec![(v, 0.0), (v, top)],
                    sc.dash.0,
                    sc.dash.1,
                    PALETTE[1].stroke_width(sc.line),
                ))
                .map_err(&e)?;
            if i == 0 {
                s.label(format!(
                    "{:.0}% {} interval [{}, {}]",
                    100.0 * r.settings.given.level,
                    r.settings.given.interval.label(),
                    super::sig(a, 3),
                    super::sig(b, 3)
                ))
                .legend(stroke(PALETTE[1].stroke_width(sc.line), sc.sample));
            }
        }
    }
    Ok(())
}

/// T_eff(f) on a log frequency axis, with interval band, the bath and the departure.
///
/// # Errors
/// [`Error::Analysis`] when there is no positive T_eff to draw or drawing fails.
pub fn teff_plot(r: &SpectrumReport, fig: Figure) -> Result<Vec<u8>> {
    let any = r
        .spectra
        .iter()
        .flat_map(|s| &s.points)
        .any(|p| p.t_eff > 0.0);
    if !any {
        return Err(Error::Analysis(
            "cannot draw T_eff(f): no positive effective temperature".into(),
        ));
    }
    render(
        fig,
        TEFF,
        |a| draw_teff(a, r, fig),
        |a| draw_teff(a, r, fig),
    )
}

/// The ranges of T_eff(f): frequencies of the positive points, temperatures of their
/// intervals and the bath, padded; T_eff is on a log axis when it spans a factor above 8.
struct TeffRanges {
    f0: f64,
    f1: f64,
    t0: f64,
    t1: f64,
    log_y: bool,
}

fn teff_ranges(r: &SpectrumReport) -> TeffRanges {
    let pts = r
        .spectra
        .iter()
        .flat_map(|s| &s.points)
        .filter(|p| p.t_eff > 0.0 && p.f > 0.0);
    let (mut f0, mut f1, mut t0, mut t1) = (f64::INFINITY, 0.0f64, f64::INFINITY, 0.0f64);
    for p in pts {
        f0 = f0.min(p.f);
        f1 = f1.max(p.f);
        t0 = t0.min(p.low.filter(|v| *v > 0.0).unwrap_or(p.t_eff));
        t1 = t1.max(p.high.unwrap_or(p.t_eff));
    }
    if let Some(t) = r.settings.temperature {
        t0 = t0.min(t);
        t1 = t1.max(t);
    }
    let log_y = t1 / t0 > 8.0;
    let (t0, t1) = if log_y {
        (t0 / 1.3, t1 * 6.0)
    } else {
        (t0 - 0.1 * (t1 - t0), t1 + 0.6 * (t1 - t0))
    };
    TeffRanges {
        f0,
        f1,
        t0,
        t1,
        log_y,
    }
}

fn draw_teff<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    r: &SpectrumReport,
    fig: Figure,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(TEFF);
    let sc = scale(fig);
    let rg = teff_ranges(r);
    let f_range = (rg.f0 / 1.2)..(rg.f1 * 1.2);
    let mut builder = ChartBuilder::on(&root);
    builder
        .margin((6.0 * sc.px) as i32)
        .x_label_area_size((sc.label * 2.4) as i32)
        .y_label_area_size((sc.label * 3.2) as i32);
    if rg.log_y {
        teff_body(
            builder
                .build_cartesian_2d(f_range.log_scale(), (rg.t0..rg.t1).log_scale())
                .map_err(&e)?,
            r,
            &rg,
            &sc,
        )?;
    } else {
        teff_body(
            builder
                .build_cartesian_2d(f_range.log_scale(), rg.t0..rg.t1)
                .map_err(&e)?,
            r,
            &rg,
            &sc,
        )?;
    }
    Ok(())
}

/// The mesh, each spectrum, the bath and the legend, on a log or linear T_eff axis.
fn teff_body<'a, DB, Y>(
    mut chart: ChartContext<'a, DB, Cartesian2d<LogCoord<f64>, Y>>,
    r: &SpectrumReport,
    rg: &TeffRanges,
    sc: &Scale,
) -> Result<()>
where
    DB: DrawingBackend + 'a,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(TEFF);
    let unit = if r.settings.units == Units::Si {
        " (K)"
    } else {
        ""
    };
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc("f (Hz)")
        .y_desc(format!("{T_EFF}{unit}"))
        .axis_desc_style(("sans-serif", sc.label))
        .label_style(("sans-serif", sc.tick))
        .x_labels(30)
        .y_labels(30)
        .x_label_formatter(&|v| log_tick(*v, (rg.f0 / 1.2, rg.f1 * 1.2)))
        .y_label_formatter(&|v| {
            if rg.log_y {
                log_tick(*v, (rg.t0, rg.t1))
            } else {
                tick(*v)
            }
        })
        .draw()
        .map_err(&e)?;
    for (i, s) in r.spectra.iter().enumerate() {
        let c = PALETTE[i % PALETTE.len()];
        // One legend entry per kind: the band and the departure are named once.
        let named = Named {
            band: i == 0,
            departure: r.spectra[..i].iter().all(|s| s.departure.is_none()),
            several: r.spectra.len() > 1,
        };
        teff_spectrum(&mut chart, s, c, (r.settings.level, named), rg, sc)?;
    }
    if let Some(t) = r.settings.temperature {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(rg.f0 / 1.2, t), (rg.f1 * 1.2, t)],
                sc.dash.0,
                sc.dash.1,
                REFERENCE.stroke_width(sc.line),
            ))
            .map_err(&e)?
            .label(format!(
                "bath T = {}{}",
                super::sig(t, 4),
                unit.replace(['(', ')'], "")
            ))
            .legend(stroke(REFERENCE.stroke_width(sc.line), sc.sample));
    }
    if let (Some(t), true) = (r.settings.temperature, rg.log_y) {
        bath_tick(&chart, t, rg, sc)?;
    }
    legend(&mut chart, sc)?;
    Ok(())
}

/// The bath temperature as a labelled tick on a log T_eff axis, left of the axis like
/// the decades, unless it would touch a decade's label (then the legend names it).
fn bath_tick<'a, DB, Y>(
    chart: &ChartContext<'a, DB, Cartesian2d<LogCoord<f64>, Y>>,
    t: f64,
    rg: &TeffRanges,
    sc: &Scale,
) -> Result<()>
where
    DB: DrawingBackend + 'a,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(TEFF);
    let x = rg.f0 / 1.2;
    let (px, py) = chart.backend_coord(&(x, t));
    let fs = sc.tick / PLOTTERS_EM;
    let decades = (rg.t0.log10().ceil() as i32)..=(rg.t1.log10().floor() as i32);
    let clear = decades
        .map(|d| chart.backend_coord(&(x, 10f64.powi(d))).1)
        .all(|dy| f64::from((dy - py).abs()) > 1.3 * fs);
    if !clear {
        return Ok(());
    }
    let area = chart.plotting_area().strip_coord_spec();
    let (ox, oy) = area.get_base_pixel();
    let (px, py) = (px - ox, py - oy);
    let len = (3.0 * sc.px) as i32;
    area.draw(&PathElement::new(
        vec![(px - len, py), (px, py)],
        INK.stroke_width(sc.thin),
    ))
    .map_err(&e)?;
    let style = TextStyle::from(("sans-serif", sc.tick).into_font()).pos(
        plotters::style::text_anchor::Pos::new(
            plotters::style::text_anchor::HPos::Right,
            plotters::style::text_anchor::VPos::Center,
        ),
    );
    area.draw(&Text::new(super::sig(t, 3), (px - 2 * len, py), style))
        .map_err(&e)?;
    Ok(())
}

/// Which of a spectrum's elements get a legend entry, so each kind is named once.
#[derive(Clone, Copy)]
struct Named {
    band: bool,
    departure: bool,
    /// More than one spectrum: the departure's entry names no frequency.
    several: bool,
}

/// One spectrum in colour `c`: its interval band, its T_eff(f) and its departure.
fn teff_spectrum<'a, DB, Y>(
    chart: &mut ChartContext<'a, DB, Cartesian2d<LogCoord<f64>, Y>>,
    s: &SpectrumFit,
    c: RGBColor,
    (level, named): (f64, Named),
    rg: &TeffRanges,
    sc: &Scale,
) -> Result<()>
where
    DB: DrawingBackend + 'a,
    Y: Ranged<ValueType = f64> + ValueFormatter<f64>,
{
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(TEFF);
    let (t0, t1) = (rg.t0, rg.t1);
    let ok: Vec<_> = s.points.iter().filter(|p| p.t_eff > 0.0).collect();
    let band: Vec<(f64, f64)> = ok
        .iter()
        .filter_map(|p| Some((p.f, p.high?)))
        .chain(ok.iter().rev().filter_map(|p| Some((p.f, p.low?.max(t0)))))
        .collect();
    if band.len() > 2 {
        let drawn = chart
            .draw_series(std::iter::once(Polygon::new(band, c.mix(0.2).filled())))
            .map_err(&e)?;
        if named.band {
            let swatch_colour = if named.several { BAND } else { c };
            drawn
                .label(format!("{:.0}% interval", 100.0 * level))
                .legend(swatch(swatch_colour.mix(0.4).filled(), sc.sample));
        }
    }
    let label = s.tw.map_or_else(
        || format!("{T_EFF}(f)"),
        |t| format!("{T_EFF}(f), tw = {}", crate::report::format::fmt_num(t)),
    );
    chart
        .draw_series(LineSeries::new(
            ok.iter().map(|p| (p.f, p.t_eff)),
            c.stroke_width(sc.line),
        ))
        .map_err(&e)?
        .label(label)
        .legend(stroke(c.stroke_width(sc.line), sc.sample));
    if let Some(d) = &s.departure {
        let fd = d.below_hz;
        let drawn = chart
            .draw_series(DashedLineSeries::new(
                vec![(fd, t0), (fd, t1)],
                sc.dash.0,
                sc.dash.1,
                PALETTE[3].stroke_width(sc.line),
            ))
            .map_err(&e)?;
        if named.departure {
            let label = if named.several {
                format!("departure from T ({T_EFF} {} T)", d.direction.side())
            } else {
                format!(
                    "departs below {} Hz ({}: {T_EFF} {} T)",
                    super::sig(fd, 3),
                    d.direction.label(),
                    d.direction.side()
                )
            };
            drawn
                .label(label)
                .legend(stroke(PALETTE[3].stroke_width(sc.line), sc.sample));
        }
    }
    Ok(())
}
