//! Sparse Cholesky LLᵀ through faer for symmetric positive definite systems, the symbolic
//! analysis (AMD ordering, supernodal structure) done once per pattern.
//!
//! For a species whose operator does not change (pure diffusion and linear decay at a fixed
//! step) the factor is computed once and reused for every step.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::llt::factor::LltError;
use faer::sparse::linalg::cholesky::{
    factorize_symbolic_cholesky, LltRef, SymbolicCholesky, SymmetricOrdering,
};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par, Side};
use sprs::CsMat;

use super::direct::par_of;
use super::LinalgError;

/// Cholesky factorization of a symmetric positive definite CSR matrix.
pub struct SpdSolver {
    n: usize,
    indptr: Vec<usize>,
    indices: Vec<usize>,
    par: Par,
    symbolic: SymbolicCholesky<usize>,
    values: Vec<f64>,
    solve_buf: MemBuffer,
}

impl std::fmt::Debug for SpdSolver {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SpdSolver")
            .field("n", &self.n)
            .field("nnz", &self.indices.len())
            .field("factor_nnz", &self.values.len())
            .finish_non_exhaustive()
    }
}

fn backend<E: std::fmt::Debug>(e: E) -> LinalgError {
    LinalgError::Backend(format!("{e:?}"))
}

impl SpdSolver {
    /// Analyses and factors `a` (square CSR, sorted indices, symmetric within 1e-12 of its
    /// largest entry), sequentially.
    pub fn new(a: &CsMat<f64>) -> Result<Self, LinalgError> {
        Self::with_threads(a, 1)
    }

    /// As [`Self::new`], with faer using `threads` threads (1 = sequential, 0 = all).
    pub fn with_threads(a: &CsMat<f64>, threads: usize) -> Result<Self, LinalgError> {
        super::check_square(a)?;
        super::check_finite(a.data())?;
        if !super::ops::sprs_is_symmetric(a, 1e-12) {
            return Err(LinalgError::NotSymmetric);
        }
        let n = a.rows();
        let indptr: Vec<usize> = a.indptr().to_proper().into_owned();
        let indices = a.indices().to_vec();
        let sym = SymbolicSparseColMatRef::new_checked(n, n, &indptr, None, &indices);
        // Only the upper triangle of the CSC view (the lower triangle of A) is read.
        let symbolic = factorize_symbolic_cholesky(
            sym,
            Side::Upper,
            SymmetricOrdering::Amd,
            Default::default(),
        )
        .map_err(backend)?;
        let par = par_of(threads);
        let solve_buf =
            MemBuffer::try_new(symbolic.solve_in_place_scratch::<f64>(1, par)).map_err(backend)?;
        let mut s = Self {
            n,
            indptr,
            indices,
            par,
            values: vec![0.0; symbolic.len_val()],
            symbolic,
            solve_buf,
        };
        s.factor_values(a.data())?;
        Ok(s)
    }

    /// Unknowns.
    pub fn dim(&self) -> usize {
        self.n
    }

    /// Whether `a` has exactly the analysed pattern.
    pub fn same_pattern(&self, a: &CsMat<f64>) -> bool {
        a.is_csr()
            && a.rows() == self.n
            && a.cols() == self.n
            && a.indices() == self.indices.as_slice()
            && a.indptr().to_proper().as_ref() == self.indptr.as_slice()
    }

    /// Factors new values on the analysed pattern. The values are trusted to be symmetric
    /// (only one triangle is read); checking it would cost as much as the factorization.
    pub fn refactor(&mut self, a: &CsMat<f64>) -> Result<(), LinalgError> {
        if !self.same_pattern(a) {
            return Err(LinalgError::Shape(
                "refactor with a different sparsity pattern".into(),
            ));
        }
        super::check_finite(a.data())?;
        self.factor_values(a.data())
    }

    fn factor_values(&mut self, values: &[f64]) -> Result<(), LinalgError> {
        let sym =
            SymbolicSparseColMatRef::new_checked(self.n, self.n, &self.indptr, None, &self.indices);
        let mut buf = MemBuffer::try_new(
            self.symbolic
                .factorize_numeric_llt_scratch::<f64>(self.par, Default::default()),
        )
        .map_err(backend)?;
        self.symbolic
            .factorize_numeric_llt(
                &mut self.values,
                SparseColMatRef::new(sym, values),
                Side::Upper,
                Default::default(),
                self.par,
                MemStack::new(&mut buf),
                Default::default(),
            )
            .map_err(
                |LltError::NonPositivePivot { index }| LinalgError::NotPositiveDefinite { index },
            )?;
        Ok(())
    }

    /// Overwrites `x` (the right-hand side) with the solution of A x = b.
    pub fn solve_in_place(&mut self, x: &mut [f64]) -> Result<(), LinalgError> {
        if x.len() != self.n {
            return Err(LinalgError::Shape(format!(
                "system of {} unknowns, vector of {}",
                self.n,
                x.len()
            )));
        }
        if x.iter().any(|v| !v.is_finite()) {
            return Err(LinalgError::NonFinite);
        }
        let rhs = MatMut::from_column_major_slice_mut(x, self.n, 1);
        LltRef::new(&self.symbolic, &self.values).solve_in_place_with_conj(
            Conj::No,
            rhs,
            self.par,
            MemStack::new(&mut self.solve_buf),
        );
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::testmats;

    /// Reference: faer's dense partial-pivoting LU.
    #[test]
    fn agrees_with_dense_lu_and_refactors() {
        let mesh = testmats::disk_mesh(0.25);
        let a = testmats::diffusion(&mesh, 0.7);
        let b = testmats::rhs(a.rows(), 2);
        let mut chol = SpdSolver::new(&a).unwrap();
        let mut x = b.clone();
        chol.solve_in_place(&mut x).unwrap();
        let want = testmats::dense_solve(&a, &b);
        for (g, w) in x.iter().zip(&want) {
            assert!((g - w).abs() <= 1e-12 * w.abs().max(1.0), "{g} vs {w}");
        }
        let a2 = testmats::diffusion(&mesh, 3.0);
        chol.refactor(&a2).unwrap();
        let mut x = b.clone();
        chol.solve_in_place(&mut x).unwrap();
        assert!(testmats::relative_residual(&a2, &x, &b) < 1e-13);
    }

    #[test]
    fn refuses_nonsymmetric_indefinite_and_bad_input() {
        let mesh = testmats::disk_mesh(0.3);
        let t = testmats::transport(&mesh, 1.0, 2.0);
        assert_eq!(SpdSolver::new(&t).unwrap_err(), LinalgError::NotSymmetric);
        let mut a = testmats::diffusion(&mesh, 1.0);
        a.data_mut().iter_mut().for_each(|v| *v = -*v);
        assert!(matches!(
            SpdSolver::new(&a),
            Err(LinalgError::NotPositiveDefinite { .. })
        ));
        let a = testmats::diffusion(&mesh, 1.0);
        let mut s = SpdSolver::new(&a).unwrap();
        assert!(matches!(
            s.solve_in_place(&mut [0.0; 2]),
            Err(LinalgError::Shape(_))
        ));
        let mut nan = vec![f64::NAN; a.rows()];
        assert_eq!(s.solve_in_place(&mut nan), Err(LinalgError::NonFinite));
    }
}
