//! Time-stepper benchmark: per-step cost of the four-species colony model with scripted and
//! native kernels on disks of about 1e4, 1e5 and 1e6 nodes, for Newton+direct, Newton+iterative
//! and lagged+iterative coupling; a Keller–Segel step at 1e5 nodes; peak heap bytes per node of
//! set-up plus warm-up steps (counting global allocator); and the ratios against the targets,
//! measured side by side in one run.
//!
//! Run with `cargo bench --bench solver` (add `-- no-1e6` to skip the largest disk; the
//! single-threaded 1e6 part alone: `RAYON_NUM_THREADS=1 cargo bench --bench solver --
//! single-thread-child`). Fixed steps, medians over several steps after a warm-up; compare
//! ratios within one run, the machine is shared and noisy. Without `--bench` (as under
//! `cargo test --all-targets`) a smoke run on a tiny mesh is done. No timing assertions.

mod common;

use std::alloc::{GlobalAlloc, Layout, System};
use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering::Relaxed};
use std::sync::Arc;
use std::time::Instant;

use agarium_core::kernel::{
    BatchKernel, ClosureKernel, KernelError, KernelInput, Scratch, SensitivityForm, SpeciesKind,
};
use agarium_core::linalg::{LinearParams, Method};
use agarium_core::mesh::Mesh;
use agarium_core::problem::{ChemotaxisSpec, Problem, SpeciesSpec};
use agarium_core::time::{Control, Coupling, Outcome, Simulation, Stats, StepperParams};
use agarium_scripting::{Model, Overrides};
use common::{disk, median};

/// Heap bytes live now and the high-water mark since the last [`reset_peak`].
static CURRENT: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);

struct Counting;

fn grow(bytes: usize) {
    let now = CURRENT.fetch_add(bytes, Relaxed) + bytes;
    PEAK.fetch_max(now, Relaxed);
}

// SAFETY: every call is forwarded unchanged to `System`; only counters are updated.
unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let p = System.alloc(layout);
        if !p.is_null() {
            grow(layout.size());
        }
        p
    }

    unsafe fn alloc_zeroed(&self, layout: Layout) -> *mut u8 {
        let p = System.alloc_zeroed(layout);
        if !p.is_null() {
            grow(layout.size());
        }
        p
    }

    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        System.dealloc(ptr, layout);
        CURRENT.fetch_sub(layout.size(), Relaxed);
    }

    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let p = System.realloc(ptr, layout, new_size);
        if !p.is_null() {
            if new_size >= layout.size() {
                grow(new_size - layout.size());
            } else {
                CURRENT.fetch_sub(layout.size() - new_size, Relaxed);
            }
        }
        p
    }
}

#[global_allocator]
static ALLOC: Counting = Counting;

/// Sets the high-water mark to the current use and returns that baseline.
fn reset_peak() -> usize {
    let now = CURRENT.load(Relaxed);
    PEAK.store(now, Relaxed);
    now
}

/// A kernel with its true dependency pattern: `ClosureKernel::new` declares every derivative
/// nonzero, which would give the solver a denser Jacobian than the scripted kernel's.
struct Sparse<K> {
    inner: K,
    deps: Vec<bool>,
}

impl<K: BatchKernel> BatchKernel for Sparse<K> {
    fn n_inputs(&self) -> usize {
        self.inner.n_inputs()
    }
    fn n_outputs(&self) -> usize {
        self.inner.n_outputs()
    }
    fn depends_on(&self, output: usize, species: usize) -> bool {
        self.deps[output * self.n_inputs() + species]
    }
    fn eval(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        self.inner.eval(input, out, scratch)
    }
    fn eval_with_jacobian(
        &self,
        input: &KernelInput<'_>,
        out: &mut [f64],
        jac: &mut [f64],
        scratch: &mut Scratch,
    ) -> Result<(), KernelError> {
        self.inner.eval_with_jacobian(input, out, jac, scratch)
    }
}

/// `inner`, with only the listed (output, species) derivatives declared nonzero.
fn sparse<K: BatchKernel + 'static>(inner: K, nonzero: &[(usize, usize)]) -> Arc<dyn BatchKernel> {
    let mut deps = vec![false; inner.n_inputs() * inner.n_outputs()];
    for &(o, s) in nonzero {
        deps[o * inner.n_inputs() + s] = true;
    }
    Arc::new(Sparse { inner, deps })
}

