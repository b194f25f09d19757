//! What a run is, resolved: the model text, overrides, plate, mesh, solver and output
//! settings. A [`RunSpec`] is a plain value: `run` builds one from the command line and a run
//! file, a sweep builds one per point by changing a copy.

use std::collections::BTreeMap;

use agarium_core::geometry::PlateSpec;
use agarium_core::mesh::MeshOptions;
use agarium_core::output::VtuEncoding;
use agarium_core::time::StepperParams;

use crate::error::RunError;
use crate::initial::InitialOverrides;
use crate::manifest::DEFAULT_PICTURE_WIDTH;

/// Most output files a run may write (a guard against a mistyped interval).
pub const MAX_OUTPUTS: usize = 100_000;

/// Default budget of time steps a run's settings may imply (fixed steps of `dt`, or at least
/// `end / dt_max` steps): every step keeps a row of the diagnostics table and of the plots'
/// history in memory (about 0.3 KiB for four species), so 10 million steps are a few GiB.
pub const DEFAULT_MAX_STEPS: u64 = 10_000_000;

/// Everything a run needs before its model is compiled and its plate meshed.
#[derive(Clone, Debug)]
pub struct RunSpec {
    /// The model file as the user named it (for messages and the manifest).
    pub model_file: String,
    /// Its text.
    pub model_text: String,
    /// Parameter overrides as `NAME=VALUE` texts, later ones winning.
    pub set: Vec<String>,
    /// Initial expressions and inoculation spots replacing the model's.
    pub initial: InitialOverrides,
    /// The plate.
    pub plate: PlateSpec,
    /// Meshing options (the inocula refine them when the run starts).
    pub mesh: MeshOptions,
    /// Solver settings.
    pub solver: StepperParams,
    /// End time.
    pub end: f64,
    /// Interval between written states.
    pub every: f64,
    /// Species or declared fields drawn as pictures.
    pub pictures: Vec<String>,
    /// Times of the pictures (empty: at every output time).
    pub picture_times: Vec<f64>,
    /// Width of the pictures in pixels.
    pub picture_width: u32,
    /// Fixed colour ranges `[low, high]` of pictures, by field (a shared scale across the
    /// series; values outside take the end colours). Fields not named here span their own
    /// values in each picture.
    pub picture_ranges: BTreeMap<String, [f64; 2]>,
    /// Fields drawn on a logarithmic colour scale.
    pub picture_log: Vec<String>,
    /// How .vtu arrays are stored.
    pub vtu: VtuEncoding,
    /// Name of the model's time unit, for titles.
    pub time_unit: String,
    /// File-name stem of the outputs.
    pub stem: String,
    /// Checkpoint every this many accepted steps as well (0: only at output times).
    pub checkpoint_steps: usize,
    /// Checkpoint after this many wall-clock minutes as well.
    pub checkpoint_minutes: Option<f64>,
    /// The command line that asked for the run (recorded in the manifest).
    pub command_line: Vec<String>,
    /// Most time steps the settings may imply ([`DEFAULT_MAX_STEPS`] unless raised).
    pub max_steps: u64,
}

impl RunSpec {
    /// A specification with default output settings: `end` with ten output intervals, no
    /// pictures, plain .vtu files, the stem `run`.
    pub fn new(
        model_file: impl Into<String>,
        model_text: impl Into<String>,
        plate: PlateSpec,
        mesh: MeshOptions,
        end: f64,
    ) -> Self {
        Self {
            model_file: model_file.into(),
            model_text: model_text.into(),
            set: Vec::new(),
            initial: InitialOverrides::default(),
            plate,
            mesh,
            solver: StepperParams::default(),
            end,
            every: end / 10.0,
            pictures: Vec::new(),
            picture_times: Vec::new(),
            picture_width: DEFAULT_PICTURE_WIDTH,
            picture_ranges: BTreeMap::new(),
            picture_log: Vec::new(),
            vtu: VtuEncoding::Base64,
            time_unit: String::new(),
            stem: "run".into(),
            checkpoint_steps: 0,
            checkpoint_minutes: None,
            command_line: Vec::new(),
            max_steps: DEFAULT_MAX_STEPS,
        }
    }

