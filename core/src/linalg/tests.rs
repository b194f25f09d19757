//! Tests of the [`super::LinearSolver`] dispatch: every iterative method and preconditioner
//! against the direct LU (itself checked against faer's dense LU in `direct.rs`), multigrid
//! iteration counts across mesh sizes, and the failure paths.

use super::testmats::{self, relative_residual};
use super::*;
use proptest::prelude::*;

fn params(krylov: Krylov, preconditioner: Preconditioner) -> LinearParams {
    LinearParams {
        method: Method::Iterative,
        krylov,
        preconditioner,
        ..Default::default()
    }
}

fn direct_solution(a: &CsMat<f64>, b: &[f64]) -> Vec<f64> {
    let mut x = b.to_vec();
    DirectLu::new(a).unwrap().solve_in_place(&mut x).unwrap();
    x
}

/// Iterative solution within `tol` (relative, max norm) of the direct LU solution.
fn check_against_lu(a: &CsMat<f64>, blocks: usize, p: LinearParams, tol: f64) -> LinearInfo {
    let b = testmats::rhs(a.rows(), 11);
    let want = direct_solution(a, &b);
    let mut s = LinearSolver::new(p.clone());
    s.prepare(a, blocks).unwrap();
    let mut x = vec![0.0; a.rows()];
    let info = s.solve(&b, &mut x).unwrap_or_else(|e| panic!("{p:?}: {e}"));
    assert_eq!(info.method, Method::Iterative);
    assert!(info.relative_residual <= p.rtol, "{info:?}");
    assert!(relative_residual(a, &x, &b) <= 1.01 * p.rtol, "{p:?}");
    let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let err = x
        .iter()
        .zip(&want)
        .fold(0.0f64, |m, (g, w)| m.max((g - w).abs()));
    assert!(
        err <= tol * scale,
        "{p:?}: error {err:e} (scale {scale:e}), {info:?}"
    );
    info
}

#[test]
fn every_method_and_preconditioner_matches_the_direct_lu() {
    let mesh = testmats::disk_mesh(0.06);
    let diffusion = testmats::diffusion(&mesh, 1e-2);
    let transport = testmats::transport(&mesh, 1e-2, 3.0);
    let pcs = [
        Preconditioner::None,
        Preconditioner::Jacobi,
        Preconditioner::Ilu0,
        Preconditioner::Amg,
    ];
    for pc in pcs {
        check_against_lu(&diffusion, 1, params(Krylov::Cg, pc), 1e-7);
        for k in [Krylov::Bicgstab, Krylov::Gmres] {
            check_against_lu(&diffusion, 1, params(k, pc), 1e-7);
            check_against_lu(&transport, 1, params(k, pc), 1e-7);
        }
    }
}

#[test]
fn block_preconditioners_match_the_direct_lu_on_coupled_species() {
    let mesh = testmats::disk_mesh(0.06);
    for species in [2, 3] {
        let a = testmats::coupled_species(&mesh, 1e-2, species);
        for pc in [
            Preconditioner::Ilu0,
            Preconditioner::Amg,
            Preconditioner::Jacobi,
        ] {
            for scheme in [BlockScheme::GaussSeidel, BlockScheme::Diagonal] {
                let p = LinearParams {
                    block_scheme: scheme,
                    ..params(Krylov::Gmres, pc)
                };
                check_against_lu(&a, species, p.clone(), 1e-7);
                check_against_lu(
                    &a,
                    species,
                    LinearParams {
                        krylov: Krylov::Bicgstab,
                        ..p
                    },
                    1e-7,
                );
            }
        }
    }
}

#[test]
fn auto_chooses_by_size_and_symmetry() {
    let mesh = testmats::disk_mesh(0.1);
    let d = testmats::diffusion(&mesh, 1e-2);
    let t = testmats::transport(&mesh, 1e-2, 3.0);
    let mut s = LinearSolver::new(LinearParams::default());
    s.prepare(&d, 1).unwrap();
    assert_eq!(s.method(), Some(Method::Direct));
    let mut s = LinearSolver::new(LinearParams {
        direct_limit: 10,
        ..Default::default()
    });
    s.prepare(&d, 1).unwrap();
    assert_eq!(
        (s.method(), s.krylov()),
        (Some(Method::Iterative), Some(Krylov::Cg))
    );
    // Same pattern, now nonsymmetric values: the check is redone.
    s.prepare(&t, 1).unwrap();
    assert_eq!(s.krylov(), Some(Krylov::Gmres));
    let b = testmats::rhs(t.rows(), 4);
    let mut x = vec![0.0; t.rows()];
    let info = s.solve(&b, &mut x).unwrap();
    assert!(relative_residual(&t, &x, &b) <= 1e-10, "{info:?}");
    // A flat potential makes the transport matrix symmetric (B(0) = 1 on every edge).
    let flat = testmats::transport(&mesh, 1e-2, 0.0);
    s.prepare(&flat, 1).unwrap();
    assert_eq!(s.krylov(), Some(Krylov::Cg));
}

