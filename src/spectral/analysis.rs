//! `T_eff(f)` with intervals, its band average, and where it departs from the bath.
//!
//! Per frequency, `T_eff(f) = c(f) Ḡ / (k L̄)` with the convention's factor `c(f)` and the
//! means over runs of the PSD `G` and the dissipation `L`. Intervals:
//!
//! - chi-square: `Ĝ ~ G χ²_ν / ν`, so `T_eff ∈ [T̂ ν / χ²_{ν,1−α/2}, T̂ ν / χ²_{ν,α/2}]`;
//!   the dissipation is taken as exact. A band average weights each frequency by its `ν`;
//!   its degrees of freedom are `Σν / (1 + 2 Σ_m (1 − m/M) ρ²_m)`, where `ρ²_m` is the
//!   correlation of PSD values `m` bins apart (zero for independent bins, `4/9` and `1/36`
//!   for a Hann window) — Satterthwaite's approximation.
//! - runs: a bootstrap over independent runs (PSD and dissipation of a run travel
//!   together), computed as `W · D` in frequency chunks so memory stays bounded.
//!
//! Departure from the bath temperature: the spectrum is cut into log-spaced bands; each
//! band's average is compared with `T` at the Bonferroni-corrected level `1 − α/nbands`
//! (so the chance of any false departure is at most `α`). A departure is a contiguous run
//! of differing bands that starts at the lowest tested band, all on the same side of `T`
//! (hot or cold); its bound is the upper edge of the run's last band — a detection bound
//! at this precision, not an estimate of a crossover. A differing band outside that run
//! is a separate finding, never a departure frequency.
//!
//! ## Reference
//! Welch (1967); Percival & Walden, *Spectral Analysis for Physical Applications* (1993),
//! §6.17 (χ² intervals, equivalent degrees of freedom); Satterthwaite, Biometrics Bull. 2,
//! 110 (1946).

use super::Convention;
use super::findings::{BathRelation, SpectralCaution, SpectralFinding, SpectralVerdict};
use super::input::SpectrumGroup;
use crate::common::Units;
use crate::common::{Estimate, ToolInfo};
use crate::error::{Error, Result};
use crate::resample::{self, IntervalMethod};
use ndarray::{Array2, Axis, s};
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal, StudentsT};

/// JSON schema version of [`SpectrumReport`] (3: `settings.estimator`, `settings.gain`,
/// `settings.second_gain`, the `normal` error model, `second_input`, `amplifier_noise`).
pub const SCHEMA: u32 = 3;
/// Below this many runs, resampling runs is not the automatic choice.
pub const FEW_RUNS: usize = 10;
/// Below this many runs, resampled intervals of `T_eff(f)` and of the band run short
/// (measured: docs/validation.md, "Calibration: spectral statements").
pub const SHORT_RUNS: usize = 40;
/// Frequencies per chunk of the resampling product.
pub(crate) const FREQ_CHUNK: usize = 1024;

/// An interval's ends, when it could be formed.
type Ends = Option<(f64, f64)>;

/// Where the intervals come from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, clap::ValueEnum)]
#[serde(rename_all = "kebab-case")]
pub enum ErrorModel {
    /// Resample runs when there are at least 10; otherwise chi-square when the degrees of
    /// freedom are known; otherwise resample the runs there are (with a caution).
    Auto,
    /// The chi-square law of an averaged periodogram (needs degrees of freedom).
    ChiSquare,
    /// Bootstrap over independent runs.
    Runs,
    /// The normal approximation from each value's variance: the cross-spectrum's
    /// (Bendat & Piersol) and a subtracted PSD's (sum of the two variances); for one
    /// channel's PSD `2G²/ν`.
    Normal,
}

/// How the PSD that `T_eff` is computed from was estimated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Estimator {
    /// One channel's PSD (its amplifier's noise included).
    #[default]
    SingleChannel,
    /// The real part of the Welch cross-spectrum of two channels through independent
    /// amplifiers: their uncorrelated noise averages out.
    CrossSpectrum,
    /// One channel's PSD minus a measured amplifier-noise PSD.
    Subtracted,
}

impl Estimator {
    /// In words, for reports and figures.
    pub fn label(self) -> &'static str {
        match self {
            Estimator::SingleChannel => "single channel",
            Estimator::CrossSpectrum => "cross-spectrum",
            Estimator::Subtracted => "amplifier noise subtracted",
        }
    }
}

/// Settings of a spectral analysis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpectrumSettings {
    /// Bath temperature, when known: enables the departure test.
    pub temperature: Option<f64>,
    /// SI (kelvin) or reduced units.
    pub units: Units,
    /// How PSD and dissipation are normalized.
    pub convention: Convention,
    /// Confidence level.
    pub level: f64,
    /// Where intervals come from.
    pub errors: ErrorModel,
    /// Bootstrap resamples (runs model).
    pub resamples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// Interval method for the runs model.
    pub interval: IntervalMethod,
    /// Band `[fmin, fmax]` for the band average (default: every frequency).
    pub band: Option<[f64; 2]>,
    /// Degrees of freedom of every PSD value, when the file has no `dof` column.
    pub dof: Option<f64>,
    /// Log-spaced bands per decade for the departure test.
    pub bands_per_decade: usize,
    /// How the PSD was estimated (one channel, a cross-spectrum, or with a measured
    /// amplifier noise subtracted).
    pub estimator: Estimator,
    /// The voltage gain divided out of the (first) record (`noise --gain`), when given.
    pub gain: Option<f64>,
    /// The second channel's voltage gain (`noise --cross-gain`), when two channels are used.
    pub second_gain: Option<f64>,
    /// The ages and windows of records that start at a quench (`noise --ages`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub ages: Option<super::aging::AgeSettings>,
}

