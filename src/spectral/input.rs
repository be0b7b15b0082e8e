//! Readers for the frequency domain: spectrum tables and raw noise records.
//!
//! Spectrum table: columns `f`, `psd`, `loss`, optionally `dof`, `run`, `tw`; one row per
//! frequency (per run, per waiting time), frequencies increasing within each run.
//!
//! Noise record: one number per line (one record), or one column per run; an optional
//! header names the runs. Read as a stream, one line at a time.

use crate::error::{Error, Result};
use crate::input::{
    Delimiter, Header, csv_error, csv_reader_in, is_blank, line_of, open, parse_number_in,
};
use ndarray::Array2;
use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

/// The spectra of one waiting time (or of the whole file when there is no `tw` column).
#[derive(Debug, Clone, PartialEq)]
pub struct SpectrumGroup {
    /// The waiting time, when the file has a `tw` column.
    pub tw: Option<f64>,
    /// Run names, in order of first appearance.
    pub runs: Vec<String>,
    /// Frequencies in hertz, increasing.
    pub freqs: Vec<f64>,
    /// PSD, runs × frequencies.
    pub psd: Array2<f64>,
    /// Dissipation (loss, Re Z or Re Y), runs × frequencies.
    pub loss: Array2<f64>,
    /// Degrees of freedom of each PSD value, when given.
    pub dof: Option<Array2<f64>>,
}

/// Rows of one waiting time while reading: run names and each run's rows.
struct Pending {
    tw: Option<f64>,
    names: Vec<String>,
    rows: Vec<Vec<Row>>,
}

struct Row {
    f: f64,
    psd: f64,
    loss: f64,
    dof: Option<f64>,
    line: u64,
}

/// The window a PSD table was estimated with, as far as fdtemp knows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Window {
    /// Neighbouring frequencies are independent (a rectangular window without overlap of
    /// bins, or a spectrum from elsewhere).
    None,
    /// Welch with a Hann window: PSD values 1 and 2 bins apart are correlated.
    Hann,
}

impl Window {
    /// Squared correlations of PSD values 1, 2, … bins apart.
    pub fn bin_rho2(self) -> Vec<f64> {
        match self {
            Window::None => Vec::new(),
            Window::Hann => vec![4.0 / 9.0, 1.0 / 36.0],
        }
    }
}

/// The first-line directive that `fdtemp noise --psd-out` writes, e.g.
/// `# fdtemp psd: window=hann`.
pub const DIRECTIVE: &str = "# fdtemp psd:";

/// Reads the window named by a file's first-line directive, if any.
///
/// # Errors
/// [`Error::Io`] when the file cannot be read.
pub fn window_directive(path: &Path) -> Result<Option<Window>> {
    use std::io::BufRead;
    let mut first = String::new();
    open(path)?
        .read_line(&mut first)
        .map_err(|source| Error::Io {
            path: path.to_path_buf(),
            action: "cannot read",
            source,
        })?;
    let Some(rest) = first.trim_start_matches('\u{feff}').strip_prefix(DIRECTIVE) else {
        return Ok(None);
    };
    Ok(rest.split_whitespace().find_map(|kv| match kv {
        "window=hann" => Some(Window::Hann),
        "window=none" => Some(Window::None),
        _ => None,
    }))
}

/// Reads a spectrum table.
///
/// # Errors
/// [`Error::Input`] with line and column for a missing column, a non-number, a frequency
/// that is not positive, a negative PSD, a loss that is not positive, a non-positive dof,
/// frequencies that do not increase within a run, or runs whose frequencies differ.
pub fn read_spectra(path: &Path) -> Result<Vec<SpectrumGroup>> {
    parse_spectra(open(path)?, path)
}

/// As [`read_spectra`], with fields split at `d` (`--delimiter`).
///
/// # Errors
/// As [`read_spectra`].
pub fn read_spectra_in(path: &Path, d: Delimiter) -> Result<Vec<SpectrumGroup>> {
    parse_spectra_in(open(path)?, path, d)
}

