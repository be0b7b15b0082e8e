//! The smooth X(C) of the joint fit (`--model smooth`): the curve with its pointwise band,
//! X = 1 (equilibrium) and the one-break X below its break for comparison.

use super::*;

/// What the X(C) figure is called in a drawing error.
const XOFC: &str = "X(C) figure";

/// The X(C) figure of the joint fit.
///
/// # Errors
/// [`Error::Analysis`] when the smooth model was not fitted or drawing fails.
pub fn x_of_c_plot(r: &FitReport, fig: Figure) -> Result<Vec<u8>> {
    let joint = &r.fits[0];
    if joint.shape.is_none() {
        return Err(Error::Analysis(
            "cannot draw X(C): the smooth model was not fitted (use --model smooth)".into(),
        ));
    }
    render(fig, XOFC, |a| draw_x_of_c(a, joint, r, fig))
}

fn draw_x_of_c<DB: DrawingBackend>(
    root: DrawingArea<DB, Shift>,
    joint: &GroupFit,
    r: &FitReport,
    fig: Figure,
) -> Result<()> {
    let e = err::<DrawingAreaErrorKind<DB::ErrorType>>(XOFC);
    let sc = scale(fig);
    let Some(shape) = joint.shape.as_ref() else {
        return Ok(());
    };
    let pts = &shape.x_of_c;
    let (c0, c1) = (pts[0].c, pts[pts.len() - 1].c);
    // The band may run far below 0 at the noisiest C; the axis shows it from a little
    // below the lowest finite estimate or band end above −1 down to that, never more.
    let ys = pts
        .iter()
        .flat_map(|p| [p.x.estimate, p.x.low, p.x.high])
        .flatten()
        .filter(|v| v.is_finite() && *v > -1.0)
        .chain([0.0, 1.0]);
    let (y0, y1) = axes::padded_range(ys, 0.05).unwrap_or((0.0, 1.05));
    let (x0, x1) = axes::padded_range([c0, c1], 0.04).unwrap_or((0.0, 1.0));
    let xlabel = if r.settings.axes_used == Axes::Normalized {
        "C(t, t_{w}) / C(t, t)"
    } else {
        "C(t, t_{w})"
    };
    let mut chart = linear_chart(
        &root,
        fig,
        (x0..x1, y0..y1.max(1.08)),
        (xlabel, "X(C) = −d(k_{B} T χ)/dC".into()),
        6,
        XOFC,
    )?;
    let clamp = |v: f64| v.clamp(y0, y1.max(1.08));
    let mut band: Vec<(f64, f64)> = pts
        .iter()
        .filter_map(|p| Some((p.c, clamp(p.x.high?))))
        .collect();
    let lower: Vec<(f64, f64)> = pts
        .iter()
        .rev()
        .filter_map(|p| Some((p.c, clamp(p.x.low?))))
        .collect();
    let level = 100.0 * r.settings.given.level;
    if band.len() >= 2 {
        band.extend(lower);
        chart
            .draw_series(std::iter::once(Polygon::new(
                band,
                PALETTE[0].mix(0.22).filled(),
            )))
            .map_err(&e)?
            .label(format!("{level:.0}% pointwise band"))
            .legend(swatch(PALETTE[0].mix(0.3).filled(), sc.sample));
    }
    let dash = REFERENCE.stroke_width(sc.line);
    let third = sc.sample / 3;
    chart
        .draw_series(DashedLineSeries::new(
            [(x0, 1.0), (x1, 1.0)],
            (4.0 * sc.px) as u32,
            (3.0 * sc.px) as u32,
            dash,
        ))
        .map_err(&e)?
        .label("equilibrium, X = 1")
        .legend(move |(x, y)| {
            EmptyElement::at((x, y))
                + PathElement::new(vec![(0, 0), (third, 0)], dash)
                + PathElement::new(vec![(2 * third, 0), (3 * third, 0)], dash)
        });
    if let (Some(x), Some(q)) = (joint.ratio.estimate, joint.brk.estimate) {
        chart
            .draw_series(LineSeries::new(
                [(c0, x), (q, x), (q, 1.0)],
                PALETTE[4].stroke_width(sc.line),
            ))
            .map_err(&e)?
            .label(format!("one break: X = {}", crate::report::sig(x, 3)))
            .legend(stroke(PALETTE[4].stroke_width(sc.line), sc.sample));
    }
    chart
        .draw_series(LineSeries::new(
            pts.iter().filter_map(|p| Some((p.c, clamp(p.x.estimate?)))),
            INK.stroke_width(sc.line),
        ))
        .map_err(&e)?
        .label("smooth X(C)")
        .legend(stroke(INK.stroke_width(sc.line), sc.sample));
    legend_at(&mut chart, &sc, SeriesLabelPosition::LowerRight)
}
