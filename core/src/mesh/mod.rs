//! Triangle meshes of plates: construction (constrained Delaunay with quality refinement),
//! the mesh type with the geometric quantities the finite elements need, and quality reports.

mod boundary_index;
mod build;
mod quality;
mod renumber;
mod sizing;

pub use boundary_index::BoundaryIndex;
pub use build::BuiltMesh;
pub use build::{build_mesh, MeshError, MeshOptions};
pub use quality::QualityReport;
pub use renumber::reverse_cuthill_mckee;
pub use sizing::{SizeField, Spot};

use ndarray::Array2;
use rayon::slice::ParallelSliceMut;

/// A boundary edge: its two nodes, ordered so the plate lies on the left, and its loop
/// (0 = outer outline, k = hole k).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct BoundaryEdge {
    /// Start and end node.
    pub nodes: [usize; 2],
    /// Which boundary loop the edge belongs to.
    pub loop_id: usize,
}

/// Edge weights in `(-ROUND_OFF_WEIGHT, 0)` are round-off of a zero weight.
const ROUND_OFF_WEIGHT: f64 = 1e-12;

/// A P1 triangle mesh with everything the edge-based schemes need.
#[derive(Clone, Debug)]
pub struct Mesh {
    /// Node coordinates, one row `(x, y)` per node.
    pub nodes: Array2<f64>,
    /// Triangles as node triples, counter-clockwise.
    pub triangles: Vec<[usize; 3]>,
    /// Area of each triangle.
    pub triangle_areas: Vec<f64>,
    /// Lumped (row-sum) mass: a third of the area of each triangle at each of its nodes.
    pub node_areas: Vec<f64>,
    /// Unique edges `[a, b]` with `a < b`.
    pub edges: Vec<[usize; 2]>,
    /// Cotangent weight of each edge, ½ Σ cot of the angles opposite it; the P1 stiffness
    /// matrix has `K_ab = −w` off the diagonal (common practice for P1 elements).
    pub edge_weights: Vec<f64>,
    /// Boundary edges tagged by loop.
    pub boundary: Vec<BoundaryEdge>,
}

/// Why a set of nodes and triangles is not a usable mesh.
#[derive(Debug, thiserror::Error, PartialEq)]
pub enum MeshDataError {
    /// A triangle refers to a node that does not exist.
    #[error("triangle {triangle} refers to node {node}, but there are only {nodes} nodes")]
    NodeOutOfRange {
        /// Triangle index.
        triangle: usize,
        /// The bad node index.
        node: usize,
        /// Node count.
        nodes: usize,
    },
    /// A triangle has zero area.
    #[error("triangle {triangle} is degenerate (zero area)")]
    Degenerate {
        /// Triangle index.
        triangle: usize,
    },
}

impl Mesh {
    /// Number of nodes.
    pub fn num_nodes(&self) -> usize {
        self.nodes.nrows()
    }

    /// Coordinates of node `i`.
    pub fn node(&self, i: usize) -> [f64; 2] {
        [self.nodes[[i, 0]], self.nodes[[i, 1]]]
    }

