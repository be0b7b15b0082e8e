//! Noise records that start at a quench: each run is cut into windows centred at chosen
//! ages tw, and every (run, window) gets its own Welch PSD, so that T_eff(f, tw) follows
//! the aging system (the spectrum and the loss change with age).
//!
//! The window must be short against the age, so that the system ages little inside it,
//! and long against the periods analysed: `1/f ≪ Δt ≪ tw`. fdtemp enforces what it can:
//! a window must hold one Welch segment (so the lowest bin used, 2/segment, has at least
//! two periods in it) and lie inside every run; a window wider than [`MAX_SPAN`] of its
//! age, and frequencies with fewer than [`MIN_PERIODS`] periods in the window, are
//! cautions with the numbers. The PSD of one window is the average over the window, so
//! where the system ages inside it the estimate is of the window's mean spectrum.

use super::findings::{SpectralCaution, SpectralFinding};
use super::input::SpectrumGroup;
use super::noise::{Dissipation, RecordPsd, to_group};
use super::welch::{Welch, WelchSettings, bin_correlation, hann};
use crate::error::{Error, Result};
use rayon::prelude::*;

/// Windows wider than this fraction of their age draw a caution: the system ages inside
/// them (common practice: a window at most half the age).
pub const MAX_SPAN: f64 = 0.5;

/// Frequencies with fewer periods than this inside the window draw a caution.
pub const MIN_PERIODS: f64 = 10.0;

/// How wide the window of each age is.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Width {
    /// The same duration (seconds) at every age.
    Seconds(f64),
    /// A fraction of the age (`Δt = fraction · tw`).
    Fraction(f64),
}

/// Which windows to cut.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AgeSettings {
    /// The ages tw (seconds after the quench) at the windows' centres, increasing.
    pub ages: Vec<f64>,
    /// The windows' width.
    pub width: Width,
    /// The time of the quench on the record's clock (seconds after its first sample;
    /// 0: the record starts at the quench). Samples before it are not used.
    pub quench_at: f64,
}

impl AgeSettings {
    /// The window `[start, end)` (seconds after the quench) of age `tw`.
    pub fn window(&self, tw: f64) -> [f64; 2] {
        let dt = match self.width {
            Width::Seconds(s) => s,
            Width::Fraction(a) => a * tw,
        };
        [tw - dt / 2.0, tw + dt / 2.0]
    }

    /// The sample indices `[first, last)` of age `tw`'s window on the record's clock at
    /// `fs` Hz.
    pub fn samples(&self, tw: f64, fs: f64) -> (usize, usize) {
        let [start, end] = self.window(tw);
        (
            ((self.quench_at + start) * fs).ceil() as usize,
            ((self.quench_at + end) * fs).ceil() as usize,
        )
    }

    /// Checks the ranges.
    ///
    /// # Errors
    /// [`Error::Setting`] naming what is wrong.
    pub fn validate(&self) -> Result<()> {
        if self.ages.is_empty() {
            return Err(Error::Setting(
                "no ages given; expected at least one".into(),
            ));
        }
        if let Some(a) = self.ages.iter().find(|a| !(a.is_finite() && **a > 0.0)) {
            return Err(Error::Setting(format!(
                "age {a}: expected a positive number of seconds after the quench"
            )));
        }
        if self.ages.windows(2).any(|w| w[1] <= w[0]) {
            return Err(Error::Setting("the ages must increase".into()));
        }
        let ok = match self.width {
            Width::Seconds(s) => s.is_finite() && s > 0.0,
            Width::Fraction(a) => a.is_finite() && a > 0.0 && a < 2.0,
        };
        if !ok {
            return Err(Error::Setting(format!(
                "window width {:?}: expected a positive duration, or a fraction of the age \
                 below 2 (the window must start after the quench)",
                self.width
            )));
        }
        if !(self.quench_at.is_finite() && self.quench_at >= 0.0) {
            return Err(Error::Setting(format!(
                "quench time {}: expected a time on the record's clock, at or after its \
                 first sample",
                self.quench_at
            )));
        }
        for &tw in &self.ages {
            let [start, _] = self.window(tw);
            if start < 0.0 {
                return Err(Error::Setting(format!(
                    "the window of age {tw} s starts {} s before the quench; narrow it",
                    -start
                )));
            }
        }
        Ok(())
    }
}

