//! The one error type of the binary: a message for the user and an exit code.

use std::fmt::Display;

/// Exit code for invalid input (bad options, scripts, geometry, files).
pub const EXIT_INPUT: i32 = 2;
/// Exit code for a failure that is not the input's fault (I/O, internal).
pub const EXIT_FAILURE: i32 = 1;

/// An error as the user sees it.
#[derive(Debug)]
pub struct CliError {
    /// Process exit code.
    pub code: i32,
    /// One or more lines saying what went wrong and where.
    pub message: String,
}

impl CliError {
    /// Invalid input: exit code 2.
    pub fn input(message: impl Display) -> Self {
        CliError {
            code: EXIT_INPUT,
            message: message.to_string(),
        }
    }
    /// Failure not caused by the input (for example a disk error): exit code 1.
    pub fn failure(message: impl Display) -> Self {
        CliError {
            code: EXIT_FAILURE,
            message: message.to_string(),
        }
    }
}
