//! The frequency domain: effective temperatures from a noise spectrum and a loss.
//!
//! A one-sided PSD per hertz `G(f)` and the loss `χ''(f)` satisfy, in equilibrium,
//! `G = 2 k T χ'' / (π f)`; out of equilibrium the same relation defines `T_eff(f)`.
//! Every convention below is the same statement in other units; fdtemp never guesses
//! which one the data follow: the convention is a setting and is printed with the result.

pub mod aging;
pub mod analysis;
pub mod cross;
pub mod findings;
pub mod input;
pub mod intermittency;
pub mod leakage;
pub mod noise;
pub mod subtract;
pub mod welch;

pub use analysis::{
    Estimator, SpectrumReport, SpectrumSettings, analyze_estimates, analyze_spectra,
};

/// How the noise and the dissipation are normalized.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Convention {
    /// One-sided PSD per hertz `G(f)` with the loss `χ''(f)`: `G = 2kTχ''/(πf)`.
    Loss,
    /// Two-sided PSD per unit angular frequency `S(ω)` with `χ''(ω)`: `S = 2kTχ''/ω`,
    /// `ω = 2πf` (the `f` column stays in hertz).
    Angular,
    /// One-sided voltage noise `G_V` (V²/Hz) with the real part of the impedance:
    /// `G_V = 4kT Re Z`.
    Voltage,
    /// One-sided current noise `G_I` (A²/Hz) with the real part of the admittance:
    /// `G_I = 4kT Re Y`.
    Current,
}

impl Convention {
    /// `T_eff = factor(f) · G / (k · loss)`.
    pub fn factor(self, f: f64) -> f64 {
        match self {
            Convention::Loss => std::f64::consts::PI * f / 2.0,
            Convention::Angular => std::f64::consts::PI * f,
            Convention::Voltage | Convention::Current => 0.25,
        }
    }

    /// The relation in words, for reports.
    pub fn describe(self) -> &'static str {
        match self {
            Convention::Loss => {
                "one-sided PSD per hertz G(f) with the loss chi''(f): T_eff = pi f G / (2 k chi'')"
            }
            Convention::Angular => {
                "two-sided PSD per unit angular frequency S(w) with chi''(w), w = 2 pi f: T_eff = w S / (2 k chi'')"
            }
            Convention::Voltage => {
                "one-sided voltage noise G_V (V^2/Hz) with Re Z (ohm): T_eff = G_V / (4 k Re Z)"
            }
            Convention::Current => {
                "one-sided current noise G_I (A^2/Hz) with Re Y (S): T_eff = G_I / (4 k Re Y)"
            }
        }
    }

    /// The name of the dissipation column's quantity.
    pub fn loss_name(self) -> &'static str {
        match self {
            Convention::Loss | Convention::Angular => "loss chi''",
            Convention::Voltage => "Re Z",
            Convention::Current => "Re Y",
        }
    }
}
