//! Preconditioners: Jacobi, ILU(0) on the matrix's own pattern, algebraic multigrid
//! ([`super::amg`]), and block preconditioners over the species blocks of a coupled system.
//!
//! Hand-written: no maintained Rust crate offers ILU(0) or block preconditioners on CSR
//! matrices that fit the `sprs` storage used here.

use super::amg::Amg;
use super::ops::{index, Csr};
use super::LinalgError;
use serde::{Deserialize, Serialize};

/// Which preconditioner the Krylov iteration uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Preconditioner {
    /// Per scalar system or species block: ILU(0) when the diagonal dominates (dt·D/h² below
    /// about 12.5, the measured crossover), algebraic multigrid otherwise.
    #[default]
    Auto,
    /// None (identity).
    None,
    /// Inverse diagonal.
    Jacobi,
    /// Incomplete LU without fill.
    Ilu0,
    /// Smoothed-aggregation algebraic multigrid V-cycle.
    Amg,
}

/// How species blocks are combined when the system has several.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum BlockScheme {
    /// Forward block Gauss–Seidel: blocks are swept in the order that keeps the strongest
    /// couplings (chosen at every prepare from the blocks' norms, see `sweep_order`); the
    /// coupling to blocks already swept is applied, the rest dropped.
    #[default]
    GaussSeidel,
    /// Block diagonal (symmetric when the blocks are, so CG may use it).
    Diagonal,
}

/// A preconditioner ready to apply: z ≈ A⁻¹ r.
pub(crate) trait Apply {
    /// z ← P⁻¹ r for the matrix `a` the preconditioner was built for.
    fn apply(&mut self, a: &Csr, r: &[f64], z: &mut [f64]);
}

/// Identity.
pub(crate) struct Identity;

impl Apply for Identity {
    fn apply(&mut self, _: &Csr, r: &[f64], z: &mut [f64]) {
        z.copy_from_slice(r);
    }
}

/// Inverse diagonal.
pub(crate) struct Jacobi {
    inv_diag: Vec<f64>,
}

impl Jacobi {
    pub(crate) fn new(a: &Csr) -> Result<Self, LinalgError> {
        let mut j = Self {
            inv_diag: vec![0.0; a.n],
        };
        j.refresh(a)?;
        Ok(j)
    }

    /// New values, into the existing storage.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        self.inv_diag.resize(a.n, 0.0);
        for (i, di) in self.inv_diag.iter_mut().enumerate() {
            let (c, v) = a.row(i);
            let d = c.binary_search(&index(i)).map(|k| v[k]).unwrap_or(0.0);
            if d == 0.0 {
                return Err(LinalgError::Singular { index: i });
            }
            *di = 1.0 / d;
        }
        Ok(())
    }
}

impl Apply for Jacobi {
    fn apply(&mut self, _: &Csr, r: &[f64], z: &mut [f64]) {
        for ((zi, ri), di) in z.iter_mut().zip(r).zip(&self.inv_diag) {
            *zi = ri * di;
        }
    }
}

/// ILU(0): L (unit lower) and U share the pattern of A.
pub(crate) struct Ilu0 {
    lu: Csr,
    /// Position of the diagonal entry in each row.
    diag: Vec<usize>,
    /// Column → slot of the row being eliminated (`usize::MAX` elsewhere), kept for refresh.
    pos: Vec<usize>,
}

impl Ilu0 {
    pub(crate) fn new(a: &Csr) -> Result<Self, LinalgError> {
        let lu = a.clone();
        let n = a.n;
        let mut diag = vec![0; n];
        for (i, d) in diag.iter_mut().enumerate() {
            let (c, _) = lu.row(i);
            *d = lu.ptr[i]
                + c.binary_search(&index(i))
                    .map_err(|_| LinalgError::Singular { index: i })?;
        }
        let mut f = Self {
            lu,
            diag,
            pos: vec![usize::MAX; n],
        };
        f.factor()?;
        Ok(f)
    }

