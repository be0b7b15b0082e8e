//! The histogram of the resampled X of the joint fit.

use super::*;

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
            crate::report::sig(lo, 4)
        )));
    }
    render(fig, HIST, |a| draw_hist(a, r, &reps, fig))
}

/// Freedman–Diaconis bins of the sorted resamples: the counts, the first edge and the
/// bin width.
pub(super) fn hist_bins(reps: &[f64]) -> (Vec<u32>, f64, f64) {
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

pub(super) fn draw_hist<DB: DrawingBackend>(
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
pub(super) fn hist_marks<'a, DB: DrawingBackend + 'a>(
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
            .label(format!("estimate X = {}", crate::report::sig(est, 3)))
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
                    crate::report::sig(a, 3),
                    crate::report::sig(b, 3)
                ))
                .legend(stroke(PALETTE[1].stroke_width(sc.line), sc.sample));
            }
        }
    }
    Ok(())
}
