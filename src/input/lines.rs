//! The byte-level reader of delimited text tables: the input is read in blocks of whole
//! lines, each block is cut into parts that threads split and parse side by side, and
//! every line keeps its 1-based number for errors.
//!
//! The rules are those of the CSV layer the other readers use ([`super::csv_reader_in`]):
//! lines starting with `#` are comments, blank lines are skipped, fields are trimmed, a
//! UTF-8 byte-order mark and `\r\n` line ends are accepted (a lone `\r` ends a line but
//! does not count as one), a line longer than [`MAX_LINE`] is an error, and a field in
//! double quotes may hold the delimiter (`""` is a quote). A quoted field may not run past
//! the end of its line.

use super::{Delimiter, MAX_LINE, line_too_long};
use crate::error::{Error, Result};
use std::io::Read;
use std::path::Path;

/// Bytes read per block (whole lines; a longer line carries over).
pub(crate) const BLOCK: usize = 16 << 20;

/// One line of a part: its number in the file and its text (line end removed).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Line<'a> {
    pub number: u64,
    pub text: &'a str,
}

/// A run of whole lines that one thread parses.
pub(crate) struct Part<'a> {
    text: &'a [u8],
    first_line: u64,
    file: &'a Path,
    at_start: bool,
}

impl<'a> Part<'a> {
    /// Its length in bytes.
    pub fn len(&self) -> usize {
        self.text.len()
    }

    /// The file the part is from (for errors).
    pub fn file(&self) -> &'a Path {
        self.file
    }

    /// The lines of the part as text, and the error for the first byte that is not UTF-8
    /// (the lines stop before the line that holds it).
    pub fn lines(&self) -> (impl Iterator<Item = Line<'a>> + use<'a>, Option<Error>) {
        let (text, bad) = match std::str::from_utf8(self.text) {
            Ok(text) => (text, None),
            Err(e) => {
                let before = &self.text[..e.valid_up_to()];
                let whole = before
                    .iter()
                    .rposition(|&c| c == b'\n')
                    .map_or(0, |i| i + 1);
                let line = self.first_line + count_newlines(before);
                let err = Error::input(
                    self.file,
                    Some(line),
                    None,
                    "the file is not valid UTF-8 text",
                );
                // The prefix up to a line end is valid UTF-8.
                let text = std::str::from_utf8(&before[..whole]).unwrap_or_default();
                (text, Some(err))
            }
        };
        let text = if self.at_start {
            text.strip_prefix('\u{feff}').unwrap_or(text)
        } else {
            text
        };
        let lines = LineIter {
            text,
            pos: 0,
            number: self.first_line,
        };
        (lines, bad)
    }
}

/// The lines of a text, ended by `\n`, `\r\n` or a lone `\r` (which does not count as a
/// line), in one search per line.
struct LineIter<'a> {
    text: &'a str,
    pos: usize,
    number: u64,
}

impl<'a> Iterator for LineIter<'a> {
    type Item = Line<'a>;

    fn next(&mut self) -> Option<Line<'a>> {
        let rest = self
            .text
            .as_bytes()
            .get(self.pos..)
            .filter(|r| !r.is_empty())?;
        let (end, step, counts) = match memchr::memchr2(b'\n', b'\r', rest) {
            None => (rest.len(), rest.len(), false),
            Some(i) if rest[i] == b'\n' => (i, i + 1, true),
            Some(i) if rest.get(i + 1) == Some(&b'\n') => (i, i + 2, true),
            Some(i) => (i, i + 1, false),
        };
        // The ends found are ASCII bytes, so both cuts are on character boundaries.
        let line = Line {
            number: self.number,
            text: &self.text[self.pos..self.pos + end],
        };
        self.pos += step;
        self.number += u64::from(counts);
        Some(line)
    }
}

/// The number of `\n` in `b` (a vectorized search: about 8 times faster than a byte loop).
fn count_newlines(b: &[u8]) -> u64 {
    memchr::memchr_iter(b'\n', b).count() as u64
}

/// A line that is a comment (`#` first) or holds nothing but spaces.
pub(crate) fn skipped(text: &str, d: Delimiter) -> bool {
    let first = if d == Delimiter::Whitespace {
        text.trim_start_matches([' ', '\t'])
    } else {
        text
    };
    first.starts_with('#') || text.trim().is_empty()
}

/// The fields of a data or header line in `out`; `false` for a line that is [`skipped`].
///
/// # Errors
/// [`Error::Input`] at the line when a quoted field is not closed on it.
pub(crate) fn fields_of<'a>(
    line: Line<'a>,
    d: Delimiter,
    out: &mut Vec<std::borrow::Cow<'a, str>>,
    file: &Path,
) -> Result<bool> {
    if skipped(line.text, d) {
        return Ok(false);
    }
    split(line.text, d, out).map_err(|m| Error::input(file, Some(line.number), None, m))?;
    Ok(true)
}