/// As [`read_spectra`], from any reader; `file` names it in errors.
///
/// # Errors
/// As [`read_spectra`].
pub fn parse_spectra<R: Read>(reader: R, file: &Path) -> Result<Vec<SpectrumGroup>> {
    parse_spectra_in(reader, file, Delimiter::Comma)
}

/// As [`parse_spectra`], with fields split at `d`.
///
/// # Errors
/// As [`read_spectra`].
pub fn parse_spectra_in<R: Read>(
    reader: R,
    file: &Path,
    d: Delimiter,
) -> Result<Vec<SpectrumGroup>> {
    let mut rdr = csv_reader_in(reader, d);
    let mut records = rdr.records();
    let header = match records.next() {
        None => {
            return Err(table_error(
                file,
                None,
                None,
                "the file is empty; expected a header line with columns f, psd, loss".into(),
            ));
        }
        Some(r) => Header::new(file, &r.map_err(|e| csv_error(file, e))?)?.with_delimiter(d),
    };
    let cols = Columns::new(&header, file)?;
    let mut pending = PendingGroups::default();
    for rec in records {
        let rec = rec.map_err(|e| csv_error(file, e))?;
        if is_blank(&rec) {
            continue;
        }
        header.check_width(file, &rec)?;
        let (tw, run, row) = cols.row(&rec, file, d)?;
        pending.push(tw, run, row, cols.f, file)?;
    }
    pending.into_groups(&cols, file)
}

/// An error in a spectrum table at `line` and the 0-based column `col`.
fn table_error(file: &Path, line: Option<u64>, col: Option<usize>, msg: String) -> Error {
    Error::input(file, line, col.map(|c| c as u64 + 1), msg)
}

/// Where the columns of a spectrum table are.
struct Columns {
    f: usize,
    psd: usize,
    loss: usize,
    dof: Option<usize>,
    run: Option<usize>,
    tw: Option<usize>,
}

impl Columns {
    /// # Errors
    /// [`Error::Input`] when `f`, `psd` or `loss` is missing.
    fn new(header: &Header, file: &Path) -> Result<Self> {
        let req = header.require(file, &["f", "psd", "loss"])?;
        Ok(Columns {
            f: req[0],
            psd: req[1],
            loss: req[2],
            dof: header.find("dof"),
            run: header.find("run"),
            tw: header.find("tw"),
        })
    }

    /// One data row: its waiting time, its run's name and its checked values.
    ///
    /// # Errors
    /// [`Error::Input`] for a non-number, a frequency that is not positive, a negative
    /// PSD, a loss that is not positive or a non-positive dof.
    fn row(
        &self,
        rec: &csv::StringRecord,
        file: &Path,
        d: Delimiter,
    ) -> Result<(Option<f64>, String, Row)> {
        let err =
            |line: u64, col: usize, msg: String| table_error(file, Some(line), Some(col), msg);
        let line = line_of(rec);
        let num =
            |i: usize, name: &str| parse_number_in(&rec[i], name, d).map_err(|m| err(line, i, m));
        let f = num(self.f, "f")?;
        if !(f > 0.0) {
            return Err(err(
                line,
                self.f,
                format!("column 'f' is {f}, expected a positive frequency in hertz"),
            ));
        }
        let psd = num(self.psd, "psd")?;
        if psd < 0.0 {
            return Err(err(
                line,
                self.psd,
                format!("column 'psd' is {psd}, expected a number >= 0 (a power spectral density)"),
            ));
        }
        let loss = num(self.loss, "loss")?;
        if !(loss > 0.0) {
            return Err(err(
                line,
                self.loss,
                format!(
                    "column 'loss' is {loss}, expected a positive number (the dissipative part \
                     is positive for a passive system)"
                ),
            ));
        }
        let dof = match self.dof {
            Some(i) => {
                let v = num(i, "dof")?;
                if !(v > 0.0) {
                    return Err(err(
                        line,
                        i,
                        format!(
                            "column 'dof' is {v}, expected a positive number of degrees of freedom"
                        ),
                    ));
                }
                Some(v)
            }
            None => None,
        };
        let tw = self.tw.map(|i| num(i, "tw")).transpose()?;
        let run = self.run.map_or_else(String::new, |i| rec[i].to_string());
        let row = Row {
            f,
            psd,
            loss,
            dof,
            line,
        };
        Ok((tw, run, row))
    }
}

