//! Readers: turn files into validated data structures, with file:line:column errors.

pub(crate) mod lines;
pub mod npy;
pub mod tidy;

pub use tidy::{
    CampaignRead, ColumnNames, ExcludedSample, ReadCampaign, read_campaign, read_campaign_with,
    write_campaign,
};

use crate::error::{Error, Result};
use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

/// What separates the fields of a text table (`--delimiter`).
///
/// With any delimiter but the comma, a number may be written with a decimal comma
/// (`0,25`); with the comma it may not, since the comma ends the field.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, clap::ValueEnum)]
#[serde(rename_all = "lowercase")]
pub enum Delimiter {
    /// `,` (the default).
    #[default]
    Comma,
    /// `;`.
    Semicolon,
    /// One tab character.
    Tab,
    /// Any run of spaces and tabs; leading and trailing ones are ignored.
    Whitespace,
}

impl Delimiter {
    /// The option's value, as the user types it.
    pub fn name(self) -> &'static str {
        match self {
            Delimiter::Comma => "comma",
            Delimiter::Semicolon => "semicolon",
            Delimiter::Tab => "tab",
            Delimiter::Whitespace => "whitespace",
        }
    }

    /// Whether a decimal comma is read as a decimal point.
    pub fn decimal_comma(self) -> bool {
        self != Delimiter::Comma
    }

    /// The byte the CSV parser splits at (whitespace runs are folded into 0x1f first).
    fn byte(self) -> u8 {
        match self {
            Delimiter::Comma => b',',
            Delimiter::Semicolon => b';',
            Delimiter::Tab => b'\t',
            Delimiter::Whitespace => UNIT_SEPARATOR,
        }
    }

    /// Whether `c` separates two fields.
    pub(crate) fn splits(self, c: char) -> bool {
        match self {
            Delimiter::Comma => c == ',',
            Delimiter::Semicolon => c == ';',
            Delimiter::Tab => c == '\t',
            Delimiter::Whitespace => c == ' ' || c == '\t',
        }
    }

    /// The fields of one line of text (already trimmed).
    pub(crate) fn fields(self, text: &str) -> impl Iterator<Item = &str> {
        text.split(move |c: char| self.splits(c))
            .filter(move |f| self != Delimiter::Whitespace || !f.is_empty())
            .map(str::trim)
    }

    /// The delimiter a single-field line seems to use instead of this one, if any.
    pub(crate) fn other_in(self, text: &str) -> Option<Delimiter> {
        [
            (Delimiter::Semicolon, ';'),
            (Delimiter::Tab, '\t'),
            (Delimiter::Comma, ','),
            (Delimiter::Whitespace, ' '),
        ]
        .into_iter()
        .find(|&(d, c)| d != self && text.trim().contains(c))
        .map(|(d, _)| d)
    }
}

/// The byte that whitespace runs become before the CSV parser sees them.
const UNIT_SEPARATOR: u8 = 0x1f;

/// What a comma inside a number means to the user, for the comma delimiter.
pub(crate) const DECIMAL_COMMA_HINT: &str = "a decimal comma? With --delimiter comma (the default) \
                                  numbers need a decimal point; give --delimiter semicolon, tab \
                                  or whitespace for a file with decimal commas";

/// Parses one numeric CSV field, naming the column and expecting a finite number.
#[allow(dead_code)] // for readers that take no --delimiter
pub(crate) fn parse_number(field: &str, column: &str) -> Result<f64, String> {
    parse_number_in(field, column, Delimiter::Comma)
}

/// As [`parse_number`], reading a decimal comma as a point unless the delimiter is a comma.
pub(crate) fn parse_number_in(field: &str, column: &str, d: Delimiter) -> Result<f64, String> {
    if field.is_empty() {
        return Err(format!("column '{column}' is empty, expected a number"));
    }
    // The fast parser first (its accepted numbers are std's, to the bit: see the test);
    // anything it refuses goes through std's, which also words the error.
    if let Ok(v) = fast_float2::parse::<f64, _>(field)
        && v.is_finite()
    {
        return Ok(v);
    }
    let parsed = match field.parse::<f64>() {
        Err(_) if field.contains(',') && !field.contains('.') => {
            let pointed = field.replacen(',', ".", 1);
            match pointed.parse::<f64>() {
                Ok(v) if d.decimal_comma() => Ok(v),
                Ok(_) => {
                    return Err(format!(
                        "column '{column}' is '{field}', {DECIMAL_COMMA_HINT}"
                    ));
                }
                Err(e) => Err(e),
            }
        }
        p => p,
    };
    match parsed {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!(
            "column '{column}' is '{field}', expected a finite number"
        )),
        Err(_) => Err(format!("column '{column}' is '{field}', expected a number")),
    }
}

