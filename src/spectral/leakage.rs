//! Hann-window leakage at the lowest Welch bins: the bias a steep spectrum suffers there,
//! predicted from a local power law, and the caution `window_leakage`.
//!
//! A Welch bin `k` reads, in expectation, the true one-sided PSD convolved with the
//! window's normalised spectral kernel `K(ν) = |W(ν)|² / (N Σw²)` (`ν` in bins, `N` the
//! segment length, `∫ K = 1` over a period by Parseval):
//! `E Ĝ_k = ∫_0^{N/2} G(u) [K(k − u) + K(k + u)] du` (positive and negative frequencies).
//! For the periodic Hann window `W(ν) = D(ν)/2 − D(ν − 1)/4 − D(ν + 1)/4` with the
//! Dirichlet kernel `D(ν) = e^{−iπν(N−1)/N} sin(πν) / sin(πν/N)` (exact, not the
//! large-`N` limit), and `Σw² = 3N/8`. `W` vanishes at every integer `ν ≥ 2`, so the
//! removal of each segment's mean does not touch the bins used (from
//! [`super::noise::FIRST_BIN`] = 2 up).
//!
//! With `G(u) = u^{−a}` fitted to the lowest bins, the predicted relative bias of bin `k`
//! is `E Ĝ_k / G(k) − 1`, integrated numerically: in `ln u` from half the record's lowest
//! Fourier frequency (its first line stands for the band from there) to 1 bin (where `K(k − u) ∝ u²` meets `u^{−a}`), on a grid of 1/64 bin up to
//! `k + 64` bins, and the far sidelobes beyond from their asymptote `K(x) ≈ 1/(3π² x⁶)`
//! (the Hann window's sidelobes fall by 18 dB per octave). For white noise (`a = 0`) the
//! bias is zero; for `f⁻²` it is 48, 15, 7 and 3% at bins 2, 3, 4 and 6. Below 3 the
//! integral does not depend on the low cutoff; from `a = 3` on it grows with the log of
//! the record's length, which is why the cutoff comes from the record (tests/leakage.rs:
//! at `f⁻³` with 64 segment lengths per record, 244% predicted at bin 2, 240 ± 3% measured).
//!
//! The slope is the least-squares log–log slope of the mean PSD over the lowest
//! [`SLOPE_BINS`] bins, refined by dividing each bin by its own predicted bias and fitting
//! again (the leaky bins flatten the raw slope). The caution fires when the bias predicted
//! at the first bin exceeds [`LEAKAGE_LIMIT`] even for the slope two standard errors
//! shallower (so a shallow spectrum does not raise it by chance), and names the highest
//! frequency where the bias at the fitted slope exceeds the limit.
//!
//! ## Reference
//! F. J. Harris, "On the use of windows for harmonic analysis with the discrete Fourier
//! transform", Proc. IEEE 66, 51–83 (1978): the Hann window's kernel, its normalisation
//! and its −18 dB/octave sidelobe decay; Percival & Walden (1993), §6.3 (leakage as the
//! convolution of the spectrum with the window's kernel).

use super::findings::SpectralFinding;
use std::f64::consts::PI;

/// The relative bias above which a bin is called biased by leakage.
pub const LEAKAGE_LIMIT: f64 = 0.05;
/// How many of the lowest bins the local power law is fitted to.
pub const SLOPE_BINS: usize = 10;
/// Offsets (bins) integrated on the fine grid; beyond, the sidelobe asymptote.
const NEAR: f64 = 64.0;
/// Grid points per bin on the fine grid.
const PER_BIN: f64 = 64.0;
/// Grid points of the logarithmic part (from the lowest frequency to 1 bin).
const LOG_POINTS: usize = 2000;

/// The Dirichlet kernel `Σ_{n<N} e^{−2πiνn/N}` as (re, im).
fn dirichlet(nu: f64, n: usize) -> (f64, f64) {
    let nf = n as f64;
    let s = (PI * nu / nf).sin();
    let mag = if s.abs() < 1e-12 {
        nf
    } else {
        (PI * nu).sin() / s
    };
    let ph = -PI * nu * (nf - 1.0) / nf;
    (mag * ph.cos(), mag * ph.sin())
}

/// The periodic Hann window's normalised kernel `|W(ν)|² / (N Σw²)` at `ν` bins off.
pub fn hann_kernel(nu: f64, n: usize) -> f64 {
    let (a, b, c) = (
        dirichlet(nu, n),
        dirichlet(nu - 1.0, n),
        dirichlet(nu + 1.0, n),
    );
    let re = 0.5 * a.0 - 0.25 * (b.0 + c.0);
    let im = 0.5 * a.1 - 0.25 * (b.1 + c.1);
    let nf = n as f64;
    (re * re + im * im) / (3.0 * nf * nf / 8.0)
}

