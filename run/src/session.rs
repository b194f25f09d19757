//! A run from start (or resume) to its outcome: the step loop, the output schedule, the
//! checkpoints, the diagnostics table and the manifest of its folder.
//!
//! Kill-safety: at every output time the table is saved first (it may hold rows past the
//! checkpoint, which a resume drops), then the checkpoint, then the manifest naming it; every
//! file is written atomically, so a run killed at any moment can be resumed.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;

use agarium_core::mesh::{build_mesh, Mesh, MeshError, MeshOptions, QualityReport};
use agarium_core::observe::{Diagnostics, DiagnosticsCsv, PvdIndex, StepFigures};
use agarium_core::problem::Problem;
use agarium_core::time::{BlowupReport, Checkpoint, Control, Outcome, Simulation, Stats};
use agarium_scripting::{Model, Overrides};

use crate::error::RunError;
use crate::initial::InitialOverrides;
use crate::lock::FolderLock;
use crate::manifest::{self, now_unix, sha256, Manifest, MeshFigures, CHECKPOINT, MANIFEST_FORMAT};
use crate::outputs::{summary, write_pictures, write_state, History, CONSERVED_WARNING};
use crate::spec::{first_picture, output_count, positive, stops, RunSpec, Stop, MAX_OUTPUTS};

/// What a run tells its caller while it advances (progress bars, logs, sweep tables). Every
/// method has an empty default.
pub trait Observer {
    /// Once, before the first step.
    fn started(&mut self, _info: &Started) {}
    /// After every accepted step.
    fn step(&mut self, _t: f64, _dt: f64) {}
    /// After the files of an output time are written.
    fn output(&mut self, _t: f64, _stats: &Stats, _next_dt: f64) {}
    /// Something the user should know that does not stop the run.
    fn warning(&mut self, _message: &str) {}
}

/// An observer that ignores everything.
pub struct Silent;

impl Observer for Silent {}

/// What a run is about to do.
#[derive(Clone, Debug)]
pub struct Started {
    /// The model file as named.
    pub model_file: String,
    /// Species.
    pub species: usize,
    /// Mesh nodes.
    pub nodes: usize,
    /// Mesh triangles.
    pub triangles: usize,
    /// Time the run continues from (0 for a fresh run).
    pub t: f64,
    /// End time.
    pub end: f64,
    /// Output interval.
    pub every: f64,
    /// Output folder.
    pub dir: PathBuf,
    /// Whether the run continues from a checkpoint.
    pub resumed: bool,
}

/// How a run ended.
#[derive(Clone, Debug)]
pub enum Ended {
    /// The end time was reached.
    Reached,
    /// A suspected blow-up: the run stopped at the last accepted state (a finding, not an
    /// error).
    BlowUp(Box<BlowupReport>),
    /// The cancellation token was set: state, checkpoint and manifest are written and the
    /// run can be resumed.
    Interrupted,
    /// The solver or the diagnostics failed; the reason says why.
    Failed(String),
}

impl Ended {
    /// The word recorded in the manifest's `exit` field.
    pub fn word(&self) -> String {
        match self {
            Ended::Reached => "reached".into(),
            Ended::BlowUp(_) => "blow-up".into(),
            Ended::Interrupted => "interrupted".into(),
            Ended::Failed(reason) => format!("error: {reason}"),
        }
    }
}

/// The outcome of a run with its figures.
#[derive(Clone, Debug)]
pub struct Finished {
    /// How it ended.
    pub ended: Ended,
    /// Time reached.
    pub time: f64,
    /// Solver figures.
    pub stats: Stats,
    /// Species names in model order (the order of the diagnostics' species).
    pub species_names: Vec<String>,
    /// Diagnostics at t = 0.
    pub start: Diagnostics,
    /// Diagnostics of the last state (`None` when they could not be evaluated, after a
    /// failure).
    pub last: Option<Diagnostics>,
    /// Wall seconds of this advance.
    pub wall_seconds: f64,
    /// Seconds of `wall_seconds` spent writing outputs.
    pub output_seconds: f64,
    /// The summary table (several lines) as `agarium run` prints it (empty without `last`).
    pub summary: String,
    /// The output folder.
    pub dir: PathBuf,
}

