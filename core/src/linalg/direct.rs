//! Sparse LU through faer, with the symbolic analysis (fill-reducing ordering, elimination
//! structure) done once per sparsity pattern and only the numeric factorization repeated.

use faer::linalg::solvers::SolveCore;
use faer::sparse::linalg::solvers::{Lu, SymbolicLu};
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut};
use sprs::CsMat;

use super::LinalgError;

/// An LU factorization of a CSR matrix, refactorable for new values on the same pattern.
///
/// The CSR arrays of A are read as the CSC arrays of Aᵀ; Aᵀ is factored and systems with A
/// are solved as transposed solves with that factorization.
pub struct DirectLu {
    n: usize,
    indptr: Vec<usize>,
    indices: Vec<usize>,
    symbolic: SymbolicLu<usize>,
    numeric: Lu<usize, f64>,
}

impl std::fmt::Debug for DirectLu {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("DirectLu")
            .field("n", &self.n)
            .field("nnz", &self.indices.len())
            .finish_non_exhaustive()
    }
}

fn lu_error(e: faer::sparse::linalg::LuError) -> LinalgError {
    match e {
        faer::sparse::linalg::LuError::SymbolicSingular { index } => {
            LinalgError::Singular { index }
        }
        faer::sparse::linalg::LuError::Generic(g) => LinalgError::Backend(format!("{g:?}")),
    }
}

impl DirectLu {
    /// Analyses and factors `a` (square CSR with sorted indices).
    pub fn new(a: &CsMat<f64>) -> Result<Self, LinalgError> {
        let n = a.rows();
        let indptr: Vec<usize> = a.indptr().to_proper().into_owned();
        let indices = a.indices().to_vec();
        let sym = SymbolicSparseColMatRef::new_checked(n, n, &indptr, None, &indices);
        let symbolic =
            SymbolicLu::try_new(sym).map_err(|e| LinalgError::Backend(format!("{e:?}")))?;
        let numeric =
            Lu::try_new_with_symbolic(symbolic.clone(), SparseColMatRef::new(sym, a.data()))
                .map_err(lu_error)?;
        let lu = Self {
            n,
            indptr,
            indices,
            symbolic,
            numeric,
        };
        lu.check_pivots()?;
        Ok(lu)
    }

    /// Unknowns.
    pub fn dim(&self) -> usize {
        self.n
    }

    /// Whether `a` has exactly the pattern this factorization was analysed for.
    pub fn same_pattern(&self, a: &CsMat<f64>) -> bool {
        a.rows() == self.n
            && a.indices() == self.indices.as_slice()
            && a.indptr().to_proper().as_ref() == self.indptr.as_slice()
    }

    /// Factors new values on the analysed pattern (the caller checked [`Self::same_pattern`]).
    pub fn refactor(&mut self, a: &CsMat<f64>) -> Result<(), LinalgError> {
        let sym =
            SymbolicSparseColMatRef::new_checked(self.n, self.n, &self.indptr, None, &self.indices);
        self.numeric =
            Lu::try_new_with_symbolic(self.symbolic.clone(), SparseColMatRef::new(sym, a.data()))
                .map_err(lu_error)?;
        self.check_pivots()
    }

    /// faer's numeric LU does not report an exactly zero pivot; a singular matrix shows up as
    /// non-finite values in a solve, so one probe solve checks it.
    fn check_pivots(&self) -> Result<(), LinalgError> {
        let mut probe = vec![1.0; self.n];
        self.solve_in_place(&mut probe);
        if probe.iter().all(|v| v.is_finite()) {
            Ok(())
        } else {
            Err(LinalgError::Singular { index: 0 })
        }
    }

    /// Overwrites `x` (the right-hand side) with the solution of A x = b.
    pub fn solve_in_place(&self, x: &mut [f64]) {
        let n = x.len();
        let rhs = MatMut::from_column_major_slice_mut(x, n, 1);
        self.numeric
            .solve_transpose_in_place_with_conj(Conj::No, rhs);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use sprs::TriMat;

    #[test]
    fn solves_a_nonsymmetric_system_and_refactors() {
        // A = [[4, -1, 0], [-2, 5, -1], [0, -3, 6]]; x = (1, 2, 3) gives b = A x.
        let mut t = TriMat::new((3, 3));
        for (i, j, v) in [
            (0, 0, 4.0),
            (0, 1, -1.0),
            (1, 0, -2.0),
            (1, 1, 5.0),
            (1, 2, -1.0),
            (2, 1, -3.0),
            (2, 2, 6.0),
        ] {
            t.add_triplet(i, j, v);
        }
        let a: CsMat<f64> = t.to_csr();
        let mut lu = DirectLu::new(&a).unwrap();
        let mut x = vec![4.0 - 2.0, -2.0 + 10.0 - 3.0, -6.0 + 18.0];
        lu.solve_in_place(&mut x);
        for (got, want) in x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-14, "{got} vs {want}");
        }
        let mut b = a.clone();
        b.data_mut().iter_mut().for_each(|v| *v *= 2.0);
        assert!(lu.same_pattern(&b));
        lu.refactor(&b).unwrap();
        let mut x = vec![2.0 * 2.0, 2.0 * 5.0, 2.0 * 12.0];
        lu.solve_in_place(&mut x);
        for (got, want) in x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-14, "{got} vs {want}");
        }
    }
}