    /// Checks the settings that need neither the model nor the mesh; sorts and deduplicates
    /// the picture times.
    pub fn check(&mut self) -> Result<(), RunError> {
        positive("end", self.end)?;
        positive("every", self.every)?;
        let count = output_count(self.end, self.every);
        if count > MAX_OUTPUTS {
            return Err(RunError::input(format!(
                "every = {} gives {count} output files; choose a longer interval",
                self.every
            )));
        }
        self.check_steps()?;
        for &t in &self.picture_times {
            if !(t.is_finite() && (0.0..=self.end).contains(&t)) {
                return Err(RunError::input(format!(
                    "picture time {t}: picture times must lie between 0 and the end time {}",
                    self.end
                )));
            }
        }
        self.picture_times.sort_by(f64::total_cmp);
        self.picture_times.dedup();
        if !self.picture_times.is_empty() && self.pictures.is_empty() {
            return Err(RunError::input(
                "picture times are given but no field to draw: add --picture FIELD (or `pictures` in the run file)",
            ));
        }
        if let Some(m) = self.checkpoint_minutes {
            positive("checkpoint minutes", m)?;
        }
        if !(320..=8192).contains(&self.picture_width) {
            return Err(RunError::input(format!(
                "picture width {}: pictures are 320 to 8192 pixels wide",
                self.picture_width
            )));
        }
        check_picture_scales(&self.pictures, &self.picture_ranges, &mut self.picture_log)?;
        self.plate.check_numbers().map_err(RunError::input)?;
        Ok(())
    }
}

impl RunSpec {
    /// The fewest steps the solver settings allow to reach `end` (fixed steps of `dt`, or
    /// steps of at most `dt_max`) against the step budget.
    fn check_steps(&self) -> Result<(), RunError> {
        let s = &self.solver;
        let (what, dt) = match (s.adaptive, s.dt_initial, s.dt_max) {
            (false, Some(dt), _) => ("fixed steps of dt", dt),
            (_, _, Some(dt)) => ("steps of at most dt_max", dt),
            _ => return Ok(()),
        };
        let steps = (self.end / dt).ceil();
        if steps > self.max_steps as f64 {
            return Err(RunError::input(format!(
                "{what} = {dt} to end = {} take {steps:.0} steps, more than the budget of {} (each step keeps a row of diagnostics in memory); choose a longer step, or raise the budget with --max-steps (max_steps in a run file)",
                self.end, self.max_steps
            )));
        }
        Ok(())
    }
}

/// Ranges and log scales name drawn fields; a range is finite and increasing, and positive
/// for a log scale. Sorts and deduplicates `log`.
fn check_picture_scales(
    pictures: &[String],
    ranges: &BTreeMap<String, [f64; 2]>,
    log: &mut Vec<String>,
) -> Result<(), RunError> {
    log.sort();
    log.dedup();
    let drawn = |f: &String, what: &str| -> Result<(), RunError> {
        if pictures.contains(f) {
            Ok(())
        } else {
            Err(RunError::input(format!(
                "{what} {f}: `{f}` is not drawn; add --picture {f} (or `pictures` in the run file)"
            )))
        }
    };
    for (f, &[lo, hi]) in ranges {
        drawn(f, "range for")?;
        if !(lo.is_finite() && hi.is_finite() && lo < hi) {
            return Err(RunError::input(format!(
                "range for {f}: {lo} to {hi} is not a finite, increasing range"
            )));
        }
        if log.contains(f) && lo <= 0.0 {
            return Err(RunError::input(format!(
                "range for {f}: {lo} to {hi}: a log scale needs a positive range"
            )));
        }
    }
    for f in log.iter() {
        drawn(f, "log scale for")?;
    }
    Ok(())
}

impl RunSpec {
    /// Hex SHA-256 of everything that determines the run's results and files (not the command
    /// line): two specifications with the same fingerprint write the same folder.
    pub fn fingerprint(&self) -> String {
        let initial: std::collections::BTreeMap<String, String> = self
            .initial
            .expressions()
            .into_iter()
            .map(|(name, (expr, _))| (name, expr))
            .collect();
        let value = serde_json::json!({
            "model_text": self.model_text,
            "set": self.set,
            "initial": initial,
            "plate": self.plate,
            "mesh": self.mesh,
            "solver": self.solver,
            "end": self.end,
            "every": self.every,
            "pictures": self.pictures,
            "picture_times": self.picture_times,
            "picture_width": self.picture_width,
            "picture_ranges": self.picture_ranges,
            "picture_log": self.picture_log,
            "vtu": self.vtu,
            "time_unit": self.time_unit,
            "stem": self.stem,
            "checkpoint_steps": self.checkpoint_steps,
        });
        crate::manifest::sha256(&value.to_string())
    }

