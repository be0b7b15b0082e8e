//! Two channels: the Welch cross-spectrum of two simultaneous records of one sample taken
//! through independent amplifiers.
//!
//! Both records are cut into the same Hann segments (each segment's mean removed, as in
//! [`super::welch`]); per segment `X₁ = FFT(w·x₁)`, `X₂ = FFT(w·x₂)` and the cross-periodogram
//! `conj(X₁)·X₂`, scaled like the one-sided density, is averaged over segments. Noise that the
//! two channels share (the sample's) adds to its real part; each amplifier's own noise is
//! uncorrelated with the other channel and averages out, so `Re G₁₂` estimates the sample's
//! PSD without the amplifiers' noise (divided by the product of the two gains).
//!
//! Its variance is not the auto-PSD's chi-square law. For Gaussian records the real part
//! of one segment's cross-periodogram has variance `(G₁₁G₂₂ + Re(G₁₂)² − Im(G₁₂)²)/2`;
//! averaged over `K` segments with overlap, `K` is replaced by the effective number of
//! segments `ν/2`, `ν` being Welch's equivalent degrees of freedom of the auto-PSD (the
//! overlap correlation enters both the same way, through `|ρ(j)|²`). So
//! `Var(Re Ĝ₁₂) = (G₁₁G₂₂ + Re(G₁₂)² − Im(G₁₂)²)/ν`, with the estimates plugged in; at 0 Hz
//! and Nyquist (real transforms) `ν` is halved and `Im G₁₂ = 0`, and the same formula holds.
//! The real part can be negative at a frequency where the common noise is small.
//!
//! ## Reference
//! J. S. Bendat & A. G. Piersol, *Random Data: Analysis and Measurement Procedures*, 4th ed.
//! (Wiley, 2010), ch. 9 (statistical errors of co-spectrum estimates,
//! `Var[Ĉ_xy] = (G_xx G_yy + C²_xy − Q²_xy)/(2n_d)`; quoted from memory — it follows from
//! Isserlis' theorem for Gaussian Fourier coefficients, and `tests/two_channels.rs` checks
//! it against the scatter of simulated records); P. D. Welch, IEEE Trans. Audio
//! Electroacoust. 15, 70 (1967) (segment averaging, overlap).

use super::input::{Records, SpectrumGroup};
use super::noise::{Dissipation, FIRST_BIN, RATE_TOLERANCE, RecordPsd};
use super::welch::{Psd, WelchSettings, bin_correlation, equivalent_dof, hann};
use crate::error::{Error, Result};
use crate::input::Delimiter;
use ndarray::Array2;
use realfft::RealFftPlanner;
use realfft::num_complex::Complex;
use std::collections::VecDeque;
use std::path::Path;
use std::sync::Arc;

/// One run's two auto-PSDs and their cross-spectrum.
#[derive(Debug, Clone, PartialEq)]
pub struct CrossRun {
    /// The first channel's Welch PSD (with frequencies, dof, segments, samples).
    pub a: Psd,
    /// The second channel's.
    pub b: Psd,
    /// Real part of the one-sided cross-spectral density.
    pub re: Vec<f64>,
    /// Imaginary part.
    pub im: Vec<f64>,
}

/// Accumulates one run's pairs of samples into its cross-spectrum.
pub struct CrossWelch {
    settings: WelchSettings,
    window: Arc<Vec<f64>>,
    fft: Arc<dyn realfft::RealToComplex<f64>>,
    carry: Vec<(f64, f64)>,
    s11: Vec<f64>,
    s22: Vec<f64>,
    s12: Vec<Complex<f64>>,
    segments: usize,
    samples: u64,
    inp: Vec<f64>,
    out1: Vec<Complex<f64>>,
    out2: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
}

