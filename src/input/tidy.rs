//! The tidy campaign CSV: one row per (sample, tw, t).
//!
//! Columns (names can be mapped): `sample`, `tw`, `t`, `corr`, `resp`, and optionally
//! `corr_eq` for `C(t,t)`. Rows may come in any order; other columns are ignored;
//! lines starting with `#` are comments; a UTF-8 byte-order mark and Windows line ends
//! are accepted.

use super::lines::{self, Blocks, Part};
use super::{Delimiter, Header, MAX_LINE};
use crate::error::{Error, Result};
use crate::twotime::campaign::{Campaign, GridPoint};
use ndarray::Array2;
use rayon::prelude::*;
use std::borrow::Cow;
use std::collections::HashMap;
use std::io::Read;
use std::path::Path;

/// The header names fdtemp looks for, one per role.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct ColumnNames {
    /// Sample (run, realization) identifier.
    pub sample: String,
    /// Waiting time.
    pub tw: String,
    /// Later time.
    pub t: String,
    /// Two-time correlation `C(t,tw)`.
    pub corr: String,
    /// Integrated response `chi(t,tw)`.
    pub resp: String,
    /// Optional equal-time correlation `C(t,t)`.
    pub corr_eq: String,
    /// Optional name of the observable (wavevector, overlap, …) a row belongs to.
    pub observable: String,
}

impl Default for ColumnNames {
    fn default() -> Self {
        ColumnNames {
            sample: "sample".into(),
            tw: "tw".into(),
            t: "t".into(),
            corr: "corr".into(),
            resp: "resp".into(),
            corr_eq: "corr_eq".into(),
            observable: "observable".into(),
        }
    }
}

impl ColumnNames {
    /// Applies one mapping `ROLE=NAME` (for example `resp=chi_zfc`).
    ///
    /// # Errors
    /// [`Error::Setting`] when the text has no `=` or names an unknown role.
    pub fn apply(&mut self, mapping: &str) -> Result<()> {
        let (role, name) = mapping.split_once('=').ok_or_else(|| {
            Error::Setting(format!(
                "column mapping '{mapping}' is not ROLE=NAME (for example resp=chi_zfc)"
            ))
        })?;
        let slot = match role.trim() {
            "sample" => &mut self.sample,
            "tw" => &mut self.tw,
            "t" => &mut self.t,
            "corr" => &mut self.corr,
            "resp" => &mut self.resp,
            "corr_eq" => &mut self.corr_eq,
            "observable" => &mut self.observable,
            other => {
                return Err(Error::Setting(format!(
                    "column mapping '{mapping}': unknown role '{other}', expected one of \
                     sample, tw, t, corr, resp, corr_eq, observable"
                )));
            }
        };
        *slot = name.trim().to_string();
        Ok(())
    }

    fn required(&self) -> [&str; 5] {
        [&self.sample, &self.tw, &self.t, &self.corr, &self.resp]
    }
}

/// Reads and validates a campaign file.
///
/// # Errors
/// [`Error::Io`] when the file cannot be read; [`Error::Input`] naming the line and
/// column for every content problem (missing column, non-number, NaN or inf, duplicate
/// `(sample, tw, t)`, a sample missing points that others have, `t <= tw`, fewer than
/// two samples).
pub fn read_campaign(path: &Path, names: &ColumnNames) -> Result<Campaign> {
    parse_campaign(super::open_file(path)?, path, names)
}

/// How a campaign file is read: column names, delimiter, and what to do with samples that
/// miss points.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CampaignRead {
    /// The header names of the roles (`--column`).
    pub names: ColumnNames,
    /// What separates the fields (`--delimiter`); ignored for NumPy files.
    pub delimiter: super::Delimiter,
    /// Leave out the samples that miss points (`--drop-incomplete`) instead of refusing
    /// the file.
    pub drop_incomplete: bool,
    /// Read only the rows of this observable (`--observable NAME`); the file must have an
    /// observable column.
    pub observable: Option<String>,
}

/// A sample left out by `--drop-incomplete`, with the points it misses.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct ExcludedSample {
    /// The sample's name in the file.
    pub sample: String,
    /// The grid points (held by other samples) that it has no value for.
    pub missing: Vec<GridPoint>,
}

/// A campaign as read, with the samples left out of it.
#[derive(Debug, Clone)]
pub struct ReadCampaign {
    /// The samples that have every point.
    pub campaign: Campaign,
    /// The samples left out, in file order (empty unless `drop_incomplete`).
    pub excluded: Vec<ExcludedSample>,
    /// The observable these rows belong to, when the file has an observable column.
    pub observable: Option<String>,
    /// The file's further observables, in order of first appearance, each with the same
    /// samples as `campaign` (so that resample index i names one sample in all of them);
    /// empty for a file of one observable.
    pub more: Vec<ReadCampaign>,
}

impl ReadCampaign {
    /// A campaign of one observable with nothing left out.
    pub fn whole(campaign: Campaign) -> Self {
        ReadCampaign {
            campaign,
            excluded: Vec::new(),
            observable: None,
            more: Vec::new(),
        }
    }
}

