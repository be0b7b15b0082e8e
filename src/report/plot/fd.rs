//! The fluctuation–dissipation plot: points per waiting time, the equilibrium line, the
//! fitted curve with its resampling band and the break's interval.

use super::*;

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
    render(fig, FD, |a| draw_fd(a, r, curve, fig))
}

/// The extent of the fluctuation–dissipation plot's data (with standard errors) and its
/// axes' ranges.
pub(super) struct FdRanges {
    xmin_data: f64,
    xmax_data: f64,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
}

/// The margin of the FD plot's ranges, as a fraction of the data's span.
const FD_MARGIN: f64 = 0.04;

pub(super) fn fd_ranges(pts: &[PointRecord], curve: Curve) -> FdRanges {
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
    // The data with their errors and the fitted curve over them, with a 4% margin on
    // each side. (The x range used to run to the curve's intercept, a level on the y
    // axis, so it reached 1.45 when the data stopped at 0.67.)
    let (x0, x1) = axes::padded_range([xmin_data, xmax_data], FD_MARGIN).unwrap_or((0.0, 1.0));
    let fit_ends = [
        curve.eval(xmin_data),
        curve.eval(xmax_data),
        curve.eval(curve.q.clamp(xmin_data, xmax_data)),
    ];
    let (y0, y1) = axes::padded_range(
        [ymin_data, ymax_data].into_iter().chain(fit_ends),
        FD_MARGIN,
    )
    .unwrap_or((0.0, 1.0));
    FdRanges {
        xmin_data,
        xmax_data,
        x0,
        x1,
        y0,
        y1,
    }
}

/// The axis titles: normalized or plain, with `(k = 1)` in reduced units.
pub(super) fn fd_labels(r: &FitReport) -> (&'static str, String) {
    let normalized = r.settings.axes_used == Axes::Normalized;
    let xlabel = if normalized {
        "C(t, t_{w}) / C(t, t)"
    } else {
        "C(t, t_{w})"
    };
    let k = if r.settings.given.units == Units::Si {
        ""
    } else {
        "   (k_{B} = 1)"
    };
    let ylabel = if normalized {
        format!("k_{{B}} T χ(t, t_{{w}}) / C(t, t){k}")
    } else {
        format!("k_{{B}} T χ(t, t_{{w}}){k}")
    };
    (xlabel, ylabel)
}

pub(super) fn draw_fd<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    r: &FitReport,
    curve: Curve,
    fig: Figure,
) -> Result<()> {
    let sc = scale(fig);
    let joint = &r.fits[0];
    let mut rg = fd_ranges(&r.points, curve);
    let (corner, y1) = fd_layout(r, curve, &rg, fig);
    // No corner is free: the legend goes below the axes, in two columns.
    // The rows (the band's entry is settled once the band is drawn).
    let entries = legend_entries(r, (joint.curve_replicates.len() >= 20).then_some(true));
    let (area, below) = match corner {
        Some(_) => (root.clone(), None),
        None => {
            let rows = entries.iter().map(|c| c.len()).max().unwrap_or(0);
            let h = (rows as f64 * LEGEND_ROW * sc.legend / PLOTTERS_EM + 8.0 * sc.px) as u32;
            let (top, bottom) = root.split_vertically(fig.height.saturating_sub(h));
            (top, Some(bottom))
        }
    };
    rg.y1 = y1;
    let ranges = (rg.x0..rg.x1, rg.y0..rg.y1);
    let mut chart = linear_chart(&area, fig, ranges, fd_labels(r), 9, FD)?;
    fd_references(&mut chart, joint, curve, &rg, &sc)?;
    let band = fd_band(&mut chart, joint, r.settings.given.level, &rg, &sc)?;
    fd_points(&mut chart, r, &sc)?;
    fd_fit(&mut chart, joint, curve, &rg, &sc)?;
    fd_smooth(&mut chart, joint, &sc)?;
    fd_two_time(&mut chart, r, &rg, &sc)?;
    match (corner, below) {
        (Some(c), _) => legend_at(&mut chart, &sc, c)?,
        (None, Some(b)) => legend_below(&b, &legend_entries(r, band), &sc)?,
        (None, None) => {}
    }
    Ok(())
}

/// A legend row's height in font sizes, when fdtemp draws the legend itself.
const LEGEND_ROW: f64 = 1.45;