impl Default for SpectrumSettings {
    fn default() -> Self {
        SpectrumSettings {
            temperature: None,
            units: Units::Si,
            convention: Convention::Loss,
            level: 0.95,
            errors: ErrorModel::Auto,
            resamples: 2000,
            seed: 1,
            interval: IntervalMethod::Bca,
            band: None,
            dof: None,
            bands_per_decade: 5,
            estimator: Estimator::SingleChannel,
            gain: None,
            second_gain: None,
            ages: None,
        }
    }
}

impl SpectrumSettings {
    /// Checks the ranges.
    ///
    /// # Errors
    /// [`Error::Setting`] naming the option.
    pub fn validate(&self) -> Result<()> {
        if let Some(t) = self.temperature
            && !(t > 0.0 && t.is_finite())
        {
            return Err(Error::Setting(format!(
                "--temperature is {t}, expected a positive number"
            )));
        }
        crate::common::check_level(self.level)?;
        crate::common::check_resamples(self.resamples)?;
        if let Some([lo, hi]) = self.band
            && !(lo >= 0.0 && hi > lo && hi.is_finite())
        {
            return Err(Error::Setting(format!(
                "--band is {lo}:{hi}, expected FMIN:FMAX with 0 <= FMIN < FMAX (hertz)"
            )));
        }
        if let Some(d) = self.dof
            && !(d > 0.0 && d.is_finite())
        {
            return Err(Error::Setting(format!(
                "--dof is {d}, expected a positive number"
            )));
        }
        if self.bands_per_decade == 0 {
            return Err(Error::Setting(
                "--bands-per-decade is 0, expected at least 1".into(),
            ));
        }
        if self.estimator != Estimator::SingleChannel && self.errors == ErrorModel::ChiSquare {
            return Err(Error::Setting(format!(
                "--errors chi-square is the law of one channel's PSD; the {} estimate is not \
                 chi-square distributed: use --errors normal, runs or auto",
                self.estimator.label()
            )));
        }
        Ok(())
    }
}

/// `T_eff` at one frequency.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpectrumPoint {
    /// Frequency (Hz).
    pub f: f64,
    /// Effective temperature.
    pub t_eff: f64,
    /// Lower end of its interval.
    pub low: Option<f64>,
    /// Upper end of its interval.
    pub high: Option<f64>,
    /// Mean PSD over runs.
    pub psd: f64,
    /// Mean dissipation over runs.
    pub loss: f64,
    /// Degrees of freedom of the mean PSD (chi-square model).
    pub dof: Option<f64>,
}

/// A band average of `T_eff`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Band {
    /// Lower edge (Hz).
    pub fmin: f64,
    /// Upper edge (Hz).
    pub fmax: f64,
    /// Frequencies inside.
    pub n_freqs: usize,
    /// Equivalent degrees of freedom (chi-square model).
    pub dof: Option<f64>,
    /// The average with its interval.
    pub t_eff: Estimate,
}

/// On which side of the bath temperature `T_eff` lies.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Direction {
    /// `T_eff > T`: the corrected interval lies above `T`.
    Hot,
    /// `T_eff < T`: the corrected interval lies below `T`.
    Cold,
}

impl Direction {
    /// "hot" or "cold".
    pub fn label(self) -> &'static str {
        match self {
            Direction::Hot => "hot",
            Direction::Cold => "cold",
        }
    }

    /// "above" or "below".
    pub fn side(self) -> &'static str {
        match self {
            Direction::Hot => "above",
            Direction::Cold => "below",
        }
    }
}

/// One log band of the departure test.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TestBand {
    /// The band and its average, with the interval at the corrected level.
    #[serde(flatten)]
    pub band: Band,
    /// Whether the corrected interval excludes the bath temperature.
    pub departs: bool,
    /// Which side of `T` the corrected interval lies on, when it excludes `T`.
    pub direction: Option<Direction>,
}

/// The low-frequency departure from `T`: a detection bound with its direction.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Departure {
    /// Hot (`T_eff > T`) or cold (`T_eff < T`) in every band of the run.
    pub direction: Direction,
    /// Upper edge (Hz) of the run's last band: below it `T_eff` differs from `T` in every
    /// band; above it no departure is detected at this precision.
    pub below_hz: f64,
    /// Lower edge (Hz) of the run's first band (the lowest tested band).
    pub from_hz: f64,
    /// Bands in the run.
    pub bands: usize,
    /// What the bound means, and why it has no interval.
    pub note: String,
}

/// A differing band that is not part of the low-frequency run (a separate finding).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SeparateBand {
    /// Lower edge (Hz).
    pub fmin: f64,
    /// Upper edge (Hz).
    pub fmax: f64,
    /// Which side of `T`.
    pub direction: Direction,
}

/// What the note of every [`Departure`] says.
pub const DEPARTURE_NOTE: &str = "a detection bound on the band grid: T_eff differs from T \
     in every band below it; above it no departure is detected at this precision (a longer \
     record can move it up). No interval is given: the bound depends on the precision and \
     has no population value to cover.";

/// The analysis of one spectrum (one waiting time).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpectrumFit {
    /// Waiting time, when the input had one.
    pub tw: Option<f64>,
    /// Number of runs.
    pub n_runs: usize,
    /// The error model used.
    pub errors: ErrorModel,
    /// `T_eff(f)` per frequency.
    pub points: Vec<SpectrumPoint>,
    /// The band average.
    pub band: Option<Band>,
    /// The low-frequency departure from `T` (`None`: none detected, or no `T`).
    pub departure: Option<Departure>,
    /// Differing bands outside the low-frequency run (separate findings, not departures).
    pub separate_bands: Vec<SeparateBand>,
    /// The departure test's bands (when `T` is given).
    pub test_bands: Vec<TestBand>,
    /// The level of each band's interval in the departure test (Bonferroni-corrected).
    pub test_level: Option<f64>,
    /// What the spectrum shows (a code and its numbers; the report says it in words).
    pub verdict: SpectralVerdict,
    /// Cautions about this spectrum.
    pub cautions: Vec<SpectralCaution>,
}