/// The PSDs of one age: one Welch estimate per run over its window.
#[derive(Debug, Clone)]
pub struct AgePsd {
    /// The age tw (seconds after the quench).
    pub tw: f64,
    /// The window `[start, end)` in seconds after the quench.
    pub window: [f64; 2],
    /// One PSD per run.
    pub psd: RecordPsd,
}

/// Cuts every run (`runs[r]`, samples at `fs` Hz, the first at time 0 of the record's
/// clock) into the windows of `ages` and estimates each window's PSD with `welch`.
///
/// # Errors
/// [`Error::Setting`] for settings out of range, a window that holds fewer samples than
/// one segment; [`Error::Analysis`] naming the run and the age when a window runs past
/// the end of a run.
pub fn age_windows(
    names: &[String],
    runs: &[Vec<f64>],
    fs: f64,
    ages: &AgeSettings,
    welch: WelchSettings,
) -> Result<(Vec<AgePsd>, Vec<SpectralCaution>)> {
    ages.validate()?;
    let welch = WelchSettings {
        sample_rate: fs,
        ..welch
    };
    welch.validate()?;
    let seg_seconds = welch.segment as f64 / fs;
    let mut cautions = Vec::new();
    let mut spans = Vec::with_capacity(ages.ages.len());
    for &tw in &ages.ages {
        let [start, end] = ages.window(tw);
        if end - start < seg_seconds {
            return Err(Error::Setting(format!(
                "the window of age {tw} s is {} s long, shorter than one segment of {} \
                 samples ({} s at {fs} Hz); widen the window or lower --segment",
                end - start,
                welch.segment,
                seg_seconds
            )));
        }
        // Sample indices on the record's clock.
        let (first, last) = ages.samples(tw, fs);
        if let Some((r, len)) = runs
            .iter()
            .enumerate()
            .map(|(r, v)| (r, v.len()))
            .find(|&(_, len)| len < last)
        {
            return Err(Error::Analysis(format!(
                "the window of age {tw} s ends {end} s after the quench, but run '{}' ends \
                 {} s after it; expected every run to cover every window",
                names[r],
                len as f64 / fs - ages.quench_at
            )));
        }
        let span = (end - start) / tw;
        if span > MAX_SPAN {
            cautions.push(SpectralCaution {
                tw: Some(tw),
                finding: SpectralFinding::AgeWindowWide {
                    span,
                    limit: MAX_SPAN,
                },
            });
        }
        let lowest = super::noise::FIRST_BIN as f64 * fs / welch.segment as f64;
        let below = MIN_PERIODS / (end - start);
        if lowest < below {
            cautions.push(SpectralCaution {
                tw: Some(tw),
                finding: SpectralFinding::AgeWindowFewPeriods {
                    below,
                    periods: MIN_PERIODS,
                },
            });
        }
        spans.push((tw, [start, end], first, last));
    }
    let out = spans
        .into_iter()
        .map(|(tw, window, first, last)| {
            let psd = runs
                .par_iter()
                .map(|v| {
                    let mut w = Welch::new(welch)?;
                    v[first..last].iter().for_each(|&x| w.push(x));
                    w.finish()
                })
                .collect::<Result<Vec<_>>>()?;
            Ok(AgePsd {
                tw,
                window,
                psd: RecordPsd {
                    runs: names.to_vec(),
                    psd,
                    bin_rho2: bin_correlation(&hann(welch.segment)),
                    sample_rate: fs,
                    time: None,
                    gain: 1.0,
                },
            })
        })
        .collect::<Result<Vec<_>>>()?;
    Ok((out, cautions))
}

