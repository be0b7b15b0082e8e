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
use plotters::prelude::*;
use std::ops::Range;
use std::path::Path;
use std::sync::Once;

pub mod axes;
mod fd;
mod hist;
mod panels;
mod teff;
mod xofc;

use axes::{log_tick, tick};
pub use fd::fd_plot;
pub use hist::ratio_histogram;
pub use panels::{fd_panels, panels_figure};
pub use teff::teff_plot;
pub use xofc::x_of_c_plot;

static FONT: &[u8] = include_bytes!("../../../assets/fonts/DejaVuSans.ttf");
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

/// Draws the figure once, as SVG, and gives it in the figure's format: the SVG itself,
/// or the same SVG rendered to PNG (resvg) or converted to PDF (svg2pdf), so subscripts
/// and every other detail are the same in all three.
fn render(
    fig: Figure,
    what: &str,
    draw: impl Fn(DrawingArea<SVGBackend<'_>, Shift>) -> Result<()>,
) -> Result<Vec<u8>> {
    register_font();
    let svg = subscripts(&svg_string(fig, what, &draw)?, fig);
    match fig.format {
        Format::Svg => Ok(physical_svg(svg, fig).into_bytes()),
        Format::Pdf => {
            // The PDF page takes the physical size the SVG states.
            let fig = Figure {
                physical: true,
                ..fig
            };
            pdf_from_svg(&physical_svg(svg, fig))
        }
        Format::Png => encode_png(&png_from_svg(&svg, fig)?, fig),
    }
}

/// How figure text marks a subscript: `T_{eff}`, `k_{B}`, `t_{w}`.
const SUB_OPEN: &str = "_{";

/// Subscripts: each `_{…}` in an SVG `<text>` becomes a `<tspan>` with a smaller
/// `font-size` (four fifths of the text's, never under 7 pt at the figure's size) lowered
/// by `dy`; the text after it is raised back by a second `<tspan>`. `dy` rather than
/// `baseline-shift`, which some browsers ignore.
fn subscripts(svg: &str, fig: Figure) -> String {
    let min_px = SUB_MIN_PT * fig.px_per_pt();
    let mut out = String::with_capacity(svg.len() + 256);
    let mut rest = svg;
    while let Some(at) = rest.find("<text") {
        let (before, from) = rest.split_at(at);
        out.push_str(before);
        let (Some(tag_end), Some(close)) = (from.find('>'), from.find("</text>")) else {
            rest = from;
            break;
        };
        let (tag, body) = (&from[..=tag_end], &from[tag_end + 1..close]);
        out.push_str(tag);
        let base = tag
            .split(" font-size=\"")
            .nth(1)
            .and_then(|t| t.split('"').next())
            .and_then(|t| t.parse::<f64>().ok());
        match base {
            Some(base) if body.contains(SUB_OPEN) => {
                let size = (SUB_RATIO * base).max(min_px).min(base);
                let drop = SUB_DROP * base;
                let mut b = body;
                while let Some(i) = b.find(SUB_OPEN) {
                    let Some(j) = b[i..].find('}') else { break };
                    out.push_str(&b[..i]);
                    out.push_str(&format!(
                        "<tspan font-size=\"{size:.2}\" dy=\"{drop:.2}\">{}</tspan>",
                        &b[i + SUB_OPEN.len()..i + j]
                    ));
                    b = &b[i + j + 1..];
                    let tail = b.split_once('\n').map_or(b, |(t, _)| t);
                    if !tail.trim().is_empty() || b.contains(SUB_OPEN) {
                        out.push_str(&format!("<tspan dy=\"{:.2}\">", -drop));
                        let k = b.find(SUB_OPEN).unwrap_or(b.len());
                        out.push_str(&b[..k]);
                        out.push_str("</tspan>");
                        b = &b[k..];
                    }
                }
                out.push_str(b);
            }
            _ => out.push_str(body),
        }
        rest = &from[close..];
    }
    out.push_str(rest);
    out
}

/// A subscript's size relative to its text, its least size in points, and how far it
/// is lowered (in ems of the text).
const SUB_RATIO: f64 = 0.8;
const SUB_MIN_PT: f64 = 7.05;
const SUB_DROP: f64 = 0.22;

/// usvg's options with DejaVu Sans as the sans-serif face.
fn usvg_options() -> svg2pdf::usvg::Options<'static> {
    use svg2pdf::usvg;
    let mut db = usvg::fontdb::Database::new();
    db.load_font_data(FONT.to_vec());
    db.set_sans_serif_family("DejaVu Sans");
    usvg::Options {
        // usvg reads cm at its dpi; the PDF page at the same dpi keeps the physical size.
        dpi: USVG_DPI,
        font_family: "DejaVu Sans".into(),
        fontdb: std::sync::Arc::new(db),
        ..usvg::Options::default()
    }
}