/// The full result; the JSON output.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpectrumReport {
    /// Schema version.
    pub schema: u32,
    /// Tool and version.
    pub tool: ToolInfo,
    /// Input file.
    pub input: Option<String>,
    /// Settings.
    pub settings: SpectrumSettings,
    /// Boltzmann's constant used.
    pub k: f64,
    /// The convention in words.
    pub convention_text: &'static str,
    /// One analysis per waiting time (one in all without a `tw` column), by increasing tw.
    pub spectra: Vec<SpectrumFit>,
    /// The last (oldest) spectrum's points, for pipelines that read one spectrum.
    pub points: Vec<SpectrumPoint>,
    /// The last spectrum's band average.
    pub band: Option<Band>,
    /// The last spectrum's departure.
    pub departure: Option<Departure>,
    /// Cautions about the whole input.
    pub cautions: Vec<SpectralCaution>,
    /// The second channel's record (cross-spectrum), when one was used.
    pub second_input: Option<String>,
    /// The measured amplifier-noise PSD that was subtracted, when one was.
    pub amplifier_noise: Option<String>,
    /// The test of the records against Gaussian noise (`noise --intermittency`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub intermittency: Option<super::intermittency::IntermittencyReport>,
    /// The same test on each age's windows (`noise --ages --intermittency`), by age.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub intermittency_by_age: Vec<AgeIntermittency>,
}

/// Analyzes every spectrum group.
///
/// # Errors
/// [`Error::Setting`] for settings out of range; [`Error::Analysis`] when a group has no
/// usable error model (no degrees of freedom and a single run) or no frequency in the band.
pub fn analyze_spectra(
    groups: &[SpectrumGroup],
    bin_rho2: &[f64],
    settings: &SpectrumSettings,
    input: Option<String>,
) -> Result<SpectrumReport> {
    analyze_estimates(groups, &vec![None; groups.len()], bin_rho2, settings, input)
}

/// As [`analyze_spectra`], with, for each group when known, the variance of its run-mean
/// PSD at each frequency (what the `normal` error model uses: the cross-spectrum's or a
/// subtracted PSD's). A group's PSD may be negative at some frequencies when the
/// estimator is not a single channel's (`T_eff ≤ 0` there is reported as computed, with
/// a caution).
///
/// # Errors
/// As [`analyze_spectra`]; [`Error::Analysis`] when a variance does not match its group.
pub fn analyze_estimates(
    groups: &[SpectrumGroup],
    variances: &[Option<Vec<f64>>],
    bin_rho2: &[f64],
    settings: &SpectrumSettings,
    input: Option<String>,
) -> Result<SpectrumReport> {
    settings.validate()?;
    let k = settings.units.boltzmann();
    if variances.len() != groups.len() {
        return Err(Error::Analysis(
            "one variance (or none) per spectrum group is expected".into(),
        ));
    }
    let spectra = groups
        .iter()
        .zip(variances)
        .map(|(g, v)| analyze_group(g, v.as_deref(), bin_rho2, settings, k))
        .collect::<Result<Vec<_>>>()?;
    let last = spectra
        .last()
        .ok_or_else(|| Error::Analysis("no spectrum to analyse".into()))?;
    let mut warnings = Vec::new();
    if settings.errors != ErrorModel::Runs
        && spectra.iter().any(|s| s.errors == ErrorModel::ChiSquare)
    {
        warnings.push(SpectralCaution {
            tw: None,
            finding: SpectralFinding::ChiSquareAssumesGaussian,
        });
    }
    if settings.errors != ErrorModel::Runs && spectra.iter().any(|s| s.errors == ErrorModel::Normal)
    {
        warnings.push(SpectralCaution {
            tw: None,
            finding: SpectralFinding::NormalAssumesGaussian,
        });
    }
    if let Some(t) = settings.temperature {
        for sp in &spectra {
            if let Some(ratio) = implausible_scale(&sp.points, t) {
                warnings.push(SpectralCaution {
                    tw: sp.tw,
                    finding: SpectralFinding::ImplausibleScale {
                        ratio,
                        factor: SCALE_FACTOR,
                    },
                });
            }
        }
    }
    Ok(SpectrumReport {
        schema: SCHEMA,
        tool: ToolInfo::default(),
        input,
        settings: settings.clone(),
        k,
        convention_text: settings.convention.describe(),
        points: last.points.clone(),
        band: last.band.clone(),
        departure: last.departure.clone(),
        spectra,
        cautions: warnings,
        second_input: None,
        amplifier_noise: None,
        intermittency: None,
        intermittency_by_age: Vec::new(),
    })
}

/// The Gaussian-noise test of one age's windows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AgeIntermittency {
    /// The age.
    pub tw: f64,
    /// The test on the windows of every run at that age.
    pub test: super::intermittency::IntermittencyReport,
}

/// How far from the bath (a factor) T_eff must lie at every frequency to be called
/// implausible. Aging systems reach T_eff ≫ T at low frequencies, never at all of them:
/// at high frequencies the fast modes are at the bath's temperature.
pub const SCALE_FACTOR: f64 = 10.0;

/// The median T_eff / T when every frequency's interval lies above `SCALE_FACTOR · T` (or
/// every one below `T / SCALE_FACTOR`); frequencies without an interval count by their
/// estimate.
fn implausible_scale(points: &[SpectrumPoint], t: f64) -> Option<f64> {
    if points.is_empty() {
        return None;
    }
    let low = |p: &SpectrumPoint| p.low.unwrap_or(p.t_eff);
    let high = |p: &SpectrumPoint| p.high.unwrap_or(p.t_eff);
    let above = points.iter().all(|p| low(p) > SCALE_FACTOR * t);
    let below = points.iter().all(|p| high(p) < t / SCALE_FACTOR);
    if !(above || below) {
        return None;
    }
    let mut r: Vec<f64> = points.iter().map(|p| p.t_eff / t).collect();
    r.sort_by(f64::total_cmp);
    Some(r[r.len() / 2])
}

