//! Sparse linear algebra for the implicit steps: one [`LinearSolver`] per system, prepared for a
//! matrix (numeric factorization or preconditioner set-up, the symbolic analysis reused while
//! the sparsity pattern stays the same) and then used for any number of right-hand sides.
//!
//! Matrices are `sprs` CSR with sorted column indices, square. The module's parts:
//!
//! - `direct.rs`: [`DirectLu`], faer sparse LU (a CSR matrix is the CSC storage of its
//!   transpose, so no copy is made: the transpose is factored and solved transposed).
//! - `cholesky.rs`: [`SpdSolver`], faer sparse LLᵀ for symmetric positive definite operators
//!   factored once (a species whose operator does not change); the direct path of
//!   [`LinearSolver`] also uses it for symmetric matrices (several times faster than LU).
//! - `krylov.rs`: CG, BiCGSTAB, restarted GMRES (right preconditioned), stopping on the true
//!   residual; a solve that does not reach the tolerance is [`LinalgError::NotConverged`].
//! - `precond.rs`: Jacobi, ILU(0), and block preconditioners over species blocks (block
//!   Gauss–Seidel or block diagonal; an immobile species' diagonal block is inverted exactly).
//! - `amg.rs`: smoothed-aggregation multigrid V-cycle, aggregates reused on new values; the
//!   pre-smoothing sweep from zero reads only the lower triangle and is fused with its
//!   residual, which then needs only the upper one.
//! - `ops.rs`: dot products with 8 accumulators, the solver's own CSR (`u32` columns), and
//!   `for_rows`, the row loop behind the mat-vec and the multigrid transfers (rayon over row
//!   chunks from 200,000 stored entries; each row summed in order, so results do not depend
//!   on the thread count).
//!
//! A sequence of systems on one pattern (Newton iterations, time steps) has two ways in:
//!
//! - [`LinearSolver::prepare`]: full set-up for new values (direct: numeric refactorization
//!   on the kept symbolic analysis; iterative: preconditioner recomputed, multigrid keeping
//!   only its aggregates and patterns).
//! - [`LinearSolver::update`]: new values on the pattern of the last successful prepare,
//!   cheaply. The direct path refactors (as prepare). The iterative path copies the values
//!   into the matrix it multiplies with and keeps the preconditioner frozen except for what
//!   is cheap to refresh: multigrid keeps aggregates, prolongators, coarse Galerkin matrices
//!   and the coarse LU and refreshes only the finest level's inverse diagonal (the cycle
//!   smooths and forms residuals with the new matrix); Jacobi refreshes its diagonal; ILU(0)
//!   refactors in place; block preconditioners update each block so. The preconditioner
//!   kinds chosen at prepare are kept. Meant for matrices near the prepared one (a changed
//!   time coefficient, a Newton iteration); when iteration counts grow, prepare again.
//!
//! Solves stop at [`LinearParams::rtol`] ([`LinearSolver::solve`]) or at a tolerance given
//! per solve ([`LinearSolver::solve_to`], for inexact Newton); both report the iterations,
//! the cheap trend a caller watches to decide when to prepare again.
//!
//! Reproducibility: faer factorizations run sequentially by default
//! ([`LinearParams::factor_threads`] = 1), every iteration is sequential or row-parallel with
//! a fixed summation order, so results are bitwise repeatable.

mod amg;
mod cholesky;
mod direct;
mod krylov;
mod ops;
mod precond;
#[cfg(test)]
mod testmats;
#[cfg(test)]
mod tests;

use serde::{Deserialize, Serialize};
use sprs::CsMat;
use thiserror::Error;

pub use cholesky::SpdSolver;
pub use direct::DirectLu;
pub use krylov::Krylov;
pub use precond::{BlockScheme, Preconditioner};

use ops::Csr;
use precond::{Apply, Block, Scalar};

/// Which family of method solves the linear systems.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// Chosen by system size (direct up to [`LinearParams::direct_limit`] unknowns).
    #[default]
    Auto,
    /// Sparse LU (faer), symbolic analysis reused.
    Direct,
    /// Preconditioned Krylov iteration.
    Iterative,
}