/// Reads a campaign file as `how` says: a NumPy `.npz` archive by its name, else a text
/// table.
///
/// # Errors
/// As [`read_campaign`]; without `drop_incomplete` the error for a sample that misses a
/// point names the sample and the point and mentions `--drop-incomplete`; with it, fewer
/// than two complete samples is an error.
pub fn read_campaign_with(path: &Path, how: &CampaignRead) -> Result<ReadCampaign> {
    if super::npy::is_npz(path) {
        return super::npy::read_campaign_npz(path, how);
    }
    if super::npy::is_npy(path) {
        return Err(Error::input(
            path,
            None,
            None,
            "a .npy file holds one array, and a campaign needs several (corr, resp, tw, t); \
             expected a .npz archive (numpy.savez) or a text table",
        ));
    }
    let f = super::open_file(path)?;
    let size = f.metadata().ok().map(|m| m.len());
    parse_in_blocks(f, path, how, lines::BLOCK, size)
}

/// Where each role's column is in the file.
struct Columns {
    sample: usize,
    tw: usize,
    t: usize,
    corr: usize,
    resp: usize,
    corr_eq: Option<usize>,
    observable: Option<usize>,
}

/// The rows read so far, column by column, with the samples and grid points numbered in
/// order of appearance.
#[derive(Default)]
struct Rows {
    sample_index: HashMap<String, u32>,
    sample_ids: Vec<String>,
    point_index: HashMap<(u64, u64), u32>,
    points: Vec<GridPoint>,
    /// The bits of each point's (tw, t), -0 read as 0.
    point_keys: Vec<(u64, u64)>,
    sample: Vec<u32>,
    point: Vec<u32>,
    corr: Vec<f64>,
    resp: Vec<f64>,
    /// Empty without a `corr_eq` column.
    corr_eq: Vec<f64>,
    line: Vec<u64>,
}

/// Parses a campaign from any reader; `file` is used in error messages only.
///
/// # Errors
/// As [`read_campaign`].
pub fn parse_campaign<R: Read + Send>(
    reader: R,
    file: &Path,
    names: &ColumnNames,
) -> Result<Campaign> {
    let how = CampaignRead {
        names: names.clone(),
        ..CampaignRead::default()
    };
    parse_campaign_with(reader, file, &how).map(|r| r.campaign)
}

/// As [`read_campaign_with`] for a text table, from any reader; `file` is used in error
/// messages only.
///
/// The text is read in blocks of whole lines; the lines of a block are split and parsed
/// on all threads, then taken in file order, so the first error in the file is the one
/// reported.
///
/// # Errors
/// As [`read_campaign_with`].
pub fn parse_campaign_with<R: Read + Send>(
    reader: R,
    file: &Path,
    how: &CampaignRead,
) -> Result<ReadCampaign> {
    parse_in_blocks(reader, file, how, lines::BLOCK, None)
}

/// [`parse_campaign_with`], reading `block` bytes at a time; `size` (the file's length,
/// when known) lets the row store be sized once.
fn parse_in_blocks<R: Read + Send>(
    reader: R,
    file: &Path,
    how: &CampaignRead,
    block: usize,
    mut size: Option<u64>,
) -> Result<ReadCampaign> {
    let (names, d) = (&how.names, how.delimiter);
    let mut blocks = Blocks::new(reader, file, block);
    // Parts of at most about 1 MiB (a part that short needs no check for long lines),
    // several per thread for balance.
    let per_block = (4 * rayon::current_num_threads()).max(block.div_ceil(MAX_LINE / 2));
    let mut head: Option<(Header, Columns)> = None;
    let mut rows = Rows::default();
    // One buffer of values per part, kept from block to block: the block being parsed
    // fills `pool` while the block before it, parsed into `ready`, is numbered.
    let (mut pool, mut ready): (Vec<Vec<Vals>>, Vec<Vec<Vals>>) = (Vec::new(), Vec::new());
    // The last block's runs per part (or its first error) and its length, not yet numbered.
    let mut pending: (Vec<Result<OwnedRuns>>, usize) = (Vec::new(), 0);
    // One block: its lines split and parsed on all threads while the block before it is
    // numbered in file order (and the next block is read).
    let mut step = |parts: Vec<Part<'_>>| -> Result<()> {
        // Lines to pass over in each part: those up to and including the header.
        let mut skip = vec![0; parts.len()];
        if head.is_none() {
            head = find_header(&parts, &mut skip, file, how)?;
        }
        let Some((header, cols)) = &head else {
            return Ok(());
        };
        pool.resize_with(parts.len(), Vec::new);
        let with_eq = cols.corr_eq.is_some();
        let (numbered, parsed) = rayon::join(
            || {
                number(
                    &mut rows,
                    std::mem::take(&mut pending),
                    &ready,
                    with_eq,
                    &mut size,
                    file,
                )
            },
            || {
                parts
                    .par_iter()
                    .zip(&skip)
                    .zip(pool.par_iter_mut())
                    .map(|((part, &skip), vals)| {
                        let only = how.observable.as_deref();
                        parse_part(part, skip, header, cols, (names, only), d, vals).map(owned_runs)
                    })
                    .collect::<Vec<_>>()
            },
        );
        // The block before comes first in the file, and so do its errors.
        numbered?;
        pending = (parsed, parts.iter().map(Part::len).sum());
        std::mem::swap(&mut pool, &mut ready);
        Ok(())
    };
    // The end of the file, or a failure to read or cut the next block.
    let end = loop {
        match blocks.next(per_block, &mut step) {
            Ok(Some(done)) => done?,
            Ok(None) => break Ok(()),
            Err(e) => break Err(e),
        }
    };
    // The last block parsed comes before that failure in the file, and so do its errors.
    let with_eq = head.as_ref().is_some_and(|h| h.1.corr_eq.is_some());
    number(&mut rows, pending, &ready, with_eq, &mut size, file)?;
    end?;
    // The text and the parsed values are done with before the arrays are made.
    drop((pool, ready));
    drop(blocks);
    if head.is_none() {
        return Err(Error::input(
            file,
            None,
            None,
            format!(
                "the file is empty; expected a header line with columns {}",
                names.required().join(", ")
            ),
        ));
    }
    if let Some(only) = &how.observable {
        if rows.line.is_empty() {
            return Err(Error::input(
                file,
                None,
                None,
                format!(
                    "no rows of observable '{only}' (--observable); expected rows whose column \
                     '{}' is '{only}'",
                    names.observable
                ),
            ));
        }
        let mut read = rows.into_campaign(file, with_eq, how.drop_incomplete)?;
        read.observable = Some(only.clone());
        return Ok(read);
    }
    if head.as_ref().is_some_and(|h| h.1.observable.is_some()) {
        return observables(rows, file, with_eq, how.drop_incomplete);
    }
    rows.into_campaign(file, with_eq, how.drop_incomplete)
}

