//! From raw noise records to a spectrum group: stream, Welch per run, attach the dissipation.

use super::input::{SpectrumGroup, TimeColumn};
use super::welch::{Psd, Welch, WelchSettings, bin_correlation, hann};
use crate::error::{Error, Result};
use crate::input::{
    Delimiter, Header, csv_error, csv_reader_in, is_blank, line_of, open, parse_number_in,
};
use ndarray::Array2;
use std::path::Path;

/// Where the dissipation (loss, Re Z or Re Y) comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum Dissipation {
    /// The same value at every frequency (a resistor's R for voltage noise).
    Constant(f64),
    /// A table of `(f, value)`, increasing in `f`, interpolated in log f – log value.
    Table(Vec<(f64, f64)>),
}

impl Dissipation {
    /// The value at `f`, or `None` outside a table's range (never extrapolated).
    ///
    /// Between rows, a cubic Hermite curve in (ln f, ln value) with slopes from the three
    /// neighbouring rows (one-sided at the ends). Dissipation tables are usually given on
    /// log-spaced frequencies and vary as powers of f, which a linear rule in f bends: on
    /// an R‖C impedance at 10 rows per decade, linear interpolation in f is off by up to
    /// 4%, linear in log–log by 0.65%, this curve by 0.02% (tests/spectral.rs).
    pub fn at(&self, f: f64) -> Option<f64> {
        match self {
            Dissipation::Constant(v) => Some(*v),
            Dissipation::Table(t) => {
                let i = t.partition_point(|&(x, _)| x < f);
                if i < t.len() && t[i].0.total_cmp(&f).is_eq() {
                    return Some(t[i].1);
                }
                if i == 0 || i == t.len() {
                    return None;
                }
                Some(log_hermite(t, i - 1, f))
            }
        }
    }
}

/// The log–log cubic Hermite value at `f` between rows `k` and `k + 1` of `t`.
fn log_hermite(t: &[(f64, f64)], k: usize, f: f64) -> f64 {
    let u = |i: usize| t[i].0.ln();
    let g = |i: usize| t[i].1.ln();
    let n = t.len();
    // Secant slope of interval i (rows i, i + 1) and its width.
    let h = |i: usize| u(i + 1) - u(i);
    let sec = |i: usize| (g(i + 1) - g(i)) / h(i);
    // Three-point slope at row i: weighted mean of the neighbouring secants.
    let slope = |i: usize| {
        if n == 2 {
            sec(0)
        } else if i == 0 {
            ((2.0 * h(0) + h(1)) * sec(0) - h(0) * sec(1)) / (h(0) + h(1))
        } else if i == n - 1 {
            let (a, b) = (h(n - 2), h(n - 3));
            ((2.0 * a + b) * sec(n - 2) - a * sec(n - 3)) / (a + b)
        } else {
            (h(i) * sec(i - 1) + h(i - 1) * sec(i)) / (h(i - 1) + h(i))
        }
    };
    let w = h(k);
    let s = (f.ln() - u(k)) / w;
    let (s2, s3) = (s * s, s * s * s);
    let value = (2.0 * s3 - 3.0 * s2 + 1.0) * g(k)
        + (s3 - 2.0 * s2 + s) * w * slope(k)
        + (-2.0 * s3 + 3.0 * s2) * g(k + 1)
        + (s3 - s2) * w * slope(k + 1);
    value.exp()
}

/// The convention a dissipation column's name says, if it says one: Re Z (an impedance's
/// real part: voltage noise), Re Y (an admittance's: current noise), or a loss χ''.
pub fn convention_named(column: &str) -> Option<super::Convention> {
    use super::Convention;
    let key: String = column
        .to_lowercase()
        .chars()
        .filter(|c| c.is_alphanumeric() || *c == '\'' || *c == '"')
        .collect();
    let starts = |words: &[&str]| words.iter().any(|w| key.starts_with(w));
    if starts(&["rez", "realz", "zreal", "zre", "resistance", "impedance"]) {
        Some(Convention::Voltage)
    } else if starts(&["rey", "realy", "yreal", "yre", "conductance", "admittance"]) {
        Some(Convention::Current)
    } else if starts(&[
        "loss", "chi''", "chi\"", "chi2", "chii", "chiim", "imchi", "χ''", "χ\"",
    ]) {
        Some(Convention::Loss)
    } else {
        None
    }
}

