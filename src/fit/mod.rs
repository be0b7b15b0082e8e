//! Least-squares fits: the weighted straight line, the broken stick with an unknown break,
//! and the smooth shape-constrained curve of X(C).

pub mod broken;
pub mod lanes;
pub mod line;
pub mod smooth;

pub use broken::{Base, BreakSolution, Workspace};
pub use line::{LineFit, fit_line};
