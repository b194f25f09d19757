//! Sparse linear algebra for the implicit steps: one [`LinearSolver`] per system, prepared for a
//! matrix (numeric factorization or preconditioner set-up, the symbolic analysis reused while
//! the sparsity pattern stays the same) and then used for any number of right-hand sides.
//!
//! Matrices are `sprs` CSR with sorted column indices; faer factors them (a CSR matrix is the
//! CSC storage of its transpose, so no copy is made: the transpose is factored and solved
//! transposed).

mod direct;

use serde::{Deserialize, Serialize};
use sprs::CsMat;
use thiserror::Error;

pub use direct::DirectLu;

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
}

impl Default for LinearParams {
    fn default() -> Self {
        Self {
            method: Method::Auto,
            direct_limit: 200_000,
            rtol: 1e-10,
            max_iterations: 500,
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
    /// Relative residual reached (estimated by the iteration; 0 for a direct solve).
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
}

/// A linear solver for a sequence of matrices sharing one sparsity pattern.
#[derive(Debug)]
pub struct LinearSolver {
    params: LinearParams,
    direct: Option<DirectLu>,
}

impl LinearSolver {
    /// A solver with the given settings; nothing is analysed until [`LinearSolver::prepare`].
    pub fn new(params: LinearParams) -> Self {
        Self {
            params,
            direct: None,
        }
    }

    /// The settings.
    pub fn params(&self) -> &LinearParams {
        &self.params
    }

    /// Prepares for solves with `a` (square CSR, sorted indices). `blocks` is the number of
    /// equal, contiguous diagonal blocks the unknowns form (species-major ordering), which
    /// block preconditioners use; 1 for a scalar system.
    pub fn prepare(&mut self, a: &CsMat<f64>, blocks: usize) -> Result<(), LinalgError> {
        check_square(a)?;
        let _ = blocks;
        if a.data().iter().any(|v| !v.is_finite()) {
            return Err(LinalgError::NonFinite);
        }
        match &mut self.direct {
            Some(lu) if lu.same_pattern(a) => lu.refactor(a),
            slot => {
                *slot = Some(DirectLu::new(a)?);
                Ok(())
            }
        }
    }

    /// Solves `a x = b` for the matrix last prepared; `x` holds the initial guess on entry
    /// (used by iterations) and the solution on return.
    pub fn solve(&mut self, b: &[f64], x: &mut [f64]) -> Result<LinearInfo, LinalgError> {
        let lu = self
            .direct
            .as_ref()
            .ok_or_else(|| LinalgError::Shape("solve before prepare".into()))?;
        if b.len() != lu.dim() || x.len() != lu.dim() {
            return Err(LinalgError::Shape(format!(
                "system of {} unknowns, right-hand side {}, solution {}",
                lu.dim(),
                b.len(),
                x.len()
            )));
        }
        if b.iter().any(|v| !v.is_finite()) {
            return Err(LinalgError::NonFinite);
        }
        x.copy_from_slice(b);
        lu.solve_in_place(x);
        if x.iter().any(|v| !v.is_finite()) {
            return Err(LinalgError::NonFinite);
        }
        Ok(LinearInfo {
            method: Method::Direct,
            iterations: 0,
            relative_residual: 0.0,
        })
    }
}

fn check_square(a: &CsMat<f64>) -> Result<(), LinalgError> {
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
