//! T_eff(f): the effective temperature against frequency, with bands, the bath and the
//! departure.

use super::*;

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
    render(fig, TEFF, |a| draw_teff(a, r, fig))
}

/// The ranges of T_eff(f): frequencies of the positive points, temperatures of their
/// intervals and the bath, padded; T_eff is on a log axis when it spans a factor above 8.
pub(super) struct TeffRanges {
    f0: f64,
    f1: f64,
    t0: f64,
    t1: f64,
    log_y: bool,
}

pub(super) fn teff_ranges(r: &SpectrumReport) -> TeffRanges {
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

pub(super) fn draw_teff<DB: DrawingBackend>(
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
pub(super) fn teff_body<'a, DB, Y>(
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
            estimator: r.settings.estimator,
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
                crate::report::sig(t, 4),
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
pub(super) fn bath_tick<'a, DB, Y>(
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
    area.draw(&Text::new(
        crate::report::sig(t, 3),
        (px - 2 * len, py),
        style,
    ))
    .map_err(&e)?;
    Ok(())
}

/// Which of a spectrum's elements get a legend entry, so each kind is named once.
#[derive(Clone, Copy)]
pub(super) struct Named {
    band: bool,
    departure: bool,
    /// More than one spectrum: the departure's entry names no frequency.
    several: bool,
    /// How the PSD was estimated: the T_eff entry names it unless it is one channel's.
    estimator: crate::spectral::Estimator,
}

/// One spectrum in colour `c`: its interval band, its T_eff(f) and its departure.
pub(super) fn teff_spectrum<'a, DB, Y>(
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
    let mut label = s.tw.map_or_else(
        || format!("{T_EFF}(f)"),
        |t| format!("{T_EFF}(f), {T_W} = {}", crate::report::format::fmt_num(t)),
    );
    if named.estimator != crate::spectral::Estimator::SingleChannel {
        label = format!("{label}, {}", named.estimator.label());
    }
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
                // Short: the legend sits in a corner of the axes at single-column width.
                format!(
                    "departs below {} Hz ({})",
                    crate::report::sig(fd, 3),
                    d.direction.label()
                )
            };
            drawn
                .label(label)
                .legend(stroke(PALETTE[3].stroke_width(sc.line), sc.sample));
        }
    }
    Ok(())
}
