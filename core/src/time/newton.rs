//! The nonlinear solve of one step: inexact Newton on the coupled system, or the linearly
//! implicit per-species solves in dependency order.
//!
//! - Both start from the scheme's predictor (see `scheme.rs`), so a typical step needs one
//!   linear solve per system.
//! - Krylov solves stop relative to the Newton tolerance, not at a fixed tiny residual
//!   (inexact Newton; Eisenstat & Walker, "Choosing the forcing terms in an inexact Newton
//!   method", SIAM J. Sci. Comput. 17, 1996, in the weighted-norm form of common practice):
//!   the relative residual asked for is η·tol/ρ(b), where ρ is the error-weighted norm of a
//!   residual read in state units (rows divided by mass × time coefficient × weight), so the
//!   linear error stays a fixed share η of the Newton tolerance.
//! - Newton stops when that same weighted residual norm at the new iterate is below the
//!   Newton tolerance (or, in systems with quasi-steady rows, whose residuals have no time
//!   coefficient to read them by, when the update is).
//! - An iterative solve leaves a residual whose per-species sums would show up as drift of
//!   conserved quantities. Each solve is corrected by a multiple of the new iterate per species
//!   (values at zero stay there, none changes sign) that makes every species' residual sum
//!   zero (an S × S solve with the weighted block sums of the matrix), which
//!   restores exactly what a direct solve conserves: for every conserved combination, the
//!   combination of the Jacobian is the time coefficient times the mass-weighted sum.
//! - The linearly implicit mode solves each species once with the others at their latest
//!   values, signals and nutrients first, then chemotactic cells, then immobile species
//!   (a pointwise division). The coupled residual at the result, read as above, is the
//!   splitting defect: another sweep is made while it exceeds half the error target, and what
//!   remains is handed to the error estimate, so the controller sees the splitting error.
//! - Iterative preconditioners are kept frozen across Jacobians ([`LinearSolver::update`])
//!   while the time coefficient stays within 60 % of the one they were built for (so the
//!   switch from the backward Euler start-up step to BDF2, a factor 1.5, keeps them; two
//!   multigrid builds fewer per run) and the iteration counts stay within twice (plus three) those right after the build; otherwise,
//!   and at the first Jacobian after a checkpoint (so a resumed run repeats the same
//!   sequence), they are rebuilt.

use std::sync::atomic::Ordering;

use sprs::CsMat;

use super::failure::Failure;
use super::simulation::Simulation;
use super::StepperParams;
use crate::fem::{BlockKind, BlockLayout, Discretisation, TimeTerm};
use crate::kernel::SpeciesKind;
use crate::linalg::{LinearInfo, LinearSolver, Method};

/// Share of the Newton tolerance the linear error may take (η above).
const LINEAR_SHARE: f64 = 0.3;
/// Loosest relative residual a Krylov solve is stopped at.
const LINEAR_LOOSEST: f64 = 0.1;
/// The linearly implicit mode sweeps again while its defect is above this (error units).
const SWEEP_DEFECT: f64 = 0.5;
/// Sweeps of the linearly implicit mode per step at most.
const MAX_SWEEPS: usize = 3;
/// A frozen preconditioner is rebuilt when the time coefficient moved this far (relative).
/// On the `compare.sh` Keller–Segel case at 1e5 nodes, 0.6 instead of 0.2 saved two of four
/// multigrid builds and cost 6 Krylov iterations more over 20 steps (102 → 108).
const COEF_DRIFT: f64 = 0.6;

/// One linear system: a layout over some species, its matrix and solver.
pub(super) struct System {
    species: Vec<usize>,
    layout: BlockLayout,
    matrix: CsMat<f64>,
    solver: LinearSolver,
    /// Values of the matrix last prepared, kept for single-species systems: an operator that
    /// has not changed (pure diffusion with linear decay at a fixed dt) is not factored again.
    last_prepared: Option<Vec<f64>>,
    /// A single immobile species: its matrix is diagonal and solved by division.
    pointwise: bool,
    /// Time coefficient the preconditioner was built for.
    built_coef: f64,
    /// Krylov iterations of the first solve after the build.
    built_iterations: Option<usize>,
    /// Rebuild the preconditioner at the next Jacobian.
    rebuild: bool,
    /// Checkpoint generation seen at the last build.
    generation: u64,
    rhs: Vec<f64>,
    delta: Vec<f64>,
    product: Vec<f64>,
    /// Column sums of the matrix per block row: `colsum[r·dim + j]` = Σ over the rows of
    /// block r of a_ij, computed when the matrix is prepared, so the conservation
    /// correction after each solve needs two vector passes instead of a matrix pass.
    colsum: Vec<f64>,
}

