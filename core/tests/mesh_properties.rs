//! Property tests on random star-shaped plates with random holes.
//!
//! Invariants (common practice for P1 elements on Delaunay meshes): every edge weight
//! ½(cot α + cot β) ≥ 0, the angle bound holds away from sharp input corners, no triangle lies
//! in a hole or outside the plate, lumped masses are positive and sum to the area, the edge
//! weights equal the element-by-element assembled stiffness matrix (whose rows sum to zero).

use agarium_core::geometry::{point_in_ring, PlateSpec, Shape};
use agarium_core::mesh::{build_mesh, MeshOptions, Spot};
use proptest::prelude::*;
use std::collections::HashMap;
use std::f64::consts::PI;

/// A star-shaped polygon around the origin: `n` directions jittered from uniform, radii in
/// [0.75, 1] × 10.
fn star(n: usize, jitter: &[f64], radii: &[f64]) -> Vec<[f64; 2]> {
    (0..n)
        .map(|k| {
            let a = 2.0 * PI * (k as f64 + 0.4 * jitter[k]) / n as f64;
            let r = 10.0 * (0.75 + 0.25 * radii[k]);
            [r * a.cos(), r * a.sin()]
        })
        .collect()
}

/// Distance from `p` to the segment `ab`.
fn segment_distance(p: [f64; 2], a: [f64; 2], b: [f64; 2]) -> f64 {
    let (dx, dy) = (b[0] - a[0], b[1] - a[1]);
    let t = (((p[0] - a[0]) * dx + (p[1] - a[1]) * dy) / (dx * dx + dy * dy)).clamp(0.0, 1.0);
    (p[0] - a[0] - t * dx).hypot(p[1] - a[1] - t * dy)
}

#[derive(Debug, Clone)]
struct Case {
    outer: Vec<[f64; 2]>,
    holes: Vec<Shape>,
    size: f64,
    min_angle: f64,
    spot: Option<Spot>,
}

