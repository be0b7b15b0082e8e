//! Intermittency: are a noise record's windowed PSD values as scattered as Gaussian noise
//! allows? Chi-square intervals of a Welch PSD assume they are; rare bursts (or the power
//! drifting within a record) make them too narrow.
//!
//! For a stationary Gaussian record, one segment's Hann-windowed periodogram at a bin away
//! from 0 and Nyquist, over its expectation, is Exp(1) = χ²₂/2; a band's per-segment sum
//! of several bins is close to a scaled χ² with fewer degrees of freedom than twice the
//! bins, because neighbouring Hann bins correlate, and neighbouring segments correlate
//! when they overlap. Rather than trust a nominal law, the test here calibrates its
//! statistic on Gaussian surrogates of the record itself:
//!
//! 1. **Segments exactly as Welch cuts them** (`spectral::welch`): segments of `L` samples
//!    at hops of `L − overlap` from the record's start, each segment's mean removed, the
//!    periodic Hann window. Per segment `s` of run `r` and band `b` (log-spaced bands of
//!    Welch bins from bin 2 to the last bin below Nyquist), the band power
//!    `P_{r,s,b} = Σ_{k∈b} |X_{r,s}(k)|²`.
//! 2. **Statistic**: per band, the normalized variance `V_b = mean_{r,s} (u_{r,s,b} − 1)²`
//!    of `u_{r,s,b} = P_{r,s,b} / mean_s P_{r,s,b}` (each run over its own mean, so runs
//!    at different levels do not count as intermittency). It is scale-free; bursts in a
//!    few segments raise it.
//! 3. **Null by surrogates**: each run (the part its segments cover, the straight line
//!    through its end points removed so the circular transform has no jump) is Fourier
//!    transformed; a surrogate keeps every amplitude and draws every phase uniformly
//!    (Theiler et al. 1992). It is a stationary Gaussian-like record with the record's own
//!    spectrum, cut and windowed the same way, so bin and segment correlations are those
//!    of the data.
//! 4. **All bands at once** (single-step max-T, Westfall & Young 1993): for the data and
//!    each of its `B` surrogates (exchangeable under the null), each band's score is
//!    `z_b = (ln V_b − median) / (1.4826 MAD)`, median and median absolute deviation taken
//!    over all `B + 1`; band `b`'s adjusted p-value is the share of the `B + 1` whose
//!    largest score over bands reaches the data's `z_b`. The noise is called intermittent
//!    when any band's adjusted p-value is at most `1 − level`; the chance of that for
//!    Gaussian noise is at most `1 − level` whatever the number of bands (measured:
//!    docs/validation.md, "Intermittency"). (Taking the minimum of per-band rank p-values
//!    instead would put a floor near `bands / (B + 1)` under the adjusted p-value: with 15
//!    bands and 199 surrogates it could hardly reject at 5%.)
//!
//! Reported with the test, per band: the excess kurtosis of the band-passed record (0 for
//! Gaussian noise) with its standard error under Gaussianity, `√(24 Σ_τ ρ(τ)⁴ / n)` for a
//! record of `n` samples with autocorrelation `ρ` (the variance of the fourth Hermite
//! polynomial of correlated Gaussian values); and the median over the mean of the
//! per-segment band powers (`ln 2` for a single bin's Exp(1)), against its surrogate value,
//! whose ratio is the median-based `T_eff` over the mean-based one (1 for Gaussian noise,
//! below 1 when bursts inflate the mean).
//!
//! ## Reference
//! Percival & Walden, *Spectral Analysis for Physical Applications* (1993), ch. 6 (the
//! periodogram's χ²₂ law); J. Theiler, S. Eubank, A. Longtin, B. Galdrikian, J. D. Farmer,
//! "Testing for nonlinearity in time series: the method of surrogate data", Physica D 58,
//! 77–94 (1992); P. H. Westfall & S. S. Young, *Resampling-Based Multiple Testing* (1993),
//! (single-step max-T adjustment).

use super::noise::FIRST_BIN;
use super::welch::{WelchSettings, bin_correlation, hann};
use crate::error::{Error, Result};
use crate::report::format::{p_clause, sig};
use rand::RngExt;
use rayon::prelude::*;
use realfft::RealFftPlanner;
use realfft::num_complex::Complex;
use serde::Serialize;
use std::sync::Arc;

/// Settings of the intermittency test.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IntermittencySettings {
    /// Level of the test: Gaussian noise is called intermittent with chance at most
    /// `1 − level`.
    pub level: f64,
    /// Gaussian surrogates of the record that calibrate the test.
    pub surrogates: usize,
    /// Seed of the surrogates' random streams.
    pub seed: u64,
    /// Log-spaced bands per decade of Welch bins (used when `bands` is `None`).
    pub bands_per_decade: usize,
    /// Bands `[fmin, fmax]` in hertz, instead of the log-spaced ones.
    pub bands: Option<Vec<[f64; 2]>>,
}