/// Trapezoid rule of `f` on `n + 1` points from `lo` to `hi`.
fn trapezoid(lo: f64, hi: f64, n: usize, f: impl Fn(f64) -> f64) -> f64 {
    if hi <= lo {
        return 0.0;
    }
    let h = (hi - lo) / n as f64;
    let inner: f64 = (1..n).map(|i| f(lo + h * i as f64)).sum();
    h * (0.5 * (f(lo) + f(hi)) + inner)
}

/// The predicted relative bias of Welch bin `k` (≥ 1) with a periodic Hann window of `n`
/// samples when the true PSD is `∝ f^{−a}` from `lowest` bins up (half the record's lowest
/// Fourier frequency, in bins: segment length / (2 · record length)) to Nyquist.
///
/// # Formula
/// `∫ u^{−a} [K(k − u) + K(k + u)] du / k^{−a} − 1` over `lowest ≤ u ≤ n/2`.
pub fn leakage_bias(a: f64, k: usize, n: usize, lowest: f64) -> f64 {
    let kf = k as f64;
    let top = n as f64 / 2.0;
    let lowest = lowest.clamp(1e-9, 1.0);
    let g = |u: f64| u.powf(-a) * (hann_kernel(kf - u, n) + hann_kernel(kf + u, n));
    // Below 1 bin, in ln u (the integrand u^{1−a} K(k − u) varies as a power there).
    let low = trapezoid(lowest.ln(), 0.0_f64.min(top.ln()), LOG_POINTS, |t| {
        let u = t.exp();
        u * g(u)
    });
    let near_top = (kf + NEAR).min(top);
    let steps = ((near_top - 1.0) * PER_BIN).round().max(1.0) as usize;
    let near = trapezoid(1.0, near_top, steps, g);
    // Far sidelobes on both sides: ∫_NEAR^∞ x^{−6} (k + x)^{−a} dx / (3π²), with the power
    // law taken at its value at k + NEAR (it changes little against x^{−6}).
    let far = if kf + NEAR < top {
        2.0 * (kf + NEAR).powf(-a) * NEAR.powi(-5) / (5.0 * 3.0 * PI * PI)
    } else {
        0.0
    };
    (low + near + far) / kf.powf(-a) - 1.0
}

/// The local power law `G ∝ f^{−a}`: `(a, standard error)` from the least-squares line of
/// `ln G` on `ln k`; `None` with fewer than 4 positive values.
pub fn local_slope(bins: &[f64], psd: &[f64]) -> Option<(f64, f64)> {
    let pts: Vec<(f64, f64)> = bins
        .iter()
        .zip(psd)
        .filter(|(k, g)| **k > 0.0 && **g > 0.0 && g.is_finite())
        .map(|(k, g)| (k.ln(), g.ln()))
        .collect();
    let n = pts.len() as f64;
    if pts.len() < 4 {
        return None;
    }
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / n;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let b = sxy / sxx;
    let rss: f64 = pts
        .iter()
        .map(|p| (p.1 - my - b * (p.0 - mx)).powi(2))
        .sum();
    let se = (rss / (n - 2.0) / sxx).sqrt();
    Some((-b, se))
}

/// The `window_leakage` caution for a Hann-window Welch PSD, when it fires.
///
/// `freqs` (Hz, increasing) and `psd` (mean over runs) are the bins used; `bin_width` is
/// `fs / N`, `segment` is `N` and `lowest` the cutoff of [`leakage_bias`] in bins. Bins
/// that do not lie on the grid `k · bin_width` are not judged (`None`).
pub fn window_leakage(
    freqs: &[f64],
    psd: &[f64],
    bin_width: f64,
    segment: usize,
    lowest: f64,
) -> Option<SpectralFinding> {
    if !(bin_width > 0.0) || freqs.len() < 4 {
        return None;
    }
    let mut bins = Vec::with_capacity(SLOPE_BINS);
    for &f in freqs.iter().take(SLOPE_BINS) {
        let k = (f / bin_width).round();
        if !(k >= 1.0) || (f / bin_width - k).abs() > 1e-6 * k {
            return None;
        }
        bins.push(k);
    }
    let used = &psd[..bins.len()];
    let (mut a, mut se) = local_slope(&bins, used)?;
    for _ in 0..4 {
        let corrected: Vec<f64> = bins
            .iter()
            .zip(used)
            .map(|(&k, &g)| g / (1.0 + leakage_bias(a, k as usize, segment, lowest)))
            .collect();
        (a, se) = local_slope(&bins, &corrected)?;
    }
    let a = a.clamp(-6.0, 6.0);
    let first = bins[0] as usize;
    let sure = if a >= 0.0 {
        (a - 2.0 * se).max(0.0)
    } else {
        (a + 2.0 * se).min(0.0)
    };
    let bias_first = leakage_bias(a, first, segment, lowest);
    if leakage_bias(sure, first, segment, lowest).abs() <= LEAKAGE_LIMIT {
        return None;
    }
    // The highest bin, going up from the first, whose predicted bias exceeds the limit.
    let mut k = first;
    while k < segment / 2 && leakage_bias(a, k + 1, segment, lowest).abs() > LEAKAGE_LIMIT {
        k += 1;
    }
    Some(SpectralFinding::WindowLeakage {
        slope: a,
        slope_se: se,
        bias: bias_first,
        below: k as f64 * bin_width,
        limit: LEAKAGE_LIMIT,
    })
}

