//! The plate's Neumann eigenvalues by shift-invert Lanczos (`agarium_core::stability`)
//! against exact values: on the unit disk the squares of the zeros j'ₘ,ₖ of Jₘ' (Abramowitz &
//! Stegun, Handbook of Mathematical Functions, 1964, table 9.5; m ≥ 1 twice, cos and sin), on
//! a 3 × 2 rectangle (mπ/3)² + (nπ/2)² (separation of variables, common practice). P1 with
//! a lumped mass converges at order 2 in h for eigenvalues (common practice), so halving h
//! must cut the error by about 4.

use agarium_core::stability::neumann_modes;
use agarium_verify::reference::j_prime_zero;
use agarium_verify::support::{disk, mesh, rectangle};

fn relative_errors(values: &[f64], exact: &[f64]) -> Vec<f64> {
    values
        .iter()
        .zip(exact)
        .map(|(v, e)| (v - e).abs() / e)
        .collect()
}

#[test]
fn unit_disk_eigenvalues_are_the_squared_bessel_derivative_zeros() {
    let j = |m| j_prime_zero(m).unwrap().powi(2);
    // 0 (constant), j'₁,₁² twice, j'₂,₁² twice, j'₀,₁² once.
    let exact = [j(1), j(1), j(2), j(2), j(0)];
    let mut worst = Vec::new();
    for h in [0.08, 0.04] {
        let m = mesh("plate-modes", disk(1.0), h, None).unwrap();
        let modes = neumann_modes(&m, 6).unwrap();
        assert!(modes.eigenvalues[0].abs() < 1e-8, "{:?}", modes.eigenvalues);
        let err = relative_errors(&modes.eigenvalues[1..6], &exact);
        let w = err.iter().fold(0.0f64, |a, &b| a.max(b));
        // Measured 5.0e-3 at h = 0.08 and 1.3e-3 at h = 0.04 (628 and 2,404 nodes); a
        // wrong stiffness or mass scale is off by far more.
        let tol = if h > 0.05 { 0.012 } else { 0.003 };
        assert!(w < tol, "h {h}: {:?} vs {exact:?}", modes.eigenvalues);
        // Modes are M-orthonormal.
        let area = |a: &[f64], b: &[f64]| -> f64 {
            a.iter()
                .zip(b)
                .zip(&m.node_areas)
                .map(|((x, y), w)| x * y * w)
                .sum()
        };
        assert!((area(&modes.modes[1], &modes.modes[1]) - 1.0).abs() < 1e-9);
        assert!(area(&modes.modes[1], &modes.modes[4]).abs() < 1e-8);
        worst.push(w);
    }
    assert!(worst[0] / worst[1] > 3.0, "not second order: {worst:?}");
}

#[test]
fn rectangle_eigenvalues_are_sums_of_squares() {
    use std::f64::consts::PI;
    let m = mesh("plate-modes", rectangle(0.0, 0.0, 3.0, 2.0), 0.05, None).unwrap();
    let mut exact: Vec<f64> = (0..4)
        .flat_map(|a| {
            (0..4).map(move |b| (a as f64 * PI / 3.0).powi(2) + (b as f64 * PI / 2.0).powi(2))
        })
        .collect();
    exact.sort_by(f64::total_cmp);
    let modes = neumann_modes(&m, 8).unwrap();
    let err = relative_errors(&modes.eigenvalues[1..8], &exact[1..8]);
    assert!(
        err.iter().all(|&e| e < 0.005),
        "{:?} vs {:?}",
        modes.eigenvalues,
        &exact[..8]
    );
}

#[test]
fn too_many_modes_for_the_mesh_are_refused() {
    let m = mesh("plate-modes", disk(1.0), 0.5, None).unwrap();
    let e = neumann_modes(&m, 500).unwrap_err();
    assert!(e.to_string().contains("refine the mesh"), "{e}");
}