/// Settings of a linear solver.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct LinearParams {
    /// Method family.
    pub method: Method,
    /// Largest system [`Method::Auto`] solves directly.
    pub direct_limit: usize,
    /// Relative residual ‖b − Ax‖/‖b‖ at which an iteration stops.
    pub rtol: f64,
    /// Iteration cap.
    pub max_iterations: usize,
    /// Krylov method of the iterative path.
    pub krylov: Krylov,
    /// Preconditioner of the iterative path (per species block when `blocks` > 1).
    pub preconditioner: Preconditioner,
    /// How species blocks are combined when `blocks` > 1.
    pub block_scheme: BlockScheme,
    /// Krylov vectors kept by GMRES before it restarts.
    pub gmres_restart: usize,
    /// Threads faer may use in direct factorizations and solves: 1 (default) is sequential
    /// and bitwise reproducible; other counts let faer split dense kernels over rayon
    /// (0 = the whole pool).
    pub factor_threads: usize,
    /// Whether the direct path factors a numerically symmetric matrix by Cholesky (falling
    /// back to LU when it is not positive definite). Measured several times faster than LU
    /// for M + dt·K (see `benches/linalg.rs`).
    pub cholesky_when_symmetric: bool,
}

impl Default for LinearParams {
    fn default() -> Self {
        Self {
            method: Method::Auto,
            direct_limit: 20_000,
            rtol: 1e-10,
            max_iterations: 500,
            krylov: Krylov::Auto,
            preconditioner: Preconditioner::Auto,
            block_scheme: BlockScheme::GaussSeidel,
            gmres_restart: 30,
            factor_threads: 1,
            cholesky_when_symmetric: true,
        }
    }
}

/// What one solve did.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LinearInfo {
    /// Method that solved it.
    pub method: Method,
    /// Krylov iterations (0 for a direct solve).
    pub iterations: usize,
    /// True relative residual ‖b − Ax‖/‖b‖ reached (0 for a direct solve, not computed).
    pub relative_residual: f64,
}

/// Why a linear solve failed. The time stepper treats every variant as a failed step.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum LinalgError {
    /// The factorization met a zero pivot.
    #[error("the matrix is singular (zero pivot at column {index})")]
    Singular {
        /// Column of the failed pivot.
        index: usize,
    },
    /// The iteration did not reach the tolerance.
    #[error("the iteration did not converge: relative residual {residual:.3e} after {iterations} iterations")]
    NotConverged {
        /// Iterations done.
        iterations: usize,
        /// Relative residual reached.
        residual: f64,
    },
    /// Matrix or vector shapes disagree.
    #[error("shape mismatch: {0}")]
    Shape(String),
    /// The matrix or right-hand side holds NaN or infinity.
    #[error("non-finite value in the linear system")]
    NonFinite,
    /// Memory or another failure inside the factorization library.
    #[error("factorization failed: {0}")]
    Backend(String),
    /// [`LinearSolver::update`] cannot reuse the last prepare (none succeeded, or the pattern,
    /// shape or block count differs): call [`LinearSolver::prepare`].
    #[error("the solver needs a prepare: {0}")]
    NeedsPrepare(String),
    /// A solve was asked for a tolerance that is not a positive finite number.
    #[error("invalid relative tolerance {0}")]
    InvalidTolerance(f64),
    /// A solver for symmetric matrices was given a nonsymmetric one.
    #[error("the matrix is not symmetric")]
    NotSymmetric,
    /// The Cholesky factorization met a non-positive pivot.
    #[error("the matrix is not positive definite (pivot at column {index})")]
    NotPositiveDefinite {
        /// Column of the failed pivot.
        index: usize,
    },
}

/// The preconditioner of the iterative path.
enum Pc {
    Scalar(Scalar),
    Block(Block),
}

impl Pc {
    fn as_apply(&mut self) -> &mut dyn Apply {
        match self {
            Pc::Scalar(p) => p,
            Pc::Block(p) => p,
        }
    }
}

/// Iterative path state: the matrix copy the iteration multiplies with (the only full copy:
/// block and multigrid parts read it or hold only what they must), its preconditioner and
/// the Krylov work vectors.
struct Iterative {
    a: Csr,
    work: krylov::Work,
    blocks: usize,
    symmetric: bool,
    krylov: Krylov,
    pc: Pc,
}

/// A linear solver for a sequence of matrices sharing one sparsity pattern.
pub struct LinearSolver {
    params: LinearParams,
    lu: Option<DirectLu>,
    cholesky: Option<SpdSolver>,
    /// Whether the last direct prepare factored by Cholesky.
    use_cholesky: bool,
    iterative: Option<Iterative>,
    /// Method of the last successful prepare (`None` before one, or after a failed one).
    ready: Option<Method>,
}

impl std::fmt::Debug for LinearSolver {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("LinearSolver")
            .field("params", &self.params)
            .field("ready", &self.ready)
            .field("krylov", &self.krylov())
            .finish_non_exhaustive()
    }
}

