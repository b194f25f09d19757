//! Mesh quality report: what a modeller checks before trusting a mesh.

use super::{BuiltMesh, Mesh};
use serde::Serialize;

/// Numbers describing a mesh and how well it represents its plate.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct QualityReport {
    /// Node count.
    pub nodes: usize,
    /// Triangle count.
    pub triangles: usize,
    /// Edge count.
    pub edges: usize,
    /// Boundary edge count.
    pub boundary_edges: usize,
    /// Number of boundary loops (outer outline plus holes).
    pub boundary_loops: usize,
    /// Mesh area.
    pub area: f64,
    /// Exact plate area when known in closed form.
    pub exact_area: Option<f64>,
    /// (mesh − exact)/exact area, when the exact area is known.
    pub area_relative_error: Option<f64>,
    /// Total boundary length of the mesh.
    pub boundary_length: f64,
    /// Exact boundary length when known.
    pub exact_boundary_length: Option<f64>,
    /// (mesh − exact)/exact boundary length, when known.
    pub boundary_length_relative_error: Option<f64>,
    /// Smallest triangle angle, degrees.
    pub min_angle_deg: f64,
    /// Largest triangle angle, degrees.
    pub max_angle_deg: f64,
    /// Smallest corner angle of the plate's own outline, degrees (a bound no mesh can beat).
    pub min_corner_angle_deg: Option<f64>,
    /// Shortest edge.
    pub min_edge_length: f64,
    /// Mean edge length.
    pub mean_edge_length: f64,
    /// Longest edge.
    pub max_edge_length: f64,
    /// Edges with a negative cotangent weight (must be 0 for the positivity of the solver).
    pub negative_edge_weights: usize,
    /// Boundary edges whose opposite angle is obtuse (these are the ones with negative weight).
    pub obtuse_boundary_angles: usize,
}

impl QualityReport {
    /// Report on a mesh alone (no plate reference values).
    pub fn of_mesh(mesh: &Mesh) -> QualityReport {
        let (mut min_a, mut max_a) = (180.0_f64, 0.0_f64);
        for t in 0..mesh.triangles.len() {
            for a in mesh.triangle_angles(t) {
                min_a = min_a.min(a);
                max_a = max_a.max(a);
            }
        }
        let lengths: Vec<f64> = mesh
            .edges
            .iter()
            .map(|e| {
                let (a, b) = (mesh.node(e[0]), mesh.node(e[1]));
                (a[0] - b[0]).hypot(a[1] - b[1])
            })
            .collect();
        let mut boundary_set = std::collections::HashSet::new();
        for b in &mesh.boundary {
            boundary_set.insert([b.nodes[0].min(b.nodes[1]), b.nodes[0].max(b.nodes[1])]);
        }
        let obtuse_boundary = mesh
            .edges
            .iter()
            .zip(&mesh.edge_weights)
            .filter(|(e, w)| boundary_set.contains(*e) && **w < 0.0)
            .count();
        let loops: std::collections::HashSet<usize> =
            mesh.boundary.iter().map(|b| b.loop_id).collect();
        QualityReport {
            nodes: mesh.num_nodes(),
            triangles: mesh.triangles.len(),
            edges: mesh.edges.len(),
            boundary_edges: mesh.boundary.len(),
            boundary_loops: loops.len(),
            area: mesh.area(),
            exact_area: None,
            area_relative_error: None,
            boundary_length: mesh.boundary_length(),
            exact_boundary_length: None,
            boundary_length_relative_error: None,
            min_angle_deg: min_a,
            max_angle_deg: max_a,
            min_corner_angle_deg: None,
            min_edge_length: lengths.iter().copied().fold(f64::MAX, f64::min),
            mean_edge_length: lengths.iter().sum::<f64>() / lengths.len().max(1) as f64,
            max_edge_length: lengths.iter().copied().fold(0.0, f64::max),
            negative_edge_weights: mesh.edge_weights.iter().filter(|w| **w < 0.0).count(),
            obtuse_boundary_angles: obtuse_boundary,
        }
    }

    /// Report on a built mesh, compared with its plate's exact area and boundary length.
    pub fn of_built(built: &BuiltMesh) -> QualityReport {
        let mut r = QualityReport::of_mesh(&built.mesh);
        r.exact_area = built.plate.exact_area;
        r.area_relative_error = r.exact_area.map(|a| (r.area - a) / a);
        r.exact_boundary_length = built.plate.exact_perimeter;
        r.boundary_length_relative_error =
            r.exact_boundary_length.map(|l| (r.boundary_length - l) / l);
        r.min_corner_angle_deg = Some(built.plate.smallest_corner_angle());
        r
    }

    /// A human-readable table, one quantity per line.
    pub fn table(&self, unit: &str) -> String {
        let opt = |v: Option<f64>| v.map_or("n/a".to_string(), |x| format!("{x:.6}"));
        let rel = |v: Option<f64>| v.map_or("n/a".to_string(), |x| format!("{x:+.3e}"));
        let mut s = String::new();
        let mut row = |k: &str, v: String| s.push_str(&format!("{k:<28} {v}\n"));
        row("nodes", self.nodes.to_string());
        row("triangles", self.triangles.to_string());
        row("edges", self.edges.to_string());
        row(
            "boundary edges",
            format!("{} in {} loop(s)", self.boundary_edges, self.boundary_loops),
        );
        row(&format!("area [{unit}²]"), format!("{:.6}", self.area));
        row("  exact", opt(self.exact_area));
        row("  relative error", rel(self.area_relative_error));
        row(
            &format!("boundary length [{unit}]"),
            format!("{:.6}", self.boundary_length),
        );
        row("  exact", opt(self.exact_boundary_length));
        row("  relative error", rel(self.boundary_length_relative_error));
        row(
            "min / max angle [deg]",
            format!("{:.2} / {:.2}", self.min_angle_deg, self.max_angle_deg),
        );
        row(
            "sharpest plate corner [deg]",
            opt(self.min_corner_angle_deg).replace(".000000", ""),
        );
        row(
            &format!("edge length [{unit}]"),
            format!(
                "min {:.4e}  mean {:.4e}  max {:.4e}",
                self.min_edge_length, self.mean_edge_length, self.max_edge_length
            ),
        );
        row(
            "negative edge weights",
            self.negative_edge_weights.to_string(),
        );
        row(
            "obtuse boundary angles",
            self.obtuse_boundary_angles.to_string(),
        );
        s
    }
}