/// The bands: the user's (or all frequencies) first, then the log bands of the test.
fn make_bands(freqs: &[f64], s: &SpectrumSettings) -> (Vec<(f64, f64)>, usize) {
    let (fmin, fmax) = (freqs[0], freqs[freqs.len() - 1]);
    let mut bands = vec![s.band.map_or((fmin, fmax), |[a, b]| (a, b))];
    if s.temperature.is_some() && fmax > fmin {
        let per = s.bands_per_decade as f64;
        let (l0, l1) = (fmin.log10(), fmax.log10());
        let n = ((l1 - l0) * per).ceil().max(1.0) as usize;
        // The outer edges are the data's own frequencies; inner ones are rounded to 12
        // significant digits so that JSON shows 5000, not 4999.999999999999.
        let edge = |i: usize| match i {
            0 => fmin,
            i if i == n => fmax,
            i => round_sig(10f64.powf(l0 + (l1 - l0) * i as f64 / n as f64), 12),
        };
        for i in 0..n {
            bands.push((edge(i), edge(i + 1)));
        }
    }
    let n_test = bands.len() - 1;
    (bands, n_test)
}

/// `v` rounded to `digits` significant digits (through its decimal form).
fn round_sig(v: f64, digits: usize) -> f64 {
    format!("{:.*e}", digits.saturating_sub(1), v)
        .parse()
        .unwrap_or(v)
}

/// Which bands each frequency belongs to (a log band is half-open, the last one closed).
fn membership(freqs: &[f64], bands: &[(f64, f64)]) -> Vec<Vec<usize>> {
    let last = bands.len() - 1;
    freqs
        .iter()
        .map(|&f| {
            bands
                .iter()
                .enumerate()
                .filter(|&(i, &(a, b))| {
                    if i == 0 {
                        f >= a && f <= b
                    } else {
                        f >= a && (f < b || (i == last && f <= b))
                    }
                })
                .map(|(i, _)| i)
                .collect()
        })
        .collect()
}

/// `Σ_m (1 − m/M) ρ²_m` over the correlated bin lags, for `M` adjacent bins.
fn correlation_sum(bin_rho2: &[f64], m_bins: usize) -> f64 {
    bin_rho2
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let lag = (i + 1) as f64;
            if i + 1 < m_bins {
                (1.0 - lag / m_bins as f64) * r
            } else {
                0.0
            }
        })
        .sum()
}

/// The `p` quantile of χ²_ν. Above ν = 10⁵ the Wilson–Hilferty form
/// `ν (1 − 2/(9ν) + z √(2/(9ν)))³` is used: its relative error there is below 1e-7, and the
/// iterative inverse would take very long for huge ν.
///
/// Reference: Wilson & Hilferty, Proc. Natl. Acad. Sci. 17, 684 (1931).
pub fn chi2_quantile(nu: f64, p: f64) -> Option<f64> {
    if !(nu > 0.0 && nu.is_finite()) {
        return None;
    }
    if nu > 1e5 {
        let z = Normal::standard().inverse_cdf(p);
        let a = 2.0 / (9.0 * nu);
        return Some(nu * (1.0 - a + z * a.sqrt()).powi(3));
    }
    ChiSquared::new(nu).ok().map(|d| d.inverse_cdf(p))
}

fn chi_interval(t: f64, nu: f64, level: f64) -> Ends {
    let a = (1.0 - level) / 2.0;
    Some((
        t * nu / chi2_quantile(nu, 1.0 - a)?,
        t * nu / chi2_quantile(nu, a)?,
    ))
}

fn analyze_group(
    g: &SpectrumGroup,
    var: Option<&[f64]>,
    bin_rho2: &[f64],
    s: &SpectrumSettings,
    k: f64,
) -> Result<SpectrumFit> {
    let who = g.tw.map_or_else(String::new, |t| format!("tw = {t}: "));
    let n_runs = g.runs.len();
    check_group(g, &who, s.estimator != Estimator::SingleChannel)?;
    if let Some(v) = var
        && (v.len() != g.freqs.len() || !v.iter().all(|x| *x >= 0.0 && x.is_finite()))
    {
        return Err(Error::Analysis(format!(
            "{who}the PSD's variance is not usable: expected one finite value >= 0 per frequency"
        )));
    }
    let dof = total_dof(g, s);
    let mut warnings = Vec::new();
    let errors = choose_errors(s, n_runs, dof.is_some(), var.is_some(), &who, &mut warnings)?;
    let fit = GroupFit::new(g, s, k, dof.as_deref(), &who)?;

    // Intervals per frequency and per band: (low, high) at the band's level.
    // `choose_errors` picks chi-square only when the degrees of freedom are known, and
    // normal only when a variance or the degrees of freedom are.
    let iv = match (errors, dof.as_ref()) {
        (ErrorModel::ChiSquare, Some(nu)) => fit.chi_square_intervals(nu, bin_rho2),
        (ErrorModel::Normal, nu) => {
            let v: Vec<f64> = match (var, nu) {
                (Some(v), _) => v.to_vec(),
                // One channel's PSD: Ĝ ~ G χ²_ν / ν has variance 2G²/ν.
                (None, Some(nu)) => (0..nu.len())
                    .map(|j| 2.0 * fit.gbar[j] * fit.gbar[j] / nu[j])
                    .collect(),
                (None, None) => vec![f64::NAN; g.freqs.len()],
            };
            fit.normal_intervals(&v, bin_rho2)
        }
        _ => {
            let n_bands = fit.grid.edges.len();
            crate::budget::check_spectrum(s.resamples, g.runs.len(), g.freqs.len(), n_bands)?;
            fit.run_intervals()
        }
    };

    let point_dof = if matches!(errors, ErrorModel::ChiSquare | ErrorModel::Normal) {
        dof.as_deref()
    } else {
        None
    };
    let points = fit.points(&iv, point_dof);
    let non_positive = points.iter().filter(|p| !(p.t_eff > 0.0)).count();
    if non_positive > 0 {
        warnings.push(SpectralFinding::NonPositiveTeff {
            frequencies: non_positive,
            total: points.len(),
            estimator: s.estimator,
        });
    }
    let band = fit.band(0, &iv);
    let test_bands = fit.test_bands(&iv);
    let (departure, separate_bands) = find_departure(&test_bands);
    if !separate_bands.is_empty() {
        let level = fit.grid.test_level.unwrap_or(s.level);
        warnings.push(SpectralFinding::SeparateBands {
            level,
            bands: separate_bands.clone(),
            after_departure: departure.is_some(),
        });
    }
    let verdict = verdict(&band, s, departure.as_ref());
    Ok(SpectrumFit {
        tw: g.tw,
        n_runs,
        errors,
        points,
        band: Some(band),
        departure,
        separate_bands,
        test_bands,
        test_level: fit.grid.test_level,
        verdict,
        cautions: warnings
            .into_iter()
            .map(|finding| SpectralCaution { tw: g.tw, finding })
            .collect(),
    })
}