/// A run ready to advance: its folder, manifest, mesh, compiled problem and simulation.
pub struct Run {
    manifest: Manifest,
    dir: PathBuf,
    problem: Problem,
    mesh: Arc<Mesh>,
    stops: Vec<Stop>,
    sim: Simulation,
    resumed: bool,
    notes: Vec<String>,
    /// When the last checkpoint was written (for the wall-clock cadence).
    checkpointed: Instant,
    /// The folder's lock, held until the run value is dropped.
    _lock: FolderLock,
}

/// Compiles the model text with the overrides and initial conditions.
pub(crate) fn model_problem(
    file: &str,
    text: &str,
    set: &[String],
    initial: &InitialOverrides,
) -> Result<(Model, Problem), RunError> {
    let overrides = Overrides::parse(set).map_err(RunError::input)?;
    let mut model = Model::load(file, text, &overrides).map_err(RunError::input)?;
    initial.apply(&mut model)?;
    let compiled = model.compile().map_err(RunError::input)?;
    let problem = compiled.to_problem();
    Ok((model, problem))
}

/// Meshes the plate; geometry errors are the input's fault, triangulation failures are not.
pub fn mesh_of(
    spec: &agarium_core::geometry::PlateSpec,
    options: &MeshOptions,
) -> Result<(Arc<Mesh>, MeshFigures), RunError> {
    let built = build_mesh(spec, options).map_err(|e| match e {
        MeshError::Data(_) | MeshError::Triangulation(_) => RunError::failure(e),
        other => RunError::input(other),
    })?;
    let q = QualityReport::of_built(&built);
    let figures = MeshFigures {
        nodes: built.mesh.num_nodes(),
        triangles: built.mesh.triangles.len(),
        min_angle_deg: q.min_angle_deg,
        area: built.mesh.area(),
    };
    Ok((Arc::new(built.mesh), figures))
}

/// Worker threads of the rayon pool (recorded: results repeat bit for bit for the same count).
/// Inside a sweep's per-point pool, that pool's count.
pub fn rayon_threads() -> usize {
    rayon::current_num_threads()
}

/// The fingerprints a checkpoint carries, as (tag, what it covers, hash of the manifest's
/// values): a resume compares them with the manifest's, so an edited manifest or a checkpoint
/// of another run is refused naming what differs.
fn fingerprints(m: &Manifest) -> [(&'static str, &'static str, String); 4] {
    let parameters = serde_json::json!({
        "overrides": m.overrides,
        "parameters": m.parameters,
        "initial": m.initial,
    });
    let plate = serde_json::json!({
        "plate": m.plate,
        "mesh": m.mesh,
        "mesh_figures": m.mesh_figures,
    });
    let solver = serde_json::to_value(&m.solver).unwrap_or_default();
    [
        ("model", "model text", m.model_sha256.clone()),
        (
            "parameters",
            "parameters (overrides, values, initial conditions)",
            sha256(&parameters.to_string()),
        ),
        (
            "plate",
            "plate and mesh settings",
            sha256(&plate.to_string()),
        ),
        ("solver", "solver settings", sha256(&solver.to_string())),
    ]
}

/// The settings of a manifest a resume relies on, checked as `run` checks them.
fn check_manifest(m: &Manifest, path: &str) -> Result<(), RunError> {
    let at = |e: RunError| RunError::input(format!("{path}: {e}"));
    if m.format > MANIFEST_FORMAT {
        return Err(RunError::input(format!(
            "{path}: manifest format {} is newer than this agarium's ({MANIFEST_FORMAT}); resume with the agarium that wrote it ({})",
            m.format, m.tool
        )));
    }
    positive("end", m.end).map_err(at)?;
    positive("every", m.every).map_err(at)?;
    let count = output_count(m.end, m.every);
    if count > MAX_OUTPUTS {
        return Err(RunError::input(format!(
            "{path}: every = {} gives {count} output files (at most {MAX_OUTPUTS})",
            m.every
        )));
    }
    for &t in &m.picture_times {
        if !(t.is_finite() && (0.0..=m.end).contains(&t)) {
            return Err(RunError::input(format!(
                "{path}: picture time {t} is not between 0 and the end time {}",
                m.end
            )));
        }
    }
    if let Some(minutes) = m.checkpoint_minutes {
        positive("checkpoint_minutes", minutes).map_err(at)?;
    }
    Ok(())
}