    /// Loads the model with the overrides and initial conditions (without compiling it): what
    /// a sweep checks for every point before it starts any. Returns the loaded model's
    /// declarations (parameters with their units, species, diagnostics).
    pub fn check_model(&self) -> Result<agarium_scripting::Declarations, RunError> {
        let overrides = agarium_scripting::Overrides::parse(&self.set).map_err(RunError::input)?;
        let mut model =
            agarium_scripting::Model::load(&self.model_file, &self.model_text, &overrides)
                .map_err(RunError::input)?;
        self.initial.apply(&mut model)?;
        Ok(model.decl)
    }
}

/// `v` when it is a positive finite number; `what` names it in the message.
pub fn positive(what: &str, v: f64) -> Result<f64, RunError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(RunError::input(format!(
            "{what} must be a positive number, got {v}"
        )))
    }
}

/// Output files (states after t = 0) a run to `end` writing every `every` has.
pub fn output_count(end: f64, every: f64) -> usize {
    (end / every - 1e-9).ceil().max(1.0) as usize
}

/// Output times t₀ + k·every up to `end`, the last one exactly `end`.
pub(crate) fn output_times(end: f64, every: f64) -> Vec<f64> {
    let count = output_count(end, every);
    (1..=count)
        .map(|k| if k == count { end } else { k as f64 * every })
        .collect()
}

/// A time the run stops at, and what it writes there.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Stop {
    pub t: f64,
    /// Number of the state file written here.
    pub state: Option<usize>,
    /// Number of the pictures drawn here.
    pub picture: Option<usize>,
}

/// Every stop after t = 0: the output times (states, and pictures unless `picture_times`
/// is given) merged with the picture times.
pub(crate) fn stops(end: f64, every: f64, picture_times: &[f64]) -> Vec<Stop> {
    let mut out: Vec<Stop> = output_times(end, every)
        .into_iter()
        .enumerate()
        .map(|(k, t)| Stop {
            t,
            state: Some(k + 1),
            picture: picture_times.is_empty().then_some(k + 1),
        })
        .collect();
    for (j, &t) in picture_times.iter().enumerate() {
        if t <= 0.0 {
            continue;
        }
        match out.iter_mut().find(|s| s.t == t) {
            Some(s) => s.picture = Some(j),
            None => out.push(Stop {
                t,
                state: None,
                picture: Some(j),
            }),
        }
    }
    out.sort_by(|a, b| a.t.total_cmp(&b.t));
    out
}

/// Number of the pictures at t = 0, if any are drawn there.
pub(crate) fn first_picture(picture_times: &[f64]) -> Option<usize> {
    if picture_times.is_empty() {
        Some(0)
    } else {
        picture_times.iter().position(|&t| t == 0.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn output_times_end_exactly_at_the_end() {
        assert_eq!(output_times(1.0, 0.25), vec![0.25, 0.5, 0.75, 1.0]);
        assert_eq!(
            output_times(1.0, 0.3),
            vec![0.3, 0.6, 0.8999999999999999, 1.0]
        );
        assert_eq!(output_times(1.0, 5.0), vec![1.0]);
    }

    #[test]
    fn picture_times_merge_into_the_stops() {
        let s = stops(1.0, 0.5, &[0.0, 0.25, 0.5]);
        let ts: Vec<f64> = s.iter().map(|s| s.t).collect();
        assert_eq!(ts, vec![0.25, 0.5, 1.0]);
        assert_eq!(s[0].state, None);
        assert_eq!(s[1].picture, Some(2));
        assert_eq!(s[2].picture, None);
        assert_eq!(first_picture(&[0.0, 0.25]), Some(0));
        assert_eq!(first_picture(&[0.25]), None);
    }
}
