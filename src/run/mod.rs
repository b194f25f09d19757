//! `agarium run` and `agarium resume`: mesh a plate, compile a model, integrate it in time,
//! write the output folder (states, series index, diagnostics, pictures, manifest,
//! checkpoints) and print a summary on stderr.

mod initial;
mod manifest;
mod outputs;
mod progress;
mod run_file;

use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::Instant;

use agarium_core::geometry::PlateSpec;
use agarium_core::linalg::{LinearParams, Method};
use agarium_core::mesh::{build_mesh, MeshError, MeshOptions, QualityReport};
use agarium_core::observe::{Diagnostics, DiagnosticsCsv, PvdIndex, StepFigures};
use agarium_core::problem::Problem;
use agarium_core::time::{
    Checkpoint, Control, Coupling, Outcome, Scheme, Simulation, StepperParams,
};
use agarium_scripting::{Model, Overrides};

use crate::error::CliError;
use crate::plate_args::{MeshingArgs, PlateArgs};
use agarium_core::output::VtuEncoding;
use initial::InitialOverrides;
use manifest::{now_unix, sha256, Manifest, MeshFigures, CHECKPOINT};
use outputs::{summary, write_pictures, write_state, History, CONSERVED_WARNING};
use progress::Progress;
use run_file::RunFile;

/// Exit code of a run interrupted by Ctrl-C (128 + SIGINT, common practice).
pub const EXIT_INTERRUPTED: i32 = 130;

/// Exit code of a run stopped at a suspected blow-up (not an error: a finding).
pub const EXIT_BLOWUP: i32 = 3;

/// Arguments of `agarium run`.
#[derive(clap::Args, Debug)]
pub struct RunArgs {
    /// The model file.
    pub model: Option<PathBuf>,
    /// Read the settings from a TOML run file; options given here override it.
    #[arg(long, value_name = "FILE")]
    pub run_file: Option<PathBuf>,
    #[command(flatten)]
    pub plate: PlateArgs,
    #[command(flatten)]
    pub meshing: MeshingArgs,
    /// Override a parameter (repeatable), e.g. `--set chi_0=2.5`.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// End time.
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    pub end: Option<f64>,
    /// Interval between written states [default: a tenth of --end].
    #[arg(long, value_name = "DT", allow_hyphen_values = true)]
    pub every: Option<f64>,
    /// Output folder [default: out/MODEL-NAME].
    #[arg(short, long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Time discretisation [default: bdf2].
    #[arg(long, value_enum)]
    pub scheme: Option<SchemeArg>,
    /// Highest order of `--scheme bdf` (1 to 5) [default: 5].
    #[arg(long, value_name = "K")]
    pub order_limit: Option<usize>,
    /// Species coupling within a step: full Newton, or one linear solve per species with
    /// the others lagged (cheaper on large meshes) [default: newton].
    #[arg(long, value_enum)]
    pub coupling: Option<CouplingArg>,
    /// Linear solver [default: auto].
    #[arg(long, value_enum)]
    pub linear: Option<LinearArg>,
    /// Relative tolerance of the local time error [default: 1e-3].
    #[arg(long, value_name = "TOL", allow_hyphen_values = true)]
    pub rtol: Option<f64>,
    /// Absolute tolerance of the local time error, species units [default: 1e-6].
    #[arg(long, value_name = "TOL", allow_hyphen_values = true)]
    pub atol: Option<f64>,
    /// First step (with --fixed-step: every step).
    #[arg(long, value_name = "DT", allow_hyphen_values = true)]
    pub dt: Option<f64>,
    /// Largest step.
    #[arg(long, value_name = "DT", allow_hyphen_values = true)]
    pub dt_max: Option<f64>,
    /// Fixed steps of --dt instead of error control.
    #[arg(long, requires = "dt")]
    pub fixed_step: bool,
    /// Write a picture of this species or declared field at every output time
    /// (MODEL-NAME_FIELD_0000.png, …); repeatable.
    #[arg(long = "picture", value_name = "FIELD")]
    pub pictures: Vec<String>,
    /// Draw the pictures at these times instead of at every output time (comma-separated
    /// or repeated); the run stops exactly there.
    #[arg(
        long = "picture-at",
        value_name = "T,…",
        value_delimiter = ',',
        allow_hyphen_values = true
    )]
    pub picture_at: Vec<f64>,
    /// Width of the pictures in pixels (320 to 8192; the height follows the plate)
    /// [default: 900].
    #[arg(long, value_name = "PX", value_parser = clap::value_parser!(u32).range(320..=8192))]
    pub picture_width: Option<u32>,
    /// Replace the model's initial condition of a species by an expression in x, y and the
    /// parameters, e.g. `--initial 'n=1.2'` (repeatable).
    #[arg(long = "initial", value_name = "NAME=EXPR")]
    pub initial: Vec<String>,
    /// Place an inoculation spot: `SPECIES@X,Y,RADIUS[,LEVEL[,disc|gaussian]]` (level
    /// default 1, disc default). The spots of a species replace its initial condition (they
    /// add to an --initial expression); the mesh is refined at each.
    #[arg(long = "inoculum", value_name = "SPOT", allow_hyphen_values = true)]
    pub inocula: Vec<String>,
    /// Compress the .vtu files with zlib, level 1 (fastest; the default, and for simulated
    /// fields as small as 9 within 1 %) to 9.
    #[arg(long, value_name = "LEVEL", num_args = 0..=1, default_missing_value = "1",
          value_parser = clap::value_parser!(u32).range(0..=9))]
    pub compress: Option<u32>,
    /// Name of the model's time unit, for picture titles.
    #[arg(long, value_name = "NAME")]
    pub time_unit: Option<String>,
    /// Also write a checkpoint every N accepted steps (one is always written at every output
    /// time and on Ctrl-C); 0 for none in between [default: 0].
    #[arg(long, value_name = "N")]
    pub checkpoint_every: Option<usize>,
    /// Also write a checkpoint whenever this many wall-clock minutes have passed since the
    /// last one (the trajectory does not depend on when checkpoints are taken).
    #[arg(long, value_name = "MINUTES")]
    pub checkpoint_minutes: Option<f64>,
    /// Print nothing but errors.
    #[arg(short, long)]
    pub quiet: bool,
}