/// The spectrum groups of every age (their `tw` set), with the dissipation of each age
/// from `loss` (one table for all ages, or one per age), for
/// [`super::analyze_spectra`]; beside each, the number of frequencies outside its
/// dissipation table.
///
/// # Errors
/// As [`to_group`], naming the age.
pub fn age_groups(
    ages: &[AgePsd],
    loss: impl Fn(f64) -> Result<Dissipation>,
) -> Result<Vec<(SpectrumGroup, usize)>> {
    ages.iter()
        .map(|a| {
            let (mut g, dropped) =
                to_group(&a.psd, &loss(a.tw)?).map_err(|e| e.about(&format!("tw = {}", a.tw)))?;
            g.tw = Some(a.tw);
            Ok((g, dropped))
        })
        .collect()
}

/// The dissipation of every age from a loss table whose first column is named `tw`:
/// rows `tw, f, value`, one table per distinct tw (each with increasing f). Returns
/// `None` when the first column is not named `tw` (one table for every age), else the
/// tables by tw and the value column's name.
///
/// # Errors
/// [`Error::Input`] with line and column for a bad row, a frequency that does not
/// increase within its tw, or a tw with fewer than 2 rows.
pub fn read_loss_by_age(
    path: &std::path::Path,
    d: crate::input::Delimiter,
) -> Result<Option<LossByAge>> {
    use crate::input::{
        Header, csv_error, csv_reader_in, is_blank, line_of, open, parse_number_in,
    };
    let mut rdr = csv_reader_in(open(path)?, d);
    let mut records = rdr.records();
    let Some(first) = records.next() else {
        return Ok(None);
    };
    let header = Header::new(path, &first.map_err(|e| csv_error(path, e))?)?.with_delimiter(d);
    if header.fields.first().map(|f| f.trim()) != Some("tw") {
        return Ok(None);
    }
    if header.fields.len() < 3 {
        return Err(Error::input(
            path,
            Some(header.line),
            None,
            "a loss table by age needs three columns: tw, f and the value",
        ));
    }
    let name = header.fields[2].clone();
    let mut tables: Vec<(f64, Vec<(f64, f64)>)> = Vec::new();
    for rec in records {
        let rec = rec.map_err(|e| csv_error(path, e))?;
        if is_blank(&rec) {
            continue;
        }
        header.check_width(path, &rec)?;
        let line = line_of(&rec);
        let at = |c: u64, m: String| Error::input(path, Some(line), Some(c), m);
        let num = |i: usize| {
            parse_number_in(&rec[i], &header.fields[i], d).map_err(|m| at(i as u64 + 1, m))
        };
        let (tw, f, v) = (num(0)?, num(1)?, num(2)?);
        if !(tw > 0.0) || !(f > 0.0) || !(v > 0.0) {
            let (c, what) = if !(tw > 0.0) {
                (1, "a positive age")
            } else if !(f > 0.0) {
                (2, "a positive frequency in hertz")
            } else {
                (3, "a positive number")
            };
            return Err(at(
                c,
                format!(
                    "column '{}' is {}, expected {what}",
                    header.fields[c as usize - 1],
                    rec[c as usize - 1].trim()
                ),
            ));
        }
        match tables.iter_mut().find(|(t, _)| t.to_bits() == tw.to_bits()) {
            Some((_, rows)) => {
                if let Some(&(prev, _)) = rows.last()
                    && !(f > prev)
                {
                    return Err(at(
                        2,
                        format!(
                            "f = {f} is not above the previous frequency {prev} of tw = {tw}; \
                             expected increasing frequencies within each tw"
                        ),
                    ));
                }
                rows.push((f, v));
            }
            None => tables.push((tw, vec![(f, v)])),
        }
    }
    if let Some((tw, _)) = tables.iter().find(|(_, rows)| rows.len() < 2) {
        return Err(Error::input(
            path,
            None,
            None,
            format!("tw = {tw} has fewer than 2 rows; expected a curve to interpolate"),
        ));
    }
    Ok(Some((
        tables
            .into_iter()
            .map(|(tw, rows)| (tw, Dissipation::Table(rows)))
            .collect(),
        name,
    )))
}