/// What a legend row shows before its text.
enum Mark {
    Line(RGBColor, u32),
    Dashed(RGBColor, u32),
    Swatch(RGBAColor),
    /// The marker of waiting time number `i`.
    Series(usize),
    Nothing,
}

/// The FD plot's legend in two columns: the waiting times, then the references and the
/// fit's numbers.
fn legend_entries(r: &FitReport, band: Option<bool>) -> [Vec<(Mark, String)>; 2] {
    let joint = &r.fits[0];
    let mut left = Vec::new();
    let mut right = Vec::new();
    right.push((
        Mark::Dashed(REFERENCE, 1),
        "equilibrium, slope −1".to_string(),
    ));
    if let Some(visible) = band {
        let mark = if visible {
            Mark::Swatch(PALETTE[0].mix(0.3))
        } else {
            Mark::Nothing
        };
        right.push((mark, band_label(r.settings.given.level, visible)));
    }
    for (i, &tw) in r.waiting_times.iter().enumerate() {
        left.push((
            Mark::Series(i),
            format!("{T_W} = {}", crate::report::format::fmt_num(tw)),
        ));
    }
    if let (Some(_), Some(_)) = (joint.brk.low, joint.brk.high) {
        right.push((Mark::Line(PALETTE[4], 2), break_label(joint)));
    }
    right.push((Mark::Line(INK, 1), fit_label(joint)));
    right.push((Mark::Nothing, teff_label(joint)));
    if joint.shape.is_some() {
        right.push((Mark::Dashed(SMOOTH, 2), SMOOTH_LABEL.into()));
    }
    if r.two_time.is_some() {
        right.push((Mark::Line(TWO_TIME, 2), TWO_TIME_LABEL.into()));
    }
    [left, right]
}

/// Draws the two legend columns in `area` (below the axes), each column as wide as its
/// longest text, measured with the font.
fn legend_below<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    columns: &[Vec<(Mark, String)>; 2],
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    let font = ("sans-serif", sc.legend).into_font();
    let fs = sc.legend / PLOTTERS_EM;
    let gap = (4.0 * sc.px) as i32;
    let row = (LEGEND_ROW * fs) as i32;
    let style = TextStyle::from(font).pos(plotters::style::text_anchor::Pos::new(
        plotters::style::text_anchor::HPos::Left,
        plotters::style::text_anchor::VPos::Center,
    ));
    let widths: Vec<i32> = columns
        .iter()
        .map(|c| {
            c.iter()
                .map(|(_, t)| area.estimate_text_size(t, &style).map_or(0, |s| s.0 as i32))
                .max()
                .unwrap_or(0)
                + sc.sample
                + 2 * gap
        })
        .collect();
    let total = widths.iter().sum::<i32>() + gap;
    let (w, _) = area.dim_in_pixel();
    let mut x = ((w as i32 - total) / 2).max(0);
    for (col, width) in columns.iter().zip(&widths) {
        for (k, (mark, text)) in col.iter().enumerate() {
            let y = gap + row / 2 + k as i32 * row;
            draw_mark(area, mark, (x, y), sc).map_err(&e)?;
            area.draw(&Text::new(text.as_str(), (x + sc.sample + gap, y), &style))
                .map_err(&e)?;
        }
        x += width + gap;
    }
    Ok(())
}

/// One legend mark with its left end at `(x, y)`.
fn draw_mark<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    mark: &Mark,
    (x, y): Px,
    sc: &Scale,
) -> std::result::Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let len = sc.sample;
    match *mark {
        Mark::Line(c, w) => area.draw(&stroke(c.stroke_width(sc.line * w), len)((x, y))),
        Mark::Dashed(c, w) => {
            let third = len / 3;
            let style = c.stroke_width(sc.line * w);
            area.draw(&PathElement::new(vec![(x, y), (x + third, y)], style))?;
            area.draw(&PathElement::new(
                vec![(x + 2 * third, y), (x + len, y)],
                style,
            ))
        }
        Mark::Swatch(c) => area.draw(&swatch(c.filled(), len)((x, y))),
        Mark::Series(i) => {
            let c = PALETTE[i % PALETTE.len()];
            let (ms, at) = (sc.marker, (x + len / 2, y));
            match i % 4 {
                0 => area.draw(&Circle::new(at, ms, c.filled())),
                1 => area.draw(&TriangleMarker::new(at, ms + 2, c.filled())),
                2 => area.draw(&Cross::new(at, ms, c.stroke_width(sc.line))),
                _ => area.draw(&Circle::new(at, ms, c.stroke_width(sc.line))),
            }
        }
        Mark::Nothing => Ok(()),
    }
}

