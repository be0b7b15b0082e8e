//! The broken stick with its first slope fixed: slope −1 above the break q (the
//! quasi-equilibrium regime), slope −X below. Fitted as `z = y + x = c0 − (1 − X)·max(q − x, 0)`;
//! its null is the line of slope −1. The slope above the break is checked by a free line
//! through the points above it.

use super::{Draw, FdModel, FitBuffers, GroupPoints, Values, minus_one_shift, search_moved};
use crate::fit::line::slope_above;
use crate::fit::{Base, BreakSolution, broken};
use crate::twotime::result::Curve;
use crate::twotime::settings::Model;

/// Slope −1 above the break, −X below.
pub struct FixedSlope;

impl FdModel for FixedSlope {
    fn kind(&self) -> Model {
        Model::Broken
    }
    fn describe(&self) -> &'static str {
        "broken stick, first slope fixed at -1"
    }
    fn methods_phrase(&self) -> &'static str {
        "a two-segment line with slope -1 above a break q and slope -X below it"
    }
    fn c_factor(&self) -> f64 {
        1.0
    }
    fn table_note(&self) -> Option<&'static str> {
        Some(
            "(slope above q: a free line through the points above the break, a check of the \
             fixed -1)",
        )
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
            Base::Constant,
            min_branch,
            &mut buf.ws,
            profile,
        )?;
        Some(values(pts, sol))
    }

    fn fit_moved(
        &self,
        pts: GroupPoints<'_>,
        moved: &[&[f64]],
        m: usize,
        buf: &mut FitBuffers,
        out: &mut [Option<BreakSolution>],
    ) -> Option<Values> {
        let sol = search_moved(pts, moved, Base::Constant, m, buf, out)?;
        Some(values(pts, sol))
    }

    fn solve(&self, pts: GroupPoints<'_>, m: usize, buf: &mut FitBuffers) -> Option<BreakSolution> {
        broken::search(pts.x, pts.r, pts.w, Base::Constant, m, &mut buf.ws, None)
    }

    fn null_shift(&self, pts: GroupPoints<'_>) -> Vec<f64> {
        minus_one_shift(pts)
    }

    fn curve(&self, d: &Draw) -> Curve {
        Curve {
            q: d.q,
            intercept: d.intercept,
            slope_above: -1.0,
            slope_below: -d.ratio,
        }
    }
}

/// The fit's values from its broken stick: X, q, and the slope of a free line through
/// the points above the break.
fn values(pts: GroupPoints<'_>, sol: BreakSolution) -> Values {
    let fast = slope_above(pts.x, pts.y, pts.w, sol.q).unwrap_or(f64::NAN);
    Values {
        ratio: 1.0 + sol.c,
        q: sol.q,
        fast,
        sol,
    }
}
