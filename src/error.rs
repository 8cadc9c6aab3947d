//! The one error type of the library.
//!
//! Owns: `Error` (a kind plus a plain lower-case message) and the context
//! wrappers that add the file, line and column where the problem is. Does not
//! own: printing or exit codes (the binary maps `ErrorKind` to docs/interface.md's
//! exit status: `Data` -> 1, `Usage` -> 2, `Io` -> 1).
//!
//! Invariant: every error that comes from a file names that file; every error
//! that comes from a line of text names the line (1-based) and, where it is
//! one cell, the column name and the offending value.

use std::fmt;
use std::path::{Path, PathBuf};

/// What went wrong, as far as the exit status is concerned.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ErrorKind {
    /// The data could not be reduced: bad or inconsistent input (exit 1).
    Data,
    /// The command line or the pipeline file is wrong (exit 2).
    Usage,
    /// Reading or writing a file failed at the operating-system level (exit 1).
    Io,
}

/// A library error: a kind, a message and where it happened.
#[derive(Debug, Clone)]
pub struct Error {
    /// What went wrong, which sets the exit status (`exit_code`).
    pub kind: ErrorKind,
    /// The message, naming the offending key or value.
    pub message: String,
    /// The file it happened in; `None`: not tied to a file.
    pub path: Option<PathBuf>,
    /// The 1-based line in `path`; `None`: not tied to a line.
    pub line: Option<usize>,
    /// The column (header name) or key; `None`: not tied to one.
    pub column: Option<String>,
}

/// The library's result type: `Error` unless another is named.
pub type Result<T, E = Error> = std::result::Result<T, E>;

impl Error {
    pub(crate) fn new(kind: ErrorKind, message: impl Into<String>) -> Self {
        Error {
            kind,
            message: message.into(),
            path: None,
            line: None,
            column: None,
        }
    }
    /// Bad or inconsistent input data (exit 1).
    pub fn data(message: impl Into<String>) -> Self {
        Self::new(ErrorKind::Data, message)
    }
    /// A wrong command line or pipeline file (exit 2).
    pub fn usage(message: impl Into<String>) -> Self {
        Self::new(ErrorKind::Usage, message)
    }
    /// An operating-system error on `path`.
    pub fn io(path: &Path, err: std::io::Error) -> Self {
        Self::new(ErrorKind::Io, err.to_string().to_lowercase()).with_path(path)
    }
    /// Adds the file, unless a more specific one is already named.
    pub fn with_path(mut self, path: &Path) -> Self {
        if self.path.is_none() {
            self.path = Some(path.to_path_buf());
        }
        self
    }
    /// Adds the 1-based line number, unless one is already named.
    pub(crate) fn with_line(mut self, line: usize) -> Self {
        if self.line.is_none() {
            self.line = Some(line);
        }
        self
    }
    /// Adds the column (header name), unless one is already named.
    pub(crate) fn with_column(mut self, column: impl Into<String>) -> Self {
        if self.column.is_none() {
            self.column = Some(column.into());
        }
        self
    }
    /// The exit status docs/interface.md gives this kind of error.
    pub fn exit_code(&self) -> i32 {
        match self.kind {
            ErrorKind::Usage => 2,
            ErrorKind::Data | ErrorKind::Io => 1,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Some(p) = &self.path {
            write!(f, "{}", p.display())?;
            if let Some(l) = self.line {
                write!(f, ":{l}")?;
            }
            if let Some(c) = &self.column {
                write!(f, " (column '{c}')")?;
            }
            write!(f, ": ")?;
        } else if let Some(c) = &self.column {
            write!(f, "column '{c}': ")?;
        }
        write!(f, "{}", self.message)
    }
}

impl std::error::Error for Error {}

/// Adds a path to any error on its way up.
pub(crate) trait WithPath<T> {
    fn with_path(self, path: &Path) -> Result<T>;
}

impl<T> WithPath<T> for Result<T> {
    fn with_path(self, path: &Path) -> Result<T> {
        self.map_err(|e| e.with_path(path))
    }
}

impl<T> WithPath<T> for std::result::Result<T, std::io::Error> {
    fn with_path(self, path: &Path) -> Result<T> {
        self.map_err(|e| Error::io(path, e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn display_names_file_line_and_column() {
        let e = Error::data("expected a number, found 'abc'")
            .with_path(Path::new("run/f001.csv"))
            .with_line(17)
            .with_column("u");
        assert_eq!(
            e.to_string(),
            "run/f001.csv:17 (column 'u'): expected a number, found 'abc'"
        );
        assert_eq!(e.exit_code(), 1);
        assert_eq!(Error::usage("x").exit_code(), 2);
    }
}
