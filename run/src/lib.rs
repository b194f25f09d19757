//! A simulation run of agarium as a value.
//!
//! A [`RunSpec`] says everything about a run (model text and overrides, initial conditions,
//! plate and mesh, solver, end time and outputs); [`Run::start`] checks it, compiles the
//! model and meshes the plate, [`Run::resume`] rebuilds a run from its folder's manifest and
//! checkpoint, and [`Run::advance`] integrates to the end with a cancellation flag and an
//! [`Observer`], writing the folder (states, series index, diagnostics table, plots,
//! pictures, checkpoints, manifest) and returning a [`Finished`] outcome. The command line's
//! `run`, `resume` and `sweep` are loops over this API; nothing here prints or exits.
//!
//! - `spec.rs`: the specification and the output schedule.
//! - `session.rs`: start, resume, the step loop and the outcome.
//! - `run_file.rs`: TOML run files (every `run` setting in one file).
//! - `plate_source.rs`: where a plate comes from (shape, outline file, photograph), for the
//!   command line and the run file alike.
//! - `initial.rs`: initial-condition overrides and inoculation spots.
//! - `manifest.rs`: `run.json`, what was run and how it ended.
//! - `lock.rs`: the output folder's lock and the temporary files a killed run leaves.
//! - `outputs.rs`: states, pictures, plots and the summary table.
//! - `stability.rs`: pattern prediction (steady states, dispersion relation, plate modes,
//!   parameter thresholds) for a specification's model and plate.
//! - `sweep/`: many runs of one base specification over a plan of axes, their table, shards
//!   and merges.

#![deny(missing_docs)]

mod error;
mod initial;
mod lock;
mod manifest;
mod outputs;
mod plate_source;
mod run_file;
mod session;
mod spec;
pub mod stability;
pub mod sweep;
mod text;

pub use error::{ErrorKind, RunError};
pub use initial::{InitialOverrides, Inoculum, SpeciesInitial};
pub use lock::{is_housekeeping, leftovers, FolderLock, LOCK_FILE, TEMPORARY_PREFIX};
pub use manifest::{
    now_unix, sha256, Manifest, MeshFigures, CHECKPOINT, DEFAULT_PICTURE_WIDTH, MANIFEST,
    MANIFEST_FORMAT,
};
pub use plate_source::{PlateSource, ResolvedPlate};
pub use run_file::RunFile;
pub use session::{mesh_of, rayon_threads, Ended, Finished, Observer, Run, Silent, Started};
pub use spec::{output_count, positive, RunSpec, DEFAULT_MAX_STEPS, MAX_OUTPUTS};
pub use text::numbers;
