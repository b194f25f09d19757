//! The simulation value and its step loop.

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;

use ndarray::ArrayView2;

use super::blowup::{BlowupReport, Monitor};
use super::checkpoint::{Checkpoint, CheckpointError, Meta};
use super::failure::{Failure, SolveError};
use super::newton::{lagged_order, segregated_system, system, Buffers, System};
use super::{Coupling, StepperParams};
use crate::fem::{Discretisation, TimeTerm, Workspace};
use crate::kernel::{KernelInput, Scratch, SpeciesKind};
use crate::mesh::Mesh;
use crate::problem::Problem;

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
    /// Full preparations of a linear solver (factorizations, preconditioner builds); the
    /// other Jacobians only updated a frozen preconditioner.
    #[serde(default)]
    pub builds: usize,
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

/// A mesh, a problem, settings, and the evolving state.
pub struct Simulation {
    pub(super) problem: Problem,
    pub(super) mesh: Arc<Mesh>,
    pub(super) disc: Discretisation,
    pub(super) params: StepperParams,
    pub(super) names: Vec<String>,
    pub(super) n: usize,
    /// Accepted states, newest last (at most three; `max_order + 1` for the variable-order
    /// BDF): (time, state).
    pub(super) history: Vec<(f64, Vec<f64>)>,
    pub(super) dt_next: f64,
    pub(super) stats: Stats,
    pub(super) coupled: Option<System>,
    pub(super) segregated: Vec<System>,
    pub(super) ws: Workspace,
    /// Vectors of the nonlinear solve, reused every step.
    pub(super) buffers: Buffers,
    /// Checkpoints taken so far: preconditioners kept frozen across steps are rebuilt at
    /// the first Jacobian after one, so a run resumed from it repeats the same solves.
    pub(super) checkpoints: AtomicU64,
    pub(super) monitor: Monitor,
    /// Redo the next attempt with backward Euler (after a BDF2 step left the positive cone).
    pub(super) force_euler: bool,
    /// Time the run started at (the blow-up floor is relative to the span from here).
    pub(super) t_start: f64,
    /// Order of the next step of the variable-order BDF (1 to `max_order`).
    pub(super) order: usize,
    /// Steps accepted at `order` since it was last changed.
    pub(super) order_steps: usize,
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
        // The stepper's own negativity bound (−1e-12 of the species' largest value).
        for s in 0..sc {
            let v = &u0[s * n..(s + 1) * n];
            let top = v.iter().fold(0.0f64, |m, x| m.max(x.abs()));
            if let Some(i) = v.iter().position(|&x| x < -1e-12 * top) {
                return Err(SolveError::NegativeInitial {
                    species: names[s].clone(),
                    node: i,
                    x: disc.x[i],
                    y: disc.y[i],
                    value: v[i],
                });
            }
        }
        let all: Vec<usize> = (0..sc).collect();
        let chemotactic: Vec<bool> = (0..sc)
            .map(|s| problem.chemotaxis.iter().any(|c| c.cells == s))
            .collect();
        let (coupled, segregated) = match params.coupling {
            Coupling::Newton => (Some(system(&disc, all, &params)), Vec::new()),
            Coupling::Lagged => (
                None,
                lagged_order(&disc, &chemotactic)
                    .into_iter()
                    .map(|s| segregated_system(&disc, s, &params))
                    .collect(),
            ),
        };
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
            buffers: Buffers::default(),
            checkpoints: AtomicU64::new(0),
            monitor,
            force_euler: false,
            t_start: t0,
            order: 1,
            order_steps: 0,
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
    pub(super) fn is_steady(&self, s: usize) -> bool {
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
        self.checkpoints.fetch_add(1, Ordering::Relaxed);
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
                order: self.order,
                order_steps: self.order_steps,
                tags: Default::default(),
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
        sim.order = meta.order.max(1);
        sim.order_steps = meta.order_steps;
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

    pub(super) fn accept(&mut self, t: f64, u: Vec<f64>) {
        self.force_euler = false;
        self.history.push((t, u));
        if self.history.len() > self.history_cap() {
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
    if !(1..=super::BDF_MAX_ORDER).contains(&p.max_order) {
        return bad("max_order must be between 1 and 5");
    }
    Ok(())
}
