//! The simulation value and its step loop.

use std::sync::Arc;

use ndarray::ArrayView2;
use sprs::CsMat;
use thiserror::Error;

use super::blowup::{BlowupReport, Monitor};
use super::checkpoint::{Checkpoint, CheckpointError, Meta};
use super::{Coupling, Scheme, StepperParams};
use crate::fem::{BlockLayout, Discretisation, TimeTerm, Workspace};
use crate::kernel::{KernelError, KernelInput, Scratch, SpeciesKind};
use crate::linalg::{LinalgError, LinearSolver};
use crate::mesh::Mesh;
use crate::problem::{Problem, ProblemError};

/// Why a simulation could not continue.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum SolveError {
    /// The problem does not fit together.
    #[error(transparent)]
    Problem(#[from] ProblemError),
    /// A kernel was handed buffers of the wrong shape (a defect, not a user error).
    #[error("kernel evaluation failed: {0}")]
    Kernel(#[from] KernelError),
    /// The initial condition is not finite somewhere.
    #[error("initial value of `{species}` is {value} at node {node} ({x}, {y})")]
    InitialValue {
        /// Species.
        species: String,
        /// Node.
        node: usize,
        /// Coordinates.
        x: f64,
        /// Coordinates.
        y: f64,
        /// Value.
        value: f64,
    },
    /// The quasi-steady species could not be solved for at the start.
    #[error("could not solve for the quasi-steady species at t = {time}: {reason}")]
    QuasiSteadyStart {
        /// Time.
        time: f64,
        /// Why.
        reason: String,
    },
    /// Steps kept failing down to the minimum step size.
    #[error("step size {dt:.3e} fell below the minimum at t = {time:.6e}; last failure: {reason}")]
    StepTooSmall {
        /// Time of the last accepted state.
        time: f64,
        /// Step tried.
        dt: f64,
        /// The last rejection's reason.
        reason: String,
    },
    /// A fixed-step run could not take a step.
    #[error("fixed step dt = {dt:.3e} failed at t = {time:.6e}: {reason}")]
    FixedStepFailed {
        /// Time.
        time: f64,
        /// Step.
        dt: f64,
        /// Why.
        reason: String,
    },
    /// Invalid settings.
    #[error("invalid solver settings: {0}")]
    Settings(String),
}

/// Why one step attempt was rejected.
#[derive(Debug, Clone)]
enum Failure {
    Newton(String),
    Linear(LinalgError),
    NonFinite,
    Negative {
        species: usize,
        node: usize,
        value: f64,
    },
    Error(f64),
}

impl Failure {
    fn describe(&self, names: &[String]) -> String {
        match self {
            Failure::Newton(s) => format!("Newton: {s}"),
            Failure::Linear(e) => format!("linear solver: {e}"),
            Failure::NonFinite => "non-finite values".into(),
            Failure::Negative {
                species,
                node,
                value,
            } => format!(
                "`{}` negative ({value:.3e}) at node {node}",
                names[*species]
            ),
            Failure::Error(e) => format!("local error estimate {e:.3e} above tolerance"),
        }
    }
}

/// Counters over the life of a simulation.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct Stats {
    /// Accepted steps.
    pub steps: usize,
    /// Rejected step attempts.
    pub rejected: usize,
    /// Newton iterations (all attempts).
    pub newton_iterations: usize,
    /// Linear solves.
    pub linear_solves: usize,
    /// Jacobians assembled and factored (or preconditioned).
    pub jacobians: usize,
    /// Krylov iterations summed over linear solves.
    pub linear_iterations: usize,
}

/// What an observer sees after each accepted step.
#[derive(Clone, Debug)]
pub struct StepReport<'a> {
    /// Time reached.
    pub time: f64,
    /// Step just taken.
    pub dt: f64,
    /// Newton iterations of the accepted attempt.
    pub newton_iterations: usize,
    /// Attempts rejected before this step was accepted.
    pub rejections: usize,
    /// The new state, species × nodes.
    pub state: ArrayView2<'a, f64>,
}

/// An observer's answer.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Control {
    /// Go on.
    Continue,
    /// Stop after this step (e.g. on an interrupt).
    Stop,
}

/// How an `advance_to` call ended.
#[derive(Clone, Debug, PartialEq)]
pub enum Outcome {
    /// The target time was reached exactly.
    Reached,
    /// The observer asked to stop.
    Stopped,
    /// A suspected blow-up; the state is the last accepted one.
    BlowUp(Box<BlowupReport>),
}