/// The rows read so far, by waiting time.
#[derive(Default)]
struct PendingGroups {
    /// (tw bits) -> group index.
    group_of: HashMap<u64, usize>,
    /// Per group: run name -> rows.
    groups: Vec<Pending>,
}

impl PendingGroups {
    /// Adds a row to its waiting time's run.
    ///
    /// # Errors
    /// [`Error::Input`] when its frequency is not above the run's previous one (`i_f`
    /// is the frequency column).
    fn push(
        &mut self,
        tw: Option<f64>,
        run: String,
        row: Row,
        i_f: usize,
        file: &Path,
    ) -> Result<()> {
        let groups = &mut self.groups;
        let key = tw.map_or(u64::MAX, f64::to_bits);
        let gi = *self.group_of.entry(key).or_insert_with(|| {
            groups.push(Pending {
                tw,
                names: Vec::new(),
                rows: Vec::new(),
            });
            groups.len() - 1
        });
        let Pending { names, rows, .. } = &mut groups[gi];
        let ri = match names.iter().position(|n| *n == run) {
            Some(r) => r,
            None => {
                names.push(run.clone());
                rows.push(Vec::new());
                names.len() - 1
            }
        };
        if let Some(prev) = rows[ri].last()
            && !(row.f > prev.f)
        {
            return Err(table_error(
                file,
                Some(row.line),
                Some(i_f),
                format!(
                    "f = {} is not above the previous frequency {} (line {}){}; expected \
                     increasing frequencies",
                    row.f,
                    prev.f,
                    prev.line,
                    if run.is_empty() {
                        String::new()
                    } else {
                        format!(" of run '{run}'")
                    }
                ),
            ));
        }
        rows[ri].push(row);
        Ok(())
    }

    /// The spectrum groups, by increasing waiting time.
    ///
    /// # Errors
    /// [`Error::Input`] when there is no row, or runs whose frequencies differ.
    fn into_groups(self, cols: &Columns, file: &Path) -> Result<Vec<SpectrumGroup>> {
        if self.groups.is_empty() {
            return Err(table_error(
                file,
                None,
                None,
                "no data rows after the header".into(),
            ));
        }
        let mut out = self
            .groups
            .into_iter()
            .map(|p| p.into_group(cols, file))
            .collect::<Result<Vec<_>>>()?;
        out.sort_by(|a, b| a.tw.unwrap_or(0.0).total_cmp(&b.tw.unwrap_or(0.0)));
        Ok(out)
    }
}

impl Pending {
    /// The group of one waiting time, once every run is checked to have the first run's
    /// frequencies.
    ///
    /// # Errors
    /// [`Error::Input`] for a run with other frequencies than the first.
    fn into_group(self, cols: &Columns, file: &Path) -> Result<SpectrumGroup> {
        let Pending { tw, names, rows } = self;
        let first = &rows[0];
        for (name, r) in names.iter().zip(&rows).skip(1) {
            if r.len() != first.len() {
                return Err(table_error(
                    file,
                    None,
                    None,
                    format!(
                        "run '{name}' has {} frequencies and run '{}' has {}; expected the same \
                         frequencies in every run",
                        r.len(),
                        names[0],
                        first.len()
                    ),
                ));
            }
            if let Some((a, b)) = r
                .iter()
                .zip(first)
                .find(|(a, b)| a.f.total_cmp(&b.f).is_ne())
            {
                return Err(table_error(
                    file,
                    Some(a.line),
                    Some(cols.f),
                    format!(
                        "f = {} in run '{name}' where run '{}' has f = {} (line {}); expected \
                         the same frequencies in every run",
                        a.f, names[0], b.f, b.line
                    ),
                ));
            }
        }
        let (nr, nf) = (rows.len(), first.len());
        let grid =
            |get: &dyn Fn(&Row) -> f64| Array2::from_shape_fn((nr, nf), |(r, j)| get(&rows[r][j]));
        Ok(SpectrumGroup {
            tw,
            freqs: first.iter().map(|r| r.f).collect(),
            psd: grid(&|r| r.psd),
            loss: grid(&|r| r.loss),
            dof: cols.dof.map(|_| grid(&|r| r.dof.unwrap_or(f64::NAN))),
            runs: names,
        })
    }
}