/// Largest per-species block the linearly implicit mode solves directly when the method is
/// `Auto`. Its blocks change with every step, so a direct solve refactors each time, while a
/// frozen multigrid preconditioner is refreshed cheaply: on the `compare.sh` Keller–Segel case
/// (dt 1e-3, 20 steps, outputs included) the iterative path measured 0.13 s against 0.28 s at
/// 1,112 nodes, 0.16 against 0.78 at 3,189 and 0.40 against 1.26 at 10,602. Below this size
/// the direct solve stays, as it does for the small meshes of the verification suite.
pub(super) const SEGREGATED_DIRECT_LIMIT: usize = 1_000;

/// A per-species system of the linearly implicit mode (see [`SEGREGATED_DIRECT_LIMIT`]).
pub(super) fn segregated_system(disc: &Discretisation, s: usize, params: &StepperParams) -> System {
    let mut sys = system(disc, vec![s], params);
    if params.linear.method == Method::Auto && sys.layout.dim() > SEGREGATED_DIRECT_LIMIT {
        let mut linear = params.linear.clone();
        linear.method = Method::Iterative;
        sys.solver = LinearSolver::new(linear);
    }
    sys
}

pub(super) fn system(disc: &Discretisation, species: Vec<usize>, params: &StepperParams) -> System {
    let layout = disc.layout(&species);
    let matrix = layout.matrix(&disc.graph);
    let last_prepared = (species.len() == 1).then(Vec::new);
    let dim = layout.dim();
    System {
        pointwise: species.len() == 1 && disc.kind(species[0]) == SpeciesKind::Immobile,
        species,
        layout,
        matrix,
        solver: LinearSolver::new(params.linear.clone()),
        last_prepared,
        built_coef: f64::NAN,
        built_iterations: None,
        rebuild: true,
        generation: 0,
        rhs: vec![0.0; dim],
        delta: vec![0.0; dim],
        product: vec![0.0; dim],
        colsum: Vec::new(),
    }
}