/// The colony model's reactions and χ(c) written by hand in Rust, with the parameter values
/// read from the model file. Initial conditions and diagnostics are the scripted ones (they
/// are not evaluated per step), so both problems start from the same state.
fn native_colony(model: &Model, scripted: &Problem, true_pattern: bool) -> Problem {
    let value = |name: &str| {
        model
            .decl
            .params
            .iter()
            .find(|p| p.name == name)
            .map(|p| p.value)
            .expect("parameter in model file")
    };
    let (r, k_n, b_0, k_b) = (value("r"), value("k_n"), value("b_0"), value("k_b"));
    let (alpha, beta, gamma) = (value("alpha"), value("beta"), value("gamma"));
    let (chi_0, k_c) = (value("chi_0"), value("k_c"));
    let react = move |u: &[f64], o: &mut [f64]| {
        let (cells, c, n) = (u[0], u[1], u[2]);
        let g = r * n / (k_n + n);
        let b = b_0 * k_b / (k_b + n);
        o[0] = (g - b) * cells;
        o[1] = alpha * cells - beta * c;
        o[2] = -gamma * g * cells;
        o[3] = b * cells;
    };
    let reactions = ClosureKernel::new(
        4,
        4,
        move |u: &[f64], _x, _y, _t, o: &mut [f64]| react(u, o),
        move |u: &[f64], _x, _y, _t, o: &mut [f64], j: &mut [f64]| {
            react(u, o);
            let (cells, n) = (u[0], u[2]);
            let g = r * n / (k_n + n);
            let dg = (r - g) / (k_n + n);
            let b = b_0 * k_b / (k_b + n);
            let db = -b / (k_b + n);
            j.fill(0.0);
            j[0] = g - b;
            j[2] = (dg - db) * cells;
            j[4] = alpha;
            j[5] = -beta;
            j[8] = -gamma * g;
            j[10] = -gamma * dg * cells;
            j[12] = b;
            j[14] = db * cells;
        },
    );
    let chi = ClosureKernel::new(
        4,
        1,
        move |u: &[f64], _x, _y, _t, o: &mut [f64]| o[0] = chi_0 * (1.0 + u[1] / k_c).ln(),
        move |u: &[f64], _x, _y, _t, o: &mut [f64], j: &mut [f64]| {
            o[0] = chi_0 * (1.0 + u[1] / k_c).ln();
            j.fill(0.0);
            j[1] = chi_0 / (k_c + u[1]);
        },
    );
    let (reactions, chi): (Arc<dyn BatchKernel>, Arc<dyn BatchKernel>) = if true_pattern {
        (
            sparse(
                reactions,
                &[
                    (0, 0),
                    (0, 2),
                    (1, 0),
                    (1, 1),
                    (2, 0),
                    (2, 2),
                    (3, 0),
                    (3, 2),
                ],
            ),
            sparse(chi, &[(0, 1)]),
        )
    } else {
        (Arc::new(reactions), Arc::new(chi))
    };
    let c = &scripted.chemotaxis[0];
    Problem {
        species: scripted.species.clone(),
        reactions,
        initial: scripted.initial.clone(),
        chemotaxis: vec![ChemotaxisSpec {
            cells: c.cells,
            signal: c.signal,
            form: SensitivityForm::Potential,
            sensitivity: chi,
            factor: None,
        }],
        diagnostics: scripted.diagnostics.clone(),
    }
}