/// Groups from the reader are valid by construction; a caller of the library may build
/// one by hand, so check the shapes and values once here.
fn check_group(g: &SpectrumGroup, who: &str, signed: bool) -> Result<()> {
    let n_runs = g.runs.len();
    let nf = g.freqs.len();
    let shape_ok = |a: &Array2<f64>| a.dim() == (n_runs, nf);
    let valid = n_runs > 0
        && nf > 0
        && shape_ok(&g.psd)
        && shape_ok(&g.loss)
        && g.dof.as_ref().is_none_or(shape_ok)
        && g.freqs.iter().all(|f| *f > 0.0 && f.is_finite())
        && g.freqs.windows(2).all(|w| w[1] > w[0])
        && g.loss.iter().all(|v| *v > 0.0 && v.is_finite())
        && g.psd.iter().all(|v| (signed || *v >= 0.0) && v.is_finite())
        && g.dof
            .as_ref()
            .is_none_or(|d| d.iter().all(|v| *v > 0.0 && v.is_finite()));
    if !valid {
        return Err(Error::Analysis(format!(
            "{who}the spectrum is not usable: expected at least one run, increasing positive \
             frequencies, finite PSD >= 0, positive dissipation and dof, all of one shape"
        )));
    }
    Ok(())
}

/// Degrees of freedom of the mean PSD at each frequency (summed over runs), when known
/// from the file's `dof` column or from `--dof`.
fn total_dof(g: &SpectrumGroup, s: &SpectrumSettings) -> Option<Vec<f64>> {
    match (&g.dof, s.dof) {
        (Some(d), _) => Some(d.sum_axis(Axis(0)).to_vec()),
        (None, Some(d)) => Some(vec![d * g.runs.len() as f64; g.freqs.len()]),
        (None, None) => None,
    }
}

/// The error model for `n_runs` runs, with its cautions pushed to `warnings`.
///
/// # Errors
/// [`Error::Analysis`] when the asked-for model cannot be used, or no model can.
fn choose_errors(
    s: &SpectrumSettings,
    n_runs: usize,
    has_dof: bool,
    has_var: bool,
    who: &str,
    warnings: &mut Vec<SpectralFinding>,
) -> Result<ErrorModel> {
    let single = s.estimator == Estimator::SingleChannel;
    let errors = match s.errors {
        // Resampling the record's runs would miss the amplifier table's own scatter.
        ErrorModel::Auto if s.estimator == Estimator::Subtracted && has_var => ErrorModel::Normal,
        ErrorModel::Auto if n_runs >= FEW_RUNS => ErrorModel::Runs,
        ErrorModel::Auto if !single && has_var => ErrorModel::Normal,
        ErrorModel::Auto if single && has_dof => ErrorModel::ChiSquare,
        ErrorModel::Normal if !(has_var || single && has_dof) => {
            return Err(Error::Analysis(format!(
                "{who}normal intervals need the PSD's variance or its degrees of freedom: add \
                 a 'dof' column or give --dof"
            )));
        }
        ErrorModel::Auto if n_runs >= 2 => {
            warnings.push(SpectralFinding::FewRunsNoDof { runs: n_runs });
            ErrorModel::Runs
        }
        ErrorModel::Runs if n_runs < 2 => {
            return Err(Error::Analysis(format!(
                "{who}--errors runs needs at least 2 runs (a 'run' column); the input has {n_runs}"
            )));
        }
        ErrorModel::ChiSquare if !has_dof => {
            return Err(Error::Analysis(format!(
                "{who}chi-square intervals need the degrees of freedom: add a 'dof' column or give --dof"
            )));
        }
        ErrorModel::Auto => {
            return Err(Error::Analysis(format!(
                "{who}no way to form intervals: a single run and no degrees of freedom; add a \
                 'dof' column, give --dof, or give several runs in a 'run' column"
            )));
        }
        e => e,
    };
    if errors == ErrorModel::Runs && (FEW_RUNS..SHORT_RUNS).contains(&n_runs) {
        warnings.push(SpectralFinding::ShortRuns {
            runs: n_runs,
            limit: SHORT_RUNS,
        });
    }
    if errors == ErrorModel::Runs && n_runs < FEW_RUNS && s.errors == ErrorModel::Runs {
        warnings.push(SpectralFinding::FewRuns {
            runs: n_runs,
            limit: FEW_RUNS,
        });
    }
    Ok(errors)
}