fn case() -> impl Strategy<Value = Case> {
    (5usize..16)
        .prop_flat_map(|n| {
            (
                Just(n),
                prop::collection::vec(-1.0f64..1.0, n),
                prop::collection::vec(0.0f64..1.0, n),
                prop::collection::vec(
                    (0.0f64..2.0 * PI, 0.0f64..4.5, 0.4f64..1.2, any::<bool>()),
                    0..4,
                ),
                0.4f64..1.2,
                20.0f64..30.0,
                prop::option::of((0.0f64..2.0 * PI, 0.0f64..5.0)),
            )
        })
        .prop_map(|(n, jitter, radii, holes, size, min_angle, spot)| {
            let outer = star(n, &jitter, &radii);
            // Holes must lie inside the polygon: keep them within the distance from the origin
            // to its nearest edge (a star's edges can pass much closer than its corners).
            let inner = (0..n)
                .map(|k| segment_distance([0.0, 0.0], outer[k], outer[(k + 1) % n]))
                .fold(f64::MAX, f64::min);
            let mut placed: Vec<([f64; 2], f64)> = Vec::new();
            let mut shapes = Vec::new();
            for (a, r, s, square) in holes {
                let c = [r * a.cos(), r * a.sin()];
                // Keep holes inside the plate and apart from each other (random overlap is
                // tested elsewhere); a square of side 1.4 s reaches 0.99 s from its centre.
                let reach = (c[0].hypot(c[1])) + s + 0.3;
                if reach < inner
                    && placed
                        .iter()
                        .all(|(d, t)| (c[0] - d[0]).hypot(c[1] - d[1]) > 1.5 * (s + t) + 0.5)
                {
                    placed.push((c, s));
                    shapes.push(if square {
                        Shape::Rectangle {
                            centre: c,
                            width: 1.4 * s,
                            height: 1.4 * s,
                        }
                    } else {
                        Shape::Circle {
                            centre: c,
                            radius: s,
                        }
                    });
                }
            }
            let spot = spot.map(|(a, r)| Spot {
                centre: [r * a.cos(), r * a.sin()],
                size: size / 6.0,
            });
            let spot = spot.filter(|s| {
                placed
                    .iter()
                    .all(|(c, t)| (s.centre[0] - c[0]).hypot(s.centre[1] - c[1]) > 1.5 * t)
            });
            let spot = spot.filter(|s| s.centre[0].hypot(s.centre[1]) + 0.3 < inner);
            Case {
                outer,
                holes: shapes,
                size,
                min_angle,
                spot,
            }
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, .. ProptestConfig::default() })]

    #[test]
    fn random_plates_give_valid_delaunay_meshes(c in case()) {
        let spec = PlateSpec { outer: Shape::Polygon { points: c.outer.clone() }, holes: c.holes.clone(), cuts: vec![] };
        let opts = MeshOptions {
            size: c.size,
            min_angle_deg: c.min_angle,
            spots: c.spot.into_iter().collect(),
            ..Default::default()
        };
        let built = build_mesh(&spec, &opts).expect("valid plate must mesh");
        let m = &built.mesh;
        let sharp = built.plate.smallest_corner_angle();
        prop_assume!(sharp >= 2.0 * c.min_angle);

        // Weights: non-negative everywhere (interior by the Delaunay property, boundary edges
        // because refinement leaves no encroached boundary segment).
        for (e, w) in m.edges.iter().zip(&m.edge_weights) {
            prop_assert!(*w >= 0.0, "edge {:?} has weight {}", e, w);
        }
        // Angle bound.
        for t in 0..m.triangles.len() {
            for a in m.triangle_angles(t) {
                prop_assert!(a >= c.min_angle - 1e-9, "triangle {} has angle {}", t, a);
            }
        }
        // No triangle outside the plate or inside a hole.
        let hole_rings = &built.plate.holes;
        for tri in &m.triangles {
            let p = [0, 1, 2].map(|k| m.node(tri[k]));
            let g = [(p[0][0] + p[1][0] + p[2][0]) / 3.0, (p[0][1] + p[1][1] + p[2][1]) / 3.0];
            prop_assert!(point_in_ring(g, &built.plate.outer));
            for h in hole_rings {
                prop_assert!(!point_in_ring(g, h), "triangle in a hole at {:?}", g);
            }
        }
        // Area: the mesh covers exactly the discretised plate.
        let area = m.area();
        prop_assert!((area - built.plate.polygon_area()).abs() < 1e-9 * area);
        prop_assert!(m.node_areas.iter().all(|a| *a > 0.0));
        prop_assert!((m.node_areas.iter().sum::<f64>() - area).abs() < 1e-9 * area);
        // Boundary loops: outer plus one per hole.
        let loops: std::collections::HashSet<usize> = m.boundary.iter().map(|b| b.loop_id).collect();
        prop_assert_eq!(loops.len(), 1 + c.holes.len());

        // Element-assembled stiffness from P1 gradients equals −w off the diagonal and has
        // zero row sums.
        let mut k: HashMap<(usize, usize), f64> = HashMap::new();
        for (t, tri) in m.triangles.iter().enumerate() {
            let a = m.triangle_areas[t];
            let p = [0, 1, 2].map(|i| m.node(tri[i]));
            let grad = |i: usize| {
                let (pj, pk) = (p[(i + 1) % 3], p[(i + 2) % 3]);
                [(pj[1] - pk[1]) / (2.0 * a), (pk[0] - pj[0]) / (2.0 * a)]
            };
            for i in 0..3 {
                for j in 0..3 {
                    let (gi, gj) = (grad(i), grad(j));
                    *k.entry((tri[i], tri[j])).or_insert(0.0) += (gi[0] * gj[0] + gi[1] * gj[1]) * a;
                }
            }
        }
        let mut row_sum = vec![0.0; m.num_nodes()];
        for (&(i, _), v) in &k {
            row_sum[i] += v;
        }
        for (i, s) in row_sum.iter().enumerate() {
            let diag = k[&(i, i)];
            prop_assert!(s.abs() < 1e-10 * diag, "row {} sums to {}", i, s);
        }
        for (e, w) in m.edges.iter().zip(&m.edge_weights) {
            let kij = k[&(e[0], e[1])];
            prop_assert!((kij + w).abs() < 1e-9 * (1.0 + w.abs()), "edge {:?}: K={} w={}", e, kij, w);
        }
    }
}

/// A plate the random search found: the refinement library left a 23° triangle against the
/// boundary; the mesher must finish it (and not by a node that encroaches on the boundary,
/// which would give an obtuse angle and a negative weight there).
#[test]
fn skinny_triangle_left_by_the_library_is_finished() {
    let outer = vec![
        [8.817455058466626, -3.0765708669524483],
        [1.959370837255401, 7.635688564730752],
        [-6.067627457812105, 4.408389392193549],
        [-6.067627457812106, -4.4083893921935475],
        [2.317627457812104, -7.132923872213652],
    ];
    let spec = PlateSpec {
        outer: Shape::Polygon { points: outer },
        holes: vec![],
        cuts: vec![],
    };
    let opts = MeshOptions {
        size: 0.9231084173871664,
        min_angle_deg: 28.730019510036772,
        spots: vec![Spot {
            centre: [4.148769504355661, 0.6375116801425191],
            size: 0.15385140289786106,
        }],
        ..Default::default()
    };
    let m = build_mesh(&spec, &opts).unwrap().mesh;
    for t in 0..m.triangles.len() {
        for a in m.triangle_angles(t) {
            assert!(a >= opts.min_angle_deg - 1e-9, "triangle {t}: angle {a}");
        }
    }
    assert!(m.edge_weights.iter().all(|w| *w >= 0.0));
}
