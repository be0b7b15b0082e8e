//! Least-squares fits: the weighted straight line and the broken stick with an unknown break.

pub mod broken;
pub mod line;

pub use broken::{Base, BreakSolution, Workspace};
pub use line::{LineFit, fit_line};