/// Splits a line (not [`skipped`]) into its trimmed fields, in `out`.
///
/// # Errors
/// A message when a quoted field is not closed on its line.
pub(crate) fn split<'a>(
    text: &'a str,
    d: Delimiter,
    out: &mut Vec<std::borrow::Cow<'a, str>>,
) -> std::result::Result<(), String> {
    out.clear();
    if d == Delimiter::Whitespace {
        if text.contains('"') {
            return split_quoted(text, d, out);
        }
        out.extend(d.fields(text).map(Into::into));
        return Ok(());
    }
    // A line with a quote goes field by field; the others are cut at every separator,
    // both found by vectorized searches.
    let bytes = text.as_bytes();
    if memchr::memchr(b'"', bytes).is_some() {
        return split_quoted(text, d, out);
    }
    let mut start = 0;
    for i in memchr::memchr_iter(d.byte(), bytes) {
        out.push(trim(&text[start..i]).into());
        start = i + 1;
    }
    out.push(trim(&text[start..]).into());
    Ok(())
}

/// `str::trim`, skipping the work for a field with no space at either end.
fn trim(f: &str) -> &str {
    match (f.as_bytes().first(), f.as_bytes().last()) {
        (Some(a), Some(b)) if a.is_ascii_graphic() && b.is_ascii_graphic() => f,
        _ => f.trim(),
    }
}

/// The rare line with quotes, field by field.
fn split_quoted<'a>(
    text: &'a str,
    d: Delimiter,
    out: &mut Vec<std::borrow::Cow<'a, str>>,
) -> std::result::Result<(), String> {
    let sep = |c: char| d.splits(c);
    let mut rest = if d == Delimiter::Whitespace {
        text.trim_matches([' ', '\t'])
    } else {
        text
    };
    loop {
        let lead = rest.trim_start();
        if let Some(inner) = lead.strip_prefix('"') {
            let mut field = String::new();
            let mut chars = inner.char_indices();
            let end = loop {
                match chars.next() {
                    None => {
                        return Err("a quoted field is not closed on its line; expected a \
                                    closing \" before the line ends"
                            .into());
                    }
                    Some((i, '"')) if inner[i + 1..].starts_with('"') => {
                        field.push('"');
                        chars.next();
                    }
                    Some((i, '"')) => break i + 1,
                    Some((_, c)) => field.push(c),
                }
            };
            // Text after the closing quote, up to the separator, belongs to the field.
            let after = &inner[end..];
            let stop = after.find(sep).unwrap_or(after.len());
            field.push_str(&after[..stop]);
            out.push(field.trim().to_string().into());
            if stop == after.len() {
                return Ok(());
            }
            rest = &after[stop + 1..];
            if d == Delimiter::Whitespace {
                rest = rest.trim_start_matches([' ', '\t']);
            }
        } else {
            let stop = rest.find(sep).unwrap_or(rest.len());
            out.push(rest[..stop].trim().into());
            if stop == rest.len() {
                return Ok(());
            }
            rest = &rest[stop + 1..];
            if d == Delimiter::Whitespace {
                rest = rest.trim_start_matches([' ', '\t']);
            }
        }
    }
}

/// Reads a table in blocks of whole lines.
pub(crate) struct Blocks<'f, R> {
    reader: R,
    file: &'f Path,
    /// Bytes to read per block ([`BLOCK`] but in tests).
    block: usize,
    buf: Vec<u8>,
    /// Bytes of `buf` carried from the last block (an unfinished line).
    carry: usize,
    next_line: u64,
    started: bool,
    done: bool,
}

impl<'f, R: Read> Blocks<'f, R> {
    pub fn new(reader: R, file: &'f Path, block: usize) -> Self {
        Blocks {
            reader,
            file,
            block: block.max(1),
            buf: Vec::new(),
            carry: 0,
            next_line: 1,
            started: false,
            done: false,
        }
    }