/// One linear system: a layout over some species, its matrix and solver.
struct System {
    species: Vec<usize>,
    layout: BlockLayout,
    matrix: CsMat<f64>,
    solver: LinearSolver,
    /// Values of the matrix last prepared, kept for single-species systems: an operator that
    /// has not changed (pure diffusion with linear decay at a fixed dt) is not factored again.
    last_prepared: Option<Vec<f64>>,
}

/// A mesh, a problem, settings, and the evolving state.
pub struct Simulation {
    problem: Problem,
    mesh: Arc<Mesh>,
    disc: Discretisation,
    params: StepperParams,
    names: Vec<String>,
    n: usize,
    /// Accepted states, newest last (at most three): (time, state).
    history: Vec<(f64, Vec<f64>)>,
    dt_next: f64,
    stats: Stats,
    coupled: Option<System>,
    segregated: Vec<System>,
    ws: Workspace,
    monitor: Monitor,
    /// Redo the next attempt with backward Euler (after a BDF2 step left the positive cone).
    force_euler: bool,
    /// Time the run started at (the blow-up floor is relative to the span from here).
    t_start: f64,
}

impl std::fmt::Debug for Simulation {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Simulation")
            .field("time", &self.time())
            .field("nodes", &self.n)
            .field("species", &self.names)
            .field("stats", &self.stats)
            .finish_non_exhaustive()
    }
}

fn system(disc: &Discretisation, species: Vec<usize>, params: &StepperParams) -> System {
    let layout = disc.layout(&species);
    let matrix = layout.matrix(&disc.graph);
    let last_prepared = (species.len() == 1).then(Vec::new);
    System {
        species,
        layout,
        matrix,
        solver: LinearSolver::new(params.linear.clone()),
        last_prepared,
    }
}

impl Simulation {
    /// Sets up `problem` on `mesh` at time `t0`: evaluates the initial conditions and solves
    /// for the quasi-steady species.
    pub fn new(
        problem: Problem,
        mesh: Arc<Mesh>,
        params: StepperParams,
        t0: f64,
    ) -> Result<Self, SolveError> {
        problem.validate()?;
        check_params(&params)?;
        let n = mesh.num_nodes();
        let sc = problem.n_species();
        let disc = Discretisation::new(&mesh, &problem);
        let names: Vec<String> = problem.species.iter().map(|s| s.name.clone()).collect();
        // Initial values: the kernel reads species slices it ignores (zeros here).
        let zeros = vec![0.0; n];
        let slices: Vec<&[f64]> = (0..sc).map(|_| zeros.as_slice()).collect();
        let mut u0 = vec![0.0; sc * n];
        problem.initial.eval(
            &KernelInput {
                species: &slices,
                x: &disc.x,
                y: &disc.y,
                t: t0,
            },
            &mut u0,
            &mut Scratch::new(),
        )?;
        if let Some(k) = u0.iter().position(|v| !v.is_finite()) {
            return Err(SolveError::InitialValue {
                species: names[k / n].clone(),
                node: k % n,
                x: disc.x[k % n],
                y: disc.y[k % n],
                value: u0[k],
            });
        }
        let all: Vec<usize> = (0..sc).collect();
        let (coupled, segregated) = match params.coupling {
            Coupling::Newton => (Some(system(&disc, all, &params)), Vec::new()),
            Coupling::Lagged => (
                None,
                (0..sc).map(|s| system(&disc, vec![s], &params)).collect(),
            ),
        };
        let chemotactic = (0..sc)
            .map(|s| problem.chemotaxis.iter().any(|c| c.cells == s))
            .collect();
        let monitor = Monitor::new(params.blowup.clone(), &mesh, chemotactic, &u0);
        let mut sim = Simulation {
            problem,
            mesh,
            disc,
            names,
            n,
            history: Vec::new(),
            dt_next: params.dt_initial.unwrap_or(0.0),
            params,
            stats: Stats::default(),
            coupled,
            segregated,
            ws: Workspace::default(),
            monitor,
            force_euler: false,
            t_start: t0,
        };
        let steady: Vec<usize> = (0..sc).filter(|&s| sim.is_steady(s)).collect();
        if !steady.is_empty() {
            let mut sys = system(&sim.disc, steady, &sim.params);
            let hist = vec![0.0; sc * n];
            let time = TimeTerm {
                coef: 0.0,
                hist: &hist,
            };
            sim.newton(&mut sys, &mut u0, t0, time, 1.0, 4 * sim.params.max_newton)
                .map_err(|f| SolveError::QuasiSteadyStart {
                    time: t0,
                    reason: f.describe(&sim.names),
                })?;
            sim.monitor = Monitor::new(
                sim.params.blowup.clone(),
                &sim.mesh,
                (0..sc)
                    .map(|s| sim.problem.chemotaxis.iter().any(|c| c.cells == s))
                    .collect(),
                &u0,
            );
        }
        sim.history.push((t0, u0));
        Ok(sim)
    }

