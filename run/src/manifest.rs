//! The run manifest (`run.json` in the output folder): what was run, with what, and how it
//! ended. It holds everything `agarium resume` needs to rebuild the run: the model's text
//! (so editing the file afterwards changes nothing), the overrides, the plate, the meshing
//! options and the solver settings.

use std::collections::BTreeMap;
use std::path::Path;

use agarium_core::geometry::PlateSpec;
use agarium_core::mesh::MeshOptions;
use agarium_core::output::{write_atomically, VtuEncoding};
use agarium_core::time::StepperParams;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::error::RunError;

/// File name of the manifest in the output folder.
pub const MANIFEST: &str = "run.json";
/// File name of the checkpoint in the output folder.
pub const CHECKPOINT: &str = "checkpoint.bin";
/// Format of the manifest this agarium writes (2: `format`, `outputs_done`, `resumed_unix`
/// and checkpoints with a checksum and fingerprints; a manifest without `format` is 1).
pub const MANIFEST_FORMAT: u32 = 2;

fn format_one() -> u32 {
    1
}

/// Mesh figures recorded in the manifest.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct MeshFigures {
    /// Nodes.
    pub nodes: usize,
    /// Triangles.
    pub triangles: usize,
    /// Smallest angle in degrees.
    pub min_angle_deg: f64,
    /// Plate area.
    pub area: f64,
}

/// Everything about one run.
#[derive(Clone, Debug, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Manifest {
    /// Format of this file ([`MANIFEST_FORMAT`]; 1 when absent).
    #[serde(default = "format_one")]
    pub format: u32,
    /// Program and version.
    pub tool: String,
    /// The command line as given.
    pub command_line: Vec<String>,
    /// Model file as named on the command line.
    pub model_file: String,
    /// Its text when the run started.
    pub model_text: String,
    /// SHA-256 of that text (hex).
    pub model_sha256: String,
    /// `--set` overrides, as given.
    pub overrides: Vec<String>,
    /// Parameters after the overrides: (name, value).
    pub parameters: Vec<(String, f64)>,
    /// The plate.
    pub plate: PlateSpec,
    /// Meshing options.
    pub mesh: MeshOptions,
    /// Mesh figures.
    pub mesh_figures: MeshFigures,
    /// Solver settings.
    pub solver: StepperParams,
    /// End time.
    pub end: f64,
    /// Output interval.
    pub every: f64,
    /// Fields drawn in pictures.
    pub pictures: Vec<String>,
    /// Times of the pictures (empty: every output time).
    #[serde(default)]
    pub picture_times: Vec<f64>,
    /// Width of the pictures in pixels.
    #[serde(default = "default_picture_width")]
    pub picture_width: u32,
    /// Fixed colour ranges of pictures, by field.
    #[serde(default, skip_serializing_if = "BTreeMap::is_empty")]
    pub picture_ranges: BTreeMap<String, [f64; 2]>,
    /// Fields drawn on a logarithmic colour scale.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub picture_log: Vec<String>,
    /// Initial expressions replacing the model's, per species (from `[initial]`,
    /// `[[inoculum]]`, `--initial` and `--inoculum`), as compiled.
    #[serde(default)]
    pub initial: BTreeMap<String, String>,
    /// How the .vtu arrays are stored.
    #[serde(default)]
    pub vtu: VtuEncoding,
    /// Time unit for titles.
    pub time_unit: String,
    /// File-name stem of the outputs.
    pub stem: String,
    /// Checkpoint every this many accepted steps (0: only at output times).
    pub checkpoint_steps: usize,
    /// Also checkpoint after this many wall-clock minutes.
    #[serde(default)]
    pub checkpoint_minutes: Option<f64>,
    /// Worker threads the run used (results are reproducible bit for bit for the same count).
    pub threads: usize,
    /// Start, seconds since the Unix epoch.
    pub started_unix: u64,
    /// End, seconds since the Unix epoch, once it ended.
    pub finished_unix: Option<u64>,
    /// `running`, `reached`, `blow-up`, `interrupted` or `error: …`.
    pub exit: String,
    /// Time of the last checkpoint.
    pub checkpoint_time: Option<f64>,
    /// Time of the last output time whose files (state, index entry, pictures, plots) are
    /// all written; a resume from a checkpoint at a later output time writes that time's.
    #[serde(default)]
    pub outputs_done: Option<f64>,
    /// When the run was resumed, seconds since the Unix epoch (one entry per resume).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub resumed_unix: Vec<u64>,
    /// Wall seconds of the run (of the last resume, for a resumed run).
    #[serde(default)]
    pub wall_seconds: Option<f64>,
    /// Of those, seconds spent writing outputs (diagnostics, states, pictures, plots,
    /// checkpoints).
    #[serde(default)]
    pub output_seconds: Option<f64>,
}

/// Width of pictures when none is chosen.
pub const DEFAULT_PICTURE_WIDTH: u32 = 900;

fn default_picture_width() -> u32 {
    DEFAULT_PICTURE_WIDTH
}

/// Seconds since the Unix epoch.
pub fn now_unix() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0)
}

/// Hex SHA-256 of `text`.
pub fn sha256(text: &str) -> String {
    let digest = Sha256::digest(text.as_bytes());
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

impl Manifest {
    /// Writes the manifest atomically.
    pub fn write(&self, dir: &Path) -> Result<(), RunError> {
        let path = dir.join(MANIFEST);
        let text = serde_json::to_string_pretty(self).map_err(RunError::failure)?;
        write_atomically(&path, |w| {
            w.write_all(text.as_bytes())
                .map_err(|e| agarium_core::output::OutputError::Io {
                    path: path.clone(),
                    reason: e.to_string(),
                })
        })
        .map_err(RunError::failure)
    }

    /// Reads the manifest of a run folder.
    pub fn read(dir: &Path) -> Result<Self, RunError> {
        let path = dir.join(MANIFEST);
        let text = std::fs::read_to_string(&path).map_err(|e| {
            RunError::input(format!(
                "{}: cannot read the run manifest: {e} (is this a run's output folder?)",
                path.display()
            ))
        })?;
        serde_json::from_str(&text).map_err(|e| RunError::input(format!("{}: {e}", path.display())))
    }
}