/// Reads a dissipation table: a header, then `f,value` rows with increasing `f > 0` and
/// `value > 0` (the first two columns are used). Returns the table and the value
/// column's name.
///
/// # Errors
/// [`Error::Input`] with line and column for any bad row.
pub fn read_dissipation(path: &Path) -> Result<(Dissipation, String)> {
    read_dissipation_in(path, Delimiter::Comma)
}

/// As [`read_dissipation`], with fields split at `d` (`--delimiter`).
///
/// # Errors
/// As [`read_dissipation`].
pub fn read_dissipation_in(path: &Path, d: Delimiter) -> Result<(Dissipation, String)> {
    let mut rdr = csv_reader_in(open(path)?, d);
    let mut records = rdr.records();
    let header = match records.next() {
        None => {
            return Err(Error::input(
                path,
                None,
                None,
                "the file is empty; expected a header and rows of f,value",
            ));
        }
        Some(r) => Header::new(path, &r.map_err(|e| csv_error(path, e))?)?.with_delimiter(d),
    };
    if header.fields.len() < 2 {
        return Err(Error::input(
            path,
            Some(header.line),
            None,
            format!(
                "the header has {} column(s); expected two: f and the value",
                header.fields.len()
            ),
        ));
    }
    let name = header.fields[1].clone();
    let mut table: Vec<(f64, f64)> = Vec::new();
    for rec in records {
        let rec = rec.map_err(|e| csv_error(path, e))?;
        if is_blank(&rec) {
            continue;
        }
        header.check_width(path, &rec)?;
        let line = line_of(&rec);
        let at = |c: u64, m: String| Error::input(path, Some(line), Some(c), m);
        let f = parse_number_in(&rec[0], &header.fields[0], d).map_err(|m| at(1, m))?;
        let v = parse_number_in(&rec[1], &name, d).map_err(|m| at(2, m))?;
        if !(f > 0.0) {
            return Err(at(
                1,
                format!(
                    "column '{}' is {f}, expected a positive frequency in hertz",
                    header.fields[0]
                ),
            ));
        }
        if !(v > 0.0) {
            return Err(at(
                2,
                format!("column '{name}' is {v}, expected a positive number"),
            ));
        }
        if let Some(&(prev, _)) = table.last()
            && !(f > prev)
        {
            return Err(at(
                1,
                format!(
                    "f = {f} is not above the previous frequency {prev}; expected increasing frequencies"
                ),
            ));
        }
        table.push((f, v));
    }
    if table.len() < 2 {
        return Err(Error::input(
            path,
            None,
            None,
            "the table has fewer than 2 rows; expected a curve to interpolate",
        ));
    }
    Ok((Dissipation::Table(table), name))
}

/// The PSDs of every run of a record file.
#[derive(Debug, Clone)]
pub struct RecordPsd {
    /// Run names.
    pub runs: Vec<String>,
    /// One Welch estimate per run.
    pub psd: Vec<Psd>,
    /// Squared correlation of neighbouring PSD bins for the window used.
    pub bin_rho2: Vec<f64>,
    /// The sample rate the PSD was scaled with (given, or from the time column).
    pub sample_rate: f64,
    /// The record's time column, when it had one.
    pub time: Option<TimeColumn>,
    /// The voltage gain divided out (the PSD is divided by its square).
    pub gain: f64,
}

impl RecordPsd {
    /// Refers the PSD to the amplifier's input: divides it by `gain²`.
    pub fn divide_gain(&mut self, gain: f64) {
        let g2 = gain * gain;
        for p in &mut self.psd {
            p.psd.iter_mut().for_each(|v| *v /= g2);
        }
        self.gain *= gain;
    }
}

/// Relative difference between a given sample rate and a time column's that is refused.
pub const RATE_TOLERANCE: f64 = 1e-3;