impl Run {
    /// Checks `spec`, compiles its model, meshes its plate and prepares the folder `dir`
    /// (created if missing). Nothing is written into it before [`Run::advance`].
    pub fn start(mut spec: RunSpec, dir: &Path) -> Result<Self, RunError> {
        spec.check()?;
        let (model, problem) =
            model_problem(&spec.model_file, &spec.model_text, &spec.set, &spec.initial)?;
        let known: Vec<&str> = problem
            .species
            .iter()
            .map(|s| s.name.as_str())
            .chain(
                problem
                    .diagnostics
                    .iter()
                    .filter(|d| !d.integral)
                    .map(|d| d.name.as_str()),
            )
            .collect();
        for p in &spec.pictures {
            if !known.contains(&p.as_str()) {
                return Err(RunError::input(format!(
                    "--picture {p}: the model has no species or field of that name (it has: {})",
                    known.join(", ")
                )));
            }
        }
        let mut options = spec.mesh.clone();
        spec.initial.refine(&spec.plate, &mut options)?;
        let (mesh, mesh_figures) = mesh_of(&spec.plate, &options)?;
        spec.initial.check_coverage(&mesh)?;
        let manifest = Manifest {
            format: MANIFEST_FORMAT,
            tool: format!("agarium {}", env!("CARGO_PKG_VERSION")),
            command_line: spec.command_line,
            model_file: spec.model_file,
            model_sha256: sha256(&spec.model_text),
            model_text: spec.model_text,
            overrides: spec.set,
            parameters: model
                .decl
                .params
                .iter()
                .map(|p| (p.name.clone(), p.value))
                .collect(),
            plate: spec.plate,
            mesh: options,
            mesh_figures,
            solver: spec.solver,
            end: spec.end,
            every: spec.every,
            pictures: spec.pictures,
            picture_times: spec.picture_times,
            picture_width: spec.picture_width,
            picture_ranges: spec.picture_ranges,
            picture_log: spec.picture_log,
            initial: spec
                .initial
                .expressions()
                .into_iter()
                .map(|(name, (expr, _))| (name, expr))
                .collect(),
            vtu: spec.vtu,
            time_unit: spec.time_unit,
            stem: spec.stem,
            checkpoint_steps: spec.checkpoint_steps,
            checkpoint_minutes: spec.checkpoint_minutes,
            threads: rayon_threads(),
            started_unix: now_unix(),
            finished_unix: None,
            exit: "running".into(),
            checkpoint_time: None,
            outputs_done: None,
            resumed_unix: Vec::new(),
            wall_seconds: None,
            output_seconds: None,
        };
        let sim = Simulation::new(problem.clone(), mesh.clone(), manifest.solver.clone(), 0.0)
            .map_err(|e| RunError::input(format!("{}: {e}", manifest.model_file)))?;
        std::fs::create_dir_all(dir).map_err(|e| {
            RunError::failure(format!("{}: cannot create folder: {e}", dir.display()))
        })?;
        let lock = FolderLock::acquire(dir)?;
        Ok(Self::ready(
            manifest,
            dir,
            problem,
            mesh,
            sim,
            Vec::new(),
            lock,
        ))
    }

