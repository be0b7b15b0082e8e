//! fdtemp: fluctuation–dissipation ratios and effective temperatures of aging systems,
//! with confidence intervals that resample independent samples.
//!
//! Two domains, each in its own folder: [`twotime`] (C(t,tw) and χ(t,tw) over samples)
//! and [`spectral`] (noise spectra and dissipation). Readers at the edge ([`input`]),
//! numerical kernels ([`fit`], [`resample`]), writers and figures ([`report`]), safe
//! output files ([`output`]), resources ([`budget`]) and the invented and simulated
//! scenarios ([`scenarios`]). docs/architecture.md draws the map.
#![deny(clippy::float_cmp)]
#![warn(missing_docs)]
// `!(v > 0.0)` is used on purpose: unlike `v <= 0.0` it also rejects NaN.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod api;
pub mod budget;
pub mod common;
pub mod error;
pub mod fit;
pub mod input;
pub mod output;
pub mod reduce;
pub mod report;
pub mod resample;
pub mod scenarios;
pub mod spectral;
pub mod twotime;

pub use error::{Error, Result};
pub use twotime::{Campaign, FitReport, FitSettings, GridPoint, analyze};

/// Runs `f` on a pool of `threads` worker threads (all cores when `None`).
///
/// # Errors
/// [`Error::Setting`] when `threads` is 0 or the pool cannot be built.
pub fn with_threads<T>(threads: Option<usize>, f: impl FnOnce() -> Result<T> + Send) -> Result<T>
where
    T: Send,
{
    if threads == Some(0) {
        return Err(Error::Setting("--threads is 0, expected at least 1".into()));
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads.unwrap_or(0))
        .build()
        .map_err(|e| Error::Setting(format!("cannot start worker threads: {e}")))?;
    pool.install(f)
}

/// The user guide's examples, compiled and run as doctests.
#[cfg(doctest)]
#[doc = include_str!("../docs/example.md")]
pub struct DocExamples;
