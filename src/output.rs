//! Writing output files safely: nothing the user has is overwritten without asking, and
//! every file appears whole or not at all (a temporary file in the same folder, then a
//! rename).

use crate::error::{Error, Result};
use std::io::Write;
use std::path::{Path, PathBuf};

/// One file to write.
#[derive(Debug, Clone)]
pub struct Output {
    /// Where it goes.
    pub path: PathBuf,
    /// What it holds.
    pub bytes: Vec<u8>,
}

/// Checks every output before any is written: it must not be one of the inputs, its
/// folder must exist, and it must not exist already unless `overwrite` is set.
///
/// # Errors
/// [`Error::Setting`] naming the path and what is wrong.
pub fn check(outputs: &[Output], inputs: &[&Path], overwrite: bool) -> Result<()> {
    for (i, o) in outputs.iter().enumerate() {
        let p = &o.path;
        if outputs[..i].iter().any(|q| q.path == *p) {
            return Err(Error::Setting(format!(
                "{} is named for two outputs",
                p.display()
            )));
        }
        if inputs.iter().any(|inp| same_file(inp, p)) {
            return Err(Error::Setting(format!(
                "{}: is an input file; refusing to write over it",
                p.display()
            )));
        }
        let parent = parent_of(p);
        if !parent.is_dir() {
            return Err(Error::Setting(format!(
                "{}: the folder {} does not exist",
                p.display(),
                parent.display()
            )));
        }
        if p.exists() && !overwrite {
            return Err(Error::Setting(format!(
                "{}: exists already; pass --overwrite to replace it",
                p.display()
            )));
        }
    }
    Ok(())
}

/// Writes every output atomically (temporary file in the same folder, then rename).
///
/// # Errors
/// [`Error::Io`] when a file cannot be created, written or moved into place; a target
/// that appeared meanwhile is not replaced unless `overwrite` is set.
pub fn write_all(outputs: &[Output], overwrite: bool) -> Result<()> {
    for o in outputs {
        let io = |source| Error::Io {
            path: o.path.clone(),
            action: "cannot write",
            source,
        };
        let mut tmp = tempfile::Builder::new()
            .prefix(".fdtemp-")
            .tempfile_in(parent_of(&o.path))
            .map_err(io)?;
        tmp.write_all(&o.bytes).map_err(io)?;
        // A temporary file is private (0600); the result gets the permissions of the file
        // it replaces, or ordinary ones (0644) when it is new.
        #[cfg(unix)]
        {
            use std::os::unix::fs::PermissionsExt;
            let perms = std::fs::metadata(&o.path)
                .map(|m| m.permissions())
                .unwrap_or_else(|_| std::fs::Permissions::from_mode(0o644));
            tmp.as_file().set_permissions(perms).map_err(io)?;
        }
        tmp.as_file().sync_all().map_err(io)?;
        if overwrite {
            tmp.persist(&o.path).map_err(|e| io(e.error))?;
        } else {
            tmp.persist_noclobber(&o.path).map_err(|e| io(e.error))?;
        }
    }
    Ok(())
}

fn parent_of(p: &Path) -> PathBuf {
    match p.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

fn same_file(a: &Path, b: &Path) -> bool {
    match (a.canonicalize(), b.canonicalize()) {
        (Ok(x), Ok(y)) => x == y,
        _ => a == b,
    }
}

/// [`check`] for paths that are not computed yet (options that may be absent).
///
/// # Errors
/// As [`check`].
pub fn check_paths(paths: &[&Option<PathBuf>], inputs: &[&Path], overwrite: bool) -> Result<()> {
    let planned: Vec<Output> = paths
        .iter()
        .filter_map(|p| p.as_ref())
        .map(|p| Output {
            path: p.clone(),
            bytes: Vec::new(),
        })
        .collect();
    check(&planned, inputs, overwrite)
}