    /// Rebuilds the run of folder `dir` from its manifest and continues from its checkpoint.
    /// Takes the folder's lock, removes the temporary files a killed run left, and refuses a
    /// manifest or checkpoint that was edited, damaged or belongs to another run.
    pub fn resume(dir: &Path) -> Result<Self, RunError> {
        // The manifest is read once before locking so that a folder that is no run's is
        // refused without creating a lock file in it.
        Manifest::read(dir)?;
        let lock = FolderLock::acquire(dir)?;
        lock.remove_leftovers()?;
        let mut manifest = Manifest::read(dir)?;
        let manifest_path = dir.join(manifest::MANIFEST).display().to_string();
        let checkpoint_path = dir.join(CHECKPOINT).display().to_string();
        check_manifest(&manifest, &manifest_path)?;
        if sha256(&manifest.model_text) != manifest.model_sha256 {
            return Err(RunError::input(format!(
                "{manifest_path}: the model text does not match its recorded hash"
            )));
        }
        let checkpoint = Checkpoint::read(&dir.join(CHECKPOINT)).map_err(RunError::input)?;
        let differs: Vec<&str> = fingerprints(&manifest)
            .into_iter()
            .filter(|(name, _, hash)| checkpoint.tags().get(*name) != Some(hash))
            .map(|(_, what, _)| what)
            .collect();
        if !differs.is_empty() {
            return Err(RunError::input(format!(
                "{checkpoint_path} does not belong to the run of {manifest_path}: the {} differ (an edited run.json, or a checkpoint of another run)",
                differs.join(", ")
            )));
        }
        if checkpoint.time() > manifest.end {
            return Err(RunError::input(format!(
                "{manifest_path}: end = {} is before the checkpoint's time {} (was run.json edited?)",
                manifest.end,
                checkpoint.time()
            )));
        }
        let initial = InitialOverrides::recorded(&manifest.initial, &manifest_path);
        let (model, problem) = model_problem(
            &manifest.model_file,
            &manifest.model_text,
            &manifest.overrides,
            &initial,
        )?;
        for p in &model.decl.params {
            let recorded = manifest.parameters.iter().find(|(n, _)| *n == p.name);
            if recorded.map(|r| r.1.to_bits()) != Some(p.value.to_bits()) {
                return Err(RunError::input(format!(
                    "{manifest_path}: parameter `{}` is recorded as {} but the recorded model text and overrides give {} (was run.json edited?)",
                    p.name,
                    recorded.map_or("nothing".to_string(), |r| r.1.to_string()),
                    p.value
                )));
            }
        }
        if manifest.parameters.len() != model.decl.params.len() {
            return Err(RunError::input(format!(
                "{manifest_path}: {} parameters are recorded but the model declares {} (was run.json edited?)",
                manifest.parameters.len(),
                model.decl.params.len()
            )));
        }
        let (mesh, figures) = mesh_of(&manifest.plate, &manifest.mesh)?;
        if figures != manifest.mesh_figures {
            return Err(RunError::input(format!(
                "{manifest_path}: the mesh rebuilt from its plate and mesh settings differs from the run's ({} vs {} nodes, {} vs {} triangles)",
                figures.nodes,
                manifest.mesh_figures.nodes,
                figures.triangles,
                manifest.mesh_figures.triangles
            )));
        }
        let mut notes = Vec::new();
        let threads = rayon_threads();
        if threads != manifest.threads {
            notes.push(format!(
                "note: the run used {} threads and this resume {threads}; the result may differ from an uninterrupted run in the last digits",
                manifest.threads
            ));
        }
        let sim = Simulation::restore(
            problem.clone(),
            mesh.clone(),
            manifest.solver.clone(),
            checkpoint,
        )
        .map_err(|e| RunError::input(format!("{checkpoint_path}: {e}")))?;
        manifest.format = MANIFEST_FORMAT;
        manifest.resumed_unix.push(now_unix());
        Ok(Self::ready(manifest, dir, problem, mesh, sim, notes, lock))
    }