/// u_t = Δu − ∇·(u∇(χc)), c_t = Δc + u − c with χ = 1 and smooth positive data.
fn keller_segel() -> Problem {
    let reactions = ClosureKernel::new(
        2,
        2,
        |u: &[f64], _x, _y, _t, o: &mut [f64]| {
            o[0] = 0.0;
            o[1] = u[0] - u[1];
        },
        |u: &[f64], _x, _y, _t, o: &mut [f64], j: &mut [f64]| {
            o[0] = 0.0;
            o[1] = u[0] - u[1];
            j.copy_from_slice(&[0.0, 0.0, 1.0, -1.0]);
        },
    );
    let chi = ClosureKernel::new(
        2,
        1,
        |u: &[f64], _x, _y, _t, o: &mut [f64]| o[0] = u[1],
        |u: &[f64], _x, _y, _t, o: &mut [f64], j: &mut [f64]| {
            o[0] = u[1];
            j.copy_from_slice(&[0.0, 1.0]);
        },
    );
    let initial = ClosureKernel::new(
        2,
        2,
        |_u: &[f64], x, y, _t, o: &mut [f64]| {
            o[0] = 1.0 + 0.5 * (-20.0 * ((x - 0.2).powi(2) + y * y)).exp();
            o[1] = 0.5 * (-10.0 * (x * x + (y + 0.1).powi(2))).exp();
        },
        |_u: &[f64], x, y, _t, o: &mut [f64], j: &mut [f64]| {
            o[0] = 1.0 + 0.5 * (-20.0 * ((x - 0.2).powi(2) + y * y)).exp();
            o[1] = 0.5 * (-10.0 * (x * x + (y + 0.1).powi(2))).exp();
            j.fill(0.0);
        },
    );
    let mobile = |name: &str| SpeciesSpec {
        name: name.into(),
        kind: SpeciesKind::Mobile { diffusion: 1.0 },
    };
    Problem {
        species: vec![mobile("u"), mobile("c")],
        reactions: sparse(reactions, &[(1, 0), (1, 1)]),
        initial: sparse(initial, &[]),
        chemotaxis: vec![ChemotaxisSpec {
            cells: 0,
            signal: 1,
            form: SensitivityForm::Potential,
            sensitivity: sparse(chi, &[(0, 1)]),
            factor: None,
        }],
        diagnostics: vec![],
    }
}

#[derive(Clone, Copy, PartialEq)]
enum Solver {
    NewtonDirect,
    NewtonIterative,
    LaggedIterative,
}

impl Solver {
    fn name(self) -> &'static str {
        match self {
            Solver::NewtonDirect => "Newton+Direct",
            Solver::NewtonIterative => "Newton+Iterative",
            Solver::LaggedIterative => "Lagged+Iterative",
        }
    }

    fn params(self, dt: f64) -> StepperParams {
        let (coupling, method) = match self {
            Solver::NewtonDirect => (Coupling::Newton, Method::Direct),
            Solver::NewtonIterative => (Coupling::Newton, Method::Iterative),
            Solver::LaggedIterative => (Coupling::Lagged, Method::Iterative),
        };
        StepperParams {
            coupling,
            adaptive: false,
            dt_initial: Some(dt),
            linear: LinearParams {
                method,
                ..LinearParams::default()
            },
            ..StepperParams::default()
        }
    }
}

/// One exactly-sized step: the target is far away and the observer stops after the first
/// accepted step, so the stepper never shortens the step to land on a target.
fn step(sim: &mut Simulation, dt: f64) -> Result<f64, String> {
    let far = sim.time() + 100.0 * dt;
    let t = Instant::now();
    match sim.advance_to(far, &mut |_| Control::Stop) {
        Ok(Outcome::Stopped) => Ok(t.elapsed().as_secs_f64()),
        Ok(other) => Err(format!("unexpected outcome {other:?}")),
        Err(e) => Err(e.to_string()),
    }
}

/// A simulation after set-up and warm-up, with what they cost.
struct Run {
    label: String,
    sim: Simulation,
    dt: f64,
    setup_s: f64,
    peak_per_node: f64,
    stats0: Stats,
    times: Vec<f64>,
}

/// Set-up plus `warm` steps; the heap peak above the baseline at entry covers both. Gives up
/// (Err) when a warm-up step takes longer than `limit_s`.
fn start(
    label: String,
    problem: Problem,
    mesh: &Arc<Mesh>,
    solver: Solver,
    dt: f64,
    warm: usize,
    limit_s: f64,
) -> Result<Run, String> {
    let base = reset_peak();
    let t = Instant::now();
    let mut sim = Simulation::new(problem, mesh.clone(), solver.params(dt), 0.0)
        .map_err(|e| e.to_string())?;
    let setup_s = t.elapsed().as_secs_f64();
    for _ in 0..warm {
        let s = step(&mut sim, dt)?;
        if s > limit_s {
            return Err(format!("warm-up step took {s:.1} s > {limit_s} s"));
        }
    }
    let peak = PEAK.load(Relaxed).saturating_sub(base);
    Ok(Run {
        label,
        stats0: sim.stats(),
        peak_per_node: peak as f64 / mesh.num_nodes() as f64,
        sim,
        dt,
        setup_s,
        times: Vec::new(),
    })
}