/// The order of the linearly implicit solves: species the transport depends on (signals,
/// nutrients, quasi-steady species) first, then chemotactic cells, then immobile species;
/// model order within each group.
pub(super) fn lagged_order(disc: &Discretisation, chemotactic: &[bool]) -> Vec<usize> {
    let rank = |s: usize| match disc.kind(s) {
        SpeciesKind::Immobile => 2,
        _ if chemotactic[s] => 1,
        _ => 0,
    };
    let mut order: Vec<usize> = (0..chemotactic.len()).collect();
    order.sort_by_key(|&s| rank(s));
    order
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

/// Reusable vectors of the nonlinear solve (no allocation in the time loop).
#[derive(Default)]
pub(super) struct Buffers {
    g: Vec<f64>,
    trial: Vec<f64>,
}

/// Fills `sys.colsum` from the system's matrix (see [`System::colsum`]).
fn column_sums(sys: &mut System, n: usize) {
    let blocks = sys.species.len();
    let dim = blocks * n;
    sys.colsum.clear();
    sys.colsum.resize(blocks * dim, 0.0);
    let a = &sys.matrix;
    let (ptr, idx, vals) = (a.indptr(), a.indices(), a.data());
    for i in 0..dim {
        let cs = &mut sys.colsum[(i / n) * dim..(i / n + 1) * dim];
        for (&j, &v) in idx[ptr.outer_inds_sz(i)]
            .iter()
            .zip(&vals[ptr.outer_inds_sz(i)])
        {
            cs[j] += v;
        }
    }
}

impl Simulation {
    /// Solves the step equations at `t_new` in place (u holds the predictor).
    pub(super) fn solve_step(
        &mut self,
        u: &mut [f64],
        t_new: f64,
        time: TimeTerm<'_>,
    ) -> Result<StepSolve, Failure> {
        let len = u.len();
        self.buffers.g.resize(len, 0.0);
        self.buffers.trial.resize(len, 0.0);
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
        let result = self.sweeps(&mut systems, u, t_new, time);
        self.segregated = systems;
        result
    }

    /// The linearly implicit mode: sweeps of one linear solve per species (in the order of
    /// `systems`) until the coupled residual is within the sweep threshold.
    fn sweeps(
        &mut self,
        systems: &mut [System],
        u: &mut [f64],
        t_new: f64,
        time: TimeTerm<'_>,
    ) -> Result<StepSolve, Failure> {
        let mut total = 0;
        let mut defect = 0.0;
        // Species whose equations depend on a species solved after them: their residuals
        // are what the splitting leaves. The others' residuals after their own solve are
        // the linear residual (within the Newton tolerance) and the linearisation remainder,
        // second order in the correction from the predictor, so they are not re-assembled.
        let order: Vec<usize> = systems.iter().map(|sys| sys.species[0]).collect();
        let backward: Vec<usize> = order
            .iter()
            .enumerate()
            .filter(|&(k, &r)| {
                order[k + 1..]
                    .iter()
                    .any(|&s| self.disc.block_kind(r, s) != BlockKind::None)
            })
            .map(|(_, &r)| r)
            .collect();
        for _ in 0..MAX_SWEEPS {
            for sys in systems.iter_mut() {
                total += self.newton(sys, u, t_new, time, f64::INFINITY, 1)?;
            }
            if backward.is_empty() {
                break;
            }
            let mut g = std::mem::take(&mut self.buffers.g);
            let evaluated = self
                .disc
                .evaluate_for(
                    &self.problem,
                    u,
                    t_new,
                    false,
                    &mut self.ws,
                    Some(&backward),
                )
                .map_err(|e| Failure::Newton(e.to_string()));
            if let Err(e) = evaluated {
                self.buffers.g = g;
                return Err(e);
            }
            self.disc.assemble_for(
                &self.problem,
                u,
                time,
                &mut self.ws,
                &mut g,
                None,
                Some(&backward),
            );
            // The RMS over all species (the others contribute nothing).
            let share = (backward.len() as f64 / order.len() as f64).sqrt();
            defect = share * self.weighted_residual(&backward, u, &g, time);
            self.buffers.g = g;
            if !defect.is_finite() {
                return Err(Failure::NonFinite);
            }
            if defect <= SWEEP_DEFECT {
                break;
            }
        }
        Ok(StepSolve {
            iterations: total,
            defect,
        })
    }

    /// Error-weighted RMS of the residual rows of `species`, each row divided by its node's
    /// mass and time coefficient so that it reads in the units of the state.
    fn weighted_residual(
        &self,
        species: &[usize],
        u: &[f64],
        g: &[f64],
        time: TimeTerm<'_>,
    ) -> f64 {
        let n = self.n;
        let mut sum = 0.0;
        for &s in species {
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
        (sum / (species.len() * n).max(1) as f64).sqrt()
    }

    /// Evaluates the kernels the rows of `sys` need at `u` and assembles their residual into
    /// `g` (and the Jacobian into the system's matrix when `jac`).
    fn residual(
        &mut self,
        sys: &mut System,
        u: &[f64],
        t: f64,
        time: TimeTerm<'_>,
        g: &mut [f64],
        jac: bool,
    ) -> Result<(), Failure> {
        let only = (sys.species.len() < self.names.len()).then_some(sys.species.as_slice());
        self.disc
            .evaluate_for(&self.problem, u, t, jac, &mut self.ws, only)
            .map_err(|e| Failure::Newton(e.to_string()))?;
        let matrix = jac.then(|| (&sys.layout, sys.matrix.data_mut()));
        self.disc
            .assemble_for(&self.problem, u, time, &mut self.ws, g, matrix, only);
        Ok(())
    }

    /// Hands the freshly assembled matrix of `sys` to its solver: nothing when it has not
    /// changed, a cheap update of a frozen preconditioner while that stays effective, a full
    /// preparation otherwise.
    fn prepare(&mut self, sys: &mut System, coef: f64) -> Result<(), Failure> {
        if sys.pointwise {
            self.stats.jacobians += 1;
            return Ok(());
        }
        let generation = self.checkpoints.load(Ordering::Relaxed);
        let unchanged = generation == sys.generation
            && sys
                .last_prepared
                .as_ref()
                .is_some_and(|v| v.as_slice() == sys.matrix.data());
        if unchanged {
            return Ok(());
        }
        self.stats.jacobians += 1;
        column_sums(sys, self.n);
        let frozen = sys.solver.method() == Some(Method::Iterative)
            && !sys.rebuild
            && generation == sys.generation
            && ((coef - sys.built_coef) / sys.built_coef).abs() <= COEF_DRIFT;
        let updated = frozen && sys.solver.update(&sys.matrix).is_ok();
        if !updated {
            sys.solver
                .prepare(&sys.matrix, sys.species.len())
                .map_err(Failure::Linear)?;
            self.stats.builds += 1;
            sys.built_coef = coef;
            sys.built_iterations = None;
            sys.rebuild = false;
            sys.generation = generation;
        }
        if let Some(v) = sys.last_prepared.as_mut() {
            v.clear();
            v.extend_from_slice(sys.matrix.data());
        }
        Ok(())
    }

    /// Solves the system's matrix times `delta` = `rhs` to relative residual `rtol`.
    fn linear_solve(
        &mut self,
        sys: &mut System,
        u: &[f64],
        rtol: f64,
    ) -> Result<LinearInfo, Failure> {
        sys.delta.fill(0.0);
        if sys.pointwise {
            let (ptr, vals) = (sys.matrix.indptr(), sys.matrix.data());
            for (i, (d, b)) in sys.delta.iter_mut().zip(&sys.rhs).enumerate() {
                let range = ptr.outer_inds_sz(i);
                let diag: f64 = vals[range].iter().sum();
                if diag == 0.0 || !diag.is_finite() {
                    return Err(Failure::Linear(crate::linalg::LinalgError::Singular {
                        index: i,
                    }));
                }
                *d = b / diag;
            }
            return Ok(LinearInfo {
                method: Method::Direct,
                iterations: 0,
                relative_residual: 0.0,
            });
        }
        let info = sys
            .solver
            .solve_to(&sys.rhs, &mut sys.delta, rtol)
            .map_err(Failure::Linear)?;
        if info.method == Method::Iterative {
            match sys.built_iterations {
                None => sys.built_iterations = Some(info.iterations),
                Some(base) if info.iterations > 2 * base + 3 => sys.rebuild = true,
                Some(_) => {}
            }
            self.conserve(sys, u);
        }
        Ok(info)
    }

    /// Corrects each species' part of the update by a multiple of the new iterate itself
    /// (so a value at zero stays at zero and none changes sign) such that every species'
    /// linear residual sums to zero (see the module docs; the argument holds for any
    /// correction vector, the proportional one keeps positivity).
    fn conserve(&self, sys: &mut System, u: &[f64]) {
        let n = self.n;
        let blocks = sys.species.len();
        // Weights: the new iterate, clamped at zero.
        for (slot, &s) in sys.species.iter().enumerate() {
            for i in 0..n {
                let k = slot * n + i;
                sys.product[k] = (u[s * n + i] + sys.delta[k]).max(0.0);
            }
        }
        // Residual sums ρ_r = Σ_rows(r) (b − A δ)_i and weighted block sums
        // C_rs = Σ_rows(r) Σ_cols(s) a_ij w_j, both through the column sums of block row r.
        let dim = blocks * n;
        let mut rho = vec![0.0; blocks];
        let mut c = vec![0.0; blocks * blocks];
        for r in 0..blocks {
            let cs = &sys.colsum[r * dim..(r + 1) * dim];
            let b: f64 = sys.rhs[r * n..(r + 1) * n].iter().sum();
            let ax: f64 = cs.iter().zip(&sys.delta).map(|(a, d)| a * d).sum();
            rho[r] = b - ax;
            for q in 0..blocks {
                let range = q * n..(q + 1) * n;
                c[r * blocks + q] = cs[range.clone()]
                    .iter()
                    .zip(&sys.product[range])
                    .map(|(a, w)| a * w)
                    .sum();
            }
        }
        // A species that is zero everywhere gets no correction.
        for r in 0..blocks {
            if sys.product[r * n..(r + 1) * n].iter().all(|w| *w == 0.0) {
                for q in 0..blocks {
                    c[r * blocks + q] = 0.0;
                    c[q * blocks + r] = 0.0;
                }
                c[r * blocks + r] = 1.0;
                rho[r] = 0.0;
            }
        }
        if let Some(factor) = small_solve(&c, &rho, blocks) {
            for (r, f) in factor.iter().enumerate() {
                let range = r * n..(r + 1) * n;
                for (d, w) in sys.delta[range.clone()].iter_mut().zip(&sys.product[range]) {
                    *d += f * w;
                }
            }
        }
    }

    /// Newton iterations on `sys` (the other species fixed), updating `u` in place. With a
    /// finite `tol`, stops when the weighted residual (or, with quasi-steady rows, the
    /// update) is at most `tol`, after at most `max` iterations; with `tol` infinite, makes
    /// exactly one linearised solve (the linearly implicit mode).
    pub(super) fn newton(
        &mut self,
        sys: &mut System,
        u: &mut [f64],
        t: f64,
        time: TimeTerm<'_>,
        tol: f64,
        max: usize,
    ) -> Result<usize, Failure> {
        let mut g = std::mem::take(&mut self.buffers.g);
        let mut trial = std::mem::take(&mut self.buffers.trial);
        g.resize(u.len(), 0.0);
        trial.resize(u.len(), 0.0);
        let result = self.newton_with(sys, u, t, time, tol, max, &mut g, &mut trial);
        self.buffers.g = g;
        self.buffers.trial = trial;
        result
    }

    #[allow(clippy::too_many_arguments)]
    fn newton_with(
        &mut self,
        sys: &mut System,
        u: &mut [f64],
        t: f64,
        time: TimeTerm<'_>,
        tol: f64,
        max: usize,
        g: &mut [f64],
        trial: &mut [f64],
    ) -> Result<usize, Failure> {
        let n = self.n;
        let dim = sys.layout.dim();
        let species = sys.species.clone();
        let steady_rows = species.iter().any(|&s| self.is_steady(s));
        // The Newton tolerance also sets the linear one in the linearly implicit mode.
        let target = if tol.is_finite() {
            tol
        } else {
            self.params.newton_tol
        };
        let floor = self.params.linear.rtol;
        let mut previous: Option<f64> = None;
        // Simplified Newton: the Jacobian is kept while the iteration contracts fast and
        // refreshed when it does not. Any Jacobian with the step's time coefficient keeps
        // conservation exact (its flux columns sum to zero).
        let mut fresh = true;
        let mut have_residual = false;
        for it in 1..=max {
            if fresh || !have_residual {
                self.residual(sys, u, t, time, g, fresh)?;
            }
            if fresh {
                self.prepare(sys, time.coef)?;
            }
            let fresh_last = fresh;
            for (slot, &s) in species.iter().enumerate() {
                for i in 0..n {
                    sys.rhs[slot * n + i] = -g[s * n + i];
                }
            }
            if sys.rhs.iter().any(|v| !v.is_finite()) {
                return Err(Failure::NonFinite);
            }
            let rho_b = self.weighted_residual(&species, u, g, time);
            let rtol = if rho_b > 0.0 {
                (LINEAR_SHARE * target / rho_b).clamp(floor, LINEAR_LOOSEST.max(floor))
            } else {
                floor
            };
            let info = self.linear_solve(sys, u, rtol)?;
            self.stats.linear_solves += 1;
            self.stats.linear_iterations += info.iterations;
            self.stats.newton_iterations += 1;
            let mut sum = 0.0;
            for (slot, &s) in species.iter().enumerate() {
                for i in 0..n {
                    let k = s * n + i;
                    let d = sys.delta[slot * n + i];
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
            // updates keep conservation: every Newton update restores the conserved
            // combinations (module docs), and a damped one moves along such an update.
            let mut lambda = 1.0;
            have_residual = false;
            if norm > 1.0 && tol.is_finite() {
                let rho0 = rho_b;
                let mut accepted = false;
                for _ in 0..6 {
                    trial.copy_from_slice(u);
                    for (slot, &s) in species.iter().enumerate() {
                        for i in 0..n {
                            let k = s * n + i;
                            trial[k] = u[k] + lambda * sys.delta[slot * n + i];
                        }
                    }
                    if self.residual(sys, trial, t, time, g, false).is_ok() {
                        let rho = self.weighted_residual(&species, trial, g, time);
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
                have_residual = true;
                norm *= lambda;
            }
            for (slot, &s) in species.iter().enumerate() {
                for i in 0..n {
                    u[s * n + i] += lambda * sys.delta[slot * n + i];
                }
            }
            if tol.is_infinite() {
                return Ok(it);
            }
            if !have_residual {
                self.residual(sys, u, t, time, g, false)?;
                have_residual = true;
            }
            let rho = self.weighted_residual(&species, u, g, time);
            if !rho.is_finite() {
                return Err(Failure::NonFinite);
            }
            let converged = if steady_rows {
                norm <= tol
            } else {
                rho <= tol || norm <= tol * LINEAR_SHARE
            };
            if converged {
                return Ok(it);
            }
            // The Jacobian of a damped iteration is stale for the next one.
            let damped = lambda < 1.0;
            let measure = if steady_rows { norm } else { rho };
            fresh = damped;
            if let Some(prev) = previous {
                let theta = measure / prev;
                if theta > 0.9 && fresh_last && it >= 3 {
                    // A contraction this poor will not converge in the iterations left.
                    return Err(Failure::Newton(format!(
                        "no contraction (residual {measure:.3e} after {prev:.3e})"
                    )));
                }
                fresh = damped || theta > 0.25;
            }
            previous = Some(measure);
        }
        Err(Failure::Newton(format!(
            "not converged in {max} iterations"
        )))
    }
}

/// Solves the small dense system `c x = b` (row-major, `k` × `k`) by Gaussian elimination
/// with partial pivoting; `None` when a pivot is negligible (hand-written: a few unknowns,
/// not worth a dense factorization object).
fn small_solve(c: &[f64], b: &[f64], k: usize) -> Option<Vec<f64>> {
    let mut a = c.to_vec();
    let mut x = b.to_vec();
    let scale = a.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    if scale == 0.0 || !scale.is_finite() {
        return None;
    }
    for col in 0..k {
        let pivot =
            (col..k).max_by(|&p, &q| a[p * k + col].abs().total_cmp(&a[q * k + col].abs()))?;
        if a[pivot * k + col].abs() <= 1e-12 * scale {
            return None;
        }
        if pivot != col {
            for j in 0..k {
                a.swap(col * k + j, pivot * k + j);
            }
            x.swap(col, pivot);
        }
        for row in col + 1..k {
            let f = a[row * k + col] / a[col * k + col];
            for j in col..k {
                a[row * k + j] -= f * a[col * k + j];
            }
            x[row] -= f * x[col];
        }
    }
    for col in (0..k).rev() {
        let mut s = x[col];
        for j in col + 1..k {
            s -= a[col * k + j] * x[j];
        }
        x[col] = s / a[col * k + col];
    }
    x.iter().all(|v| v.is_finite()).then_some(x)
}

#[cfg(test)]
mod tests {
    use super::small_solve;

    #[test]
    fn small_solve_matches_a_hand_solution() {
        // [[2, 1], [1, 3]] x = [3, 5] has x = (4/5, 7/5) (exact arithmetic).
        let x = small_solve(&[2.0, 1.0, 1.0, 3.0], &[3.0, 5.0], 2).unwrap();
        assert!((x[0] - 0.8).abs() < 1e-15 && (x[1] - 1.4).abs() < 1e-15);
        // Pivoting: a zero leading entry.
        let x = small_solve(&[0.0, 1.0, 1.0, 0.0], &[2.0, 3.0], 2).unwrap();
        assert_eq!(x, vec![3.0, 2.0]);
        assert!(small_solve(&[1.0, 2.0, 2.0, 4.0], &[1.0, 1.0], 2).is_none());
    }
}