/// What a record file held besides its samples.
#[derive(Debug, Clone, PartialEq)]
pub struct Records {
    /// Run names (from the header, or `1`, `2`, … when the first line is all numbers).
    pub runs: Vec<String>,
    /// The first column, when it holds the sample times rather than a run.
    pub time: Option<TimeColumn>,
}

/// A record's column of sample times.
#[derive(Debug, Clone, PartialEq)]
pub struct TimeColumn {
    /// Its header name, or `column 1` in a file without a header.
    pub name: String,
    /// How it was recognised, in words.
    pub by: &'static str,
    /// The mean step, (last − first)/(rows − 1), in the column's units (seconds).
    pub step: f64,
    /// Rows read.
    pub rows: u64,
}

/// Whether a column name says it holds times: `t`, `time`, `seconds`, … with any unit
/// suffix (`time_s`, `t (s)`, `Time[s]`).
pub fn is_time_name(name: &str) -> bool {
    let lower = name.trim().to_lowercase();
    let base = lower
        .split(|c: char| !c.is_alphanumeric())
        .next()
        .unwrap_or("");
    matches!(
        base,
        "t" | "time" | "times" | "timestamp" | "seconds" | "sec" | "secs" | "s"
    )
}

/// Data lines read before deciding whether a file without a header has a time column.
const PRESCAN: usize = 64;

/// Streams a noise record: `sink(run, value)` receives every sample in order. A first
/// column of times — named as one ([`is_time_name`]), or, without a header, strictly
/// increasing with even steps over the first 64 lines — is not a run: it is checked for
/// even steps throughout and returned as [`Records::time`].
///
/// # Errors
/// [`Error::Input`] for an empty file, a line whose field count differs, a field that is
/// not a finite number, or a time that breaks the even steps (with line and column).
pub fn stream_records(path: &Path, sink: impl FnMut(usize, f64)) -> Result<Records> {
    stream_records_from(open(path)?, path, sink)
}

/// As [`stream_records`], with fields split at `d` (`--delimiter`); a `.npy` file (by its
/// name) is read as a NumPy array instead ([`crate::input::npy::read_noise_npy`]).
///
/// # Errors
/// As [`stream_records`] and [`crate::input::npy::read_noise_npy`].
pub fn stream_records_in(
    path: &Path,
    d: Delimiter,
    mut sink: impl FnMut(usize, f64),
) -> Result<Records> {
    if crate::input::npy::is_npy(path) {
        let (runs, a) = crate::input::npy::read_noise_npy(path)?;
        for (r, row) in a.outer_iter().enumerate() {
            for &v in row {
                sink(r, v);
            }
        }
        return Ok(Records { runs, time: None });
    }
    stream_records_from_in(open(path)?, path, d, sink)
}

/// As [`stream_records`], from any reader.
///
/// A dedicated reader rather than a general CSV parser, because records can hold 10⁸
/// lines: the input is read in blocks, split at newlines and commas by hand, and each
/// field parsed as a number, with the same line:column errors as everywhere else.
///
/// # Errors
/// As [`stream_records`].
pub fn stream_records_from<R: Read>(
    reader: R,
    file: &Path,
    sink: impl FnMut(usize, f64),
) -> Result<Records> {
    stream_records_from_in(reader, file, Delimiter::Comma, sink)
}