impl Default for IntermittencySettings {
    fn default() -> Self {
        IntermittencySettings {
            level: 0.95,
            surrogates: 199,
            seed: 1,
            bands_per_decade: 5,
            bands: None,
        }
    }
}

impl IntermittencySettings {
    /// Checks the ranges.
    ///
    /// # Errors
    /// [`Error::Setting`] naming the setting.
    pub fn validate(&self) -> Result<()> {
        crate::common::check_level(self.level)?;
        // The smallest Monte Carlo p-value is 1/(B + 1): below 1/(1 − level) − 1
        // surrogates the test could never reject.
        let need = (1.0 / (1.0 - self.level)).ceil() as usize - 1;
        if self.surrogates < need.max(1) {
            return Err(Error::Setting(format!(
                "--surrogates is {}, expected at least {} at level {} (the smallest p-value is 1/(surrogates + 1))",
                self.surrogates,
                need.max(1),
                self.level
            )));
        }
        if self.bands_per_decade == 0 {
            return Err(Error::Setting(
                "--bands-per-decade is 0, expected at least 1".into(),
            ));
        }
        if let Some(bands) = &self.bands {
            for &[lo, hi] in bands {
                if !(lo >= 0.0 && hi > lo && hi.is_finite()) {
                    return Err(Error::Setting(format!(
                        "band {lo}:{hi} is not FMIN:FMAX with 0 <= FMIN < FMAX (hertz)"
                    )));
                }
            }
        }
        Ok(())
    }
}

/// Whether the record's noise is Gaussian enough for chi-square intervals.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IntermittencyVerdict {
    /// No band's per-segment power scatters beyond its Gaussian surrogates at the level.
    ConsistentWithGaussian,
    /// At least one band does: bursts, or the power drifting within the record.
    Intermittent,
}

/// What a finding is about, as a stable code.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IntermittencyCode {
    /// One band's per-segment power scatters more than Gaussian noise allows.
    IntermittentBand,
    /// The noise is not Gaussian: chi-square intervals are too narrow; resample runs.
    NonGaussianIntervals,
    /// Not Gaussian, and a single run: runs cannot be resampled.
    SingleRunNoResampling,
    /// Not Gaussian, and fewer than `analysis::FEW_RUNS` runs to resample.
    FewRunsToResample,
}

/// A finding with its sentence.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IntermittencyFinding {
    /// What it is about.
    pub code: IntermittencyCode,
    /// The band (Hz) it is about, when it is about one.
    pub band: Option<[f64; 2]>,
    /// The finding in words.
    pub message: String,
}

/// One band's statistics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IntermittencyBand {
    /// Frequency of the band's first Welch bin (Hz).
    pub fmin: f64,
    /// Frequency of its last Welch bin (Hz).
    pub fmax: f64,
    /// Welch bins in the band.
    pub bins: usize,
    /// Segments over all runs.
    pub segments: usize,
    /// The normalized variance of the per-segment band powers (each run over its mean).
    pub normalized_variance: f64,
    /// Its mean over the Gaussian surrogates.
    pub null_normalized_variance: f64,
    /// Its `level` quantile over the surrogates (the band alone, not adjusted).
    pub null_quantile: f64,
    /// `normalized_variance / null_normalized_variance` (about 1 for Gaussian noise).
    pub variance_ratio: f64,
    /// Degrees of freedom of a segment's band power by the nominal χ² law (flat spectrum,
    /// Hann bin correlation): `2M / (1 + 2 Σ_m (1 − m/M) ρ²_m)` for `M` bins; its normalized
    /// variance would be `2 / dof` without overlap.
    pub nominal_dof: f64,
    /// The band's own Monte Carlo p-value (not adjusted).
    pub p_value: f64,
    /// Its p-value adjusted for all bands (single-step max-T over bands).
    pub p_adjusted: f64,
    /// Whether `p_adjusted ≤ 1 − level`.
    pub flagged: bool,
    /// Excess kurtosis of the band-passed record (0 for Gaussian noise), runs combined by
    /// inverse variance (`None` when the band-passed record has no power).
    pub excess_kurtosis: Option<f64>,
    /// Its standard error under Gaussianity (asymptotic; a little high when the record is
    /// short against the band's correlation time).
    pub kurtosis_se: Option<f64>,
    /// Median over mean of the per-segment band powers.
    pub median_over_mean: f64,
    /// Its mean over the Gaussian surrogates (`ln 2` for a single bin without overlap).
    pub null_median_over_mean: f64,
    /// The median-based `T_eff` over the mean-based one in this band:
    /// `median_over_mean / null_median_over_mean` (1 for Gaussian noise).
    pub teff_median_over_mean: f64,
}