impl CrossWelch {
    /// A new accumulator.
    ///
    /// # Errors
    /// As [`WelchSettings::validate`].
    pub fn new(settings: WelchSettings) -> Result<Self> {
        settings.validate()?;
        let l = settings.segment;
        let fft = RealFftPlanner::<f64>::new().plan_fft_forward(l);
        let n = l / 2 + 1;
        Ok(CrossWelch {
            settings,
            window: Arc::new(hann(l)),
            inp: fft.make_input_vec(),
            out1: fft.make_output_vec(),
            out2: fft.make_output_vec(),
            scratch: fft.make_scratch_vec(),
            fft,
            carry: Vec::with_capacity(l),
            s11: vec![0.0; n],
            s22: vec![0.0; n],
            s12: vec![Complex::new(0.0, 0.0); n],
            segments: 0,
            samples: 0,
        })
    }

    /// Adds one simultaneous pair of samples.
    pub fn push(&mut self, a: f64, b: f64) {
        self.samples += 1;
        self.carry.push((a, b));
        if self.carry.len() == self.settings.segment {
            self.segment();
            let hop = self.settings.segment - self.settings.overlap;
            self.carry.drain(..hop);
        }
    }

    fn transform(&mut self, which: usize) {
        let l = self.settings.segment;
        let get = |p: &(f64, f64)| if which == 0 { p.0 } else { p.1 };
        let mean = self.carry.iter().map(get).sum::<f64>() / l as f64;
        for ((i, p), w) in self.inp.iter_mut().zip(&self.carry).zip(self.window.iter()) {
            *i = (get(p) - mean) * w;
        }
        let out = if which == 0 {
            &mut self.out1
        } else {
            &mut self.out2
        };
        // Lengths come from the same plan, so the transform cannot fail.
        let _ = self
            .fft
            .process_with_scratch(&mut self.inp, out, &mut self.scratch);
    }

    fn segment(&mut self) {
        self.transform(0);
        self.transform(1);
        for k in 0..self.s11.len() {
            let (x1, x2) = (self.out1[k], self.out2[k]);
            self.s11[k] += x1.norm_sqr();
            self.s22[k] += x2.norm_sqr();
            self.s12[k] += x1.conj() * x2;
        }
        self.segments += 1;
    }

    /// Sets the sample rate the densities are scaled with.
    pub fn set_sample_rate(&mut self, fs: f64) {
        self.settings.sample_rate = fs;
    }

    /// Finishes the estimate.
    ///
    /// # Errors
    /// [`Error::Analysis`] when the record is empty or shorter than one segment.
    pub fn finish(self) -> Result<CrossRun> {
        let l = self.settings.segment;
        if self.samples == 0 {
            return Err(Error::Analysis("the record is empty".into()));
        }
        if self.segments == 0 {
            return Err(Error::Analysis(format!(
                "the record has {} samples, fewer than one segment of {l}; lower --segment",
                self.samples
            )));
        }
        let fs = self.settings.sample_rate;
        let norm: f64 = self.window.iter().map(|w| w * w).sum();
        let k = self.segments as f64;
        let nu = equivalent_dof(&self.window, l - self.settings.overlap, self.segments);
        let last = l / 2;
        let even = l.is_multiple_of(2);
        let n = last + 1;
        let scale = |i: usize| if i == 0 { 1.0 } else { 2.0 } / (k * fs * norm);
        let dof: Vec<f64> = (0..n)
            .map(|i| {
                if i == 0 || (even && i == last) {
                    nu / 2.0
                } else {
                    nu
                }
            })
            .collect();
        let freqs: Vec<f64> = (0..n).map(|i| i as f64 * fs / l as f64).collect();
        let psd = |s: &[f64]| Psd {
            freqs: freqs.clone(),
            psd: (0..n).map(|i| scale(i) * s[i]).collect(),
            dof: dof.clone(),
            segments: self.segments,
            samples: self.samples,
        };
        Ok(CrossRun {
            a: psd(&self.s11),
            b: psd(&self.s22),
            re: (0..n).map(|i| scale(i) * self.s12[i].re).collect(),
            im: (0..n).map(|i| scale(i) * self.s12[i].im).collect(),
        })
    }
}

