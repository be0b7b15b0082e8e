//! Readers: turn files into validated data structures, with file:line:column errors.

pub mod tidy;

pub use tidy::{ColumnNames, read_campaign, write_campaign};

use crate::error::{Error, Result};
use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

/// Parses one numeric CSV field, naming the column and expecting a finite number.
pub(crate) fn parse_number(field: &str, column: &str) -> Result<f64, String> {
    if field.is_empty() {
        return Err(format!("column '{column}' is empty, expected a number"));
    }
    match field.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!(
            "column '{column}' is '{field}', expected a finite number"
        )),
        Err(_) => Err(format!("column '{column}' is '{field}', expected a number")),
    }
}

/// The longest line fdtemp reads (1 MiB): a longer one means the file is not a table.
pub const MAX_LINE: usize = 1 << 20;

/// The error a [`LineLimit`] raises.
#[derive(Debug)]
pub(crate) struct LineTooLong {
    line: u64,
}

impl std::fmt::Display for LineTooLong {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "line {} is longer than 1 MiB", self.line)
    }
}

impl std::error::Error for LineTooLong {}

/// A reader that fails on a line longer than [`MAX_LINE`] instead of buffering it whole.
pub(crate) struct LineLimit<R> {
    inner: R,
    line: u64,
    run: usize,
}

impl<R: Read> Read for LineLimit<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        for &b in &buf[..n] {
            if b == b'\n' {
                self.line += 1;
                self.run = 0;
            } else {
                self.run += 1;
                if self.run > MAX_LINE {
                    return Err(std::io::Error::new(
                        std::io::ErrorKind::InvalidData,
                        LineTooLong {
                            line: self.line + 1,
                        },
                    ));
                }
            }
        }
        Ok(n)
    }
}

/// Opens a file for reading, naming it in the error; lines are limited to 1 MiB.
pub(crate) fn open(path: &Path) -> Result<std::io::BufReader<LineLimit<std::fs::File>>> {
    std::fs::File::open(path)
        .map(|f| {
            std::io::BufReader::new(LineLimit {
                inner: f,
                line: 0,
                run: 0,
            })
        })
        .map_err(|source| Error::Io {
            path: path.to_path_buf(),
            action: "cannot read",
            source,
        })
}

/// Maps a read error, naming the line when a line was too long.
pub(crate) fn read_error(file: &Path, e: std::io::Error) -> Error {
    if let Some(t) = e
        .get_ref()
        .and_then(|inner| inner.downcast_ref::<LineTooLong>())
    {
        return Error::input(
            file,
            Some(t.line),
            None,
            "the line is longer than 1 MiB; expected a text table (is this the right file?)",
        );
    }
    Error::input(file, None, None, format!("read failed: {e}"))
}

/// The CSV reader every fdtemp format uses: comma-separated, fields trimmed, `#` comment
/// lines, ragged lines allowed (checked by the caller with a clear message).
pub(crate) fn csv_reader<R: Read>(reader: R) -> csv::Reader<R> {
    csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .from_reader(reader)
}

/// Maps a CSV-level error (bad UTF-8, I/O) to an input error at its line.
pub(crate) fn csv_error(file: &Path, e: csv::Error) -> Error {
    let line = e.position().map(|p| p.line());
    let what = match e.kind() {
        csv::ErrorKind::Utf8 { .. } => "the file is not valid UTF-8 text".to_string(),
        csv::ErrorKind::Io(_) => {
            if let csv::ErrorKind::Io(io) = e.into_kind() {
                return read_error(file, io);
            }
            unreachable!("the kind was Io")
        }
        _ => e.to_string(),
    };
    Error::input(file, line, None, what)
}

/// The 1-based line of a record.
pub(crate) fn line_of(rec: &csv::StringRecord) -> u64 {
    rec.position().map_or(0, |p| p.line())
}

/// A parsed header line: field names (byte-order mark removed), checked for repeats.
pub(crate) struct Header {
    pub fields: Vec<String>,
    pub line: u64,
}

impl Header {
    /// Reads the header from its record.
    pub fn new(file: &Path, rec: &csv::StringRecord) -> Result<Self> {
        let line = rec.position().map_or(1, |p| p.line());
        let fields: Vec<String> = rec
            .iter()
            .enumerate()
            .map(|(i, h)| {
                if i == 0 {
                    h.trim_start_matches('\u{feff}')
                } else {
                    h
                }
                .to_string()
            })
            .collect();
        let mut seen: HashMap<&str, usize> = HashMap::new();
        for (i, h) in fields.iter().enumerate() {
            if let Some(first) = seen.insert(h.as_str(), i) {
                return Err(Error::input(
                    file,
                    Some(line),
                    Some(i as u64 + 1),
                    format!(
                        "column '{h}' appears twice in the header (columns {} and {}); expected \
                         each name once",
                        first + 1,
                        i + 1
                    ),
                ));
            }
        }
        Ok(Header { fields, line })
    }

    /// The index of an optional column.
    pub fn find(&self, name: &str) -> Option<usize> {
        self.fields.iter().position(|h| h == name)
    }

    /// The indices of required columns, or an error naming the first missing one.
    pub fn require(&self, file: &Path, names: &[&str]) -> Result<Vec<usize>> {
        names
            .iter()
            .map(|name| {
                self.find(name).ok_or_else(|| {
                    let single = self.fields.len() == 1
                        && (self.fields[0].contains(';') || self.fields[0].contains('\t'));
                    let numeric = 2 * self.fields.iter().filter(|f| f.parse::<f64>().is_ok()).count() > self.fields.len();
                    let hint = if single {
                        " (the header has a single column: fdtemp reads comma-separated files)"
                    } else if numeric {
                        " (the first line holds numbers: the file needs a header line naming the columns)"
                    } else {
                        ""
                    };
                    Error::input(
                        file,
                        Some(self.line),
                        None,
                        format!(
                            "no column '{name}' in the header (found: {}); expected columns {}{hint}",
                            self.fields.join(", "),
                            names.join(", ")
                        ),
                    )
                })
            })
            .collect()
    }

    /// An error for a data line whose field count differs from the header's.
    pub fn check_width(&self, file: &Path, rec: &csv::StringRecord) -> Result<()> {
        if rec.len() == self.fields.len() {
            return Ok(());
        }
        Err(Error::input(
            file,
            Some(line_of(rec)),
            None,
            format!(
                "the line has {} fields, expected {} as in the header (a cut-off line or a stray \
                 delimiter?)",
                rec.len(),
                self.fields.len()
            ),
        ))
    }
}

/// True for a record that is one empty field (a blank line).
pub(crate) fn is_blank(rec: &csv::StringRecord) -> bool {
    rec.len() == 1 && rec[0].is_empty()
}