#[test]
fn the_direct_path_uses_cholesky_for_spd_matrices_and_lu_otherwise() {
    let mesh = testmats::disk_mesh(0.1);
    let d = testmats::diffusion(&mesh, 1e-2);
    let mut neg = d.clone();
    neg.data_mut().iter_mut().for_each(|v| *v = -*v);
    let t = testmats::transport(&mesh, 1e-2, 3.0);
    let mut s = LinearSolver::new(LinearParams::default());
    for (a, chol) in [(&d, true), (&t, false), (&neg, false), (&d, true)] {
        s.prepare(a, 1).unwrap();
        assert_eq!(s.uses_cholesky(), chol);
        let b = testmats::rhs(a.rows(), 2);
        let mut x = vec![0.0; a.rows()];
        s.solve(&b, &mut x).unwrap();
        assert!(relative_residual(a, &x, &b) < 1e-13);
    }
}

#[test]
fn direct_and_iterative_paths_refill_values_on_the_same_pattern() {
    let mesh = testmats::disk_mesh(0.08);
    for method in [Method::Direct, Method::Iterative] {
        let mut s = LinearSolver::new(LinearParams {
            method,
            ..Default::default()
        });
        for dt in [1e-3, 1e-1, 10.0] {
            let a = testmats::transport(&mesh, dt, 2.0);
            s.prepare(&a, 1).unwrap();
            let b = testmats::rhs(a.rows(), 9);
            let mut x = vec![0.0; a.rows()];
            s.solve(&b, &mut x).unwrap();
            assert!(relative_residual(&a, &x, &b) <= 1e-10, "{method:?} dt {dt}");
        }
    }
}

#[test]
fn multigrid_cg_iterations_stay_flat_as_the_mesh_is_refined() {
    // Fixed dt on a unit disk: dt·D/h² grows from ~5 to ~300, the regime where unpreconditioned
    // counts grow like 1/h. Nodes ≈ 3.6/h² (measured on these meshes).
    let mut counts = Vec::new();
    for h in [0.042, 0.0062] {
        let mesh = testmats::disk_mesh(h);
        let a = testmats::diffusion(&mesh, 1e-2);
        let mut s = LinearSolver::new(params(Krylov::Cg, Preconditioner::Amg));
        s.prepare(&a, 1).unwrap();
        let b = testmats::rhs(a.rows(), 1);
        let mut x = vec![0.0; a.rows()];
        let info = s.solve(&b, &mut x).unwrap();
        counts.push((a.rows(), info.iterations));
    }
    let (small, large) = (counts[0], counts[1]);
    assert!(small.0 < 3000 && large.0 > 90_000, "{counts:?}");
    assert!(
        large.1 as f64 <= 1.5 * small.1 as f64,
        "CG+AMG iterations grew: {counts:?}"
    );
}

#[test]
fn iterative_solves_are_bitwise_repeatable() {
    let mesh = testmats::disk_mesh(0.05);
    let a = testmats::coupled(&mesh, 1e-2);
    let b = testmats::rhs(a.rows(), 3);
    let mut runs = Vec::new();
    for _ in 0..2 {
        let mut s = LinearSolver::new(params(Krylov::Gmres, Preconditioner::Amg));
        s.prepare(&a, 2).unwrap();
        let mut x = vec![0.0; a.rows()];
        s.solve(&b, &mut x).unwrap();
        runs.push(x);
    }
    assert!(runs[0]
        .iter()
        .zip(&runs[1])
        .all(|(p, q)| p.to_bits() == q.to_bits()));
}