/// The result of [`intermittency`].
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct IntermittencyReport {
    /// The settings used.
    pub settings: IntermittencySettings,
    /// The Welch settings the segments follow.
    pub welch: WelchSettings,
    /// Runs.
    pub runs: usize,
    /// Segments of each run.
    pub segments_per_run: Vec<usize>,
    /// Per band.
    pub bands: Vec<IntermittencyBand>,
    /// The test's p-value over all bands (the smallest adjusted p-value).
    pub p_value: f64,
    /// The verdict at the level.
    pub verdict: IntermittencyVerdict,
    /// Whether intervals should come from resampling runs rather than chi-square.
    pub needs_run_resampling: bool,
    /// The interval policy in one sentence.
    pub interval_note: String,
    /// Findings, each with its sentence (none when the noise is consistent with Gaussian).
    pub findings: Vec<IntermittencyFinding>,
}

/// Segments of `n` samples at hop `hop` with length `l` (as Welch cuts them).
fn segment_count(n: usize, l: usize, hop: usize) -> usize {
    if n < l { 0 } else { (n - l) / hop + 1 }
}

/// The highest Welch bin below Nyquist.
fn top_bin(l: usize) -> usize {
    if l.is_multiple_of(2) {
        l / 2 - 1
    } else {
        (l - 1) / 2
    }
}

/// Each segment's one-sided periodogram, scaled as Welch's PSD (`2 |X_k|² / (fs Σ w²)`,
/// bin 0 undoubled): their mean over segments is [`super::welch::Welch`]'s PSD of `run`.
///
/// # Errors
/// As [`WelchSettings::validate`]; [`Error::Analysis`] when `run` is shorter than one segment.
pub fn segment_periodograms(run: &[f64], welch: &WelchSettings) -> Result<Vec<Vec<f64>>> {
    welch.validate()?;
    let l = welch.segment;
    let hop = l - welch.overlap;
    let k = segment_count(run.len(), l, hop);
    if k == 0 {
        return Err(Error::Analysis(format!(
            "the record has {} samples, fewer than one segment of {l}",
            run.len()
        )));
    }
    let cut = Cutter::new(l, hop);
    let norm: f64 = cut.window.iter().map(|w| w * w).sum();
    let mut scratch = cut.scratch();
    Ok((0..k)
        .map(|s| {
            cut.transform(&run[s * hop..s * hop + l], &mut scratch);
            scratch
                .out
                .iter()
                .enumerate()
                .map(|(i, c)| {
                    let scale = if i == 0 { 1.0 } else { 2.0 };
                    scale * c.norm_sqr() / (welch.sample_rate * norm)
                })
                .collect()
        })
        .collect())
}

/// Cuts, de-means, windows and transforms segments the way `welch::Welch` does.
struct Cutter {
    l: usize,
    hop: usize,
    window: Vec<f64>,
    fft: Arc<dyn realfft::RealToComplex<f64>>,
}

/// Buffers of one [`Cutter`] transform.
struct CutScratch {
    inp: Vec<f64>,
    out: Vec<Complex<f64>>,
    work: Vec<Complex<f64>>,
}

impl Cutter {
    fn new(l: usize, hop: usize) -> Self {
        Cutter {
            l,
            hop,
            window: hann(l),
            fft: RealFftPlanner::<f64>::new().plan_fft_forward(l),
        }
    }

    fn scratch(&self) -> CutScratch {
        CutScratch {
            inp: self.fft.make_input_vec(),
            out: self.fft.make_output_vec(),
            work: self.fft.make_scratch_vec(),
        }
    }

    /// One segment's transform into `sc.out` (mean removed, Hann window).
    fn transform(&self, seg: &[f64], sc: &mut CutScratch) {
        let mean = seg.iter().sum::<f64>() / self.l as f64;
        for ((i, s), w) in sc.inp.iter_mut().zip(seg).zip(&self.window) {
            *i = (s - mean) * w;
        }
        // Lengths come from the same plan, so the transform cannot fail.
        let _ = self
            .fft
            .process_with_scratch(&mut sc.inp, &mut sc.out, &mut sc.work);
    }

    /// The mean over segments of `|X_s(k)|²` at every bin `k = 0..=L/2`.
    fn mean_periodogram(&self, x: &[f64], sc: &mut CutScratch) -> Vec<f64> {
        let k = segment_count(x.len(), self.l, self.hop);
        let mut acc = vec![0.0; self.l / 2 + 1];
        for s in 0..k {
            self.transform(&x[s * self.hop..s * self.hop + self.l], sc);
            for (a, c) in acc.iter_mut().zip(&sc.out) {
                *a += c.norm_sqr() / k as f64;
            }
        }
        acc
    }

