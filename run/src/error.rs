//! The error of the run library: a message for the user and whether the input was at fault.

use std::fmt::{self, Display};

/// Whose fault an error is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ErrorKind {
    /// Invalid input: options, run files, scripts, geometry, a foreign output folder.
    Input,
    /// Not the input's fault: the file system, an internal failure.
    Failure,
}

/// An error with one or more lines saying what went wrong and where.
#[derive(Clone, Debug)]
pub struct RunError {
    /// Whose fault it is (the binary maps it to an exit code).
    pub kind: ErrorKind,
    /// What went wrong and where.
    pub message: String,
}

impl RunError {
    /// Invalid input.
    pub fn input(message: impl Display) -> Self {
        Self {
            kind: ErrorKind::Input,
            message: message.to_string(),
        }
    }

    /// A failure not caused by the input (for example a disk error).
    pub fn failure(message: impl Display) -> Self {
        Self {
            kind: ErrorKind::Failure,
            message: message.to_string(),
        }
    }
}

impl Display for RunError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for RunError {}
