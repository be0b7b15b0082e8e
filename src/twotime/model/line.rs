//! One straight line of free slope −X through all points (no break); its null is the line
//! of slope −1. Used where the whole curve is one regime (e.g. free diffusion, or a range
//! of C chosen with `--range`).

use super::{FdModel, FitBuffers, GroupPoints, Values, equilibrium_level, minus_one_shift};
use crate::fit::{BreakSolution, fit_line};
use crate::twotime::settings::Model;

/// One line, slope free.
pub struct SingleLine;

impl FdModel for SingleLine {
    fn kind(&self) -> Model {
        Model::Line
    }
    fn describe(&self) -> &'static str {
        "one straight line, slope free (no break)"
    }
    fn methods_phrase(&self) -> &'static str {
        "one straight line of free slope -X"
    }
    fn has_break(&self) -> bool {
        false
    }
    fn c_factor(&self) -> f64 {
        0.0
    }

    fn fit(
        &self,
        pts: GroupPoints<'_>,
        _min_branch: usize,
        _buf: &mut FitBuffers,
        _profile: Option<&mut Vec<(f64, f64)>>,
    ) -> Option<Values> {
        let line = fit_line(pts.x, pts.r, Some(pts.w))?;
        let z = equilibrium_level(GroupPoints { y: pts.r, ..pts });
        let (mut sse, mut sse_null) = (0.0, 0.0);
        for k in 0..pts.x.len() {
            let (x, r, w) = (pts.x[k], pts.r[k], pts.w[k]);
            sse += w * (r - line.intercept - line.slope * x).powi(2);
            sse_null += w * (r + x - z).powi(2);
        }
        let sol = BreakSolution {
            q: pts.x.iter().copied().fold(f64::INFINITY, f64::min),
            a: line.intercept,
            b: line.slope,
            c: 0.0,
            sse,
            sse_null,
            n_below: 0,
            interval: 0,
            n_intervals: 1,
        };
        Some(Values {
            ratio: -line.slope,
            q: f64::NAN,
            fast: line.slope,
            sol,
        })
    }

    fn solve(&self, pts: GroupPoints<'_>, m: usize, buf: &mut FitBuffers) -> Option<BreakSolution> {
        self.fit(pts, m, buf, None).map(|v| v.sol)
    }

    fn null_shift(&self, pts: GroupPoints<'_>) -> Vec<f64> {
        minus_one_shift(pts)
    }
}
