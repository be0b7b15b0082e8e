//! The broken stick with its first slope fixed: slope −1 above the break q (the
//! quasi-equilibrium regime), slope −X below. Fitted as `z = y + x = c0 − (1 − X)·max(q − x, 0)`;
//! its null is the line of slope −1. The slope above the break is checked by a free line
//! through the points above it.

use super::{Draw, FdModel, FitBuffers, GroupPoints, Values, minus_one_shift};
use crate::fit::{Base, BreakSolution, broken, fit_line};
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
        buf.x.clear();
        buf.y.clear();
        buf.w.clear();
        for k in 0..pts.x.len() {
            if pts.x[k] >= sol.q {
                buf.x.push(pts.x[k]);
                buf.y.push(pts.y[k]);
                buf.w.push(pts.w[k]);
            }
        }
        let fast = fit_line(&buf.x, &buf.y, Some(&buf.w)).map_or(f64::NAN, |l| l.slope);
        Some(Values {
            ratio: 1.0 + sol.c,
            q: sol.q,
            fast,
            sol,
        })
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