/// The bands of one spectrum and the frequencies inside each.
struct BandGrid {
    /// `(fmin, fmax)`: the user's band (or all frequencies) first, then the test's bands.
    edges: Vec<(f64, f64)>,
    /// Which bands each frequency belongs to.
    members: Vec<Vec<usize>>,
    /// Frequencies inside each band.
    count: Vec<usize>,
    /// The level of each test band's interval (Bonferroni-corrected), when there are any.
    test_level: Option<f64>,
}

impl BandGrid {
    /// # Errors
    /// [`Error::Analysis`] when no frequency lies inside the user's band.
    fn new(freqs: &[f64], s: &SpectrumSettings, who: &str) -> Result<Self> {
        let nf = freqs.len();
        let (edges, n_test) = make_bands(freqs, s);
        let members = membership(freqs, &edges);
        let count: Vec<usize> = (0..edges.len())
            .map(|b| members.iter().filter(|m| m.contains(&b)).count())
            .collect();
        if count[0] == 0 {
            return Err(Error::Analysis(format!(
                "{who}no frequency inside --band {}:{} (the data span {} to {} Hz)",
                edges[0].0,
                edges[0].1,
                freqs[0],
                freqs[nf - 1]
            )));
        }
        let alpha = 1.0 - s.level;
        let test_level = (n_test > 0).then(|| 1.0 - alpha / n_test as f64);
        Ok(BandGrid {
            edges,
            members,
            count,
            test_level,
        })
    }

    /// The level of band `b`'s interval: the asked-for level for the user's band, the
    /// corrected level for a test band.
    fn level(&self, b: usize, s: &SpectrumSettings) -> f64 {
        if b == 0 {
            s.level
        } else {
            self.test_level.unwrap_or(s.level)
        }
    }

    /// The `weights`-weighted mean of `t` over band `b`.
    fn mean(&self, b: usize, weights: &[f64], t: &[f64]) -> f64 {
        let (mut num, mut den) = (0.0, 0.0);
        for j in 0..weights.len() {
            if self.members[j].contains(&b) {
                num += weights[j] * t[j];
                den += weights[j];
            }
        }
        num / den
    }

    /// The sum of `v` over the frequencies of band `b`.
    fn sum(&self, b: usize, v: &[f64]) -> f64 {
        (0..v.len())
            .filter(|&j| self.members[j].contains(&b))
            .map(|j| v[j])
            .sum()
    }
}

/// Intervals per frequency and per band: (low, high) at the band's level.
struct Intervals {
    point: Vec<Ends>,
    band: Vec<Ends>,
    /// Equivalent degrees of freedom of each band (chi-square model).
    band_dof: Vec<Option<f64>>,
}

/// One spectrum with its point estimates and bands: what the intervals are built from.
struct GroupFit<'a> {
    g: &'a SpectrumGroup,
    s: &'a SpectrumSettings,
    /// Mean PSD over runs.
    gbar: Vec<f64>,
    /// Mean dissipation over runs.
    lbar: Vec<f64>,
    /// The convention's factor over `k` at each frequency.
    factor: Vec<f64>,
    /// `T_eff` at each frequency.
    t_hat: Vec<f64>,
    grid: BandGrid,
    /// Weight of each frequency in a band average (its dof, or 1).
    weights: Vec<f64>,
    /// Each band's average of `T_eff`.
    band_est: Vec<f64>,
}

impl<'a> GroupFit<'a> {
    /// # Errors
    /// As [`BandGrid::new`].
    fn new(
        g: &'a SpectrumGroup,
        s: &'a SpectrumSettings,
        k: f64,
        dof: Option<&[f64]>,
        who: &str,
    ) -> Result<Self> {
        let nf = g.freqs.len();
        // At least one run was checked (`check_group`), so the means exist.
        let gbar = g.psd.mean_axis(Axis(0)).unwrap_or_default().to_vec();
        let lbar = g.loss.mean_axis(Axis(0)).unwrap_or_default().to_vec();
        let factor: Vec<f64> = g
            .freqs
            .iter()
            .map(|&f| s.convention.factor(f) / k)
            .collect();
        let t_hat: Vec<f64> = (0..nf).map(|j| factor[j] * gbar[j] / lbar[j]).collect();
        let grid = BandGrid::new(&g.freqs, s, who)?;
        let weights: Vec<f64> = dof.map_or_else(|| vec![1.0; nf], <[f64]>::to_vec);
        let band_est: Vec<f64> = (0..grid.edges.len())
            .map(|b| grid.mean(b, &weights, &t_hat))
            .collect();
        Ok(GroupFit {
            g,
            s,
            gbar,
            lbar,
            factor,
            t_hat,
            grid,
            weights,
            band_est,
        })
    }

    /// Chi-square intervals from the degrees of freedom `nu` of each frequency; a band's
    /// are Satterthwaite's, corrected for the correlation `bin_rho2` of neighbouring bins.
    fn chi_square_intervals(&self, nu: &[f64], bin_rho2: &[f64]) -> Intervals {
        let s = self.s;
        let point = (0..nu.len())
            .map(|j| chi_interval(self.t_hat[j], nu[j], s.level))
            .collect();
        let mut band = Vec::new();
        let mut band_dof = Vec::new();
        for (b, &m) in self.grid.count.iter().enumerate() {
            let sum_nu = self.grid.sum(b, nu);
            let nu_b = sum_nu / (1.0 + 2.0 * correlation_sum(bin_rho2, m));
            let lvl = self.grid.level(b, s);
            band.push(if m > 0 {
                chi_interval(self.band_est[b], nu_b, lvl)
            } else {
                None
            });
            band_dof.push((m > 0).then_some(nu_b));
        }
        Intervals {
            point,
            band,
            band_dof,
        }
    }

