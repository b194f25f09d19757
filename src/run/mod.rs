//! `agarium run`: mesh a plate, compile a model, integrate it in time, write one .vtu per
//! output time and print a summary on stderr.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

use agarium_core::linalg::{LinearParams, Method};
use agarium_core::mesh::{build_mesh, MeshError};
use agarium_core::observe::{Diagnostics, DiagnosticsCsv, PvdIndex, StepFigures};
use agarium_core::output::{
    snapshot_title, write_field_png, write_series_png, write_vtu, Field, PlotOptions, Series,
    SnapshotOptions,
};
use agarium_core::time::{Control, Coupling, Outcome, Scheme, Simulation, StepperParams};
use agarium_scripting::{Model, Overrides};

use crate::error::CliError;
use crate::plate_args::{MeshingArgs, PlateArgs};

/// Exit code of a run stopped at a suspected blow-up (not an error: a finding).
pub const EXIT_BLOWUP: i32 = 3;

/// Arguments of `agarium run`.
#[derive(clap::Args, Debug)]
pub struct RunArgs {
    /// The model file.
    pub model: PathBuf,
    #[command(flatten)]
    pub plate: PlateArgs,
    #[command(flatten)]
    pub meshing: MeshingArgs,
    /// Override a parameter (repeatable), e.g. `--set chi_0=2.5`.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// End time.
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    pub end: f64,
    /// Interval between written states [default: a tenth of --end].
    #[arg(long, value_name = "DT", allow_hyphen_values = true)]
    pub every: Option<f64>,
    /// Output folder [default: out/MODEL-NAME].
    #[arg(short, long, value_name = "DIR")]
    pub out: Option<PathBuf>,
    /// Time discretisation.
    #[arg(long, value_enum, default_value_t = SchemeArg::Bdf2)]
    pub scheme: SchemeArg,
    /// Species coupling within a step: full Newton, or one linear solve per species with
    /// the others lagged (cheaper on large meshes).
    #[arg(long, value_enum, default_value_t = CouplingArg::Newton)]
    pub coupling: CouplingArg,
    /// Linear solver.
    #[arg(long, value_enum, default_value_t = LinearArg::Auto)]
    pub linear: LinearArg,
    /// Relative tolerance of the local time error.
    #[arg(
        long,
        value_name = "TOL",
        default_value_t = 1e-3,
        allow_hyphen_values = true
    )]
    pub rtol: f64,
    /// Absolute tolerance of the local time error (species units).
    #[arg(
        long,
        value_name = "TOL",
        default_value_t = 1e-6,
        allow_hyphen_values = true
    )]
    pub atol: f64,
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
    /// Name of the model's time unit, for picture titles.
    #[arg(long, value_name = "NAME", default_value = "")]
    pub time_unit: String,
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
    /// Stepper settings from the options.
    pub fn stepper(&self) -> Result<StepperParams, CliError> {
        let mut p = StepperParams {
            scheme: match self.scheme {
                SchemeArg::Bdf2 => Scheme::Bdf2,
                SchemeArg::Euler => Scheme::BackwardEuler,
            },
            coupling: match self.coupling {
                CouplingArg::Newton => Coupling::Newton,
                CouplingArg::Lagged => Coupling::Lagged,
            },
            rtol: positive("--rtol", self.rtol)?,
            atol: positive("--atol", self.atol)?,
            adaptive: !self.fixed_step,
            ..StepperParams::default()
        };
        p.linear = LinearParams {
            method: match self.linear {
                LinearArg::Auto => Method::Auto,
                LinearArg::Direct => Method::Direct,
                LinearArg::Iterative => Method::Iterative,
            },
            ..LinearParams::default()
        };
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

/// Runs `agarium run`; returns the exit code for a completed run (0, or 3 at blow-up).
pub fn run(args: &RunArgs) -> Result<i32, CliError> {
    let started = Instant::now();
    let end = positive("--end", args.end)?;
    let every = positive("--every", args.every.unwrap_or(end / 10.0))?;
    let times = output_times(end, every);
    if times.len() > 100_000 {
        return Err(CliError::input(format!(
            "--every {every} gives {} output files; choose a longer interval",
            times.len()
        )));
    }
    let params = args.stepper()?;
    let overrides = Overrides::parse(&args.set).map_err(CliError::input)?;
    if !args.model.is_file() {
        return Err(CliError::input(format!(
            "{}: no such model file",
            args.model.display()
        )));
    }
    let model = Model::load_file(&args.model, &overrides).map_err(CliError::input)?;
    let compiled = model.compile().map_err(CliError::input)?;
    let problem = compiled.to_problem();
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
    for p in &args.pictures {
        if !known.contains(&p.as_str()) {
            return Err(CliError::input(format!(
                "--picture {p}: the model has no species or field of that name (it has: {})",
                known.join(", ")
            )));
        }
    }

    let spec = args.plate.spec()?;
    spec.check_numbers().map_err(CliError::input)?;
    let options = args.meshing.options(&spec)?;
    let built = build_mesh(&spec, &options).map_err(|e| match e {
        MeshError::Data(_) | MeshError::Triangulation(_) => CliError::failure(e),
        other => CliError::input(other),
    })?;
    let mesh = Arc::new(built.mesh);
    let stem = args
        .model
        .file_stem()
        .and_then(|s| s.to_str())
        .unwrap_or("run")
        .to_string();
    let dir = args
        .out
        .clone()
        .unwrap_or_else(|| PathBuf::from("out").join(&stem));

    let mut sim = Simulation::new(problem.clone(), mesh.clone(), params, 0.0)
        .map_err(|e| CliError::input(format!("{}: {e}", args.model.display())))?;
    std::fs::create_dir_all(&dir)
        .map_err(|e| CliError::failure(format!("{}: cannot create folder: {e}", dir.display())))?;
    let quiet = args.quiet;
    if !quiet {
        eprintln!(
            "{}: {} species on {} nodes, {} triangles; to t = {end} writing every {every} into {}",
            args.model.display(),
            problem.n_species(),
            mesh.num_nodes(),
            mesh.triangles.len(),
            dir.display()
        );
    }
    let start = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), 0.0)
        .map_err(CliError::failure)?;
    let mut pvd = PvdIndex::new();
    let mut csv = DiagnosticsCsv::new(
        dir.join(format!("{stem}_diagnostics.csv")),
        sim.species_names(),
        &start,
    );
    csv.push(
        StepFigures {
            t: 0.0,
            dt: 0.0,
            newton: 0,
            rejections: 0,
        },
        &start,
    );
    let mut history = History::new(sim.species_names(), &start);
    write_state(&dir, &stem, 0, &sim, &start, &mut pvd)?;
    write_pictures(&dir, &stem, 0, &sim, &start, args)?;
    let mut outcome = Outcome::Reached;
    let mut warned = false;
    let mut failure: Option<String> = None;
    for (k, &t) in times.iter().enumerate() {
        let result = sim.advance_to(t, &mut |rep| {
            let state = rep.state.as_slice().unwrap_or(&[]);
            match Diagnostics::evaluate(&problem, &mesh, state, rep.time) {
                Ok(d) => {
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
                            eprintln!(
                                "warning: `{name}` is declared conserved but drifted by {drift:.2e} (relative) by t = {:.6e}",
                                rep.time
                            );
                        }
                    }
                    Control::Continue
                }
                Err(e) => {
                    failure = Some(e.to_string());
                    Control::Stop
                }
            }
        });
        // Whatever happened, the table so far is kept.
        csv.save().map_err(CliError::failure)?;
        if let Some(e) = failure.take() {
            return Err(CliError::failure(format!("diagnostics: {e}")));
        }
        outcome =
            result.map_err(|e| CliError::failure(format!("{}: {e}", args.model.display())))?;
        let d = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time())
            .map_err(CliError::failure)?;
        write_state(&dir, &stem, k + 1, &sim, &d, &mut pvd)?;
        write_pictures(&dir, &stem, k + 1, &sim, &d, args)?;
        history.plot(&dir, &stem)?;
        if !quiet {
            let s = sim.stats();
            eprintln!(
                "  t = {:<12.6e} steps {:>6}  rejected {:>4}  dt {:.3e}",
                sim.time(),
                s.steps,
                s.rejected,
                sim.next_dt()
            );
        }
        if outcome != Outcome::Reached {
            break;
        }
    }
    let last = Diagnostics::evaluate(&problem, &mesh, sim.state_slice(), sim.time())
        .map_err(CliError::failure)?;
    if !quiet {
        summary(&sim, &start, &last, started.elapsed().as_secs_f64());
    }
    match outcome {
        Outcome::BlowUp(report) => {
            eprintln!("{}", report.describe());
            Ok(EXIT_BLOWUP)
        }
        _ => Ok(0),
    }
}

