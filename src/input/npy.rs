//! NumPy inputs: `.npz` campaigns and `.npy` noise records.
//!
//! A campaign archive holds `corr` and `resp` (samples × points), `tw` and `t` (one value
//! per point), optionally `corr_eq` (samples × points) and `sample` (one integer per
//! sample). A noise record is one array: a single run (1-D) or runs × samples (2-D).
//! Numbers may be stored as float64, float32, int64 or int32, in either byte order.
//!
//! Reference: the NumPy `.npy` format specification (numpy.lib.format), read with the
//! `ndarray-npy` crate; an `.npz` file is a zip archive of `.npy` files, one per array.

use super::tidy::{CampaignRead, ExcludedSample, ReadCampaign};
use crate::error::{Error, Result};
use crate::twotime::campaign::{Campaign, GridPoint};
use ndarray::{Array2, ArrayD, Axis, Ix1, Ix2, IxDyn, OwnedRepr};
use ndarray_npy::{NpzReader, ReadNpyError, ReadNpyExt, ReadNpzError};
use std::path::Path;

/// Whether the file's name ends in `.npz` (any case).
pub fn is_npz(path: &Path) -> bool {
    has_extension(path, "npz")
}

/// Whether the file's name ends in `.npy` (any case).
pub fn is_npy(path: &Path) -> bool {
    has_extension(path, "npy")
}

fn has_extension(path: &Path, ext: &str) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case(ext))
}

/// The element types fdtemp reads, tried in this order.
#[derive(Clone, Copy)]
enum Dtype {
    F64,
    F32,
    I64,
    I32,
}

const DTYPES: [Dtype; 4] = [Dtype::F64, Dtype::F32, Dtype::I64, Dtype::I32];

/// Why one array could not be read.
enum Failure {
    /// The archive has no array of that name.
    Absent,
    /// The element type is none of [`DTYPES`] (its descriptor).
    WrongType(String),
    /// Anything else, in words.
    Other(String),
}

fn npy_failure(e: ReadNpyError) -> Failure {
    match e {
        ReadNpyError::WrongDescriptor(d) => Failure::WrongType(d.to_string()),
        e => Failure::Other(e.to_string()),
    }
}

fn npz_failure(e: ReadNpzError) -> Failure {
    match e {
        ReadNpzError::Npy(e) => npy_failure(e),
        e => Failure::Other(e.to_string()),
    }
}

/// Reads an array of any of [`DTYPES`] as float64, `read` reading it as one type.
fn as_f64(
    mut read: impl FnMut(Dtype) -> std::result::Result<ArrayD<f64>, Failure>,
) -> std::result::Result<ArrayD<f64>, Failure> {
    let mut last = Failure::Other("no element type tried".into());
    for d in DTYPES {
        match read(d) {
            Err(Failure::WrongType(desc)) => last = Failure::WrongType(desc),
            other => return other,
        }
    }
    Err(last)
}

/// One array of an archive (whose arrays are `found`), as float64.
fn npz_array(
    z: &mut NpzReader<std::fs::File>,
    found: &[String],
    name: &str,
) -> std::result::Result<ArrayD<f64>, Failure> {
    if !found.iter().any(|f| f == name) {
        return Err(Failure::Absent);
    }
    as_f64(|d| {
        let r = match d {
            Dtype::F64 => z.by_name::<OwnedRepr<f64>, IxDyn>(name),
            Dtype::F32 => z
                .by_name::<OwnedRepr<f32>, IxDyn>(name)
                .map(|a| a.mapv(f64::from)),
            Dtype::I64 => z
                .by_name::<OwnedRepr<i64>, IxDyn>(name)
                .map(|a| a.mapv(|v| v as f64)),
            Dtype::I32 => z
                .by_name::<OwnedRepr<i32>, IxDyn>(name)
                .map(|a| a.mapv(f64::from)),
        };
        r.map_err(npz_failure)
    })
}

/// The error for an array that could not be read.
fn failure_error(path: &Path, name: &str, f: Failure, found: &[String]) -> Error {
    let what = match f {
        Failure::Absent => format!(
            "no array '{name}' in the archive (found: {}); expected arrays corr, resp \
             (samples × points), tw, t (one per point) and optionally corr_eq, sample",
            if found.is_empty() {
                "none".to_string()
            } else {
                found.join(", ")
            }
        ),
        Failure::WrongType(desc) => format!(
            "array '{name}' has element type {desc}; expected numbers (float64, float32, \
             int64 or int32)"
        ),
        Failure::Other(e) => format!("array '{name}' cannot be read: {e}"),
    };
    Error::input(path, None, None, what)
}