/// Splits the rows of a file with an observable column into one campaign per observable,
/// in order of first appearance, on the samples that every observable has.
fn observables(rows: Rows, file: &Path, with_eq: bool, drop: bool) -> Result<ReadCampaign> {
    if rows.line.is_empty() {
        return Err(Error::input(
            file,
            None,
            None,
            "no data rows after the header",
        ));
    }
    let mut names: Vec<String> = Vec::new();
    let mut split: Vec<Rows> = Vec::new();
    let mut of_sample: Vec<(usize, String)> = Vec::with_capacity(rows.sample_ids.len());
    for id in &rows.sample_ids {
        let (obs, sample) = id.split_once(OBSERVABLE_SEP).unwrap_or(("", id));
        let o = match names.iter().position(|n| n == obs) {
            Some(o) => o,
            None => {
                names.push(obs.to_string());
                split.push(Rows::default());
                names.len() - 1
            }
        };
        of_sample.push((o, sample.to_string()));
    }
    for k in 0..rows.line.len() {
        let (o, sample) = &of_sample[rows.sample[k] as usize];
        let r = &mut split[*o];
        let s = r.sample_of(sample, file)?;
        let g = rows.points[rows.point[k] as usize];
        let v = Vals {
            tw: g.tw,
            t: g.t,
            corr: rows.corr[k],
            resp: rows.resp[k],
            corr_eq: if with_eq { rows.corr_eq[k] } else { f64::NAN },
            line: rows.line[k],
        };
        r.push_run(s, std::slice::from_ref(&v), with_eq, file)?;
    }
    let mut reads: Vec<ReadCampaign> = Vec::with_capacity(names.len());
    for (name, r) in names.iter().zip(split) {
        let mut read = r
            .into_campaign(file, with_eq, drop)
            .map_err(|e| e.about(&format!("observable '{name}'")))?;
        read.observable = Some(name.clone());
        reads.push(read);
    }
    share_samples(&mut reads, file, drop)?;
    let mut first = reads.remove(0);
    first.more = reads;
    Ok(first)
}

/// Keeps the samples that every observable has (with `drop`), or refuses a file in which
/// some sample misses an observable.
fn share_samples(reads: &mut [ReadCampaign], file: &Path, drop: bool) -> Result<()> {
    use std::collections::HashSet;
    let sets: Vec<HashSet<&str>> = reads
        .iter()
        .map(|r| r.campaign.sample_ids().iter().map(String::as_str).collect())
        .collect();
    let common: HashSet<&str> = sets.iter().skip(1).fold(sets[0].clone(), |acc, s| {
        acc.intersection(s).copied().collect()
    });
    if sets.iter().all(|s| s.len() == common.len()) {
        return Ok(());
    }
    if !drop {
        let name = |r: &ReadCampaign| r.observable.clone().unwrap_or_default();
        for r in reads.iter() {
            let ids = r.campaign.sample_ids();
            if let Some(extra) = ids.iter().find(|id| !common.contains(id.as_str())) {
                let missing = reads
                    .iter()
                    .zip(&sets)
                    .find(|(_, o)| !o.contains(extra.as_str()))
                    .map(|(o, _)| name(o))
                    .unwrap_or_default();
                return Err(Error::input(
                    file,
                    None,
                    None,
                    format!(
                        "sample '{extra}' has rows for observable '{}' but none for '{missing}'; \
                         every sample needs every observable, so that the observables are \
                         resampled together (--drop-incomplete leaves out the samples that \
                         miss one)",
                        name(r)
                    ),
                ));
            }
        }
    }
    let common: HashSet<String> = common.into_iter().map(str::to_string).collect();
    if common.len() < 2 {
        return Err(Error::input(
            file,
            None,
            None,
            format!(
                "only {} sample(s) have every observable; at least 2 are needed",
                common.len()
            ),
        ));
    }
    for r in reads.iter_mut() {
        let left: Vec<ExcludedSample> = r
            .campaign
            .sample_ids()
            .iter()
            .filter(|id| !common.contains(*id))
            .map(|id| ExcludedSample {
                sample: id.clone(),
                missing: Vec::new(),
            })
            .collect();
        if left.is_empty() {
            continue;
        }
        r.campaign = r
            .campaign
            .keep_samples(|id| common.contains(id))
            .map_err(|e| Error::input(file, None, None, e.to_string()))?;
        r.excluded.extend(left);
    }
    Ok(())
}