/// `--scheme` values.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
pub enum SchemeArg {
    /// Variable-step BDF2 (second order).
    Bdf2,
    /// Backward Euler (first order).
    Euler,
    /// Variable-step, variable-order BDF (orders 1 to --order-limit, default 5).
    Bdf,
}

/// `--coupling` values.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
pub enum CouplingArg {
    /// Newton on all species together.
    Newton,
    /// Species one after another, others lagged.
    Lagged,
}

/// `--linear` values.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
pub enum LinearArg {
    /// Direct up to 20,000 unknowns, iterative above.
    Auto,
    /// Sparse LU.
    Direct,
    /// Preconditioned Krylov iteration.
    Iterative,
}

fn positive(flag: &str, v: f64) -> Result<f64, CliError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(CliError::input(format!(
            "{flag} must be a positive number, got {v}"
        )))
    }
}

impl RunArgs {
    /// Stepper settings: `base` (from a run file, or the defaults) with the options given on
    /// the command line applied.
    pub fn stepper(&self, base: StepperParams) -> Result<StepperParams, CliError> {
        let mut p = base;
        if let Some(s) = self.scheme {
            p.scheme = match s {
                SchemeArg::Bdf2 => Scheme::Bdf2,
                SchemeArg::Euler => Scheme::BackwardEuler,
                SchemeArg::Bdf => Scheme::Bdf,
            };
        }
        if let Some(k) = self.order_limit {
            if !(1..=agarium_core::time::BDF_MAX_ORDER).contains(&k) {
                return Err(CliError::input(format!(
                    "--order-limit must be between 1 and {}, got {k}",
                    agarium_core::time::BDF_MAX_ORDER
                )));
            }
            p.max_order = k;
        }
        if let Some(c) = self.coupling {
            p.coupling = match c {
                CouplingArg::Newton => Coupling::Newton,
                CouplingArg::Lagged => Coupling::Lagged,
            };
        }
        if let Some(l) = self.linear {
            p.linear = LinearParams {
                method: match l {
                    LinearArg::Auto => Method::Auto,
                    LinearArg::Direct => Method::Direct,
                    LinearArg::Iterative => Method::Iterative,
                },
                ..p.linear
            };
        }
        if let Some(v) = self.rtol {
            p.rtol = positive("--rtol", v)?;
        }
        if let Some(v) = self.atol {
            p.atol = positive("--atol", v)?;
        }
        if self.fixed_step {
            p.adaptive = false;
        }
        if let Some(dt) = self.dt {
            p.dt_initial = Some(positive("--dt", dt)?);
        }
        if let Some(dt) = self.dt_max {
            p.dt_max = Some(positive("--dt-max", dt)?);
        }
        Ok(p)
    }
}

