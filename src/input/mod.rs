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

/// Opens a file for reading, naming it in the error.
pub(crate) fn open(path: &Path) -> Result<std::io::BufReader<std::fs::File>> {
    std::fs::File::open(path)
        .map(std::io::BufReader::new)
        .map_err(|source| Error::Io {
            path: path.to_path_buf(),
            action: "cannot read",
            source,
        })
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
        csv::ErrorKind::Io(io) => format!("read failed: {io}"),
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
                    let hint = if single {
                        " (the header has a single column: fdtemp reads comma-separated files)"
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