impl LinearSolver {
    /// A solver with the given settings; nothing is analysed until [`LinearSolver::prepare`].
    pub fn new(params: LinearParams) -> Self {
        Self {
            params,
            lu: None,
            cholesky: None,
            use_cholesky: false,
            iterative: None,
            ready: None,
        }
    }

    /// The settings.
    pub fn params(&self) -> &LinearParams {
        &self.params
    }

    /// Method ([`Method::Direct`] or [`Method::Iterative`]) chosen by the last successful
    /// prepare.
    pub fn method(&self) -> Option<Method> {
        self.ready
    }

    /// Krylov method the iterative path will use for the prepared matrix (`Auto` resolved).
    pub fn krylov(&self) -> Option<Krylov> {
        match self.ready {
            Some(Method::Iterative) => self.iterative.as_ref().map(|it| it.krylov),
            _ => None,
        }
    }

    /// Prepares for solves with `a` (square CSR, sorted indices). `blocks` is the number of
    /// equal, contiguous diagonal blocks the unknowns form (species-major ordering), which
    /// block preconditioners use; 1 for a scalar system.
    pub fn prepare(&mut self, a: &CsMat<f64>, blocks: usize) -> Result<(), LinalgError> {
        self.ready = None;
        check_square(a)?;
        if blocks == 0 || a.rows() % blocks != 0 {
            return Err(LinalgError::Shape(format!(
                "{} unknowns do not form {blocks} equal blocks",
                a.rows()
            )));
        }
        check_finite(a.data())?;
        let method = match self.params.method {
            Method::Auto if a.rows() <= self.params.direct_limit => Method::Direct,
            Method::Auto => Method::Iterative,
            m => m,
        };
        match method {
            Method::Direct => self.prepare_direct(a)?,
            _ => {
                let result = self.prepare_iterative(a, blocks);
                if result.is_err() {
                    self.iterative = None;
                }
                result?
            }
        }
        self.ready = Some(method);
        Ok(())
    }

    fn prepare_direct(&mut self, a: &CsMat<f64>) -> Result<(), LinalgError> {
        // Both factors are kept, so a matrix that alternates between symmetric and not (the
        // transport operator while the potential is flat) keeps both symbolic analyses.
        let threads = self.params.factor_threads;
        self.use_cholesky = false;
        if self.params.cholesky_when_symmetric && ops::sprs_is_symmetric(a, 1e-13) {
            let result = match &mut self.cholesky {
                Some(c) if c.same_pattern(a) => c.refactor(a),
                slot => {
                    *slot = None;
                    SpdSolver::with_threads(a, threads).map(|c| *slot = Some(c))
                }
            };
            match result {
                Ok(()) => {
                    self.use_cholesky = true;
                    return Ok(());
                }
                // Symmetric but indefinite: LU handles it.
                Err(LinalgError::NotPositiveDefinite { .. }) => self.cholesky = None,
                Err(e) => return Err(e),
            }
        }
        match &mut self.lu {
            Some(lu) if lu.same_pattern(a) => lu.refactor(a),
            slot => {
                *slot = None;
                *slot = Some(DirectLu::with_threads(a, threads)?);
                Ok(())
            }
        }
    }

    /// Whether the direct path holds a Cholesky factor (the last prepared matrix was
    /// symmetric positive definite and [`LinearParams::cholesky_when_symmetric`] is on).
    pub fn uses_cholesky(&self) -> bool {
        self.ready == Some(Method::Direct) && self.use_cholesky
    }