#[test]
fn failures_are_typed_errors() {
    let mesh = testmats::disk_mesh(0.1);
    let a = testmats::diffusion(&mesh, 1e-2);
    let n = a.rows();
    for method in [Method::Direct, Method::Iterative] {
        let mut s = LinearSolver::new(LinearParams {
            method,
            ..Default::default()
        });
        let mut x = vec![0.0; n];
        assert!(matches!(
            s.solve(&vec![1.0; n], &mut x),
            Err(LinalgError::Shape(_))
        ));
        assert!(matches!(s.prepare(&a, 0), Err(LinalgError::Shape(_))));
        assert!(matches!(s.prepare(&a, 7), Err(LinalgError::Shape(_))) || n % 7 == 0);
        let rect = CsMat::<f64>::zero((3, 4));
        assert!(matches!(s.prepare(&rect, 1), Err(LinalgError::Shape(_))));
        let mut bad = a.clone();
        bad.data_mut()[0] = f64::INFINITY;
        assert_eq!(s.prepare(&bad, 1), Err(LinalgError::NonFinite));
        s.prepare(&a, 1).unwrap();
        assert!(matches!(
            s.solve(&[1.0], &mut x),
            Err(LinalgError::Shape(_))
        ));
        let mut b = vec![1.0; n];
        b[2] = f64::NAN;
        assert_eq!(s.solve(&b, &mut x), Err(LinalgError::NonFinite));
        // A zero row: singular for the factorization and the preconditioners' set-up.
        let mut sing = a.clone();
        testmats::zero_row(&mut sing, 3);
        assert!(matches!(
            s.prepare(&sing, 1),
            Err(LinalgError::Singular { .. })
        ));
        // After a failed prepare nothing stale is solved with.
        assert!(matches!(
            s.solve(&vec![1.0; n], &mut x),
            Err(LinalgError::Shape(_))
        ));
    }
}

#[test]
fn an_inconsistent_singular_system_does_not_converge() {
    // Neumann Laplacian (no mass): constants span the kernel, and b = e₀ has a nonzero mean,
    // so no x solves it. The iteration must say so instead of returning its last iterate.
    let mesh = testmats::disk_mesh(0.1);
    let k = testmats::laplacian_only(&mesh);
    let n = k.rows();
    let mut b = vec![0.0; n];
    b[0] = 1.0;
    for (krylov, pc) in [
        (Krylov::Cg, Preconditioner::Jacobi),
        (Krylov::Gmres, Preconditioner::Amg),
        (Krylov::Bicgstab, Preconditioner::Ilu0),
    ] {
        let mut s = LinearSolver::new(LinearParams {
            max_iterations: 200,
            ..params(krylov, pc)
        });
        let r = s.prepare(&k, 1);
        if let Err(e) = r {
            assert!(matches!(e, LinalgError::Singular { .. }), "{e}");
            continue;
        }
        let mut x = vec![0.0; n];
        match s.solve(&b, &mut x) {
            Err(LinalgError::NotConverged { residual, .. }) => assert!(residual > 1e-10),
            other => panic!("{krylov:?}/{pc:?}: {other:?}"),
        }
    }
}

#[test]
fn a_zero_right_hand_side_gives_zero() {
    let mesh = testmats::disk_mesh(0.1);
    let a = testmats::transport(&mesh, 1e-2, 1.0);
    let mut s = LinearSolver::new(params(Krylov::Gmres, Preconditioner::Ilu0));
    s.prepare(&a, 1).unwrap();
    let mut x = vec![1.0; a.rows()];
    let info = s.solve(&vec![0.0; a.rows()], &mut x).unwrap();
    assert_eq!(info.iterations, 0);
    assert!(x.iter().all(|v| *v == 0.0));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    /// Any right-hand side and initial guess: the reported and the true residual meet rtol.
    #[test]
    fn random_right_hand_sides_meet_the_tolerance(
        seed in any::<u64>(),
        guess in -1.0f64..1.0,
        dt in 1e-4f64..1.0,
        which in 0usize..3,
    ) {
        let mesh = testmats::disk_mesh(0.12);
        let (a, blocks, krylov) = match which {
            0 => (testmats::diffusion(&mesh, dt), 1, Krylov::Cg),
            1 => (testmats::transport(&mesh, dt, 3.0), 1, Krylov::Bicgstab),
            _ => (testmats::coupled(&mesh, dt), 2, Krylov::Gmres),
        };
        let mut s = LinearSolver::new(params(krylov, Preconditioner::Auto));
        s.prepare(&a, blocks).unwrap();
        let b = testmats::rhs(a.rows(), seed);
        let mut x = vec![guess; a.rows()];
        let info = s.solve(&b, &mut x).unwrap();
        prop_assert!(info.relative_residual <= 1e-10);
        prop_assert!(relative_residual(&a, &x, &b) <= 1.01e-10);
    }
}