/// Pictures of the chosen fields for state number `k`.
fn write_pictures(
    dir: &Path,
    stem: &str,
    k: usize,
    sim: &Simulation,
    d: &Diagnostics,
    args: &RunArgs,
) -> Result<(), CliError> {
    let state = sim.state();
    for name in &args.pictures {
        let values: &[f64] = match sim.species_names().iter().position(|s| s == name) {
            Some(s) => state.row(s).to_slice().unwrap_or(&[]),
            None => match d.fields.iter().find(|(n, _)| n == name) {
                Some((_, v)) => v,
                None => continue,
            },
        };
        let options = SnapshotOptions {
            title: snapshot_title(name, sim.time(), &args.time_unit),
            ..SnapshotOptions::default()
        };
        let path = dir.join(format!("{stem}_{name}_{k:04}.png"));
        write_field_png(&path, sim.mesh(), values, &options).map_err(CliError::failure)?;
    }
    Ok(())
}

/// Diagnostics over time, kept for the plots.
struct History {
    names: Vec<String>,
    integral_names: Vec<String>,
    t: Vec<f64>,
    dt: Vec<(f64, f64)>,
    integrals: Vec<Vec<(f64, f64)>>,
    sups: Vec<Vec<(f64, f64)>>,
    declared: Vec<Vec<(f64, f64)>>,
}

