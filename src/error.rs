//! The one error type of the library, carrying what a user needs to fix the problem,
//! and the mapping to exit codes (0 success, 1 computation failed, 2 bad usage or input, 128 + signal
//! number when interrupted).

use std::path::Path;

/// Everything that can stop a command.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A problem at a known place in an input file.
    #[error("{file} line {line} column {column}: {message}")]
    InputAt {
        file: String,
        line: u64,
        /// Column number (1-based) and name, e.g. `2 ("time")`.
        column: String,
        message: String,
    },
    /// A problem with an input file as a whole (empty, no rows, no events, unreadable).
    #[error("{file}: {message}")]
    Input { file: String, message: String },
    /// A bad option or option combination.
    #[error("{0}")]
    Usage(String),
    /// An output file could not be written.
    #[error("{path}: {message}")]
    Output { path: String, message: String },
    /// The computation itself failed (no family converged, a numerical failure).
    #[error("{0}")]
    Computation(String),
    /// The run was stopped by a signal (SIGINT, SIGTERM or SIGHUP) before its output was written.
    #[error("interrupted by {name}; no output file was written")]
    Interrupted {
        /// Signal number (2 for SIGINT, 15 for SIGTERM, 1 for SIGHUP).
        signal: i32,
        /// Signal name.
        name: &'static str,
    },
}

impl Error {
    /// Exit status for this error: 1 when the computation failed, 2 for bad usage or input.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Computation(_) => 1,
            // Shell convention: 128 + signal number (130 for SIGINT, 143 for SIGTERM).
            Error::Interrupted { signal, .. } => 128 + signal,
            _ => 2,
        }
    }

    /// An input error at `line` and `column` (1-based number and name) of `file`. The name
    /// comes from the file's header, so it is shown with control characters escaped and cut to
    /// a readable length: the message stays one line whatever the header holds.
    pub fn at(
        file: &str,
        line: u64,
        column: usize,
        name: &str,
        message: impl Into<String>,
    ) -> Self {
        Error::InputAt {
            file: file.to_string(),
            line,
            column: format!("{column} (\"{}\")", crate::format::shown(name)),
            message: message.into(),
        }
    }

    /// An input error about a whole file.
    pub fn input(file: &str, message: impl Into<String>) -> Self {
        Error::Input {
            file: file.to_string(),
            message: message.into(),
        }
    }

    /// An output error about `path`.
    pub fn output(path: &Path, message: impl Into<String>) -> Self {
        Error::Output {
            path: path.display().to_string(),
            message: message.into(),
        }
    }
}

/// Result with the library's error.
pub type Result<T> = std::result::Result<T, Error>;
