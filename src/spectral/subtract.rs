//! A measured amplifier-noise PSD subtracted from one channel's PSD.
//!
//! The amplifier's noise is measured on its own (input shorted or terminated, same gain)
//! and written as a PSD table with its degrees of freedom, as `fdtemp noise --psd-out`
//! writes one. At each Welch frequency of the record it is interpolated in (ln f, ln PSD)
//! with the dissipation table's curve ([`Dissipation::at`]; its degrees of freedom the
//! same way) and subtracted: `Ĝ = Ĝ_meas − Ĝ_amp`. The two estimates are independent, so
//! `Var Ĝ = 2Ĝ²_meas/ν_meas + 2Ĝ²_amp/ν_amp` (each an averaged periodogram, `G χ²_ν/ν`).
//! Where the subtracted part is a large fraction of the measured PSD the result is the
//! small difference of two large numbers and rests on the amplifier's noise being the
//! same in both measurements: the caution `large_subtraction` names those bands.

use super::findings::{SpectralFinding, SubtractedBand};
use super::input::SpectrumGroup;
use super::noise::{Dissipation, RecordPsd};
use crate::error::{Error, Result};
use crate::input::parse_number_in;
use crate::input::{Delimiter, Header, csv_error, csv_reader_in, is_blank, line_of, open};
use ndarray::Array2;
use std::path::Path;

/// The fraction of the measured PSD above which a subtraction is cautioned.
pub const LARGE_FRACTION: f64 = 0.5;

/// A measured amplifier-noise PSD: the run mean of the table's PSD and its summed
/// degrees of freedom, as curves in f.
#[derive(Debug, Clone, PartialEq)]
pub struct AmplifierNoise {
    /// PSD against f (interpolated in log–log).
    pub psd: Dissipation,
    /// Degrees of freedom against f.
    pub dof: Dissipation,
    /// The table's frequency range (Hz).
    pub range: [f64; 2],
    /// Runs averaged.
    pub runs: usize,
}

impl AmplifierNoise {
    /// The PSD and its degrees of freedom at `f`, or `None` outside the table's range.
    pub fn at(&self, f: f64) -> Option<(f64, f64)> {
        Some((self.psd.at(f)?, self.dof.at(f)?))
    }
}