#[test]
fn refresh_in_place_equals_a_fresh_prepare_bit_for_bit() {
    // Same pattern, new values (a different dt): the reused path (values refilled into the
    // solver's copy, the block parts and every multigrid level, work vectors kept from an
    // earlier solve) must give the answer a fresh solver gives. Scaling keeps the aggregates
    // a fresh set-up would choose (the strength graph is scale invariant).
    let mesh = testmats::disk_mesh(0.05);
    let a1 = testmats::coupled_species(&mesh, 0.5, 3);
    let mut a2 = a1.clone();
    a2.data_mut().iter_mut().for_each(|v| *v *= 1.7);
    for (krylov, pc) in [
        (Krylov::Gmres, Preconditioner::Amg),
        (Krylov::Bicgstab, Preconditioner::Ilu0),
        (Krylov::Gmres, Preconditioner::Ilu0),
    ] {
        let p = params(krylov, pc);
        let b = testmats::rhs(a1.rows(), 3);
        let mut reused = LinearSolver::new(p.clone());
        reused.prepare(&a1, 3).unwrap();
        let mut x = vec![0.0; a1.rows()];
        reused.solve(&b, &mut x).unwrap();
        reused.prepare(&a2, 3).unwrap();
        let mut x1 = vec![0.0; a1.rows()];
        let i1 = reused.solve(&b, &mut x1).unwrap();
        let mut fresh = LinearSolver::new(p);
        fresh.prepare(&a2, 3).unwrap();
        let mut x2 = vec![0.0; a1.rows()];
        let i2 = fresh.solve(&b, &mut x2).unwrap();
        assert_eq!(i1, i2, "{krylov:?} {pc:?}");
        assert!(
            x1.iter().zip(&x2).all(|(u, v)| u.to_bits() == v.to_bits()),
            "{krylov:?} {pc:?}"
        );
    }
}

/// `solve` of the updated solver against the direct LU of the new matrix.
fn check_update(a0: &CsMat<f64>, a1: &CsMat<f64>, blocks: usize, p: LinearParams) -> LinearInfo {
    let mut s = LinearSolver::new(p.clone());
    s.prepare(a0, blocks).unwrap();
    let b = testmats::rhs(a1.rows(), 21);
    let mut x = vec![0.0; a1.rows()];
    s.solve(&b, &mut x).unwrap();
    s.update(a1).unwrap_or_else(|e| panic!("{p:?}: {e}"));
    assert_eq!(s.method(), Some(p.method));
    let want = direct_solution(a1, &b);
    x.fill(0.0);
    let info = s.solve(&b, &mut x).unwrap_or_else(|e| panic!("{p:?}: {e}"));
    assert!(
        relative_residual(a1, &x, &b) <= 1.01 * p.rtol,
        "{p:?} {info:?}"
    );
    let scale = want.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let err = x
        .iter()
        .zip(&want)
        .fold(0.0f64, |m, (g, w)| m.max((g - w).abs()));
    assert!(err <= 1e-7 * scale, "{p:?}: error {err:e} of {scale:e}");
    info
}

#[test]
fn update_solves_the_new_matrix_with_the_frozen_preconditioner() {
    // Perturbations of the kind a time step makes: the time coefficient 10 % larger
    // (M + dt·K → M + 1.1·dt·K relative to the mass), a potential appearing in the transport
    // operator (symmetric → nonsymmetric, so CG must give way), and a coupled Jacobian at
    // another dt. Reference: the direct LU of the new matrix.
    let mesh = testmats::disk_mesh(0.05);
    let dt = 2e-2;
    let cases = [
        (
            testmats::diffusion(&mesh, dt),
            testmats::diffusion(&mesh, 1.1 * dt),
            1,
        ),
        (
            testmats::transport(&mesh, dt, 0.0),
            testmats::transport(&mesh, dt, 1.0),
            1,
        ),
        (
            testmats::transport(&mesh, dt, 2.0),
            testmats::transport(&mesh, 1.1 * dt, 2.5),
            1,
        ),
        (
            testmats::coupled_species(&mesh, dt, 3),
            testmats::coupled_species(&mesh, 1.1 * dt, 3),
            3,
        ),
    ];
    for (a0, a1, blocks) in &cases {
        for pc in [
            Preconditioner::Jacobi,
            Preconditioner::Ilu0,
            Preconditioner::Amg,
            Preconditioner::Auto,
        ] {
            for krylov in [Krylov::Auto, Krylov::Gmres, Krylov::Bicgstab] {
                check_update(a0, a1, *blocks, params(krylov, pc));
            }
        }
        let direct = LinearParams {
            method: Method::Direct,
            ..Default::default()
        };
        check_update(a0, a1, *blocks, direct);
    }
}