    /// New values on the same pattern, factored in the existing storage.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        if a.ptr != self.lu.ptr || a.col != self.lu.col {
            *self = Self::new(a)?;
            return Ok(());
        }
        self.lu.val.copy_from_slice(&a.val);
        self.factor()
    }

    fn factor(&mut self) -> Result<(), LinalgError> {
        let n = self.lu.n;
        let (lu, diag, pos) = (&mut self.lu, &self.diag, &mut self.pos);
        // Row-by-row (IKJ) elimination restricted to the pattern; `pos[j]` maps a column of
        // the current row to its slot.
        for i in 0..n {
            let (lo, hi) = (lu.ptr[i], lu.ptr[i + 1]);
            for k in lo..hi {
                pos[lu.col[k] as usize] = k;
            }
            for kk in lo..diag[i] {
                let k = lu.col[kk] as usize;
                let pivot = lu.val[diag[k]];
                let lik = lu.val[kk] / pivot;
                lu.val[kk] = lik;
                for kj in diag[k] + 1..lu.ptr[k + 1] {
                    let p = pos[lu.col[kj] as usize];
                    if p != usize::MAX {
                        lu.val[p] -= lik * lu.val[kj];
                    }
                }
            }
            for k in lo..hi {
                pos[lu.col[k] as usize] = usize::MAX;
            }
            let piv = lu.val[diag[i]];
            if piv == 0.0 || !piv.is_finite() {
                return Err(LinalgError::Singular { index: i });
            }
        }
        Ok(())
    }
}

impl Apply for Ilu0 {
    fn apply(&mut self, _: &Csr, r: &[f64], z: &mut [f64]) {
        let lu = &self.lu;
        for i in 0..lu.n {
            let mut s = r[i];
            for k in lu.ptr[i]..self.diag[i] {
                s -= lu.val[k] * z[lu.col[k] as usize];
            }
            z[i] = s;
        }
        for i in (0..lu.n).rev() {
            let mut s = z[i];
            for k in self.diag[i] + 1..lu.ptr[i + 1] {
                s -= lu.val[k] * z[lu.col[k] as usize];
            }
            z[i] = s / lu.val[self.diag[i]];
        }
    }
}

/// A scalar preconditioner of one kind.
pub(crate) enum Scalar {
    Identity(Identity),
    Jacobi(Jacobi),
    Ilu0(Ilu0),
    Amg(Box<Amg>),
}

/// Diagonal dominance (median over sampled rows of |a_ii|/Σ_j≠i |a_ij|) from which
/// [`Preconditioner::Auto`] takes ILU(0) instead of multigrid: 1 + 0.25/12.5, i.e.
/// dt·D/h² ≈ 12.5 (see [`resolve`]).
pub(crate) const ILU_DOMINANCE: f64 = 1.02;