/// Streams a record file through Welch's method, one accumulator per run. The sample rate
/// is `sample_rate` when given, else the time column's; with both they must agree to
/// [`RATE_TOLERANCE`].
///
/// # Errors
/// Reader errors; [`Error::Input`] when a record is empty or shorter than one segment,
/// when the rates disagree, or when neither is known.
pub fn welch_records(
    path: &Path,
    settings: WelchSettings,
    sample_rate: Option<f64>,
) -> Result<RecordPsd> {
    welch_records_in(path, Delimiter::Comma, settings, sample_rate)
}

/// As [`welch_records`], with the record's fields split at `d` (`--delimiter`); a `.npy`
/// record is read as a NumPy array.
///
/// # Errors
/// As [`welch_records`].
pub fn welch_records_in(
    path: &Path,
    d: Delimiter,
    settings: WelchSettings,
    sample_rate: Option<f64>,
) -> Result<RecordPsd> {
    welch_stream(path, settings, sample_rate, |sink| {
        super::input::stream_records_in(path, d, sink)
    })
}

/// As [`welch_records`], for a record held in memory: one run, or runs × samples (checked
/// as a `.npy` record's array); `label` names it in errors.
///
/// # Errors
/// As [`welch_records`] and [`crate::input::npy::noise_runs`].
pub fn welch_array(
    label: &Path,
    a: ndarray::ArrayD<f64>,
    settings: WelchSettings,
    sample_rate: Option<f64>,
) -> Result<RecordPsd> {
    let (runs, m) = crate::input::npy::noise_runs(label, a)?;
    welch_stream(label, settings, sample_rate, |sink| {
        for (r, row) in m.outer_iter().enumerate() {
            for &v in row {
                sink(r, v);
            }
        }
        Ok(super::input::Records { runs, time: None })
    })
}

/// Welch's method over the samples that `stream` passes to its sink, one accumulator per run.
fn welch_stream(
    path: &Path,
    settings: WelchSettings,
    sample_rate: Option<f64>,
    stream: impl FnOnce(&mut dyn FnMut(usize, f64)) -> Result<super::input::Records>,
) -> Result<RecordPsd> {
    let settings = WelchSettings {
        sample_rate: sample_rate.unwrap_or(1.0),
        ..settings
    };
    settings.validate()?;
    let mut acc: Vec<Welch> = Vec::new();
    let mut failed: Option<Error> = None;
    let records = stream(&mut |run, v| {
        while acc.len() <= run {
            match Welch::new(settings) {
                Ok(w) => acc.push(w),
                Err(e) => {
                    failed.get_or_insert(e);
                    return;
                }
            }
        }
        acc[run].push(v);
    })?;
    if let Some(e) = failed {
        return Err(e);
    }
    if acc.is_empty() {
        return Err(Error::input(
            path,
            None,
            None,
            "the record is empty; expected one number per line (or one column per run)",
        ));
    }
    let fs = rate_of(path, sample_rate, records.time.as_ref())?;
    let psd = acc
        .into_iter()
        .map(|mut w| {
            w.set_sample_rate(fs);
            w.finish()
                .map_err(|e| Error::input(path, None, None, e.to_string()))
        })
        .collect::<Result<Vec<_>>>()?;
    Ok(RecordPsd {
        runs: records.runs,
        psd,
        bin_rho2: bin_correlation(&hann(settings.segment)),
        sample_rate: fs,
        time: records.time,
        gain: 1.0,
    })
}

/// The sample rate: given, or the time column's, checked against each other.
pub(crate) fn rate_of(path: &Path, given: Option<f64>, time: Option<&TimeColumn>) -> Result<f64> {
    let from_time = time.map(|t| (1.0 / t.step, t));
    match (given, from_time) {
        (Some(fs), None) => Ok(fs),
        (None, Some((ft, _))) => Ok(ft),
        (Some(fs), Some((ft, _))) if (fs - ft).abs() <= RATE_TOLERANCE * fs => Ok(fs),
        (Some(fs), Some((ft, t))) => Err(Error::input(
            path,
            None,
            Some(1),
            format!(
                "time column '{}' steps by {} (a sample rate of {} Hz), but --sample-rate is \
                 {}; expected them to agree (leave out --sample-rate to use the time column)",
                t.name,
                crate::report::format::sig(t.step, 4),
                crate::report::format::fmt_num(ft),
                crate::report::format::fmt_num(fs)
            ),
        )),
        (None, None) => Err(Error::input(
            path,
            None,
            None,
            "no time column (a first column named t or time, or evenly rising) and no \
             --sample-rate; give --sample-rate in samples per second",
        )),
    }
}