/// A reader that folds every run of spaces and tabs into one [`UNIT_SEPARATOR`] and drops
/// them at the start and end of lines, so that the CSV parser can split at it.
pub(crate) struct FoldSpaces<R> {
    inner: R,
    buf: Vec<u8>,
    line_start: bool,
    pending: bool,
}

impl<R: Read> Read for FoldSpaces<R> {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        if out.is_empty() {
            return Ok(0);
        }
        loop {
            // The output is never longer than the input.
            self.buf.resize(out.len(), 0);
            let n = self.inner.read(&mut self.buf)?;
            if n == 0 {
                return Ok(0);
            }
            let mut k = 0;
            for &b in &self.buf[..n] {
                match b {
                    b'\n' => {
                        self.pending = false;
                        self.line_start = true;
                        out[k] = b;
                        k += 1;
                    }
                    b' ' | b'\t' | b'\r' => self.pending = !self.line_start,
                    _ => {
                        if self.pending {
                            out[k] = UNIT_SEPARATOR;
                            k += 1;
                            self.pending = false;
                        }
                        out[k] = b;
                        k += 1;
                        self.line_start = false;
                    }
                }
            }
            if k > 0 {
                return Ok(k);
            }
        }
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

/// A reader that fails on a line longer than [`MAX_LINE`] instead of buffering it whole,
/// and turns `\r\n` line ends into `\n` (the CSV layer counts lines at `\n` only, so a
/// CRLF file's errors named the line before the right one).
pub(crate) struct LineLimit<R> {
    inner: R,
    line: u64,
    run: usize,
    /// A `\r` at the end of the last read, held until the next byte shows whether a `\n`
    /// follows.
    held_cr: bool,
}

impl<R: Read> Read for LineLimit<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        if buf.len() < 2 {
            // Too small to hold a held `\r` and a new byte; BufReader never asks this.
            return self.inner.read(buf);
        }
        loop {
            let start = usize::from(self.held_cr);
            if self.held_cr {
                buf[0] = b'\r';
            }
            let n = self.inner.read(&mut buf[start..])?;
            self.held_cr = false;
            let total = start + n;
            let mut w = 0;
            for i in 0..total {
                let b = buf[i];
                if b == b'\r' {
                    if i + 1 < total && buf[i + 1] == b'\n' {
                        continue;
                    }
                    if i + 1 == total && n > 0 {
                        self.held_cr = true;
                        continue;
                    }
                }
                buf[w] = b;
                w += 1;
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
            // Only a held `\r` came in: read on (0 bytes means the end of the file).
            if w > 0 || n == 0 {
                return Ok(w);
            }
        }
    }
}

/// Any reader with the line-length limit and CRLF handling of [`open`].
pub(crate) fn limited<R: std::io::Read>(inner: R) -> std::io::BufReader<LineLimit<R>> {
    std::io::BufReader::new(LineLimit {
        inner,
        line: 0,
        run: 0,
        held_cr: false,
    })
}

/// Opens a file for reading, naming it in the error; lines are limited to 1 MiB.
pub(crate) fn open(path: &Path) -> Result<std::io::BufReader<LineLimit<std::fs::File>>> {
    open_file(path).map(limited)
}

