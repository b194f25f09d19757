//! Mesh generation benchmark: disks of about 1e4, 1e5 and 1e6 triangles, and the effect of
//! reverse Cuthill–McKee renumbering on a sparse mat-vec, measured side by side in one run.
//!
//! Run with `cargo bench --bench mesh` (add `-- quick` for a single repetition). Reports
//! medians; the machine is shared, so compare ratios within one run rather than absolute times.

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::mesh::{build_mesh, Mesh, MeshOptions};
use std::time::Instant;

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// y = K x with K the graph Laplacian from the edge weights, in CSR built for a given order.
struct Csr {
    ptr: Vec<usize>,
    col: Vec<usize>,
    val: Vec<f64>,
}

fn csr(mesh: &Mesh, new_of: &[usize]) -> Csr {
    let n = mesh.num_nodes();
    let mut rows: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
    for (e, w) in mesh.edges.iter().zip(&mesh.edge_weights) {
        let (a, b) = (new_of[e[0]], new_of[e[1]]);
        rows[a].push((b, -w));
        rows[b].push((a, -w));
        rows[a].push((a, *w));
        rows[b].push((b, *w));
    }
    let mut out = Csr {
        ptr: vec![0],
        col: Vec::new(),
        val: Vec::new(),
    };
    for mut r in rows {
        r.sort_by_key(|x| x.0);
        let mut last = usize::MAX;
        for (c, v) in r {
            if c == last {
                *out.val.last_mut().unwrap() += v;
            } else {
                out.col.push(c);
                out.val.push(v);
                last = c;
            }
        }
        out.ptr.push(out.col.len());
    }
    out
}

fn matvec(k: &Csr, x: &[f64], y: &mut [f64]) {
    for (i, yi) in y.iter_mut().enumerate() {
        let mut s = 0.0;
        for j in k.ptr[i]..k.ptr[i + 1] {
            s += k.val[j] * x[k.col[j]];
        }
        *yi = s;
    }
}

fn main() {
    // `cargo bench` passes --bench; under `cargo test --all-targets` only a smoke run is done.
    let smoke = !std::env::args().any(|a| a == "--bench");
    let quick = smoke || std::env::args().any(|a| a == "quick");
    let disk = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 1.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    println!(
        "{:>12} {:>10} {:>10} {:>12} {:>14}",
        "target tris", "nodes", "triangles", "median [s]", "µs / triangle"
    );
    let mut largest = None;
    let cases: &[(f64, f64, usize)] = if smoke {
        &[(1e4, 0.0273, 1)]
    } else {
        &[(1e4, 0.0273, 7), (1e5, 0.00864, 5), (1e6, 0.00273, 3)]
    };
    for &(target, h, reps) in cases {
        let reps = if quick { 1 } else { reps };
        let mut times = Vec::new();
        let mut last = None;
        for _ in 0..reps {
            let t = Instant::now();
            let built = build_mesh(
                &disk,
                &MeshOptions {
                    size: h,
                    ..Default::default()
                },
            )
            .expect("mesh");
            times.push(t.elapsed().as_secs_f64());
            last = Some(built.mesh);
        }
        let mesh = last.unwrap();
        let med = median(times);
        println!(
            "{:>12.0e} {:>10} {:>10} {:>12.3} {:>14.3}",
            target,
            mesh.num_nodes(),
            mesh.triangles.len(),
            med,
            med * 1e6 / mesh.triangles.len() as f64
        );
        largest = Some(mesh);
    }

    // Mat-vec in the mesh's own (RCM) order against a pseudo-random order of the same matrix.
    let mesh = largest.unwrap();
    let n = mesh.num_nodes();
    let identity: Vec<usize> = (0..n).collect();
    let mut shuffled = identity.clone();
    let mut state = 0x2545F4914F6CDD1Du64;
    for i in (1..n).rev() {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        shuffled.swap(i, (state % (i as u64 + 1)) as usize);
    }
    let x: Vec<f64> = (0..n).map(|i| (i as f64 * 0.001).sin()).collect();
    let mut y = vec![0.0; n];
    let mut per_order = Vec::new();
    for order in [&identity, &shuffled] {
        let k = csr(&mesh, order);
        let mut times = Vec::new();
        for _ in 0..if quick { 3 } else { 21 } {
            let t = Instant::now();
            matvec(&k, &x, &mut y);
            times.push(t.elapsed().as_secs_f64());
        }
        per_order.push(median(times));
    }
    println!(
        "mat-vec on {n} nodes: RCM order {:.2} ms, shuffled order {:.2} ms, shuffled/RCM = {:.2}",
        per_order[0] * 1e3,
        per_order[1] * 1e3,
        per_order[1] / per_order[0]
    );
}