/// As [`stream_records_from`], with fields split at `d`.
///
/// # Errors
/// As [`stream_records`].
pub fn stream_records_from_in<R: Read>(
    reader: R,
    file: &Path,
    d: Delimiter,
    mut sink: impl FnMut(usize, f64),
) -> Result<Records> {
    let mut lines = BlockLines::new(reader);
    let mut line_no: u64 = 0;
    let mut names: Option<Vec<String>> = None;
    // Lines held back (without a header) until the time column is decided.
    let mut held: Vec<(u64, String)> = Vec::new();
    let mut time: Option<TimeTracker> = None;
    let mut decided = false;
    while let Some(line) = lines.next_line(file)? {
        line_no += 1;
        let Some(text) = record_text(line, line_no, file)? else {
            continue;
        };
        let Some(n) = &names else {
            let (n, numeric) = first_record_line(text, line_no, file, d)?;
            if numeric && n.len() > 1 {
                held.push((line_no, text.to_string()));
            } else {
                if numeric {
                    emit(text, line_no, file, &n, d, &mut sink)?;
                } else if n.len() > 1 && is_time_name(&n[0]) {
                    time = Some(TimeTracker::new(&n[0], "by its name"));
                }
                decided = true;
            }
            names = Some(n);
            continue;
        };
        if decided {
            emit_line(text, line_no, file, n, d, &mut time, &mut sink)?;
            continue;
        }
        held.push((line_no, text.to_string()));
        if held.len() >= PRESCAN {
            time = even_first_column(&held, d);
            for (l, t) in std::mem::take(&mut held) {
                emit_line(&t, l, file, n, d, &mut time, &mut sink)?;
            }
            decided = true;
        }
    }
    let Some(mut names) = names else {
        return Err(Error::input(
            file,
            None,
            None,
            "the record is empty; expected one number per line (or one column per run)",
        ));
    };
    if !decided {
        time = even_first_column(&held, d);
        for (l, t) in std::mem::take(&mut held) {
            emit_line(&t, l, file, &names, d, &mut time, &mut sink)?;
        }
    }
    let time = match time {
        Some(t) => {
            names.remove(0);
            if t.name == "column 1" {
                // Runs of a file without a header are numbered from 1 again.
                names = (1..=names.len()).map(|i| i.to_string()).collect();
            }
            Some(t.finish(file)?)
        }
        None => None,
    };
    Ok(Records { runs: names, time })
}

/// A time column being checked for even steps.
struct TimeTracker {
    name: String,
    by: &'static str,
    first: f64,
    prev: f64,
    step: f64,
    rows: u64,
}

impl TimeTracker {
    fn new(name: &str, by: &'static str) -> Self {
        TimeTracker {
            name: name.to_string(),
            by,
            first: f64::NAN,
            prev: f64::NAN,
            step: f64::NAN,
            rows: 0,
        }
    }

    /// Takes the time of one row; an error names the line when the step is off by more
    /// than half the first step (a gap, a repeat, a jump or a reversal).
    fn push(&mut self, v: f64, line: u64, file: &Path) -> Result<()> {
        self.rows += 1;
        if self.rows == 1 {
            self.first = v;
        } else {
            let d = v - self.prev;
            if self.rows == 2 {
                self.step = d;
            }
            if !(self.step > 0.0 && (d - self.step).abs() <= 0.5 * self.step) {
                return Err(Error::input(
                    file,
                    Some(line),
                    Some(1),
                    format!(
                        "time column '{}' goes from {} to {}, a step of {}; expected even \
                         steps of about {} (a gap, a repeated or a reordered row?)",
                        self.name, self.prev, v, d, self.step
                    ),
                ));
            }
        }
        self.prev = v;
        Ok(())
    }

    fn finish(self, file: &Path) -> Result<TimeColumn> {
        if self.rows < 2 {
            return Err(Error::input(
                file,
                None,
                None,
                format!(
                    "time column '{}' has {} row(s); expected a record of many samples",
                    self.name, self.rows
                ),
            ));
        }
        Ok(TimeColumn {
            name: self.name,
            by: self.by,
            step: (self.prev - self.first) / (self.rows - 1) as f64,
            rows: self.rows,
        })
    }
}

