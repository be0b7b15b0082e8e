//! Invented noise records after a quench, with a known T_eff(f, tw): a fast
//! Ornstein–Uhlenbeck mode at the bath temperature T and a slow one whose temperature
//! relaxes with age, `T_s(t) = T (1 + H / (1 + t/t₀))`.
//!
//! Each mode is sampled exactly (an AR(1) step of `dt = 1/fs` whose innovation variance
//! uses the temperature at that step), so the record is the sampled process, and the
//! truth is stated for it: the one-sided PSD of a sampled mode of variance `v = μ T τ`
//! is `G(f) = 2 dt v (1 − e²) / (1 − 2 e cos 2πf dt + e²)`, `e = exp(−dt/τ)` (the AR(1)
//! spectrum; common practice), and the loss is defined as what makes the equilibrium
//! system obey `G = 2 k T χ''/(π f)` (the `loss` convention, k = 1):
//! `χ''(f) = π f (G_fast + G_slow)/2` at T = 1. In a window `[a, b)` of the aging record
//! the slow mode's PSD is that at the window's mean temperature `T̄_s` (quasi-static:
//! `τ_s` is short against the age), so
//! `T_eff(f; a, b) = (T G_fast + T̄_s G_slow) / (G_fast + G_slow)` with the G's at T = 1.
//! Invented data with a built-in answer, not a model of any material.

use rand::RngExt;
use rand_distr::StandardNormal;
use rayon::prelude::*;

/// The recipe of aging noise records.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AgingNoiseSpec {
    /// Independent runs (records, each starting at a quench).
    pub runs: usize,
    /// Random seed (run i uses stream i).
    pub seed: u64,
    /// Sample rate (Hz).
    pub fs: f64,
    /// Record length after the quench (s).
    pub duration: f64,
    /// Bath temperature T (k = 1).
    pub temperature: f64,
    /// Fast mode: mobility and time (s).
    pub fast: [f64; 2],
    /// Slow mode: mobility and time (s).
    pub slow: [f64; 2],
    /// The slow mode's excess temperature at the quench, in units of T.
    pub hot: f64,
    /// The age scale t₀ (s) of its relaxation.
    pub age_scale: f64,
}

impl Default for AgingNoiseSpec {
    fn default() -> Self {
        AgingNoiseSpec {
            runs: 20,
            seed: 1,
            fs: 100.0,
            duration: 1000.0,
            temperature: 1.0,
            fast: [1.0, 0.05],
            slow: [0.1, 1.0],
            hot: 4.0,
            age_scale: 50.0,
        }
    }
}

impl AgingNoiseSpec {
    /// The slow mode's temperature at age `t`.
    pub fn slow_temperature(&self, t: f64) -> f64 {
        self.temperature * (1.0 + self.hot / (1.0 + t / self.age_scale))
    }

    /// Its mean over the window `[a, b)`.
    pub fn mean_slow_temperature(&self, [a, b]: [f64; 2]) -> f64 {
        let t0 = self.age_scale;
        self.temperature * (1.0 + self.hot * t0 * ((t0 + b) / (t0 + a)).ln() / (b - a))
    }

    /// One-sided PSD at `f` of a sampled mode `[μ, τ]` at temperature `temp`.
    fn mode_psd(&self, [mu, tau]: [f64; 2], temp: f64, f: f64) -> f64 {
        let dt = 1.0 / self.fs;
        let e = (-dt / tau).exp();
        let v = mu * temp * tau;
        let c = (2.0 * std::f64::consts::PI * f * dt).cos();
        2.0 * dt * v * (1.0 - e * e) / (1.0 - 2.0 * e * c + e * e)
    }

    /// The loss χ''(f) of the sampled system (the `loss` convention, k = 1).
    pub fn loss(&self, f: f64) -> f64 {
        let g = self.mode_psd(self.fast, 1.0, f) + self.mode_psd(self.slow, 1.0, f);
        std::f64::consts::PI * f * g / 2.0
    }

    /// The true `T_eff(f)` of the window `[a, b)` (seconds after the quench).
    pub fn t_eff(&self, f: f64, window: [f64; 2]) -> f64 {
        let (gf, gs) = (
            self.mode_psd(self.fast, 1.0, f),
            self.mode_psd(self.slow, 1.0, f),
        );
        (self.temperature * gf + self.mean_slow_temperature(window) * gs) / (gf + gs)
    }

    /// The records, one per run, starting at the quench; the fast mode starts in
    /// equilibrium at T, the slow one at `T_s(0)`.
    pub fn records(&self) -> Vec<Vec<f64>> {
        let n = (self.duration * self.fs).round() as usize;
        let dt = 1.0 / self.fs;
        let step = |[mu, tau]: [f64; 2]| {
            let e = (-dt / tau).exp();
            (e, mu * tau * (1.0 - e * e))
        };
        let (ef, vf) = step(self.fast);
        let (es, vs) = step(self.slow);
        (0..self.runs)
            .into_par_iter()
            .map(|r| {
                let mut rng = crate::resample::replicate_rng(self.seed, r as u64);
                let mut z = || rng.sample::<f64, _>(StandardNormal);
                let t0 = self.slow_temperature(0.0);
                let mut xf = (self.fast[0] * self.temperature * self.fast[1]).sqrt() * z();
                let mut xs = (self.slow[0] * t0 * self.slow[1]).sqrt() * z();
                (0..n)
                    .map(|i| {
                        let ts = self.slow_temperature(i as f64 * dt);
                        xf = ef * xf + (vf * self.temperature).sqrt() * z();
                        xs = es * xs + (vs * ts).sqrt() * z();
                        xf + xs
                    })
                    .collect()
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_sampled_spectrum_integrates_to_the_variance() {
        // Source: common practice — ∫₀^{fs/2} G(f) df = v for the AR(1) spectrum.
        let s = AgingNoiseSpec::default();
        let n = 200_000;
        let df = s.fs / 2.0 / n as f64;
        let total: f64 = (0..n)
            .map(|i| s.mode_psd(s.slow, 1.0, (i as f64 + 0.5) * df) * df)
            .sum();
        let v = s.slow[0] * s.slow[1];
        assert!((total - v).abs() < 1e-3 * v, "{total} vs {v}");
        // The window mean of T_s is between its ends.
        let m = s.mean_slow_temperature([100.0, 300.0]);
        assert!(s.slow_temperature(300.0) < m && m < s.slow_temperature(100.0));
    }
}