    /// Band powers `Σ_{k∈b} |X_s(k)|²` of every segment of `x`: segments × bands, row-major.
    fn band_powers(&self, x: &[f64], bins: &[(usize, usize)], sc: &mut CutScratch) -> Vec<f64> {
        let k = segment_count(x.len(), self.l, self.hop);
        let mut out = Vec::with_capacity(k * bins.len());
        for s in 0..k {
            self.transform(&x[s * self.hop..s * self.hop + self.l], sc);
            for &(k0, k1) in bins {
                out.push(sc.out[k0..=k1].iter().map(|c| c.norm_sqr()).sum());
            }
        }
        out
    }
}

/// The bands as inclusive Welch bin ranges, from the settings.
fn band_bins(welch: &WelchSettings, s: &IntermittencySettings) -> Result<Vec<(usize, usize)>> {
    let l = welch.segment;
    let top = top_bin(l);
    let df = welch.sample_rate / l as f64;
    if let Some(given) = &s.bands {
        return given
            .iter()
            .map(|&[lo, hi]| {
                let k0 = ((lo / df).ceil() as usize).max(FIRST_BIN);
                let k1 = ((hi / df).floor() as usize).min(top);
                if k0 > k1 {
                    Err(Error::Setting(format!(
                        "band {lo}:{hi} holds no Welch bin between {} and {} Hz (bins are {} Hz apart)",
                        sig(FIRST_BIN as f64 * df, 4),
                        sig(top as f64 * df, 4),
                        sig(df, 4)
                    )))
                } else {
                    Ok((k0, k1))
                }
            })
            .collect();
    }
    let (a, b) = (FIRST_BIN as f64, top as f64);
    let n = ((b / a).log10() * s.bands_per_decade as f64)
        .ceil()
        .max(1.0) as usize;
    let edge = |i: usize| a * (b / a).powf(i as f64 / n as f64);
    let mut out = Vec::new();
    let mut k = FIRST_BIN;
    for i in 0..n {
        let hi = if i + 1 == n {
            top + 1
        } else {
            edge(i + 1).ceil() as usize
        };
        let hi = hi.min(top + 1);
        if hi > k {
            out.push((k, hi - 1));
            k = hi;
        }
    }
    Ok(out)
}

/// Per band: the normalized variance and the median of `u` (each run's band powers over
/// their mean), from each run's segments × bands powers.
fn statistics(powers: &[Vec<f64>], nb: usize) -> Result<(Vec<f64>, Vec<f64>)> {
    let total: usize = powers.iter().map(|p| p.len() / nb).sum();
    let mut var = vec![0.0; nb];
    let mut med = Vec::with_capacity(nb);
    let mut u = Vec::with_capacity(total);
    for b in 0..nb {
        u.clear();
        for p in powers {
            let k = p.len() / nb;
            let mean = (0..k).map(|s| p[s * nb + b]).sum::<f64>() / k as f64;
            if !(mean > 0.0 && mean.is_finite()) {
                return Err(Error::Analysis(
                    "a run has no power (or not a finite one) in a band; expected a noise record"
                        .into(),
                ));
            }
            u.extend((0..k).map(|s| p[s * nb + b] / mean));
        }
        var[b] = u.iter().map(|v| (v - 1.0).powi(2)).sum::<f64>() / total as f64;
        u.sort_by(f64::total_cmp);
        let m = u.len();
        med.push(if m % 2 == 1 {
            u[m / 2]
        } else {
            0.5 * (u[m / 2 - 1] + u[m / 2])
        });
    }
    Ok((var, med))
}

/// One run prepared for surrogates and band-passing: the samples its segments cover, the
/// straight line through the end points removed, and the amplitudes of its transform.
struct Prepared {
    /// The transform of the de-trended samples.
    spectrum: Vec<Complex<f64>>,
    /// The transform of the samples with only their mean removed (for the kurtosis: the
    /// end-point line that the surrogates need adds a ramp whose 1/f transform dominates
    /// narrow low bands).
    plain: Vec<Complex<f64>>,
    n: usize,
}

