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
use std::borrow::Cow;
use std::io::Read;
use std::path::Path;

/// Bytes read per block (whole lines; a longer line carries over). 2 MiB parse as fast
/// as 16 MiB on the 2-core machine (W1 of benches/ at B = 100: 0.186 s against 0.199 s)
/// and hold 28 MiB less.
pub(crate) const BLOCK: usize = 2 << 20;

/// Bytes read for the first block (the next ones double up to [`BLOCK`]).
const FIRST_BLOCK: usize = 1 << 20;

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

    /// Calls `row` with the number and the fields of every data line after the first
    /// `skip` lines (comment and blank lines are passed over), in order; then returns the
    /// error of [`Part::lines`] if the part is not all UTF-8.
    ///
    /// A part with no quote and no `\r`, split at one byte, is cut in a single pass that
    /// finds every delimiter and line end eight bytes at a time ([`Separators`]); any other
    /// goes line by line through [`fields_of`]. Both give the same fields (see the tests).
    ///
    /// # Errors
    /// The first error of `row`, of [`fields_of`], or the part's UTF-8 error.
    pub fn rows(
        &self,
        d: Delimiter,
        skip: usize,
        mut row: impl FnMut(u64, &[Cow<'a, str>]) -> Result<()>,
    ) -> Result<()> {
        let mut fields = Vec::new();
        let plain = d != Delimiter::Whitespace && memchr::memchr2(b'"', b'\r', self.text).is_none();
        if plain && let Ok(text) = std::str::from_utf8(self.text) {
            let text = if self.at_start {
                text.strip_prefix('\u{feff}').unwrap_or(text)
            } else {
                text
            };
            return plain_rows(text, self.first_line, d, skip, &mut fields, row);
        }
        let (lines, bad) = self.lines();
        for line in lines.skip(skip) {
            if fields_of(line, d, &mut fields, self.file)? {
                row(line.number, &fields)?;
            }
        }
        bad.map_or(Ok(()), Err)
    }
}

/// [`Part::rows`] for a valid text with no quote and no `\r`: every delimiter and `\n` is
/// found by one vectorized pass ([`Separators`]), and the fields are cut between them.
fn plain_rows<'a>(
    text: &'a str,
    first_line: u64,
    d: Delimiter,
    skip: usize,
    fields: &mut Vec<Cow<'a, str>>,
    mut row: impl FnMut(u64, &[Cow<'a, str>]) -> Result<()>,
) -> Result<()> {
    let bytes = text.as_bytes();
    let (mut line_start, mut field_start, mut number) = (0, 0, first_line);
    let mut seps = Separators::new(bytes, d.byte());
    loop {
        let at = seps.next();
        let end = at.unwrap_or(bytes.len());
        if at.is_some() && bytes[end] != b'\n' {
            fields.push(trim(&text[field_start..end]).into());
            field_start = end + 1;
            continue;
        }
        if at.is_none() && line_start >= bytes.len() {
            return Ok(());
        }
        // A line ends at `end`.
        if number - first_line >= skip as u64 && !skipped(&text[line_start..end], d) {
            fields.push(trim(&text[field_start..end]).into());
            row(number, fields)?;
        }
        fields.clear();
        if at.is_none() {
            return Ok(());
        }
        number += 1;
        (line_start, field_start) = (end + 1, end + 1);
    }
}

/// The positions of every `sep` and `\n` byte of a text, in order, found eight bytes at a
/// time: a word's bytes that equal either get their high bit set with whole-word integer
/// operations (exact, no false hits), then the set bits are read off one by one.
struct Separators<'a> {
    bytes: &'a [u8],
    /// `sep` and `\n` in every byte of a word.
    seps: [u64; 2],
    /// The start of the word that `mask` covers.
    base: usize,
    mask: u64,
}

const LOW7: u64 = 0x7f7f_7f7f_7f7f_7f7f;
const ONES: u64 = 0x0101_0101_0101_0101;

impl<'a> Separators<'a> {
    fn new(bytes: &'a [u8], sep: u8) -> Self {
        let mut s = Separators {
            bytes,
            seps: [u64::from(sep) * ONES, u64::from(b'\n') * ONES],
            base: 0,
            mask: 0,
        };
        s.mask = s.mask_at(0);
        s
    }

    /// The high bit of every byte of the word at `base` that is a separator (bytes past
    /// the end count as zero, which is neither).
    fn mask_at(&self, base: usize) -> u64 {
        let rest = &self.bytes[base.min(self.bytes.len())..];
        let word = match rest.first_chunk::<8>() {
            Some(c) => u64::from_le_bytes(*c),
            None => {
                let mut c = [0u8; 8];
                c[..rest.len()].copy_from_slice(rest);
                u64::from_le_bytes(c)
            }
        };
        // A byte of `t` is zero exactly where its high bit survives.
        let zero = |t: u64| !(((t & LOW7) + LOW7) | t | LOW7);
        zero(word ^ self.seps[0]) | zero(word ^ self.seps[1])
    }
}

impl Iterator for Separators<'_> {
    type Item = usize;

    fn next(&mut self) -> Option<usize> {
        while self.mask == 0 {
            self.base += 8;
            if self.base >= self.bytes.len() {
                return None;
            }
            self.mask = self.mask_at(self.base);
        }
        let i = self.mask.trailing_zeros() as usize / 8;
        self.mask &= self.mask - 1;
        Some(self.base + i)
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

/// Reads a table in blocks of whole lines; the next block is read while the current one
/// is worked on.
pub(crate) struct Blocks<'f, R> {
    reader: R,
    file: &'f Path,
    /// Bytes to read per block ([`BLOCK`] but in tests).
    block: usize,
    /// Bytes to read for the next block: from a small first block (whose reading nothing
    /// overlaps) doubling up to `block`.
    step: usize,
    /// The block being handed out (its last, unfinished line is carried to the next).
    buf: Vec<u8>,
    /// The next block, read meanwhile.
    spare: Vec<u8>,
    /// `buf` was read up to the end of the file.
    at_end: bool,
    /// `buf` has been read (the first call reads it).
    filled: bool,
    /// A read error met while the last block was worked on, for the next call.
    pending: Option<Error>,
    next_line: u64,
    started: bool,
    done: bool,
}

impl<'f, R: Read + Send> Blocks<'f, R> {
    pub fn new(reader: R, file: &'f Path, block: usize) -> Self {
        Blocks {
            reader,
            file,
            block: block.max(1),
            step: block.clamp(1, FIRST_BLOCK),
            buf: Vec::new(),
            spare: Vec::new(),
            at_end: false,
            filled: false,
            pending: None,
            next_line: 1,
            started: false,
            done: false,
        }
    }

    /// Cuts the next block into about `parts` parts at line ends and hands them to `work`
    /// (`None` at the end of the file). The block after it is read on another thread
    /// meanwhile, so reading and working overlap.
    ///
    /// # Errors
    /// [`Error::Input`] for a read failure or a line longer than [`MAX_LINE`]; a failure
    /// to read the following block is reported by the next call, after `work` is done.
    pub fn next<T: Send>(
        &mut self,
        parts: usize,
        work: impl FnOnce(Vec<Part<'_>>) -> T + Send,
    ) -> Result<Option<T>> {
        if let Some(e) = self.pending.take() {
            return Err(e);
        }
        if self.done {
            return Ok(None);
        }
        if !self.filled {
            let step = self.next_step();
            self.at_end = fill(&mut self.reader, &mut self.buf, step, self.file)?;
            self.filled = true;
        }
        let filled = self.buf.len();
        let end = if self.at_end {
            filled
        } else {
            self.buf
                .iter()
                .rposition(|&c| c == b'\n')
                .map_or(0, |i| i + 1)
        };
        if filled - end > MAX_LINE {
            let line = self.next_line + count_newlines(&self.buf[..end]);
            return Err(line_too_long(self.file, line));
        }
        let block = self.next_step();
        let (out, line) = cut(
            &self.buf[..end],
            parts,
            self.next_line,
            self.file,
            !self.started,
        )?;
        self.started |= !out.is_empty();
        self.next_line = line;
        let (at_end, file) = (self.at_end, self.file);
        let (buf, spare, reader) = (&self.buf, &mut self.spare, &mut self.reader);
        let (read, done) = rayon::join(
            move || {
                if at_end {
                    return Ok(true);
                }
                // The unfinished line first, then up to a block more.
                spare.clear();
                spare.extend_from_slice(&buf[end..]);
                fill(reader, spare, block, file)
            },
            move || work(out),
        );
        if self.at_end {
            self.done = true;
        } else {
            std::mem::swap(&mut self.buf, &mut self.spare);
            match read {
                Ok(at_end) => self.at_end = at_end,
                Err(e) => self.pending = Some(e),
            }
        }
        Ok(Some(done))
    }
}

impl<R> Blocks<'_, R> {
    /// The bytes to read next; the step after it is twice as large, up to a block.
    fn next_step(&mut self) -> usize {
        let step = self.step;
        self.step = (2 * step).min(self.block);
        step
    }
}

/// Reads up to a block more into `buf` (twice the carried unfinished line, for a long
/// one); `true` at the end of the file. The buffer grows only as far as the file goes, so
/// a small file costs no more than its size.
fn fill<R: Read>(reader: &mut R, buf: &mut Vec<u8>, block: usize, file: &Path) -> Result<bool> {
    let filled = buf.len();
    let want = block.max(2 * filled) - filled;
    // Room for exactly that much: read_to_end would otherwise double the buffer.
    buf.reserve_exact(want);
    let got = reader
        .take(want as u64)
        .read_to_end(buf)
        .map_err(|e| super::read_error(file, e))?;
    Ok(got < want)
}

/// `text` (whole lines) cut into about `parts` parts of near equal size at line ends,
/// numbered from `line`; also the number of the line after it.
fn cut<'a>(
    text: &'a [u8],
    parts: usize,
    mut line: u64,
    file: &'a Path,
    at_start: bool,
) -> Result<(Vec<Part<'a>>, u64)> {
    let mut out = Vec::with_capacity(parts);
    let mut start = 0;
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
            return Err(line_too_long(file, line + at));
        }
        out.push(Part {
            text: piece,
            first_line: line,
            file,
            at_start: at_start && start == 0,
        });
        line += count_newlines(piece);
        start = stop;
    }
    Ok((out, line))
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
        let all = |ps: Vec<Part<'_>>| {
            let mut got = Vec::new();
            for p in ps {
                let (lines, bad) = p.lines();
                assert!(bad.is_none());
                got.extend(lines.map(|l| (l.number, l.text.to_string())));
            }
            got
        };
        while let Some(got) = blocks.next(parts, all).unwrap() {
            out.extend(got);
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

    /// The rows of a part through [`Part::rows`] and line by line through [`fields_of`].
    fn both_ways(text: &str, d: Delimiter, skip: usize) -> [Vec<(u64, Vec<String>)>; 2] {
        let part = Part {
            text: text.as_bytes(),
            first_line: 7,
            file: Path::new("t.csv"),
            at_start: true,
        };
        let mut fast = Vec::new();
        part.rows(d, skip, |n, f| {
            fast.push((n, f.iter().map(|s| s.to_string()).collect()));
            Ok(())
        })
        .unwrap();
        let (lines, bad) = part.lines();
        assert!(bad.is_none());
        let (mut slow, mut fields) = (Vec::new(), Vec::new());
        for line in lines.skip(skip) {
            if fields_of(line, d, &mut fields, part.file).unwrap() {
                slow.push((line.number, fields.iter().map(|s| s.to_string()).collect()));
            }
        }
        [fast, slow]
    }

    #[test]
    fn the_one_pass_split_gives_the_fields_of_the_line_by_line_one() {
        let texts = [
            "\u{feff}a,b\n1,2\n\n# c\n 3 , 4\n,\n5,6,\n   \n7",
            "x;y;z\n1,5;2;3\n#;;\n4;5;6\n",
            "a\tb\n 1\t2 \n\t\n3\t4",
            "only one line with no end",
            "s001,100.0,100.10000000000001,0.95,0.004\ns001,100.0,100.2,0.94,-0.01\n",
            "",
            "\n\n\n",
            // Lines of every length around a word's 8 bytes.
            "a,b\nab,c\nabc,de\nabcd,efg\nabcde,fghi\nabcdef,ghijk\nabcdefg,hijklm\n",
        ];
        for text in texts {
            for d in [Delimiter::Comma, Delimiter::Semicolon, Delimiter::Tab] {
                for skip in [0, 1, 3] {
                    let [fast, slow] = both_ways(text, d, skip);
                    assert_eq!(fast, slow, "{text:?} {d:?} skip {skip}");
                }
            }
        }
    }

    #[test]
    fn separators_are_found_at_every_offset() {
        // Every position of a separator in texts longer than a word, against a byte scan.
        for len in 0..40 {
            for at in 0..len {
                let mut text = vec![b'x'; len];
                text[at] = b',';
                text[(at * 7 + 3) % len] = b'\n';
                let want: Vec<usize> = (0..len)
                    .filter(|&i| text[i] == b',' || text[i] == b'\n')
                    .collect();
                assert_eq!(Separators::new(&text, b',').collect::<Vec<_>>(), want);
            }
        }
        // Bytes next to the separators' values (and high bytes) are not hits.
        let text = "+-./\t\x0b\u{e9}\u{2c}\u{10c}".as_bytes();
        let want: Vec<usize> = (0..text.len()).filter(|&i| text[i] == b',').collect();
        assert_eq!(Separators::new(text, b',').collect::<Vec<_>>(), want);
    }
}