/// The cross-spectrum of two simultaneous records held in memory.
///
/// # Errors
/// As [`CrossWelch::new`] and [`CrossWelch::finish`]; [`Error::Analysis`] when the
/// records differ in length.
pub fn cross_welch(a: &[f64], b: &[f64], settings: WelchSettings) -> Result<CrossRun> {
    if a.len() != b.len() {
        return Err(Error::Analysis(format!(
            "the two channels have {} and {} samples; expected simultaneous records of one length",
            a.len(),
            b.len()
        )));
    }
    let mut w = CrossWelch::new(settings)?;
    for (&x, &y) in a.iter().zip(b) {
        w.push(x, y);
    }
    w.finish()
}

/// Two channels' records: each channel's PSDs (as one record each, with its gain) and the
/// cross-spectrum of every run (divided by the product of the gains).
#[derive(Debug, Clone)]
pub struct PairPsd {
    /// The first channel.
    pub a: RecordPsd,
    /// The second channel.
    pub b: RecordPsd,
    /// Real part of each run's cross-spectrum.
    pub re: Vec<Vec<f64>>,
    /// Imaginary part of each run's cross-spectrum.
    pub im: Vec<Vec<f64>>,
}

impl PairPsd {
    /// Builds the pair from each run's [`CrossRun`].
    pub fn from_runs(
        runs: Vec<CrossRun>,
        names_a: Vec<String>,
        names_b: Vec<String>,
        sample_rate: f64,
        segment: usize,
    ) -> PairPsd {
        let rho2 = bin_correlation(&hann(segment));
        let mut pa = Vec::new();
        let mut pb = Vec::new();
        let mut re = Vec::new();
        let mut im = Vec::new();
        for r in runs {
            pa.push(r.a);
            pb.push(r.b);
            re.push(r.re);
            im.push(r.im);
        }
        let rec = |runs: Vec<String>, psd: Vec<Psd>| RecordPsd {
            runs,
            psd,
            bin_rho2: rho2.clone(),
            sample_rate,
            time: None,
            gain: 1.0,
        };
        PairPsd {
            a: rec(names_a, pa),
            b: rec(names_b, pb),
            re,
            im,
        }
    }

    /// Refers both channels to the sample: the first's PSD divided by `ga²`, the second's
    /// by `gb²`, the cross-spectrum by `ga·gb`.
    pub fn divide_gains(&mut self, ga: f64, gb: f64) {
        self.a.divide_gain(ga);
        self.b.divide_gain(gb);
        let g = ga * gb;
        for v in self.re.iter_mut().chain(self.im.iter_mut()) {
            v.iter_mut().for_each(|x| *x /= g);
        }
    }
}

/// Samples of the second channel handed from its reader thread at a time.
const BATCH: usize = 1 << 16;

/// Streams two record files of the same layout (runs, length, sample rate) in step and
/// returns their cross-spectra. The first file sets the layout; the second is read in
/// another thread and paired with it sample by sample, run by run.
///
/// # Errors
/// Either reader's errors (naming its file, line and column); [`Error::Input`] naming the
/// second file when its runs, length or sample rate differ from the first's.
pub fn cross_records_in(
    path_a: &Path,
    path_b: &Path,
    d: Delimiter,
    settings: WelchSettings,
    sample_rate: Option<f64>,
) -> Result<PairPsd> {
    let settings = WelchSettings {
        sample_rate: sample_rate.unwrap_or(1.0),
        ..settings
    };
    settings.validate()?;
    let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<(usize, f64)>>(4);
    std::thread::scope(|scope| {
        let reader_b = scope.spawn(move || {
            let mut batch = Vec::with_capacity(BATCH);
            let mut open = true;
            let rec = super::input::stream_records_in(path_b, d, |run, v| {
                if !open {
                    return;
                }
                batch.push((run, v));
                if batch.len() == BATCH {
                    let full = std::mem::replace(&mut batch, Vec::with_capacity(BATCH));
                    open = tx.send(full).is_ok();
                }
            });
            if open && !batch.is_empty() {
                let _ = tx.send(batch);
            }
            rec
        });
        let paired = pair_with(path_a, d, settings, &rx);
        drop(rx);
        let rec_b = reader_b
            .join()
            .unwrap_or_else(|_| Err(Error::Analysis("the second channel's reader failed".into())));
        finish_pair(path_a, path_b, settings, sample_rate, paired, rec_b)
    })
}

