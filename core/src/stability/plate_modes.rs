//! The first Neumann eigenvalues of a plate: K φ = λ M φ with K the P1 stiffness (cotangent
//! edge weights) and M the lumped mass, by shift-invert Lanczos.
//!
//! With a shift −s (s > 0, so K + sM is positive definite), the operator (K + sM)⁻¹M is
//! self-adjoint in the M inner product and its largest eigenvalues θ give the smallest λ =
//! 1/θ − s. Lanczos with full reorthogonalisation (in the M inner product) builds a Krylov
//! basis; the tridiagonal matrix's eigenvalues converge to the extreme θ first (common
//! practice; Parlett, "The Symmetric Eigenvalue Problem", 1980, recalled from memory).
//! Hand-written: no maintained Rust crate offers a sparse generalised symmetric eigensolver
//! on top of a sparse Cholesky factor; the factorisation is faer's (through `SpdSolver`).

use faer::{Mat, Side};
use serde::Serialize;
use sprs::TriMat;

use super::StabilityError;
use crate::linalg::SpdSolver;
use crate::mesh::Mesh;

/// The lowest Neumann modes of a plate.
#[derive(Clone, Debug, Serialize)]
pub struct PlateModes {
    /// Eigenvalues λ = k² in increasing order (the first is 0, the constant mode).
    pub eigenvalues: Vec<f64>,
    /// The modes' node values, normalised to unit M-norm (∫φ² = 1 in the lumped quadrature).
    #[serde(skip)]
    pub modes: Vec<Vec<f64>>,
}

/// The `count` lowest Neumann eigenpairs of `mesh`.
pub fn neumann_modes(mesh: &Mesh, count: usize) -> Result<PlateModes, StabilityError> {
    let n = mesh.num_nodes();
    if count == 0 {
        return Ok(PlateModes {
            eigenvalues: vec![],
            modes: vec![],
        });
    }
    if count + 2 > n {
        return Err(StabilityError::Modes(format!(
            "{count} eigenvalues asked of a mesh with {n} nodes; refine the mesh or ask fewer"
        )));
    }
    let m = &mesh.node_areas;
    // Shift of the order of the first non-zero eigenvalue: 1/area of the plate's extent.
    let area: f64 = m.iter().sum();
    let shift = 1.0 / area;
    let mut t = TriMat::new((n, n));
    for i in 0..n {
        t.add_triplet(i, i, shift * m[i]);
    }
    for (e, &w) in mesh.edges.iter().zip(&mesh.edge_weights) {
        let (i, j) = (e[0], e[1]);
        t.add_triplet(i, i, w);
        t.add_triplet(j, j, w);
        t.add_triplet(i, j, -w);
        t.add_triplet(j, i, -w);
    }
    let a = t.to_csr();
    let mut solver = SpdSolver::new(&a).map_err(|e| StabilityError::Modes(e.to_string()))?;
    let dot = |x: &[f64], y: &[f64]| -> f64 { x.iter().zip(y).zip(m).map(|((a, b), w)| a * b * w).sum() };
    // Krylov dimension: enough for the wanted pairs to converge to round-off.
    let steps = (3 * count + 20).min(n - 1);
    let mut basis: Vec<Vec<f64>> = Vec::with_capacity(steps + 1);
    // A start vector with every mode in it (deterministic).
    let mut q: Vec<f64> = (0..n).map(|i| 1.0 + ((i as f64) * 0.618_033_988_75).fract()).collect();
    let nq = dot(&q, &q).sqrt();
    q.iter_mut().for_each(|v| *v /= nq);
    basis.push(q);
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    for k in 0..steps {
        let mut w: Vec<f64> = basis[k].iter().zip(m).map(|(v, w)| v * w).collect();
        solver
            .solve_in_place(&mut w)
            .map_err(|e| StabilityError::Modes(e.to_string()))?;
        let a_k = dot(&w, &basis[k]);
        alpha.push(a_k);
        // Full reorthogonalisation, twice (classical Gram–Schmidt twice is stable).
        for _ in 0..2 {
            for b in &basis {
                let c = dot(&w, b);
                w.iter_mut().zip(b).for_each(|(x, y)| *x -= c * y);
            }
        }
        let b_k = dot(&w, &w).sqrt();
        if b_k <= 1e-13 * a_k.abs().max(1e-300) || k + 1 == steps {
            break;
        }
        beta.push(b_k);
        w.iter_mut().for_each(|v| *v /= b_k);
        basis.push(w);
    }
    let dim = alpha.len();
    let tri = Mat::<f64>::from_fn(dim, dim, |i, j| {
        if i == j {
            alpha[i]
        } else if i + 1 == j || j + 1 == i {
            beta[i.min(j)]
        } else {
            0.0
        }
    });
    let eig = tri
        .self_adjoint_eigen(Side::Lower)
        .map_err(|_| StabilityError::Modes("the Lanczos matrix's eigenvalues did not converge".into()))?;
    let (s, u) = (eig.S(), eig.U());
    // θ in increasing order: the largest θ are the lowest λ.
    let mut order: Vec<usize> = (0..dim).collect();
    order.sort_by(|&a, &b| s[b].total_cmp(&s[a]));
    let wanted = count.min(dim);
    let mut eigenvalues = Vec::with_capacity(wanted);
    let mut modes = Vec::with_capacity(wanted);
    for &k in order.iter().take(wanted) {
        let theta = s[k];
        eigenvalues.push((1.0 / theta - shift).max(0.0));
        let mut phi = vec![0.0; n];
        for (j, b) in basis.iter().take(dim).enumerate() {
            let c = u[(j, k)];
            phi.iter_mut().zip(b).for_each(|(p, v)| *p += c * v);
        }
        let norm = dot(&phi, &phi).sqrt();
        phi.iter_mut().for_each(|v| *v /= norm);
        modes.push(phi);
    }
    Ok(PlateModes { eigenvalues, modes })
}