/// Loss tables by age with the value column's name.
pub type LossByAge = (Vec<(f64, Dissipation)>, String);

/// Where each age's dissipation comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum AgeLoss {
    /// The same for every age.
    Same(Dissipation),
    /// One per age (a loss table with a `tw` column).
    ByAge(Vec<(f64, Dissipation)>),
}

impl AgeLoss {
    /// The dissipation of age `tw`.
    ///
    /// # Errors
    /// [`Error::Setting`] when a table by age has no rows for `tw` (matched to a relative
    /// 1e-9), naming the ages it has.
    pub fn at(&self, tw: f64) -> Result<Dissipation> {
        match self {
            AgeLoss::Same(d) => Ok(d.clone()),
            AgeLoss::ByAge(t) => t
                .iter()
                .find(|(a, _)| (a - tw).abs() <= 1e-9 * tw.abs())
                .map(|(_, d)| d.clone())
                .ok_or_else(|| {
                    let have: Vec<String> = t.iter().map(|(a, _)| a.to_string()).collect();
                    Error::Setting(format!(
                        "the loss table has no rows for tw = {tw} (it has tw = {}); expected \
                         one table per age given with --ages",
                        have.join(", ")
                    ))
                }),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn windows_are_centred_on_their_ages_and_checked() {
        let s = AgeSettings {
            ages: vec![10.0, 100.0],
            width: Width::Fraction(0.4),
            quench_at: 0.0,
        };
        assert_eq!(
            s.window(100.0).map(f64::to_bits),
            [80.0f64, 120.0].map(f64::to_bits)
        );
        s.validate().unwrap();
        let early = AgeSettings {
            width: Width::Seconds(30.0),
            ..s.clone()
        };
        assert!(
            early
                .validate()
                .unwrap_err()
                .to_string()
                .contains("before the quench")
        );
        let names = vec!["a".to_string()];
        let short = vec![vec![0.0; 1100]];
        let welch = WelchSettings {
            sample_rate: 1.0,
            segment: 8,
            overlap: 4,
        };
        let e = age_windows(&names, &short, 10.0, &s, welch).unwrap_err();
        assert!(e.to_string().contains("run 'a' ends 110 s after it"), "{e}");
        let long = vec![vec![0.0; 2000]];
        let (out, cautions) = age_windows(&names, &long, 10.0, &s, welch).unwrap();
        assert_eq!(out.len(), 2);
        // The window [8, 12) s at tw = 10 holds 40 samples: 9 segments of 8 with hop 4;
        // at tw = 100, [80, 120) s holds 400: 99 segments.
        assert_eq!(out[0].psd.psd[0].segments, 9);
        assert_eq!(out[1].psd.psd[0].segments, 99);
        // Bin 2 is 2 · 10 Hz / 8 = 2.5 Hz: 10 periods in 4 s need 2.5 Hz (no caution at
        // tw = 10), in 40 s 0.25 Hz.
        assert!(cautions.is_empty(), "{cautions:?}");
        let wide = AgeSettings {
            width: Width::Fraction(0.8),
            ages: vec![100.0],
            ..s
        };
        let (_, cautions) = age_windows(&names, &long, 10.0, &wide, welch).unwrap();
        assert_eq!(
            cautions,
            vec![SpectralCaution {
                tw: Some(100.0),
                finding: SpectralFinding::AgeWindowWide {
                    span: 0.8,
                    limit: MAX_SPAN
                }
            }]
        );
    }
}