    /// A run of `manifest` ready to advance in `dir`.
    fn ready(
        manifest: Manifest,
        dir: &Path,
        problem: Problem,
        mesh: Arc<Mesh>,
        sim: Simulation,
        notes: Vec<String>,
        lock: FolderLock,
    ) -> Self {
        // A resume records itself in the manifest before the run is ready.
        let resumed = !manifest.resumed_unix.is_empty();
        Self {
            stops: stops(manifest.end, manifest.every, &manifest.picture_times),
            manifest,
            dir: dir.to_path_buf(),
            problem,
            mesh,
            sim,
            resumed,
            notes,
            checkpointed: Instant::now(),
            _lock: lock,
        }
    }

    /// The manifest as it stands (written into the folder at the first output).
    pub fn manifest(&self) -> &Manifest {
        &self.manifest
    }

    /// The mesh.
    pub fn mesh(&self) -> &Mesh {
        &self.mesh
    }

    /// Notes for the user from preparing the run (for example a changed thread count).
    pub fn notes(&self) -> &[String] {
        &self.notes
    }

    fn save_checkpoint(&mut self, csv: &DiagnosticsCsv) -> Result<(), RunError> {
        csv.save().map_err(RunError::failure)?;
        let mut checkpoint = self.sim.checkpoint();
        for (name, _, hash) in fingerprints(&self.manifest) {
            checkpoint = checkpoint.tag(name, hash);
        }
        checkpoint
            .write(&self.dir.join(CHECKPOINT))
            .map_err(RunError::failure)?;
        self.manifest.checkpoint_time = Some(self.sim.time());
        self.checkpointed = Instant::now();
        self.manifest.write(&self.dir)
    }

    /// Diagnostics of the run's initial state (t = 0), recomputed from the deterministic
    /// initial conditions.
    fn initial_diagnostics(&self) -> Result<Diagnostics, RunError> {
        let sim = Simulation::new(
            self.problem.clone(),
            self.mesh.clone(),
            self.manifest.solver.clone(),
            0.0,
        )
        .map_err(|e| RunError::input(format!("{}: {e}", self.manifest.model_file)))?;
        Diagnostics::evaluate(&self.problem, &self.mesh, sim.state_slice(), 0.0)
            .map_err(RunError::failure)
    }

    /// Advances to the end time (or a blow-up, a failure, or `cancel`), writing the folder's
    /// files on the way. Errors are what stops the run from recording its outcome (a file
    /// that cannot be written, a folder that is not this run's); a solver failure is an
    /// [`Ended::Failed`] outcome, recorded in the manifest.
    pub fn advance(
        mut self,
        cancel: &AtomicBool,
        observer: &mut dyn Observer,
    ) -> Result<Finished, RunError> {
        let started = Instant::now();
        match self.advance_files(cancel, observer) {
            Ok((ended, start, output_seconds)) => {
                self.finish(ended, &start, started, output_seconds)
            }
            Err(e) => {
                // A file that could not be written ends the run; the manifest says so rather
                // than `running` (best effort: it may be the manifest that cannot be written).
                if self.dir.join(manifest::MANIFEST).exists() {
                    self.manifest.exit = format!("error: {}", e.message);
                    self.manifest.finished_unix = Some(now_unix());
                    self.manifest.wall_seconds = Some(started.elapsed().as_secs_f64());
                    let _ = self.manifest.write(&self.dir);
                }
                Err(e)
            }
        }
    }

