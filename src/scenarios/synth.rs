//! Campaigns with a known truth, for the demo and the known-truth tests.
//!
//! The sample-mean curves lie exactly on a chosen parametric relation: `C(t,tw)` decays in
//! two steps (a fast relaxation to the plateau `q`, then a slow aging decay that scales
//! with `t/tw`), and `k T χ̄ = 1 − C` for `C ≥ q`, `1 − q + X (q − C)` below (the default
//! [`Shape::TwoLines`]; [`Shape::Smooth`] bends smoothly below `q` instead). Each sample
//! adds zero-mean noise that is correlated along `t` (an AR(1) sequence) and between C and
//! χ, as samples from one run of a simulation are, and whose size may grow as C decays
//! (`noise_growth`). So the mean over infinitely many samples is the truth, and a correct
//! estimator with correct intervals recovers it.
//!
//! Special cases: `ratio = 1` is equilibrium (one straight line of slope −1, for either
//! shape); `plateau = 1` has no fast part, so the truth is the single line `X (1 − C)`.
//!
//! These are invented data with a built-in answer, not a simulation of any dynamics.

use crate::error::Result;
use crate::twotime::campaign::{Campaign, GridPoint};
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
    /// Later times per waiting time (log-spaced from `tw + first_lag` to `tw + 30 tw`).
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
    /// Growth of the noise as C decays: at a point whose true mean correlation is `C̄`, the
    /// standard deviation of both C and k T χ is `noise · (1 + noise_growth · (1 − C̄))`
    /// (0: the same `noise` everywhere).
    #[serde(skip_serializing_if = "is_zero")]
    pub noise_growth: f64,
    /// The shape of the true relation below the plateau.
    #[serde(skip_serializing_if = "Shape::is_two_lines")]
    pub shape: Shape,
    /// The first later time's lag `t − tw` (default 0.1). A larger lag leaves fewer points
    /// in the fast regime, above the plateau.
    #[serde(skip_serializing_if = "is_default_first_lag")]
    pub first_lag: f64,
    /// An approach of X to its long-age value `ratio`: `[A, α]` adds `A · tw^−α` to the
    /// ratio at waiting time `tw`, so that below the plateau
    /// `k T χ̄ = y∞(C̄) + A (q − C̄) · tw^−α` (none: no such term).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub approach: Option<[f64; 2]>,
}

/// The default [`SynthSpec::first_lag`].
pub const FIRST_LAG: f64 = 0.1;

fn is_default_first_lag(v: &f64) -> bool {
    v.to_bits() == FIRST_LAG.to_bits()
}

/// The shape of the true `k T χ̄` against `C̄` below the plateau `q` (above it the slope is
/// always −1, `k T χ̄ = 1 − C̄`).
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Shape {
    /// A straight line of slope −X below `q`: `k T χ̄ = 1 − q + X (q − C̄)`.
    #[default]
    TwoLines,
    /// A local ratio that falls smoothly from 1 at `q` to `X∞ = ratio` at `C̄ = 0`:
    /// `−d(k T χ̄)/dC̄ = X(C̄) = X∞ + (1 − X∞) (C̄/q)^power` (power > 0), so that below `q`
    /// `k T χ̄ = 1 − q + X∞ (q − C̄) + (1 − X∞) q/(power + 1) · (1 − (C̄/q)^(power + 1))`.
    /// Slope and value are continuous at `q`: there is no break, only a bend.
    Smooth {
        /// The exponent of the fall of X(C̄).
        power: f64,
    },
}

impl Shape {
    /// True for the default two lines (used to keep the serialized recipe unchanged).
    pub fn is_two_lines(&self) -> bool {
        matches!(self, Shape::TwoLines)
    }
}

fn is_zero(v: &f64) -> bool {
    *v == 0.0
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
            noise_growth: 0.0,
            shape: Shape::TwoLines,
            first_lag: FIRST_LAG,
            approach: None,
        }
    }
}

impl SynthSpec {
    /// The design of the calibration studies (docs/validation.md): `samples` samples, 3
    /// waiting times × 20 later times, the noise growing as C decays
    /// (`noise_growth` 2), the default truth X = 0.45 below q = 0.6 at T = 0.6.
    pub fn study(samples: usize) -> Self {
        SynthSpec {
            samples,
            points_per_tw: 20,
            noise_growth: 2.0,
            ..SynthSpec::default()
        }
    }