    /// Builds a mesh from nodes and triangles (any orientation) and a loop tag for each
    /// boundary edge, given as a function of the edge's midpoint.
    pub fn from_parts(
        nodes: Array2<f64>,
        mut triangles: Vec<[usize; 3]>,
        loop_of: &dyn Fn([f64; 2]) -> usize,
    ) -> Result<Mesh, MeshDataError> {
        let n = nodes.nrows();
        let pt = |i: usize| [nodes[[i, 0]], nodes[[i, 1]]];
        let mut triangle_areas = Vec::with_capacity(triangles.len());
        let mut node_areas = vec![0.0; n];
        // (low node, high node, opposite-angle cotangent / 2, third node) per triangle side.
        let mut sides: Vec<(usize, usize, f64, usize)> = Vec::with_capacity(3 * triangles.len());
        for (t, tri) in triangles.iter_mut().enumerate() {
            if let Some(&bad) = tri.iter().find(|&&v| v >= n) {
                return Err(MeshDataError::NodeOutOfRange {
                    triangle: t,
                    node: bad,
                    nodes: n,
                });
            }
            let (a, b, c) = (pt(tri[0]), pt(tri[1]), pt(tri[2]));
            let twice = (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0]);
            if twice == 0.0 {
                return Err(MeshDataError::Degenerate { triangle: t });
            }
            if twice < 0.0 {
                tri.swap(1, 2);
            }
            let area = 0.5 * twice.abs();
            triangle_areas.push(area);
            for k in 0..3 {
                node_areas[tri[k]] += area / 3.0;
                let (o, p, q) = (tri[k], tri[(k + 1) % 3], tri[(k + 2) % 3]);
                let (po, pp, pq) = (pt(o), pt(p), pt(q));
                let dot = (pp[0] - po[0]) * (pq[0] - po[0]) + (pp[1] - po[1]) * (pq[1] - po[1]);
                // cot of the angle at o = dot / |cross|, |cross| = 2·area.
                let half_cot = 0.5 * dot / (2.0 * area);
                sides.push((p.min(q), p.max(q), half_cot, o));
            }
        }
        sides.par_sort_unstable_by_key(|s| (s.0, s.1));
        let mut edges = Vec::with_capacity(sides.len() / 2 + n);
        let mut edge_weights = Vec::with_capacity(sides.len() / 2 + n);
        let mut boundary = Vec::new();
        let mut i = 0;
        while i < sides.len() {
            let (a, b, w, o) = sides[i];
            let mut weight = w;
            let mut count = 1;
            while i + count < sides.len() && sides[i + count].0 == a && sides[i + count].1 == b {
                weight += sides[i + count].2;
                count += 1;
            }
            edges.push([a, b]);
            // Cocircular nodes (Delaunay ties) give a weight of exactly zero in exact
            // arithmetic; round-off can leave -1e-17 there, which would spoil the sign pattern
            // the positivity-preserving schemes rely on. Weights are dimensionless cotangent
            // sums of order one, so an absolute tolerance is meaningful.
            if weight < 0.0 && weight > -ROUND_OFF_WEIGHT {
                weight = 0.0;
            }
            edge_weights.push(weight);
            if count == 1 {
                // Orient so the third node (inside the plate) is on the left.
                let (pa, pb, po) = (pt(a), pt(b), pt(o));
                let left =
                    (pb[0] - pa[0]) * (po[1] - pa[1]) - (pb[1] - pa[1]) * (po[0] - pa[0]) > 0.0;
                let nodes = if left { [a, b] } else { [b, a] };
                let mid = [(pa[0] + pb[0]) * 0.5, (pa[1] + pb[1]) * 0.5];
                boundary.push(BoundaryEdge {
                    nodes,
                    loop_id: loop_of(mid),
                });
            }
            i += count;
        }
        Ok(Mesh {
            nodes,
            triangles,
            triangle_areas,
            node_areas,
            edges,
            edge_weights,
            boundary,
        })
    }

    /// Total area.
    pub fn area(&self) -> f64 {
        self.triangle_areas.iter().sum()
    }

    /// Total boundary length.
    pub fn boundary_length(&self) -> f64 {
        self.boundary
            .iter()
            .map(|e| {
                let (a, b) = (self.node(e.nodes[0]), self.node(e.nodes[1]));
                (a[0] - b[0]).hypot(a[1] - b[1])
            })
            .sum()
    }

    /// Boundary loop of each node (`None` for interior nodes).
    pub fn node_loops(&self) -> Vec<Option<usize>> {
        let mut tags = vec![None; self.num_nodes()];
        for e in &self.boundary {
            for &v in &e.nodes {
                tags[v] = Some(e.loop_id);
            }
        }
        tags
    }

    /// The three interior angles of triangle `t`, in degrees.
    pub fn triangle_angles(&self, t: usize) -> [f64; 3] {
        let tri = self.triangles[t];
        let mut out = [0.0; 3];
        for (k, slot) in out.iter_mut().enumerate() {
            let (o, p, q) = (
                self.node(tri[k]),
                self.node(tri[(k + 1) % 3]),
                self.node(tri[(k + 2) % 3]),
            );
            let u = [p[0] - o[0], p[1] - o[1]];
            let v = [q[0] - o[0], q[1] - o[1]];
            *slot = (u[0] * v[1] - u[1] * v[0])
                .atan2(u[0] * v[0] + u[1] * v[1])
                .to_degrees();
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    /// Two right triangles forming the unit square.
    fn square() -> Mesh {
        let nodes = array![[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        Mesh::from_parts(nodes, vec![[0, 1, 2], [0, 3, 2]], &|_| 0).unwrap()
    }

    #[test]
    fn square_quantities() {
        let m = square();
        assert_eq!(m.triangles[1], [0, 2, 3]);
        assert_eq!(m.area(), 1.0);
        assert!((m.node_areas.iter().sum::<f64>() - 1.0).abs() < 1e-15);
        assert_eq!(m.edges.len(), 5);
        assert_eq!(m.boundary.len(), 4);
        assert_eq!(m.boundary_length(), 4.0);
        // The diagonal is opposite two right angles: weight 0. Sides: ½ cot 45° = ½.
        let diag = m.edges.iter().position(|e| *e == [0, 2]).unwrap();
        assert!(m.edge_weights[diag].abs() < 1e-15);
        for (e, w) in m.edges.iter().zip(&m.edge_weights) {
            if *e != [0, 2] {
                assert!((w - 0.5).abs() < 1e-15);
            }
        }
    }

    #[test]
    fn edge_weights_equal_element_stiffness() {
        // The P1 element stiffness K_ij = ∇φ_i·∇φ_j |T| equals −½ cot of the opposite angle
        // (common practice); compare on a scalene triangle computed from gradients directly.
        let nodes = array![[0.1, 0.0], [1.3, 0.2], [0.4, 0.9]];
        let m = Mesh::from_parts(nodes.clone(), vec![[0, 1, 2]], &|_| 0).unwrap();
        let p = |i: usize| [nodes[[i, 0]], nodes[[i, 1]]];
        let area = m.triangle_areas[0];
        let grad = |i: usize| {
            let (j, k) = ((i + 1) % 3, (i + 2) % 3);
            let (pj, pk) = (p(j), p(k));
            [
                (pj[1] - pk[1]) / (2.0 * area),
                (pk[0] - pj[0]) / (2.0 * area),
            ]
        };
        for (e, w) in m.edges.iter().zip(&m.edge_weights) {
            let (gi, gj) = (grad(e[0]), grad(e[1]));
            let k_ij = (gi[0] * gj[0] + gi[1] * gj[1]) * area;
            assert!((k_ij + w).abs() < 1e-14, "{e:?}: K={k_ij}, w={w}");
        }
    }

    #[test]
    fn bad_parts_are_errors() {
        let nodes = array![[0.0, 0.0], [1.0, 0.0], [2.0, 0.0]];
        assert_eq!(
            Mesh::from_parts(nodes.clone(), vec![[0, 1, 2]], &|_| 0).unwrap_err(),
            MeshDataError::Degenerate { triangle: 0 }
        );
        assert!(matches!(
            Mesh::from_parts(nodes, vec![[0, 1, 5]], &|_| 0),
            Err(MeshDataError::NodeOutOfRange { node: 5, .. })
        ));
    }
}