/// Reads an amplifier-noise PSD table: a header with columns `f`, `psd`, `dof` (others,
/// such as `loss`, are ignored) and optionally `run`; frequencies increasing within each
/// run, every run at the same frequencies, PSD and dof positive. Runs are averaged (their
/// degrees of freedom summed).
///
/// # Errors
/// [`Error::Input`] naming the file, line and column of a missing column, a bad number, a
/// PSD or dof that is not positive, frequencies that do not increase, or runs whose
/// frequencies differ.
pub fn read_amplifier_noise_in(path: &Path, d: Delimiter) -> Result<AmplifierNoise> {
    let mut rdr = csv_reader_in(open(path)?, d);
    let mut records = rdr.records();
    let header = match records.next() {
        None => {
            return Err(Error::input(
                path,
                None,
                None,
                "the file is empty; expected a header with columns f, psd, dof (as `fdtemp noise \
                 --psd-out` writes)",
            ));
        }
        Some(r) => Header::new(path, &r.map_err(|e| csv_error(path, e))?)?.with_delimiter(d),
    };
    let req = header.require(path, &["f", "psd", "dof"])?;
    let (i_f, i_p, i_d) = (req[0], req[1], req[2]);
    let i_run = header.find("run");
    let mut names: Vec<String> = Vec::new();
    let mut rows: Vec<Vec<(f64, f64, f64, u64)>> = Vec::new();
    for rec in records {
        let rec = rec.map_err(|e| csv_error(path, e))?;
        if is_blank(&rec) {
            continue;
        }
        header.check_width(path, &rec)?;
        let line = line_of(&rec);
        let at = |c: usize, m: String| Error::input(path, Some(line), Some(c as u64 + 1), m);
        let num = |i: usize| parse_number_in(&rec[i], &header.fields[i], d).map_err(|m| at(i, m));
        let (f, p, nu) = (num(i_f)?, num(i_p)?, num(i_d)?);
        if !(f > 0.0) {
            return Err(at(
                i_f,
                format!("column 'f' is {f}, expected a positive frequency in hertz"),
            ));
        }
        if !(p > 0.0 && p.is_finite()) {
            return Err(at(
                i_p,
                format!(
                    "column 'psd' is {p}, expected a positive amplifier-noise PSD (it is \
                     interpolated in log PSD)"
                ),
            ));
        }
        if !(nu > 0.0 && nu.is_finite()) {
            return Err(at(
                i_d,
                format!("column 'dof' is {nu}, expected a positive number of degrees of freedom"),
            ));
        }
        let name = i_run.map_or_else(String::new, |i| rec[i].to_string());
        let ri = match names.iter().position(|n| *n == name) {
            Some(r) => r,
            None => {
                names.push(name);
                rows.push(Vec::new());
                names.len() - 1
            }
        };
        if let Some(&(prev, _, _, _)) = rows[ri].last()
            && !(f > prev)
        {
            return Err(at(
                i_f,
                format!(
                    "f = {f} is not above the previous frequency {prev}; expected increasing \
                     frequencies"
                ),
            ));
        }
        rows[ri].push((f, p, nu, line));
    }
    let Some(first) = rows.first() else {
        return Err(Error::input(
            path,
            None,
            None,
            "no data rows after the header",
        ));
    };
    if first.len() < 2 {
        return Err(Error::input(
            path,
            None,
            None,
            "the table has fewer than 2 frequencies; expected a PSD to interpolate",
        ));
    }
    for (name, r) in names.iter().zip(&rows).skip(1) {
        let same = r.len() == first.len()
            && r.iter()
                .zip(first)
                .all(|(a, b)| a.0.total_cmp(&b.0).is_eq());
        if !same {
            let line = r
                .iter()
                .zip(first)
                .find(|(a, b)| a.0.total_cmp(&b.0).is_ne())
                .map(|(a, _)| a.3);
            return Err(Error::input(
                path,
                line,
                Some(i_f as u64 + 1),
                format!(
                    "run '{name}' has other frequencies than run '{}'; expected the same \
                     frequencies in every run",
                    names[0]
                ),
            ));
        }
    }
    let nr = rows.len() as f64;
    let psd: Vec<(f64, f64)> = (0..first.len())
        .map(|j| (first[j].0, rows.iter().map(|r| r[j].1).sum::<f64>() / nr))
        .collect();
    let dof: Vec<(f64, f64)> = (0..first.len())
        .map(|j| (first[j].0, rows.iter().map(|r| r[j].2).sum::<f64>()))
        .collect();
    let range = [psd[0].0, psd[psd.len() - 1].0];
    Ok(AmplifierNoise {
        psd: Dissipation::Table(psd),
        dof: Dissipation::Table(dof),
        range,
        runs: rows.len(),
    })
}

/// One channel's PSD minus the amplifier's.
#[derive(Debug, Clone)]
pub struct Subtracted {
    /// The group: each run's PSD minus the amplifier's (bins below the first used, outside
    /// the dissipation's or the amplifier's table left out).
    pub group: SpectrumGroup,
    /// The variance of the run-mean difference at each frequency.
    pub var: Vec<f64>,
    /// The subtracted PSD at each frequency.
    pub amplifier: Vec<f64>,
    /// Frequencies left out for lying outside the dissipation table.
    pub outside_dissipation: usize,
    /// Frequencies left out for lying outside the amplifier-noise table.
    pub outside_amplifier: usize,
}