#[test]
fn update_keeps_multigrid_iterations_near_a_fresh_prepare() {
    // A frozen hierarchy for a 10 % change of the time coefficient should cost at most a few
    // extra iterations (common practice for lagged multigrid set-ups); a broken update (e.g.
    // the V-cycle smoothing with the old fine matrix) shows as a residual that stalls.
    let mesh = testmats::disk_mesh(0.03);
    let (a0, a1) = (
        testmats::diffusion(&mesh, 1e-1),
        testmats::diffusion(&mesh, 1.1e-1),
    );
    let p = params(Krylov::Cg, Preconditioner::Amg);
    let updated = check_update(&a0, &a1, 1, p.clone());
    let mut fresh = LinearSolver::new(p);
    fresh.prepare(&a1, 1).unwrap();
    let b = testmats::rhs(a1.rows(), 21);
    let mut x = vec![0.0; a1.rows()];
    let fresh = fresh.solve(&b, &mut x).unwrap();
    assert!(
        updated.iterations <= fresh.iterations + 3,
        "{updated:?} vs {fresh:?}"
    );
}

#[test]
fn update_needs_a_prepare_on_the_same_pattern() {
    let mesh = testmats::disk_mesh(0.1);
    let a = testmats::diffusion(&mesh, 1e-2);
    let other = testmats::diffusion(&testmats::disk_mesh(0.12), 1e-2);
    for method in [Method::Direct, Method::Iterative] {
        let mut s = LinearSolver::new(LinearParams {
            method,
            ..Default::default()
        });
        assert!(matches!(s.update(&a), Err(LinalgError::NeedsPrepare(_))));
        s.prepare(&a, 1).unwrap();
        assert!(matches!(
            s.update(&other),
            Err(LinalgError::NeedsPrepare(_))
        ));
        // A refused update leaves the prepared state usable.
        let b = testmats::rhs(a.rows(), 1);
        let mut x = vec![0.0; a.rows()];
        s.solve(&b, &mut x).unwrap();
        assert!(relative_residual(&a, &x, &b) <= 1.01e-10);
        // A non-finite update fails and leaves the solver unprepared.
        let mut bad = a.clone();
        bad.data_mut()[1] = f64::NAN;
        assert_eq!(s.update(&bad), Err(LinalgError::NonFinite));
        assert!(matches!(s.solve(&b, &mut x), Err(LinalgError::Shape(_))));
        assert!(matches!(s.update(&a), Err(LinalgError::NeedsPrepare(_))));
    }
}

#[test]
fn solve_to_stops_at_the_given_tolerance() {
    let mesh = testmats::disk_mesh(0.05);
    let a = testmats::transport(&mesh, 1e-1, 2.0);
    let b = testmats::rhs(a.rows(), 8);
    for krylov in [Krylov::Cg, Krylov::Bicgstab, Krylov::Gmres] {
        let a = if krylov == Krylov::Cg {
            testmats::diffusion(&mesh, 1e-1)
        } else {
            a.clone()
        };
        let mut s = LinearSolver::new(params(krylov, Preconditioner::Jacobi));
        s.prepare(&a, 1).unwrap();
        let mut counts = Vec::new();
        for rtol in [1e-3, 1e-6, 1e-10] {
            let mut x = vec![0.0; a.rows()];
            let info = s.solve_to(&b, &mut x, rtol).unwrap();
            let r = relative_residual(&a, &x, &b);
            assert!(r <= 1.01 * rtol, "{krylov:?} {rtol}: {r:e}");
            counts.push(info.iterations);
        }
        assert!(counts[0] < counts[1] && counts[1] < counts[2], "{counts:?}");
        // `solve` still uses params.rtol.
        let mut x = vec![0.0; a.rows()];
        let info = s.solve(&b, &mut x).unwrap();
        assert_eq!(info.iterations, counts[2]);
        for bad in [0.0, -1e-3, f64::NAN, f64::INFINITY] {
            assert!(matches!(
                s.solve_to(&b, &mut x, bad),
                Err(LinalgError::InvalidTolerance(_))
            ));
        }
    }
    // The direct path ignores the tolerance.
    let mut s = LinearSolver::new(LinearParams {
        method: Method::Direct,
        ..Default::default()
    });
    s.prepare(&a, 1).unwrap();
    let mut x = vec![0.0; a.rows()];
    s.solve_to(&b, &mut x, 1e-2).unwrap();
    assert!(relative_residual(&a, &x, &b) < 1e-12);
}