    fn prepare_iterative(&mut self, a: &CsMat<f64>, blocks: usize) -> Result<(), LinalgError> {
        let p = &self.params;
        // Same pattern: the copy's values are refilled in place (no allocation, and the
        // Krylov work vectors stay).
        let keep = self
            .iterative
            .as_ref()
            .is_some_and(|it| it.blocks == blocks && it.a.same_pattern(a));
        if !keep {
            self.iterative = None;
        }
        let (csr, work) = match self.iterative.take() {
            Some(mut it) => {
                it.a.val.copy_from_slice(a.data());
                self.iterative = Some(it);
                (None, None)
            }
            None => (Some(Csr::from_sprs(a)), Some(krylov::Work::default())),
        };
        let view = match (&csr, &self.iterative) {
            (Some(c), _) => c,
            (None, Some(it)) => &it.a,
            (None, None) => return Err(LinalgError::Shape("no iterative state".into())),
        };
        // Checked at every prepare: a transport matrix is symmetric while the potential is flat
        // and stops being so later.
        let symmetric = view.is_symmetric(1e-13);
        let krylov = match p.krylov {
            Krylov::Auto if symmetric => Krylov::Cg,
            Krylov::Auto => Krylov::Gmres,
            k => k,
        };
        // CG needs a symmetric preconditioner; block Gauss–Seidel is not.
        let scheme = if krylov == Krylov::Cg {
            BlockScheme::Diagonal
        } else {
            p.block_scheme
        };
        let kind = p.preconditioner;
        let reuse = match &self.iterative {
            Some(it) => {
                (it.krylov == Krylov::Cg) == (krylov == Krylov::Cg)
                    && match &it.pc {
                        Pc::Scalar(s) => s.kind() == precond::resolve(kind, view),
                        Pc::Block(_) => true,
                    }
            }
            None => false,
        };
        if reuse {
            if let Some(it) = &mut self.iterative {
                match &mut it.pc {
                    Pc::Scalar(s) => s.refresh(&it.a)?,
                    Pc::Block(b) => b.refresh(&it.a)?,
                }
                it.symmetric = symmetric;
                it.krylov = krylov;
            }
            return Ok(());
        }
        let (csr, work) = match (csr, self.iterative.take()) {
            (Some(c), _) => (c, work.unwrap_or_default()),
            (None, Some(it)) => (it.a, it.work),
            (None, None) => return Err(LinalgError::Shape("no iterative state".into())),
        };
        let pc = if blocks == 1 {
            Pc::Scalar(Scalar::new(kind, &csr)?)
        } else {
            Pc::Block(Block::new(&csr, blocks, kind, scheme)?)
        };
        self.iterative = Some(Iterative {
            a: csr,
            work,
            blocks,
            symmetric,
            krylov,
            pc,
        });
        Ok(())
    }

    /// New values `a` on the pattern of the last successful [`LinearSolver::prepare`] (same
    /// shape, row offsets and column indices; the block count of that prepare is kept),
    /// cheaply: the direct path refactors numerically (as prepare does); the iterative path
    /// copies the values and refreshes only the cheap parts of its preconditioner (see the
    /// module docs), so later solves iterate with the new matrix and a preconditioner built
    /// mostly for the prepared one.
    ///
    /// Errors with [`LinalgError::NeedsPrepare`], leaving the solver as it was, when no
    /// prepare succeeded or the pattern differs; then call prepare. Other errors (non-finite
    /// values, a singular factorization or diagonal) leave the solver unprepared, as a failed
    /// prepare does.
    pub fn update(&mut self, a: &CsMat<f64>) -> Result<(), LinalgError> {
        let method = self.ready.ok_or_else(|| {
            LinalgError::NeedsPrepare("update before a successful prepare".into())
        })?;
        let same = a.is_csr()
            && match method {
                Method::Direct if self.use_cholesky => {
                    self.cholesky.as_ref().is_some_and(|c| c.same_pattern(a))
                }
                Method::Direct => self.lu.as_ref().is_some_and(|l| l.same_pattern(a)),
                _ => self
                    .iterative
                    .as_ref()
                    .is_some_and(|it| it.a.same_pattern(a)),
            };
        if !same {
            return Err(LinalgError::NeedsPrepare(
                "the matrix's pattern differs from the prepared one".into(),
            ));
        }
        self.ready = None;
        check_finite(a.data())?;
        match method {
            Method::Direct => self.prepare_direct(a)?,
            _ => self.update_iterative(a)?,
        }
        self.ready = Some(method);
        Ok(())
    }

    fn update_iterative(&mut self, a: &CsMat<f64>) -> Result<(), LinalgError> {
        let auto = self.params.krylov == Krylov::Auto;
        let it = self
            .iterative
            .as_mut()
            .ok_or_else(|| LinalgError::NeedsPrepare("no iterative state".into()))?;
        it.a.val.copy_from_slice(a.data());
        // CG needs a symmetric matrix; the other methods do not care, so only then is the
        // (one-pass) check redone. The preconditioner is still valid for the fallback.
        if auto && it.krylov == Krylov::Cg && !it.a.is_symmetric(1e-13) {
            it.symmetric = false;
            it.krylov = Krylov::Gmres;
        }
        match &mut it.pc {
            Pc::Scalar(s) => s.update(&it.a),
            Pc::Block(b) => b.update(&it.a),
        }
    }

    /// Solves `a x = b` for the matrix last prepared; `x` holds the initial guess on entry
    /// (used by iterations) and the solution on return. Iterations stop at
    /// [`LinearParams::rtol`].
    pub fn solve(&mut self, b: &[f64], x: &mut [f64]) -> Result<LinearInfo, LinalgError> {
        let rtol = self.params.rtol;
        self.solve_to(b, x, rtol)
    }