/// What streaming the first channel against the second gave.
struct Paired {
    records: Result<Records>,
    acc: Vec<CrossWelch>,
    /// Samples of the first channel per run, and of the second one.
    count_a: Vec<u64>,
    count_b: Vec<u64>,
    /// The second channel ended before the first did (the run where it did).
    b_short: Option<usize>,
    failed: Option<Error>,
}

/// Streams the first file and pairs each of its samples with the second channel's next
/// sample of the same run (from `rx`).
fn pair_with(
    path_a: &Path,
    d: Delimiter,
    settings: WelchSettings,
    rx: &std::sync::mpsc::Receiver<Vec<(usize, f64)>>,
) -> Paired {
    let mut queues: Vec<VecDeque<f64>> = Vec::new();
    let mut acc: Vec<CrossWelch> = Vec::new();
    let mut count_a: Vec<u64> = Vec::new();
    let mut count_b: Vec<u64> = Vec::new();
    let mut b_done = false;
    let mut b_short: Option<usize> = None;
    let mut failed: Option<Error> = None;
    let take_batch = |queues: &mut Vec<VecDeque<f64>>, count_b: &mut Vec<u64>| match rx.recv() {
        Ok(batch) => {
            for (run, v) in batch {
                while queues.len() <= run {
                    queues.push(VecDeque::new());
                    count_b.push(0);
                }
                queues[run].push_back(v);
                count_b[run] += 1;
            }
            true
        }
        Err(_) => false,
    };
    let records = super::input::stream_records_in(path_a, d, |run, v| {
        if failed.is_some() || b_short.is_some() {
            return;
        }
        while acc.len() <= run {
            match CrossWelch::new(settings) {
                Ok(w) => acc.push(w),
                Err(e) => {
                    failed = Some(e);
                    return;
                }
            }
            count_a.push(0);
        }
        count_a[run] += 1;
        loop {
            if let Some(q) = queues.get_mut(run)
                && let Some(vb) = q.pop_front()
            {
                acc[run].push(v, vb);
                return;
            }
            if b_done || !take_batch(&mut queues, &mut count_b) {
                b_done = true;
                b_short = Some(run);
                return;
            }
        }
    });
    // The rest of the second channel, to count its samples.
    if records.is_ok() && failed.is_none() && b_short.is_none() {
        while take_batch(&mut queues, &mut count_b) {}
    }
    Paired {
        records,
        acc,
        count_a,
        count_b,
        b_short,
        failed,
    }
}