impl History {
    fn new(names: &[String], start: &Diagnostics) -> Self {
        let mut h = History {
            names: names.to_vec(),
            integral_names: start.integrals.iter().map(|i| i.name.clone()).collect(),
            t: Vec::new(),
            dt: Vec::new(),
            integrals: vec![Vec::new(); names.len()],
            sups: vec![Vec::new(); names.len()],
            declared: vec![Vec::new(); start.integrals.len()],
        };
        h.push(start.time, 0.0, start);
        h
    }

    fn push(&mut self, t: f64, dt: f64, d: &Diagnostics) {
        self.t.push(t);
        if dt > 0.0 {
            self.dt.push((t, dt));
        }
        for (s, st) in d.species.iter().enumerate() {
            self.integrals[s].push((t, st.integral));
            self.sups[s].push((t, st.max.abs().max(st.min.abs())));
        }
        for (k, i) in d.integrals.iter().enumerate() {
            self.declared[k].push((t, i.value));
        }
    }

    /// Integrals, sup-norms and step sizes over time as three PNG plots.
    fn plot(&self, dir: &Path, stem: &str) -> Result<(), CliError> {
        let named = |names: &[String], data: &[Vec<(f64, f64)>], prefix: &str| -> Vec<Series> {
            names
                .iter()
                .zip(data)
                .map(|(n, p)| Series {
                    name: format!("{prefix}{n}"),
                    points: p.clone(),
                })
                .collect()
        };
        let mut integrals = named(&self.names, &self.integrals, "∫ ");
        integrals.extend(named(&self.integral_names, &self.declared, "∫ "));
        let plots = [
            ("integrals", "integrals over the plate", integrals, false),
            (
                "sup",
                "sup-norms",
                self.names
                    .iter()
                    .zip(&self.sups)
                    .map(|(n, p)| Series {
                        name: format!("max |{n}|"),
                        points: p.clone(),
                    })
                    .collect(),
                true,
            ),
            (
                "dt",
                "step size",
                vec![Series {
                    name: "dt".into(),
                    points: self.dt.clone(),
                }],
                true,
            ),
        ];
        for (file, title, series, log_y) in plots {
            if series.iter().all(|s| s.points.len() < 2) {
                continue;
            }
            let options = PlotOptions {
                log_y,
                ..PlotOptions::default()
            };
            let path = dir.join(format!("{stem}_{file}.png"));
            if let Err(e) = write_series_png(&path, title, "t", &series, &options) {
                // A plot with nothing drawable (e.g. every sup-norm zero on a log axis) is
                // skipped, not fatal; a disk failure is.
                if matches!(e, agarium_core::output::OutputError::Io { .. }) {
                    return Err(CliError::failure(e));
                }
            }
        }
        Ok(())
    }
}

/// Relative drift of a conserved integral above which the run warns (far above round-off and
/// the iterative solvers' tolerance, far below anything that changes a picture).
const CONSERVED_WARNING: f64 = 1e-8;

/// Writes state number `k` and adds it to the series index.
fn write_state(
    dir: &Path,
    stem: &str,
    k: usize,
    sim: &Simulation,
    d: &Diagnostics,
    pvd: &mut PvdIndex,
) -> Result<(), CliError> {
    let state = sim.state();
    let names = sim.species_names();
    let mut fields: Vec<Field> = names
        .iter()
        .enumerate()
        .map(|(s, name)| Field {
            name,
            values: state.row(s).to_slice().unwrap_or(&[]),
        })
        .collect();
    for (name, values) in &d.fields {
        fields.push(Field { name, values });
    }
    let name = format!("{stem}_{k:04}.vtu");
    write_vtu(&dir.join(&name), sim.mesh(), &fields, &[]).map_err(CliError::failure)?;
    pvd.push(sim.time(), &name);
    pvd.write(&dir.join(format!("{stem}.pvd")))
        .map_err(CliError::failure)
}

fn summary(sim: &Simulation, start: &Diagnostics, last: &Diagnostics, seconds: f64) {
    let s = sim.stats();
    eprintln!(
        "reached t = {:.6e} in {} steps ({} rejected), {} Newton iterations, {} Jacobians, {} linear solves, {:.2} s",
        sim.time(),
        s.steps,
        s.rejected,
        s.newton_iterations,
        s.jacobians,
        s.linear_solves,
        seconds
    );
    eprintln!(
        "  {:<20} {:>14} {:>14} {:>14}",
        "species", "integral", "min", "max"
    );
    for (name, st) in sim.species_names().iter().zip(&last.species) {
        eprintln!(
            "  {:<20} {:>14.6e} {:>14.6e} {:>14.6e}",
            name, st.integral, st.min, st.max
        );
    }
    for (now, then) in last.integrals.iter().zip(&start.integrals) {
        let drift = if now.conserved {
            format!(
                "  (conserved: relative drift {:.2e})",
                (now.value - then.value).abs() / then.value.abs().max(f64::MIN_POSITIVE)
            )
        } else {
            String::new()
        };
        eprintln!("  ∫ {:<18} {:>14.6e}{drift}", now.name, now.value);
    }
}
