//! Sparsity patterns, built once per mesh and model: the scalar node graph of the mesh, and
//! block layouts of the coupled systems over it. Matrix values are refilled in place every
//! step through the positions computed here; nothing is re-assembled from triplets.

use sprs::CsMat;

use crate::mesh::Mesh;

/// The mesh's node graph as a CSR pattern with a diagonal entry in every row, plus where each
/// edge's two off-diagonal entries sit in their rows.
#[derive(Clone, Debug)]
pub struct NodeGraph {
    /// Row starts (length nodes + 1).
    pub indptr: Vec<usize>,
    /// Column indices, sorted within each row.
    pub indices: Vec<usize>,
    /// Offset of the diagonal within row i.
    pub diag: Vec<usize>,
    /// For edge e = (a, b): offset of column b within row a, and of column a within row b.
    pub edge_slots: Vec<[usize; 2]>,
}

impl NodeGraph {
    /// The graph of `mesh`.
    pub fn new(mesh: &Mesh) -> Self {
        let n = mesh.num_nodes();
        let mut degree = vec![1usize; n];
        for &[a, b] in &mesh.edges {
            degree[a] += 1;
            degree[b] += 1;
        }
        let mut indptr = Vec::with_capacity(n + 1);
        indptr.push(0);
        for d in &degree {
            indptr.push(indptr.last().copied().unwrap_or(0) + d);
        }
        let mut indices = vec![0usize; indptr[n]];
        let mut fill = indptr[..n].to_vec();
        for (i, f) in fill.iter_mut().enumerate() {
            indices[*f] = i;
            *f += 1;
        }
        for &[a, b] in &mesh.edges {
            indices[fill[a]] = b;
            fill[a] += 1;
            indices[fill[b]] = a;
            fill[b] += 1;
        }
        for i in 0..n {
            indices[indptr[i]..indptr[i + 1]].sort_unstable();
        }
        let offset = |row: usize, col: usize| {
            let r = &indices[indptr[row]..indptr[row + 1]];
            r.binary_search(&col).unwrap_or(0)
        };
        let diag = (0..n).map(|i| offset(i, i)).collect();
        let edge_slots = mesh
            .edges
            .iter()
            .map(|&[a, b]| [offset(a, b), offset(b, a)])
            .collect();
        Self {
            indptr,
            indices,
            diag,
            edge_slots,
        }
    }

    /// Number of nodes.
    pub fn nodes(&self) -> usize {
        self.diag.len()
    }

    /// Entries in row i (degree + 1).
    pub fn row_len(&self, i: usize) -> usize {
        self.indptr[i + 1] - self.indptr[i]
    }
}

/// How one species' equation couples to one species' unknowns.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BlockKind {
    /// No coupling.
    None,
    /// Node-local coupling only (reactions, time derivative).
    Diagonal,
    /// Coupling along mesh edges as well (diffusion, transport).
    Graph,
}

/// A coupled system over a subset of the species ("slots"), species-major: unknown
/// `slot · nodes + i`. The coupled Newton system uses every species; a segregated solve uses
/// a single one.
#[derive(Clone, Debug)]
pub struct BlockLayout {
    nodes: usize,
    /// Slot of each species, `None` when it is not an unknown of this system.
    slot: Vec<Option<usize>>,
    /// `kinds[r][s]`: block kind between species r's equation and species s (species indices).
    kinds: Vec<Vec<BlockKind>>,
    /// Number of graph / diagonal blocks before column species s in row species r.
    graph_before: Vec<Vec<usize>>,
    diag_before: Vec<Vec<usize>>,
    /// Start of each global row.
    row_start: Vec<usize>,
    /// `graph_base[r][s][i]`: position of the (r, s) graph block's first entry in row i
    /// (empty for other block kinds), so the assembler finds an edge's entries with one add.
    graph_base: Vec<Vec<Vec<usize>>>,
}

