//! What a spectral analysis found, as typed values with stable codes (docs/findings.md);
//! the report layer (`report::spectrum`) says each in words.

use super::analysis::{Direction, SeparateBand};
use serde::Serialize;

/// A caution about the spectra.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "snake_case")]
pub enum SpectralFinding {
    /// Chi-square intervals assume Gaussian noise and an exact dissipation.
    ChiSquareAssumesGaussian,
    /// Normal intervals assume Gaussian noise, many segments and an exact dissipation.
    NormalAssumesGaussian,
    /// `T_eff ≤ 0` at some frequencies (a cross-spectrum's real part or a subtracted PSD
    /// at or below zero there), reported as computed.
    NonPositiveTeff {
        /// How many frequencies.
        frequencies: usize,
        /// Of how many.
        total: usize,
        /// The estimator.
        estimator: super::analysis::Estimator,
    },
    /// The subtracted amplifier noise is more than `limit` of the measured PSD in some
    /// bands: T_eff there is the small difference of two large numbers.
    LargeSubtraction {
        /// The bands (Hz) where it is, with the largest fraction in each.
        bands: Vec<SubtractedBand>,
        /// The fraction above which it fires (0.5).
        limit: f64,
    },
    /// Frequencies outside the amplifier-noise table's range were left out.
    OutsideAmplifierTable {
        /// How many.
        frequencies: usize,
        /// The table's frequency range (Hz).
        range: [f64; 2],
    },
    /// A few runs and no degrees of freedom: run resampling is unreliable.
    FewRunsNoDof {
        /// Runs.
        runs: usize,
    },
    /// 10–39 runs: resampled intervals run short (measured).
    ShortRuns {
        /// Runs.
        runs: usize,
        /// The size below which this fires.
        limit: usize,
    },
    /// Run resampling asked for with fewer than 10 runs.
    FewRuns {
        /// Runs.
        runs: usize,
        /// The size below which this fires.
        limit: usize,
    },
    /// Differing bands outside the low-frequency run: separate findings, not departures.
    SeparateBands {
        /// The corrected level of each band's test.
        level: f64,
        /// The bands.
        bands: Vec<SeparateBand>,
        /// Whether a low-frequency departure was found (else: counted from the lowest band).
        after_departure: bool,
    },
    /// Frequencies outside the dissipation table's range were left out.
    OutsideTable {
        /// How many.
        frequencies: usize,
        /// The table's frequency range (Hz).
        range: [f64; 2],
    },
    /// The PSD is steep enough at its lowest bins that Hann-window leakage biases them by
    /// more than `limit` (predicted from a local power law; `spectral::leakage`).
    WindowLeakage {
        /// The local power law's exponent `a` (`PSD ∝ f^−a`) over the lowest bins.
        slope: f64,
        /// Its standard error.
        slope_se: f64,
        /// The predicted relative bias of the lowest bin used.
        bias: f64,
        /// The highest frequency (Hz) whose predicted bias exceeds `limit`.
        below: f64,
        /// The relative bias above which it fires (0.05).
        limit: f64,
    },
    /// Aging records (`noise --ages`): the window at this age is wider than `limit` of the
    /// age, so the system ages inside it.
    AgeWindowWide {
        /// The window's width over the age.
        span: f64,
        /// The fraction above which it fires.
        limit: f64,
    },
    /// Aging records: below `below` Hz fewer than `periods` periods fit in the window
    /// (1/f ≪ Δt does not hold there).
    AgeWindowFewPeriods {
        /// The frequency (Hz).
        below: f64,
        /// The number of periods asked for.
        periods: f64,
    },
    /// At every frequency T_eff's interval lies beyond a factor 10 from the bath: more
    /// likely units, a gain or the convention than physics.
    ImplausibleScale {
        /// The median of T_eff / T over the frequencies.
        ratio: f64,
        /// The factor beyond which it fires.
        factor: f64,
    },
}

/// A band where a large part of the measured PSD was subtracted as amplifier noise.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SubtractedBand {
    /// Lower edge (Hz).
    pub fmin: f64,
    /// Upper edge (Hz).
    pub fmax: f64,
    /// The largest subtracted fraction (amplifier PSD / measured PSD) of its log bands.
    pub fraction: f64,
}

/// A spectral caution with its subject: the spectrum at a waiting time, or all of them.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpectralCaution {
    /// The waiting time of the spectrum it is about (`None`: the whole input).
    pub tw: Option<f64>,
    /// What was found.
    #[serde(flatten)]
    pub finding: SpectralFinding,
}

/// How the band average compares with the bath.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum BathRelation {
    /// T lies inside the interval.
    Equal,
    /// The interval lies above T.
    Above,
    /// The interval lies below T.
    Below,
}

/// What one spectrum shows.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "code", rename_all = "snake_case")]
pub enum SpectralVerdict {
    /// No interval of the band average could be formed.
    NoInterval,
    /// The band average, and against the bath when T is given.
    BandAverage {
        /// The band's edges (Hz).
        band: [f64; 2],
        /// T_eff with its interval.
        t_eff: [f64; 3],
        /// Kelvin (SI) or reduced units.
        kelvin: bool,
        /// The bath temperature, when given.
        bath: Option<f64>,
        /// The band average against the bath.
        relation: Option<BathRelation>,
        /// The low-frequency departure: direction and the bands it spans (Hz).
        departure: Option<(Direction, [f64; 2])>,
    },
}