    /// The next block cut into about `parts` parts at line ends; `None` at the end.
    ///
    /// # Errors
    /// [`Error::Input`] for a read failure or a line longer than [`MAX_LINE`].
    pub fn next(&mut self, parts: usize) -> Result<Option<Vec<Part<'_>>>> {
        if self.done {
            return Ok(None);
        }
        // Drop the text handed out last time, keep the unfinished line.
        let used = self.buf.len() - self.carry;
        self.buf.drain(..used);
        let filled = self.buf.len();
        // Up to a block more (twice the carry for a long line); the buffer grows only as
        // far as the file goes, so a small file costs no more than its size.
        let want = self.block.max(2 * filled) - filled;
        // Room for exactly that much: read_to_end would otherwise double the buffer.
        self.buf.reserve_exact(want);
        let got = (&mut self.reader)
            .take(want as u64)
            .read_to_end(&mut self.buf)
            .map_err(|e| super::read_error(self.file, e))?;
        self.done = got < want;
        let filled = self.buf.len();
        let end = if self.done {
            filled
        } else {
            self.buf
                .iter()
                .rposition(|&c| c == b'\n')
                .map_or(0, |i| i + 1)
        };
        self.carry = filled - end;
        if self.carry > MAX_LINE {
            let line = self.next_line + count_newlines(&self.buf[..end]);
            return Err(line_too_long(self.file, line));
        }
        let text = &self.buf[..end];
        // Cut at line ends near equal sizes; number each part's first line.
        let mut out = Vec::with_capacity(parts);
        let (mut start, mut line) = (0, self.next_line);
        let size = text.len().div_ceil(parts.max(1)).max(1);
        while start < text.len() {
            let cut = (start + size).min(text.len());
            let stop = match text[cut - 1..].iter().position(|&c| c == b'\n') {
                Some(i) => cut + i,
                None => text.len(),
            };
            let piece = &text[start..stop];
            if piece.len() > MAX_LINE
                && let Some(at) = first_long_line(piece)
            {
                return Err(line_too_long(self.file, line + at));
            }
            out.push(Part {
                text: piece,
                first_line: line,
                file: self.file,
                at_start: !self.started && start == 0,
            });
            line += count_newlines(piece);
            start = stop;
        }
        self.started |= !out.is_empty();
        self.next_line = line;
        Ok(Some(out))
    }
}

/// How many lines precede the first line longer than [`MAX_LINE`], if there is one.
fn first_long_line(b: &[u8]) -> Option<u64> {
    b.split(|&c| c == b'\n')
        .position(|l| l.len() > MAX_LINE)
        .map(|k| k as u64)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn all_lines(text: &[u8], parts: usize, block: usize) -> Vec<(u64, String)> {
        // A reader that hands out `block_reads` bytes at a time.
        struct Slow<'a>(&'a [u8], usize);
        impl Read for Slow<'_> {
            fn read(&mut self, b: &mut [u8]) -> std::io::Result<usize> {
                let k = self.0.len().min(b.len()).min(self.1);
                b[..k].copy_from_slice(&self.0[..k]);
                self.0 = &self.0[k..];
                Ok(k)
            }
        }
        let mut blocks = Blocks::new(Slow(text, 3), Path::new("t.csv"), block);
        let mut out = Vec::new();
        while let Some(ps) = blocks.next(parts).unwrap() {
            for p in ps {
                let (lines, bad) = p.lines();
                assert!(bad.is_none());
                out.extend(lines.map(|l| (l.number, l.text.to_string())));
            }
        }
        out
    }

    #[test]
    fn lines_keep_their_numbers_across_parts_and_line_ends() {
        let text = b"\xef\xbb\xbfa,b\r\n1,2\n\n# c\n3,4\r5,6\n7,8";
        let want: Vec<(u64, String)> = [
            (1, "a,b"),
            (2, "1,2"),
            (3, ""),
            (4, "# c"),
            (5, "3,4"),
            (5, "5,6"),
            (6, "7,8"),
        ]
        .iter()
        .map(|&(n, s)| (n, s.to_string()))
        .collect();
        for parts in [1, 2, 3, 7] {
            for block in [1, 4, 9, 1000] {
                assert_eq!(
                    all_lines(text, parts, block),
                    want,
                    "{parts} parts, {block} bytes"
                );
            }
        }
    }

    #[test]
    fn quoted_fields_hold_the_delimiter_and_doubled_quotes() {
        let mut out = Vec::new();
        split(r#" "s, 1" , 2,"say ""hi""" "#, Delimiter::Comma, &mut out).unwrap();
        assert_eq!(out, ["s, 1", "2", r#"say "hi""#]);
        split("a  \"b c\"\t d", Delimiter::Whitespace, &mut out).unwrap();
        assert_eq!(out, ["a", "b c", "d"]);
        assert!(split("\"open, 1", Delimiter::Comma, &mut out).is_err());
        split(" a ;; b ", Delimiter::Semicolon, &mut out).unwrap();
        assert_eq!(out, ["a", "", "b"]);
    }

    #[test]
    fn comments_and_blank_lines_are_skipped() {
        assert!(skipped("# x", Delimiter::Comma));
        assert!(skipped("   ", Delimiter::Comma));
        assert!(!skipped(" # x", Delimiter::Comma));
        assert!(skipped("  # x", Delimiter::Whitespace));
        assert!(!skipped("1,2", Delimiter::Comma));
    }
}
