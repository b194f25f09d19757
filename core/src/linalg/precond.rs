//! Preconditioners: Jacobi, ILU(0) on the matrix's own pattern, algebraic multigrid
//! ([`super::amg`]), and block preconditioners over the species blocks of a coupled system.
//!
//! Hand-written: no maintained Rust crate offers ILU(0) or block preconditioners on CSR
//! matrices that fit the `sprs` storage used here.

use super::amg::Amg;
use super::ops::Csr;
use super::LinalgError;
use serde::{Deserialize, Serialize};

/// Which preconditioner the Krylov iteration uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Preconditioner {
    /// Per scalar system or species block: ILU(0) when the diagonal dominates (small
    /// dt·D/h²), algebraic multigrid otherwise.
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
    /// Forward block Gauss–Seidel: the lower off-diagonal blocks (coupling to earlier species)
    /// are applied, the upper ones dropped.
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
        let d = a.diagonal();
        if let Some(index) = d.iter().position(|v| *v == 0.0) {
            return Err(LinalgError::Singular { index });
        }
        Ok(Self {
            inv_diag: d.iter().map(|v| 1.0 / v).collect(),
        })
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
}

impl Ilu0 {
    pub(crate) fn new(a: &Csr) -> Result<Self, LinalgError> {
        let mut lu = a.clone();
        let n = a.n;
        let mut diag = vec![0; n];
        for (i, d) in diag.iter_mut().enumerate() {
            let (c, _) = lu.row(i);
            *d = lu.ptr[i]
                + c.binary_search(&i)
                    .map_err(|_| LinalgError::Singular { index: i })?;
        }
        // Row-by-row (IKJ) elimination restricted to the pattern; `pos[j]` maps a column of
        // the current row to its slot.
        let mut pos = vec![usize::MAX; n];
        for i in 0..n {
            let (lo, hi) = (lu.ptr[i], lu.ptr[i + 1]);
            for k in lo..hi {
                pos[lu.col[k]] = k;
            }
            for kk in lo..diag[i] {
                let k = lu.col[kk];
                let pivot = lu.val[diag[k]];
                let lik = lu.val[kk] / pivot;
                lu.val[kk] = lik;
                for kj in diag[k] + 1..lu.ptr[k + 1] {
                    let p = pos[lu.col[kj]];
                    if p != usize::MAX {
                        lu.val[p] -= lik * lu.val[kj];
                    }
                }
            }
            for k in lo..hi {
                pos[lu.col[k]] = usize::MAX;
            }
            let piv = lu.val[diag[i]];
            if piv == 0.0 || !piv.is_finite() {
                return Err(LinalgError::Singular { index: i });
            }
        }
        Ok(Self { lu, diag })
    }
}

impl Apply for Ilu0 {
    fn apply(&mut self, _: &Csr, r: &[f64], z: &mut [f64]) {
        let lu = &self.lu;
        for i in 0..lu.n {
            let mut s = r[i];
            for k in lu.ptr[i]..self.diag[i] {
                s -= lu.val[k] * z[lu.col[k]];
            }
            z[i] = s;
        }
        for i in (0..lu.n).rev() {
            let mut s = z[i];
            for k in self.diag[i] + 1..lu.ptr[i + 1] {
                s -= lu.val[k] * z[lu.col[k]];
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

/// Resolves [`Preconditioner::Auto`] for `a` from how strongly its diagonal dominates, a
/// proxy for dt·D/h² that needs no knowledge of where the matrix came from: for M/dt + D·K on
/// a quality mesh, diagonal/Σ|off-diagonal| ≈ 1 + 0.25·h²/(dt·D). Mass-dominated systems
/// (ratio ≥ 1.01, i.e. dt·D/h² ≲ 25) converge in few ILU(0) iterations, which are far cheaper
/// than multigrid cycles; the rest get multigrid, whose iteration count does not grow with
/// the mesh (crossover measured with `cargo bench --bench linalg`).
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
                if j == i {
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
    if *median >= 1.01 {
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

    /// New values on the same pattern: multigrid keeps its aggregates, the others rebuild.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        match self {
            Self::Identity(_) => Ok(()),
            Self::Jacobi(j) => {
                *j = Jacobi::new(a)?;
                Ok(())
            }
            Self::Ilu0(i) => {
                *i = Ilu0::new(a)?;
                Ok(())
            }
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

/// One species block: its matrix and preconditioner, or the exact inverse of a diagonal block.
enum Part {
    Diagonal(Jacobi),
    General { a: Csr, p: Scalar },
}

/// Block preconditioner over `blocks` equal contiguous species blocks.
pub(crate) struct Block {
    size: usize,
    scheme: BlockScheme,
    kind: Preconditioner,
    parts: Vec<Part>,
    rhs: Vec<f64>,
}

/// Whether every stored off-diagonal entry of `a` is zero (an immobile species).
fn is_diagonal(a: &Csr) -> bool {
    (0..a.n).all(|i| {
        let (c, v) = a.row(i);
        c.iter().zip(v).all(|(&j, &x)| j == i || x == 0.0)
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
        let mut b = Self {
            size,
            scheme,
            kind,
            parts: Vec::with_capacity(blocks),
            rhs: vec![0.0; size],
        };
        for s in 0..blocks {
            let sub = a.sub_block(s * size, (s + 1) * size);
            b.parts
                .push(b.part(sub, None).map_err(|e| offset(e, s * size))?);
        }
        Ok(b)
    }

    fn part(&self, sub: Csr, old: Option<Part>) -> Result<Part, LinalgError> {
        if is_diagonal(&sub) {
            return Ok(Part::Diagonal(Jacobi::new(&sub)?));
        }
        match old {
            Some(Part::General { a, mut p })
                if a.ptr == sub.ptr && a.col == sub.col && p.kind() == resolve(self.kind, &sub) =>
            {
                p.refresh(&sub)?;
                Ok(Part::General { a: sub, p })
            }
            _ => {
                let p = Scalar::new(self.kind, &sub)?;
                Ok(Part::General { a: sub, p })
            }
        }
    }

    /// New values on the same pattern.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        let parts = std::mem::take(&mut self.parts);
        for (s, old) in parts.into_iter().enumerate() {
            let sub = a.sub_block(s * self.size, (s + 1) * self.size);
            let part = self
                .part(sub, Some(old))
                .map_err(|e| offset(e, s * self.size))?;
            self.parts.push(part);
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
        for s in 0..self.parts.len() {
            let (done, rest) = z.split_at_mut(s * n);
            let zs = &mut rest[..n];
            self.rhs.copy_from_slice(&r[s * n..(s + 1) * n]);
            if self.scheme == BlockScheme::GaussSeidel && s > 0 {
                // rhs_s −= Σ_{t<s} A_st z_t: the entries of these rows left of the block.
                for (k, ri) in self.rhs.iter_mut().enumerate() {
                    let (c, v) = a.row(s * n + k);
                    for (&j, &x) in c.iter().zip(v) {
                        if j >= s * n {
                            break;
                        }
                        *ri -= x * done[j];
                    }
                }
            }
            match &mut self.parts[s] {
                Part::Diagonal(d) => d.apply(a, &self.rhs, zs),
                Part::General { a: sub, p } => p.apply(sub, &self.rhs, zs),
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
        assert!(matches!(blk.parts[2], Part::Diagonal(_)));
        assert!(matches!(blk.parts[0], Part::General { .. }));
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