impl Prepared {
    fn new(x: &[f64]) -> Self {
        let n = x.len();
        let (a, b) = (x[0], x[n - 1]);
        let slope = (b - a) / (n - 1) as f64;
        let mut y: Vec<f64> = x
            .iter()
            .enumerate()
            .map(|(i, v)| v - a - slope * i as f64)
            .collect();
        let mean = y.iter().sum::<f64>() / n as f64;
        y.iter_mut().for_each(|v| *v -= mean);
        let fft = RealFftPlanner::<f64>::new().plan_fft_forward(n);
        let mut spectrum = fft.make_output_vec();
        // Lengths come from the same plan, so the transform cannot fail.
        let _ = fft.process(&mut y, &mut spectrum);
        let raw_mean = x.iter().sum::<f64>() / n as f64;
        let mut z: Vec<f64> = x.iter().map(|v| v - raw_mean).collect();
        let mut plain = fft.make_output_vec();
        let _ = fft.process(&mut z, &mut plain);
        Prepared { spectrum, plain, n }
    }

    /// A surrogate: every amplitude kept, every phase drawn (0 Hz empty; Nyquist real with
    /// a random sign).
    fn surrogate(
        &self,
        rng: &mut rand_chacha::ChaCha8Rng,
        inv: &dyn realfft::ComplexToReal<f64>,
        buf: &mut Vec<Complex<f64>>,
    ) -> Vec<f64> {
        buf.clear();
        buf.extend(self.spectrum.iter().map(|c| {
            let phase = std::f64::consts::TAU * rng.random::<f64>();
            let (s, co) = phase.sin_cos();
            Complex::new(c.norm() * co, c.norm() * s)
        }));
        buf[0] = Complex::new(0.0, 0.0);
        if self.n.is_multiple_of(2) {
            let last = buf.len() - 1;
            let sign = if rng.random::<bool>() { 1.0 } else { -1.0 };
            buf[last] = Complex::new(sign * self.spectrum[last].norm(), 0.0);
        }
        let mut out = inv.make_output_vec();
        // Imaginary parts at 0 Hz and Nyquist are zero, so the transform cannot fail.
        let _ = inv.process(buf, &mut out);
        out
    }

    /// Excess kurtosis of the record band-passed to `[f0, f1)` (in cycles per sample) and
    /// the sum `Σ_τ ρ(τ)⁴` of the band-passed autocorrelation (circular). `ρ` comes from
    /// `model`, the run's mean segment periodogram per Welch bin, interpolated to the
    /// record's frequencies: the record's own periodogram scatters as χ²₂ from frequency to
    /// frequency and would overstate `Σ ρ⁴` in narrow bands.
    fn band_kurtosis(&self, f0: f64, f1: f64, model: &[f64]) -> Option<(f64, f64)> {
        let n = self.n;
        let l = (model.len() - 1) * 2;
        let inv = RealFftPlanner::<f64>::new().plan_fft_inverse(n);
        let inside = |j: usize| {
            let f = j as f64 / n as f64;
            f >= f0 && f < f1 && j > 0 && (j < n / 2 || !n.is_multiple_of(2))
        };
        let zero = Complex::new(0.0, 0.0);
        let mut band: Vec<Complex<f64>> = self
            .plain
            .iter()
            .enumerate()
            .map(|(j, c)| if inside(j) { *c } else { zero })
            .collect();
        let at = |j: usize| {
            let q = j as f64 * l as f64 / n as f64;
            let k = (q.floor() as usize).min(model.len() - 2);
            let t = q - k as f64;
            (1.0 - t) * model[k] + t * model[k + 1]
        };
        let mut power: Vec<Complex<f64>> = (0..band.len())
            .map(|j| {
                if inside(j) {
                    Complex::new(at(j), 0.0)
                } else {
                    zero
                }
            })
            .collect();
        let mut y = inv.make_output_vec();
        let mut acov = inv.make_output_vec();
        inv.process(&mut band, &mut y).ok()?;
        inv.process(&mut power, &mut acov).ok()?;
        // The record's wrap-around (its last sample against its first) is a step whose
        // band-passed form sits at both ends: leave out two correlation lengths of the band
        // at each end (at most a quarter of the record each).
        let inside_bins = (0..band.len()).filter(|&j| inside(j)).count().max(1);
        let margin = (2 * n).div_ceil(inside_bins).min(n / 4);
        let kept = &y[margin..n - margin];
        let nk = kept.len() as f64;
        let m2 = kept.iter().map(|v| v * v).sum::<f64>() / nk;
        let m4 = kept.iter().map(|v| v.powi(4)).sum::<f64>() / nk;
        if !(m2 > 0.0 && acov[0] > 0.0) {
            return None;
        }
        let s4 = acov.iter().map(|c| (c / acov[0]).powi(4)).sum::<f64>();
        Some((m4 / (m2 * m2) - 3.0, s4 * n as f64 / nk))
    }
}