    /// Normal intervals from the variance `var` of the run-mean PSD at each frequency:
    /// `T̂ ± z·se`. A band's variance is `Σ_j w_j² v_j + 2 Σ_m ρ²_m Σ_j w_j w_{j+m} √(v_j
    /// v_{j+m})` over its frequencies (`v` the variance of `T_eff`, `ρ²_m` the correlation of
    /// values `m` bins apart, the same for a cross-spectrum's real part as for a PSD),
    /// divided by `(Σ w)²`.
    fn normal_intervals(&self, var: &[f64], bin_rho2: &[f64]) -> Intervals {
        let s = self.s;
        let nf = var.len();
        let z = |level: f64| Normal::standard().inverse_cdf(0.5 + level / 2.0);
        let vt: Vec<f64> = (0..nf)
            .map(|j| (self.factor[j] / self.lbar[j]).powi(2) * var[j])
            .collect();
        let ends = |est: f64, v: f64, level: f64| {
            let half = z(level) * v.sqrt();
            (half.is_finite()).then_some((est - half, est + half))
        };
        let point = (0..nf)
            .map(|j| ends(self.t_hat[j], vt[j], s.level))
            .collect();
        let band = (0..self.grid.edges.len())
            .map(|b| {
                if self.grid.count[b] == 0 {
                    return None;
                }
                let inside = |j: usize| self.grid.members[j].contains(&b);
                let w = &self.weights;
                let (mut v, mut wsum) = (0.0, 0.0);
                for j in (0..nf).filter(|&j| inside(j)) {
                    wsum += w[j];
                    v += w[j] * w[j] * vt[j];
                    for (m, r2) in bin_rho2.iter().enumerate() {
                        let k = j + m + 1;
                        if k < nf && inside(k) {
                            v += 2.0 * r2 * w[j] * w[k] * (vt[j] * vt[k]).sqrt();
                        }
                    }
                }
                ends(self.band_est[b], v / (wsum * wsum), self.grid.level(b, s))
            })
            .collect();
        Intervals {
            point,
            band,
            band_dof: vec![None; self.grid.edges.len()],
        }
    }

    /// Bootstrap over runs: per-frequency intervals and band intervals, in frequency chunks.
    fn run_intervals(&self) -> Intervals {
        let (r, nf, nb) = (self.g.runs.len(), self.g.freqs.len(), self.band_est.len());
        let b_total = self.s.resamples;
        let w = self.resample_weights();
        let n_chunks = nf.div_ceil(FREQ_CHUNK);
        // Per chunk: per-frequency intervals, and per-replicate band sums (num) for each band.
        let parts: Vec<ChunkSums> = (0..n_chunks)
            .into_par_iter()
            .map(|c| self.run_chunk(&w, c * FREQ_CHUNK, ((c + 1) * FREQ_CHUNK).min(nf)))
            .collect();
        let mut point = Vec::with_capacity(nf);
        let mut band_num = Array2::<f64>::zeros((b_total, nb));
        let mut jack_num = Array2::<f64>::zeros((r, nb));
        for ChunkSums {
            ivs,
            band: bn,
            jack: jn,
        } in parts
        {
            point.extend(ivs);
            band_num += &bn;
            jack_num += &jn;
        }
        Intervals {
            point,
            band: self.run_band_intervals(&band_num, &jack_num),
            band_dof: vec![None; nb],
        }
    }

    /// The resampling weights `W`: replicates × runs, each row a draw's counts over `r`.
    fn resample_weights(&self) -> Array2<f64> {
        let r = self.g.runs.len();
        let b_total = self.s.resamples;
        let mut w = Array2::<f64>::zeros((b_total, r));
        let mut counts = vec![0u32; r];
        for b in 0..b_total {
            resample::draw_counts(self.s.seed, b as u64, r, &mut counts);
            for (i, &c) in counts.iter().enumerate() {
                w[[b, i]] = f64::from(c) / r as f64;
            }
        }
        w
    }

    /// Frequencies `j0..j1`: their intervals, and their parts of every band's replicate
    /// and jackknife sums.
    fn run_chunk(&self, w: &Array2<f64>, j0: usize, j1: usize) -> ChunkSums {
        let (g, s, factor, members) = (self.g, self.s, &self.factor, &self.grid.members);
        let weights = &self.weights;
        let (r, nb, b_total) = (g.runs.len(), self.band_est.len(), s.resamples);
        let rf = r as f64;
        // Read at Student's width for r runs (the expanded percentile interval).
        let read = resample::widened_level(s.level, r);
        let gp = w.dot(&g.psd.slice(s![.., j0..j1]));
        let gl = w.dot(&g.loss.slice(s![.., j0..j1]));
        let gsum = g.psd.slice(s![.., j0..j1]).sum_axis(Axis(0));
        let lsum = g.loss.slice(s![.., j0..j1]).sum_axis(Axis(0));
        let mut band_num = Array2::<f64>::zeros((b_total, nb));
        let mut jack_num = Array2::<f64>::zeros((r, nb));
        let mut ivs = Vec::with_capacity(j1 - j0);
        let mut reps = vec![0.0; b_total];
        let mut jack = vec![0.0; r];
        for (jj, j) in (j0..j1).enumerate() {
            for b in 0..b_total {
                reps[b] = factor[j] * gp[[b, jj]] / gl[[b, jj]];
                for &bi in &members[j] {
                    band_num[[b, bi]] += weights[j] * reps[b];
                }
            }
            for i in 0..r {
                let gi = (gsum[jj] - g.psd[[i, j]]) / (rf - 1.0);
                let li = (lsum[jj] - g.loss[[i, j]]) / (rf - 1.0);
                jack[i] = factor[j] * gi / li;
                for &bi in &members[j] {
                    jack_num[[i, bi]] += weights[j] * jack[i];
                }
            }
            ivs.push(
                resample::interval(self.t_hat[j], &reps, Some(&jack), s.interval, read)
                    .map(|iv| (iv.low, iv.high)),
            );
        }
        ChunkSums {
            ivs,
            band: band_num,
            jack: jack_num,
        }
    }