    /// The step loop of [`Run::advance`] and the files it writes; returns how the run ended,
    /// the diagnostics at t = 0 and the seconds spent on outputs.
    fn advance_files(
        &mut self,
        cancel: &AtomicBool,
        observer: &mut dyn Observer,
    ) -> Result<(Ended, Diagnostics, f64), RunError> {
        let dir = self.dir.clone();
        let stem = self.manifest.stem.clone();
        let problem = self.problem.clone();
        let mesh = self.mesh.clone();
        let vtu = self.manifest.vtu;
        let resumed = self.resumed;
        let start = if resumed {
            self.initial_diagnostics()?
        } else {
            Diagnostics::evaluate(&problem, &mesh, self.sim.state_slice(), self.sim.time())
                .map_err(RunError::failure)?
        };
        let csv_path = dir.join(format!("{stem}_diagnostics.csv"));
        let mut csv = DiagnosticsCsv::new(csv_path, self.sim.species_names(), &start);
        let mut pvd = PvdIndex::new();
        let t_now = self.sim.time();
        let mut history;
        // Wall time spent on outputs: diagnostics, states, pictures, plots, checkpoints.
        let mut output_seconds = 0.0f64;
        if resumed {
            csv.reload_until(t_now).map_err(RunError::input)?;
            pvd = PvdIndex::read(&dir.join(format!("{stem}.pvd"))).map_err(RunError::input)?;
            pvd.truncate_after(t_now);
            history = History::from_rows(self.sim.species_names(), &start, csv.rows());
        } else {
            csv.push(
                StepFigures {
                    t: 0.0,
                    dt: 0.0,
                    newton: 0,
                    rejections: 0,
                },
                &start,
            );
            history = History::new(self.sim.species_names(), &start);
            let clock = Instant::now();
            self.manifest.write(&dir)?;
            write_state(&dir, &stem, 0, &self.sim, &start, &mut pvd, vtu)?;
            if let Some(j) = first_picture(&self.manifest.picture_times) {
                write_pictures(&dir, &stem, j, &self.sim, &start, &self.manifest)?;
            }
            self.manifest.outputs_done = Some(0.0);
            self.save_checkpoint(&csv)?;
            output_seconds += clock.elapsed().as_secs_f64();
        }
        observer.started(&Started {
            model_file: self.manifest.model_file.clone(),
            species: problem.n_species(),
            nodes: mesh.num_nodes(),
            triangles: mesh.triangles.len(),
            t: t_now,
            end: self.manifest.end,
            every: self.manifest.every,
            dir: dir.clone(),
            resumed,
        });
        let mut outcome = Outcome::Reached;
        let mut warned = false;
        let mut failure: Option<String> = None;
        let every_steps = self.manifest.checkpoint_steps;
        let every_seconds = self.manifest.checkpoint_minutes.map(|m| 60.0 * m);
        let cancelled = || cancel.load(Ordering::SeqCst);
        let stops = self.stops.clone();
        let outputs_done = self.manifest.outputs_done;
        for stop in stops {
            let t = stop.t;
            // A checkpoint can land on an output time before its files are written (a step
            // checkpoint, then a kill): such a stop is still to do.
            if t < t_now || (t == t_now && outputs_done.is_some_and(|d| d >= t)) {
                continue;
            }
            // Advance to the output time; a cadence checkpoint stops the advance, is written
            // outside the step observer, and the advance continues.
            loop {
                let mut since_checkpoint = 0usize;
                let mut wants_checkpoint = false;
                let checkpointed = self.checkpointed;
                let result = self.sim.advance_to(t, &mut |rep| {
                    let clock = Instant::now();
                    let state = rep.state.as_slice().unwrap_or(&[]);
                    let d = match Diagnostics::evaluate(&problem, &mesh, state, rep.time) {
                        Ok(d) => d,
                        Err(e) => {
                            failure = Some(format!("diagnostics: {e}"));
                            return Control::Stop;
                        }
                    };
                    history.push(rep.time, rep.dt, &d);
                    let drifts = csv.push(
                        StepFigures {
                            t: rep.time,
                            dt: rep.dt,
                            newton: rep.newton_iterations,
                            rejections: rep.rejections,
                        },
                        &d,
                    );
                    for (name, drift) in drifts {
                        if drift > CONSERVED_WARNING && !warned {
                            warned = true;
                            observer.warning(&format!(
                                "warning: `{name}` is declared conserved but drifted by {drift:.2e} (relative) by t = {:.6e}",
                                rep.time
                            ));
                        }
                    }
                    output_seconds += clock.elapsed().as_secs_f64();
                    observer.step(rep.time, rep.dt);
                    since_checkpoint += 1;
                    if cancelled() {
                        return Control::Stop;
                    }
                    let due = every_seconds
                        .is_some_and(|s| checkpointed.elapsed().as_secs_f64() >= s);
                    if due || (every_steps > 0 && since_checkpoint >= every_steps) {
                        wants_checkpoint = true;
                        return Control::Stop;
                    }
                    Control::Continue
                });
                // Whatever happened, the table so far is kept.
                let clock = Instant::now();
                csv.save().map_err(RunError::failure)?;
                output_seconds += clock.elapsed().as_secs_f64();
                if let Some(reason) = failure.take() {
                    return Ok((Ended::Failed(reason), start, output_seconds));
                }
                outcome = match result {
                    Ok(o) => o,
                    Err(e) => {
                        let reason = e.to_string();
                        return Ok((Ended::Failed(reason), start, output_seconds));
                    }
                };
                if outcome == Outcome::Stopped && wants_checkpoint && !cancelled() {
                    let clock = Instant::now();
                    self.save_checkpoint(&csv)?;
                    output_seconds += clock.elapsed().as_secs_f64();
                    if self.sim.time() == t
                        && agarium_core::fault::at("exit-after-output-time-checkpoint")
                    {
                        std::process::exit(86);
                    }
                    continue;
                }
                break;
            }
            if cancelled() && outcome == Outcome::Stopped {
                let d =
                    Diagnostics::evaluate(&problem, &mesh, self.sim.state_slice(), self.sim.time())
                        .map_err(RunError::failure)?;
                let mut scratch = PvdIndex::new();
                write_state(
                    &dir,
                    &format!("{stem}_interrupted"),
                    0,
                    &self.sim,
                    &d,
                    &mut scratch,
                    vtu,
                )?;
                std::fs::remove_file(dir.join(format!("{stem}_interrupted.pvd"))).ok();
                self.save_checkpoint(&csv)?;
                return Ok((Ended::Interrupted, start, output_seconds));
            }
            let clock = Instant::now();
            let d = Diagnostics::evaluate(&problem, &mesh, self.sim.state_slice(), self.sim.time())
                .map_err(RunError::failure)?;
            if let Some(k) = stop.state {
                write_state(&dir, &stem, k, &self.sim, &d, &mut pvd, vtu)?;
            }
            if let Some(j) = stop.picture {
                write_pictures(&dir, &stem, j, &self.sim, &d, &self.manifest)?;
            }
            history.plot(&dir, &stem)?;
            self.manifest.outputs_done = Some(self.sim.time());
            self.save_checkpoint(&csv)?;
            output_seconds += clock.elapsed().as_secs_f64();
            observer.output(self.sim.time(), &self.sim.stats(), self.sim.next_dt());
            if outcome != Outcome::Reached {
                break;
            }
        }
        let ended = match outcome {
            Outcome::BlowUp(report) => Ended::BlowUp(report),
            _ => Ended::Reached,
        };
        Ok((ended, start, output_seconds))
    }