    /// The true mean correlation at `(tw, t)`.
    pub fn correlation(&self, tw: f64, t: f64) -> f64 {
        let fast = (1.0 - self.plateau) * (-(t - tw)).exp();
        let slow = self.plateau * (tw / t).powf(1.2);
        fast + slow
    }

    /// The true ratio at waiting time `tw`.
    pub fn ratio_at(&self, tw: f64) -> f64 {
        let tw0 = self.waiting_times.first().copied().unwrap_or(tw);
        let approach = self.approach.map_or(0.0, |[a, alpha]| a * tw.powf(-alpha));
        self.ratio + self.ratio_per_decade * (tw / tw0).log10() + approach
    }

    /// The true `k T χ` at waiting time `tw` as a function of the mean correlation.
    pub fn response(&self, tw: f64, c: f64) -> f64 {
        let q = self.plateau;
        if c >= q {
            return 1.0 - c;
        }
        let x = self.ratio_at(tw);
        match self.shape {
            Shape::TwoLines => 1.0 - q + x * (q - c),
            Shape::Smooth { power } => {
                let u = (c / q).max(0.0);
                1.0 - q + x * (q - c) + (1.0 - x) * q / (power + 1.0) * (1.0 - u.powf(power + 1.0))
            }
        }
    }

    /// The true local ratio `−d(k T χ̄)/dC̄` at waiting time `tw` and mean correlation `c`
    /// (1 above the plateau).
    pub fn local_ratio(&self, tw: f64, c: f64) -> f64 {
        let q = self.plateau;
        if c >= q {
            return 1.0;
        }
        let x = self.ratio_at(tw);
        match self.shape {
            Shape::TwoLines => x,
            Shape::Smooth { power } => x + (1.0 - x) * (c / q).max(0.0).powf(power),
        }
    }

    /// The standard deviation of one sample's C and k T χ where the true mean is `c`.
    pub fn noise_at(&self, c: f64) -> f64 {
        if self.noise_growth == 0.0 {
            self.noise
        } else {
            self.noise * (1.0 + self.noise_growth * (1.0 - c))
        }
    }

    /// The grid of later times for one waiting time.
    pub fn times(&self, tw: f64) -> Vec<f64> {
        let k = self.points_per_tw;
        let (lo, hi) = (self.first_lag.ln(), (30.0 * tw).ln());
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
            let sd = spec.noise_at(c);
            let nc = sd * e1;
            let ny = sd * (spec.cross * e1 + cross_c * e2);
            corr[[i, j]] = c + nc;
            resp[[i, j]] = (y + ny) / spec.temperature;
        }
    }
    let ids = (0..n).map(|i| format!("s{:03}", i + 1)).collect();
    Campaign::new(ids, points, corr, resp, None)
}

