//! Area and boundary length of disk, ellipse and annulus meshes converge to the exact values.
//!
//! References: area πR², πab and π(R²−r²), perimeter 2πR (exact formulas); ellipse perimeter by
//! Ramanujan's second approximation (S. Ramanujan, "Modular equations and approximations to π",
//! Quart. J. Math. 45, 1914), itself checked against the arithmetic–geometric-mean formula in a
//! unit test. An inscribed polygon's error falls as h² (common practice), so halving the edge
//! length must divide the error by about four.

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::mesh::{build_mesh, MeshOptions, QualityReport};
use std::f64::consts::PI;

fn errors(spec: &PlateSpec, h: f64) -> (f64, f64, QualityReport) {
    let built = build_mesh(
        spec,
        &MeshOptions {
            size: h,
            ..Default::default()
        },
    )
    .expect("mesh");
    let r = QualityReport::of_built(&built);
    (
        r.area_relative_error.unwrap().abs(),
        r.boundary_length_relative_error.unwrap().abs(),
        r,
    )
}

fn check_convergence(
    spec: &PlateSpec,
    exact_area: f64,
    exact_perimeter: f64,
    h0: f64,
    area_rate: bool,
) {
    let mut prev: Option<(f64, f64)> = None;
    for k in 0..4 {
        let h = h0 / 2f64.powi(k);
        let (ea, ep, r) = errors(spec, h);
        assert!((r.exact_area.unwrap() - exact_area).abs() < 1e-12 * exact_area);
        assert!(
            (r.exact_boundary_length.unwrap() - exact_perimeter).abs() < 1e-12 * exact_perimeter
        );
        assert_eq!(r.negative_edge_weights, 0);
        assert!(
            r.min_angle_deg >= 30.0 - 1e-9,
            "min angle {}",
            r.min_angle_deg
        );
        if let Some((pa, pp)) = prev {
            let (ra, rp) = (pa / ea, pp / ep);
            if area_rate {
                assert!(
                    (3.0..5.5).contains(&ra),
                    "h={h}: area error ratio {ra} ({pa} -> {ea})"
                );
            } else {
                // On the annulus the leading h² area errors of the two circles cancel (an
                // inscribed n-gon of radius R with sides h misses about πh²/6 whatever R is),
                // so only a bound by the sum of the two circles' errors is meaningful.
                assert!(
                    ea * exact_area < 2.0 * PI * h * h / 6.0,
                    "h={h}: area error {ea}"
                );
            }
            assert!(
                (3.0..5.5).contains(&rp),
                "h={h}: perimeter error ratio {rp} ({pp} -> {ep})"
            );
        }
        prev = Some((ea, ep));
    }
    let (ea, ep) = prev.unwrap();
    assert!(ea < 1e-4 && ep < 1e-4, "finest errors {ea} {ep}");
}

#[test]
fn disk_converges() {
    let spec = PlateSpec {
        outer: Shape::Circle {
            centre: [1.0, -2.0],
            radius: 3.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    check_convergence(&spec, PI * 9.0, 6.0 * PI, 0.4, true);
}

#[test]
fn ellipse_converges() {
    let spec = PlateSpec {
        outer: Shape::Ellipse {
            centre: [0.0, 0.0],
            semi_x: 4.0,
            semi_y: 2.5,
        },
        holes: vec![],
        cuts: vec![],
    };
    let h = ((4.0f64 - 2.5) / (4.0 + 2.5)).powi(2);
    let ramanujan = PI * 6.5 * (1.0 + 3.0 * h / (10.0 + (4.0 - 3.0 * h).sqrt()));
    check_convergence(&spec, PI * 10.0, ramanujan, 0.4, true);
}

#[test]
fn annulus_converges() {
    let spec = PlateSpec {
        outer: Shape::Annulus {
            centre: [0.0, 0.0],
            outer: 3.0,
            inner: 1.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    check_convergence(&spec, PI * 8.0, 8.0 * PI, 0.3, false);
}

#[test]
fn boundary_nodes_lie_on_the_true_circle() {
    // Curved boundaries are sampled before meshing, so no refinement node sits on a chord.
    let spec = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 2.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    let built = build_mesh(
        &spec,
        &MeshOptions {
            size: 0.05,
            ..Default::default()
        },
    )
    .unwrap();
    let m = &built.mesh;
    for e in &m.boundary {
        let p = m.node(e.nodes[0]);
        assert!(
            (p[0].hypot(p[1]) - 2.0).abs() < 1e-12,
            "boundary node {p:?} off the circle"
        );
    }
}

#[test]
fn renumbering_keeps_neighbours_close() {
    // Reverse Cuthill–McKee bounds the bandwidth by about one "front" of nodes, O(√n).
    let spec = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 1.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    let built = build_mesh(
        &spec,
        &MeshOptions {
            size: 0.01,
            ..Default::default()
        },
    )
    .unwrap();
    let m = &built.mesh;
    let band = m.edges.iter().map(|e| e[1] - e[0]).max().unwrap();
    let n = m.num_nodes();
    assert!(n > 30_000);
    assert!(
        (band as f64) < 3.0 * (n as f64).sqrt(),
        "bandwidth {band} for {n} nodes"
    );
}

#[test]
fn spot_refinement_is_graded() {
    use agarium_core::mesh::Spot;
    let spec = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius: 10.0,
        },
        holes: vec![],
        cuts: vec![],
    };
    let spot = Spot {
        centre: [2.0, 1.0],
        size: 0.05,
    };
    let opts = MeshOptions {
        size: 1.0,
        spots: vec![spot],
        grading: 0.2,
        ..Default::default()
    };
    let built = build_mesh(&spec, &opts).unwrap();
    let m = &built.mesh;
    let r = QualityReport::of_built(&built);
    assert_eq!(r.negative_edge_weights, 0);
    assert!(r.min_angle_deg >= 30.0 - 1e-9);
    // Edges near the spot are close to its size, edges far away close to the far size.
    for (e, _) in m.edges.iter().zip(&m.edge_weights) {
        let (a, b) = (m.node(e[0]), m.node(e[1]));
        let len = (a[0] - b[0]).hypot(a[1] - b[1]);
        let mid = [(a[0] + b[0]) / 2.0, (a[1] + b[1]) / 2.0];
        let target = built.sizes.at(mid);
        assert!(
            len < 2.0 * target,
            "edge {len} at {mid:?} vs target {target}"
        );
    }
    let near = m
        .edges
        .iter()
        .filter(|e| {
            let a = m.node(e[0]);
            (a[0] - 2.0).hypot(a[1] - 1.0) < 0.1
        })
        .count();
    assert!(near >= 10, "only {near} edges near the spot");
}