/// A shape as NumPy prints it: `(3, 4)`, `(5,)`, `()`.
fn shape_text(shape: &[usize]) -> String {
    match shape {
        [n] => format!("({n},)"),
        s => format!(
            "({})",
            s.iter()
                .map(|n| n.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// Opens a NumPy file, naming it in the error.
fn open_file(path: &Path) -> Result<std::fs::File> {
    std::fs::File::open(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        action: "cannot read",
        source,
    })
}

/// Reads a campaign from a `.npz` archive (see the module header); `how.names` maps the
/// array names as `--column` maps the columns, and NaN in `corr`, `resp` or `corr_eq`
/// marks a missing point.
///
/// # Errors
/// [`Error::Io`] when the file cannot be opened; [`Error::Input`] naming the array for a
/// missing array, a wrong shape or element type, a time that is not finite, `t <= tw`, a
/// repeated point, an infinite value or (without `drop_incomplete`) a NaN, and fewer than
/// two (complete) samples.
pub fn read_campaign_npz(path: &Path, how: &CampaignRead) -> Result<ReadCampaign> {
    let err = |m: String| Error::input(path, None, None, m);
    let mut z = NpzReader::new(open_file(path)?).map_err(|e| {
        err(format!(
            "the file is not a NumPy .npz archive ({e}); expected the zip file that \
             numpy.savez writes"
        ))
    })?;
    let found = z.names().unwrap_or_default();
    let names = &how.names;
    let mut required = |name: &str| {
        npz_array(&mut z, &found, name).map_err(|f| failure_error(path, name, f, &found))
    };
    let corr = required(&names.corr)?;
    let resp = required(&names.resp)?;
    let tw = required(&names.tw)?;
    let t = required(&names.t)?;
    let mut optional = |name: &str| match npz_array(&mut z, &found, name) {
        Err(Failure::Absent) => Ok(None),
        Ok(a) => Ok(Some(a)),
        Err(f) => Err(failure_error(path, name, f, &found)),
    };
    let corr_eq = optional(&names.corr_eq)?;
    let sample = optional(&names.sample)?;
    campaign_from_arrays(
        path,
        how,
        CampaignArrays {
            corr,
            resp,
            tw,
            t,
            corr_eq,
            sample,
        },
    )
}

/// The arrays of a campaign held in memory, as a `.npz` archive holds them (see the module
/// header), every one as float64 of any shape (checked when the campaign is built).
#[derive(Debug, Clone)]
pub struct CampaignArrays {
    /// C, samples × points.
    pub corr: ArrayD<f64>,
    /// χ, samples × points.
    pub resp: ArrayD<f64>,
    /// The waiting time of each point.
    pub tw: ArrayD<f64>,
    /// The later time of each point.
    pub t: ArrayD<f64>,
    /// C(t,t), samples × points, when given.
    pub corr_eq: Option<ArrayD<f64>>,
    /// One integer per sample, when given.
    pub sample: Option<ArrayD<f64>>,
}

/// The campaign of arrays held in memory, checked exactly as a `.npz` archive's (`path`
/// names them in errors; `how.names` are the array names used in messages).
///
/// # Errors
/// As [`read_campaign_npz`], except for reading the file.
pub fn campaign_from_arrays(
    path: &Path,
    how: &CampaignRead,
    arrays: CampaignArrays,
) -> Result<ReadCampaign> {
    let err = |m: String| Error::input(path, None, None, m);
    let names = &how.names;
    let CampaignArrays {
        corr,
        resp,
        tw,
        t,
        corr_eq,
        sample,
    } = arrays;
    let corr = matrix(path, &names.corr, corr, None)?;
    let (n, np) = corr.dim();
    let resp = matrix(path, &names.resp, resp, Some((&names.corr, n, np)))?;
    let corr_eq = corr_eq
        .map(|a| matrix(path, &names.corr_eq, a, Some((&names.corr, n, np))))
        .transpose()?;
    let tw = vector(path, &names.tw, tw, np, &names.corr)?;
    let t = vector(path, &names.t, t, np, &names.corr)?;
    let ids = match sample {
        None => (0..n).map(|i| i.to_string()).collect::<Vec<_>>(),
        Some(s) => sample_names(path, &names.sample, s, n, &names.corr)?,
    };
    let points = grid(path, &names.tw, &names.t, &tw, &t)?;
    if n < 2 {
        return Err(err(format!(
            "array '{}' has {n} sample(s) (rows); at least 2 independent samples are needed \
             to estimate errors",
            names.corr
        )));
    }
    // Missing points (NaN) per sample; infinities are errors.
    let mut missing: Vec<Vec<usize>> = vec![Vec::new(); n];
    let arrays = [
        (&names.corr, Some(&corr), false),
        (&names.resp, Some(&resp), false),
        (&names.corr_eq, corr_eq.as_ref(), true),
    ];
    for (name, a, positive) in arrays {
        let Some(a) = a else { continue };
        for ((i, j), &v) in a.indexed_iter() {
            if v.is_nan() {
                if !how.drop_incomplete {
                    return Err(err(format!(
                        "{name}[{i}, {j}] is NaN: sample '{}' has no value at tw = {}, t = {}; \
                         expected finite numbers (--drop-incomplete leaves out the samples \
                         that miss points)",
                        ids[i], points[j].tw, points[j].t
                    )));
                }
                if !missing[i].contains(&j) {
                    missing[i].push(j);
                }
            } else if !v.is_finite() {
                return Err(err(format!(
                    "{name}[{i}, {j}] is {v}; expected a finite number"
                )));
            } else if positive && v <= 0.0 {
                return Err(err(format!(
                    "{name}[{i}, {j}] is {v}; expected a positive number (it normalizes C and chi)"
                )));
            }
        }
    }
    let keep: Vec<usize> = (0..n).filter(|&i| missing[i].is_empty()).collect();
    if keep.len() < 2 {
        return Err(err(format!(
            "only {} of {n} samples {} a value at every point; --drop-incomplete needs at \
             least 2 complete samples",
            keep.len(),
            if keep.len() == 1 { "has" } else { "have" }
        )));
    }
    let excluded = (0..n)
        .filter(|&i| !missing[i].is_empty())
        .map(|i| {
            let mut m = missing[i].clone();
            m.sort_unstable();
            ExcludedSample {
                sample: ids[i].clone(),
                missing: m.into_iter().map(|j| points[j]).collect(),
            }
        })
        .collect();
    let rows = |a: &Array2<f64>| a.select(Axis(0), &keep);
    let campaign = Campaign::new(
        keep.iter().map(|&i| ids[i].clone()).collect(),
        points,
        rows(&corr),
        rows(&resp),
        corr_eq.as_ref().map(rows),
    )
    .map_err(|e| err(e.to_string()))?;
    Ok(ReadCampaign {
        campaign,
        excluded,
        observable: None,
        more: Vec::new(),
    })
}

/// A 2-D array, with the shape of `like` = (name, rows, columns) when given.
fn matrix(
    path: &Path,
    name: &str,
    a: ArrayD<f64>,
    like: Option<(&str, usize, usize)>,
) -> Result<Array2<f64>> {
    let shape = a.shape().to_vec();
    let m = a.into_dimensionality::<Ix2>().map_err(|_| {
        Error::input(
            path,
            None,
            None,
            format!(
                "array '{name}' has shape {}; expected 2 dimensions: samples × points",
                shape_text(&shape)
            ),
        )
    })?;
    if let Some((other, n, np)) = like
        && m.dim() != (n, np)
    {
        return Err(Error::input(
            path,
            None,
            None,
            format!(
                "array '{name}' has shape {}; expected ({n}, {np}) as '{other}' (samples × \
                 points)",
                shape_text(&shape)
            ),
        ));
    }
    Ok(m)
}

/// A 1-D array of `len` values (one per column of `of`).
fn vector(path: &Path, name: &str, a: ArrayD<f64>, len: usize, of: &str) -> Result<Vec<f64>> {
    let shape = a.shape().to_vec();
    match a.into_dimensionality::<Ix1>() {
        Ok(v) if v.len() == len => Ok(v.to_vec()),
        _ => Err(Error::input(
            path,
            None,
            None,
            format!(
                "array '{name}' has shape {}; expected ({len},): one value per point (per \
                 column of '{of}')",
                shape_text(&shape)
            ),
        )),
    }
}

/// Sample names from an integer array of one value per sample.
fn sample_names(
    path: &Path,
    name: &str,
    a: ArrayD<f64>,
    n: usize,
    of: &str,
) -> Result<Vec<String>> {
    let shape = a.shape().to_vec();
    let err = |m: String| Error::input(path, None, None, m);
    let v = match a.into_dimensionality::<Ix1>() {
        Ok(v) if v.len() == n => v,
        _ => {
            return Err(err(format!(
                "array '{name}' has shape {}; expected ({n},): one name per sample (per row \
                 of '{of}')",
                shape_text(&shape)
            )));
        }
    };
    let mut seen = std::collections::HashMap::new();
    let mut ids = Vec::with_capacity(n);
    for (i, &x) in v.iter().enumerate() {
        if !(x.is_finite() && x.fract() == 0.0) {
            return Err(err(format!(
                "{name}[{i}] is {x}; expected an integer sample number"
            )));
        }
        let id = format!("{}", x as i64);
        if let Some(first) = seen.insert(id.clone(), i) {
            return Err(err(format!(
                "{name}[{i}] is {id}, as {name}[{first}]; expected each sample once"
            )));
        }
        ids.push(id);
    }
    Ok(ids)
}

/// The grid points from `tw` and `t`, checked: finite, `t > tw`, each point once.
fn grid(path: &Path, tw_name: &str, t_name: &str, tw: &[f64], t: &[f64]) -> Result<Vec<GridPoint>> {
    let err = |m: String| Error::input(path, None, None, m);
    let mut seen = std::collections::HashMap::new();
    let mut points = Vec::with_capacity(tw.len());
    for (j, (&a, &b)) in tw.iter().zip(t).enumerate() {
        for (name, v) in [(tw_name, a), (t_name, b)] {
            if !v.is_finite() {
                return Err(err(format!("{name}[{j}] is {v}; expected a finite time")));
            }
        }
        if !(b > a) {
            return Err(err(format!(
                "{t_name}[{j}] = {b} is not later than {tw_name}[{j}] = {a}; expected t > tw"
            )));
        }
        let key = ((a + 0.0).to_bits(), (b + 0.0).to_bits());
        if let Some(first) = seen.insert(key, j) {
            return Err(err(format!(
                "point {j} (tw = {a}, t = {b}) is point {first} again; expected each (tw, t) \
                 once"
            )));
        }
        points.push(GridPoint { tw: a, t: b });
    }
    Ok(points)
}

/// Reads a `.npy` noise record: one run (1-D) or runs × samples (2-D, one row per run),
/// named by their row numbers `0`, `1`, ….
///
/// # Errors
/// [`Error::Io`] when the file cannot be opened; [`Error::Input`] for a file that is not
/// a `.npy` array of numbers, an array of other than 1 or 2 dimensions, more runs than
/// samples per run (a transposed array), an empty array, or a value that is not finite.
pub fn read_noise_npy(path: &Path) -> Result<(Vec<String>, Array2<f64>)> {
    let name = "the array";
    let a = as_f64(|d| {
        let f = open_file(path).map_err(|e| Failure::Other(e.to_string()))?;
        let r = match d {
            Dtype::F64 => ArrayD::<f64>::read_npy(f),
            Dtype::F32 => ArrayD::<f32>::read_npy(f).map(|a| a.mapv(f64::from)),
            Dtype::I64 => ArrayD::<i64>::read_npy(f).map(|a| a.mapv(|v| v as f64)),
            Dtype::I32 => ArrayD::<i32>::read_npy(f).map(|a| a.mapv(f64::from)),
        };
        r.map_err(npy_failure)
    });
    let err = |m: String| Error::input(path, None, None, m);
    let a = match a {
        Ok(a) => a,
        Err(Failure::WrongType(desc)) => {
            return Err(err(format!(
                "{name} has element type {desc}; expected numbers (float64, float32, int64 or \
                 int32)"
            )));
        }
        Err(Failure::Other(e)) => {
            return Err(err(format!(
                "the file is not a NumPy .npy array ({e}); expected the file that numpy.save \
                 writes"
            )));
        }
        Err(Failure::Absent) => unreachable!("a .npy file has one array"),
    };
    noise_runs(path, a)
}

/// Checks a noise record held in memory (one run, or runs × samples) as a `.npy` record's
/// array; `path` names it in errors.
///
/// # Errors
/// As [`read_noise_npy`], except for reading the file.
pub fn noise_runs(path: &Path, a: ArrayD<f64>) -> Result<(Vec<String>, Array2<f64>)> {
    let name = "the array";
    let err = |m: String| Error::input(path, None, None, m);
    let shape = a.shape().to_vec();
    let m = match shape.len() {
        1 => a.insert_axis(Axis(0)).into_dimensionality::<Ix2>(),
        2 => a.into_dimensionality::<Ix2>(),
        _ => {
            return Err(err(format!(
                "{name} has shape {}; expected one run (1 dimension) or runs × samples (2 \
                 dimensions, one row per run)",
                shape_text(&shape)
            )));
        }
    }
    .map_err(|e| err(e.to_string()))?;
    let (runs, samples) = m.dim();
    if runs == 0 || samples == 0 {
        return Err(err(format!(
            "{name} has shape {}; expected a record of many samples",
            shape_text(&shape)
        )));
    }
    if runs > samples {
        return Err(err(format!(
            "{name} has shape {}: {runs} runs of {samples} samples; expected runs × samples, \
             one row per run (save the transpose: numpy.save(path, x.T))",
            shape_text(&shape)
        )));
    }
    if let Some(((r, s), v)) = m.indexed_iter().find(|(_, v)| !v.is_finite()) {
        let at = if shape.len() == 1 {
            format!("[{s}]")
        } else {
            format!("[{r}, {s}]")
        };
        return Err(err(format!(
            "{name} is {v} at {at}; expected finite samples"
        )));
    }
    Ok(((0..runs).map(|r| r.to_string()).collect(), m))
}