/// The break's interval and the equilibrium line.
pub(super) fn fd_references<'a, DB: DrawingBackend + 'a>(
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
    // plotters moves a point outside the axes onto their edge, which turns the line
    // (a shallower slope when its end lies above the y range): it is cut to the axes
    // here, so it keeps slope −1.
    let eq = curve.intercept;
    let (a, b) = (x0.max(eq - y1), x1.min(eq - y0));
    chart
        .draw_series(DashedLineSeries::new(
            if a < b {
                vec![(a, eq - a), (b, eq - b)]
            } else {
                vec![]
            },
            sc.dash.0,
            sc.dash.1,
            REFERENCE.stroke_width(sc.line),
        ))
        .map_err(&e)?
        .label("equilibrium, slope −1")
        .legend(stroke(REFERENCE.stroke_width(sc.line), sc.sample));
    Ok(())
}

pub(super) fn break_label(joint: &GroupFit) -> String {
    format!(
        "break q = {}",
        fmt_iv(joint.brk.estimate, joint.brk.low, joint.brk.high)
    )
}

pub(super) fn fit_label(joint: &GroupFit) -> String {
    format!(
        "fit: X = {}",
        fmt_iv(joint.ratio.estimate, joint.ratio.low, joint.ratio.high)
    )
}

pub(super) fn teff_label(joint: &GroupFit) -> String {
    let t_eff = fmt_iv(joint.t_eff.estimate, joint.t_eff.low, joint.t_eff.high);
    format!("{T_EFF} = {t_eff}")
}

/// Where the FD plot's legend goes and how high the y axis runs: lower left (the empty
/// side below a fluctuation–dissipation curve) when no point or fitted curve falls under
/// it, else upper right, with the y axis raised (by 8% steps, up to 1.6 times) until the
/// data clear it; `None` (the legend goes below the axes) when neither corner clears. The legend's box is estimated from its rows and longest label, and the
/// plot area from the chart's margins (`linear_chart`).
pub(super) fn fd_layout(
    r: &FitReport,
    curve: Curve,
    rg: &FdRanges,
    fig: Figure,
) -> (Option<SeriesLabelPosition>, f64) {
    let sc = scale(fig);
    let joint = &r.fits[0];
    let fs = sc.legend / PLOTTERS_EM;
    let labels = [break_label(joint), fit_label(joint), teff_label(joint)];
    let two_time = r.two_time.is_some();
    let chars = labels
        .iter()
        .map(|l| l.chars().count())
        .chain(two_time.then(|| TWO_TIME_LABEL.chars().count()))
        .max()
        .unwrap_or(0)
        .max(22);
    let rows = r.waiting_times.len() + 5 + usize::from(two_time);
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
        return (Some(SeriesLabelPosition::LowerLeft), rg.y1);
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
    if marks(y1)
        .iter()
        .all(|&(x, y)| !(x > 1.0 - fx && y > 1.0 - fy))
    {
        (Some(SeriesLabelPosition::UpperRight), y1)
    } else {
        (None, rg.y1)
    }
}

/// Bootstrap band of the fitted curve; whether it is wider than the line (`None`
/// without enough resamples to draw one).
pub(super) fn fd_band<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    joint: &GroupFit,
    level: f64,
    rg: &FdRanges,
    sc: &Scale,
) -> Result<Option<bool>> {
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
        // The band's widest point in pixels: within twice the fit's line, it is hidden
        // under it, and the legend says so instead of showing a swatch.
        let px_per_y = f64::from(chart.plotting_area().dim_in_pixel().1) / (rg.y1 - rg.y0);
        let widest = upper
            .iter()
            .zip(&lower)
            .map(|(u, l)| u.1 - l.1)
            .fold(0.0f64, f64::max);
        // Centred on the line, it shows once it passes it by half a line width on each side.
        let visible = widest * px_per_y > 2.0 * f64::from(sc.line);
        upper.extend(lower.into_iter().rev());
        let drawn = chart
            .draw_series(std::iter::once(Polygon::new(
                upper,
                PALETTE[0].mix(0.22).filled(),
            )))
            .map_err(&e)?;
        if visible {
            drawn
                .label(band_label(level, true))
                .legend(swatch(PALETTE[0].mix(0.3).filled(), sc.sample));
        } else {
            drawn
                .label(band_label(level, false))
                .legend(|(x, y)| EmptyElement::at((x, y)));
        }
        return Ok(Some(visible));
    }
    Ok(None)
}