/// The lowest frequency bin used for `T_eff`. Removing each segment's mean takes out the
/// power that the Hann window's main lobe carries from 0 Hz into bin 1: for white noise
/// bin 1 reads `1 − |W_1|² / (L Σw²) = 5/6` of the truth. Bins 0 and 1 are left out.
pub const FIRST_BIN: usize = 2;

/// Builds the spectrum group (bins below [`FIRST_BIN`] left out) with the dissipation
/// attached. Frequencies outside a table's range are left out; their number is returned.
///
/// # Errors
/// [`Error::Analysis`] when no frequency is left.
pub fn to_group(rec: &RecordPsd, diss: &Dissipation) -> Result<(SpectrumGroup, usize)> {
    let freqs_all = &rec.psd[0].freqs;
    let keep: Vec<usize> = (FIRST_BIN..freqs_all.len())
        .filter(|&j| diss.at(freqs_all[j]).is_some())
        .collect();
    let dropped = freqs_all.len().saturating_sub(FIRST_BIN) - keep.len();
    if keep.is_empty() {
        return Err(Error::Analysis(
            "no frequency of the PSD lies inside the dissipation table's range".into(),
        ));
    }
    let nr = rec.runs.len();
    let freqs: Vec<f64> = keep.iter().map(|&j| freqs_all[j]).collect();
    let loss: Vec<f64> = freqs
        .iter()
        .map(|&f| diss.at(f).unwrap_or(f64::NAN))
        .collect();
    Ok((
        SpectrumGroup {
            tw: None,
            runs: rec.runs.clone(),
            psd: Array2::from_shape_fn((nr, keep.len()), |(r, j)| rec.psd[r].psd[keep[j]]),
            loss: Array2::from_shape_fn((nr, keep.len()), |(_, j)| loss[j]),
            dof: Some(Array2::from_shape_fn((nr, keep.len()), |(r, j)| {
                rec.psd[r].dof[keep[j]]
            })),
            freqs,
        },
        dropped,
    ))
}

/// The PSD as a CSV that `fdtemp spectrum` reads back: `f,psd,dof[,loss][,run]`, from
/// bin [`FIRST_BIN`] up.
pub fn psd_csv(rec: &RecordPsd, diss: Option<&Dissipation>) -> Vec<u8> {
    use std::fmt::Write;
    let many = rec.runs.len() > 1;
    let mut s = format!("{} window=hann\n", super::input::DIRECTIVE);
    s.push_str("f,psd,dof");
    if diss.is_some() {
        s.push_str(",loss");
    }
    if many {
        s.push_str(",run");
    }
    s.push('\n');
    for (name, p) in rec.runs.iter().zip(&rec.psd) {
        for j in FIRST_BIN..p.freqs.len() {
            let f = p.freqs[j];
            let loss = diss.map(|d| d.at(f));
            if matches!(loss, Some(None)) {
                continue;
            }
            let _ = write!(s, "{f:?},{:?},{:?}", p.psd[j], p.dof[j]);
            if let Some(Some(l)) = loss {
                let _ = write!(s, ",{l:?}");
            }
            if many {
                let _ = write!(s, ",{name}");
            }
            s.push('\n');
        }
    }
    s.into_bytes()
}

/// Reads a measured amplifier-noise PSD (`noise --amplifier-noise`); see
/// [`super::subtract::read_amplifier_noise_in`].
///
/// # Errors
/// As [`super::subtract::read_amplifier_noise_in`].
pub fn read_amplifier_noise(path: &Path, d: Delimiter) -> Result<super::subtract::AmplifierNoise> {
    super::subtract::read_amplifier_noise_in(path, d)
}