/// A time tracker when the first column of the held lines (a file without a header)
/// rises with even steps: at least 8 lines, every step within 1% of their mean.
fn even_first_column(held: &[(u64, String)], d: Delimiter) -> Option<TimeTracker> {
    let first: Vec<f64> = held
        .iter()
        .map(|(_, t)| {
            d.fields(t)
                .next()
                .and_then(|f| parse_number_in(f, "", d).ok())
        })
        .collect::<Option<Vec<f64>>>()?;
    if first.len() < 8 {
        return None;
    }
    let steps: Vec<f64> = first.windows(2).map(|w| w[1] - w[0]).collect();
    let mean = steps.iter().sum::<f64>() / steps.len() as f64;
    (mean > 0.0 && steps.iter().all(|d| (d - mean).abs() <= 0.01 * mean))
        .then(|| TimeTracker::new("column 1", "by its even steps"))
}

/// One data line: the time (if any) to the tracker, the rest to `sink` as runs.
fn emit_line(
    text: &str,
    line: u64,
    file: &Path,
    names: &[String],
    d: Delimiter,
    time: &mut Option<TimeTracker>,
    sink: &mut impl FnMut(usize, f64),
) -> Result<()> {
    let Some(tracker) = time else {
        return emit(text, line, file, names, d, sink);
    };
    let mut t = f64::NAN;
    emit(text, line, file, names, d, &mut |i, v| {
        if i == 0 {
            t = v;
        } else {
            sink(i - 1, v);
        }
    })?;
    tracker.push(t, line, file)
}

/// The lines of a reader, read in blocks of 64 KiB.
struct BlockLines<R> {
    reader: R,
    buf: Vec<u8>,
    /// First unconsumed byte in `buf`.
    start: usize,
    eof: bool,
}

impl<R: Read> BlockLines<R> {
    const BLOCK: usize = 1 << 16;

    fn new(reader: R) -> Self {
        BlockLines {
            reader,
            buf: Vec::with_capacity(Self::BLOCK * 2),
            start: 0,
            eof: false,
        }
    }

    /// The next line without its newline (the last one may have none), or `None` at the
    /// end of the input.
    ///
    /// # Errors
    /// [`Error::Input`] when the reader fails (naming the line when one is too long).
    fn next_line(&mut self, file: &Path) -> Result<Option<&[u8]>> {
        loop {
            // Find the next complete line; read more when there is none.
            let start = self.start;
            match memchr_newline(&self.buf[start..]) {
                Some(i) => {
                    self.start += i + 1;
                    return Ok(Some(&self.buf[start..start + i]));
                }
                None if self.eof => {
                    if start >= self.buf.len() {
                        return Ok(None);
                    }
                    self.start = self.buf.len();
                    return Ok(Some(&self.buf[start..]));
                }
                None => {
                    self.buf.drain(..start);
                    self.start = 0;
                    let old = self.buf.len();
                    self.buf.resize(old + Self::BLOCK, 0);
                    let got = self
                        .reader
                        .read(&mut self.buf[old..])
                        .map_err(|e| crate::input::read_error(file, e))?;
                    self.buf.truncate(old + got);
                    self.eof = got == 0;
                }
            }
        }
    }
}

/// The text of line `line_no` of a record, trimmed; `None` for a blank or comment line.
///
/// # Errors
/// [`Error::Input`] when the line is not UTF-8.
fn record_text<'a>(line: &'a [u8], line_no: u64, file: &Path) -> Result<Option<&'a str>> {
    let mut text = std::str::from_utf8(line).map_err(|_| {
        Error::input(
            file,
            Some(line_no),
            None,
            "the file is not valid UTF-8 text",
        )
    })?;
    if line_no == 1 {
        text = text.trim_start_matches('\u{feff}');
    }
    let text = text.trim_end_matches('\r').trim();
    Ok((!text.is_empty() && !text.starts_with('#')).then_some(text))
}

