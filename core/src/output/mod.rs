//! Output.
