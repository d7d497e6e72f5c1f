//! The crate's error type. Every variant names the file (and row or field
//! where known) and says what to fix.

use std::path::PathBuf;

/// Errors from reading and writing telltale's files.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// An operating-system I/O error on a named path.
    #[error("{path}: {source}")]
    Io {
        /// The file or directory.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: std::io::Error,
    },
    /// A Parquet or Arrow error while writing a named file (a runtime failure, exit 1).
    #[error("{path}: writing Parquet: {source}")]
    ParquetWrite {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: parquet::errors::ParquetError,
    },
    /// A Parquet or Arrow error while reading a named file (the input is at fault, exit 2).
    #[error("{path}: {source}")]
    Parquet {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        #[source]
        source: parquet::errors::ParquetError,
    },
    /// The input is readable but wrong: a missing column, a bad value, an impossible time.
    #[error("{path}: {message}")]
    BadInput {
        /// The file (or flag) at fault.
        path: PathBuf,
        /// What is wrong, where, and what to do.
        message: String,
    },
}

impl Error {
    /// A [`Error::BadInput`] for `path`.
    pub fn bad_input(path: impl Into<PathBuf>, message: impl Into<String>) -> Self {
        Error::BadInput { path: path.into(), message: message.into() }
    }

    /// An [`Error::Io`] for `path`.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io { path: path.into(), source }
    }

    /// Whether the error is the user's input (exit code 2) rather than a runtime failure (1).
    pub fn is_bad_input(&self) -> bool {
        matches!(self, Error::BadInput { .. } | Error::Parquet { .. })
    }
}

/// Result with the crate's [`Error`].
pub type Result<T, E = Error> = std::result::Result<T, E>;
