//! The nonlinear solve of one step: Newton on a coupled system, or the linearly implicit
//! per-species solves.

use sprs::CsMat;

use super::failure::Failure;
use super::simulation::Simulation;
use super::StepperParams;
use crate::fem::{BlockLayout, Discretisation, TimeTerm};
use crate::linalg::LinearSolver;

/// One linear system: a layout over some species, its matrix and solver.
pub(super) struct System {
    species: Vec<usize>,
    layout: BlockLayout,
    matrix: CsMat<f64>,
    solver: LinearSolver,
    /// Values of the matrix last prepared, kept for single-species systems: an operator that
    /// has not changed (pure diffusion with linear decay at a fixed dt) is not factored again.
    last_prepared: Option<Vec<f64>>,
}

pub(super) fn system(disc: &Discretisation, species: Vec<usize>, params: &StepperParams) -> System {
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

/// What the nonlinear solve of one step did.
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct StepSolve {
    /// Newton iterations (linear solves per species in the linearly implicit mode).
    pub iterations: usize,
    /// Error-weighted RMS norm of what the solve leaves undone (the splitting defect of the
    /// linearly implicit mode; 0 for Newton), in the units of the local error estimate.
    pub defect: f64,
}

impl Simulation {
    /// Solves the step equations at `t_new` in place (u holds the initial guess).
    pub(super) fn solve_step(
        &mut self,
        u: &mut [f64],
        t_new: f64,
        time: TimeTerm<'_>,
    ) -> Result<StepSolve, Failure> {
        let max = self.params.max_newton;
        if let Some(mut sys) = self.coupled.take() {
            let r = self.newton(&mut sys, u, t_new, time, self.params.newton_tol, max);
            self.coupled = Some(sys);
            return r.map(|iterations| StepSolve {
                iterations,
                defect: 0.0,
            });
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
        result.map(|_| StepSolve {
            iterations: total,
            defect: 0.0,
        })
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
    pub(super) fn newton(
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
