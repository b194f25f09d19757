//! Node renumbering for locality: reverse Cuthill–McKee from `sprs` on the node adjacency
//! graph (neighbours get nearby numbers, so sparse mat-vecs and factorizations touch less memory).

use sprs::{CsMat, TriMat};

/// Returns `order` with `order[new] = old`, computed from the undirected `edges` of a graph on
/// `n` nodes.
pub fn reverse_cuthill_mckee(n: usize, edges: &[[usize; 2]]) -> Vec<usize> {
    let mut tri = TriMat::with_capacity((n, n), 2 * edges.len() + n);
    for i in 0..n {
        tri.add_triplet(i, i, 1u8);
    }
    for &[a, b] in edges {
        tri.add_triplet(a, b, 1u8);
        tri.add_triplet(b, a, 1u8);
    }
    let adjacency: CsMat<u8> = tri.to_csr();
    let ordering = sprs::linalg::reverse_cuthill_mckee(adjacency.view());
    ordering.perm.vec()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn path_graph_gets_a_band_of_width_one() {
        // A path 0-5-2-4-1-3 scrambled; after RCM neighbours differ by exactly one.
        let edges = [[0, 5], [5, 2], [2, 4], [4, 1], [1, 3]];
        let order = reverse_cuthill_mckee(6, &edges);
        let mut new_of = [0; 6];
        for (new, &old) in order.iter().enumerate() {
            new_of[old] = new;
        }
        let mut sorted = order.clone();
        sorted.sort();
        assert_eq!(sorted, vec![0, 1, 2, 3, 4, 5]);
        for [a, b] in edges {
            assert_eq!((new_of[a] as i64 - new_of[b] as i64).abs(), 1);
        }
    }
}
