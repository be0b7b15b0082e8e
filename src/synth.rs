//! Campaigns with a known truth, for the demo and the known-truth tests.
//!
//! The sample-mean curves lie exactly on a chosen parametric relation: `C(t,tw)` decays in
//! two steps (a fast relaxation to the plateau `q`, then a slow aging decay that scales
//! with `t/tw`), and `k T χ̄ = 1 − C` for `C ≥ q`, `1 − q + X (q − C)` below. Each sample
//! adds zero-mean noise that is correlated along `t` (an AR(1) sequence) and between C and
//! χ, as samples from one run of a simulation are. So the mean over infinitely many
//! samples is the truth, and a correct estimator with correct intervals recovers it.
//!
//! These are invented data with a built-in answer, not a simulation of any dynamics.

use crate::campaign::{Campaign, GridPoint};
use crate::error::Result;
use ndarray::Array2;
use rand::RngExt;
use rand_distr::StandardNormal;

/// The recipe of a synthetic campaign.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SynthSpec {
    /// Number of independent samples.
    pub samples: usize,
    /// Waiting times.
    pub waiting_times: Vec<f64>,
    /// Later times per waiting time (log-spaced from `tw + 0.1` to `tw + 30 tw`).
    pub points_per_tw: usize,
    /// The true fluctuation–dissipation ratio below the plateau.
    pub ratio: f64,
    /// Change of the true ratio per decade of waiting time, counted from the first one
    /// (0: the same X at every age).
    pub ratio_per_decade: f64,
    /// The true plateau (break) `q`.
    pub plateau: f64,
    /// Bath temperature (y = k T χ with k = 1).
    pub temperature: f64,
    /// Standard deviation of a single sample's C and k T χ at a point.
    pub noise: f64,
    /// Correlation of consecutive points' noise along t.
    pub along_t: f64,
    /// Correlation between a sample's C noise and its k T χ noise.
    pub cross: f64,
    /// Random seed.
    pub seed: u64,
}

impl Default for SynthSpec {
    fn default() -> Self {
        SynthSpec {
            samples: 40,
            waiting_times: vec![100.0, 1000.0, 10000.0],
            points_per_tw: 40,
            ratio: 0.45,
            ratio_per_decade: 0.0,
            plateau: 0.6,
            temperature: 0.6,
            noise: 0.03,
            along_t: 0.8,
            cross: -0.4,
            seed: 2026,
        }
    }
}

impl SynthSpec {
    /// The true mean correlation at `(tw, t)`.
    pub fn correlation(&self, tw: f64, t: f64) -> f64 {
        let fast = (1.0 - self.plateau) * (-(t - tw)).exp();
        let slow = self.plateau * (tw / t).powf(1.2);
        fast + slow
    }

    /// The true ratio at waiting time `tw`.
    pub fn ratio_at(&self, tw: f64) -> f64 {
        let tw0 = self.waiting_times.first().copied().unwrap_or(tw);
        self.ratio + self.ratio_per_decade * (tw / tw0).log10()
    }

    /// The true `k T χ` at waiting time `tw` as a function of the mean correlation.
    pub fn response(&self, tw: f64, c: f64) -> f64 {
        if c >= self.plateau {
            1.0 - c
        } else {
            1.0 - self.plateau + self.ratio_at(tw) * (self.plateau - c)
        }
    }

    /// The grid of later times for one waiting time.
    pub fn times(&self, tw: f64) -> Vec<f64> {
        let k = self.points_per_tw;
        let (lo, hi) = ((0.1f64).ln(), (30.0 * tw).ln());
        (0..k)
            .map(|i| tw + (lo + (hi - lo) * i as f64 / (k.max(2) - 1) as f64).exp())
            .collect()
    }
}