/// Resolves [`Preconditioner::Auto`] for `a` from how strongly its diagonal dominates, a
/// proxy for dt·D/h² that needs no knowledge of where the matrix came from: for M/dt + D·K on
/// a quality mesh, diagonal/Σ|off-diagonal| ≈ 1 + 0.25·h²/(dt·D) (h the mean edge). Above
/// [`ILU_DOMINANCE`] (dt·D/h² ≲ 12.5) ILU(0), else multigrid.
///
/// Measured (`cargo bench --bench linalg -- precond`, unit disk, medians, same run): ILU(0)
/// iterations grow with dt·D/h² (CG to 1e-8: 6, 14, 39, 113 at 0.3, 3, 30, 300) while
/// multigrid's stay flat (6, 9, 11, 12), and a multigrid iteration costs about 3 ILU(0)
/// iterations (1e5 nodes: 20–25 ms against 8.6 ms). Solve alone (the hierarchy kept through
/// [`super::LinearSolver::update`]) the crossover is at dt·D/h² ≈ 10–17 at 1e5 nodes and
/// ≈ 25 at 1e4, for the symmetric and the exponentially fitted block alike (1e5, dt·D/h² = 30:
/// ILU(0) 250–340 ms, multigrid 180–250 ms; at 3: 93–128 ms against 200–250 ms). With a fresh
/// multigrid set-up per solve (230–340 ms at 1e5) it moves to ≈ 100. The stepper keeps
/// hierarchies across Newton iterations and steps, so the solve-alone crossover is used.
/// Jacobi only ties ILU(0) at dt·D/h² = 0.3 and loses above, so Auto never picks it.
pub(crate) fn resolve(kind: Preconditioner, a: &Csr) -> Preconditioner {
    if kind != Preconditioner::Auto {
        return kind;
    }
    let step = (a.n / 1000).max(1);
    let mut ratios: Vec<f64> = (0..a.n)
        .step_by(step)
        .map(|i| {
            let (cols, vals) = a.row(i);
            let (mut d, mut off) = (0.0, 0.0);
            for (&j, &v) in cols.iter().zip(vals) {
                if j as usize == i {
                    d += v.abs();
                } else {
                    off += v.abs();
                }
            }
            if off > 0.0 {
                d / off
            } else {
                f64::INFINITY
            }
        })
        .collect();
    if ratios.is_empty() {
        return Preconditioner::Jacobi;
    }
    let mid = ratios.len() / 2;
    let (_, median, _) = ratios.select_nth_unstable_by(mid, |x, y| x.total_cmp(y));
    if *median >= ILU_DOMINANCE {
        Preconditioner::Ilu0
    } else {
        Preconditioner::Amg
    }
}

impl Scalar {
    /// The preconditioner kind this is.
    pub(crate) fn kind(&self) -> Preconditioner {
        match self {
            Self::Identity(_) => Preconditioner::None,
            Self::Jacobi(_) => Preconditioner::Jacobi,
            Self::Ilu0(_) => Preconditioner::Ilu0,
            Self::Amg(_) => Preconditioner::Amg,
        }
    }

    /// Builds `kind` for `a` (`Auto` resolved by [`resolve`]).
    pub(crate) fn new(kind: Preconditioner, a: &Csr) -> Result<Self, LinalgError> {
        Ok(match resolve(kind, a) {
            Preconditioner::None => Self::Identity(Identity),
            Preconditioner::Jacobi => Self::Jacobi(Jacobi::new(a)?),
            Preconditioner::Ilu0 => Self::Ilu0(Ilu0::new(a)?),
            Preconditioner::Amg | Preconditioner::Auto => Self::Amg(Box::new(Amg::new(a)?)),
        })
    }

    /// New values on the same pattern, cheaply (see [`super::LinearSolver::update`]): Jacobi
    /// refreshes its diagonal, ILU(0) refactors in place, multigrid keeps its whole hierarchy
    /// and refreshes only the finest smoother.
    pub(crate) fn update(&mut self, a: &Csr) -> Result<(), LinalgError> {
        match self {
            Self::Identity(_) => Ok(()),
            Self::Jacobi(j) => j.refresh(a),
            Self::Ilu0(i) => i.refresh(a),
            Self::Amg(m) => m.update(a),
        }
    }

    /// New values on the same pattern: multigrid keeps its aggregates, the others rebuild.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        match self {
            Self::Identity(_) => Ok(()),
            Self::Jacobi(j) => j.refresh(a),
            Self::Ilu0(i) => i.refresh(a),
            Self::Amg(m) => m.refresh(a),
        }
    }
}

impl Apply for Scalar {
    fn apply(&mut self, a: &Csr, r: &[f64], z: &mut [f64]) {
        match self {
            Self::Identity(p) => p.apply(a, r, z),
            Self::Jacobi(p) => p.apply(a, r, z),
            Self::Ilu0(p) => p.apply(a, r, z),
            Self::Amg(p) => p.apply(a, r, z),
        }
    }
}

/// One species block: its diagonal block (refilled in place on new values through `from`,
/// where each of its rows starts in the coupled matrix's values) and how it is inverted.
struct Part {
    a: Csr,
    from: Vec<usize>,
    inv: Inv,
}

