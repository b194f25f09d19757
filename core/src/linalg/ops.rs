//! Vector kernels and the CSR mat-vec the iterations run on.
//!
//! Reductions use several independent accumulators: it breaks the add dependency chain (the
//! loop vectorises) and the summation order is fixed, so results do not depend on the thread
//! count. Vectors are never split over threads (at the sizes solved here a thread pool costs
//! more than it saves); row loops (mat-vec, multigrid transfers) are split over row chunks above [`PAR_WORK`] entries, each row
//! still summed by one thread in order, so it is bitwise the same as the sequential one.

use rayon::prelude::*;
use sprs::CsMat;

const LANES: usize = 8;

/// Stored entries from which a row loop runs on the rayon pool (the fine levels of 1e5-node
/// systems and up; below, the pool's hand-off costs about what it saves).
pub(crate) const PAR_WORK: usize = 200_000;
/// Rows per parallel task.
const CHUNK_ROWS: usize = 4096;

/// Calls `f(i, &mut out[i])` for every row i: over row chunks on the rayon pool when the
/// loop visits at least [`PAR_WORK`] stored entries (`work`), one after another otherwise.
/// Each row is computed by one thread in its own order, so the results are bitwise those of
/// the sequential loop whatever the thread count. When no other worker is free, the calling
/// thread runs every chunk itself (work stealing), so a busy machine costs little.
pub(crate) fn for_rows(out: &mut [f64], work: usize, f: impl Fn(usize, &mut f64) + Sync) {
    if work >= PAR_WORK {
        out.par_chunks_mut(CHUNK_ROWS)
            .enumerate()
            .for_each(|(c, chunk)| {
                for (k, v) in chunk.iter_mut().enumerate() {
                    f(c * CHUNK_ROWS + k, v);
                }
            });
    } else {
        for (i, v) in out.iter_mut().enumerate() {
            f(i, v);
        }
    }
}

/// x · y.
pub(crate) fn dot(x: &[f64], y: &[f64]) -> f64 {
    let mut acc = [0.0; LANES];
    let xc = x.chunks_exact(LANES);
    let yc = y.chunks_exact(LANES);
    let tail: f64 = xc
        .remainder()
        .iter()
        .zip(yc.remainder())
        .map(|(a, b)| a * b)
        .sum();
    for (a, b) in xc.zip(yc) {
        for k in 0..LANES {
            acc[k] += a[k] * b[k];
        }
    }
    acc.iter().sum::<f64>() + tail
}

/// ‖x‖₂.
pub(crate) fn norm(x: &[f64]) -> f64 {
    dot(x, x).sqrt()
}

/// y ← y + α x.
pub(crate) fn axpy(alpha: f64, x: &[f64], y: &mut [f64]) {
    for (yi, xi) in y.iter_mut().zip(x) {
        *yi += alpha * xi;
    }
}

/// An owned CSR matrix: `usize` row offsets, `u32` column indices (a quarter less memory
/// traffic per stored entry than `usize` in the mat-vec and smoother loops, which are bound
/// by memory bandwidth; meshes stay far below 2³² unknowns).
#[derive(Clone, Debug)]
pub(crate) struct Csr {
    /// Rows.
    pub n: usize,
    /// Columns (equal to `n` except for the multigrid transfer operators).
    pub ncols: usize,
    pub ptr: Vec<usize>,
    pub col: Vec<u32>,
    pub val: Vec<f64>,
}

impl Csr {
    /// A 0×0 matrix (a placeholder that owns no storage).
    pub(crate) fn empty() -> Self {
        Self {
            n: 0,
            ncols: 0,
            ptr: Vec::new(),
            col: Vec::new(),
            val: Vec::new(),
        }
    }

    pub(crate) fn from_sprs(a: &CsMat<f64>) -> Self {
        Self {
            n: a.rows(),
            ncols: a.cols(),
            ptr: a.indptr().to_proper().into_owned(),
            col: a.indices().iter().map(|&j| index(j)).collect(),
            val: a.data().to_vec(),
        }
    }