/// Excess kurtosis of every run band-passed to each band, combined over runs by inverse
/// variance, with its standard error under Gaussianity `√(24 Σ_τ ρ(τ)⁴ / n)`.
fn kurtosis(
    prepared: &[Prepared],
    models: &[Vec<f64>],
    edges: &[(f64, f64)],
) -> Vec<Option<(f64, f64)>> {
    edges
        .par_iter()
        .map(|&(f0, f1)| {
            let (mut num, mut den) = (0.0, 0.0);
            for (p, model) in prepared.iter().zip(models) {
                if let Some((g2, s4)) = p.band_kurtosis(f0, f1, model) {
                    let var = 24.0 * s4 / p.n as f64;
                    num += g2 / var;
                    den += 1.0 / var;
                }
            }
            (den > 0.0).then(|| (num / den, den.recip().sqrt()))
        })
        .collect()
}

/// The median of `v` and its median absolute deviation scaled to a normal standard
/// deviation (1.4826, common practice); the spread is never below `1e-12`.
fn median_mad(v: &[f64]) -> (f64, f64) {
    let median = |mut w: Vec<f64>| {
        w.sort_by(f64::total_cmp);
        let m = w.len();
        if m % 2 == 1 {
            w[m / 2]
        } else {
            0.5 * (w[m / 2 - 1] + w[m / 2])
        }
    };
    let centre = median(v.to_vec());
    let mad = median(v.iter().map(|x| (x - centre).abs()).collect());
    (centre, (1.4826 * mad).max(1e-12))
}

/// `Σ_m (1 − m/M) ρ²_m` over the correlated bin lags, for `M` adjacent bins.
fn correlation_sum(bin_rho2: &[f64], m_bins: usize) -> f64 {
    bin_rho2
        .iter()
        .enumerate()
        .filter(|(i, _)| i + 1 < m_bins)
        .map(|(i, r)| (1.0 - (i + 1) as f64 / m_bins as f64) * r)
        .sum()
}

