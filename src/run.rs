//! `agarium run` and `agarium resume`: the command line's settings and a run file become a
//! [`RunSpec`], which `agarium-run` starts (or resumes from a folder) and advances while a
//! progress bar or log lines show how far it is; the outcome becomes the summary on stderr
//! and the exit code.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};

use agarium_core::linalg::{LinearParams, Method};
use agarium_core::output::VtuEncoding;
use agarium_core::time::{Coupling, Scheme, Stats, StepperParams};
use agarium_run::{
    positive as positive_value, Ended, Finished, InitialOverrides, Observer, Run, RunError,
    RunFile, RunSpec, Started, DEFAULT_PICTURE_WIDTH,
};

use crate::error::CliError;
use crate::plate_args::{MeshingArgs, PlateArgs};
use crate::progress::Progress;

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
    /// A fixed colour range for the pictures of a field, shared by the whole series (values
    /// outside take the end colours), e.g. `--range u=0:2`; repeatable.
    #[arg(
        long = "range",
        value_name = "FIELD=LOW:HIGH",
        allow_hyphen_values = true
    )]
    pub ranges: Vec<String>,
    /// Draw this field's pictures on a logarithmic colour scale (values at or below the low
    /// end, zero included, take the first colour; without --range the top 6 decades);
    /// repeatable.
    #[arg(long = "log-scale", value_name = "FIELD")]
    pub log_scale: Vec<String>,
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
    /// Most time steps the solver settings may imply (fixed steps of --dt, or at least
    /// END / --dt-max steps); a run beyond it is refused before it starts, since every step
    /// keeps a row of diagnostics in memory [default: 10000000].
    #[arg(long, value_name = "N", value_parser = clap::value_parser!(u64).range(1..))]
    pub max_steps: Option<u64>,
    /// Print nothing but errors.
    #[arg(short, long)]
    pub quiet: bool,
    /// Run into an output folder that is not empty: first remove the files a run writes
    /// there (`run.json`, `checkpoint.bin`, the states, series index, table, pictures and
    /// plots of the previous run's model and this one's); other files stay. Without it,
    /// `run` refuses a non-empty folder, so two runs never mix (a sweep instead continues
    /// its folder).
    #[arg(long)]
    pub overwrite: bool,
}

