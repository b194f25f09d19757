//! Run files: every `agarium run` setting in one TOML file, so a run can be repeated and
//! shared. Paths in the file are relative to the file's folder. The command line overrides
//! the file (see `RunArgs`); unknown keys are errors naming the key, line and column.
//!
//! ```toml
//! model = "../models/colony_4species.rhai"
//! end = 24.0
//! every = 4.0
//! out = "out/two-spots"
//! pictures = ["u", "c"]
//! range = { u = [0.0, 2.0] }  # a fixed colour range shared by every picture of u
//! log_scale = ["c"]           # c on a logarithmic colour scale
//! time_unit = "h"
//!
//! [set]
//! chi_0 = 0.6
//!
//! [plate]
//! outer = { shape = "circle", radius = 20.0 }   # or outline = "dish.svg", or photo = "dish.png"
//! cuts = [{ cut = "half_plane", normal = [1.0, 0.0], offset = 15.0 }]
//!
//! [mesh]
//! size = 1.0
//! spots = [{ centre = [0.0, 0.0], size = 0.1 }]
//!
//! [solver]
//! rtol = 1e-4
//!
//! [initial]            # replaces the model's initial condition of a species
//! n = "1.2"
//!
//! [[inoculum]]         # spots replace it too (added to an [initial] expression if given)
//! species = "u"
//! at = [-8.0, 0.0]
//! radius = 1.0
//! level = 0.8          # default 1
//! profile = "disc"     # or "gaussian" (radius = standard deviation)
//! ```

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use agarium_core::mesh::MeshOptions;
use agarium_core::time::StepperParams;
use agarium_scripting::SourcePos;
use serde::Deserialize;
use toml::Spanned;

use crate::error::RunError;
use crate::initial::{InitialOverrides, Inoculum};
use crate::plate_source::PlateSource;

/// The contents of a run file; every key is optional.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RunFile {
    /// Model file.
    pub model: Option<PathBuf>,
    /// End time.
    pub end: Option<f64>,
    /// Output interval.
    pub every: Option<f64>,
    /// Output folder.
    pub out: Option<PathBuf>,
    /// Parameter overrides.
    #[serde(default)]
    pub set: BTreeMap<String, f64>,
    /// The plate: a shape (`outer`), an outline file (`outline`) or a photograph (`photo` and
    /// its `photo_*` settings), with holes and cuts.
    pub plate: Option<PlateSource>,
    /// Meshing options.
    pub mesh: Option<MeshOptions>,
    /// Solver settings.
    pub solver: Option<StepperParams>,
    /// Fields drawn at every output time.
    #[serde(default)]
    pub pictures: Vec<String>,
    /// Time unit for titles.
    pub time_unit: Option<String>,
    /// Checkpoint cadence in steps.
    pub checkpoint_every: Option<usize>,
    /// Budget of time steps (see `--max-steps`).
    pub max_steps: Option<u64>,
    /// Wall-clock checkpoint cadence in minutes.
    pub checkpoint_minutes: Option<f64>,
    /// Times at which pictures are drawn (default: every output time).
    #[serde(default)]
    pub picture_times: Vec<f64>,
    /// Width of the pictures in pixels.
    pub picture_width: Option<u32>,
    /// Fixed colour ranges of pictures, by field: `range = { u = [0.0, 2.0] }`.
    #[serde(default)]
    pub range: BTreeMap<String, [f64; 2]>,
    /// Fields drawn on a logarithmic colour scale.
    #[serde(default)]
    pub log_scale: Vec<String>,
    /// zlib level (1–9) of compressed .vtu files; 0 or absent for plain base64.
    pub compress: Option<u32>,
    /// Initial expressions replacing the model's, per species.
    #[serde(default)]
    initial: BTreeMap<String, Spanned<String>>,
    /// Inoculation spots replacing the model's initial condition of their species.
    #[serde(default)]
    inoculum: Vec<Spanned<Inoculum>>,
    /// A sweep over this run (`agarium sweep`; `run` ignores it).
    pub sweep: Option<crate::sweep::SweepSection>,
    /// The two above with their positions in the file.
    #[serde(skip)]
    pub initial_overrides: InitialOverrides,
}

/// Line and column (1-based) of byte `offset` in `text`.
fn line_column(text: &str, offset: usize) -> (usize, usize) {
    let before = &text[..offset.min(text.len())];
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, column)
}

impl RunFile {
    /// Reads and checks `path`; relative paths inside are resolved against its folder.
    pub fn read(path: &Path) -> Result<Self, RunError> {
        let text = std::fs::read_to_string(path)
            .map_err(|e| RunError::input(format!("{}: {e}", path.display())))?;
        let mut file: RunFile = toml::from_str(&text)
            .map_err(|e| RunError::input(format!("{}: {e}", path.display())))?;
        let base = path.parent().unwrap_or(Path::new(""));
        let resolve = |p: &mut Option<PathBuf>| {
            if let Some(q) = p.as_mut() {
                if q.is_relative() {
                    *q = base.join(&*q);
                }
            }
        };
        let at = |offset: usize| {
            let (line, column) = line_column(&text, offset);
            SourcePos {
                file: path.display().to_string(),
                line,
                column,
            }
        };
        let mut overrides = InitialOverrides::default();
        for (name, expr) in &file.initial {
            overrides.species.entry(name.clone()).or_default().expr =
                Some((expr.get_ref().clone(), at(expr.span().start)));
        }
        for spot in &file.inoculum {
            let pos = at(spot.span().start);
            spot.get_ref().check(&pos.to_string())?;
            let i = spot.get_ref().clone();
            overrides
                .species
                .entry(i.species.clone())
                .or_default()
                .spots
                .push((i, pos));
        }
        file.initial_overrides = overrides;
        if let Some(w) = file.picture_width {
            if !(320..=8192).contains(&w) {
                return Err(RunError::input(format!(
                    "{}: picture_width = {w}: pictures are 320 to 8192 pixels wide",
                    path.display()
                )));
            }
        }
        if let Some(level) = file.compress {
            if level > 9 {
                return Err(RunError::input(format!(
                    "{}: compress = {level}: the zlib level is 1 (fastest) to 9 (smallest), 0 for none",
                    path.display()
                )));
            }
        }
        resolve(&mut file.model);
        resolve(&mut file.out);
        if let Some(plate) = file.plate.as_mut() {
            plate.resolve_paths(base);
        }
        if file.mesh.is_some() && file.plate.is_none() {
            return Err(RunError::input(format!(
                "{}: a [mesh] table needs a [plate] table",
                path.display()
            )));
        }
        Ok(file)
    }

    /// `--set` texts of the file's overrides, with those of the command line replacing the
    /// file's for the same name.
    pub fn merged_set(&self, cli: &[String]) -> Vec<String> {
        let cli_names: Vec<&str> = cli
            .iter()
            .filter_map(|t| t.split_once('=').map(|(n, _)| n.trim()))
            .collect();
        let mut out: Vec<String> = self
            .set
            .iter()
            .filter(|(n, _)| !cli_names.contains(&n.as_str()))
            .map(|(n, v)| format!("{n}={v:e}"))
            .collect();
        out.extend(cli.iter().cloned());
        out
    }
}