/// Tests whether the noise of `runs` (raw records sampled as `welch` says, one or more
/// independent runs) is as Gaussian as chi-square intervals assume: per band, the scatter
/// of per-segment band powers against Gaussian surrogates of the record, all bands at
/// once at the settings' level; with each band's excess kurtosis and median-to-mean ratio.
/// See the module header for the method.
///
/// # Errors
/// [`Error::Setting`] for settings out of range or a band that holds no Welch bin;
/// [`Error::Analysis`] when there is no run, a run is shorter than two segments or holds a
/// value that is not finite, or a run has no power in a band.
///
/// # Examples
/// ```
/// use fdtemp::spectral::intermittency::{IntermittencySettings, IntermittencyVerdict, intermittency};
/// use fdtemp::spectral::welch::WelchSettings;
/// use rand::RngExt;
/// let mut rng = fdtemp::resample::replicate_rng(3, 0);
/// let run: Vec<f64> = (0..4096).map(|_| rng.sample(rand_distr::StandardNormal)).collect();
/// let welch = WelchSettings { sample_rate: 1.0, segment: 128, overlap: 64 };
/// let report = intermittency(&[run], &welch, &IntermittencySettings::default()).unwrap();
/// assert_eq!(report.verdict, IntermittencyVerdict::ConsistentWithGaussian);
/// assert!(!report.needs_run_resampling);
/// ```
pub fn intermittency(
    runs: &[Vec<f64>],
    welch: &WelchSettings,
    settings: &IntermittencySettings,
) -> Result<IntermittencyReport> {
    welch.validate()?;
    settings.validate()?;
    if runs.is_empty() {
        return Err(Error::Analysis("no run to test".into()));
    }
    let l = welch.segment;
    let hop = l - welch.overlap;
    for (r, x) in runs.iter().enumerate() {
        if segment_count(x.len(), l, hop) < 2 {
            return Err(Error::Analysis(format!(
                "run {} has {} samples, fewer than two segments of {l} (hop {hop}); lower --segment",
                r + 1,
                x.len()
            )));
        }
        if let Some(i) = x.iter().position(|v| !v.is_finite()) {
            return Err(Error::Analysis(format!(
                "run {} holds {} at sample {}; expected finite numbers",
                r + 1,
                x[i],
                i + 1
            )));
        }
    }
    let bins = band_bins(welch, settings)?;
    let nb = bins.len();
    let df = welch.sample_rate / l as f64;
    let cut = Cutter::new(l, hop);

    // The samples each run's segments cover.
    let used: Vec<&[f64]> = runs
        .iter()
        .map(|x| &x[..(segment_count(x.len(), l, hop) - 1) * hop + l])
        .collect();
    let segments_per_run: Vec<usize> = used
        .iter()
        .map(|x| segment_count(x.len(), l, hop))
        .collect();
    let mut sc = cut.scratch();
    let data_powers: Vec<Vec<f64>> = used
        .iter()
        .map(|x| cut.band_powers(x, &bins, &mut sc))
        .collect();
    let (v0, med0) = statistics(&data_powers, nb)?;

    let prepared: Vec<Prepared> = used.iter().map(|x| Prepared::new(x)).collect();
    let nr = runs.len();
    let b_total = settings.surrogates;
    let null: Vec<(Vec<f64>, Vec<f64>)> = (0..b_total)
        .into_par_iter()
        .map(|i| {
            let mut sc = cut.scratch();
            let mut buf = Vec::new();
            let powers: Vec<Vec<f64>> = prepared
                .iter()
                .enumerate()
                .map(|(r, p)| {
                    let mut rng =
                        crate::resample::replicate_rng(settings.seed, (i * nr + r) as u64);
                    let inv = RealFftPlanner::<f64>::new().plan_fft_inverse(p.n);
                    let x = p.surrogate(&mut rng, inv.as_ref(), &mut buf);
                    cut.band_powers(&x, &bins, &mut sc)
                })
                .collect();
            // A surrogate keeps the record's amplitudes, so it has power wherever the
            // record has; a failure here would be a record with none, caught above.
            statistics(&powers, nb).unwrap_or_else(|_| (vec![f64::NAN; nb], vec![f64::NAN; nb]))
        })
        .collect();

    // Data (index 0) and surrogates, exchangeable under the null.
    let all: Vec<&[f64]> = std::iter::once(v0.as_slice())
        .chain(null.iter().map(|(v, _)| v.as_slice()))
        .collect();
    let n_all = all.len();
    // Per band: the unadjusted count #{j : V_b^j ≥ V_b^0}, and every member's score
    // z_b = (ln V_b − median) / (1.4826 MAD), median and MAD over all B + 1 (a symmetric
    // function of them, so the scores stay exchangeable).
    let mut count0 = vec![0usize; nb];
    let mut score = vec![vec![0.0f64; nb]; n_all];
    for b in 0..nb {
        let logs: Vec<f64> = all.iter().map(|v| v[b].ln()).collect();
        count0[b] = logs
            .iter()
            .filter(|x| x.total_cmp(&logs[0]).is_ge())
            .count();
        let (centre, spread) = median_mad(&logs);
        for (i, x) in logs.iter().enumerate() {
            score[i][b] = (x - centre) / spread;
        }
    }
    // Single-step max-T: each member's largest score over bands.
    let max_score: Vec<f64> = score
        .iter()
        .map(|z| z.iter().copied().fold(f64::NEG_INFINITY, f64::max))
        .collect();
    let alpha = 1.0 - settings.level;
    let adjusted =
        |z: f64| max_score.iter().filter(|m| m.total_cmp(&z).is_ge()).count() as f64 / n_all as f64;

    let edges: Vec<(f64, f64)> = bins
        .iter()
        .map(|&(k0, k1)| ((k0 as f64 - 0.5) / l as f64, (k1 as f64 + 0.5) / l as f64))
        .collect();
    let models: Vec<Vec<f64>> = used
        .iter()
        .map(|x| cut.mean_periodogram(x, &mut sc))
        .collect();
    let kurt = kurtosis(&prepared, &models, &edges);
    let bin_rho2 = bin_correlation(&cut.window);
    let total_segments: usize = segments_per_run.iter().sum();

    let bands: Vec<IntermittencyBand> = (0..nb)
        .map(|b| {
            let (k0, k1) = bins[b];
            let m = k1 - k0 + 1;
            let mut nulls: Vec<f64> = null.iter().map(|(v, _)| v[b]).collect();
            nulls.sort_by(f64::total_cmp);
            let null_mean = nulls.iter().sum::<f64>() / nulls.len() as f64;
            let null_med = null.iter().map(|(_, md)| md[b]).sum::<f64>() / null.len() as f64;
            let p_adjusted = adjusted(score[0][b]);
            IntermittencyBand {
                fmin: k0 as f64 * df,
                fmax: k1 as f64 * df,
                bins: m,
                segments: total_segments,
                normalized_variance: v0[b],
                null_normalized_variance: null_mean,
                null_quantile: crate::resample::quantile_sorted(&nulls, settings.level),
                variance_ratio: v0[b] / null_mean,
                nominal_dof: 2.0 * m as f64 / (1.0 + 2.0 * correlation_sum(&bin_rho2, m)),
                p_value: count0[b] as f64 / n_all as f64,
                p_adjusted,
                flagged: p_adjusted <= alpha,
                excess_kurtosis: kurt[b].map(|k| k.0),
                kurtosis_se: kurt[b].map(|k| k.1),
                median_over_mean: med0[b],
                null_median_over_mean: null_med,
                teff_median_over_mean: med0[b] / null_med,
            }
        })
        .collect();
    let p_value = bands.iter().map(|b| b.p_adjusted).fold(1.0, f64::min);
    let flagged = bands.iter().any(|b| b.flagged);
    let verdict = if flagged {
        IntermittencyVerdict::Intermittent
    } else {
        IntermittencyVerdict::ConsistentWithGaussian
    };
    let (interval_note, findings) = words(&bands, p_value, nr, settings);
    Ok(IntermittencyReport {
        settings: settings.clone(),
        welch: *welch,
        runs: nr,
        segments_per_run,
        bands,
        p_value,
        verdict,
        needs_run_resampling: flagged,
        interval_note,
        findings,
    })
}

