//! Linear solver benchmark on disk meshes of about 1e4, 1e5 and 1e6 nodes: diffusion
//! M + dt·K at dt·D/h² ≈ 1 and ≈ 100, exponentially fitted transport, and a 4-species coupled
//! Jacobian-like matrix, each with the direct LU against the preconditioned iterations.
//!
//! Run with `cargo bench --bench linalg` (add `-- quick` for one repetition, `-- no-1e6` to
//! skip the largest mesh). Reports medians; the machine is shared, so compare ratios within
//! one run rather than absolute times.
//!
//! `-- precond` runs only the preconditioner sweep behind `Preconditioner::Auto` and
//! `Krylov::Auto`: M + dt·K (symmetric) and M + dt·T(ψ) (exponentially fitted, nonsymmetric)
//! at dt·D/h² ∈ {0.3, 3, 30, 300} on the 1e4 and 1e5 meshes, each preconditioner (fresh set-up
//! plus one solve to rtol 1e-6 and to 1e-8), CG for the symmetric and GMRES and BiCGSTAB for
//! the nonsymmetric block, and the time per iteration.

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::linalg::{
    DirectLu, Krylov, LinearParams, LinearSolver, Method, Preconditioner, SpdSolver,
};
use agarium_core::mesh::{build_mesh, Mesh, MeshOptions};
use sprs::{CsMat, TriMat};
use std::collections::BTreeMap;
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn bernoulli(x: f64) -> f64 {
    if x.abs() < 1e-8 {
        1.0 - 0.5 * x
    } else {
        x / x.exp_m1()
    }
}

/// Triplets of c·K (cotangent graph Laplacian) at a block offset.
fn laplacian(t: &mut TriMat<f64>, m: &Mesh, c: f64, ro: usize, co: usize) {
    for (e, w) in m.edges.iter().zip(&m.edge_weights) {
        let (i, j) = (e[0], e[1]);
        t.add_triplet(ro + i, co + i, c * w);
        t.add_triplet(ro + j, co + j, c * w);
        t.add_triplet(ro + i, co + j, -c * w);
        t.add_triplet(ro + j, co + i, -c * w);
    }
}

fn mass(t: &mut TriMat<f64>, m: &Mesh, c: f64, ro: usize, co: usize) {
    for (i, a) in m.node_areas.iter().enumerate() {
        t.add_triplet(ro + i, co + i, c * a);
    }
}

/// Triplets of c·T, T the exponentially fitted transport operator for potential ψ.
fn transport(t: &mut TriMat<f64>, m: &Mesh, psi: &[f64], c: f64, ro: usize, co: usize) {
    for (e, w) in m.edges.iter().zip(&m.edge_weights) {
        let (i, j) = (e[0], e[1]);
        let d = psi[j] - psi[i];
        t.add_triplet(ro + i, co + i, c * w * bernoulli(-d));
        t.add_triplet(ro + i, co + j, -c * w * bernoulli(d));
        t.add_triplet(ro + j, co + j, c * w * bernoulli(d));
        t.add_triplet(ro + j, co + i, -c * w * bernoulli(-d));
    }
}

fn potential(m: &Mesh, s: f64) -> Vec<f64> {
    (0..m.num_nodes())
        .map(|i| {
            let [x, y] = m.node(i);
            s * (3.0 * x).sin() * (2.0 * y).cos()
        })
        .collect()
}

fn diffusion_matrix(m: &Mesh, dt: f64) -> CsMat<f64> {
    let n = m.num_nodes();
    let mut t = TriMat::new((n, n));
    mass(&mut t, m, 1.0, 0, 0);
    laplacian(&mut t, m, dt, 0, 0);
    t.to_csr()
}

fn transport_matrix(m: &Mesh, dt: f64) -> CsMat<f64> {
    let n = m.num_nodes();
    let mut t = TriMat::new((n, n));
    mass(&mut t, m, 1.0, 0, 0);
    laplacian(&mut t, m, 0.0, 0, 0);
    transport(&mut t, m, &potential(m, 3.0), dt, 0, 0);
    t.to_csr()
}