/// The header among the first lines of `parts`, if it is there; `skip` gets the number of
/// lines each part has up to and including it.
fn find_header(
    parts: &[Part<'_>],
    skip: &mut [usize],
    file: &Path,
    how: &CampaignRead,
) -> Result<Option<(Header, Columns)>> {
    let (names, d) = (&how.names, how.delimiter);
    let mut fields = Vec::new();
    for (k, part) in parts.iter().enumerate() {
        let (lines, bad) = part.lines();
        for (j, line) in lines.enumerate() {
            if !lines::fields_of(line, d, &mut fields, file)? {
                continue;
            }
            let header = Header::from_fields(file, fields.iter().map(AsRef::as_ref), line.number)?
                .with_delimiter(d);
            let idx = header.require(file, &names.required())?;
            let cols = Columns {
                sample: idx[0],
                tw: idx[1],
                t: idx[2],
                corr: idx[3],
                resp: idx[4],
                corr_eq: header.find(&names.corr_eq),
                observable: header.find(&names.observable),
            };
            if how.observable.is_some() && cols.observable.is_none() {
                return Err(Error::input(
                    file,
                    Some(line.number),
                    None,
                    format!(
                        "--observable is given but the header has no column '{}'; expected \
                         a column naming each row's observable (or map one with \
                         --column observable=NAME)",
                        names.observable
                    ),
                ));
            }
            skip[k] = j + 1;
            return Ok(Some((header, cols)));
        }
        if let Some(e) = bad {
            return Err(e);
        }
        skip[k] = usize::MAX;
    }
    Ok(None)
}

/// The values of one data row, before its sample and point are numbered.
#[derive(Debug, Clone, Copy)]
struct Vals {
    tw: f64,
    t: f64,
    corr: f64,
    resp: f64,
    /// NaN without a `corr_eq` column.
    corr_eq: f64,
    line: u64,
}

/// Runs of rows of one sample: its name and the number of rows.
type Runs<'a> = Vec<(Cow<'a, str>, usize)>;

/// [`Runs`] that outlive the text of their block (a few names a part).
type OwnedRuns = Vec<(String, usize)>;

fn owned_runs(runs: Runs<'_>) -> OwnedRuns {
    runs.into_iter().map(|(n, c)| (n.into_owned(), c)).collect()
}

/// Numbers the samples and points of a parsed block (its runs per part, or the first
/// error of a part, and its length in bytes) into `rows`, part by part in file order;
/// the first block sizes the row store for a file of `size` bytes.
fn number(
    rows: &mut Rows,
    (runs, bytes): (Vec<Result<OwnedRuns>>, usize),
    vals: &[Vec<Vals>],
    with_eq: bool,
    size: &mut Option<u64>,
    file: &Path,
) -> Result<()> {
    let any = !runs.is_empty();
    for (runs, vals) in runs.into_iter().zip(vals) {
        let mut at = 0;
        for (name, count) in runs? {
            let s = rows.sample_of(&name, file)?;
            rows.push_run(s, &vals[at..at + count], with_eq, file)?;
            at += count;
        }
    }
    if any && let Some(size) = size.take() {
        rows.reserve_for(size, bytes);
    }
    Ok(())
}

/// The data rows of one part, their values in `vals` and their samples as runs of one
/// name with their lengths, or the first error among them.
/// Separates the observable from the sample in the sample key of a file with an
/// observable column (a control character no CSV field of a name holds).
const OBSERVABLE_SEP: char = '\u{1f}';

fn parse_part<'a>(
    part: &Part<'a>,
    skip: usize,
    header: &Header,
    cols: &Columns,
    (names, only): (&ColumnNames, Option<&str>),
    d: Delimiter,
    vals: &mut Vec<Vals>,
) -> Result<Runs<'a>> {
    let file = part.file();
    vals.clear();
    let mut runs: Runs<'a> = Vec::new();
    let mut seen = Seen::default();
    part.rows(d, skip, |number, fields| {
        header.check_count(file, fields.len(), number)?;
        let key = match cols.observable {
            None => fields[cols.sample].clone(),
            Some(o) => {
                let obs = &fields[o];
                if obs.is_empty() || obs.contains(OBSERVABLE_SEP) {
                    return Err(Error::input(
                        file,
                        Some(number),
                        Some(o as u64 + 1),
                        format!(
                            "column '{}' is empty, expected the name of the row's observable",
                            names.observable
                        ),
                    ));
                }
                match only {
                    Some(only) if obs != only => return Ok(()),
                    Some(_) => fields[cols.sample].clone(),
                    None => Cow::Owned(format!("{obs}{OBSERVABLE_SEP}{}", fields[cols.sample])),
                }
            }
        };
        let same_run = runs.last().is_some_and(|(name, _)| *name == key);
        if !same_run {
            seen.at = 0;
        }
        vals.push(parse_row(fields, cols, names, d, number, file, &mut seen)?);
        match runs.last_mut() {
            Some((_, count)) if same_run => *count += 1,
            _ => runs.push((key, 1)),
        }
        Ok(())
    })?;
    Ok(runs)
}