/// `--scheme` values.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
pub enum SchemeArg {
    /// Variable-step BDF2 (second order).
    Bdf2,
    /// Backward Euler (first order).
    #[value(alias = "backward-euler")]
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
    positive_value(flag, v).map_err(CliError::from)
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

/// Arguments of `agarium resume`.
#[derive(clap::Args, Debug)]
pub struct ResumeArgs {
    /// Output folder of an interrupted run (holds run.json and checkpoint.bin).
    pub folder: PathBuf,
    /// Print nothing but errors.
    #[arg(short, long)]
    pub quiet: bool,
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

/// The run the command line (and its run file) asks for, the output folder named by either
/// (if any), and the run file's contents.
pub fn spec_of(args: &RunArgs) -> Result<(RunSpec, Option<PathBuf>, RunFile), CliError> {
    spec_with_end(args, None)
}

/// [`spec_of`] for commands that do not integrate in time: `fallback_end` stands in when
/// neither the options nor the run file give an end time.
pub fn spec_with_end(
    args: &RunArgs,
    fallback_end: Option<f64>,
) -> Result<(RunSpec, Option<PathBuf>, RunFile), CliError> {
    let file = match &args.run_file {
        Some(p) => RunFile::read(p)?,
        None => RunFile::default(),
    };
    let model_path = args.model.clone().or(file.model.clone()).ok_or_else(|| {
        CliError::input("give the model file (MODEL, or `model` in the --run-file)")
    })?;
    let end =
        args.end.or(file.end).or(fallback_end).ok_or_else(|| {
            CliError::input("give the end time (--end, or `end` in the --run-file)")
        })?;
    let end = positive("--end", end)?;
    let every = positive("--every", args.every.or(file.every).unwrap_or(end / 10.0))?;
    let count = agarium_run::output_count(end, every);
    if count > agarium_run::MAX_OUTPUTS {
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
    let solver = args.stepper(file.solver.clone().unwrap_or_default())?;
    let set = file.merged_set(&args.set);
    let pictures = if args.pictures.is_empty() {
        file.pictures.clone()
    } else {
        args.pictures.clone()
    };
    let mut picture_ranges = file.range.clone();
    for r in &args.ranges {
        let (field, range) = parse_range(r)?;
        picture_ranges.insert(field, range);
    }
    let picture_log = if args.log_scale.is_empty() {
        file.log_scale.clone()
    } else {
        args.log_scale.clone()
    };
    let time_unit = args
        .time_unit
        .clone()
        .or(file.time_unit.clone())
        .unwrap_or_default();
    let checkpoint_steps = args.checkpoint_every.or(file.checkpoint_every).unwrap_or(0);
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
    let stem = model_path
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("run")
        .to_string();
    let dir = args.out.clone().or(file.out.clone());
    // Before anything is written (a photograph's overlay is, while the plate is resolved):
    // the output folder must be one files can be made in.
    let out_dir = dir
        .clone()
        .unwrap_or_else(|| PathBuf::from("out").join(&stem));
    agarium_core::output::check_folder_writable(&out_dir)
        .map_err(|e| CliError::failure(format!("output folder (-o): {e}")))?;
    let model_file = model_path.display().to_string();
    let model_text = std::fs::read_to_string(&model_path)
        .map_err(|e| CliError::input(format!("{model_file}: {e}")))?;
    // The plate and its mesh come from the command line when it names a plate, otherwise
    // from the run file; --size/--largest-triangle and --spot given here refine a file's [mesh].
    let cli_plate = args.plate.names_a_plate();
    let (plate, mesh) = match (&file.plate, cli_plate) {
        (Some(source), false) => {
            let spec = &source.resolve()?.spec;
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
    let spec = RunSpec {
        model_file,
        model_text,
        set,
        initial,
        plate,
        mesh,
        solver,
        end,
        every,
        pictures,
        picture_times,
        picture_width: args
            .picture_width
            .or(file.picture_width)
            .unwrap_or(DEFAULT_PICTURE_WIDTH),
        picture_ranges,
        picture_log,
        vtu,
        time_unit,
        stem,
        checkpoint_steps,
        checkpoint_minutes,
        // `std::env::args` panics on an argument that is not UTF-8 (a path may be any bytes).
        command_line: std::env::args_os()
            .map(|a| a.to_string_lossy().into_owned())
            .collect(),
        max_steps: args
            .max_steps
            .or(file.max_steps)
            .unwrap_or(agarium_run::DEFAULT_MAX_STEPS),
    };
    Ok((spec, dir, file))
}

/// `LOW:HIGH` as two numbers, or why not (shared by `--range`, `--scan` and `--k2`).
pub fn low_high(text: &str) -> Result<(f64, f64), String> {
    let (lo, hi) = text.split_once(':').ok_or("no `:` between the two ends")?;
    let num = |v: &str| {
        v.trim()
            .parse::<f64>()
            .map_err(|_| format!("`{v}` is not a number"))
    };
    Ok((num(lo)?, num(hi)?))
}

/// `FIELD=LOW:HIGH` of `--range`.
fn parse_range(text: &str) -> Result<(String, [f64; 2]), CliError> {
    let bad = |why: &str| {
        CliError::input(format!(
            "--range {text}: {why} (expected FIELD=LOW:HIGH, e.g. u=0:2)"
        ))
    };
    let (field, range) = text.split_once('=').ok_or_else(|| bad("no `=`"))?;
    let field = field.trim();
    if field.is_empty() {
        return Err(bad("no field name"));
    }
    let (lo, hi) = low_high(range).map_err(|why| bad(&why))?;
    Ok((field.to_string(), [lo, hi]))
}

/// Set by the Ctrl-C handler (also SIGTERM, which a batch scheduler sends before it kills a
/// job at its time limit, and SIGHUP); runs stop after the current step.
static INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// Lets Ctrl-C and SIGTERM stop runs cleanly (a checkpoint is written) instead of killing them.
pub fn interrupt_flag() -> &'static AtomicBool {
    // A second installation (tests calling twice in one process) is harmless to ignore.
    let _ = ctrlc::set_handler(|| INTERRUPTED.store(true, Ordering::SeqCst));
    &INTERRUPTED
}

/// The terminal side of a run: the bar (or log lines) and the lines at output times.
struct Terminal {
    progress: Option<Progress>,
    quiet: bool,
}

impl Observer for Terminal {
    fn started(&mut self, info: &Started) {
        if !self.quiet {
            eprintln!(
                "{}: {} species on {} nodes, {} triangles; {} t = {} writing every {} into {}",
                info.model_file,
                info.species,
                info.nodes,
                info.triangles,
                if info.resumed {
                    format!("resuming at t = {:.6e}, to", info.t)
                } else {
                    "to".to_string()
                },
                info.end,
                info.every,
                info.dir.display()
            );
        }
        self.progress = Some(Progress::new(info.t, info.end, self.quiet));
    }

    fn step(&mut self, t: f64, dt: f64) {
        if let Some(p) = self.progress.as_mut() {
            p.step(t, dt);
        }
    }

    fn output(&mut self, t: f64, stats: &Stats, next_dt: f64) {
        if let (Some(p), false) = (&self.progress, self.quiet) {
            p.println(&format!(
                "  t = {:<12.6e} steps {:>6}  rejected {:>4}  dt {:.3e}",
                t, stats.steps, stats.rejected, next_dt
            ));
        }
    }

    fn warning(&mut self, message: &str) {
        match &self.progress {
            Some(p) => p.println(message),
            None => eprintln!("{message}"),
        }
    }
}

/// Advances `run` on the terminal and turns its outcome into an exit code.
fn execute(run: Run, quiet: bool) -> Result<i32, CliError> {
    let model_file = run.manifest().model_file.clone();
    if !quiet {
        for note in run.notes() {
            eprintln!("{note}");
        }
    }
    let mut terminal = Terminal {
        progress: None,
        quiet,
    };
    let finished = run.advance(interrupt_flag(), &mut terminal);
    if let Some(p) = &terminal.progress {
        p.finish();
    }
    let finished: Finished = finished?;
    match &finished.ended {
        Ended::Reached | Ended::BlowUp(_) if !quiet => eprint!("{}", finished.summary),
        _ => {}
    }
    match finished.ended {
        Ended::Reached => Ok(0),
        Ended::BlowUp(report) => {
            eprintln!("{}", report.describe());
            Ok(EXIT_BLOWUP)
        }
        Ended::Interrupted => {
            eprintln!(
                "interrupted at t = {:.6e}: state, checkpoint and manifest written; continue with `agarium resume {}`",
                finished.time,
                finished.dir.display()
            );
            Ok(EXIT_INTERRUPTED)
        }
        Ended::Failed(reason) if reason.starts_with("diagnostics:") => {
            Err(CliError::failure(reason))
        }
        Ended::Failed(reason) => Err(CliError::failure(format!("{model_file}: {reason}"))),
    }
}

/// Runs `agarium run`; returns the exit code of a completed run (0, 3 at a suspected
/// blow-up, 130 when interrupted).
pub fn run(args: &RunArgs) -> Result<i32, CliError> {
    let (spec, dir, _) = spec_of(args)?;
    let dir = dir.unwrap_or_else(|| PathBuf::from("out").join(&spec.stem));
    let stem = spec.stem.clone();
    // Refused early, before meshing; claimed again once the run holds the folder's lock,
    // which is what settles it when two runs start into one folder together.
    claim_folder(&dir, &stem, args.overwrite)?;
    let run = Run::start(spec, &dir)?;
    let clear = claim_folder(&dir, &stem, args.overwrite)?;
    // Only once the new run has been checked (model, plate, mesh, initial data) are the old
    // files removed, so a refused run leaves the folder as it was.
    for f in clear {
        std::fs::remove_file(&f)
            .map_err(|e| CliError::failure(format!("{}: cannot remove it: {e}", f.display())))?;
    }
    execute(run, args.quiet)
}

/// Whether a run may write into `dir`: a missing or empty folder is fine (the lock file and
/// temporary files a killed run left do not count; the latter are returned for removal); a
/// non-empty one only with `overwrite`, and then the files a run writes there (of the previous
/// run's stem and of `stem`) are returned for removal too; anything else stays, the lock
/// file included (another run may be waiting on it).
fn claim_folder(dir: &Path, stem: &str, overwrite: bool) -> Result<Vec<PathBuf>, CliError> {
    if !dir.exists() {
        return Ok(Vec::new());
    }
    if !dir.is_dir() {
        return Err(CliError::input(format!(
            "{}: the output folder is a file; choose another -o",
            dir.display()
        )));
    }
    let entries: Vec<PathBuf> = std::fs::read_dir(dir)
        .map_err(|e| CliError::input(format!("{}: {e}", dir.display())))?
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            !p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(agarium_run::is_housekeeping)
        })
        .collect();
    let leftovers = agarium_run::leftovers(dir);
    if entries.is_empty() {
        return Ok(leftovers);
    }
    let previous = agarium_run::Manifest::read(dir).ok();
    if !overwrite {
        let what = match &previous {
            Some(m) => format!("a run of {} ({})", m.model_file, m.exit),
            None => format!("{} file(s)", entries.len()),
        };
        return Err(CliError::input(format!(
            "{}: the output folder is not empty (it holds {what}); give --overwrite to replace the run's files, or choose another -o",
            dir.display()
        )));
    }
    let mut stems = vec![stem.to_string()];
    if let Some(m) = &previous {
        if let Some(s) = Path::new(&m.model_file)
            .file_stem()
            .and_then(|s| s.to_str())
        {
            stems.push(s.to_string());
        }
    }
    let mut clear: Vec<PathBuf> = entries
        .into_iter()
        .filter(|p| p.is_file())
        .filter(|p| {
            let name = p.file_name().and_then(|n| n.to_str()).unwrap_or("");
            name == agarium_run::MANIFEST
                || name == agarium_run::CHECKPOINT
                || stems
                    .iter()
                    .any(|s| name == format!("{s}.pvd") || name.starts_with(&format!("{s}_")))
        })
        .collect();
    clear.extend(leftovers);
    Ok(clear)
}

/// Runs `agarium resume`.
pub fn resume(args: &ResumeArgs) -> Result<i32, CliError> {
    // A run that ended has nothing to resume: say so and touch nothing.
    let manifest = agarium_run::Manifest::read(&args.folder)?;
    let folder = args.folder.display();
    match manifest.exit.as_str() {
        "reached" => {
            eprintln!(
                "{folder}: the run already reached its end time {}; nothing to resume",
                manifest.end
            );
            return Ok(0);
        }
        "blow-up" => {
            eprintln!(
                "{folder}: the run stopped at a suspected blow-up{}; resuming would stop there again (rerun with a finer mesh to check the verdict)",
                manifest
                    .checkpoint_time
                    .map(|t| format!(" at t = {t}"))
                    .unwrap_or_default()
            );
            return Ok(EXIT_BLOWUP);
        }
        _ => {}
    }
    let run = Run::resume(&args.folder)?;
    execute(run, args.quiet)
}

impl From<RunError> for CliError {
    fn from(e: RunError) -> Self {
        match e.kind {
            agarium_run::ErrorKind::Input => CliError::input(e.message),
            agarium_run::ErrorKind::Failure => CliError::failure(e.message),
        }
    }
}