    pub(crate) fn to_sprs(&self) -> CsMat<f64> {
        CsMat::new(
            (self.n, self.ncols),
            self.ptr.clone(),
            self.col.iter().map(|&j| j as usize).collect(),
            self.val.clone(),
        )
    }

    pub(crate) fn same_pattern(&self, a: &CsMat<f64>) -> bool {
        a.rows() == self.n
            && a.indices().len() == self.col.len()
            && a.indices()
                .iter()
                .zip(&self.col)
                .all(|(&j, &k)| j == k as usize)
            && a.indptr().to_proper().as_ref() == self.ptr.as_slice()
    }

    /// Row `i` as (columns, values).
    #[inline]
    pub(crate) fn row(&self, i: usize) -> (&[u32], &[f64]) {
        let r = self.ptr[i]..self.ptr[i + 1];
        (&self.col[r.clone()], &self.val[r])
    }

    /// Diagonal entries (0 where none is stored).
    pub(crate) fn diagonal(&self) -> Vec<f64> {
        (0..self.n)
            .map(|i| {
                let (c, v) = self.row(i);
                c.binary_search(&index(i)).map(|k| v[k]).unwrap_or(0.0)
            })
            .collect()
    }

    #[inline]
    pub(crate) fn row_dot(&self, i: usize, x: &[f64]) -> f64 {
        let (c, v) = self.row(i);
        let mut s = 0.0;
        for (j, a) in c.iter().zip(v) {
            s += a * x[*j as usize];
        }
        s
    }

    /// y ← A x.
    pub(crate) fn matvec(&self, x: &[f64], y: &mut [f64]) {
        for_rows(y, self.col.len(), |i, yi| *yi = self.row_dot(i, x));
    }

    /// r ← b − A x.
    pub(crate) fn residual(&self, b: &[f64], x: &[f64], r: &mut [f64]) {
        self.matvec(x, r);
        for (ri, bi) in r.iter_mut().zip(b) {
            *ri = bi - *ri;
        }
    }

    /// Whether A equals Aᵀ within `rtol` of the largest entry.
    pub(crate) fn is_symmetric(&self, rtol: f64) -> bool {
        is_symmetric_parts(&self.ptr, &self.col, &self.val, rtol)
    }

    /// The diagonal block of rows and columns `lo..hi`, and where each of its rows starts in
    /// `self.val` (a block row is contiguous there, columns being sorted), so new values on
    /// the same pattern are copied in with [`Csr::refill_block`].
    pub(crate) fn sub_block_mapped(&self, lo: usize, hi: usize) -> (Csr, Vec<usize>) {
        let sub = self.sub_block(lo, hi);
        let from = (lo..hi)
            .map(|i| {
                let (c, _) = self.row(i);
                self.ptr[i] + c.partition_point(|&j| (j as usize) < lo)
            })
            .collect();
        (sub, from)
    }

    /// Copies the values of the block of `parent` mapped by `from` (see
    /// [`Csr::sub_block_mapped`]) into `self`, whose pattern is that block's.
    pub(crate) fn refill_block(&mut self, parent: &Csr, from: &[usize]) {
        for (i, &f) in from.iter().enumerate() {
            let (lo, hi) = (self.ptr[i], self.ptr[i + 1]);
            self.val[lo..hi].copy_from_slice(&parent.val[f..f + hi - lo]);
        }
    }

    /// The diagonal block of rows and columns `lo..hi`.
    pub(crate) fn sub_block(&self, lo: usize, hi: usize) -> Csr {
        let mut out = Csr {
            n: hi - lo,
            ncols: hi - lo,
            ptr: Vec::with_capacity(hi - lo + 1),
            col: Vec::new(),
            val: Vec::new(),
        };
        out.ptr.push(0);
        for i in lo..hi {
            let (c, v) = self.row(i);
            for (&j, &a) in c.iter().zip(v) {
                let j = j as usize;
                if (lo..hi).contains(&j) {
                    out.col.push(index(j - lo));
                    out.val.push(a);
                }
            }
            out.ptr.push(out.col.len());
        }
        out
    }
}

