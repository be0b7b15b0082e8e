//! The multi-panel figure of a fit: the fluctuation–dissipation plot and X against the
//! waiting time side by side, at double-column size, for a paper to use as one figure.

use super::*;
use crate::twotime::FitReport;

/// What the panels figure is called in a drawing error.
const PANELS: &str = "panels figure";

/// The figure for `fit --plot-panels`: only at double-column size, where each panel is
/// one column wide.
///
/// # Errors
/// [`Error::Setting`] for another size or a file name that is not .svg, .png or .pdf.
pub fn panels_figure(path: &Path, size: PlotSize) -> Result<Figure> {
    if size != PlotSize::Double {
        return Err(Error::Setting(
            "--plot-panels draws two panels side by side at double-column size: give --plot-size double"
                .into(),
        ));
    }
    Figure::for_path(path, size)
}

/// The FD plot (left) and X of each waiting time with the joint fit's X (right).
///
/// # Errors
/// [`Error::Analysis`] when the joint fit has no curve, no waiting time has an X, or the
/// drawing fails.
pub fn fd_panels(r: &FitReport, fig: Figure) -> Result<Vec<u8>> {
    let curve = r.fits[0].curve.ok_or_else(|| {
        Error::Analysis(format!(
            "cannot draw the {PANELS}: the joint fit has no curve"
        ))
    })?;
    if aging_points(r).is_empty() {
        return Err(Error::Analysis(format!(
            "cannot draw the {PANELS}: no waiting time has an X"
        )));
    }
    render(fig, PANELS, |a| draw_panels(a, r, curve, fig))
}

/// (held time, X, low, high) of each group with an X.
fn aging_points(r: &FitReport) -> Vec<(f64, f64, f64, f64)> {
    r.fits[1..]
        .iter()
        .filter_map(|g| {
            let x = g.ratio.estimate?;
            let t = g.tw.or(g.t).filter(|t| *t > 0.0)?;
            Some((t, x, g.ratio.low.unwrap_or(x), g.ratio.high.unwrap_or(x)))
        })
        .collect()
}

fn draw_panels<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    r: &FitReport,
    curve: crate::twotime::Curve,
    fig: Figure,
) -> Result<()> {
    let half = Figure {
        width: fig.width / 2,
        ..fig
    };
    let (left, right) = root.split_horizontally(half.width);
    fd::draw_fd(left, r, curve, half)?;
    draw_aging(right, r, half)
}

/// X of each waiting time with its interval, on a log time axis, and the joint X.
fn draw_aging<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    r: &FitReport,
    fig: Figure,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(PANELS);
    let sc = scale(fig);
    let pts = aging_points(r);
    let joint = &r.fits[0].ratio;
    let limit = limit_point(r);
    let (t0, t1) = pts.iter().fold((f64::INFINITY, 0.0f64), |(a, b), p| {
        (a.min(p.0), b.max(p.0))
    });
    // With the limit, the axis runs one more factor of 4 to the right, where X∞ stands.
    let (t0, t1) = (t0 / 2.0, t1 * if limit.is_some() { 8.0 } else { 2.0 });
    let ys = pts
        .iter()
        .flat_map(|p| [p.2, p.3])
        .chain(
            [joint.low, joint.high, joint.estimate]
                .into_iter()
                .flatten(),
        )
        .chain(limit.iter().flat_map(|l| [l.1, l.2]));
    let (y0, y1) = axes::padded_range(ys, 0.1).unwrap_or((0.0, 1.0));
    // Head room for the two-row legend.
    let y1 = y1 + 0.35 * (y1 - y0);
    let yt = axes::nice_ticks(y0, y1, 8);
    let held = if r.fits[1..].iter().any(|g| g.tw.is_some()) {
        T_W
    } else {
        "t"
    };
    let mut chart = ChartBuilder::on(&root)
        .margin((6.0 * sc.px) as i32)
        .x_label_area_size((sc.label * 2.4) as i32)
        .y_label_area_size((sc.label * 3.0) as i32)
        .build_cartesian_2d((t0..t1).log_scale(), axes::Fixed::new(y0..y1, yt.major))
        .map_err(&e)?;
    chart
        .configure_mesh()
        .disable_mesh()
        .x_desc(held)
        .y_desc("X, fluctuation–dissipation ratio")
        .axis_desc_style(("sans-serif", sc.label))
        .label_style(("sans-serif", sc.tick))
        .set_all_tick_mark_size((TICK_LEN_PT * sc.px).round() as i32)
        .x_labels(30)
        .x_label_formatter(&|v| log_tick(*v, (t0, t1)))
        .y_label_formatter(&|v| tick(*v))
        .draw()
        .map_err(&e)?;
    if let (Some(lo), Some(hi)) = (joint.low, joint.high) {
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(t0, lo), (t1, hi)],
                BAND.mix(0.4).filled(),
            )))
            .map_err(&e)?
            .label(format!(
                "joint fit {:.0}% interval",
                100.0 * r.settings.given.level
            ))
            .legend(swatch(BAND.mix(0.4).filled(), sc.sample));
    }
    if let Some(x) = joint.estimate {
        chart
            .draw_series(LineSeries::new(
                vec![(t0, x), (t1, x)],
                INK.stroke_width(sc.line),
            ))
            .map_err(&e)?
            .label(format!(
                "joint fit: X = {}",
                fmt_iv(joint.estimate, joint.low, joint.high)
            ))
            .legend(stroke(INK.stroke_width(sc.line), sc.sample));
    }
    let c = PALETTE[0];
    chart
        .draw_series(pts.iter().map(|&(t, x, lo, hi)| {
            ErrorBar::new_vertical(t, lo, x, hi, c.stroke_width(sc.thin), sc.marker as u32 * 2)
        }))
        .map_err(&e)?;
    chart
        .draw_series(
            pts.iter()
                .map(|&(t, x, _, _)| Circle::new((t, x), sc.marker, c.filled())),
        )
        .map_err(&e)?
        .label(format!("X of each {held}, with its interval"))
        .legend(move |(x, y)| Circle::new((x + sc.sample / 2, y), sc.marker, c.filled()));
    if let Some((x, lo, hi)) = limit {
        let at = t1 / 2.0;
        let k = PALETTE[1];
        chart
            .draw_series(std::iter::once(ErrorBar::new_vertical(
                at,
                lo,
                x,
                hi,
                k.stroke_width(sc.thin),
                sc.marker as u32 * 2,
            )))
            .map_err(&e)?;
        chart
            .draw_series(std::iter::once(TriangleMarker::new(
                (at, x),
                sc.marker + 2,
                k.filled(),
            )))
            .map_err(&e)?
            .label(format!(
                "X∞ = {} (t_{{w}} → ∞, --limit)",
                fmt_iv(Some(x), Some(lo), Some(hi))
            ))
            .legend(move |(x, y)| {
                TriangleMarker::new((x + sc.sample / 2, y), sc.marker + 2, k.filled())
            });
    }
    legend(&mut chart, &sc)?;
    Ok(())
}

/// X∞ with its interval, when `--limit` formed one with both ends.
fn limit_point(r: &FitReport) -> Option<(f64, f64, f64)> {
    let l = r.age_limit.as_ref()?.as_ref().ok()?;
    Some((l.x_inf.estimate?, l.x_inf.low?, l.x_inf.high?))
}