/// The band's legend entry: named with a swatch when it shows, else said to be hidden.
fn band_label(level: f64, visible: bool) -> String {
    if visible {
        format!("{:.0}% resampling band", 100.0 * level)
    } else {
        // Short enough for the legend's column at single-column width.
        format!("{:.0}% band: within the line", 100.0 * level)
    }
}

/// Points per waiting time, with standard errors.
pub(super) fn fd_points<'a, DB: DrawingBackend + 'a>(
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
        let label = format!("{T_W} = {}", crate::report::format::fmt_num(tw));
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
pub(super) fn fd_fit<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    joint: &GroupFit,
    curve: Curve,
    rg: &FdRanges,
    sc: &Scale,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    // The fitted broken stick.
    // Its ends and the break (a line model has none: q is undefined).
    let fit_pts: Vec<(f64, f64)> = [
        rg.xmin_data,
        curve.q.clamp(rg.xmin_data, rg.xmax_data),
        rg.xmax_data,
    ]
    .iter()
    .filter(|x| x.is_finite())
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

/// The smooth curve's colour and legend entry.
const SMOOTH: RGBColor = PALETTE[3];
const SMOOTH_LABEL: &str = "smooth X(C) fit";

/// The smooth X(C) fit's curve (`--model smooth`), dashed over the broken stick.
pub(super) fn fd_smooth<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    joint: &GroupFit,
    sc: &Scale,
) -> Result<()> {
    let Some(shape) = &joint.shape else {
        return Ok(());
    };
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    let style = SMOOTH.stroke_width(2 * sc.line);
    chart
        .draw_series(DashedLineSeries::new(
            shape.x_of_c.iter().map(|p| (p.c, p.y)),
            (4.0 * sc.px) as u32,
            (3.0 * sc.px) as u32,
            style,
        ))
        .map_err(&e)?
        .label(SMOOTH_LABEL)
        .legend(stroke(style, sc.sample));
    Ok(())
}

/// The two-time ratio's colour and legend entry.
const TWO_TIME: RGBColor = RGBColor(0xc0, 0x39, 0x2b);
const TWO_TIME_LABEL: &str = "two-time ratio, slope −X(t,tw)";

/// With `--two-time`: at every measured point where the two-time ratio is given, a short
/// segment of slope −X(t,tw), the direction in which the point moves as tw changes at
/// fixed t (not the slope of its fixed-tw curve). Normalized axes divide both coordinates
/// by C(t,t), the same at fixed t, so the slope is unchanged.
pub(super) fn fd_two_time<'a, DB: DrawingBackend + 'a>(
    chart: &mut Chart<'a, DB>,
    r: &FitReport,
    rg: &FdRanges,
    sc: &Scale,
) -> Result<()> {
    let Some(points) = &r.two_time else {
        return Ok(());
    };
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(FD);
    let style = TWO_TIME.stroke_width(2 * sc.line);
    // Half a segment spans 2.5% of each axis, whatever the slope.
    let (hx, hy) = (0.025 * (rg.x1 - rg.x0), 0.025 * (rg.y1 - rg.y0));
    let segments: Vec<[(f64, f64); 2]> = points
        .iter()
        .filter(|p| p.resolved && !p.interpolated)
        .filter_map(|p| {
            let x = p.x.estimate?;
            let at = r
                .points
                .iter()
                .find(|q| q.t.total_cmp(&p.t).is_eq() && q.tw.total_cmp(&p.tw).is_eq())?;
            let (dx, dy) = (hx, -x * hx);
            let k = (hy / dy.abs().max(1e-300)).min(1.0);
            let (dx, dy) = (k * dx, k * dy);
            Some([(at.x - dx, at.y - dy), (at.x + dx, at.y + dy)])
        })
        .collect();
    chart
        .draw_series(
            segments
                .into_iter()
                .map(|s| PathElement::new(s.to_vec(), style)),
        )
        .map_err(&e)?
        .label(TWO_TIME_LABEL)
        .legend(stroke(style, sc.sample));
    Ok(())
}