    /// Whether species `s` is quasi-steady (no time derivative; left out of error norms).
    fn is_steady(&self, s: usize) -> bool {
        matches!(
            self.problem.species[s].kind,
            SpeciesKind::QuasiSteady { .. }
        )
    }

    /// Current time.
    pub fn time(&self) -> f64 {
        self.history.last().map_or(0.0, |h| h.0)
    }

    /// Current state, species × nodes.
    pub fn state(&self) -> ArrayView2<'_, f64> {
        let u = self.history.last().map_or(&[][..], |h| h.1.as_slice());
        ArrayView2::from_shape((self.names.len(), self.n), u)
            .unwrap_or_else(|_| ArrayView2::from_shape((0, 0), &[]).expect("empty view"))
    }

    /// The state as one species-major slice.
    pub fn state_slice(&self) -> &[f64] {
        self.history.last().map_or(&[][..], |h| h.1.as_slice())
    }

    /// Species names.
    pub fn species_names(&self) -> &[String] {
        &self.names
    }

    /// The mesh.
    pub fn mesh(&self) -> &Arc<Mesh> {
        &self.mesh
    }

    /// The problem.
    pub fn problem(&self) -> &Problem {
        &self.problem
    }

    /// The settings.
    pub fn params(&self) -> &StepperParams {
        &self.params
    }

    /// Counters so far.
    pub fn stats(&self) -> Stats {
        self.stats
    }

    /// The step size the next attempt will start from (0 before the first step when chosen
    /// automatically).
    pub fn next_dt(&self) -> f64 {
        self.dt_next
    }

    /// Everything needed to continue this run exactly as if it had not stopped.
    pub fn checkpoint(&self) -> Checkpoint {
        Checkpoint {
            meta: Meta {
                species: self.names.clone(),
                nodes: self.n,
                dt_next: self.dt_next,
                stats: self.stats,
                force_euler: self.force_euler,
                monitor: self.monitor.clone(),
                times: self.history.iter().map(|h| h.0).collect(),
                t_start: self.t_start,
            },
            states: self.history.iter().map(|h| h.1.clone()).collect(),
        }
    }

    /// Continues from `checkpoint` with the same problem, mesh and settings it was taken with
    /// (the caller checks the model and mesh are the same; species and node counts are
    /// checked here).
    pub fn restore(
        problem: Problem,
        mesh: Arc<Mesh>,
        params: StepperParams,
        checkpoint: Checkpoint,
    ) -> Result<Self, CheckpointError> {
        let mismatch = |m: String| CheckpointError::Mismatch(m);
        let names: Vec<String> = problem.species.iter().map(|s| s.name.clone()).collect();
        if names != checkpoint.meta.species {
            return Err(mismatch(format!(
                "species {:?}, checkpoint has {:?}",
                names, checkpoint.meta.species
            )));
        }
        if mesh.num_nodes() != checkpoint.meta.nodes {
            return Err(mismatch(format!(
                "{} mesh nodes, checkpoint has {}",
                mesh.num_nodes(),
                checkpoint.meta.nodes
            )));
        }
        let t0 = checkpoint.meta.times.first().copied().unwrap_or(0.0);
        let mut sim =
            Simulation::new(problem, mesh, params, t0).map_err(|e| mismatch(e.to_string()))?;
        let Checkpoint { meta, states } = checkpoint;
        sim.history = meta.times.into_iter().zip(states).collect();
        sim.dt_next = meta.dt_next;
        sim.stats = meta.stats;
        sim.force_euler = meta.force_euler;
        sim.t_start = meta.t_start;
        sim.monitor = meta.monitor;
        sim.monitor.attach(&sim.mesh);
        Ok(sim)
    }

    /// Advances to exactly `t_end`, calling `observer` after every accepted step.
    pub fn advance_to(
        &mut self,
        t_end: f64,
        observer: &mut dyn FnMut(&StepReport<'_>) -> Control,
    ) -> Result<Outcome, SolveError> {
        let t_start = self.time();
        if !t_end.is_finite() || t_end < t_start {
            return Err(SolveError::Settings(format!(
                "target time {t_end} is before the current time {t_start}"
            )));
        }
        let floor = self.params.blowup.dt_floor * (t_end - self.t_start);
        if self.dt_next <= 0.0 {
            self.dt_next = self.initial_step(t_end - t_start)?;
        }
        let mut rejections = 0;
        let mut last_failure = String::new();
        loop {
            let t = self.time();
            let remaining = t_end - t;
            if remaining <= 1e-12 * t_end.abs().max(t_end - t_start).max(f64::MIN_POSITIVE) {
                // Land exactly on the target (the last step already aimed at it).
                if let Some(h) = self.history.last_mut() {
                    h.0 = t_end;
                }
                return Ok(Outcome::Reached);
            }
            let mut dt = self
                .dt_next
                .min(self.params.dt_max.unwrap_or(f64::INFINITY));
            let mut hits_end = false;
            if dt >= remaining * (1.0 - 1e-9) || dt > remaining {
                // The last step lands on the target (a fixed step that is a round-off away
                // from it keeps its size: the target is then taken as the new time).
                if self.params.adaptive || dt > remaining * (1.0 + 1e-9) {
                    dt = remaining;
                }
                hits_end = true;
            } else if dt > 0.5 * remaining && self.params.adaptive {
                // Two nearly equal steps rather than a long one and a sliver.
                dt = 0.5 * remaining;
            }
            if let Some(report) =
                self.monitor
                    .check(&self.mesh, &self.names, self.state_slice(), t, dt, floor)
            {
                return Ok(Outcome::BlowUp(Box::new(report)));
            }
            if dt < self.params.dt_min {
                return Err(SolveError::StepTooSmall {
                    time: t,
                    dt,
                    reason: last_failure,
                });
            }
            match self.attempt(dt) {
                Ok((u_new, newton, factor)) => {
                    let t_new = if hits_end { t_end } else { t + dt };
                    self.accept(t_new, u_new);
                    self.stats.steps += 1;
                    if self.params.adaptive {
                        self.dt_next = dt * factor;
                        if hits_end {
                            // The step was shortened to land on the target; keep the
                            // controller's proposal for the full step.
                            self.dt_next = self.dt_next.max(dt);
                        }
                    }
                    let u = &self.history[self.history.len() - 1].1;
                    self.monitor.record(&self.mesh, t_new, dt, u);
                    let report = StepReport {
                        time: t_new,
                        dt,
                        newton_iterations: newton,
                        rejections,
                        state: self.state(),
                    };
                    rejections = 0;
                    if observer(&report) == Control::Stop {
                        return Ok(Outcome::Stopped);
                    }
                }
                Err((failure, factor)) => {
                    self.stats.rejected += 1;
                    rejections += 1;
                    last_failure = failure.describe(&self.names);
                    if !self.params.adaptive && !self.force_euler {
                        return Err(SolveError::FixedStepFailed {
                            time: t,
                            dt,
                            reason: last_failure,
                        });
                    }
                    if !self.force_euler || matches!(failure, Failure::Error(_)) {
                        self.dt_next = dt * factor;
                    }
                }
            }
        }
    }

    fn accept(&mut self, t: f64, u: Vec<f64>) {
        self.force_euler = false;
        self.history.push((t, u));
        if self.history.len() > 3 {
            self.history.remove(0);
        }
    }

    /// A first step from the initial rates of change: the step over which the fastest
    /// species would change by about 1 % of its tolerance scale (common practice for
    /// starting step selection), bounded by 1 % of the span.
    fn initial_step(&mut self, span: f64) -> Result<f64, SolveError> {
        let n = self.n;
        let sc = self.names.len();
        let u = self.state_slice().to_vec();
        let hist = vec![0.0; sc * n];
        let mut g = vec![0.0; sc * n];
        self.disc
            .evaluate(&self.problem, &u, self.time(), false, &mut self.ws)?;
        self.disc.assemble(
            &self.problem,
            &u,
            TimeTerm {
                coef: 0.0,
                hist: &hist,
            },
            &mut self.ws,
            &mut g,
            None,
        );
        let mut rate: f64 = 0.0;
        for s in 0..sc {
            if self.is_steady(s) {
                continue;
            }
            for i in 0..n {
                let k = s * n + i;
                let du = g[k] / self.disc.mass[i];
                let w = self.params.atol + self.params.rtol * u[k].abs();
                if du.is_finite() {
                    rate = rate.max(du.abs() / w);
                }
            }
        }
        let mut dt = 0.01 * span;
        if rate > 0.0 {
            dt = dt.min(0.1 / rate);
        }
        Ok(dt.max(self.params.dt_min * 10.0).min(span))
    }

    /// One step attempt of size dt from the newest state: the new state, Newton iterations
    /// and the factor for the next step; or the failure and the factor to retry with.
    fn attempt(&mut self, dt: f64) -> Result<(Vec<f64>, usize, f64), (Failure, f64)> {
        let n = self.n;
        let sc = self.names.len();
        let t = self.time();
        let hlen = self.history.len();
        let bdf2 = self.params.scheme == Scheme::Bdf2 && hlen >= 2 && !self.force_euler;
        let un = self.history[hlen - 1].1.clone();
        let mut hist = vec![0.0; sc * n];
        let coef;
        if bdf2 {
            let (tp, up) = (&self.history[hlen - 2].0, &self.history[hlen - 2].1);
            let w = dt / (t - tp);
            coef = (1.0 + 2.0 * w) / ((1.0 + w) * dt);
            let a1 = -(1.0 + w) / dt;
            let a2 = w * w / ((1.0 + w) * dt);
            for k in 0..sc * n {
                hist[k] = a1 * un[k] + a2 * up[k];
            }
        } else {
            coef = 1.0 / dt;
            for k in 0..sc * n {
                hist[k] = -un[k] / dt;
            }
        }
        let time = TimeTerm { coef, hist: &hist };
        let mut u = un.clone();
        let iterations = self
            .solve_step(&mut u, t + dt, time)
            .map_err(|f| (f, 0.25))?;
        if u.iter().any(|v| !v.is_finite()) {
            return Err((Failure::NonFinite, 0.25));
        }
        if let Some(f) = self.negativity(&u) {
            if bdf2 {
                self.force_euler = true;
                return Err((f, 1.0));
            }
            return Err((f, 0.5));
        }
        if !self.params.adaptive {
            return Ok((u, iterations, 1.0));
        }
        // Local error from the distance to an explicit extrapolation of the accepted states
        // (Milne's device; the factor dt/(t_{n+1} − t_{n−k}) for order k is common practice).
        let order = if bdf2 { 2 } else { 1 };
        let points = hlen.min(order + 1);
        if points < 2 {
            // First step: no history to estimate from; the start-up step is small by design.
            return Ok((u, iterations, 1.0));
        }
        let ts: Vec<f64> = self.history[hlen - points..].iter().map(|h| h.0).collect();
        let t_new = t + dt;
        // Lagrange weights of the extrapolation to t_new through the last `points` states.
        let weights: Vec<f64> = (0..points)
            .map(|a| {
                (0..points)
                    .filter(|&b| b != a)
                    .map(|b| (t_new - ts[b]) / (ts[a] - ts[b]))
                    .product()
            })
            .collect();
        let scale = dt / (t_new - ts[0]);
        let mut sum = 0.0;
        let mut count = 0usize;
        for s in 0..sc {
            if self.is_steady(s) {
                continue;
            }
            for i in 0..n {
                let k = s * n + i;
                let pred: f64 = (0..points)
                    .map(|a| weights[a] * self.history[hlen - points + a].1[k])
                    .sum();
                let e = scale * (u[k] - pred);
                let w = self.params.atol + self.params.rtol * u[k].abs().max(un[k].abs());
                sum += (e / w) * (e / w);
                count += 1;
            }
        }
        let err = if count > 0 {
            (sum / count as f64).sqrt()
        } else {
            0.0
        };
        let p = f64::from(order as u8);
        let factor = if err > 0.0 {
            0.9 * err.powf(-1.0 / (p + 1.0))
        } else {
            2.0
        };
        if err > 1.0 {
            return Err((Failure::Error(err), factor.clamp(0.1, 0.9)));
        }
        Ok((u, iterations, factor.clamp(0.2, 2.0)))
    }

    fn negativity(&self, u: &[f64]) -> Option<Failure> {
        let tol = self.params.negativity_tol;
        if tol < 0.0 {
            return None;
        }
        let n = self.n;
        for s in 0..self.names.len() {
            let v = &u[s * n..(s + 1) * n];
            let big = v.iter().fold(0.0f64, |a, x| a.max(x.abs()));
            if let Some((node, &value)) = v.iter().enumerate().find(|(_, x)| **x < -tol * big) {
                return Some(Failure::Negative {
                    species: s,
                    node,
                    value,
                });
            }
        }
        None
    }

    /// Solves the step equations at `t_new` in place (u holds the initial guess).
    fn solve_step(
        &mut self,
        u: &mut [f64],
        t_new: f64,
        time: TimeTerm<'_>,
    ) -> Result<usize, Failure> {
        let max = self.params.max_newton;
        if let Some(mut sys) = self.coupled.take() {
            let r = self.newton(&mut sys, u, t_new, time, self.params.newton_tol, max);
            self.coupled = Some(sys);
            return r;
        }
        let mut systems = std::mem::take(&mut self.segregated);
        let mut total = 0;
        let mut result = Ok(0);
        for sys in systems.iter_mut() {
            // One linear solve per species: a single Newton iteration on its own block.
            match self.newton(sys, u, t_new, time, f64::INFINITY, 1) {
                Ok(k) => total += k,
                Err(f) => {
                    result = Err(f);
                    break;
                }
            }
        }
        self.segregated = systems;
        result.map(|_| total)
    }

    /// Error-weighted RMS of the residual rows of `sys`, each row divided by its node's mass
    /// and time coefficient so that it reads in the units of the state.
    fn residual_norm(&self, sys: &System, u: &[f64], g: &[f64], time: TimeTerm<'_>) -> f64 {
        let n = self.n;
        let mut sum = 0.0;
        for &s in &sys.species {
            let c = if self.is_steady(s) {
                1.0
            } else {
                time.coef.max(f64::MIN_POSITIVE)
            };
            for i in 0..n {
                let k = s * n + i;
                let w = self.params.atol + self.params.rtol * u[k].abs();
                let r = g[k] / (self.disc.mass[i] * c * w);
                sum += r * r;
            }
        }
        (sum / (sys.species.len() * n).max(1) as f64).sqrt()
    }

    /// Newton iterations on `sys` (the other species fixed), updating `u` in place. Stops when
    /// the error-weighted RMS norm of the update is at most `tol`, after `max` iterations.
    fn newton(
        &mut self,
        sys: &mut System,
        u: &mut [f64],
        t: f64,
        time: TimeTerm<'_>,
        tol: f64,
        max: usize,
    ) -> Result<usize, Failure> {
        let n = self.n;
        let sc = self.names.len();
        let dim = sys.layout.dim();
        let mut g = vec![0.0; sc * n];
        let mut rhs = vec![0.0; dim];
        let mut delta = vec![0.0; dim];
        let mut previous: Option<f64> = None;
        // Simplified Newton: the Jacobian and its factorization are kept while the iteration
        // contracts fast, and refreshed when it does not. Any Jacobian with the step's time
        // coefficient keeps conservation exact (its flux columns sum to zero).
        let mut fresh = true;
        let mut fresh_last;
        for it in 1..=max {
            self.disc
                .evaluate(&self.problem, u, t, fresh, &mut self.ws)
                .map_err(|e| Failure::Newton(e.to_string()))?;
            let jac = if fresh {
                Some((&sys.layout, sys.matrix.data_mut()))
            } else {
                None
            };
            self.disc
                .assemble(&self.problem, u, time, &mut self.ws, &mut g, jac);
            for (slot, &s) in sys.species.iter().enumerate() {
                for i in 0..n {
                    rhs[slot * n + i] = -g[s * n + i];
                }
            }
            if rhs.iter().any(|v| !v.is_finite()) {
                return Err(Failure::NonFinite);
            }
            let unchanged = sys
                .last_prepared
                .as_ref()
                .is_some_and(|v| v.as_slice() == sys.matrix.data());
            if fresh && !unchanged {
                if let Some(v) = sys.last_prepared.as_mut() {
                    v.clear();
                }
                sys.solver
                    .prepare(&sys.matrix, sys.species.len())
                    .map_err(Failure::Linear)?;
                if let Some(v) = sys.last_prepared.as_mut() {
                    v.extend_from_slice(sys.matrix.data());
                }
                self.stats.jacobians += 1;
            }
            fresh_last = fresh;
            delta.iter_mut().for_each(|d| *d = 0.0);
            let info = sys
                .solver
                .solve(&rhs, &mut delta)
                .map_err(Failure::Linear)?;
            self.stats.linear_solves += 1;
            self.stats.linear_iterations += info.iterations;
            self.stats.newton_iterations += 1;
            let mut sum = 0.0;
            for (slot, &s) in sys.species.iter().enumerate() {
                for i in 0..n {
                    let k = s * n + i;
                    let d = delta[slot * n + i];
                    let w = self.params.atol + self.params.rtol * u[k].abs();
                    sum += (d / w) * (d / w);
                }
            }
            let mut norm = (sum / dim.max(1) as f64).sqrt();
            if !norm.is_finite() {
                return Err(Failure::NonFinite);
            }
            // An update larger than the error tolerance means Newton is far from the
            // solution: backtrack (Armijo on the scaled residual) before taking it. Damped
            // updates keep conservation, since Newton started from a conserving state.
            let mut lambda = 1.0;
            if norm > 1.0 && tol.is_finite() {
                let rho0 = self.residual_norm(sys, u, &g, time);
                let mut trial = u.to_vec();
                let mut accepted = false;
                for _ in 0..6 {
                    for (slot, &s) in sys.species.iter().enumerate() {
                        for i in 0..n {
                            let k = s * n + i;
                            trial[k] = u[k] + lambda * delta[slot * n + i];
                        }
                    }
                    let ok = self
                        .disc
                        .evaluate(&self.problem, &trial, t, false, &mut self.ws)
                        .is_ok();
                    if ok {
                        self.disc
                            .assemble(&self.problem, &trial, time, &mut self.ws, &mut g, None);
                        let rho = self.residual_norm(sys, &trial, &g, time);
                        if rho.is_finite() && rho <= (1.0 - 1e-4 * lambda) * rho0 {
                            accepted = true;
                            break;
                        }
                    }
                    lambda *= 0.5;
                }
                if !accepted {
                    return Err(Failure::Newton(
                        "line search found no decrease of the residual".into(),
                    ));
                }
                norm *= lambda;
            }
            for (slot, &s) in sys.species.iter().enumerate() {
                for i in 0..n {
                    u[s * n + i] += lambda * delta[slot * n + i];
                }
            }
            if norm <= tol || it == max && tol.is_infinite() {
                return Ok(it);
            }
            // The Jacobian of a damped iteration is stale for the next one.
            let damped = lambda < 1.0;
            fresh = damped;
            if let Some(prev) = previous {
                let theta = norm / prev;
                if theta > 0.9 && fresh_last && it >= 3 {
                    // A contraction this poor will not converge in the iterations left.
                    return Err(Failure::Newton(format!(
                        "no contraction (update norm {norm:.3e} after {prev:.3e})"
                    )));
                }
                fresh = damped || theta > 0.25;
            }
            previous = Some(norm);
        }
        Err(Failure::Newton(format!(
            "not converged in {max} iterations"
        )))
    }
}

fn check_params(p: &StepperParams) -> Result<(), SolveError> {
    let bad = |what: &str| Err(SolveError::Settings(what.to_string()));
    if !(p.rtol > 0.0 && p.rtol.is_finite()) {
        return bad("rtol must be positive");
    }
    if !(p.atol > 0.0 && p.atol.is_finite()) {
        return bad("atol must be positive");
    }
    if !(p.dt_min > 0.0 && p.dt_min.is_finite()) {
        return bad("dt_min must be positive");
    }
    if let Some(d) = p.dt_initial {
        if !(d > 0.0 && d.is_finite()) {
            return bad("dt_initial must be positive");
        }
    }
    if !p.adaptive && p.dt_initial.is_none() {
        return bad("fixed steps need dt_initial");
    }
    if let Some(d) = p.dt_max {
        if !(d > 0.0 && d.is_finite()) {
            return bad("dt_max must be positive");
        }
    }
    if p.max_newton == 0 {
        return bad("max_newton must be at least 1");
    }
    Ok(())
}
