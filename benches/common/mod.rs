//! Helpers shared by the benchmarks that include this module (`mod common;`).

use std::sync::Arc;

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::mesh::{build_mesh, Mesh, MeshOptions};

/// Median of the samples (the upper one of an even count).
pub fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

/// A disk of `radius` meshed at edge length `h` (about 3.6 R²/h² nodes).
pub fn disk(radius: f64, h: f64) -> Arc<Mesh> {
    let plate = PlateSpec {
        outer: Shape::Circle {
            centre: [0.0, 0.0],
            radius,
        },
        holes: vec![],
        cuts: vec![],
    };
    let opts = MeshOptions {
        size: h,
        max_nodes: 3_000_000,
        ..Default::default()
    };
    Arc::new(build_mesh(&plate, &opts).expect("mesh").mesh)
}