/// Checks the two channels against each other and finishes every run's estimate.
fn finish_pair(
    path_a: &Path,
    path_b: &Path,
    settings: WelchSettings,
    sample_rate: Option<f64>,
    paired: Paired,
    rec_b: Result<Records>,
) -> Result<PairPsd> {
    let Paired {
        records,
        acc,
        count_a,
        count_b,
        b_short,
        failed,
    } = paired;
    let rec_a = records?;
    let rec_b = rec_b?;
    if let Some(e) = failed {
        return Err(e);
    }
    if acc.is_empty() {
        return Err(Error::input(
            path_a,
            None,
            None,
            "the record is empty; expected one number per line (or one column per run)",
        ));
    }
    let offset = |rec: &Records| u64::from(rec.time.is_some());
    if rec_b.runs.len() != rec_a.runs.len() {
        return Err(Error::input(
            path_b,
            Some(1),
            None,
            format!(
                "the second channel has {} run(s) and {} has {}; expected the same runs, one \
                 column each, in the same order",
                rec_b.runs.len(),
                path_a.display(),
                rec_a.runs.len()
            ),
        ));
    }
    let run_b = b_short.or_else(|| {
        (0..count_a.len()).find(|&r| count_b.get(r).copied().unwrap_or(0) != count_a[r])
    });
    if let Some(r) = run_b {
        let (na, nb) = if b_short.is_some() {
            (None, count_b.get(r).copied().unwrap_or(0))
        } else {
            (Some(count_a[r]), count_b.get(r).copied().unwrap_or(0))
        };
        return Err(Error::input(
            path_b,
            None,
            Some(r as u64 + 1 + offset(&rec_b)),
            format!(
                "run '{}' of the second channel has {}{nb} samples where {} has {}; expected \
                 simultaneous records of the same length",
                rec_b.runs.get(r).map_or("", String::as_str),
                if na.is_none() { "only " } else { "" },
                path_a.display(),
                na.map_or_else(|| "more".to_string(), |n| n.to_string())
            ),
        ));
    }
    let fs = super::noise::rate_of(path_a, sample_rate, rec_a.time.as_ref())?;
    let fs_b = super::noise::rate_of(path_b, sample_rate, rec_b.time.as_ref())?;
    if (fs - fs_b).abs() > RATE_TOLERANCE * fs {
        return Err(Error::input(
            path_b,
            None,
            Some(1),
            format!(
                "the second channel's time column gives a sample rate of {} Hz and {} one of \
                 {} Hz; expected simultaneous records at one rate",
                crate::report::format::fmt_num(fs_b),
                path_a.display(),
                crate::report::format::fmt_num(fs)
            ),
        ));
    }
    let runs = acc
        .into_iter()
        .map(|mut w| {
            w.set_sample_rate(fs);
            w.finish()
                .map_err(|e| Error::input(path_a, None, None, e.to_string()))
        })
        .collect::<Result<Vec<_>>>()?;
    let mut pair = PairPsd::from_runs(runs, rec_a.runs, rec_b.runs, fs, settings.segment);
    pair.a.time = rec_a.time;
    pair.b.time = rec_b.time;
    Ok(pair)
}

/// The cross-spectrum as a spectrum group (bins below [`FIRST_BIN`] and outside the
/// dissipation table left out), with the variance of its run mean at each frequency:
/// `(Ḡ₁₁Ḡ₂₂ + Re(Ḡ₁₂)² − Im(Ḡ₁₂)²)/Σν` over runs. Returns the group, the variance and the
/// number of frequencies left out.
///
/// # Errors
/// [`Error::Analysis`] when no frequency is left.
pub fn to_cross_group(
    pair: &PairPsd,
    diss: &Dissipation,
) -> Result<(SpectrumGroup, Vec<f64>, usize)> {
    let (group_a, dropped) = super::noise::to_group(&pair.a, diss)?;
    let freqs_all = &pair.a.psd[0].freqs;
    let keep: Vec<usize> = (FIRST_BIN..freqs_all.len())
        .filter(|&j| diss.at(freqs_all[j]).is_some())
        .collect();
    let nr = pair.re.len();
    let rf = nr as f64;
    let mean = |get: &dyn Fn(usize) -> f64| (0..nr).map(get).sum::<f64>() / rf;
    let var: Vec<f64> = keep
        .iter()
        .map(|&j| {
            let g11 = mean(&|r| pair.a.psd[r].psd[j]);
            let g22 = mean(&|r| pair.b.psd[r].psd[j]);
            let re = mean(&|r| pair.re[r][j]);
            let im = mean(&|r| pair.im[r][j]);
            let nu: f64 = (0..nr).map(|r| pair.a.psd[r].dof[j]).sum();
            ((g11 * g22 + re * re - im * im) / nu).max(0.0)
        })
        .collect();
    let group = SpectrumGroup {
        psd: Array2::from_shape_fn((nr, keep.len()), |(r, j)| pair.re[r][keep[j]]),
        ..group_a
    };
    Ok((group, var, dropped))
}