/// [`window_leakage`] on a spectrum group's mean PSD over runs.
pub fn group_leakage(
    group: &super::input::SpectrumGroup,
    bin_width: f64,
    segment: usize,
    lowest: f64,
) -> Option<SpectralFinding> {
    let mean: Vec<f64> = group
        .psd
        .mean_axis(ndarray::Axis(0))
        .map(|m| m.to_vec())
        .unwrap_or_default();
    if mean.len() != group.freqs.len() {
        return None;
    }
    window_leakage(&group.freqs, &mean, bin_width, segment, lowest)
}

/// [`group_leakage`] for a PSD table estimated with a Hann window (`spectrum`): the bin
/// width is the spacing of its lowest frequencies, the segment twice its highest bin, and
/// the lowest frequency about one segment in `K ≈ dof/2` (0.01 bin without dof).
pub fn table_leakage(group: &super::input::SpectrumGroup) -> Option<SpectralFinding> {
    let f = &group.freqs;
    if f.len() < 4 {
        return None;
    }
    let bw = f[1] - f[0];
    let top = (f[f.len() - 1] / bw).round();
    let segment = (2.0 * top).max(16.0) as usize;
    let lowest = group
        .dof
        .as_ref()
        .and_then(|d| d.iter().copied().reduce(f64::max))
        .map_or(0.01, |nu| (2.0 / nu).min(1.0));
    group_leakage(group, bw, segment, lowest)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn white_noise_has_no_leakage_bias() {
        // Source: Harris, Proc. IEEE 66, 51 (1978), Hann window properties: the kernel
        // integrates to Σw² = 3N/8 per sample (Parseval), so a flat spectrum reads right
        // at every bin, and the sidelobes fall as f^-6 in power. What is left is the
        // quadrature's error (trapezoids of 1/64 bin), far below the 5% limit.
        for n in [64, 256, 4096] {
            for k in [2, 3, 5, 10] {
                let b = leakage_bias(0.0, k, n, 1.0 / 64.0);
                assert!(b.abs() < 1e-4, "N = {n}, bin {k}: bias {b}");
            }
        }
    }

    #[test]
    fn the_kernel_integrates_to_one_and_falls_as_the_sixth_power() {
        // Source: Harris (1978): periodic Hann, Σw² = 3N/8; sidelobes −18 dB/octave.
        let n = 512;
        let total = trapezoid(-256.0, 256.0, 512 * 64, |x| hann_kernel(x, n));
        assert!((total - 1.0).abs() < 1e-6, "∫K = {total}");
        // Mid-sidelobe peaks at x + 1/2: the asymptote 1/(3π² x⁶).
        for x in [20.0, 40.0] {
            let k = hann_kernel(x + 0.5, n);
            let asym = 1.0 / (3.0 * PI * PI * (x + 0.5_f64).powi(6)) * 2.0;
            assert!((k / asym - 1.0).abs() < 0.1, "x = {x}: {k} vs {asym}");
        }
    }

    #[test]
    fn a_red_spectrum_is_biased_high_at_its_lowest_bins() {
        // f^-2: 48, 15, 7 and 3% at bins 2, 3, 4, 6 (the earlier measurement's values);
        // f^-0.5 stays below 5% at bin 2.
        let b: Vec<f64> = [2, 3, 4, 6]
            .iter()
            .map(|&k| leakage_bias(2.0, k, 1024, 1.0 / 64.0))
            .collect();
        for (got, want) in b.iter().zip([0.48, 0.15, 0.07, 0.03]) {
            assert!((got - want).abs() < 0.01, "{b:?}");
        }
        assert!(leakage_bias(0.5, 2, 1024, 1.0 / 64.0) < LEAKAGE_LIMIT);
    }

    #[test]
    fn the_slope_of_an_exact_power_law_is_found() {
        let k: Vec<f64> = (2..12).map(f64::from).collect();
        let g: Vec<f64> = k.iter().map(|k| k.powf(-1.5)).collect();
        let (a, se) = local_slope(&k, &g).unwrap();
        assert!((a - 1.5).abs() < 1e-12 && se < 1e-9);
    }
}
