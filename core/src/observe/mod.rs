//! Observing a run: per-species statistics, the model's integrals and derived fields.

mod diagnostics;

pub use diagnostics::{Diagnostics, IntegralValue, SpeciesStats};
