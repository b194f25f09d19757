//! Model matrices for the module's tests, built on real meshes: the three kinds of system the
//! time stepper solves (diffusion, exponentially fitted transport, coupled species blocks).

use crate::geometry::{PlateSpec, Shape};
use crate::mesh::{build_mesh, Mesh, MeshOptions};
use sprs::{CsMat, TriMat};

/// Unit disk meshed at target edge length `h`.
pub fn disk_mesh(h: f64) -> Mesh {
    let disk = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 1.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    build_mesh(
        &disk,
        &MeshOptions {
            size: h,
            ..Default::default()
        },
    )
    .expect("mesh")
    .mesh
}

/// B(x) = x / (eˣ − 1), with its limit 1 at 0.
pub fn bernoulli(x: f64) -> f64 {
    if x.abs() < 1e-8 {
        1.0 - 0.5 * x
    } else {
        x / x.exp_m1()
    }
}

/// Adds c·K (K the cotangent graph Laplacian) at block (r, c) offsets.
fn add_laplacian(t: &mut TriMat<f64>, mesh: &Mesh, c: f64, ro: usize, co: usize) {
    for (e, w) in mesh.edges.iter().zip(&mesh.edge_weights) {
        let (i, j) = (e[0], e[1]);
        t.add_triplet(ro + i, co + i, c * w);
        t.add_triplet(ro + j, co + j, c * w);
        t.add_triplet(ro + i, co + j, -c * w);
        t.add_triplet(ro + j, co + i, -c * w);
    }
}

fn add_mass(t: &mut TriMat<f64>, mesh: &Mesh, c: f64, ro: usize, co: usize) {
    for (i, a) in mesh.node_areas.iter().enumerate() {
        t.add_triplet(ro + i, co + i, c * a);
    }
}

/// Adds c·T with T the exponentially fitted transport operator for the potential ψ.
fn add_transport(t: &mut TriMat<f64>, mesh: &Mesh, psi: &[f64], c: f64, ro: usize, co: usize) {
    for (e, w) in mesh.edges.iter().zip(&mesh.edge_weights) {
        let (i, j) = (e[0], e[1]);
        let d = psi[j] - psi[i];
        t.add_triplet(ro + i, co + i, c * w * bernoulli(-d));
        t.add_triplet(ro + i, co + j, -c * w * bernoulli(d));
        t.add_triplet(ro + j, co + j, c * w * bernoulli(d));
        t.add_triplet(ro + j, co + i, -c * w * bernoulli(-d));
    }
}

/// A smooth potential with `strength` as its amplitude.
pub fn potential(mesh: &Mesh, strength: f64) -> Vec<f64> {
    (0..mesh.num_nodes())
        .map(|i| {
            let [x, y] = mesh.node(i);
            strength * (3.0 * x).sin() * (2.0 * y).cos()
        })
        .collect()
}

/// M + dt·K (symmetric positive definite).
pub fn diffusion(mesh: &Mesh, dt: f64) -> CsMat<f64> {
    let n = mesh.num_nodes();
    let mut t = TriMat::new((n, n));
    add_mass(&mut t, mesh, 1.0, 0, 0);
    add_laplacian(&mut t, mesh, dt, 0, 0);
    t.to_csr()
}

/// M + dt·T(ψ) with ψ of amplitude `strength` (nonsymmetric M-matrix).
pub fn transport(mesh: &Mesh, dt: f64, strength: f64) -> CsMat<f64> {
    let n = mesh.num_nodes();
    let mut t = TriMat::new((n, n));
    add_mass(&mut t, mesh, 1.0, 0, 0);
    add_transport(&mut t, mesh, &potential(mesh, strength), dt, 0, 0);
    t.to_csr()
}