/// The time fields of the rows before, by their text. Files repeat a waiting time over
/// many rows and list each sample's times in the same order, so most time fields are the
/// text of one already read, whose number is taken again instead of parsed again (the
/// same text gives the same number).
#[derive(Default)]
struct Seen<'a> {
    /// The last row's tw.
    tw: Option<(&'a str, f64)>,
    /// The t of the rows of the last run of one sample, by place in the run.
    t: Vec<(&'a str, f64)>,
    /// The place of the row in its run.
    at: usize,
}

/// The number in `field`: `last`'s when the text is the same (and nothing new to keep),
/// else parsed, with the text and number to keep when the text is the file's own.
fn number_again<'a>(
    field: &Cow<'a, str>,
    last: Option<&(&'a str, f64)>,
    parse: impl FnOnce() -> Result<f64>,
) -> Result<(f64, Option<(&'a str, f64)>)> {
    match (field, last) {
        (Cow::Borrowed(f), Some(l)) if *f == l.0 => Ok((l.1, None)),
        (Cow::Borrowed(f), _) => parse().map(|v| (v, Some((*f, v)))),
        (Cow::Owned(_), _) => parse().map(|v| (v, None)),
    }
}

/// Parses and checks one data row.
fn parse_row<'a>(
    fields: &[Cow<'a, str>],
    cols: &Columns,
    names: &ColumnNames,
    d: Delimiter,
    line: u64,
    file: &Path,
    seen: &mut Seen<'a>,
) -> Result<Vals> {
    let err = |col: usize, msg: String| Error::input(file, Some(line), Some(col as u64 + 1), msg);
    let num = |i: usize, name: &str| {
        crate::input::parse_number_in(&fields[i], name, d).map_err(|m| err(i, m))
    };
    let sample = &fields[cols.sample];
    if sample.is_empty() {
        return Err(err(
            cols.sample,
            format!("column '{}' is empty, expected a sample name", names.sample),
        ));
    }
    let (tw, keep) = number_again(&fields[cols.tw], seen.tw.as_ref(), || {
        num(cols.tw, &names.tw)
    })?;
    if keep.is_some() {
        seen.tw = keep;
    }
    let (t, keep) = number_again(&fields[cols.t], seen.t.get(seen.at), || {
        num(cols.t, &names.t)
    })?;
    if let Some(k) = keep {
        match seen.t.get_mut(seen.at) {
            Some(slot) => *slot = k,
            None => seen.t.push(k),
        }
    }
    seen.at += 1;
    if !(t > tw) {
        return Err(err(
            cols.t,
            format!(
                "{} = {t} is not later than {} = {tw}; expected t > tw",
                names.t, names.tw
            ),
        ));
    }
    let corr = num(cols.corr, &names.corr)?;
    let resp = num(cols.resp, &names.resp)?;
    let corr_eq = match cols.corr_eq {
        Some(i) => {
            let v = num(i, &names.corr_eq)?;
            if v <= 0.0 {
                return Err(err(
                    i,
                    format!(
                        "column '{}' is {v}, expected a positive number (it normalizes C and chi)",
                        names.corr_eq
                    ),
                ));
            }
            v
        }
        None => f64::NAN,
    };
    Ok(Vals {
        tw,
        t,
        corr,
        resp,
        corr_eq,
        line,
    })
}

impl Rows {
    /// Keeps a run of rows of sample `s`, numbering their points, column by column.
    fn push_run(&mut self, s: u32, vals: &[Vals], with_eq: bool, file: &Path) -> Result<()> {
        self.sample.extend(std::iter::repeat_n(s, vals.len()));
        self.corr.extend(vals.iter().map(|v| v.corr));
        self.resp.extend(vals.iter().map(|v| v.resp));
        if with_eq {
            self.corr_eq.extend(vals.iter().map(|v| v.corr_eq));
        }
        self.line.extend(vals.iter().map(|v| v.line));
        for v in vals {
            let p = self.point_of(v.tw, v.t, file)?;
            self.point.push(p);
        }
        Ok(())
    }

    /// Room for all rows of a file of `size` bytes, guessed from the first `bytes`.
    fn reserve_for(&mut self, size: u64, bytes: usize) {
        let n = self.line.len();
        if n == 0 || bytes == 0 {
            return;
        }
        let guess = (n as f64 * size as f64 / bytes as f64 * 1.02) as usize;
        let more = guess.saturating_sub(n);
        self.sample.reserve(more);
        self.point.reserve(more);
        self.corr.reserve(more);
        self.resp.reserve(more);
        if !self.corr_eq.is_empty() {
            self.corr_eq.reserve(more);
        }
        self.line.reserve(more);
    }

    fn sample_of(&mut self, sample: &str, file: &Path) -> Result<u32> {
        // Rows of one sample usually come together.
        if let Some(&s) = self.sample.last()
            && self.sample_ids[s as usize] == sample
        {
            return Ok(s);
        }
        if let Some(&s) = self.sample_index.get(sample) {
            return Ok(s);
        }
        let s = numbered(self.sample_ids.len(), "samples", file)?;
        self.sample_ids.push(sample.to_string());
        self.sample_index.insert(sample.to_string(), s);
        Ok(s)
    }

    fn point_of(&mut self, tw: f64, t: f64, file: &Path) -> Result<u32> {
        let key = (normalize_zero(tw).to_bits(), normalize_zero(t).to_bits());
        // Samples usually list their points in one order: try the one after the last.
        if let Some(&p) = self.point.last() {
            let next = (p as usize + 1) % self.point_keys.len();
            if self.point_keys[next] == key {
                return Ok(next as u32);
            }
        }
        if let Some(&p) = self.point_index.get(&key) {
            return Ok(p);
        }
        let p = numbered(self.points.len(), "(tw, t) points", file)?;
        self.points.push(GridPoint { tw, t });
        self.point_keys.push(key);
        self.point_index.insert(key, p);
        Ok(p)
    }

    /// The samples × points arrays, once every sample has every point exactly once (or,
    /// with `drop`, of the samples that have every point).
    fn into_campaign(mut self, file: &Path, with_eq: bool, drop: bool) -> Result<ReadCampaign> {
        let err = |line: Option<u64>, msg: String| Error::input(file, line, None, msg);
        if self.line.is_empty() {
            return Err(err(None, "no data rows after the header".into()));
        }
        let n = self.sample_ids.len();
        if n < 2 {
            return Err(err(
                None,
                format!(
                    "only 1 sample ('{}') in the file; at least 2 independent samples are \
                     needed to estimate errors",
                    self.sample_ids[0]
                ),
            ));
        }
        let np = self.points.len();
        if let Some([corr, resp, corr_eq]) = self.fill(with_eq) {
            let corr_eq = with_eq.then_some(corr_eq);
            let campaign = Campaign::new(self.sample_ids, self.points, corr, resp, corr_eq)
                .map_err(|e| err(None, e.to_string()))?;
            return Ok(ReadCampaign {
                campaign,
                excluded: Vec::new(),
                observable: None,
                more: Vec::new(),
            });
        }
        let mut seen_at: Vec<u64> = vec![0; n * np];
        for ((&s, &p), &line) in self.sample.iter().zip(&self.point).zip(&self.line) {
            let slot = &mut seen_at[s as usize * np + p as usize];
            if *slot != 0 {
                let g = self.points[p as usize];
                return Err(err(
                    Some(line),
                    format!(
                        "sample '{}' at tw = {}, t = {} appears again (first on line {}); \
                         expected one row per (sample, tw, t)",
                        self.sample_ids[s as usize], g.tw, g.t, slot
                    ),
                ));
            }
            *slot = line;
        }
        let complete: Vec<bool> = (0..n)
            .map(|s| seen_at[s * np..(s + 1) * np].iter().all(|&l| l != 0))
            .collect();
        if !drop {
            self.check_complete(&seen_at, &complete)
                .map_err(|m| err(None, m))?;
        }
        let excluded: Vec<ExcludedSample> = (0..n)
            .filter(|&s| !complete[s])
            .map(|s| ExcludedSample {
                sample: self.sample_ids[s].clone(),
                missing: (0..np)
                    .filter(|&p| seen_at[s * np + p] == 0)
                    .map(|p| self.points[p])
                    .collect(),
            })
            .collect();
        // New row index of each kept sample.
        let mut kept_at = vec![usize::MAX; n];
        let mut ids = Vec::new();
        for s in (0..n).filter(|&s| complete[s]) {
            kept_at[s] = ids.len();
            ids.push(self.sample_ids[s].clone());
        }
        if ids.len() < 2 {
            return Err(err(
                None,
                format!(
                    "only {} of {n} samples {} every (tw, t) point; --drop-incomplete needs at \
                     least 2 complete samples",
                    ids.len(),
                    if ids.len() == 1 { "has" } else { "have" }
                ),
            ));
        }
        let nk = ids.len();
        let mut corr = Array2::<f64>::zeros((nk, np));
        let mut resp = Array2::<f64>::zeros((nk, np));
        let mut corr_eq = with_eq.then(|| Array2::<f64>::zeros((nk, np)));
        for (k, (&s, &p)) in self.sample.iter().zip(&self.point).enumerate() {
            let (s, p) = (kept_at[s as usize], p as usize);
            if s == usize::MAX {
                continue;
            }
            corr[[s, p]] = self.corr[k];
            resp[[s, p]] = self.resp[k];
            if let Some(ce) = corr_eq.as_mut() {
                ce[[s, p]] = self.corr_eq[k];
            }
        }
        let campaign = Campaign::new(ids, self.points, corr, resp, corr_eq)
            .map_err(|e| err(None, e.to_string()))?;
        Ok(ReadCampaign {
            campaign,
            excluded,
            observable: None,
            more: Vec::new(),
        })
    }

    /// The samples × points arrays (`corr_eq`'s empty without the column) in one pass,
    /// when every sample has every point exactly once, as in most files: then there are
    /// `samples × points` rows and none repeats a slot (a slot not yet filled is NaN; the
    /// values read are finite). `None` otherwise, for the checks that word the error or
    /// leave out samples.
    fn fill(&mut self, with_eq: bool) -> Option<[Array2<f64>; 3]> {
        let (n, np) = (self.sample_ids.len(), self.points.len());
        if self.line.len() != n * np {
            return None;
        }
        // Rows in sample-major, point-minor order are the arrays already.
        let in_order = self
            .sample
            .iter()
            .zip(&self.point)
            .enumerate()
            .all(|(k, (&s, &p))| s as usize * np + p as usize == k);
        if in_order {
            let eq = if with_eq { (n, np) } else { (0, 0) };
            let take = |v: &mut Vec<f64>, shape| Array2::from_shape_vec(shape, std::mem::take(v));
            return Some([
                take(&mut self.corr, (n, np)).ok()?,
                take(&mut self.resp, (n, np)).ok()?,
                take(&mut self.corr_eq, eq).ok()?,
            ]);
        }
        let mut corr = Array2::<f64>::from_elem((n, np), f64::NAN);
        let mut resp = Array2::<f64>::zeros((n, np));
        let mut corr_eq = Array2::<f64>::zeros(if with_eq { (n, np) } else { (0, 0) });
        let (c, r) = (corr.as_slice_mut()?, resp.as_slice_mut()?);
        let e = corr_eq.as_slice_mut()?;
        for (k, (&s, &p)) in self.sample.iter().zip(&self.point).enumerate() {
            let at = s as usize * np + p as usize;
            if !c[at].is_nan() {
                return None;
            }
            c[at] = self.corr[k];
            r[at] = self.resp[k];
            if with_eq {
                e[at] = self.corr_eq[k];
            }
        }
        Some([corr, resp, corr_eq])
    }

    /// Every sample has every grid point (`seen_at` holds the line of each, 0 if none).
    fn check_complete(
        &self,
        seen_at: &[u64],
        complete: &[bool],
    ) -> std::result::Result<(), String> {
        let (n, np) = (self.sample_ids.len(), self.points.len());
        let incomplete = complete.iter().filter(|&&c| !c).count();
        for s in 0..n {
            if let Some(p) = (0..np).find(|&p| seen_at[s * np + p] == 0) {
                let g = self.points[p];
                let (other, line) = (0..n)
                    .find_map(|o| {
                        let l = seen_at[o * np + p];
                        (l != 0).then(|| (&self.sample_ids[o], l))
                    })
                    .unwrap_or((&self.sample_ids[0], 0));
                let others = match incomplete - 1 {
                    0 => String::new(),
                    1 => " (1 more sample misses points)".to_string(),
                    k => format!(" ({k} more samples miss points)"),
                };
                return Err(format!(
                    "sample '{}' has no row for tw = {}, t = {}, which sample '{other}' has on \
                     line {line}{others}; every sample needs the same (tw, t) points \
                     (--drop-incomplete leaves out the samples that miss points)",
                    self.sample_ids[s], g.tw, g.t
                ));
            }
        }
        Ok(())
    }
}

/// The number the next of `what` gets, while it fits the row store's 32 bits.
fn numbered(count: usize, what: &str, file: &Path) -> Result<u32> {
    u32::try_from(count).map_err(|_| {
        Error::input(
            file,
            None,
            None,
            format!(
                "more than {} {what}; expected a campaign of fewer",
                u32::MAX
            ),
        )
    })
}

/// Maps -0.0 to 0.0 so that both spellings name the same grid point.
fn normalize_zero(v: f64) -> f64 {
    if v == 0.0 { 0.0 } else { v }
}

/// Writes a campaign in the tidy format that [`read_campaign`] reads.
pub fn write_campaign(campaign: &Campaign) -> Vec<u8> {
    use std::fmt::Write;
    let mut s = String::from("sample,tw,t,corr,resp");
    let eq = campaign.corr_eq();
    if eq.is_some() {
        s.push_str(",corr_eq");
    }
    s.push('\n');
    for (i, id) in campaign.sample_ids().iter().enumerate() {
        for (j, g) in campaign.points().iter().enumerate() {
            let _ = write!(
                s,
                "{id},{:?},{:?},{:?},{:?}",
                g.tw,
                g.t,
                campaign.corr()[[i, j]],
                campaign.resp()[[i, j]]
            );
            if let Some(eq) = eq {
                let _ = write!(s, ",{:?}", eq[[i, j]]);
            }
            s.push('\n');
        }
    }
    s.into_bytes()
}

/// Writes several observables of one campaign as one tidy table with an `observable`
/// column (first), in the format that [`read_campaign_with`] reads.
pub fn write_observables(campaigns: &[(&str, &Campaign)]) -> Vec<u8> {
    let mut out = Vec::new();
    for (k, (name, c)) in campaigns.iter().enumerate() {
        let text = write_campaign(c);
        for (j, line) in text.split(|&b| b == b'\n').enumerate() {
            if line.is_empty() || (j == 0 && k > 0) {
                continue;
            }
            out.extend_from_slice(if j == 0 {
                b"observable," as &[u8]
            } else {
                name.as_bytes()
            });
            if j > 0 {
                out.push(b',');
            }
            out.extend_from_slice(line);
            out.push(b'\n');
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str, block: usize) -> std::result::Result<Campaign, String> {
        parse_in_blocks(
            text.as_bytes(),
            Path::new("t.csv"),
            &CampaignRead::default(),
            block,
            Some(text.len() as u64),
        )
        .map(|r| r.campaign)
        .map_err(|e| e.to_string())
    }

    #[test]
    fn small_blocks_read_what_one_block_reads() {
        let good = "\u{feff}# made by hand\r\nsample,tw,t,corr,resp\r\n\r\n\
                    a,1,2,0.9,0.1\r\n\"b\",1,2,0.8,0.2\n# between\n a , 1 , 3 , 0.7 , 0.3\n\
                    b,1,3,0.6,0.4";
        let bad_number = "sample,tw,t,corr,resp\na,1,2,0.9,0.1\nb,1,2,x,0.2\na,1,3,0.7,0.3\n";
        let bad_width = "# c\nsample,tw,t,corr,resp\na,1,2,0.9,0.1\nb,1,2,0.8\n";
        let open_quote = "sample,tw,t,corr,resp\na,1,2,0.9,0.1\n\"b,1,2,0.8,0.2\n";
        let one = read(good, lines::BLOCK).unwrap();
        assert_eq!(one.sample_ids(), ["a", "b"]);
        assert_eq!(one.corr()[[1, 1]].to_bits(), 0.6f64.to_bits());
        for block in [1, 5, 17, 64] {
            let c = read(good, block).unwrap();
            assert_eq!(c.corr(), one.corr(), "block {block}");
            assert_eq!(c.resp(), one.resp(), "block {block}");
            for (text, at) in [
                (bad_number, "t.csv:3:4"),
                (bad_width, "t.csv:4"),
                (open_quote, "t.csv:3"),
            ] {
                let e = read(text, block).unwrap_err();
                assert!(e.contains(at), "block {block}: {e}");
            }
        }
    }

    /// A bad row is reported before a failure further on, whichever block each falls in:
    /// a line too long in a later block, or a read that fails after the bad row. Source:
    /// common practice (the first error in the file).
    #[test]
    fn an_error_is_reported_before_a_later_blocks_failure() {
        struct Failing<'a>(&'a [u8]);
        impl Read for Failing<'_> {
            fn read(&mut self, b: &mut [u8]) -> std::io::Result<usize> {
                if self.0.is_empty() {
                    return Err(std::io::Error::other("the disk went away"));
                }
                let k = self.0.len().min(b.len()).min(16);
                b[..k].copy_from_slice(&self.0[..k]);
                self.0 = &self.0[k..];
                Ok(k)
            }
        }
        let mut text = String::from("sample,tw,t,corr,resp\na,1,2,0.9,0.1\nb,1,2,x,0.2\n");
        for i in 0..40 {
            text.push_str(&format!("a,1,{},0.5,0.5\n", i + 3));
        }
        let long = format!("{text}{}\n", "y".repeat(MAX_LINE + 10));
        for block in [24, 64, 256, lines::BLOCK] {
            let e = read(&long, block).unwrap_err();
            assert!(e.contains("t.csv:3:4"), "block {block}: {e}");
        }
        // (A read that fails inside the first block fails before any row is read.)
        let how = CampaignRead::default();
        for block in [24, 64, 256] {
            let failing = Failing(text.as_bytes());
            let e = parse_in_blocks(failing, Path::new("t.csv"), &how, block, None)
                .map(|_| ())
                .unwrap_err()
                .to_string();
            assert!(e.contains("t.csv:3:4"), "block {block}: {e}");
        }
    }

    #[test]
    fn times_read_again_by_their_text_are_the_times_parsed() {
        // Samples list their times in other orders and spellings, and a bad time after a
        // good one of the same place is still an error at its column.
        let text = "sample,tw,t,corr,resp\n\
                    a,1,2,0.9,0.1\na,1,3,0.8,0.2\na,1,4,0.7,0.3\n\
                    b,1,3,0.6,0.4\nb,1.0,2,0.5,0.5\nb,1,4.0,0.4,0.6\n\
                    c,1,2,0.3,0.7\nc,1,3,0.2,0.8\nc,1,4e0,0.1,0.9\n";
        for block in [7, 64, lines::BLOCK] {
            let c = read(text, block).unwrap();
            let t: Vec<f64> = c.points().iter().map(|g| g.t).collect();
            assert_eq!(t, [2.0, 3.0, 4.0], "block {block}");
            // Sample b's rows land at their own times.
            assert_eq!(c.corr().row(1).to_vec(), [0.5, 0.6, 0.4], "block {block}");
            assert_eq!(c.corr().row(2).to_vec(), [0.3, 0.2, 0.1], "block {block}");
        }
        let bad =
            "sample,tw,t,corr,resp\na,1,2,0.9,0.1\na,1,3,0.8,0.2\nb,1,2,0.6,0.4\nb,1,3x,0.5,0.5\n";
        let e = read(bad, lines::BLOCK).unwrap_err();
        assert!(e.contains("t.csv:5:3"), "{e}");
    }
}
