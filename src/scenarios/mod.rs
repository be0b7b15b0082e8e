//! Scenarios with a known answer: invented data and simulated systems.
//!
//! - [`synth`]: invented campaigns and spectra whose sample means lie on a chosen relation
//!   by construction (the demo, the known-truth tests, the calibration studies).
//! - [`sim`]: simulated systems (Ornstein–Uhlenbeck modes, Brownian motion, Ising chain,
//!   Johnson noise) written as the files `fdtemp fit` and `fdtemp noise` read, with a
//!   truth file naming the source of the expected value; what `fdtemp synth` runs.
//! - [`demo`]: the demo scenario fitted end to end and compared with its truth.

pub mod aging_noise;
pub mod demo;
pub mod sim;
pub mod synth;