/// A Newton-Jacobian-like matrix of `species` ≥ 2 species, species-major: cells (transport),
/// signal (diffusion + decay, produced by cells), further species immobile (diagonal blocks,
/// fed by cells). The cells-row, signal-column block is a mesh-graph matrix (chemotaxis).
pub fn coupled_species(mesh: &Mesh, dt: f64, species: usize) -> CsMat<f64> {
    let n = mesh.num_nodes();
    let mut t = TriMat::new((species * n, species * n));
    let psi = potential(mesh, 2.0);
    // cells
    add_mass(&mut t, mesh, 1.0 + 0.3 * dt, 0, 0);
    add_transport(&mut t, mesh, &psi, dt, 0, 0);
    add_laplacian(&mut t, mesh, -0.4 * dt, 0, n);
    // signal
    add_mass(&mut t, mesh, -0.5 * dt, n, 0);
    add_mass(&mut t, mesh, 1.0 + 0.2 * dt, n, n);
    add_laplacian(&mut t, mesh, 3.0 * dt, n, n);
    for s in 2..species {
        add_mass(&mut t, mesh, -0.1 * dt, s * n, 0);
        add_mass(&mut t, mesh, 1.0, s * n, s * n);
    }
    t.to_csr()
}

/// A Keller–Segel-like Jacobian, cells then signal: cells M + dt·T(ψ) with a chemotaxis
/// column −χ·dt·K on the signal; signal M(1 + 0.1·dt) + dt·K with production −dt·M from the
/// cells.
pub fn keller_segel(mesh: &Mesh, dt: f64, chi: f64) -> CsMat<f64> {
    let n = mesh.num_nodes();
    let mut t = TriMat::new((2 * n, 2 * n));
    let psi = potential(mesh, 1.0);
    add_mass(&mut t, mesh, 1.0, 0, 0);
    add_transport(&mut t, mesh, &psi, dt, 0, 0);
    add_laplacian(&mut t, mesh, -chi * dt, 0, n);
    add_mass(&mut t, mesh, -dt, n, 0);
    add_mass(&mut t, mesh, 1.0 + 0.1 * dt, n, n);
    add_laplacian(&mut t, mesh, dt, n, n);
    t.to_csr()
}

/// Two-species coupled matrix.
pub fn coupled(mesh: &Mesh, dt: f64) -> CsMat<f64> {
    coupled_species(mesh, dt, 2)
}

/// Sets the stored values of row `i` to zero (the pattern is kept).
pub fn zero_row(a: &mut CsMat<f64>, i: usize) {
    let range = a.indptr().outer_inds_sz(i);
    a.data_mut()[range].iter_mut().for_each(|v| *v = 0.0);
}

/// Deterministic pseudo-random vector in [−1, 1].
pub fn rhs(n: usize, seed: u64) -> Vec<f64> {
    let mut s = seed.wrapping_mul(0x9E3779B97F4A7C15) | 1;
    (0..n)
        .map(|_| {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            (s >> 11) as f64 / (1u64 << 52) as f64 - 1.0
        })
        .collect()
}

/// Reference solution by faer's dense partial-pivoting LU.
pub fn dense_solve(a: &CsMat<f64>, b: &[f64]) -> Vec<f64> {
    use faer::linalg::solvers::Solve;
    let n = a.rows();
    let mut m = faer::Mat::<f64>::zeros(n, n);
    for (v, (i, j)) in a.iter() {
        m[(i, j)] += *v;
    }
    let rhs = faer::Mat::<f64>::from_fn(n, 1, |i, _| b[i]);
    let x = m.partial_piv_lu().solve(&rhs);
    (0..n).map(|i| x[(i, 0)]).collect()
}

/// ‖b − A x‖ / ‖b‖.
pub fn relative_residual(a: &CsMat<f64>, x: &[f64], b: &[f64]) -> f64 {
    let mut r2 = 0.0;
    for (i, row) in a.outer_iterator().enumerate() {
        let ax: f64 = row.iter().map(|(j, v)| v * x[j]).sum();
        r2 += (b[i] - ax).powi(2);
    }
    r2.sqrt() / b.iter().map(|v| v * v).sum::<f64>().sqrt()
}

/// K alone (singular: constants are in its kernel).
pub fn laplacian_only(mesh: &Mesh) -> CsMat<f64> {
    let n = mesh.num_nodes();
    let mut t = TriMat::new((n, n));
    add_laplacian(&mut t, mesh, 1.0, 0, 0);
    t.to_csr()
}