    /// As [`LinearSolver::solve`], but the iterative path stops when the true residual meets
    /// ‖b − A x‖ ≤ `rtol`·‖b‖ instead of [`LinearParams::rtol`] (for inexact Newton, whose
    /// linear tolerance follows the nonlinear one). The direct path ignores `rtol`. `rtol`
    /// must be positive and finite ([`LinalgError::InvalidTolerance`] otherwise).
    pub fn solve_to(
        &mut self,
        b: &[f64],
        x: &mut [f64],
        rtol: f64,
    ) -> Result<LinearInfo, LinalgError> {
        if !(rtol > 0.0 && rtol.is_finite()) {
            return Err(LinalgError::InvalidTolerance(rtol));
        }
        let method = self
            .ready
            .ok_or_else(|| LinalgError::Shape("solve before a successful prepare".into()))?;
        let n = match method {
            Method::Direct if self.use_cholesky => self.cholesky.as_ref().map(|d| d.dim()),
            Method::Direct => self.lu.as_ref().map(|d| d.dim()),
            _ => self.iterative.as_ref().map(|it| it.a.n),
        }
        .ok_or_else(|| LinalgError::Shape("solve before a successful prepare".into()))?;
        if b.len() != n || x.len() != n {
            return Err(LinalgError::Shape(format!(
                "system of {n} unknowns, right-hand side {}, solution {}",
                b.len(),
                x.len()
            )));
        }
        check_finite(b)?;
        match method {
            Method::Direct => self.solve_direct(b, x),
            _ => {
                check_finite(x)?;
                self.solve_iterative(b, x, rtol)
            }
        }
    }

    fn solve_direct(&mut self, b: &[f64], x: &mut [f64]) -> Result<LinearInfo, LinalgError> {
        x.copy_from_slice(b);
        let missing = || LinalgError::Shape("solve before prepare".into());
        if self.use_cholesky {
            self.cholesky
                .as_mut()
                .ok_or_else(missing)?
                .solve_in_place(x)?;
        } else {
            self.lu.as_mut().ok_or_else(missing)?.solve_in_place(x)?;
        }
        check_finite(x)?;
        Ok(LinearInfo {
            method: Method::Direct,
            iterations: 0,
            relative_residual: 0.0,
        })
    }

    fn solve_iterative(
        &mut self,
        b: &[f64],
        x: &mut [f64],
        rtol: f64,
    ) -> Result<LinearInfo, LinalgError> {
        let p = &self.params;
        let stop = krylov::Stop {
            rtol,
            max_iterations: p.max_iterations,
        };
        let restart = p.gmres_restart;
        let auto = p.krylov == Krylov::Auto;
        let it = self
            .iterative
            .as_mut()
            .ok_or_else(|| LinalgError::Shape("solve before prepare".into()))?;
        let pc = it.pc.as_apply();
        let work = &mut it.work;
        let outcome = match it.krylov {
            Krylov::Cg => {
                if auto {
                    work.guess.clear();
                    work.guess.extend_from_slice(x);
                }
                let first = krylov::cg(&it.a, pc, b, x, stop, work);
                if auto && matches!(first, Err(LinalgError::NotConverged { .. })) {
                    // Symmetric but not positive definite (or CG stalled): GMRES does not
                    // need definiteness. The symmetric preconditioner is still valid for it.
                    x.copy_from_slice(&work.guess);
                    krylov::gmres(&it.a, pc, b, x, stop, restart, work)
                } else {
                    first
                }
            }
            Krylov::Bicgstab => krylov::bicgstab(&it.a, pc, b, x, stop, work),
            Krylov::Gmres | Krylov::Auto => krylov::gmres(&it.a, pc, b, x, stop, restart, work),
        };
        let (iterations, relative_residual) = outcome?;
        check_finite(x)?;
        Ok(LinearInfo {
            method: Method::Iterative,
            iterations,
            relative_residual,
        })
    }
}

pub(crate) fn check_square(a: &CsMat<f64>) -> Result<(), LinalgError> {
    if !a.is_csr() || a.rows() != a.cols() {
        return Err(LinalgError::Shape(format!(
            "expected a square CSR matrix, got {}x{} ({})",
            a.rows(),
            a.cols(),
            if a.is_csr() { "CSR" } else { "CSC" }
        )));
    }
    Ok(())
}

pub(crate) fn check_finite(v: &[f64]) -> Result<(), LinalgError> {
    if v.iter().all(|x| x.is_finite()) {
        Ok(())
    } else {
        Err(LinalgError::NonFinite)
    }
}