const USVG_DPI: f32 = 96.0;

/// The SVG (sized in pixels) rendered by resvg into RGB bytes on white.
fn png_from_svg(svg: &str, fig: Figure) -> Result<Vec<u8>> {
    use resvg::tiny_skia;
    let tree = svg2pdf::usvg::Tree::from_str(svg, &usvg_options()).map_err(err("PNG"))?;
    let mut pixmap = tiny_skia::Pixmap::new(fig.width, fig.height)
        .ok_or_else(|| Error::Analysis("cannot draw the PNG: empty size".into()))?;
    pixmap.fill(tiny_skia::Color::WHITE);
    let sx = fig.width as f32 / tree.size().width();
    let sy = fig.height as f32 / tree.size().height();
    resvg::render(
        &tree,
        tiny_skia::Transform::from_scale(sx, sy),
        &mut pixmap.as_mut(),
    );
    // Opaque on white: the premultiplied RGBA is the RGB with alpha 255.
    Ok(pixmap
        .data()
        .chunks_exact(4)
        .flat_map(|p| [p[0], p[1], p[2]])
        .collect())
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
    let tree = svg2pdf::usvg::Tree::from_str(svg, &usvg_options()).map_err(err("PDF"))?;
    let page = svg2pdf::PageOptions { dpi: USVG_DPI };
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

/// An estimate and its interval, with 3 significant digits or more: digits are added
/// (up to 6) until an end that differs from the estimate also prints differently.
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

/// The effective temperature as figures write it: T with a subscript "eff".
const T_EFF: &str = "T_{eff}";
/// The waiting time, t with a subscript "w".
const T_W: &str = "t_{w}";

/// What each figure is called in a drawing error.
const FD: &str = "fluctuation–dissipation plot";
const HIST: &str = "resample histogram";
const TEFF: &str = "T_eff(f) figure";

/// The linear chart of the fluctuation–dissipation plot and the resample histogram.
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<axes::Fixed, axes::Fixed>>;

/// Major tick length in points (outward); minor ticks are half as long.
const TICK_LEN_PT: f64 = 3.5;

/// The margin, label areas and mesh (no grid) of a linear chart: nice major ticks
/// ([`axes::nice_ticks`], at most 6 on x and `y_labels` on y) and minor ticks between.
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
    let (xt, yt) = (
        axes::nice_ticks(x.start, x.end, 6),
        axes::nice_ticks(y.start, y.end, y_labels),
    );
    let mut chart = ChartBuilder::on(root)
        .margin((6.0 * sc.px) as i32)
        .x_label_area_size((sc.label * 2.4) as i32)
        .y_label_area_size((sc.label * 3.0) as i32)
        .build_cartesian_2d(
            axes::Fixed::new(x.clone(), xt.major.clone()),
            axes::Fixed::new(y.clone(), yt.major.clone()),
        )
        .map_err(&e)?;
    let len = (TICK_LEN_PT * sc.px).round() as i32;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(xlabel)
        .y_desc(ylabel)
        .axis_desc_style(("sans-serif", sc.label))
        .label_style(("sans-serif", sc.tick))
        .set_all_tick_mark_size(len)
        .x_label_formatter(&|v| tick(*v))
        .y_label_formatter(&|v| tick(*v))
        .draw()
        .map_err(&e)?;
    let style = INK.stroke_width(sc.thin);
    for v in &xt.minor {
        let (px, py) = chart.backend_coord(&(*v, y.start));
        root.draw(&PathElement::new(vec![(px, py), (px, py + len / 2)], style))
            .map_err(&e)?;
    }
    for v in &yt.minor {
        let (px, py) = chart.backend_coord(&(x.start, *v));
        root.draw(&PathElement::new(vec![(px - len / 2, py), (px, py)], style))
            .map_err(&e)?;
    }
    Ok(chart)
}