/// The column names from a record's first line: its header, or `1`, `2`, … when it is
/// all numbers (then the second value is `true` and the line is data).
///
/// # Errors
/// [`Error::Input`] for a line separated by something other than commas, or a name that
/// appears twice.
fn first_record_line(
    text: &str,
    line_no: u64,
    file: &Path,
    d: Delimiter,
) -> Result<(Vec<String>, bool)> {
    let fields: Vec<&str> = d.fields(text).collect();
    let number = |f: &str| parse_number_in(f, "", d).is_ok();
    if fields.len() == 1
        && !number(fields[0])
        && let Some(other) = d.other_in(text)
    {
        return Err(Error::input(
            file,
            Some(line_no),
            Some(1),
            format!(
                "the line is '{text}': with --delimiter {} it is a single field; give \
                 --delimiter {} (a record is one number per line, or one column per run)",
                d.name(),
                other.name()
            ),
        ));
    }
    if fields.iter().all(|f| number(f)) {
        let names: Vec<String> = (1..=fields.len()).map(|i| i.to_string()).collect();
        return Ok((names, true));
    }
    let mut seen = std::collections::HashSet::new();
    for (i, f) in fields.iter().enumerate() {
        if !seen.insert(*f) {
            return Err(Error::input(
                file,
                Some(line_no),
                Some(i as u64 + 1),
                format!("column '{f}' appears twice in the header; expected each name once"),
            ));
        }
    }
    Ok((fields.iter().map(|f| f.to_string()).collect(), false))
}

fn memchr_newline(b: &[u8]) -> Option<usize> {
    memchr::memchr(b'\n', b)
}

/// Parses one data line of `names.len()` numbers and hands them to `sink`.
fn emit(
    text: &str,
    line: u64,
    file: &Path,
    names: &[String],
    d: Delimiter,
    sink: &mut impl FnMut(usize, f64),
) -> Result<()> {
    let width = names.len();
    let mut count = 0usize;
    for (i, field) in d.fields(text).enumerate() {
        if i >= width {
            count = i + 1;
            continue;
        }
        let v = match parse_number_in(field, &names[i], d) {
            Ok(v) => v,
            Err(msg) => return Err(Error::input(file, Some(line), Some(i as u64 + 1), msg)),
        };
        sink(i, v);
        count = i + 1;
    }
    if count != width {
        let hint = if d == Delimiter::Comma && count > width {
            format!("a stray delimiter, or {}", crate::input::DECIMAL_COMMA_HINT)
        } else {
            "a cut-off line or a stray delimiter?".to_string()
        };
        return Err(Error::input(
            file,
            Some(line),
            None,
            format!("the line has {count} fields, expected {width} (one per run); {hint}"),
        ));
    }
    Ok(())
}

/// Writes spectrum groups in the format [`read_spectra`] reads (`tw` and `run` columns
/// only when they carry information).
pub fn write_spectra(groups: &[SpectrumGroup]) -> Vec<u8> {
    use std::fmt::Write;
    let with_tw = groups.iter().any(|g| g.tw.is_some());
    let with_run = groups.iter().any(|g| g.runs.len() > 1);
    let with_dof = groups.iter().any(|g| g.dof.is_some());
    let mut cols = Vec::new();
    if with_tw {
        cols.push("tw");
    }
    if with_run {
        cols.push("run");
    }
    cols.extend(["f", "psd", "loss"]);
    if with_dof {
        cols.push("dof");
    }
    let mut s = cols.join(",");
    s.push('\n');
    for g in groups {
        for (r, name) in g.runs.iter().enumerate() {
            for (j, f) in g.freqs.iter().enumerate() {
                if let Some(tw) = g.tw.filter(|_| with_tw) {
                    let _ = write!(s, "{tw:?},");
                }
                if with_run {
                    let _ = write!(s, "{name},");
                }
                let _ = write!(s, "{f:?},{:?},{:?}", g.psd[[r, j]], g.loss[[r, j]]);
                if let Some(d) = &g.dof {
                    let _ = write!(s, ",{:?}", d[[r, j]]);
                }
                s.push('\n');
            }
        }
    }
    s.into_bytes()
}