/// A band's edges in words.
fn band_words(b: &IntermittencyBand) -> String {
    format!("{}–{} Hz", sig(b.fmin, 3), sig(b.fmax, 3))
}

/// The interval policy's sentence and the findings.
fn words(
    bands: &[IntermittencyBand],
    p: f64,
    runs: usize,
    s: &IntermittencySettings,
) -> (String, Vec<IntermittencyFinding>) {
    let b_total = s.surrogates;
    let how = format!(
        "{}, all {} bands at once against {} Gaussian surrogates of the record",
        p_clause(p, b_total),
        bands.len(),
        b_total
    );
    let flagged: Vec<&IntermittencyBand> = bands.iter().filter(|b| b.flagged).collect();
    if flagged.is_empty() {
        return (
            format!(
                "The windowed PSD values scatter as Gaussian noise allows in every band ({how}): \
                 chi-square intervals are usable."
            ),
            Vec::new(),
        );
    }
    let mut findings: Vec<IntermittencyFinding> = flagged
        .iter()
        .map(|b| IntermittencyFinding {
            code: IntermittencyCode::IntermittentBand,
            band: Some([b.fmin, b.fmax]),
            message: format!(
                "{}: single segments' band power scatters {} times as much as for Gaussian \
                 noise (adjusted {}){}; the median-based T_eff is {} of the mean-based.",
                band_words(b),
                sig(b.variance_ratio, 3),
                p_clause(b.p_adjusted, b_total),
                match (b.excess_kurtosis, b.kurtosis_se) {
                    (Some(k), Some(se)) => format!(
                        "; excess kurtosis of the band-passed record {} ± {} (0 for Gaussian noise)",
                        sig(k, 3),
                        sig(se, 2)
                    ),
                    _ => String::new(),
                },
                sig(b.teff_median_over_mean, 3)
            ),
        })
        .collect();
    let note = format!(
        "The noise is not Gaussian ({how}): in {} of {} bands single segments' power scatters \
         more than Gaussian noise allows — rare bursts, or the power drifting within the record. \
         Chi-square intervals assume Gaussian noise and are too narrow here; intervals should \
         come from resampling runs.",
        flagged.len(),
        bands.len()
    );
    findings.push(IntermittencyFinding {
        code: IntermittencyCode::NonGaussianIntervals,
        band: None,
        message: note.clone(),
    });
    let few = super::analysis::FEW_RUNS;
    if runs < 2 {
        findings.push(IntermittencyFinding {
            code: IntermittencyCode::SingleRunNoResampling,
            band: None,
            message: "The record is a single run, so runs cannot be resampled: record several \
                      independent runs (or cut a long record into runs) for intervals that hold."
                .into(),
        });
    } else if runs < few {
        findings.push(IntermittencyFinding {
            code: IntermittencyCode::FewRunsToResample,
            band: None,
            message: format!(
                "Only {runs} runs to resample (fewer than {few}): intervals from resampling runs \
                 are short with so few."
            ),
        });
    }
    (note, findings)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_bands_tile_the_bins_from_bin_two_to_below_nyquist() {
        let w = WelchSettings {
            sample_rate: 1.0,
            segment: 256,
            overlap: 128,
        };
        let bins = band_bins(&w, &IntermittencySettings::default()).unwrap();
        assert_eq!(bins[0].0, FIRST_BIN);
        assert_eq!(bins[bins.len() - 1].1, 127);
        for pair in bins.windows(2) {
            assert_eq!(pair[0].1 + 1, pair[1].0);
        }
    }

    #[test]
    fn nominal_dof_of_one_bin_is_two() {
        // Source: Percival & Walden (1993), ch. 6: one periodogram value is χ²₂ (scaled).
        assert!((2.0 / (1.0 + 2.0 * correlation_sum(&[4.0 / 9.0], 1)) - 2.0).abs() < 1e-15);
    }
}