/// Steps every run in turn `steps` times, so all variants see the same machine noise.
fn measure(runs: &mut [Run], steps: usize) -> Result<(), String> {
    for _ in 0..steps {
        for r in runs.iter_mut() {
            let dt = r.dt;
            let s = step(&mut r.sim, dt).map_err(|e| format!("{}: {e}", r.label))?;
            r.times.push(s);
        }
    }
    Ok(())
}

fn header() {
    println!(
        "{:<9} {:>8} {:>9} {:<17} {:<14} {:>9} {:>11} {:>7} {:>6} {:>8} {:>9}",
        "case",
        "nodes",
        "unknowns",
        "solver",
        "kernels",
        "setup [s]",
        "step [ms]",
        "newton",
        "jacs",
        "lin its",
        "peak B/nd"
    );
}

/// Prints a run's row and returns its median step time.
fn row(case: &str, nodes: usize, species: usize, solver: Solver, r: &Run) -> f64 {
    let med = median(r.times.clone());
    let (s0, s1) = (r.stats0, r.sim.stats());
    let steps = (s1.steps - s0.steps).max(1) as f64;
    println!(
        "{:<9} {:>8} {:>9} {:<17} {:<14} {:>9.2} {:>11.1} {:>7.2} {:>6.2} {:>8.1} {:>9.0}",
        case,
        nodes,
        nodes * species,
        solver.name(),
        r.label,
        r.setup_s,
        med * 1e3,
        (s1.newton_iterations - s0.newton_iterations) as f64 / steps,
        (s1.jacobians - s0.jacobians) as f64 / steps,
        (s1.linear_iterations - s0.linear_iterations) as f64 / steps,
        r.peak_per_node
    );
    med
}

/// Largest relative difference between two runs' states (a check that both compute the same).
fn state_gap(a: &Simulation, b: &Simulation) -> f64 {
    let scale = a
        .state_slice()
        .iter()
        .fold(0.0f64, |m, v| m.max(v.abs()))
        .max(f64::MIN_POSITIVE);
    a.state_slice()
        .iter()
        .zip(b.state_slice())
        .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()))
        / scale
}

struct Config {
    smoke: bool,
    warm: usize,
    steps: usize,
}

/// Results kept for the ratio section: (size label, solver, kernels) → median step [s].
type Medians = Vec<(String, Solver, String, f64)>;

/// The model file and its compiled problem.
struct Colony {
    model: Model,
    scripted: Problem,
}

fn colony_size(
    cfg: &Config,
    colony: &Colony,
    label: &str,
    h: f64,
    direct_prediction: &mut Option<f64>,
    medians: &mut Medians,
    dense_check: bool,
) {
    let (model, scripted) = (&colony.model, &colony.scripted);
    let mesh = disk(5.0, h);
    let n = mesh.num_nodes();
    let dt = 0.05;
    for solver in [
        Solver::NewtonDirect,
        Solver::NewtonIterative,
        Solver::LaggedIterative,
    ] {
        if solver == Solver::NewtonDirect && !cfg.smoke && 4 * n > 200_000 {
            if let Some(p) = *direct_prediction {
                if p > 60.0 {
                    println!(
                        "{label:<9} {n:>8} {:>9} {:<17} skipped: predicted {p:.0} s per step > 60 s",
                        4 * n,
                        solver.name()
                    );
                    continue;
                }
            }
        }
        let mut variants = vec![
            ("scripted", scripted.clone()),
            ("native", native_colony(model, scripted, true)),
        ];
        if dense_check && solver == Solver::NewtonIterative {
            variants.push(("native-dense", native_colony(model, scripted, false)));
        }
        let mut runs = Vec::new();
        let mut failed = None;
        for (name, p) in variants {
            match start(name.into(), p, &mesh, solver, dt, cfg.warm, 60.0) {
                Ok(r) => runs.push(r),
                Err(e) => {
                    failed = Some(e);
                    break;
                }
            }
        }
        if let Some(e) = failed {
            println!(
                "{label:<9} {n:>8} {:>9} {:<17} skipped: {e}",
                4 * n,
                solver.name()
            );
            if solver == Solver::NewtonDirect {
                *direct_prediction = Some(f64::INFINITY);
            }
            continue;
        }
        if let Err(e) = measure(&mut runs, cfg.steps) {
            println!(
                "{label:<9} {n:>8} {:>9} {:<17} failed: {e}",
                4 * n,
                solver.name()
            );
            continue;
        }
        for r in &runs {
            let med = row(label, n, 4, solver, r);
            medians.push((label.into(), solver, r.label.clone(), med));
            if solver == Solver::NewtonDirect && r.label == "scripted" {
                // Sparse direct solves in 2-D grow about like N^1.5 (common practice).
                *direct_prediction = Some(med * 10f64.powf(1.5));
            }
        }
        println!(
            "{:<9} scripted vs native state after {} steps: max relative difference {:.1e}",
            "",
            cfg.warm + cfg.steps,
            state_gap(&runs[0].sim, &runs[1].sim)
        );
    }
}

