//! Sparse LU through faer, with the symbolic analysis (fill-reducing ordering, elimination
//! structure) done once per sparsity pattern and only the numeric factorization repeated.
//!
//! faer's high-level solver types read the process-wide parallelism setting; the lower-level
//! functions used here take a [`Par`] explicitly, so the caller decides (see
//! [`super::LinearParams::factor_threads`]) and results never depend on global state.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::sparse::linalg::lu::{factorize_symbolic_lu, LuRef, NumericLu, SymbolicLu};
use faer::sparse::linalg::LuError;
use faer::sparse::{SparseColMatRef, SymbolicSparseColMatRef};
use faer::{Conj, MatMut, Par};
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
    par: Par,
    symbolic: SymbolicLu<usize>,
    numeric: NumericLu<usize, f64>,
    solve_buf: MemBuffer,
}

impl std::fmt::Debug for DirectLu {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("DirectLu")
            .field("n", &self.n)
            .field("nnz", &self.indices.len())
            .finish_non_exhaustive()
    }
}

fn lu_error(e: LuError) -> LinalgError {
    match e {
        LuError::SymbolicSingular { index } => LinalgError::Singular { index },
        LuError::Generic(g) => LinalgError::Backend(format!("{g:?}")),
    }
}

/// faer's parallelism for `threads` (1 = sequential, 0 = rayon's pool size).
pub(crate) fn par_of(threads: usize) -> Par {
    if threads == 1 {
        Par::Seq
    } else {
        Par::rayon(threads)
    }
}

impl DirectLu {
    /// Analyses and factors `a` (square CSR with sorted indices), sequentially.
    pub fn new(a: &CsMat<f64>) -> Result<Self, LinalgError> {
        Self::with_threads(a, 1)
    }

    /// As [`Self::new`], with faer using `threads` threads (1 = sequential, 0 = all).
    pub fn with_threads(a: &CsMat<f64>, threads: usize) -> Result<Self, LinalgError> {
        super::check_square(a)?;
        super::check_finite(a.data())?;
        let n = a.rows();
        let indptr: Vec<usize> = a.indptr().to_proper().into_owned();
        let indices = a.indices().to_vec();
        let sym = SymbolicSparseColMatRef::new_checked(n, n, &indptr, None, &indices);
        let symbolic = factorize_symbolic_lu(sym, Default::default())
            .map_err(|e| LinalgError::Backend(format!("{e:?}")))?;
        let par = par_of(threads);
        let solve_buf =
            MemBuffer::try_new(symbolic.solve_transpose_in_place_scratch::<f64>(1, par))
                .map_err(|e| LinalgError::Backend(format!("{e:?}")))?;
        let mut lu = Self {
            n,
            indptr,
            indices,
            par,
            symbolic,
            numeric: NumericLu::new(),
            solve_buf,
        };
        lu.factor_values(a.data())?;
        Ok(lu)
    }

    /// Unknowns.
    pub fn dim(&self) -> usize {
        self.n
    }

    /// Whether `a` has exactly the pattern this factorization was analysed for.
    pub fn same_pattern(&self, a: &CsMat<f64>) -> bool {
        a.is_csr()
            && a.rows() == self.n
            && a.cols() == self.n
            && a.indices() == self.indices.as_slice()
            && a.indptr().to_proper().as_ref() == self.indptr.as_slice()
    }

