//! The smooth model's scalar part: the broken stick of [`FixedSlope`] (slope −1 above the
//! break, −X below), whose fit the smooth X(C) is compared with. The smooth curve itself
//! is fitted beside it in every resample (`twotime::shape`).

use super::broken::FixedSlope;
use super::{Draw, FdModel, FitBuffers, GroupPoints, Values};
use crate::fit::BreakSolution;
use crate::twotime::result::Curve;
use crate::twotime::settings::Model;

/// The broken stick, reported beside the smooth X(C).
pub struct BrokenBesideSmooth;

impl FdModel for BrokenBesideSmooth {
    fn kind(&self) -> Model {
        Model::Smooth
    }
    fn describe(&self) -> &'static str {
        "smooth X(C) (monotone ramps), beside the broken stick with first slope -1"
    }
    fn methods_phrase(&self) -> &'static str {
        "a two-segment line with slope -1 above a break q and slope -X below it, and beside \
         it a smooth X(C)"
    }
    fn c_factor(&self) -> f64 {
        FixedSlope.c_factor()
    }
    fn table_note(&self) -> Option<&'static str> {
        Some(
            "(the one-break fit the smooth X(C) is compared with; slope above q: a free line \
             through the points above the break)",
        )
    }
    fn fit(
        &self,
        pts: GroupPoints<'_>,
        min_branch: usize,
        buf: &mut FitBuffers,
        profile: Option<&mut Vec<(f64, f64)>>,
    ) -> Option<Values> {
        FixedSlope.fit(pts, min_branch, buf, profile)
    }
    fn solve(&self, pts: GroupPoints<'_>, m: usize, buf: &mut FitBuffers) -> Option<BreakSolution> {
        FixedSlope.solve(pts, m, buf)
    }
    fn fit_moved(
        &self,
        pts: GroupPoints<'_>,
        moved: &[&[f64]],
        m: usize,
        buf: &mut FitBuffers,
        out: &mut [Option<BreakSolution>],
    ) -> Option<Values> {
        FixedSlope.fit_moved(pts, moved, m, buf, out)
    }
    fn null_shift(&self, pts: GroupPoints<'_>) -> Vec<f64> {
        FixedSlope.null_shift(pts)
    }
    fn curve(&self, d: &Draw) -> Curve {
        FixedSlope.curve(d)
    }
}
