//! Observing a run: per-species statistics, the model's integrals and derived fields, and the
//! growing files of an output folder (the .pvd index of the VTK series, the diagnostics CSV).

mod diagnostics;
mod series;

pub use diagnostics::{Diagnostics, IntegralValue, SpeciesStats};
pub use series::{DiagnosticsCsv, DiagnosticsRow, PvdIndex, StepFigures};