    /// Factors new values on the analysed pattern.
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
                .factorize_numeric_lu_scratch::<f64>(self.par, Default::default()),
        )
        .map_err(|e| LinalgError::Backend(format!("{e:?}")))?;
        self.symbolic
            .factorize_numeric_lu(
                &mut self.numeric,
                SparseColMatRef::new(sym, values),
                self.par,
                MemStack::new(&mut buf),
                Default::default(),
            )
            .map_err(lu_error)?;
        self.check_pivots()
    }

    /// faer's numeric LU does not report an exactly zero pivot; a singular matrix shows up as
    /// non-finite values in a solve, so one probe solve checks it.
    fn check_pivots(&mut self) -> Result<(), LinalgError> {
        let mut probe = vec![1.0; self.n];
        self.solve_in_place(&mut probe)?;
        if probe.iter().all(|v| v.is_finite()) {
            Ok(())
        } else {
            Err(LinalgError::Singular { index: 0 })
        }
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
        let rhs = MatMut::from_column_major_slice_mut(x, self.n, 1);
        LuRef::new_unchecked(&self.symbolic, &self.numeric).solve_transpose_in_place_with_conj(
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
    use sprs::TriMat;

    #[test]
    fn solves_a_nonsymmetric_system_and_refactors() {
        // A = [[4, -1, 0], [-2, 5, -1], [0, -3, 6]]; x = (1, 2, 3) gives b = A x (by hand).
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
        lu.solve_in_place(&mut x).unwrap();
        for (got, want) in x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-14, "{got} vs {want}");
        }
        let mut b = a.clone();
        b.data_mut().iter_mut().for_each(|v| *v *= 2.0);
        assert!(lu.same_pattern(&b));
        lu.refactor(&b).unwrap();
        let mut x = vec![2.0 * 2.0, 2.0 * 5.0, 2.0 * 12.0];
        lu.solve_in_place(&mut x).unwrap();
        for (got, want) in x.iter().zip([1.0, 2.0, 3.0]) {
            assert!((got - want).abs() < 1e-14, "{got} vs {want}");
        }
    }

    /// Reference: faer's dense partial-pivoting LU on the same (small) matrices.
    #[test]
    fn agrees_with_dense_lu_on_mesh_matrices() {
        let mesh = testmats::disk_mesh(0.25);
        for a in [
            testmats::diffusion(&mesh, 1.0),
            testmats::transport(&mesh, 0.5, 3.0),
            testmats::coupled(&mesh, 0.5),
        ] {
            let n = a.rows();
            assert!(n < 600, "keep the dense reference small ({n})");
            let b = testmats::rhs(n, 7);
            let mut x = b.clone();
            DirectLu::new(&a).unwrap().solve_in_place(&mut x).unwrap();
            let want = testmats::dense_solve(&a, &b);
            let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
            for (g, w) in x.iter().zip(&want) {
                assert!((g - w).abs() <= 1e-11 * scale, "{g} vs {w}");
            }
        }
    }

    #[test]
    fn singular_and_non_finite_are_errors() {
        // A row of zeros (kept in the pattern) makes the matrix exactly singular.
        let mesh = testmats::disk_mesh(0.3);
        let mut a = testmats::diffusion(&mesh, 1.0);
        testmats::zero_row(&mut a, 5);
        assert!(matches!(
            DirectLu::new(&a),
            Err(LinalgError::Singular { .. })
        ));
        let mut a = testmats::diffusion(&mesh, 1.0);
        a.data_mut()[3] = f64::NAN;
        assert_eq!(DirectLu::new(&a).unwrap_err(), LinalgError::NonFinite);
        let mut lu = DirectLu::new(&testmats::diffusion(&mesh, 1.0)).unwrap();
        assert!(matches!(
            lu.solve_in_place(&mut [1.0]),
            Err(LinalgError::Shape(_))
        ));
    }

    /// Sequential factorization must repeat bit for bit (reproducible runs).
    #[test]
    fn sequential_factorization_is_bitwise_repeatable() {
        let mesh = testmats::disk_mesh(0.05);
        let a = testmats::transport(&mesh, 1.0, 2.0);
        let b = testmats::rhs(a.rows(), 3);
        let mut lu = DirectLu::new(&a).unwrap();
        let mut first = b.clone();
        lu.solve_in_place(&mut first).unwrap();
        for _ in 0..3 {
            lu.refactor(&a).unwrap();
            let mut again = b.clone();
            lu.solve_in_place(&mut again).unwrap();
            assert!(first
                .iter()
                .zip(&again)
                .all(|(p, q)| p.to_bits() == q.to_bits()));
        }
    }
}