/// The exact inverse of a diagonal block, or a preconditioner of a general one.
enum Inv {
    Diagonal(Jacobi),
    General(Scalar),
}

/// Block preconditioner over `blocks` equal contiguous species blocks.
pub(crate) struct Block {
    size: usize,
    scheme: BlockScheme,
    kind: Preconditioner,
    parts: Vec<Part>,
    /// Sweep order of the Gauss–Seidel scheme (species indices).
    order: Vec<usize>,
    rhs: Vec<f64>,
    /// Entries of the coupled matrix built for (guards the in-place refill).
    nnz: usize,
}

/// Largest block count whose sweep order is chosen among all permutations (6! = 720 sums of
/// at most 15 terms); above it, species order is kept.
const MAX_ORDERED_BLOCKS: usize = 6;

/// Block Gauss–Seidel sweep order for `a` of `blocks` equal species blocks: the coupling
/// strength of block (s, t) is ‖A_st‖_F / √(‖A_ss‖_F ‖A_tt‖_F) (scale invariant), and the
/// order is the permutation whose kept part, Σ strength(s, t) over t swept before s, is
/// largest (exhaustive search; ties keep the earlier permutation in lexicographic order, so
/// species order unless another is strictly better). For Keller–Segel this sweeps the signal
/// before the cells, keeping the chemotaxis block (a graph matrix) and dropping the weak
/// production block (a diagonal). Measured effect (unit tests' matrices, GMRES to 1e-8):
/// 2–4 % fewer iterations for 2, 3 and 4 species with multigrid or ILU(0) blocks; for two
/// blocks both orders share the error operator's nonzero spectrum, so little more can be won.
fn sweep_order(a: &Csr, blocks: usize) -> Vec<usize> {
    let identity: Vec<usize> = (0..blocks).collect();
    if !(2..=MAX_ORDERED_BLOCKS).contains(&blocks) || a.n % blocks != 0 {
        return identity;
    }
    let n = a.n / blocks;
    // Squared Frobenius norms of every block, one pass (columns sorted, blocks contiguous).
    let mut f = vec![0.0f64; blocks * blocks];
    for s in 0..blocks {
        for i in s * n..(s + 1) * n {
            let (c, v) = a.row(i);
            let mut t = 0;
            for (&j, &x) in c.iter().zip(v) {
                while j as usize >= (t + 1) * n {
                    t += 1;
                }
                f[s * blocks + t] += x * x;
            }
        }
    }
    let strength = |s: usize, t: usize| {
        let d = (f[s * blocks + s] * f[t * blocks + t]).sqrt().sqrt();
        if d > 0.0 && d.is_finite() {
            f[s * blocks + t].sqrt() / d
        } else {
            0.0
        }
    };
    let kept = |order: &[usize]| -> f64 {
        let mut sum = 0.0;
        for q in 1..order.len() {
            for p in 0..q {
                sum += strength(order[q], order[p]);
            }
        }
        sum
    };
    let mut best = identity.clone();
    let mut best_kept = kept(&best);
    let mut perm = identity;
    while next_permutation(&mut perm) {
        let k = kept(&perm);
        if k > best_kept {
            best_kept = k;
            best.copy_from_slice(&perm);
        }
    }
    best
}

/// The next permutation in lexicographic order; false (and `v` unchanged) at the last.
fn next_permutation(v: &mut [usize]) -> bool {
    let Some(i) = (1..v.len()).rev().find(|&i| v[i - 1] < v[i]) else {
        return false;
    };
    let Some(j) = (i..v.len()).rev().find(|&j| v[j] > v[i - 1]) else {
        return false;
    };
    v.swap(i - 1, j);
    v[i..].reverse();
    true
}

/// Whether every stored off-diagonal entry of `a` is zero (an immobile species).
fn is_diagonal(a: &Csr) -> bool {
    (0..a.n).all(|i| {
        let (c, v) = a.row(i);
        c.iter().zip(v).all(|(&j, &x)| j as usize == i || x == 0.0)
    })
}

