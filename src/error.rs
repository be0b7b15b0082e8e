//! The one error type of the library.
//!
//! Every variant names what was wrong with the user's input in words; errors that come
//! from a file carry its path and, where one exists, the 1-based line and column. The
//! binary prints the `Display` form and exits with code 2.

use std::fmt;
use std::path::PathBuf;

/// A position inside an input file: 1-based line and, where it applies, 1-based column.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Location {
    /// The file, as the user named it.
    pub file: PathBuf,
    /// 1-based line number, if the problem sits on one line.
    pub line: Option<u64>,
    /// 1-based column (field) number, if the problem sits in one field.
    pub column: Option<u64>,
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some(line) = self.line {
            write!(f, ":{line}")?;
            if let Some(col) = self.column {
                write!(f, ":{col}")?;
            }
        }
        Ok(())
    }
}

/// Everything that can go wrong in fdtemp.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The content of an input file is not what was expected.
    #[error("{at}: {message}")]
    Input {
        /// Where the problem is.
        at: Location,
        /// What was found and what was expected.
        message: String,
    },
    /// A file could not be read or written.
    #[error("{}: {action}: {source}", path.display())]
    Io {
        /// The file the operation was about.
        path: PathBuf,
        /// What fdtemp was trying to do ("cannot read", "cannot write").
        action: &'static str,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// A setting is out of its allowed range.
    #[error("{0}")]
    Setting(String),
    /// The data are valid but the requested analysis is not possible on them.
    #[error("{0}")]
    Analysis(String),
}

impl Error {
    /// An input error at a file position.
    pub fn input(
        file: impl Into<PathBuf>,
        line: Option<u64>,
        column: Option<u64>,
        message: impl Into<String>,
    ) -> Self {
        Error::Input {
            at: Location {
                file: file.into(),
                line,
                column,
            },
            message: message.into(),
        }
    }

    /// The same error with `what: ` put before its message (for example the observable a
    /// problem belongs to).
    #[must_use]
    pub fn about(self, what: &str) -> Self {
        match self {
            Error::Input { at, message } => Error::Input {
                at,
                message: format!("{what}: {message}"),
            },
            Error::Setting(m) => Error::Setting(format!("{what}: {m}")),
            Error::Analysis(m) => Error::Analysis(format!("{what}: {m}")),
            io @ Error::Io { .. } => io,
        }
    }
}

/// The library's result type.
pub type Result<T, E = Error> = std::result::Result<T, E>;