/// Cells (transport, chemotaxis column on the signal), signal (diffusion, produced by cells),
/// nutrient (diffusion, consumed by cells), immobile cells (diagonal, fed by cells).
fn coupled_matrix(m: &Mesh, dt: f64) -> CsMat<f64> {
    let n = m.num_nodes();
    let mut t = TriMat::new((4 * n, 4 * n));
    let psi = potential(m, 2.0);
    mass(&mut t, m, 1.0 + 0.3 * dt, 0, 0);
    transport(&mut t, m, &psi, dt, 0, 0);
    laplacian(&mut t, m, -0.4 * dt, 0, n);
    mass(&mut t, m, -0.2 * dt, 0, 2 * n);
    mass(&mut t, m, -0.5 * dt, n, 0);
    mass(&mut t, m, 1.0 + 0.2 * dt, n, n);
    laplacian(&mut t, m, 3.0 * dt, n, n);
    mass(&mut t, m, 0.4 * dt, 2 * n, 0);
    mass(&mut t, m, 1.0 + 0.1 * dt, 2 * n, 2 * n);
    laplacian(&mut t, m, 0.5 * dt, 2 * n, 2 * n);
    mass(&mut t, m, -0.1 * dt, 3 * n, 0);
    mass(&mut t, m, 1.0, 3 * n, 3 * n);
    t.to_csr()
}

fn rhs(n: usize) -> Vec<f64> {
    (0..n).map(|i| ((i as f64) * 0.618).sin()).collect()
}

struct Row {
    setup: f64,
    solve: f64,
    iterations: usize,
}

/// Medians of `reps` runs of `setup` then `solve`; iterations of the last solve.
fn time_solver(
    a: &CsMat<f64>,
    blocks: usize,
    p: &LinearParams,
    reps: usize,
    fresh: bool,
) -> Result<Row, String> {
    let b = rhs(a.rows());
    let mut solver = LinearSolver::new(p.clone());
    solver.prepare(a, blocks).map_err(|e| e.to_string())?;
    let (mut ts, mut tv, mut iterations) = (Vec::new(), Vec::new(), 0);
    for _ in 0..reps {
        let t = Instant::now();
        if fresh {
            solver = LinearSolver::new(p.clone());
        }
        solver.prepare(a, blocks).map_err(|e| e.to_string())?;
        ts.push(t.elapsed().as_secs_f64());
        let mut x = vec![0.0; a.rows()];
        let t = Instant::now();
        let info = solver.solve(&b, &mut x).map_err(|e| e.to_string())?;
        tv.push(t.elapsed().as_secs_f64());
        iterations = info.iterations;
    }
    Ok(Row {
        setup: median(ts),
        solve: median(tv),
        iterations,
    })
}

fn time_cholesky(a: &CsMat<f64>, reps: usize) -> Result<Row, String> {
    let b = rhs(a.rows());
    let mut c = SpdSolver::new(a).map_err(|e| e.to_string())?;
    let (mut ts, mut tv) = (Vec::new(), Vec::new());
    for _ in 0..reps {
        let t = Instant::now();
        c.refactor(a).map_err(|e| e.to_string())?;
        ts.push(t.elapsed().as_secs_f64());
        let mut x = b.clone();
        let t = Instant::now();
        c.solve_in_place(&mut x).map_err(|e| e.to_string())?;
        tv.push(t.elapsed().as_secs_f64());
    }
    Ok(Row {
        setup: median(ts),
        solve: median(tv),
        iterations: 0,
    })
}

fn iterative(krylov: Krylov, preconditioner: Preconditioner) -> LinearParams {
    LinearParams {
        method: Method::Iterative,
        krylov,
        preconditioner,
        ..Default::default()
    }
}

/// Whether faer's multithreaded LU repeats bit for bit, and matches the sequential one.
fn determinism(a: &CsMat<f64>) {
    let b = rhs(a.rows());
    let solve = |threads: usize| -> (Vec<u64>, f64) {
        let t = Instant::now();
        let mut lu = DirectLu::with_threads(a, threads).expect("lu");
        let mut x = b.clone();
        lu.solve_in_place(&mut x).expect("solve");
        (
            x.iter().map(|v| v.to_bits()).collect(),
            t.elapsed().as_secs_f64(),
        )
    };
    let (seq, ts) = solve(1);
    let runs: Vec<(Vec<u64>, f64)> = (0..5).map(|_| solve(0)).collect();
    let repeat = runs.iter().all(|r| r.0 == runs[0].0);
    let same = runs[0].0 == seq;
    let tp = median(runs.iter().map(|r| r.1).collect());
    println!(
        "faer LU on {} unknowns, all rayon threads: 5 runs bitwise identical: {repeat}; \
         identical to sequential: {same}; time sequential {:.1} ms, threaded {:.1} ms",
        a.rows(),
        ts * 1e3,
        tp * 1e3
    );
}

/// The edge length of the mesh (mean of the edge lengths), for dt·D/h².
fn mean_edge(m: &Mesh) -> f64 {
    let s: f64 = m
        .edges
        .iter()
        .map(|e| {
            let (p, q) = (m.node(e[0]), m.node(e[1]));
            (p[0] - q[0]).hypot(p[1] - q[1])
        })
        .sum();
    s / m.edges.len() as f64
}

