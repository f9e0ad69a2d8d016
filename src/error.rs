//! The engine's error type.
//!
//! Invariant: an `Error::Input` message is one line that names the file, the key, the value the
//! user gave and what was expected; the CLI maps it to exit code 2. Other kinds are I/O or
//! internal failures and map to exit code 1.

use std::path::PathBuf;

/// Errors raised by the kinflux engine.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// Bad input from the user: case file, override, command-line value. Exit code 2.
    #[error("{0}")]
    Input(String),
    /// An output location cannot be used (exists, unwritable). Exit code 2.
    #[error("{0}")]
    Output(String),
    /// An I/O failure while reading or writing a file.
    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// Another program the task needs failed (e.g. Slurm's sbatch). Exit code 1.
    #[error("{0}")]
    External(String),
    /// The run was stopped by a signal (SIGINT/SIGTERM) after saving what it had.
    #[error("run interrupted by a signal")]
    Interrupted,
}

impl Error {
    /// Input error with the standard layout `FILE: key `K` = V: expected E`.
    pub fn input(file: &str, key: &str, value: &str, expected: &str) -> Self {
        if value.is_empty() {
            Error::Input(format!("{file}: key `{key}`: {expected}"))
        } else {
            Error::Input(format!(
                "{file}: key `{key}` = {value}: expected {expected}"
            ))
        }
    }

    /// Wrap an I/O error with the path it concerns.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            source,
        }
    }

    /// True when the error is the user's to fix (exit code 2).
    pub fn is_user_error(&self) -> bool {
        matches!(self, Error::Input(_) | Error::Output(_))
    }
}

/// Result type of the engine.
pub type Result<T> = std::result::Result<T, Error>;
