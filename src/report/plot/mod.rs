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

use axes::{log_tick, tick};
pub use fd::fd_plot;
pub use hist::ratio_histogram;
pub use panels::{fd_panels, panels_figure};
pub use teff::teff_plot;

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

/// The effective temperature as figures write it (no literal underscore).
const T_EFF: &str = "Teff";

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
