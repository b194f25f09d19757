//! Fault injection for the end-to-end tests. In debug builds the environment variable
//! [`VARIABLE`] names a point where the program fails on purpose, so a test can check what a
//! crash or a full disk leaves behind; release builds compile none of it (every check is
//! `false`).
//!
//! - `exit-after-output-time-checkpoint`: the run exits right after a step checkpoint that
//!   landed on an output time, before that time's outputs are written.
//! - `fail-write:NAME`: writing the file named `NAME` (its last path component) fails as a
//!   full disk would.

use std::path::Path;

/// The environment variable naming the fault.
pub const VARIABLE: &str = "AGARIUM_TEST_FAULT";

/// Whether the fault `point` is asked for.
#[cfg(debug_assertions)]
pub fn at(point: &str) -> bool {
    std::env::var(VARIABLE).is_ok_and(|v| v == point)
}

/// Whether the fault `point` is asked for (never, in a release build).
#[cfg(not(debug_assertions))]
pub fn at(_point: &str) -> bool {
    false
}

/// Whether writing `path` should fail (`fail-write:NAME` with `NAME` its file name).
#[cfg(debug_assertions)]
pub fn write_fails(path: &Path) -> bool {
    std::env::var(VARIABLE).is_ok_and(|v| {
        v.strip_prefix("fail-write:")
            .is_some_and(|name| path.file_name().is_some_and(|f| f == name))
    })
}

/// Whether writing `path` should fail (never, in a release build).
#[cfg(not(debug_assertions))]
pub fn write_fails(_path: &Path) -> bool {
    false
}