/// Generates the campaign.
///
/// # Errors
/// Only if the spec makes an invalid campaign (fewer than 2 samples, no points).
pub fn generate(spec: &SynthSpec) -> Result<Campaign> {
    let points: Vec<GridPoint> = spec
        .waiting_times
        .iter()
        .flat_map(|&tw| spec.times(tw).into_iter().map(move |t| GridPoint { tw, t }))
        .collect();
    let (n, p) = (spec.samples, points.len());
    let mut corr = Array2::zeros((n, p));
    let mut resp = Array2::zeros((n, p));
    let rho = spec.along_t.clamp(-0.999, 0.999);
    let innov = (1.0 - rho * rho).sqrt();
    let cross_c = (1.0 - spec.cross * spec.cross).max(0.0).sqrt();
    for i in 0..n {
        let mut rng = crate::resample::replicate_rng(spec.seed, i as u64);
        let (mut e1, mut e2) = (0.0f64, 0.0f64);
        let mut prev_tw = f64::NAN;
        for (j, g) in points.iter().enumerate() {
            let (z1, z2): (f64, f64) = (rng.sample(StandardNormal), rng.sample(StandardNormal));
            if g.tw.total_cmp(&prev_tw).is_ne() {
                (e1, e2) = (z1, z2); // a new curve starts from the stationary law
                prev_tw = g.tw;
            } else {
                e1 = rho * e1 + innov * z1;
                e2 = rho * e2 + innov * z2;
            }
            let c = spec.correlation(g.tw, g.t);
            let y = spec.response(g.tw, c);
            let nc = spec.noise * e1;
            let ny = spec.noise * (spec.cross * e1 + cross_c * e2);
            corr[[i, j]] = c + nc;
            resp[[i, j]] = (y + ny) / spec.temperature;
        }
    }
    let ids = (0..n).map(|i| format!("s{:03}", i + 1)).collect();
    Campaign::new(ids, points, corr, resp, None)
}

/// The recipe of a synthetic noise spectrum with a known `T_eff(f)`.
///
/// `T_eff(f) = T (1 + (f_hot / f)^2)`: equal to the bath at high frequency, hot below
/// `f_hot`. The loss is a Debye-like `χ''(f) = a f / (1 + (f/f_c)²)`; each run's PSD
/// scatters as `χ²_ν / ν` around `2 k T_eff χ'' / (π f)` (one-sided per hertz).
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct SpectrumSpec {
    /// Bath temperature (K).
    pub temperature: f64,
    /// Below this frequency the slow modes are hot (Hz); 0 for equilibrium.
    pub f_hot: f64,
    /// Independent runs.
    pub runs: usize,
    /// Degrees of freedom of each run's PSD value.
    pub dof: f64,
    /// Lowest and highest frequency (Hz), log-spaced.
    pub range: [f64; 2],
    /// Number of frequencies.
    pub points: usize,
    /// Random seed.
    pub seed: u64,
}

impl Default for SpectrumSpec {
    fn default() -> Self {
        SpectrumSpec {
            temperature: 295.0,
            f_hot: 2.0,
            runs: 12,
            dof: 16.0,
            range: [0.05, 500.0],
            points: 160,
            seed: 77,
        }
    }
}

impl SpectrumSpec {
    /// The true effective temperature at `f`.
    pub fn t_eff(&self, f: f64) -> f64 {
        self.temperature * (1.0 + (self.f_hot / f).powi(2))
    }

    /// The loss at `f`.
    pub fn loss(&self, f: f64) -> f64 {
        1e-12 * f / (1.0 + (f / 50.0).powi(2))
    }
}

/// Generates the spectrum (SI units, loss convention).
pub fn generate_spectrum(spec: &SpectrumSpec) -> crate::spectral::input::SpectrumGroup {
    use rand_distr::{ChiSquared, Distribution};
    let [lo, hi] = spec.range;
    let n = spec.points;
    let freqs: Vec<f64> = (0..n)
        .map(|i| lo * (hi / lo).powf(i as f64 / (n.max(2) - 1) as f64))
        .collect();
    let chi = ChiSquared::new(spec.dof).ok();
    let mut psd = Array2::zeros((spec.runs, n));
    for r in 0..spec.runs {
        let mut rng = crate::resample::replicate_rng(spec.seed, r as u64);
        for (j, &f) in freqs.iter().enumerate() {
            let g = 2.0 * crate::settings::BOLTZMANN_SI * spec.t_eff(f) * spec.loss(f)
                / (std::f64::consts::PI * f);
            let scatter = chi.as_ref().map_or(1.0, |c| c.sample(&mut rng) / spec.dof);
            psd[[r, j]] = g * scatter;
        }
    }
    let loss = Array2::from_shape_fn((spec.runs, n), |(_, j)| spec.loss(freqs[j]));
    crate::spectral::input::SpectrumGroup {
        tw: None,
        runs: (0..spec.runs).map(|r| format!("run{:02}", r + 1)).collect(),
        psd,
        loss,
        dof: Some(Array2::from_elem((spec.runs, n), spec.dof)),
        freqs,
    }
}
