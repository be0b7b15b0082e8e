//! Raw runs → a campaign of C(t,tw) and χ(t,tw) per independent sample, with the
//! linear-response check.
//!
//! Two protocols (docs/reduce.md):
//!
//! - [`twin`]: twin runs of a simulation. Per sample an unperturbed run and perturbed
//!   twins sharing its noise, with a field h switched on at tw. χ = (m_h − m_0)/h; with
//!   ±h, (m_{+h} − m_{−h})/(2h), which cancels the even orders; with several amplitudes a
//!   Richardson extrapolation to h → 0, and a test that χ does not depend on h, per point
//!   and overall, calibrated by resampling samples.
//! - [`quench`]: repeated quenches of one system (experiments). C from the unperturbed
//!   runs (connected by default), χ from the perturbed minus the unperturbed means over h,
//!   pointwise intervals by resampling runs within each stratum (unperturbed, perturbed).
//!
//! ## Reference
//! Richardson extrapolation: Press et al., *Numerical Recipes*, 3rd ed. (2007), §5.7
//! (derivative by extrapolation of a difference quotient) and §3.2 (Neville); the
//! studentized bootstrap max-statistic over many points: Westfall & Young, *Resampling-
//! Based Multiple Testing* (1993), ch. 2; Davison & Hinkley (1997), §4.4.

pub mod quench;
pub mod twin;

pub use twin::{FieldTest, TwinReduction, TwinRuns, TwinSettings, read_twins, reduce_twins};