fn keller_segel_case(cfg: &Config, h: f64, label: &str) -> Vec<(Solver, f64)> {
    let mesh = disk(1.0, h);
    let n = mesh.num_nodes();
    let dt = 1e-3;
    let mut out = Vec::new();
    for solver in [
        Solver::NewtonDirect,
        Solver::NewtonIterative,
        Solver::LaggedIterative,
    ] {
        let run = start(
            "native".into(),
            keller_segel(),
            &mesh,
            solver,
            dt,
            cfg.warm,
            60.0,
        )
        .and_then(|r| {
            let mut rs = vec![r];
            measure(&mut rs, cfg.steps)?;
            Ok(rs.pop().expect("one run"))
        });
        match run {
            Ok(r) => out.push((solver, row(label, n, 2, solver, &r))),
            Err(e) => println!("{label:<9} {n:>8} {:<17} failed: {e}", solver.name()),
        }
    }
    out
}

/// The largest disk once more, single-threaded, in a child process started with
/// `RAYON_NUM_THREADS=1` (the pool size is fixed per process).
fn single_threaded_child(cfg: &Config, scripted: &Problem, h: f64) {
    let mesh = disk(5.0, h);
    let n = mesh.num_nodes();
    println!(
        "child process, RAYON_NUM_THREADS={}",
        std::env::var("RAYON_NUM_THREADS").unwrap_or_default()
    );
    header();
    for solver in [Solver::NewtonIterative, Solver::LaggedIterative] {
        // Scripted only: the scripted/native ratio is measured in the main run, and each
        // single-threaded step at this size takes tens of seconds.
        let mut runs = match start(
            "scripted".into(),
            scripted.clone(),
            &mesh,
            solver,
            0.05,
            cfg.warm,
            600.0,
        ) {
            Ok(r) => vec![r],
            Err(e) => {
                println!("1e6 1-thr {n:>8} {:<17} failed: {e}", solver.name());
                continue;
            }
        };
        if let Err(e) = measure(&mut runs, cfg.steps) {
            println!("1e6 1-thr {n:>8} {:<17} failed: {e}", solver.name());
            continue;
        }
        for r in &runs {
            let med = row("1e6 1-thr", n, 4, solver, r);
            println!(
                "{:<9} → {} {} single-threaded: {:.2} s per step (target ≤ 1.5 s)",
                "",
                solver.name(),
                r.label,
                med
            );
        }
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let smoke = !args.iter().any(|a| a == "--bench");
    let skip_largest = args.iter().any(|a| a == "no-1e6");
    let child = args.iter().any(|a| a == "single-thread-child");
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("models/colony_4species.rhai");
    let model = Model::load_file(&path, &Overrides::default()).expect("model");
    let scripted = model.compile().expect("compile").to_problem();
    let colony = Colony { model, scripted };
    let scripted = &colony.scripted;
    // Nodes ≈ 3.6 R²/h² on a disk of radius R (5 mm for the colony, 1 for Keller–Segel).
    let h_1e6 = 0.0095;
    if child {
        let cfg = Config {
            smoke: false,
            warm: 2,
            steps: 3,
        };
        single_threaded_child(&cfg, scripted, h_1e6);
        return;
    }
    let cfg = if smoke {
        Config {
            smoke,
            warm: 1,
            steps: 1,
        }
    } else {
        Config {
            smoke,
            warm: 2,
            steps: 5,
        }
    };
    let threads = std::env::var("RAYON_NUM_THREADS").unwrap_or_else(|_| "unset".into());
    println!(
        "four-species colony on a 5 mm disk, dt = 0.05 h fixed, BDF2, {} warm-up + median of {} \
         steps; RAYON_NUM_THREADS={threads}; peak = heap bytes per node above the pre-set-up \
         baseline over set-up and warm-up",
        cfg.warm, cfg.steps
    );
    // One-off process costs (thread pools, first-use buffers of the libraries) are paid here
    // on a tiny mesh so the first measured case is not charged for them.
    let tiny = disk(5.0, 0.4);
    for solver in [Solver::NewtonDirect, Solver::NewtonIterative] {
        let r = start(
            "warm".into(),
            scripted.clone(),
            &tiny,
            solver,
            0.05,
            2,
            60.0,
        )
        .expect("warm-up run");
        println!(
            "(process warm-up, {}: {:.1} MB peak on {} nodes)",
            solver.name(),
            r.peak_per_node * tiny.num_nodes() as f64 / 1e6,
            tiny.num_nodes()
        );
    }
    header();
    let mut medians: Medians = Vec::new();
    let mut prediction = None;
    let sizes: Vec<(&str, f64)> = if smoke {
        vec![("tiny", 0.4)]
    } else if skip_largest {
        vec![("1e4", 0.095), ("1e5", 0.030)]
    } else {
        vec![("1e4", 0.095), ("1e5", 0.030), ("1e6", h_1e6)]
    };
    for (label, h) in &sizes {
        let dense = *label == "1e5" || smoke;
        let large = Config {
            steps: if *label == "1e6" { 3 } else { cfg.steps },
            ..cfg
        };
        colony_size(
            &large,
            &colony,
            label,
            *h,
            &mut prediction,
            &mut medians,
            dense,
        );
    }

    println!("\nKeller–Segel (χ = 1) on the unit disk, dt = 1e-3 fixed, native kernels");
    header();
    let ks = if smoke {
        keller_segel_case(&cfg, 0.08, "KS tiny")
    } else {
        keller_segel_case(&cfg, 0.006, "KS 1e5")
    };

    println!("\nratios (same run)");
    let find = |size: &str, solver: Solver, kernels: &str| {
        medians
            .iter()
            .find(|m| m.0 == size && m.1 == solver && m.2 == kernels)
            .map(|m| m.3)
    };
    for (size, _) in &sizes {
        for solver in [
            Solver::NewtonDirect,
            Solver::NewtonIterative,
            Solver::LaggedIterative,
        ] {
            if let (Some(s), Some(n)) =
                (find(size, solver, "scripted"), find(size, solver, "native"))
            {
                println!(
                    "  {size:<4} {:<17} scripted/native = {:.3} (target ≤ 1.05)",
                    solver.name(),
                    s / n
                );
            }
            if let (Some(d), Some(n)) = (
                find(size, solver, "native-dense"),
                find(size, solver, "native"),
            ) {
                println!(
                    "  {size:<4} {:<17} native with ClosureKernel's all-nonzero pattern / true pattern = {:.3}",
                    solver.name(),
                    d / n
                );
            }
        }
    }
    for solver in [
        Solver::NewtonDirect,
        Solver::NewtonIterative,
        Solver::LaggedIterative,
    ] {
        for kernels in ["scripted", "native"] {
            if let (Some(a), Some(b)) = (find("1e6", solver, kernels), find("1e5", solver, kernels))
            {
                println!(
                    "  t(1e6)/t(1e5) {:<17} {kernels:<8} = {:.1} (target ≤ 12)",
                    solver.name(),
                    a / b
                );
            }
        }
    }
    for (solver, t) in &ks {
        println!(
            "  Keller–Segel {:<17} {:.1} ms per step (target ≤ 30 ms at 1e5 nodes)",
            solver.name(),
            t * 1e3
        );
    }
    println!("  peak memory target: ≤ 1500 B/node (column `peak B/nd`)");

    if !smoke && !skip_largest {
        println!("\nfour-species step at 1e6 nodes, single-threaded:");
        let status = std::env::current_exe().and_then(|exe| {
            std::process::Command::new(exe)
                .args(["--bench", "single-thread-child"])
                .env("RAYON_NUM_THREADS", "1")
                .status()
        });
        if !matches!(status, Ok(s) if s.success()) {
            println!("single-threaded child failed: {status:?}");
        }
    }
}