/// Several observables of one invented campaign, one per recipe, measured on the same
/// samples: every recipe must have the same samples, waiting times and points per
/// waiting time. Observable k's noise is `coupling` times a noise shared by all
/// observables (the stream of the first recipe's seed) plus `√(1 − coupling²)` times its
/// own (another stream), so the observables' estimates are correlated across samples as
/// those of one simulation run are.
///
/// # Errors
/// As [`generate`]; [`crate::Error::Setting`] when the recipes' designs differ or
/// `coupling` is outside [0, 1].
pub fn generate_observables(specs: &[SynthSpec], coupling: f64) -> Result<Vec<Campaign>> {
    let Some(first) = specs.first() else {
        return Ok(Vec::new());
    };
    if !(0.0..=1.0).contains(&coupling) {
        return Err(crate::Error::Setting(format!(
            "coupling {coupling} between observables, expected a number in [0, 1]"
        )));
    }
    let design = |s: &SynthSpec| (s.samples, s.waiting_times.clone(), s.points_per_tw);
    if specs.iter().any(|s| design(s) != design(first)) {
        return Err(crate::Error::Setting(
            "the observables' recipes need the same samples, waiting times and points".into(),
        ));
    }
    let own_share = (1.0 - coupling * coupling).sqrt();
    specs
        .iter()
        .enumerate()
        .map(|(k, spec)| {
            let shared = generate(&SynthSpec {
                seed: first.seed,
                ..spec.clone()
            })?;
            let own = generate(&SynthSpec {
                seed: first.seed.wrapping_add(7919 * (k as u64 + 1)),
                ..spec.clone()
            })?;
            let mut corr = shared.corr().clone();
            let mut resp = shared.resp().clone();
            for (j, g) in shared.points().iter().enumerate() {
                let c = spec.correlation(g.tw, g.t);
                let y = spec.response(g.tw, c) / spec.temperature;
                for i in 0..spec.samples {
                    corr[[i, j]] = c
                        + coupling * (shared.corr()[[i, j]] - c)
                        + own_share * (own.corr()[[i, j]] - c);
                    resp[[i, j]] = y
                        + coupling * (shared.resp()[[i, j]] - y)
                        + own_share * (own.resp()[[i, j]] - y);
                }
            }
            Campaign::new(
                shared.sample_ids().to_vec(),
                shared.points().to_vec(),
                corr,
                resp,
                None,
            )
        })
        .collect()
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
            let g = 2.0 * crate::common::BOLTZMANN_SI * spec.t_eff(f) * spec.loss(f)
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

#[cfg(test)]
mod tests {
    use super::*;

    /// Per point: the sample mean of C and of k T χ over many samples, and their standard
    /// errors.
    fn means(spec: &SynthSpec) -> Vec<(GridPoint, [f64; 4])> {
        let c = generate(spec).unwrap();
        let (corr, resp) = (c.corr(), c.resp());
        let n = spec.samples as f64;
        c.points()
            .iter()
            .enumerate()
            .map(|(j, g)| {
                let stats = |col: Vec<f64>| {
                    let m = col.iter().sum::<f64>() / n;
                    let v = col.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1.0);
                    (m, (v / n).sqrt())
                };
                let (mc, sc) = stats(corr.column(j).to_vec());
                let (my, sy) = stats(
                    resp.column(j)
                        .iter()
                        .map(|r| r * spec.temperature)
                        .collect(),
                );
                (*g, [mc, sc, my, sy])
            })
            .collect()
    }

    fn assert_means_converge(spec: &SynthSpec) {
        for (g, [mc, sc, my, sy]) in means(spec) {
            let c = spec.correlation(g.tw, g.t);
            let y = spec.response(g.tw, c);
            // 5 standard errors: a false failure has probability ~6e-7 per number.
            assert!((mc - c).abs() < 5.0 * sc, "C at {g:?}: {mc} vs {c} ± {sc}");
            assert!(
                (my - y).abs() < 5.0 * sy,
                "kTχ at {g:?}: {my} vs {y} ± {sy}"
            );
        }
    }

    #[test]
    fn the_default_recipe_serializes_without_the_new_fields() {
        let v = serde_json::to_value(SynthSpec::default()).unwrap();
        let keys: Vec<&str> = v.as_object().unwrap().keys().map(String::as_str).collect();
        assert!(
            !keys.contains(&"noise_growth") && !keys.contains(&"shape"),
            "{keys:?}"
        );
        let on = SynthSpec {
            noise_growth: 1.0,
            shape: Shape::Smooth { power: 2.0 },
            ..SynthSpec::default()
        };
        let v = serde_json::to_value(on).unwrap();
        assert_eq!(v["shape"]["smooth"]["power"], 2.0);
        assert_eq!(v["noise_growth"], 1.0);
    }

    #[test]
    fn the_smooth_shape_has_the_stated_slope_and_no_kink() {
        let spec = SynthSpec {
            ratio: 0.3,
            plateau: 0.7,
            shape: Shape::Smooth { power: 1.5 },
            ..SynthSpec::default()
        };
        let tw = spec.waiting_times[0];
        let q = spec.plateau;
        // Value and slope continuous at q.
        let h = 1e-6;
        assert!((spec.response(tw, q - h) - (1.0 - q + h)).abs() < 1e-9);
        assert!((spec.local_ratio(tw, q - h) - 1.0).abs() < 1e-5);
        // −dy/dC equals the stated X(C) (central differences), and X(0) = ratio.
        for k in 1..70 {
            let c = k as f64 * 0.01;
            let d = -(spec.response(tw, c + h) - spec.response(tw, c - h)) / (2.0 * h);
            assert!((d - spec.local_ratio(tw, c)).abs() < 1e-6, "c = {c}: {d}");
        }
        assert!((spec.local_ratio(tw, 0.0) - 0.3).abs() < 1e-15);
        // Smoothly decreasing below q.
        let xs: Vec<f64> = (0..70)
            .map(|k| spec.local_ratio(tw, k as f64 * 0.01))
            .collect();
        assert!(xs.windows(2).all(|w| w[1] > w[0]));
    }

    #[test]
    fn equilibrium_is_the_line_of_slope_minus_one_for_either_shape() {
        for shape in [Shape::TwoLines, Shape::Smooth { power: 2.0 }] {
            let spec = SynthSpec {
                ratio: 1.0,
                shape,
                ..SynthSpec::default()
            };
            for k in 0..=100 {
                let c = k as f64 * 0.01;
                let y = spec.response(100.0, c);
                assert!((y - (1.0 - c)).abs() < 1e-14, "{shape:?} c = {c}: {y}");
            }
        }
    }

    #[test]
    fn a_plateau_of_one_is_a_single_line() {
        let spec = SynthSpec {
            ratio: 0.5,
            plateau: 1.0,
            ..SynthSpec::default()
        };
        for &tw in &spec.waiting_times {
            for t in spec.times(tw) {
                let c = spec.correlation(tw, t);
                assert!(c < 1.0);
                assert!((spec.response(tw, c) - 0.5 * (1.0 - c)).abs() < 1e-15);
            }
        }
    }

    #[test]
    fn sample_means_converge_to_the_truth_for_every_new_shape() {
        let base = SynthSpec {
            samples: 4000,
            points_per_tw: 12,
            seed: 99,
            ..SynthSpec::default()
        };
        assert_means_converge(&base);
        assert_means_converge(&SynthSpec {
            noise_growth: 3.0,
            ..base.clone()
        });
        assert_means_converge(&SynthSpec {
            shape: Shape::Smooth { power: 2.0 },
            ratio: 0.25,
            noise_growth: 1.0,
            ..base.clone()
        });
        assert_means_converge(&SynthSpec {
            plateau: 0.95,
            ratio: 0.25,
            ..base.clone()
        });
        assert_means_converge(&SynthSpec {
            ratio: 1.0,
            noise_growth: 2.0,
            ..base
        });
    }

    #[test]
    fn the_noise_grows_as_stated() {
        let spec = SynthSpec {
            samples: 4000,
            points_per_tw: 12,
            noise_growth: 3.0,
            seed: 5,
            ..SynthSpec::default()
        };
        let n = spec.samples as f64;
        for (g, [_, sc, _, sy]) in means(&spec) {
            let sd = spec.noise_at(spec.correlation(g.tw, g.t));
            // The SD of 4000 normal samples is within 5% of the truth (its relative SD is
            // 1/sqrt(2n) ≈ 1.1%).
            for se in [sc, sy] {
                assert!(
                    (se * n.sqrt() / sd - 1.0).abs() < 0.05,
                    "{g:?}: {} vs {sd}",
                    se * n.sqrt()
                );
            }
        }
        let c_end = spec.correlation(10000.0, *spec.times(10000.0).last().unwrap());
        assert!(spec.noise_at(c_end) > 3.5 * spec.noise);
    }

    #[test]
    fn the_edge_break_grid_has_about_five_points_above_the_plateau() {
        // q = 0.95 on 3 waiting times × 20 points: the fast part 0.05 e^(−(t−tw)) keeps C
        // above q only for the first few lags.
        let above = |first_lag: f64| -> Vec<usize> {
            let spec = SynthSpec {
                plateau: 0.95,
                ratio: 0.25,
                points_per_tw: 20,
                first_lag,
                ..SynthSpec::default()
            };
            spec.waiting_times
                .iter()
                .map(|&tw| {
                    let t = spec.times(tw);
                    assert!((t[0] - tw - first_lag).abs() < 1e-9 * tw);
                    t.iter()
                        .filter(|&&t| spec.correlation(tw, t) >= spec.plateau)
                        .count()
                })
                .collect()
        };
        assert_eq!(above(FIRST_LAG), vec![5, 6, 5]);
        // A later first lag leaves fewer than the default 5 points per branch above q.
        assert_eq!(above(0.3), vec![3, 4, 4]);
    }
}