/// A column index stored as `u32` (our own matrices) or `usize` (`sprs`'s).
pub(crate) trait ColumnIndex: Copy {
    /// The index as `usize`.
    fn get(self) -> usize;
}

impl ColumnIndex for u32 {
    #[inline]
    fn get(self) -> usize {
        self as usize
    }
}

impl ColumnIndex for usize {
    #[inline]
    fn get(self) -> usize {
        self
    }
}

/// `j` as a stored column index. Meshes are capped far below 2³² nodes (the node budget), so
/// the conversion cannot truncate for a matrix this crate builds; checked in debug builds.
#[inline]
pub(crate) fn index(j: usize) -> u32 {
    debug_assert!(j <= u32::MAX as usize, "column index {j} beyond u32");
    j as u32
}

/// Whether the square CSR matrix given by its arrays (row offsets starting at 0, sorted
/// columns) equals its transpose within `rtol` of its largest entry. Works on borrowed
/// arrays, so a `sprs` matrix is tested without a copy.
pub(crate) fn is_symmetric_parts<J: ColumnIndex>(
    ptr: &[usize],
    col: &[J],
    val: &[f64],
    rtol: f64,
) -> bool {
    let scale = val.iter().fold(0.0f64, |m, v| m.max(v.abs()));
    let tol = rtol * scale;
    let n = ptr.len().saturating_sub(1);
    (0..n).all(|i| {
        let r = ptr[i]..ptr[i + 1];
        col[r.clone()].iter().zip(&val[r]).all(|(&j, &a)| {
            let j = j.get();
            if j <= i {
                return true;
            }
            let rj = ptr[j]..ptr[j + 1];
            match col[rj.clone()].binary_search_by(|k| k.get().cmp(&i)) {
                Ok(k) => (val[rj.start + k] - a).abs() <= tol,
                Err(_) => a.abs() <= tol,
            }
        })
    })
}

/// [`is_symmetric_parts`] of a `sprs` CSR matrix, reading its arrays in place (the row
/// offsets are copied only when they do not start at 0).
pub(crate) fn sprs_is_symmetric(a: &CsMat<f64>, rtol: f64) -> bool {
    a.rows() == a.cols() && is_symmetric_parts(&a.indptr().to_proper(), a.indices(), a.data(), rtol)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    proptest! {
        /// Reference: the plain left-to-right sum (equal within round-off).
        #[test]
        fn dot_matches_plain_sum(v in prop::collection::vec(-1e3f64..1e3, 0..100)) {
            let w: Vec<f64> = v.iter().map(|x| x * 0.5 - 1.0).collect();
            let plain: f64 = v.iter().zip(&w).map(|(a, b)| a * b).sum();
            let mag: f64 = v.iter().zip(&w).map(|(a, b)| (a * b).abs()).sum();
            prop_assert!((dot(&v, &w) - plain).abs() <= 1e-13 * mag.max(1.0));
        }
    }

    #[test]
    fn parallel_matvec_is_bitwise_sequential() {
        // A tridiagonal matrix above the parallel threshold against row-by-row sums.
        let n = PAR_WORK + 17;
        let mut t = sprs::TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 2.0 + (i % 7) as f64 * 0.1);
            if i > 0 {
                t.add_triplet(i, i - 1, -0.3);
            }
            if i + 1 < n {
                t.add_triplet(i, i + 1, -0.7);
            }
        }
        let a = Csr::from_sprs(&t.to_csr());
        let x: Vec<f64> = (0..n).map(|i| (i as f64 * 0.37).sin()).collect();
        let mut y = vec![0.0; n];
        a.matvec(&x, &mut y);
        for (i, yi) in y.iter().enumerate() {
            assert_eq!(yi.to_bits(), a.row_dot(i, &x).to_bits());
        }
        assert!(!a.is_symmetric(1e-14));
    }
}