    /// Band intervals from the replicate and jackknife sums of every band.
    fn run_band_intervals(&self, band_num: &Array2<f64>, jack_num: &Array2<f64>) -> Vec<Ends> {
        let s = self.s;
        let rf = self.g.runs.len() as f64;
        let nb = self.band_est.len();
        let wsum: Vec<f64> = (0..nb).map(|b| self.grid.sum(b, &self.weights)).collect();
        // At least two runs reach the runs model, so r − 1 > 0 and t exists; normal otherwise.
        let t_dist = StudentsT::new(0.0, 1.0, rf - 1.0).ok();
        let normal = Normal::standard();
        let quantile = |p: f64| {
            t_dist
                .as_ref()
                .map_or(normal.inverse_cdf(p), |d| d.inverse_cdf(p))
        };
        (0..nb)
            .map(|b| {
                if !(wsum[b] > 0.0) {
                    return None;
                }
                let reps: Vec<f64> = band_num.column(b).iter().map(|v| v / wsum[b]).collect();
                let jack: Vec<f64> = jack_num.column(b).iter().map(|v| v / wsum[b]).collect();
                let est = self.band_est[b];
                if b == 0 {
                    let read = resample::widened_level(s.level, self.g.runs.len());
                    resample::interval(est, &reps, Some(&jack), s.interval, read)
                        .map(|iv| (iv.low, iv.high))
                } else {
                    // Corrected levels reach far into the tails: use the bootstrap standard
                    // error there, which is stable for any B, with Student's t on r − 1
                    // degrees of freedom and the SE scaled by √(r/(r−1)) (the bootstrap SE
                    // of a mean of r runs is the plug-in one; common practice for small
                    // samples).
                    let se = resample::bootstrap_se(&reps) * (rf / (rf - 1.0)).sqrt();
                    let z = quantile(0.5 + self.grid.level(b, s) / 2.0);
                    Some((est - z * se, est + z * se))
                }
            })
            .collect()
    }

    /// `T_eff(f)` with its intervals; `dof` per frequency when the model is chi-square.
    fn points(&self, iv: &Intervals, dof: Option<&[f64]>) -> Vec<SpectrumPoint> {
        (0..self.g.freqs.len())
            .map(|j| SpectrumPoint {
                f: self.g.freqs[j],
                t_eff: self.t_hat[j],
                low: iv.point[j].map(|v| v.0),
                high: iv.point[j].map(|v| v.1),
                psd: self.gbar[j],
                loss: self.lbar[j],
                dof: dof.map(|d| d[j]),
            })
            .collect()
    }

    /// Band `b` with its average and interval.
    fn band(&self, b: usize, iv: &Intervals) -> Band {
        Band {
            fmin: self.grid.edges[b].0,
            fmax: self.grid.edges[b].1,
            n_freqs: self.grid.count[b],
            dof: iv.band_dof[b],
            t_eff: Estimate {
                estimate: Some(self.band_est[b]),
                low: iv.band[b].map(|v| v.0),
                high: iv.band[b].map(|v| v.1),
                note: None,
            },
        }
    }

    /// The departure test's bands that hold a frequency, each compared with `T` (none
    /// without `T`).
    fn test_bands(&self, iv: &Intervals) -> Vec<TestBand> {
        let Some(t) = self.s.temperature else {
            return Vec::new();
        };
        (1..self.grid.edges.len())
            .filter(|&b| self.grid.count[b] > 0)
            .map(|b| {
                let tb = self.band(b, iv);
                let direction = match (tb.t_eff.low, tb.t_eff.high) {
                    (Some(lo), _) if t < lo => Some(Direction::Hot),
                    (_, Some(hi)) if t > hi => Some(Direction::Cold),
                    _ => None,
                };
                TestBand {
                    band: tb,
                    departs: direction.is_some(),
                    direction,
                }
            })
            .collect()
    }
}

/// One chunk's part of the bootstrap over runs.
struct ChunkSums {
    /// Per-frequency intervals.
    ivs: Vec<Ends>,
    /// Per-replicate weighted sums of `T_eff` for each band.
    band: Array2<f64>,
    /// Per-jackknife-replicate weighted sums of `T_eff` for each band.
    jack: Array2<f64>,
}

/// The departure: the run of differing bands, all on one side of `T`, that starts at the
/// lowest tested band; and every other differing band as a separate finding.
fn find_departure(tests: &[TestBand]) -> (Option<Departure>, Vec<SeparateBand>) {
    let dir0 = tests.first().and_then(|b| b.direction);
    let run = dir0.map_or(0, |d| {
        tests.iter().take_while(|b| b.direction == Some(d)).count()
    });
    let departure = dir0.map(|direction| Departure {
        direction,
        below_hz: tests[run - 1].band.fmax,
        from_hz: tests[0].band.fmin,
        bands: run,
        note: DEPARTURE_NOTE.into(),
    });
    let separate = tests[run..]
        .iter()
        .filter_map(|b| {
            Some(SeparateBand {
                fmin: b.band.fmin,
                fmax: b.band.fmax,
                direction: b.direction?,
            })
        })
        .collect();
    (departure, separate)
}

fn verdict(band: &Band, s: &SpectrumSettings, departure: Option<&Departure>) -> SpectralVerdict {
    let e = &band.t_eff;
    let (Some(v), Some(lo), Some(hi)) = (e.estimate, e.low, e.high) else {
        return SpectralVerdict::NoInterval;
    };
    let relation = s.temperature.map(|t| {
        if lo <= t && t <= hi {
            BathRelation::Equal
        } else if lo > t {
            BathRelation::Above
        } else {
            BathRelation::Below
        }
    });
    SpectralVerdict::BandAverage {
        band: [band.fmin, band.fmax],
        t_eff: [v, lo, hi],
        kelvin: s.units == Units::Si,
        bath: s.temperature,
        relation,
        departure: departure.map(|d| (d.direction, [d.from_hz, d.below_hz])),
    }
}
