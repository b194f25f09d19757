//! Output files: VTK XML unstructured grids and PNG pictures, always written to a temporary
//! file beside the target and renamed into place, so a failure never leaves a partial file.

mod atomic;
mod picture;
mod png;
mod vtu;
mod vtu_binary;

pub use atomic::{
    check_folder_writable, check_writable, write_atomically, write_atomically_via_path,
};
pub use picture::{
    snapshot_title, write_contact_sheet_png, write_field_png, write_phase_png, write_series_png,
    PhaseMark, PhaseOptions, PhasePoint, PlotOptions, Series, SheetTile, SnapshotOptions,
    ValueRange, NAN_GREY,
};
pub use png::{write_mesh_png, PngOptions};
pub use vtu::{write_vtu, write_vtu_as, Field, VtuEncoding};

use std::path::PathBuf;

/// Why an output file could not be written.
#[derive(Debug, thiserror::Error)]
pub enum OutputError {
    /// The file system refused.
    #[error("{path}: cannot write: {reason}", path = path.display())]
    Io {
        /// Target file.
        path: PathBuf,
        /// The system's reason.
        reason: String,
    },
    /// The data could not be encoded.
    #[error("{path}: cannot encode: {reason}", path = path.display())]
    Encode {
        /// Target file.
        path: PathBuf,
        /// What failed.
        reason: String,
    },
}
