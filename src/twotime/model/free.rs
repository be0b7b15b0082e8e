//! The broken stick with both slopes free: `y = a + b x` above the break, slope `b − c`
//! below, X = c − b. Its null is one straight line of free slope; the upper slope b is the
//! thermometer's check.

use super::{FdModel, FitBuffers, GroupPoints, Values, search_moved};
use crate::fit::{Base, BreakSolution, broken, fit_line};
use crate::twotime::settings::Model;

/// Both slopes fitted.
pub struct FreeSlopes;

impl FdModel for FreeSlopes {
    fn kind(&self) -> Model {
        Model::Free
    }
    fn describe(&self) -> &'static str {
        "broken stick, both slopes free"
    }
    fn methods_phrase(&self) -> &'static str {
        "a two-segment line with free slopes above and below a break q (X = minus the lower slope)"
    }
    fn c_factor(&self) -> f64 {
        0.0
    }

    fn fit(
        &self,
        pts: GroupPoints<'_>,
        min_branch: usize,
        buf: &mut FitBuffers,
        profile: Option<&mut Vec<(f64, f64)>>,
    ) -> Option<Values> {
        let sol = broken::search(
            pts.x,
            pts.r,
            pts.w,
            Base::Line,
            min_branch,
            &mut buf.ws,
            profile,
        )?;
        Some(values(sol))
    }

    fn fit_moved(
        &self,
        pts: GroupPoints<'_>,
        moved: &[&[f64]],
        m: usize,
        buf: &mut FitBuffers,
        out: &mut [Option<BreakSolution>],
    ) -> Option<Values> {
        search_moved(pts, moved, Base::Line, m, buf, out).map(values)
    }

    fn solve(&self, pts: GroupPoints<'_>, m: usize, buf: &mut FitBuffers) -> Option<BreakSolution> {
        broken::search(pts.x, pts.r, pts.w, Base::Line, m, &mut buf.ws, None)
    }

    fn null_shift(&self, pts: GroupPoints<'_>) -> Vec<f64> {
        match fit_line(pts.x, pts.y, Some(pts.w)) {
            Some(l) => pts
                .x
                .iter()
                .zip(pts.y)
                .map(|(x, y)| y - l.intercept - l.slope * x)
                .collect(),
            None => vec![0.0; pts.x.len()],
        }
    }
}

/// The fit's values from its broken stick: X = c − b, the upper slope b.
fn values(sol: BreakSolution) -> Values {
    Values {
        ratio: sol.c - sol.b,
        q: sol.q,
        fast: sol.b,
        sol,
    }
}
