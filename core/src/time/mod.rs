//! Time stepping: variable-step backward Euler and BDF2 with a local error estimate and step
//! controller, Newton on the coupled system (or a linearly implicit segregated mode), step
//! rejection on Newton failure, non-finite values or negativity, output times hit exactly,
//! and blow-up detection.
//!
//! A [`Simulation`] is a plain value (a mesh, a problem, settings and a state), so a sweep can
//! create and advance many of them independently.

mod blowup;
mod checkpoint;
mod failure;
mod newton;
mod params;
mod scheme;
mod simulation;
mod vbdf;

pub use blowup::{BlowupKind, BlowupReport};
pub use checkpoint::{Checkpoint, CheckpointError};
pub use failure::SolveError;
pub use params::{BlowupParams, Coupling, Scheme, StepperParams, BDF_MAX_ORDER};
pub use simulation::{Control, Outcome, Simulation, Stats, StepReport};