    /// Records how the run ended in the manifest and gathers the figures.
    fn finish(
        mut self,
        ended: Ended,
        start: &Diagnostics,
        started: Instant,
        output_seconds: f64,
    ) -> Result<Finished, RunError> {
        let last = Diagnostics::evaluate(
            &self.problem,
            &self.mesh,
            self.sim.state_slice(),
            self.sim.time(),
        );
        let last = match (last, &ended) {
            (Ok(d), _) => Some(d),
            (Err(_), Ended::Failed(_)) => None,
            (Err(e), _) => return Err(RunError::failure(e)),
        };
        let wall = started.elapsed().as_secs_f64();
        self.manifest.wall_seconds = Some(wall);
        self.manifest.output_seconds = Some(output_seconds);
        self.manifest.exit = ended.word();
        self.manifest.finished_unix = Some(now_unix());
        self.manifest.write(&self.dir)?;
        Ok(Finished {
            summary: last
                .as_ref()
                .map(|l| summary(&self.sim, start, l, wall, output_seconds))
                .unwrap_or_default(),
            ended,
            time: self.sim.time(),
            stats: self.sim.stats(),
            species_names: self.sim.species_names().to_vec(),
            start: start.clone(),
            last,
            wall_seconds: wall,
            output_seconds,
            dir: self.dir,
        })
    }
}
