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
use crate::linalg::{DirectLu, SpdSolver};
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
    modes_near(mesh, count, None)
}

/// The `count` Neumann eigenpairs of `mesh` nearest `target` (a k² inside an unstable band,
/// where the lowest modes may be far below), in increasing order. The shifted operator
/// K − target·M is indefinite, so it is factored by sparse LU instead of Cholesky.
pub fn neumann_modes_near(
    mesh: &Mesh,
    count: usize,
    target: f64,
) -> Result<PlateModes, StabilityError> {
    modes_near(mesh, count, Some(target))
}

/// Solves with the shifted operator.
enum Factor {
    Spd(Box<SpdSolver>),
    Lu(Box<DirectLu>),
}

impl Factor {
    fn solve(&mut self, x: &mut [f64]) -> Result<(), StabilityError> {
        match self {
            Factor::Spd(f) => f.solve_in_place(x),
            Factor::Lu(f) => f.solve_in_place(x),
        }
        .map_err(|e| StabilityError::Modes(e.to_string()))
    }
}

fn modes_near(
    mesh: &Mesh,
    count: usize,
    target: Option<f64>,
) -> Result<PlateModes, StabilityError> {
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
    // The operator is K + shift·M: positive definite for the lowest modes, K − target·M
    // (nudged off an eigenvalue it might hit exactly) for modes near a target.
    let shift = match target {
        None => 1.0 / area,
        Some(t) => -(t * (1.0 + 1e-7) + 1e-9 / area),
    };
    let mut t = TriMat::new((n, n));
    for (i, &mi) in m.iter().enumerate() {
        t.add_triplet(i, i, shift * mi);
    }
    for (e, &w) in mesh.edges.iter().zip(&mesh.edge_weights) {
        let (i, j) = (e[0], e[1]);
        t.add_triplet(i, i, w);
        t.add_triplet(j, j, w);
        t.add_triplet(i, j, -w);
        t.add_triplet(j, i, -w);
    }
    let a = t.to_csr();
    let mut solver = match target {
        None => Factor::Spd(Box::new(
            SpdSolver::new(&a).map_err(|e| StabilityError::Modes(e.to_string()))?,
        )),
        Some(_) => Factor::Lu(Box::new(
            DirectLu::new(&a).map_err(|e| StabilityError::Modes(e.to_string()))?,
        )),
    };
    let dot =
        |x: &[f64], y: &[f64]| -> f64 { x.iter().zip(y).zip(m).map(|((a, b), w)| a * b * w).sum() };
    // Krylov dimension: enough for the wanted pairs to converge to round-off.
    let steps = (3 * count + 20).min(n - 1);
    let mut basis: Vec<Vec<f64>> = Vec::with_capacity(steps + 1);
    // A start vector with every mode in it (deterministic).
    let mut q: Vec<f64> = (0..n)
        .map(|i| 1.0 + ((i as f64) * 0.618_033_988_75).fract())
        .collect();
    let nq = dot(&q, &q).sqrt();
    q.iter_mut().for_each(|v| *v /= nq);
    basis.push(q);
    let (mut alpha, mut beta) = (Vec::new(), Vec::new());
    for k in 0..steps {
        let mut w: Vec<f64> = basis[k].iter().zip(m).map(|(v, w)| v * w).collect();
        solver.solve(&mut w)?;
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
    let eig = tri.self_adjoint_eigen(Side::Lower).map_err(|_| {
        StabilityError::Modes("the Lanczos matrix's eigenvalues did not converge".into())
    })?;
    let (s, u) = (eig.S(), eig.U());
    // θ = 1/(λ + shift): the largest |θ| are the λ nearest −shift (the lowest for a
    // positive shift).
    let mut order: Vec<usize> = (0..dim).collect();
    order.sort_by(|&a, &b| s[b].abs().total_cmp(&s[a].abs()));
    let wanted = count.min(dim);
    let mut eigenvalues = Vec::with_capacity(wanted);
    let mut modes = Vec::with_capacity(wanted);
    let mut pairs = Vec::with_capacity(wanted);
    for &k in order.iter().take(wanted) {
        let theta = s[k];
        let lambda = 1.0 / theta - shift;
        pairs.push((
            if lambda.abs() < 1e-9 / area {
                0.0
            } else {
                lambda.max(0.0)
            },
            k,
        ));
    }
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    for &(lambda, k) in &pairs {
        eigenvalues.push(lambda);
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