/// Medians of `reps` fresh set-ups and solves to `rtol`, and the iterations of the last.
fn time_to(a: &CsMat<f64>, p: &LinearParams, rtol: f64, reps: usize) -> Result<Row, String> {
    let b = rhs(a.rows());
    let (mut ts, mut tv, mut iterations) = (Vec::new(), Vec::new(), 0);
    for _ in 0..reps {
        let t = Instant::now();
        let mut solver = LinearSolver::new(p.clone());
        solver.prepare(a, 1).map_err(|e| e.to_string())?;
        ts.push(t.elapsed().as_secs_f64());
        let mut x = vec![0.0; a.rows()];
        let t = Instant::now();
        let info = solver
            .solve_to(&b, &mut x, rtol)
            .map_err(|e| e.to_string())?;
        tv.push(t.elapsed().as_secs_f64());
        iterations = info.iterations;
    }
    Ok(Row {
        setup: median(ts),
        solve: median(tv),
        iterations,
    })
}

/// The preconditioner sweep (see the module docs).
fn precond_sweep(disk: &PlateSpec, quick: bool) {
    println!(
        "{:>5} {:<9} {:>7} {:<16} {:>6} {:>10} {:>10} {:>10} {:>6} {:>9}",
        "mesh",
        "block",
        "dtD/h2",
        "method",
        "rtol",
        "setup[ms]",
        "solve[ms]",
        "total[ms]",
        "iters",
        "ms/iter"
    );
    for (label, h, reps) in [("1e4", 0.019, 5), ("1e5", 0.006, 3)] {
        let reps = if quick { 1 } else { reps };
        let mesh = build_mesh(
            disk,
            &MeshOptions {
                size: h,
                ..Default::default()
            },
        )
        .expect("mesh")
        .mesh;
        let he = mean_edge(&mesh);
        for ratio in [0.3, 3.0, 30.0, 300.0] {
            let dt = ratio * he * he;
            for (block, a) in [
                ("diffusion", diffusion_matrix(&mesh, dt)),
                ("SG", transport_matrix(&mesh, dt)),
            ] {
                let krylovs: &[(&str, Krylov)] = if block == "diffusion" {
                    &[("CG", Krylov::Cg)]
                } else {
                    &[("GMRES", Krylov::Gmres), ("BiCGSTAB", Krylov::Bicgstab)]
                };
                for (kn, k) in krylovs {
                    for (pn, pc) in [
                        ("ILU0", Preconditioner::Ilu0),
                        ("AMG", Preconditioner::Amg),
                        ("Jacobi", Preconditioner::Jacobi),
                        ("Auto", Preconditioner::Auto),
                    ] {
                        for rtol in [1e-6, 1e-8] {
                            let p = LinearParams {
                                max_iterations: 1000,
                                ..iterative(*k, pc)
                            };
                            let m = format!("{kn}+{pn}");
                            match time_to(&a, &p, rtol, reps) {
                                Ok(r) => println!(
                                    "{label:>5} {block:<9} {ratio:>7} {m:<16} {rtol:>6.0e} \
                                     {:>10.2} {:>10.2} {:>10.2} {:>6} {:>9.3}",
                                    r.setup * 1e3,
                                    r.solve * 1e3,
                                    (r.setup + r.solve) * 1e3,
                                    r.iterations,
                                    r.solve * 1e3 / r.iterations.max(1) as f64
                                ),
                                Err(e) => println!(
                                    "{label:>5} {block:<9} {ratio:>7} {m:<16} {rtol:>6.0e} \
                                     failed: {e}"
                                ),
                            }
                        }
                    }
                }
            }
        }
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let smoke = !args.iter().any(|a| a == "--bench");
    let quick = smoke || args.iter().any(|a| a == "quick");
    let skip_largest = args.iter().any(|a| a == "no-1e6");
    // `coupled`: only the 4-species system and its iterative rows (the time-step hot path).
    let coupled_only = args.iter().any(|a| a == "coupled");
    let disk = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 1.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    if args.iter().any(|a| a == "precond") && !smoke {
        precond_sweep(&disk, quick);
        return;
    }
    // Nodes ≈ 3.6 / h² on the unit disk.
    let mut sizes: Vec<(&str, f64, usize)> = if smoke {
        vec![("2e3", 0.042, 1)]
    } else {
        vec![("1e4", 0.019, 5), ("1e5", 0.006, 3), ("1e6", 0.0019, 1)]
    };
    if skip_largest {
        sizes.retain(|s| s.0 != "1e6");
    }
    println!(
        "{:>5} {:>8} {:<22} {:<16} {:>11} {:>11} {:>11} {:>6}",
        "mesh", "unknowns", "system", "method", "setup [ms]", "solve [ms]", "total [ms]", "iters"
    );
    let mut totals: BTreeMap<(String, String), Vec<(String, f64)>> = BTreeMap::new();
    for (label, h, reps) in sizes {
        let reps = if quick { 1 } else { reps };
        let mesh = build_mesh(
            &disk,
            &MeshOptions {
                size: h,
                max_nodes: 3_000_000,
                ..Default::default()
            },
        )
        .expect("mesh")
        .mesh;
        let n = mesh.num_nodes();
        let mut systems: Vec<(String, CsMat<f64>, usize)> = Vec::new();
        for ratio in [1.0, 100.0] {
            systems.push((
                format!("M+dtK dtD/h2={ratio}"),
                diffusion_matrix(&mesh, ratio * h * h),
                1,
            ));
        }
        systems.push((
            "SG transport".into(),
            transport_matrix(&mesh, 10.0 * h * h),
            1,
        ));
        systems.push(("4 species".into(), coupled_matrix(&mesh, 10.0 * h * h), 4));
        if coupled_only {
            systems.retain(|s| s.2 > 1);
        } else if label == "1e5" || smoke {
            determinism(&systems[2].1);
        }
        for (name, a, blocks) in &systems {
            let symmetric = name.starts_with("M+dtK");
            let mut cases: Vec<(&str, LinearParams, bool)> = vec![];
            // Direct factorizations of the coupled system at 1e6 nodes exceed this machine.
            let direct_ok = a.rows() <= 1_500_000 && !coupled_only;
            if direct_ok {
                // Pure LU, also for symmetric matrices (Cholesky has its own row).
                let lu = LinearParams {
                    method: Method::Direct,
                    cholesky_when_symmetric: false,
                    ..Default::default()
                };
                cases.push(("LU", lu, false));
            }
            if symmetric {
                cases.push(("CG+AMG", iterative(Krylov::Cg, Preconditioner::Amg), true));
                cases.push((
                    "CG+AMG reuse",
                    iterative(Krylov::Cg, Preconditioner::Amg),
                    false,
                ));
                cases.push(("CG+ILU0", iterative(Krylov::Cg, Preconditioner::Ilu0), true));
                cases.push((
                    "CG+Jacobi",
                    iterative(Krylov::Cg, Preconditioner::Jacobi),
                    true,
                ));
            } else {
                for (kn, k) in [("BiCGSTAB", Krylov::Bicgstab), ("GMRES", Krylov::Gmres)] {
                    for (pn, p) in [("AMG", Preconditioner::Amg), ("ILU0", Preconditioner::Ilu0)] {
                        let label: &'static str = Box::leak(
                            format!("{kn}+{}{pn}", if *blocks > 1 { "blk-" } else { "" })
                                .into_boxed_str(),
                        );
                        cases.push((label, iterative(k, p), true));
                    }
                }
                if *blocks > 1 {
                    // Same pattern, new prepare: the refresh path of a Newton iteration.
                    cases.push((
                        "GMRES+blk-AMG reuse",
                        iterative(Krylov::Gmres, Preconditioner::Amg),
                        false,
                    ));
                }
            }
            let mut rows: Vec<(String, Result<Row, String>)> = Vec::new();
            if symmetric && direct_ok {
                rows.push(("Cholesky".into(), time_cholesky(a, reps)));
            }
            for (mname, p, fresh) in cases {
                rows.push((mname.to_string(), time_solver(a, *blocks, &p, reps, fresh)));
            }
            for (mname, row) in rows {
                match row {
                    Ok(r) => {
                        println!(
                            "{:>5} {:>8} {:<22} {:<16} {:>11.2} {:>11.2} {:>11.2} {:>6}",
                            label,
                            a.rows(),
                            name,
                            mname,
                            r.setup * 1e3,
                            r.solve * 1e3,
                            (r.setup + r.solve) * 1e3,
                            r.iterations
                        );
                        totals
                            .entry((name.clone(), mname.clone()))
                            .or_default()
                            .push((label.to_string(), r.setup + r.solve));
                    }
                    Err(e) => println!(
                        "{label:>5} {:>8} {name:<22} {mname:<16} failed: {e}",
                        a.rows()
                    ),
                }
            }
        }
        let _ = n;
    }
    if !smoke {
        println!("\nt(1e6)/t(1e5) of set-up + solve:");
        for ((system, method), v) in &totals {
            let get = |l: &str| v.iter().find(|(m, _)| m == l).map(|x| x.1);
            if let (Some(a), Some(b)) = (get("1e5"), get("1e6")) {
                println!("  {system:<22} {method:<16} {:>6.1}", b / a);
            }
        }
    }
}