impl Block {
    pub(crate) fn new(
        a: &Csr,
        blocks: usize,
        kind: Preconditioner,
        scheme: BlockScheme,
    ) -> Result<Self, LinalgError> {
        let size = a.n / blocks;
        let mut parts = Vec::with_capacity(blocks);
        for s in 0..blocks {
            let (sub, from) = a.sub_block_mapped(s * size, (s + 1) * size);
            let inv = Self::invert(kind, &sub, None).map_err(|e| offset(e, s * size))?;
            parts.push(Part { a: sub, from, inv });
        }
        Ok(Self {
            size,
            scheme,
            kind,
            parts,
            order: sweep_order(a, blocks),
            rhs: vec![0.0; size],
            nnz: a.col.len(),
        })
    }

    fn invert(kind: Preconditioner, sub: &Csr, old: Option<Inv>) -> Result<Inv, LinalgError> {
        if is_diagonal(sub) {
            return Ok(match old {
                Some(Inv::Diagonal(mut j)) => {
                    j.refresh(sub)?;
                    Inv::Diagonal(j)
                }
                _ => Inv::Diagonal(Jacobi::new(sub)?),
            });
        }
        match old {
            Some(Inv::General(mut p)) if p.kind() == resolve(kind, sub) => {
                p.refresh(sub)?;
                Ok(Inv::General(p))
            }
            _ => Ok(Inv::General(Scalar::new(kind, sub)?)),
        }
    }

    /// New values on the pattern built for: each diagonal block is refilled in place and its
    /// preconditioner refreshed (rebuilt if its kind changes).
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        if a.n != self.size * self.parts.len() || a.col.len() != self.nnz {
            *self = Self::new(a, self.parts.len(), self.kind, self.scheme)?;
            return Ok(());
        }
        for (s, part) in self.parts.iter_mut().enumerate() {
            part.a.refill_block(a, &part.from);
            let old = std::mem::replace(&mut part.inv, Inv::General(Scalar::Identity(Identity)));
            part.inv = Self::invert(self.kind, &part.a, Some(old))
                .map_err(|e| offset(e, s * self.size))?;
        }
        self.order = sweep_order(a, self.parts.len());
        Ok(())
    }
}

impl Block {
    /// New values on the pattern built for, cheaply: each diagonal block is refilled in place
    /// and its preconditioner updated with [`Scalar::update`] (kinds are kept, so a block
    /// built as diagonal keeps its exact diagonal inverse, and the sweep order is kept).
    pub(crate) fn update(&mut self, a: &Csr) -> Result<(), LinalgError> {
        if a.n != self.size * self.parts.len() || a.col.len() != self.nnz {
            return Err(LinalgError::NeedsPrepare(
                "the block preconditioner was built for another pattern".into(),
            ));
        }
        for (s, part) in self.parts.iter_mut().enumerate() {
            part.a.refill_block(a, &part.from);
            match &mut part.inv {
                Inv::Diagonal(d) => d.refresh(&part.a),
                Inv::General(p) => p.update(&part.a),
            }
            .map_err(|e| offset(e, s * self.size))?;
        }
        Ok(())
    }
}

/// Shifts a block-local pivot index to the global numbering.
fn offset(e: LinalgError, by: usize) -> LinalgError {
    match e {
        LinalgError::Singular { index } => LinalgError::Singular { index: index + by },
        e => e,
    }
}