/// Output times t₀ + k·every up to `end`, the last one exactly `end`.
fn output_times(end: f64, every: f64) -> Vec<f64> {
    let count = (end / every - 1e-9).ceil().max(1.0) as usize;
    (1..=count)
        .map(|k| if k == count { end } else { k as f64 * every })
        .collect()
}

/// A time the run stops at, and what it writes there.
#[derive(Clone, Copy, Debug, PartialEq)]
struct Stop {
    t: f64,
    /// Number of the state file written here.
    state: Option<usize>,
    /// Number of the pictures drawn here.
    picture: Option<usize>,
}

/// Every stop after t = 0: the output times (states, and pictures unless `picture_times`
/// is given) merged with the picture times.
fn stops(end: f64, every: f64, picture_times: &[f64]) -> Vec<Stop> {
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
fn first_picture(picture_times: &[f64]) -> Option<usize> {
    if picture_times.is_empty() {
        Some(0)
    } else {
        picture_times.iter().position(|&t| t == 0.0)
    }
}

/// Checks and sorts picture times within [0, end].
fn picture_times(mut times: Vec<f64>, end: f64) -> Result<Vec<f64>, CliError> {
    for &t in &times {
        if !(t.is_finite() && (0.0..=end).contains(&t)) {
            return Err(CliError::input(format!(
                "--picture-at {t}: picture times must lie between 0 and the end time {end}"
            )));
        }
    }
    times.sort_by(f64::total_cmp);
    times.dedup();
    Ok(times)
}

/// Arguments of `agarium resume`.
#[derive(clap::Args, Debug)]
pub struct ResumeArgs {
    /// Output folder of an interrupted run (holds run.json and checkpoint.bin).
    pub folder: PathBuf,
    /// Print nothing but errors.
    #[arg(short, long)]
    pub quiet: bool,
}

/// Everything a run needs, built from the command line or from a manifest.
struct Session {
    manifest: Manifest,
    dir: PathBuf,
    problem: Problem,
    mesh: Arc<agarium_core::mesh::Mesh>,
    stops: Vec<Stop>,
    quiet: bool,
    /// When the last checkpoint was written (for the wall-clock cadence).
    checkpointed: Instant,
}

/// Set by the Ctrl-C handler; the step loop stops after the current step.
static INTERRUPTED: AtomicBool = AtomicBool::new(false);

fn install_interrupt_handler() {
    // A second installation (tests calling twice in one process) is harmless to ignore.
    let _ = ctrlc::set_handler(|| INTERRUPTED.store(true, Ordering::SeqCst));
}

fn model_problem(
    file: &str,
    text: &str,
    set: &[String],
    initial: &InitialOverrides,
) -> Result<(Model, Problem), CliError> {
    let overrides = Overrides::parse(set).map_err(CliError::input)?;
    let mut model = Model::load(file, text, &overrides).map_err(CliError::input)?;
    initial.apply(&mut model)?;
    let compiled = model.compile().map_err(CliError::input)?;
    let problem = compiled.to_problem();
    Ok((model, problem))
}

fn mesh_of(
    spec: &PlateSpec,
    options: &MeshOptions,
) -> Result<(Arc<agarium_core::mesh::Mesh>, MeshFigures), CliError> {
    let built = build_mesh(spec, options).map_err(|e| match e {
        MeshError::Data(_) | MeshError::Triangulation(_) => CliError::failure(e),
        other => CliError::input(other),
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

/// Runs `agarium run`; returns the exit code of a completed run (0, 3 at a suspected
/// blow-up, 130 when interrupted).
pub fn run(args: &RunArgs) -> Result<i32, CliError> {
    let file = match &args.run_file {
        Some(p) => RunFile::read(p)?,
        None => RunFile::default(),
    };
    let model_path = args.model.clone().or(file.model.clone()).ok_or_else(|| {
        CliError::input("give the model file (MODEL, or `model` in the --run-file)")
    })?;
    let end = args
        .end
        .or(file.end)
        .ok_or_else(|| CliError::input("give the end time (--end, or `end` in the --run-file)"))?;
    let end = positive("--end", end)?;
    let every = positive("--every", args.every.or(file.every).unwrap_or(end / 10.0))?;
    let count = output_times(end, every).len();
    if count > 100_000 {
        return Err(CliError::input(format!(
            "--every {every} gives {count} output files; choose a longer interval"
        )));
    }
    let picture_times = picture_times(
        if args.picture_at.is_empty() {
            file.picture_times.clone()
        } else {
            args.picture_at.clone()
        },
        end,
    )?;
    let vtu = match args.compress.or(file.compress).unwrap_or(0) {
        0 => VtuEncoding::Base64,
        level => VtuEncoding::Zlib { level },
    };
    let initial = InitialOverrides::merge(
        file.initial_overrides.clone(),
        InitialOverrides::from_cli(&args.initial, &args.inocula)?,
    );
    let params = args.stepper(file.solver.clone().unwrap_or_default())?;
    let set = file.merged_set(&args.set);
    let pictures = if args.pictures.is_empty() {
        file.pictures.clone()
    } else {
        args.pictures.clone()
    };
    if !picture_times.is_empty() && pictures.is_empty() {
        return Err(CliError::input(
            "picture times are given but no field to draw: add --picture FIELD (or `pictures` in the run file)",
        ));
    }
    let time_unit = args
        .time_unit
        .clone()
        .or(file.time_unit.clone())
        .unwrap_or_default();
    let checkpoint_every = args.checkpoint_every.or(file.checkpoint_every).unwrap_or(0);
    let checkpoint_minutes = match args.checkpoint_minutes.or(file.checkpoint_minutes) {
        Some(m) => Some(positive("--checkpoint-minutes", m)?),
        None => None,
    };
    if !model_path.is_file() {
        return Err(CliError::input(format!(
            "{}: no such model file",
            model_path.display()
        )));
    }
    let model_file = model_path.display().to_string();
    let model_text = std::fs::read_to_string(&model_path)
        .map_err(|e| CliError::input(format!("{model_file}: {e}")))?;
    let (model, problem) = model_problem(&model_file, &model_text, &set, &initial)?;
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
    for p in &pictures {
        if !known.contains(&p.as_str()) {
            return Err(CliError::input(format!(
                "--picture {p}: the model has no species or field of that name (it has: {})",
                known.join(", ")
            )));
        }
    }
    // The plate and its mesh come from the command line when it names a plate, otherwise
    // from the run file; --size/--max-area and --spot given here refine a file's [mesh].
    let cli_plate = args.plate.plate.is_some() || args.plate.outline.is_some();
    let (spec, mut options) = match (&file.plate, cli_plate) {
        (Some(spec), false) => {
            let mut options = match &file.mesh {
                Some(m) => m.clone(),
                None => args.meshing.options(spec)?,
            };
            if args.meshing.size.is_some() || args.meshing.max_area.is_some() {
                options.size = args.meshing.options(spec)?.size;
            }
            if !args.meshing.spot.is_empty() {
                options.spots = args.meshing.options(spec)?.spots;
            }
            (spec.clone(), options)
        }
        _ => {
            let spec = args.plate.spec()?;
            let options = args.meshing.options(&spec)?;
            (spec, options)
        }
    };
    spec.check_numbers().map_err(CliError::input)?;
    initial.refine(&spec, &mut options)?;
    let (mesh, mesh_figures) = mesh_of(&spec, &options)?;
    initial.check_coverage(&mesh)?;
    let stem = model_path
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("run")
        .to_string();
    let dir = args
        .out
        .clone()
        .or(file.out.clone())
        .unwrap_or_else(|| PathBuf::from("out").join(&stem));
    let manifest = Manifest {
        tool: format!("agarium {}", env!("CARGO_PKG_VERSION")),
        command_line: std::env::args().collect(),
        model_file,
        model_sha256: sha256(&model_text),
        model_text,
        overrides: set,
        parameters: model
            .decl
            .params
            .iter()
            .map(|p| (p.name.clone(), p.value))
            .collect(),
        plate: spec,
        mesh: options,
        mesh_figures,
        solver: params,
        end,
        every,
        pictures,
        picture_times,
        picture_width: args
            .picture_width
            .or(file.picture_width)
            .unwrap_or(manifest::DEFAULT_PICTURE_WIDTH),
        initial: initial
            .expressions()
            .into_iter()
            .map(|(name, (expr, _))| (name, expr))
            .collect(),
        vtu,
        time_unit,
        stem,
        checkpoint_steps: checkpoint_every,
        checkpoint_minutes,
        threads: rayon_threads(),
        started_unix: now_unix(),
        finished_unix: None,
        exit: "running".into(),
        checkpoint_time: None,
        wall_seconds: None,
        output_seconds: None,
    };
    let session = Session {
        stops: stops(end, every, &manifest.picture_times),
        manifest,
        dir,
        problem,
        mesh,
        quiet: args.quiet,
        checkpointed: Instant::now(),
    };
    let sim = Simulation::new(
        session.problem.clone(),
        session.mesh.clone(),
        session.manifest.solver.clone(),
        0.0,
    )
    .map_err(|e| CliError::input(format!("{}: {e}", session.manifest.model_file)))?;
    std::fs::create_dir_all(&session.dir).map_err(|e| {
        CliError::failure(format!(
            "{}: cannot create folder: {e}",
            session.dir.display()
        ))
    })?;
    execute(session, sim, false)
}

/// Runs `agarium resume`.
pub fn resume(args: &ResumeArgs) -> Result<i32, CliError> {
    let dir = args.folder.clone();
    let manifest = Manifest::read(&dir)?;
    if sha256(&manifest.model_text) != manifest.model_sha256 {
        return Err(CliError::input(format!(
            "{}: the model text does not match its recorded hash",
            dir.join(manifest::MANIFEST).display()
        )));
    }
    let checkpoint = Checkpoint::read(&dir.join(CHECKPOINT)).map_err(CliError::input)?;
    let initial = InitialOverrides::recorded(
        &manifest.initial,
        &dir.join(manifest::MANIFEST).display().to_string(),
    );
    let (_, problem) = model_problem(
        &manifest.model_file,
        &manifest.model_text,
        &manifest.overrides,
        &initial,
    )?;
    let (mesh, figures) = mesh_of(&manifest.plate, &manifest.mesh)?;
    if figures != manifest.mesh_figures {
        return Err(CliError::failure(format!(
            "the mesh rebuilt from {} differs from the run's ({} vs {} nodes)",
            dir.join(manifest::MANIFEST).display(),
            figures.nodes,
            manifest.mesh_figures.nodes
        )));
    }
    let threads = rayon_threads();
    if threads != manifest.threads && !args.quiet {
        eprintln!(
            "note: the run used {} threads and this resume {threads}; the result may differ from an uninterrupted run in the last digits",
            manifest.threads
        );
    }
    let stops = stops(manifest.end, manifest.every, &manifest.picture_times);
    let sim = Simulation::restore(
        problem.clone(),
        mesh.clone(),
        manifest.solver.clone(),
        checkpoint,
    )
    .map_err(CliError::input)?;
    let session = Session {
        manifest,
        dir,
        problem,
        mesh,
        stops,
        quiet: args.quiet,
        checkpointed: Instant::now(),
    };
    execute(session, sim, true)
}

fn rayon_threads() -> usize {
    std::env::var("RAYON_NUM_THREADS")
        .ok()
        .and_then(|v| v.parse().ok())
        .filter(|&n| n > 0)
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
}

fn save_checkpoint(
    session: &mut Session,
    sim: &Simulation,
    csv: &DiagnosticsCsv,
) -> Result<(), CliError> {
    // Order matters for a kill at any moment: the table first (it may hold rows past the
    // checkpoint, which a resume drops), then the checkpoint, then the manifest naming it.
    csv.save().map_err(CliError::failure)?;
    sim.checkpoint()
        .write(&session.dir.join(CHECKPOINT))
        .map_err(CliError::failure)?;
    session.manifest.checkpoint_time = Some(sim.time());
    session.checkpointed = Instant::now();
    session.manifest.write(&session.dir)
}

/// The step loop shared by `run` and `resume`.
fn execute(mut session: Session, mut sim: Simulation, resumed: bool) -> Result<i32, CliError> {
    let started = Instant::now();
    install_interrupt_handler();
    let dir = session.dir.clone();
    let stem = session.manifest.stem.clone();
    let problem = session.problem.clone();
    let mesh = session.mesh.clone();
    let quiet = session.quiet;
    let vtu = session.manifest.vtu;
    // The start of the run (t = 0) is what conserved drifts are measured from: the fresh
    // simulation's own state, or on a resume recomputed from the (deterministic) initial
    // conditions.
    let start = if resumed {
        initial_diagnostics(&session)?
    } else {
        Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time())
            .map_err(CliError::failure)?
    };
    let csv_path = dir.join(format!("{stem}_diagnostics.csv"));
    let mut csv = DiagnosticsCsv::new(csv_path, sim.species_names(), &start);
    let mut pvd = PvdIndex::new();
    let t_now = sim.time();
    let mut history;
    // Wall time spent on outputs: diagnostics, states, pictures, plots, checkpoints, tables.
    let mut output_seconds = 0.0f64;
    if resumed {
        csv.reload_until(t_now).map_err(CliError::input)?;
        pvd = PvdIndex::read(&dir.join(format!("{stem}.pvd"))).map_err(CliError::input)?;
        pvd.truncate_after(t_now);
        history = History::from_rows(sim.species_names(), &start, &csv.values());
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
        history = History::new(sim.species_names(), &start);
        let clock = Instant::now();
        session.manifest.write(&dir)?;
        write_state(&dir, &stem, 0, &sim, &start, &mut pvd, vtu)?;
        if let Some(j) = first_picture(&session.manifest.picture_times) {
            write_pictures(&dir, &stem, j, &sim, &start, &session.manifest)?;
        }
        save_checkpoint(&mut session, &sim, &csv)?;
        output_seconds += clock.elapsed().as_secs_f64();
    }
    let end = session.manifest.end;
    if !quiet {
        eprintln!(
            "{}: {} species on {} nodes, {} triangles; {} t = {end} writing every {} into {}",
            session.manifest.model_file,
            problem.n_species(),
            mesh.num_nodes(),
            mesh.triangles.len(),
            if resumed {
                format!("resuming at t = {t_now:.6e}, to")
            } else {
                "to".to_string()
            },
            session.manifest.every,
            dir.display()
        );
    }
    let mut progress = Progress::new(t_now, end, quiet);
    let mut outcome = Outcome::Reached;
    let mut warned = false;
    let mut failure: Option<String> = None;
    let every_steps = session.manifest.checkpoint_steps;
    let every_seconds = session.manifest.checkpoint_minutes.map(|m| 60.0 * m);
    let stops = session.stops.clone();
    for stop in stops {
        let t = stop.t;
        if t <= t_now {
            continue;
        }
        // Advance to the output time; a cadence checkpoint stops the advance, is written
        // outside the observer, and the advance continues.
        loop {
            let mut since_checkpoint = 0usize;
            let mut wants_checkpoint = false;
            let checkpointed = session.checkpointed;
            let result = sim.advance_to(t, &mut |rep| {
                let clock = Instant::now();
                let state = rep.state.as_slice().unwrap_or(&[]);
                let d = match Diagnostics::evaluate(&problem, &mesh, state, rep.time) {
                    Ok(d) => d,
                    Err(e) => {
                        failure = Some(e.to_string());
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
                        progress.println(&format!(
                            "warning: `{name}` is declared conserved but drifted by {drift:.2e} (relative) by t = {:.6e}",
                            rep.time
                        ));
                    }
                }
                output_seconds += clock.elapsed().as_secs_f64();
                progress.step(rep.time, rep.dt);
                since_checkpoint += 1;
                if INTERRUPTED.load(Ordering::SeqCst) {
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
            csv.save().map_err(CliError::failure)?;
            output_seconds += clock.elapsed().as_secs_f64();
            if let Some(e) = failure.take() {
                progress.finish();
                let err = CliError::failure(format!("diagnostics: {e}"));
                return finish(&mut session, "error: diagnostics", Err(err));
            }
            outcome = match result {
                Ok(o) => o,
                Err(e) => {
                    progress.finish();
                    let msg = format!("{}: {e}", session.manifest.model_file);
                    return finish(
                        &mut session,
                        &format!("error: {e}"),
                        Err(CliError::failure(msg)),
                    );
                }
            };
            if outcome == Outcome::Stopped
                && wants_checkpoint
                && !INTERRUPTED.load(Ordering::SeqCst)
            {
                let clock = Instant::now();
                save_checkpoint(&mut session, &sim, &csv)?;
                output_seconds += clock.elapsed().as_secs_f64();
                continue;
            }
            break;
        }
        if INTERRUPTED.load(Ordering::SeqCst) && outcome == Outcome::Stopped {
            progress.finish();
            let d = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time())
                .map_err(CliError::failure)?;
            let mut scratch = PvdIndex::new();
            write_state(
                &dir,
                &format!("{stem}_interrupted"),
                0,
                &sim,
                &d,
                &mut scratch,
                vtu,
            )?;
            std::fs::remove_file(dir.join(format!("{stem}_interrupted.pvd"))).ok();
            save_checkpoint(&mut session, &sim, &csv)?;
            eprintln!(
                "interrupted at t = {:.6e}: state, checkpoint and manifest written; continue with `agarium resume {}`",
                sim.time(),
                dir.display()
            );
            return finish(&mut session, "interrupted", Ok(EXIT_INTERRUPTED));
        }
        let clock = Instant::now();
        let d = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time())
            .map_err(CliError::failure)?;
        if let Some(k) = stop.state {
            write_state(&dir, &stem, k, &sim, &d, &mut pvd, vtu)?;
        }
        if let Some(j) = stop.picture {
            write_pictures(&dir, &stem, j, &sim, &d, &session.manifest)?;
        }
        history.plot(&dir, &stem)?;
        save_checkpoint(&mut session, &sim, &csv)?;
        output_seconds += clock.elapsed().as_secs_f64();
        if !quiet {
            let s = sim.stats();
            progress.println(&format!(
                "  t = {:<12.6e} steps {:>6}  rejected {:>4}  dt {:.3e}",
                sim.time(),
                s.steps,
                s.rejected,
                sim.next_dt()
            ));
        }
        if outcome != Outcome::Reached {
            break;
        }
    }
    progress.finish();
    let last = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time())
        .map_err(CliError::failure)?;
    let wall = started.elapsed().as_secs_f64();
    session.manifest.wall_seconds = Some(wall);
    session.manifest.output_seconds = Some(output_seconds);
    if !quiet {
        summary(&sim, &start, &last, wall, output_seconds);
    }
    match outcome {
        Outcome::BlowUp(report) => {
            eprintln!("{}", report.describe());
            finish(&mut session, "blow-up", Ok(EXIT_BLOWUP))
        }
        _ => finish(&mut session, "reached", Ok(0)),
    }
}

/// Diagnostics of the initial state (t = 0) of the session's run.
fn initial_diagnostics(session: &Session) -> Result<Diagnostics, CliError> {
    let sim = Simulation::new(
        session.problem.clone(),
        session.mesh.clone(),
        session.manifest.solver.clone(),
        0.0,
    )
    .map_err(|e| CliError::input(format!("{}: {e}", session.manifest.model_file)))?;
    Diagnostics::evaluate(&session.problem, &session.mesh, sim.state_slice(), 0.0)
        .map_err(CliError::failure)
}

/// Records how the run ended in the manifest and passes `result` on.
fn finish(
    session: &mut Session,
    exit: &str,
    result: Result<i32, CliError>,
) -> Result<i32, CliError> {
    session.manifest.exit = exit.to_string();
    session.manifest.finished_unix = Some(now_unix());
    if let Err(e) = session.manifest.write(&session.dir) {
        eprintln!("warning: {}", e.message);
    }
    result
}
