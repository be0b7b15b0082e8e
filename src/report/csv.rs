//! The points CSV (the parametric points with their sample standard errors) and the
//! two-time ratio CSV.

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

/// The two-time ratio X(t,tw) at fixed t (`fit --two-time`) as CSV:
/// `t,tw,c,y,interpolated,tw_low,tw_high,dc_dlntw,dc_low,dc_high,dy_dlntw,dy_low,dy_high,resolved,two_time_x,two_time_x_low,two_time_x_high`;
/// an empty field where a number is not given (the denominator not resolved).
pub fn two_time_csv(report: &FitReport) -> Vec<u8> {
    let mut s = String::from(
        "t,tw,c,y,interpolated,tw_low,tw_high,dc_dlntw,dc_low,dc_high,dy_dlntw,dy_low,dy_high,\
         resolved,two_time_x,two_time_x_low,two_time_x_high\n",
    );
    let f = |v: Option<f64>| v.map_or_else(String::new, |v| format!("{v:?}"));
    let e = |e: &crate::common::Estimate| format!("{},{},{}", f(e.estimate), f(e.low), f(e.high));
    for p in report.two_time.iter().flatten() {
        let _ = writeln!(
            s,
            "{:?},{:?},{:?},{:?},{},{:?},{:?},{},{},{},{}",
            p.t,
            p.tw,
            p.c,
            p.y,
            p.interpolated,
            p.window[0],
            p.window[1],
            e(&p.dc_dlntw),
            e(&p.dy_dlntw),
            p.resolved,
            e(&p.x),
        );
    }
    s.into_bytes()
}