impl BlockLayout {
    /// A layout over `species` (ascending species indices) with the block kinds given by
    /// `kind(r, s)`; the diagonal block of every included species is at least diagonal.
    pub fn new(
        graph: &NodeGraph,
        n_species: usize,
        species: &[usize],
        kind: impl Fn(usize, usize) -> BlockKind,
    ) -> Self {
        let nodes = graph.nodes();
        let mut slot = vec![None; n_species];
        for (k, &s) in species.iter().enumerate() {
            slot[s] = Some(k);
        }
        let mut kinds = vec![vec![BlockKind::None; n_species]; n_species];
        for &r in species {
            for &s in species {
                let mut k = kind(r, s);
                if r == s && k == BlockKind::None {
                    k = BlockKind::Diagonal;
                }
                kinds[r][s] = k;
            }
        }
        let mut graph_before = vec![vec![0; n_species]; n_species];
        let mut diag_before = vec![vec![0; n_species]; n_species];
        for &r in species {
            let (mut g, mut d) = (0, 0);
            for &s in species {
                graph_before[r][s] = g;
                diag_before[r][s] = d;
                match kinds[r][s] {
                    BlockKind::Graph => g += 1,
                    BlockKind::Diagonal => d += 1,
                    BlockKind::None => {}
                }
            }
        }
        let mut row_start = Vec::with_capacity(species.len() * nodes + 1);
        row_start.push(0);
        for &r in species {
            let g = kinds[r].iter().filter(|k| **k == BlockKind::Graph).count();
            let d = kinds[r]
                .iter()
                .filter(|k| **k == BlockKind::Diagonal)
                .count();
            for i in 0..nodes {
                let last = row_start.last().copied().unwrap_or(0);
                row_start.push(last + g * graph.row_len(i) + d);
            }
        }
        let mut graph_base = vec![vec![Vec::new(); n_species]; n_species];
        for &r in species {
            for &s in species {
                if kinds[r][s] != BlockKind::Graph {
                    continue;
                }
                let k = slot[r].unwrap_or(0);
                graph_base[r][s] = (0..nodes)
                    .map(|i| {
                        row_start[k * nodes + i]
                            + diag_before[r][s]
                            + graph_before[r][s] * graph.row_len(i)
                    })
                    .collect();
            }
        }
        Self {
            nodes,
            slot,
            kinds,
            graph_before,
            diag_before,
            row_start,
            graph_base,
        }
    }

    /// For a graph block (r, s) of this system, the position of its first entry in each
    /// row: entry (i, offset k in the node graph's row i) is at `base[i] + k`.
    pub fn graph_base(&self, r: usize, s: usize) -> Option<&[usize]> {
        let b = &self.graph_base[r][s];
        (!b.is_empty()).then_some(b.as_slice())
    }

    /// Unknowns.
    pub fn dim(&self) -> usize {
        self.row_start.len() - 1
    }

    /// Number of species in the system.
    pub fn blocks(&self) -> usize {
        self.slot.iter().flatten().count()
    }

    /// Slot of species `s`, if it is an unknown.
    pub fn slot(&self, s: usize) -> Option<usize> {
        self.slot[s]
    }

    /// Block kind between species r's equation and species s.
    pub fn kind(&self, r: usize, s: usize) -> BlockKind {
        self.kinds[r][s]
    }

    /// Position in the value array of the entry (equation r at node i, unknown s at the node
    /// whose offset in the node graph's row i is `k`; `k` is ignored for diagonal blocks).
    /// `None` when that block is not in the system.
    #[inline]
    pub fn pos(&self, graph: &NodeGraph, r: usize, s: usize, i: usize, k: usize) -> Option<usize> {
        let row = self.slot[r]? * self.nodes + i;
        let base = self.row_start[row] + self.diag_before[r][s];
        match self.kinds[r][s] {
            BlockKind::None => None,
            BlockKind::Diagonal => Some(base + self.graph_before[r][s] * graph.row_len(i)),
            BlockKind::Graph => Some(base + self.graph_before[r][s] * graph.row_len(i) + k),
        }
    }