/// Subtracts `amp` from every run of `rec` at the frequencies both tables cover.
///
/// # Errors
/// [`Error::Analysis`] when no frequency is left.
pub fn subtract(rec: &RecordPsd, amp: &AmplifierNoise, diss: &Dissipation) -> Result<Subtracted> {
    let (group, outside_dissipation) = super::noise::to_group(rec, diss)?;
    let keep: Vec<usize> = (0..group.freqs.len())
        .filter(|&j| amp.at(group.freqs[j]).is_some())
        .collect();
    if keep.is_empty() {
        return Err(Error::Analysis(format!(
            "no frequency of the PSD ({}–{} Hz) lies inside the amplifier-noise table's range \
             ({}–{} Hz)",
            group.freqs[0],
            group.freqs[group.freqs.len() - 1],
            amp.range[0],
            amp.range[1]
        )));
    }
    let nr = group.runs.len();
    let amp_at: Vec<(f64, f64)> = keep
        .iter()
        .map(|&j| amp.at(group.freqs[j]).unwrap_or((f64::NAN, f64::NAN)))
        .collect();
    let nu = group.dof.as_ref();
    let var: Vec<f64> = keep
        .iter()
        .zip(&amp_at)
        .map(|(&j, &(ga, nua))| {
            let gm = (0..nr).map(|r| group.psd[[r, j]]).sum::<f64>() / nr as f64;
            let num: f64 = nu.map_or(f64::NAN, |d| (0..nr).map(|r| d[[r, j]]).sum());
            2.0 * gm * gm / num + 2.0 * ga * ga / nua
        })
        .collect();
    let out = SpectrumGroup {
        tw: group.tw,
        runs: group.runs.clone(),
        freqs: keep.iter().map(|&j| group.freqs[j]).collect(),
        psd: Array2::from_shape_fn((nr, keep.len()), |(r, k)| {
            group.psd[[r, keep[k]]] - amp_at[k].0
        }),
        loss: Array2::from_shape_fn((nr, keep.len()), |(r, k)| group.loss[[r, keep[k]]]),
        dof: group
            .dof
            .as_ref()
            .map(|d| Array2::from_shape_fn((nr, keep.len()), |(r, k)| d[[r, keep[k]]])),
    };
    Ok(Subtracted {
        outside_amplifier: group.freqs.len() - keep.len(),
        group: out,
        var,
        amplifier: amp_at.iter().map(|a| a.0).collect(),
        outside_dissipation,
    })
}

/// The bands where the subtracted PSD exceeds [`LARGE_FRACTION`] of the measured one:
/// the spectrum is cut into log bands (`per_decade`), each band's fraction is its summed
/// amplifier PSD over its summed measured PSD, and neighbouring flagged bands are merged.
pub fn large_subtraction(s: &Subtracted, per_decade: usize) -> Option<SpectralFinding> {
    let f = &s.group.freqs;
    let nr = s.group.runs.len() as f64;
    let measured: Vec<f64> = (0..f.len())
        .map(|j| s.group.psd.column(j).sum() / nr + s.amplifier[j])
        .collect();
    let (l0, l1) = (f[0].log10(), f[f.len() - 1].log10());
    let per = per_decade.max(1) as f64;
    let n = (((l1 - l0) * per).ceil() as usize).max(1);
    let band_of =
        |x: f64| ((((x.log10() - l0) / (l1 - l0).max(1e-300)) * n as f64) as usize).min(n - 1);
    let mut amp_sum = vec![0.0; n];
    let mut meas_sum = vec![0.0; n];
    let mut lo = vec![f64::INFINITY; n];
    let mut hi = vec![0.0f64; n];
    for j in 0..f.len() {
        let b = band_of(f[j]);
        amp_sum[b] += s.amplifier[j];
        meas_sum[b] += measured[j];
        lo[b] = lo[b].min(f[j]);
        hi[b] = hi[b].max(f[j]);
    }
    let mut bands: Vec<SubtractedBand> = Vec::new();
    let mut open = false;
    for b in 0..n {
        if !(meas_sum[b] > 0.0 || amp_sum[b] > 0.0) {
            continue;
        }
        let fraction = amp_sum[b] / meas_sum[b];
        let large = !(fraction <= LARGE_FRACTION);
        match (large, open, bands.last_mut()) {
            (true, true, Some(last)) => {
                last.fmax = hi[b];
                last.fraction = last.fraction.max(fraction);
            }
            (true, _, _) => bands.push(SubtractedBand {
                fmin: lo[b],
                fmax: hi[b],
                fraction,
            }),
            _ => {}
        }
        open = large;
    }
    (!bands.is_empty()).then_some(SpectralFinding::LargeSubtraction {
        bands,
        limit: LARGE_FRACTION,
    })
}
