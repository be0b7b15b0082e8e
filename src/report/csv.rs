//! The points CSV: the parametric points with their sample standard errors.

use crate::twotime::FitReport;
use std::fmt::Write;

/// The parametric points as CSV: `tw,t,x,x_se,y,y_se`.
pub fn points_csv(report: &FitReport) -> Vec<u8> {
    let mut s = String::from("tw,t,x,x_se,y,y_se\n");
    for p in &report.points {
        let _ = writeln!(
            s,
            "{:?},{:?},{:?},{:?},{:?},{:?}",
            p.tw, p.t, p.x, p.x_se, p.y, p.y_se
        );
    }
    s.into_bytes()
}