    /// The CSR matrix of this layout with all values zero.
    pub fn matrix(&self, graph: &NodeGraph) -> CsMat<f64> {
        let n = self.nodes;
        let nnz = *self.row_start.last().unwrap_or(&0);
        let mut indices = Vec::with_capacity(nnz);
        let species: Vec<usize> = (0..self.slot.len())
            .filter(|&s| self.slot[s].is_some())
            .collect();
        for &r in &species {
            for i in 0..n {
                for &s in &species {
                    let Some(cs) = self.slot[s] else { continue };
                    match self.kinds[r][s] {
                        BlockKind::None => {}
                        BlockKind::Diagonal => indices.push(cs * n + i),
                        BlockKind::Graph => indices.extend(
                            graph.indices[graph.indptr[i]..graph.indptr[i + 1]]
                                .iter()
                                .map(|&j| cs * n + j),
                        ),
                    }
                }
            }
        }
        let dim = self.dim();
        CsMat::new((dim, dim), self.row_start.clone(), indices, vec![0.0; nnz])
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::{PlateSpec, Shape};
    use crate::mesh::{build_mesh, MeshOptions};

    fn small_mesh() -> Mesh {
        let plate = PlateSpec {
            outer: Shape::Circle {
                centre: [0.0, 0.0],
                radius: 1.0,
            },
            holes: vec![],
            cuts: vec![],
        };
        let opts = MeshOptions {
            size: 0.4,
            ..MeshOptions::default()
        };
        build_mesh(&plate, &opts).unwrap().mesh
    }

    #[test]
    fn node_graph_slots_point_at_the_right_columns() {
        let mesh = small_mesh();
        let g = NodeGraph::new(&mesh);
        for (e, &[a, b]) in mesh.edges.iter().enumerate() {
            let [ka, kb] = g.edge_slots[e];
            assert_eq!(g.indices[g.indptr[a] + ka], b);
            assert_eq!(g.indices[g.indptr[b] + kb], a);
        }
        for i in 0..g.nodes() {
            assert_eq!(g.indices[g.indptr[i] + g.diag[i]], i);
        }
    }

    #[test]
    fn block_positions_match_the_matrix_columns() {
        let mesh = small_mesh();
        let g = NodeGraph::new(&mesh);
        let n = g.nodes();
        // Three species: 0 and 1 diffuse, 0 is transported by 1, 2 is immobile and reacts with 0.
        let kind = |r: usize, s: usize| match (r, s) {
            (0, 0) | (1, 1) | (0, 1) => BlockKind::Graph,
            (2, 0) | (1, 0) => BlockKind::Diagonal,
            _ => BlockKind::None,
        };
        let layout = BlockLayout::new(&g, 3, &[0, 1, 2], kind);
        let m = layout.matrix(&g);
        assert!(m.is_csr());
        for r in 0..3 {
            for s in 0..3 {
                for i in 0..n {
                    let row_cols = |p: usize| m.indices()[p];
                    match layout.kind(r, s) {
                        BlockKind::None => {
                            assert_eq!(layout.pos(&g, r, s, i, 0), None)
                        }
                        BlockKind::Diagonal => {
                            let p = layout.pos(&g, r, s, i, 0).unwrap();
                            assert_eq!(row_cols(p), s * n + i);
                        }
                        BlockKind::Graph => {
                            for k in 0..g.row_len(i) {
                                let p = layout.pos(&g, r, s, i, k).unwrap();
                                assert_eq!(row_cols(p), s * n + g.indices[g.indptr[i] + k]);
                                assert!(p >= m.indptr().raw_storage()[r * n + i]);
                                assert!(p < m.indptr().raw_storage()[r * n + i + 1]);
                            }
                        }
                    }
                }
            }
        }
        for r in 0..3 {
            for s in 0..3 {
                if let Some(base) = layout.graph_base(r, s) {
                    for (i, b) in base.iter().enumerate() {
                        for k in 0..g.row_len(i) {
                            assert_eq!(Some(b + k), layout.pos(&g, r, s, i, k));
                        }
                    }
                } else {
                    assert_ne!(layout.kind(r, s), BlockKind::Graph);
                }
            }
        }
        // A segregated layout over species 1 alone.
        let single = BlockLayout::new(&g, 3, &[1], kind);
        assert_eq!(single.dim(), n);
        let m1 = single.matrix(&g);
        assert_eq!(m1.nnz(), g.indices.len());
        assert_eq!(single.pos(&g, 0, 0, 0, 0), None);
    }
}