/// Opens a file for reading as it is, naming it in the error (for [`lines::Blocks`],
/// which limits lines itself).
pub(crate) fn open_file(path: &Path) -> Result<std::fs::File> {
    std::fs::File::open(path).map_err(|source| Error::Io {
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
        return line_too_long(file, t.line);
    }
    Error::input(file, None, None, format!("read failed: {e}"))
}

/// The error for a line longer than [`MAX_LINE`].
pub(crate) fn line_too_long(file: &Path, line: u64) -> Error {
    Error::input(
        file,
        Some(line),
        None,
        "the line is longer than 1 MiB; expected a text table (is this the right file?)",
    )
}

/// The CSV reader every fdtemp format uses: comma-separated, fields trimmed, `#` comment
/// lines, ragged lines allowed (checked by the caller with a clear message).
#[allow(dead_code)] // for readers that take no --delimiter
pub(crate) fn csv_reader<R: Read>(reader: R) -> csv::Reader<R> {
    csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .from_reader(reader)
}

/// As [`csv_reader`], split at `d`.
pub(crate) fn csv_reader_in<R: Read>(reader: R, d: Delimiter) -> csv::Reader<Delimited<R>> {
    let reader = match d {
        Delimiter::Whitespace => Delimited::Folded(FoldSpaces {
            inner: reader,
            buf: Vec::new(),
            line_start: true,
            pending: false,
        }),
        _ => Delimited::Plain(reader),
    };
    csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .comment(Some(b'#'))
        .trim(csv::Trim::All)
        .delimiter(d.byte())
        .from_reader(reader)
}

/// A reader as it is, or with its whitespace folded ([`FoldSpaces`]).
pub(crate) enum Delimited<R> {
    Plain(R),
    Folded(FoldSpaces<R>),
}

impl<R: Read> Read for Delimited<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        match self {
            Delimited::Plain(r) => r.read(buf),
            Delimited::Folded(r) => r.read(buf),
        }
    }
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
    /// The delimiter the file was split at (for hints in errors).
    pub delimiter: Delimiter,
}

impl Header {
    /// Reads the header from its record.
    pub fn new(file: &Path, rec: &csv::StringRecord) -> Result<Self> {
        let line = rec.position().map_or(1, |p| p.line());
        Header::from_fields(file, rec.iter(), line)
    }

    /// Reads the header from its fields, found on `line`.
    pub fn from_fields<'a>(
        file: &Path,
        fields: impl Iterator<Item = &'a str>,
        line: u64,
    ) -> Result<Self> {
        let fields: Vec<String> = fields
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
        Ok(Header {
            fields,
            line,
            delimiter: Delimiter::Comma,
        })
    }

    /// The same header, read with delimiter `d`.
    pub fn with_delimiter(self, d: Delimiter) -> Self {
        Header {
            delimiter: d,
            ..self
        }
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
                    let other = (self.fields.len() == 1)
                        .then(|| self.delimiter.other_in(&self.fields[0]))
                        .flatten();
                    let numeric = 2 * self.fields.iter().filter(|f| f.parse::<f64>().is_ok()).count() > self.fields.len();
                    let hint = if let Some(d) = other {
                        &format!(
                            " (the header has a single column with --delimiter {}: give \
                             --delimiter {})",
                            self.delimiter.name(),
                            d.name()
                        )
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
        self.check_count(file, rec.len(), line_of(rec))
    }

    /// As [`Header::check_width`], for a line of `len` fields.
    pub fn check_count(&self, file: &Path, len: usize, line: u64) -> Result<()> {
        if len == self.fields.len() {
            return Ok(());
        }
        let hint = if self.delimiter == Delimiter::Comma && len > self.fields.len() {
            format!(" (a stray delimiter, or {DECIMAL_COMMA_HINT})")
        } else {
            " (a cut-off line or a stray delimiter?)".to_string()
        };
        Err(Error::input(
            file,
            Some(line),
            None,
            format!(
                "the line has {} fields, expected {} as in the header{hint}",
                len,
                self.fields.len()
            ),
        ))
    }
}

/// True for a record that is one empty field (a blank line).
pub(crate) fn is_blank(rec: &csv::StringRecord) -> bool {
    rec.len() == 1 && rec[0].is_empty()
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(4000))]
        /// The fast parser never accepts a number std would refuse or read otherwise: on
        /// decimal strings and on scraps of number characters, whatever it accepts std
        /// reads to the same bits. Source: fast-float2's stated compatibility with
        /// `f64::from_str`, checked here rather than trusted.
        #[test]
        fn the_fast_parser_reads_what_std_reads(
            a in "[+-]?[0-9]{0,22}(\\.[0-9]{0,22})?([eE][+-]?[0-9]{1,4})?",
            b in "[0-9.eE+\\-_ infaINFA,x]{0,12}",
        ) {
            for s in [a.as_str(), b.as_str()] {
                if let Ok(v) = fast_float2::parse::<f64, _>(s) && v.is_finite() {
                    let std: f64 = s.parse().expect("std refuses what the fast parser read");
                    prop_assert_eq!(v.to_bits(), std.to_bits(), "{:?}", s);
                    let got = parse_number_in(s, "c", Delimiter::Comma).unwrap();
                    prop_assert_eq!(got.to_bits(), std.to_bits());
                }
            }
        }
    }
}