impl Apply for Block {
    fn apply(&mut self, a: &Csr, r: &[f64], z: &mut [f64]) {
        let n = self.size;
        for p in 0..self.order.len() {
            let s = self.order[p];
            self.rhs.copy_from_slice(&r[s * n..(s + 1) * n]);
            if self.scheme == BlockScheme::GaussSeidel && p > 0 {
                // rhs_s −= Σ_{t swept before s} A_st z_t, blocks in sweep order; each block
                // is a contiguous run of the row (columns sorted).
                let done = &self.order[..p];
                for (k, ri) in self.rhs.iter_mut().enumerate() {
                    let (c, v) = a.row(s * n + k);
                    let mut acc = *ri;
                    for &t in done {
                        let lo = c.partition_point(|&j| (j as usize) < t * n);
                        let hi = lo + c[lo..].partition_point(|&j| (j as usize) < (t + 1) * n);
                        for (&j, &x) in c[lo..hi].iter().zip(&v[lo..hi]) {
                            acc -= x * z[j as usize];
                        }
                    }
                    *ri = acc;
                }
            }
            let zs = &mut z[s * n..(s + 1) * n];
            let part = &mut self.parts[s];
            match &mut part.inv {
                Inv::Diagonal(d) => d.apply(&part.a, &self.rhs, zs),
                Inv::General(p) => p.apply(&part.a, &self.rhs, zs),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::testmats;

    #[test]
    fn ilu0_is_exact_on_a_tridiagonal_matrix() {
        // No fill occurs for a tridiagonal matrix, so ILU(0) is the LU (common practice);
        // reference: faer's dense partial-pivoting LU.
        let n = 9;
        let mut t = sprs::TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 3.0 + i as f64 * 0.1);
            if i > 0 {
                t.add_triplet(i, i - 1, -1.0);
            }
            if i + 1 < n {
                t.add_triplet(i, i + 1, -1.3);
            }
        }
        let a = t.to_csr();
        let b = testmats::rhs(n, 1);
        let csr = Csr::from_sprs(&a);
        let mut p = Ilu0::new(&csr).unwrap();
        let mut z = vec![0.0; n];
        p.apply(&csr, &b, &mut z);
        for (g, w) in z.iter().zip(testmats::dense_solve(&a, &b)) {
            assert!((g - w).abs() < 1e-13, "{g} vs {w}");
        }
    }

    #[test]
    fn immobile_species_block_is_inverted_exactly() {
        let mesh = testmats::disk_mesh(0.3);
        let a = Csr::from_sprs(&testmats::coupled_species(&mesh, 0.5, 3));
        let blk = Block::new(&a, 3, Preconditioner::Ilu0, BlockScheme::GaussSeidel).unwrap();
        assert!(matches!(blk.parts[2].inv, Inv::Diagonal(_)));
        assert!(matches!(blk.parts[0].inv, Inv::General(_)));
    }

    /// Mean edge length of a mesh.
    fn mean_edge(mesh: &crate::mesh::Mesh) -> f64 {
        let s: f64 = mesh
            .edges
            .iter()
            .map(|e| {
                let (p, q) = (mesh.node(e[0]), mesh.node(e[1]));
                (p[0] - q[0]).hypot(p[1] - q[1])
            })
            .sum();
        s / mesh.edges.len() as f64
    }

    #[test]
    fn auto_takes_ilu_below_the_measured_crossover_and_multigrid_above() {
        // dt·D/h² = 18 is the BDF2 system of a dt = 1e-3 step at 1e5 nodes on the unit disk,
        // where multigrid was measured faster (see `resolve`); 5 is clearly mass dominated.
        let mesh = testmats::disk_mesh(0.05);
        let h = mean_edge(&mesh);
        for (ratio, want) in [
            (0.3, Preconditioner::Ilu0),
            (5.0, Preconditioner::Ilu0),
            (18.0, Preconditioner::Amg),
            (300.0, Preconditioner::Amg),
        ] {
            let d = Csr::from_sprs(&testmats::diffusion(&mesh, ratio * h * h));
            assert_eq!(resolve(Preconditioner::Auto, &d), want, "diffusion {ratio}");
            let t = Csr::from_sprs(&testmats::transport(&mesh, ratio * h * h, 1.0));
            assert_eq!(resolve(Preconditioner::Auto, &t), want, "transport {ratio}");
        }
        assert_eq!(
            resolve(
                Preconditioner::Jacobi,
                &Csr::from_sprs(&testmats::diffusion(&mesh, 1.0))
            ),
            Preconditioner::Jacobi
        );
    }

    #[test]
    fn permutations_are_enumerated_once_each() {
        let mut v = vec![0, 1, 2, 3];
        let mut seen = std::collections::BTreeSet::new();
        seen.insert(v.clone());
        while next_permutation(&mut v) {
            assert!(seen.insert(v.clone()), "{v:?} twice");
        }
        assert_eq!(seen.len(), 24);
        assert_eq!(v, [3, 2, 1, 0]);
    }

    #[test]
    fn gauss_seidel_sweeps_the_strong_coupling_first() {
        // Keller–Segel-like Jacobian: the cells' row couples to the signal through a graph
        // block (chemotaxis), the signal's row to the cells through a diagonal (production),
        // so the signal is swept first. With good block solves the gain is small: for two
        // blocks both orders give error operators with the same nonzero spectrum (those of
        // XY and YX, common practice), so only non-normality differs (measured: multigrid
        // blocks 47 against 49 GMRES iterations here, ILU(0) blocks 37 against 37).
        use crate::linalg::krylov::{gmres, Stop, Work};
        let mesh = testmats::disk_mesh(0.05);
        let a = testmats::keller_segel(&mesh, 0.5, 20.0);
        let csr = Csr::from_sprs(&a);
        let b = testmats::rhs(csr.n, 4);
        let stop = Stop {
            rtol: 1e-8,
            max_iterations: 400,
        };
        let run = |order: Option<Vec<usize>>| {
            let mut blk =
                Block::new(&csr, 2, Preconditioner::Amg, BlockScheme::GaussSeidel).unwrap();
            assert_eq!(blk.order, [1, 0]);
            if let Some(o) = order {
                blk.order = o;
            }
            let mut x = vec![0.0; csr.n];
            let (its, _) = gmres(&csr, &mut blk, &b, &mut x, stop, 30, &mut Work::default())
                .unwrap_or_else(|e| panic!("{e}"));
            assert!(testmats::relative_residual(&a, &x, &b) <= 1.01e-8);
            its
        };
        let chosen = run(None);
        let species_order = run(Some(vec![0, 1]));
        assert!(
            chosen < species_order,
            "chosen order {chosen}, species order {species_order}"
        );
        // Three species (cells with chemotaxis on the signal, signal, immobile fed by the
        // cells): signal before cells before the immobile species keeps both couplings of
        // the cells; the order does not change when all values are scaled.
        let mut c3 = testmats::coupled_species(&mesh, 0.5, 3);
        assert_eq!(sweep_order(&Csr::from_sprs(&c3), 3), [1, 0, 2]);
        c3.data_mut().iter_mut().for_each(|v| *v *= 1e-3);
        assert_eq!(sweep_order(&Csr::from_sprs(&c3), 3), [1, 0, 2]);
        // A block system whose couplings all vanish keeps species order.
        let d = Csr::from_sprs(&testmats::diffusion(&mesh, 0.1));
        let mut t = sprs::TriMat::new((2 * d.n, 2 * d.n));
        for i in 0..d.n {
            let (c, v) = d.row(i);
            for (&j, &x) in c.iter().zip(v) {
                let j = j as usize;
                t.add_triplet(i, j, x);
                t.add_triplet(d.n + i, d.n + j, 2.0 * x);
            }
        }
        assert_eq!(sweep_order(&Csr::from_sprs(&t.to_csr()), 2), [0, 1]);
    }

    #[test]
    fn zero_pivot_is_reported() {
        let mesh = testmats::disk_mesh(0.3);
        let mut a = testmats::diffusion(&mesh, 1.0);
        testmats::zero_row(&mut a, 4);
        let csr = Csr::from_sprs(&a);
        assert_eq!(
            Jacobi::new(&csr).err(),
            Some(LinalgError::Singular { index: 4 })
        );
        assert!(matches!(Ilu0::new(&csr), Err(LinalgError::Singular { .. })));
    }
}
