//! The one error type of sworn and its exit codes.
//!
//! Every variant carries the place the problem was found (file, line and column, key,
//! specification or column) and says what to do about it. Errors are printed once, by
//! `main`. All of them are "bad input" (exit code 2); a failed check (exit code 1) is not an
//! error but an outcome, see [`crate::app::Outcome`].

use std::path::PathBuf;

/// Everything that can stop a command.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// The plan file could not be parsed or failed validation.
    #[error("{}:{line}:{column}: {message}{}", path.display(), key_suffix(key))]
    Plan {
        /// The plan file.
        path: PathBuf,
        /// 1-based line of the offending text.
        line: usize,
        /// 1-based column of the offending text.
        column: usize,
        /// Dotted key path, e.g. `specification.temp_iv.outcome` (may be empty).
        key: String,
        /// What is wrong and what to do.
        message: String,
    },
    /// A data file failed to load or does not match the declared schema in a way that makes
    /// estimation impossible.
    #[error("{}: {message}", path.display())]
    Data {
        /// The data file.
        path: PathBuf,
        /// What is wrong (naming the column) and what to do.
        message: String,
    },
    /// Reading or writing a file failed.
    #[error("{}: {action}: {source}", path.display())]
    Io {
        /// The file or folder.
        path: PathBuf,
        /// What sworn was doing, e.g. "cannot read the plan".
        action: &'static str,
        /// The underlying error.
        source: std::io::Error,
    },
    /// A specification could not be estimated (e.g. a rank-deficient design).
    #[error("specification `{spec}`: {message}")]
    Estimation {
        /// The specification id.
        spec: String,
        /// What is wrong and what to do.
        message: String,
    },
    /// The ledger is missing, unreadable or refuses the operation.
    #[error("{}: {message}", path.display())]
    Ledger {
        /// The ledger file.
        path: PathBuf,
        /// What is wrong and what to do.
        message: String,
    },
    /// The command line asked for something that does not exist (e.g. an unknown help topic).
    #[error("{message}")]
    Usage {
        /// What is wrong and what to do.
        message: String,
    },
    /// A report template failed to render (a bug in a template, never user input).
    #[error("report template `{template}`: {message}")]
    Template {
        /// The template name.
        template: String,
        /// The renderer's message.
        message: String,
    },
}

fn key_suffix(key: &str) -> String {
    if key.is_empty() {
        String::new()
    } else {
        format!(" (at `{key}`)")
    }
}

impl Error {
    /// The process exit code for this error: always 2 (bad input).
    pub fn exit_code(&self) -> i32 {
        2
    }

    /// Shorthand for an I/O error with its path and action.
    pub fn io(path: impl Into<PathBuf>, action: &'static str, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            action,
            source,
        }
    }
}

/// The result type used throughout sworn.
pub type Result<T> = std::result::Result<T, Error>;
