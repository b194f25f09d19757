//! Smoothed-aggregation algebraic multigrid, used as a V-cycle preconditioner.
//!
//! Set-up per level: strength graph |a_ij| ≥ θ·√|a_ii a_jj|, greedy aggregation, piecewise
//! constant tentative prolongator P₀ (the constants are the near-kernel of the diffusion
//! operators), one damped-Jacobi smoothing step P = (I − ω D⁻¹A) P₀ with ω = 4/3 over a
//! Gershgorin bound of ρ(D⁻¹A), restriction R = Pᵀ, Galerkin coarse matrix R A P (products by
//! `sprs`). Cycle: one forward Gauss–Seidel sweep before, one backward after the coarse
//! correction (so the cycle is a symmetric operator for symmetric A, as CG needs), faer sparse
//! LU on the coarsest level.
//!
//! Hand-written: no maintained Rust crate provides algebraic multigrid on `sprs` matrices.
//! On new values with the same pattern ([`Amg::refresh`]) the aggregates are kept and only
//! the numeric part (smoothed P, Galerkin products, coarse LU) is redone; [`Amg::update`]
//! keeps even that and refreshes only the finest level's smoother data, so the cycle smooths
//! and forms residuals with the new fine matrix on the old coarse hierarchy.
//!
//! Kernels: each level stores where every row's diagonal sits and its inverse, so a
//! Gauss–Seidel row is two branch-free loops and one multiplication; the restriction R = Pᵀ
//! is stored as its own CSR matrix (a contiguous row-by-row pass).

use super::direct::DirectLu;
use rayon::prelude::*;

use super::ops::{for_rows, index, Csr, PAR_WORK};
use super::precond::Apply;
use super::LinalgError;

/// Strength threshold θ (0.08 is the customary smoothed-aggregation value; value from memory).
const THETA: f64 = 0.08;
/// Levels with at most this many unknowns are solved directly.
const COARSE_SIZE: usize = 400;
const MAX_LEVELS: usize = 20;
const NONE: usize = usize::MAX;

/// One level above the coarsest. The matrix of level 0 is not stored (it is the caller's,
/// passed to [`Amg::apply`] and [`Amg::refresh`]); level k > 0 holds the Galerkin product of
/// level k − 1.
struct Level {
    a: Csr,
    /// Aggregate of each node (kept for refresh).
    aggregates: Vec<usize>,
    /// Smoothed prolongator; its pattern is fixed by A's pattern and the aggregates, so
    /// refresh rewrites only its values.
    p: Csr,
    /// Restriction R = Pᵀ as CSR (coarse rows, fine columns in increasing order), and for
    /// each of its entries the position of the same value in `p.val`.
    r: Csr,
    rpos: Vec<usize>,
    /// Gauss–Seidel data of this level's matrix.
    sm: Smoother,
    /// Unknowns, right-hand side, residual of this level's cycle, and its diagonal.
    x: Vec<f64>,
    b: Vec<f64>,
    res: Vec<f64>,
    diag: Vec<f64>,
}

enum Coarse {
    Lu(Box<DirectLu>),
    /// The coarsest matrix could not be factored (e.g. singular): smooth instead.
    Smooth(Smoother),
}

/// Gauss–Seidel data of one matrix: the position of each row's diagonal entry in the
/// matrix's storage and its inverse (0 for a row without a usable diagonal, whose unknown
/// the sweep then sets to 0).
struct Smoother {
    dpos: Vec<usize>,
    inv: Vec<f64>,
}

impl Smoother {
    /// No rows (a placeholder).
    fn empty() -> Self {
        Self {
            dpos: Vec::new(),
            inv: Vec::new(),
        }
    }

    fn new(a: &Csr) -> Self {
        let dpos = (0..a.n)
            .map(|i| {
                let (c, _) = a.row(i);
                c.binary_search(&index(i))
                    .map(|k| a.ptr[i] + k)
                    .unwrap_or(NONE)
            })
            .collect();
        let mut sm = Self {
            dpos,
            inv: vec![0.0; a.n],
        };
        sm.refresh(a);
        sm
    }

    /// New values on the same pattern.
    fn refresh(&mut self, a: &Csr) {
        for (inv, &d) in self.inv.iter_mut().zip(&self.dpos) {
            let v = if d == NONE { 0.0 } else { a.val[d] };
            *inv = if v != 0.0 && v.is_finite() {
                1.0 / v
            } else {
                0.0
            };
        }
    }
}

/// A multigrid hierarchy for one matrix pattern.
pub(crate) struct Amg {
    levels: Vec<Level>,
    /// Coarsest matrix; when there are no levels, unused (the fine matrix is the caller's).
    coarse_a: Csr,
    coarse: Coarse,
    coarse_x: Vec<f64>,
    coarse_b: Vec<f64>,
    /// Rows and entries of the fine matrix built for (a cheap guard for refresh).
    fine_shape: (usize, usize),
    /// Dense per-coarse-column scratch (positions) shared by the set-up products.
    mark: Vec<usize>,
}

/// Greedy aggregation on the strength graph (common practice): whole neighbourhoods first,
/// then stragglers join a neighbouring aggregate, then the rest group with their free
/// neighbours. Nodes without strong neighbours stay singletons.
fn aggregate(a: &Csr) -> (Vec<usize>, usize) {
    const FREE: usize = usize::MAX;
    let n = a.n;
    let d = a.diagonal();
    // Strong neighbours of each node, as CSR.
    let mut sptr = Vec::with_capacity(n + 1);
    let mut scol = Vec::new();
    sptr.push(0);
    for i in 0..n {
        let (c, v) = a.row(i);
        for (&j, &x) in c.iter().zip(v) {
            let j = j as usize;
            if j != i && x.abs() >= THETA * (d[i] * d[j]).abs().sqrt() && x != 0.0 {
                scol.push(j);
            }
        }
        sptr.push(scol.len());
    }
    let strong = |i: usize| scol[sptr[i]..sptr[i + 1]].iter().copied();
    let mut agg = vec![FREE; n];
    let mut count = 0;
    for i in 0..n {
        if agg[i] != FREE || strong(i).next().is_none() || strong(i).any(|j| agg[j] != FREE) {
            continue;
        }
        agg[i] = count;
        for j in strong(i) {
            agg[j] = count;
        }
        count += 1;
    }
    let first = agg.clone();
    for (i, g) in agg.iter_mut().enumerate() {
        if *g == FREE {
            if let Some(j) = strong(i).find(|&j| first[j] != FREE) {
                *g = first[j];
            }
        }
    }
    for i in 0..n {
        if agg[i] == FREE {
            agg[i] = count;
            for j in strong(i) {
                if agg[j] == FREE {
                    agg[j] = count;
                }
            }
            count += 1;
        }
    }
    (agg, count)
}

/// Pattern of the smoothed prolongator (I − ω D⁻¹A) P₀: row i has the aggregates of i and of
/// its neighbours, sorted.
fn prolongator_pattern(a: &Csr, agg: &[usize], nc: usize) -> Csr {
    let mut p = Csr::empty();
    p.n = a.n;
    p.ncols = nc;
    p.ptr.reserve(a.n + 1);
    p.ptr.push(0);
    for i in 0..a.n {
        let start = p.col.len();
        p.col.push(index(agg[i]));
        p.col
            .extend(a.row(i).0.iter().map(|&k| index(agg[k as usize])));
        p.col[start..].sort_unstable();
        let mut w = start;
        for r in start..p.col.len() {
            if r == start || p.col[r] != p.col[w - 1] {
                p.col[w] = p.col[r];
                w += 1;
            }
        }
        p.col.truncate(w);
        p.ptr.push(w);
    }
    p.val = vec![0.0; p.col.len()];
    p
}

/// R = Pᵀ as CSR (pattern and values) and the position in `p.val` of each of its entries.
fn transpose(p: &Csr) -> (Csr, Vec<usize>) {
    let mut ptr = vec![0usize; p.ncols + 1];
    for &j in &p.col {
        ptr[j as usize + 1] += 1;
    }
    for j in 0..p.ncols {
        ptr[j + 1] += ptr[j];
    }
    let mut fill = ptr.clone();
    let mut col = vec![0; p.col.len()];
    let mut rpos = vec![0; p.col.len()];
    for i in 0..p.n {
        for q in p.ptr[i]..p.ptr[i + 1] {
            let j = p.col[q] as usize;
            col[fill[j]] = index(i);
            rpos[fill[j]] = q;
            fill[j] += 1;
        }
    }
    let val = rpos.iter().map(|&q| p.val[q]).collect();
    let r = Csr {
        n: p.ncols,
        ncols: p.n,
        ptr,
        col,
        val,
    };
    (r, rpos)
}

/// R's values from P's (after P's values changed).
fn restriction_values(p: &Csr, r: &mut Csr, rpos: &[usize]) {
    for (v, &q) in r.val.iter_mut().zip(rpos) {
        *v = p.val[q];
    }
}

/// Calls `f(j, r_Ii · a_ik · p_kj)` for every product term of row `big_i` of R A P, in one
/// fixed order (R's row, then A's, then P's), so the fresh product and the refresh sum each
/// entry identically.
#[inline(always)]
fn rap_row(a: &Csr, p: &Csr, r: &Csr, big_i: usize, mut f: impl FnMut(usize, f64)) {
    let (rc, rv) = r.row(big_i);
    for (&i, &w) in rc.iter().zip(rv) {
        let (c, v) = a.row(i as usize);
        for (&k, &aik) in c.iter().zip(v) {
            let u = w * aik;
            let (pc, pv) = p.row(k as usize);
            for (&j, &pkj) in pc.iter().zip(pv) {
                f(j as usize, u * pkj);
            }
        }
    }
}

/// The Galerkin product R A P, pattern and values in one pass (rows sorted). Each entry is
/// summed as [`galerkin_values`] sums it (both through [`rap_row`]), so a later refresh on
/// the same values reproduces it bit for bit. Coarse rows are independent: above
/// [`GALERKIN_PAR_WORK`] entries of R they are formed in chunks on the rayon pool, each row by one
/// thread in the same order, so the product does not depend on the thread count. `acc`
/// is a dense scratch of at least `p.ncols` values.
fn galerkin_product(a: &Csr, p: &Csr, r: &Csr, mark: &mut [usize], acc: &mut [f64]) -> Csr {
    galerkin_product_split(a, p, r, mark, acc, r.col.len() >= GALERKIN_PAR_WORK)
}

/// [`galerkin_product`], in parallel chunks or not as `parallel` says.
fn galerkin_product_split(
    a: &Csr,
    p: &Csr,
    r: &Csr,
    mark: &mut [usize],
    acc: &mut [f64],
    parallel: bool,
) -> Csr {
    let nc = p.ncols;
    let mut ac = Csr::empty();
    ac.n = nc;
    ac.ncols = nc;
    ac.ptr.reserve(nc + 1);
    ac.ptr.push(0);
    if !parallel {
        galerkin_rows(
            a,
            p,
            r,
            0..nc,
            mark,
            acc,
            &mut ac.ptr,
            &mut ac.col,
            &mut ac.val,
        );
        mark.fill(NONE);
        return ac;
    }
    let starts: Vec<usize> = (0..nc).step_by(GALERKIN_CHUNK).collect();
    let parts: Vec<(Vec<usize>, Vec<u32>, Vec<f64>)> = starts
        .par_iter()
        .map_init(
            || (vec![NONE; nc], vec![0.0; nc]),
            |(mark, acc), &start| {
                let rows = start..(start + GALERKIN_CHUNK).min(nc);
                let (mut ends, mut col, mut val) = (Vec::new(), Vec::new(), Vec::new());
                ends.push(0);
                galerkin_rows(a, p, r, rows, mark, acc, &mut ends, &mut col, &mut val);
                (ends, col, val)
            },
        )
        .collect();
    for (ends, col, val) in parts {
        let base = ac.col.len();
        ac.ptr.extend(ends[1..].iter().map(|e| base + e));
        ac.col.extend_from_slice(&col);
        ac.val.extend_from_slice(&val);
    }
    ac
}

/// Coarse rows per parallel task of [`galerkin_product`].
const GALERKIN_CHUNK: usize = 1024;
/// Entries of R from which [`galerkin_product`] runs in parallel: each entry of R costs a
/// row of A times rows of P (tens of products), so far fewer than [`PAR_WORK`] mat-vec
/// entries pay for the hand-off (the second level of a 1e5-node hierarchy, 7e4 entries).
const GALERKIN_PAR_WORK: usize = PAR_WORK / 10;

/// Rows `rows` of R A P appended to `ptr` (row ends, relative to `col`'s start), `col` and
/// `val`. `mark` must hold no row index of `rows` on entry (it does after `fill(NONE)` or
/// after earlier rows).
#[allow(clippy::too_many_arguments)]
fn galerkin_rows(
    a: &Csr,
    p: &Csr,
    r: &Csr,
    rows: std::ops::Range<usize>,
    mark: &mut [usize],
    acc: &mut [f64],
    ptr: &mut Vec<usize>,
    col: &mut Vec<u32>,
    val: &mut Vec<f64>,
) {
    for big_i in rows {
        let start = col.len();
        rap_row(a, p, r, big_i, |j, t| {
            if mark[j] != big_i {
                mark[j] = big_i;
                col.push(index(j));
                acc[j] = 0.0;
            }
            acc[j] += t;
        });
        col[start..].sort_unstable();
        val.extend(col[start..].iter().map(|&j| acc[j as usize]));
        ptr.push(col.len());
    }
}

/// Values of the smoothed prolongator P = (I − ω D⁻¹A) P₀ into `p`'s fixed pattern, with
/// ω = 4/3 over a Gershgorin bound of ρ(D⁻¹A). `diag` receives A's diagonal.
fn prolongator_values(
    a: &Csr,
    agg: &[usize],
    p: &mut Csr,
    diag: &mut [f64],
    size: &mut [f64],
    mark: &mut [usize],
) -> Result<(), LinalgError> {
    let parallel = a.col.len() >= PAR_WORK;
    prolongator_values_split(a, agg, p, diag, size, mark, parallel)
}

/// [`prolongator_values`], over row chunks in parallel or not as `parallel` says.
#[allow(clippy::too_many_arguments)]
fn prolongator_values_split(
    a: &Csr,
    agg: &[usize],
    p: &mut Csr,
    diag: &mut [f64],
    size: &mut [f64],
    mark: &mut [usize],
    parallel: bool,
) -> Result<(), LinalgError> {
    for (i, d) in diag.iter_mut().enumerate() {
        let (c, v) = a.row(i);
        *d = c.binary_search(&index(i)).map(|k| v[k]).unwrap_or(0.0);
        if *d == 0.0 {
            return Err(LinalgError::Singular { index: i });
        }
    }
    let rho = (0..a.n)
        .map(|i| a.row(i).1.iter().map(|v| v.abs()).sum::<f64>() / diag[i].abs())
        .fold(0.0f64, f64::max);
    let omega = 4.0 / 3.0 / rho;
    // P₀: piecewise constant, columns scaled to unit length.
    size.fill(0.0);
    for &g in agg {
        size[g] += 1.0;
    }
    for s in size.iter_mut() {
        *s = 1.0 / s.sqrt();
    }
    let rows = |start: usize, end: usize, vals: &mut [f64], mark: &mut [usize]| {
        // `vals` holds the entries of rows start..end (from p.ptr[start]).
        let off = p.ptr[start];
        for i in start..end {
            let (lo, hi) = (p.ptr[i], p.ptr[i + 1]);
            for q in lo..hi {
                mark[p.col[q] as usize] = q - off;
                vals[q - off] = 0.0;
            }
            let (c, v) = a.row(i);
            for (&k, &aik) in c.iter().zip(v) {
                let g = agg[k as usize];
                vals[mark[g]] += aik * size[g];
            }
            let scale = omega / diag[i];
            for q in lo..hi {
                vals[q - off] = -(vals[q - off] * scale);
                mark[p.col[q] as usize] = NONE;
            }
            let own = lo + p.col[lo..hi].partition_point(|&j| (j as usize) < agg[i]);
            vals[own - off] += size[agg[i]];
        }
    };
    if !parallel {
        rows(0, a.n, &mut p.val, mark);
        return Ok(());
    }
    // Rows are independent: chunks of rows (each with its slice of P's values) on the rayon
    // pool, each row computed by one thread as above, so the values do not depend on the
    // thread count.
    let mut chunks: Vec<(usize, usize, &mut [f64])> = Vec::new();
    let mut rest: &mut [f64] = &mut p.val;
    for start in (0..a.n).step_by(PROLONG_CHUNK) {
        let end = (start + PROLONG_CHUNK).min(a.n);
        let (head, tail) = rest.split_at_mut(p.ptr[end] - p.ptr[start]);
        chunks.push((start, end, head));
        rest = tail;
    }
    let nc = p.ncols;
    chunks.par_iter_mut().for_each_init(
        || vec![NONE; nc],
        |mark, (start, end, vals)| rows(*start, *end, vals, mark),
    );
    Ok(())
}

/// Fine rows per parallel task of [`prolongator_values`].
const PROLONG_CHUNK: usize = 4096;

/// Values of R A P into `ac`'s fixed pattern.
fn galerkin_values(a: &Csr, p: &Csr, r: &Csr, ac: &mut Csr, mark: &mut [usize]) {
    for big_i in 0..ac.n {
        let (lo, hi) = (ac.ptr[big_i], ac.ptr[big_i + 1]);
        for q in lo..hi {
            mark[ac.col[q] as usize] = q;
            ac.val[q] = 0.0;
        }
        let val = &mut ac.val;
        rap_row(a, p, r, big_i, |j, t| val[mark[j]] += t);
        for &j in &ac.col[lo..hi] {
            mark[j as usize] = NONE;
        }
    }
}

/// One Gauss–Seidel sweep with the precomputed diagonal positions and inverses of `sm`: the
/// row is split at its diagonal, so the inner loops have no branch and no division;
/// subtraction order is column order.
fn gauss_seidel(a: &Csr, sm: &Smoother, b: &[f64], x: &mut [f64], forward: bool) {
    let mut sweep = |i: usize| {
        let inv = sm.inv[i];
        if inv == 0.0 {
            x[i] = 0.0;
            return;
        }
        let (lo, d, hi) = (a.ptr[i], sm.dpos[i], a.ptr[i + 1]);
        let mut s = b[i];
        for (&j, &aij) in a.col[lo..d].iter().zip(&a.val[lo..d]) {
            s -= aij * x[j as usize];
        }
        for (&j, &aij) in a.col[d + 1..hi].iter().zip(&a.val[d + 1..hi]) {
            s -= aij * x[j as usize];
        }
        x[i] = s * inv;
    };
    if forward {
        (0..a.n).for_each(&mut sweep);
    } else {
        (0..a.n).rev().for_each(&mut sweep);
    }
}

/// The pre-smoothing sweep of a cycle, which starts from x = 0, fused with the residual it
/// leaves: x_i = (b_i − Σ_{j<i} a_ij x_j) / a_ii reads only the lower triangle (the upper
/// one multiplies zeros), and afterwards b − A x has, row by row, the lower triangle and the
/// diagonal cancelled by construction, so r_i = −Σ_{j>i} a_ij x_j (plus the unsmoothed
/// b_i − Σ_{j<i} a_ij x_j in a row without usable diagonal, whose x_i is 0). Half the work of
/// a sweep and a residual, and the same operator as sweeping from zero and forming b − A x,
/// up to rounding.
fn presmooth_residual(a: &Csr, sm: &Smoother, b: &[f64], x: &mut [f64], res: &mut [f64]) {
    // Where row i's strictly upper part starts (past the diagonal, or where the columns
    // pass i in a row that stores none).
    let upper = |i: usize| match sm.dpos[i] {
        NONE => a.ptr[i] + a.col[a.ptr[i]..a.ptr[i + 1]].partition_point(|&j| (j as usize) < i),
        d => d + 1,
    };
    for i in 0..a.n {
        let lo = a.ptr[i];
        let d = match sm.dpos[i] {
            NONE => upper(i),
            d => d,
        };
        let mut s = b[i];
        for (&j, &aij) in a.col[lo..d].iter().zip(&a.val[lo..d]) {
            s -= aij * x[j as usize];
        }
        let inv = sm.inv[i];
        if inv == 0.0 {
            x[i] = 0.0;
            res[i] = s;
        } else {
            x[i] = s * inv;
            res[i] = 0.0;
        }
    }
    let x: &[f64] = x;
    for_rows(&mut res[..a.n], a.col.len() / 2, |i, r| {
        let (d, hi) = (upper(i), a.ptr[i + 1]);
        let mut s = *r;
        for (&j, &aij) in a.col[d..hi].iter().zip(&a.val[d..hi]) {
            s -= aij * x[j as usize];
        }
        *r = s;
    });
}

impl Amg {
    /// Builds the hierarchy for `a`.
    pub(crate) fn new(a: &Csr) -> Result<Self, LinalgError> {
        let mut levels: Vec<Level> = Vec::new();
        let mut mark: Vec<usize> = Vec::new();
        let mut size: Vec<f64> = Vec::new();
        let mut acc: Vec<f64> = Vec::new();
        // The matrix of the level being coarsened: the caller's, then each Galerkin product.
        let mut next: Option<Csr> = None;
        loop {
            let current = next.as_ref().unwrap_or(a);
            if current.n <= COARSE_SIZE || levels.len() + 1 >= MAX_LEVELS {
                break;
            }
            let (aggregates, nc) = aggregate(current);
            // Too little coarsening (e.g. a mass-dominated matrix has no strong couplings):
            // stop here; smoothing alone is effective for such a level.
            if nc * 10 > current.n * 8 {
                break;
            }
            let n = current.n;
            if mark.len() < nc {
                mark.resize(nc, NONE);
            }
            size.resize(nc, 0.0);
            let mut p = prolongator_pattern(current, &aggregates, nc);
            let mut diag = vec![0.0; n];
            prolongator_values(
                current,
                &aggregates,
                &mut p,
                &mut diag,
                &mut size,
                &mut mark,
            )?;
            let (r, rpos) = transpose(&p);
            acc.resize(nc, 0.0);
            let ac = galerkin_product(current, &p, &r, &mut mark, &mut acc);
            let sm = Smoother::new(current);
            let a_level = next.take().unwrap_or_else(Csr::empty);
            levels.push(Level {
                a: a_level,
                aggregates,
                p,
                r,
                rpos,
                sm,
                x: vec![0.0; n],
                b: vec![0.0; n],
                res: vec![0.0; n],
                diag,
            });
            next = Some(ac);
        }
        let (coarse_a, coarse) = match next {
            Some(c) => {
                let f = Self::factor_coarse(&c, None);
                (c, f)
            }
            None => (Csr::empty(), Self::factor_coarse(a, None)),
        };
        let nc = if levels.is_empty() { a.n } else { coarse_a.n };
        Ok(Self {
            levels,
            coarse_a,
            coarse,
            coarse_x: vec![0.0; nc],
            coarse_b: vec![0.0; nc],
            fine_shape: (a.n, a.col.len()),
            mark,
        })
    }

    fn factor_coarse(a: &Csr, old: Option<Coarse>) -> Coarse {
        if a.n > 4 * COARSE_SIZE.max(1000) {
            return Coarse::Smooth(Smoother::new(a));
        }
        let sp = a.to_sprs();
        let lu = match old {
            Some(Coarse::Lu(mut lu)) if lu.same_pattern(&sp) => lu.refactor(&sp).map(|_| lu),
            _ => DirectLu::new(&sp).map(Box::new),
        };
        lu.map(Coarse::Lu)
            .unwrap_or_else(|_| Coarse::Smooth(Smoother::new(a)))
    }

    /// Levels including the coarsest.
    #[cfg(test)]
    pub(crate) fn num_levels(&self) -> usize {
        self.levels.len() + 1
    }

    /// Unknowns per level, finest first.
    #[cfg(test)]
    pub(crate) fn level_sizes(&self) -> Vec<usize> {
        let mut v: Vec<usize> = self.levels.iter().map(|l| l.x.len()).collect();
        v.push(self.coarse_x.len());
        v
    }

    /// New values on the pattern the hierarchy was built for (the caller guarantees the
    /// pattern; rows and entries are checked): the aggregates and every level's pattern are
    /// kept, and P, the Galerkin products and the coarse LU are recomputed in place.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        if self.fine_shape != (a.n, a.col.len()) {
            *self = Self::new(a)?;
            return Ok(());
        }
        let mut size = vec![0.0; self.mark.len()];
        let nl = self.levels.len();
        for k in 0..nl {
            let (fine, rest) = self.levels.split_at_mut(k + 1);
            let Level {
                a: own,
                aggregates,
                p,
                r,
                rpos,
                sm,
                diag,
                ..
            } = &mut fine[k];
            let current: &Csr = if k == 0 { a } else { own };
            let out = match rest.first_mut() {
                Some(next) => &mut next.a,
                None => &mut self.coarse_a,
            };
            prolongator_values(current, aggregates, p, diag, &mut size, &mut self.mark)?;
            restriction_values(p, r, rpos);
            sm.refresh(current);
            galerkin_values(current, p, r, out, &mut self.mark);
        }
        let old = std::mem::replace(&mut self.coarse, Coarse::Smooth(Smoother::empty()));
        self.coarse = if nl == 0 {
            Self::factor_coarse(a, Some(old))
        } else {
            Self::factor_coarse(&self.coarse_a, Some(old))
        };
        Ok(())
    }

    /// New values on the pattern the hierarchy was built for, cheaply: aggregates,
    /// prolongators, coarse Galerkin matrices and the coarse factorization stay as they are
    /// (those of the last build or refresh); only the finest level's smoother data (its
    /// inverse diagonal) is recomputed, so the cycle smooths and forms residuals with the new
    /// fine matrix. A preconditioner for matrices near the one the hierarchy was built for.
    /// Fails (changing nothing) when the rows or entries differ.
    pub(crate) fn update(&mut self, a: &Csr) -> Result<(), LinalgError> {
        if self.fine_shape != (a.n, a.col.len()) {
            return Err(LinalgError::NeedsPrepare(
                "the multigrid hierarchy was built for another pattern".into(),
            ));
        }
        match self.levels.first_mut() {
            Some(l) => l.sm.refresh(a),
            // No levels: the coarse solve is of the fine matrix itself. A factorization stays
            // (the exact inverse of a nearby matrix); a smoother follows the new values.
            None => {
                if let Coarse::Smooth(sm) = &mut self.coarse {
                    sm.refresh(a);
                }
            }
        }
        Ok(())
    }

    /// Coarsest solve; `fine` is the caller's matrix, the coarsest one when there are no
    /// levels.
    fn solve_coarse(&mut self, fine: &Csr) {
        match &mut self.coarse {
            Coarse::Lu(lu) => {
                self.coarse_x.copy_from_slice(&self.coarse_b);
                if lu.solve_in_place(&mut self.coarse_x).is_err() {
                    self.coarse_x.fill(0.0);
                }
            }
            Coarse::Smooth(sm) => {
                let a = if self.levels.is_empty() {
                    fine
                } else {
                    &self.coarse_a
                };
                self.coarse_x.fill(0.0);
                for _ in 0..2 {
                    gauss_seidel(a, sm, &self.coarse_b, &mut self.coarse_x, true);
                    gauss_seidel(a, sm, &self.coarse_b, &mut self.coarse_x, false);
                }
            }
        }
    }
}

/// x_fine += P x_coarse.
fn prolong_add(p: &Csr, xc: &[f64], x: &mut [f64]) {
    for_rows(x, p.col.len(), |i, xi| *xi += p.row_dot(i, xc));
}

/// b_coarse ← R r (each entry summed in fine-row order).
fn restrict(l: &Level, bc: &mut [f64]) {
    for_rows(bc, l.r.col.len(), |big_i, bi| {
        *bi = l.r.row_dot(big_i, &l.res)
    });
}

impl Apply for Amg {
    /// One V-cycle from a zero initial guess. `a` must be the matrix the hierarchy was built
    /// or last refreshed for: the finest level does not keep a copy of it.
    fn apply(&mut self, a: &Csr, r: &[f64], z: &mut [f64]) {
        let nl = self.levels.len();
        if nl == 0 {
            self.coarse_b.copy_from_slice(r);
            self.solve_coarse(a);
            z.copy_from_slice(&self.coarse_x);
            return;
        }
        self.levels[0].b.copy_from_slice(r);
        for k in 0..nl {
            let (fine, rest) = self.levels.split_at_mut(k + 1);
            let l = &mut fine[k];
            let la: &Csr = if k == 0 { a } else { &l.a };
            presmooth_residual(la, &l.sm, &l.b, &mut l.x, &mut l.res);
            let next_b = match rest.first_mut() {
                Some(next) => &mut next.b,
                None => &mut self.coarse_b,
            };
            restrict(l, next_b);
        }
        self.solve_coarse(a);
        for k in (0..nl).rev() {
            let (fine, rest) = self.levels.split_at_mut(k + 1);
            let l = &mut fine[k];
            let la: &Csr = if k == 0 { a } else { &l.a };
            let xc = match rest.first() {
                Some(next) => &next.x,
                None => &self.coarse_x,
            };
            prolong_add(&l.p, xc, &mut l.x);
            gauss_seidel(la, &l.sm, &l.b, &mut l.x, false);
        }
        z.copy_from_slice(&self.levels[0].x);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::testmats;

    #[test]
    fn hierarchy_coarsens_and_satisfies_the_galerkin_identity() {
        // Galerkin identity 1ᵀ(Pᵀ A P)1 = (P1)ᵀ A (P1) (common practice), positive coarse
        // diagonal, and each level at most half the size of the one above.
        let mesh = testmats::disk_mesh(0.04);
        let a = Csr::from_sprs(&testmats::diffusion(&mesh, 1e-2));
        let amg = Amg::new(&a).unwrap();
        let sizes = amg.level_sizes();
        assert!(amg.num_levels() >= 2, "{sizes:?}");
        for w in sizes.windows(2) {
            assert!(w[1] * 2 < w[0], "{sizes:?}");
        }
        let l = &amg.levels[0];
        let ones = vec![1.0; l.p.ncols];
        let mut p1 = vec![0.0; a.n];
        l.p.matvec(&ones, &mut p1);
        let mut ap1 = vec![0.0; a.n];
        a.matvec(&p1, &mut ap1);
        let want: f64 = p1.iter().zip(&ap1).map(|(x, y)| x * y).sum();
        let next = if amg.levels.len() > 1 {
            &amg.levels[1].a
        } else {
            &amg.coarse_a
        };
        let got: f64 = next.val.iter().sum();
        assert!((got - want).abs() <= 1e-10 * want.abs(), "{got} vs {want}");
        assert!(next.diagonal().iter().all(|d| *d > 0.0));
    }

    #[test]
    fn galerkin_product_in_parallel_chunks_equals_the_sequential_one() {
        // A nonsymmetric transport matrix on a mesh with more coarse rows than one chunk, so
        // several chunks (and threads, where the pool has them) form the product.
        let mesh = testmats::disk_mesh(0.012);
        let a = Csr::from_sprs(&testmats::transport(&mesh, 1e-2, 3.0));
        let (agg, nc) = aggregate(&a);
        assert!(nc > 2 * GALERKIN_CHUNK, "{nc} aggregates");
        let mut p = prolongator_pattern(&a, &agg, nc);
        let (mut diag, mut size, mut mark) = (vec![0.0; a.n], vec![0.0; nc], vec![NONE; nc]);
        prolongator_values(&a, &agg, &mut p, &mut diag, &mut size, &mut mark).unwrap();
        let (r, _) = transpose(&p);
        let mut acc = vec![0.0; nc];
        let one = galerkin_product_split(&a, &p, &r, &mut mark, &mut acc, false);
        let many = galerkin_product_split(&a, &p, &r, &mut mark, &mut acc, true);
        assert_eq!(one.ptr, many.ptr);
        assert_eq!(one.col, many.col);
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&one.val), bits(&many.val));
    }

    #[test]
    fn prolongator_values_in_parallel_chunks_equal_the_sequential_ones() {
        let mesh = testmats::disk_mesh(0.012);
        let a = Csr::from_sprs(&testmats::transport(&mesh, 1e-2, 3.0));
        assert!(a.n > 2 * PROLONG_CHUNK, "{} rows", a.n);
        let (agg, nc) = aggregate(&a);
        let mut one = prolongator_pattern(&a, &agg, nc);
        let mut many = one.clone();
        let (mut diag, mut size, mut mark) = (vec![0.0; a.n], vec![0.0; nc], vec![NONE; nc]);
        prolongator_values_split(&a, &agg, &mut one, &mut diag, &mut size, &mut mark, false)
            .unwrap();
        prolongator_values_split(&a, &agg, &mut many, &mut diag, &mut size, &mut mark, true)
            .unwrap();
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&one.val), bits(&many.val));
        assert!(one.val.iter().any(|v| *v != 0.0));
    }

    #[test]
    fn refresh_equals_a_fresh_build_when_the_strength_graph_is_unchanged() {
        // Scaling all values keeps the strength graph, so the reused aggregates are those a
        // fresh set-up would choose: both cycles must agree bit for bit.
        let mesh = testmats::disk_mesh(0.05);
        let a = testmats::diffusion(&mesh, 1e-2);
        let mut b = a.clone();
        b.data_mut().iter_mut().for_each(|v| *v *= 3.0);
        let (ca, cb) = (Csr::from_sprs(&a), Csr::from_sprs(&b));
        let mut reused = Amg::new(&ca).unwrap();
        reused.refresh(&cb).unwrap();
        let mut fresh = Amg::new(&cb).unwrap();
        let r = testmats::rhs(ca.n, 5);
        let (mut z1, mut z2) = (vec![0.0; ca.n], vec![0.0; ca.n]);
        reused.apply(&cb, &r, &mut z1);
        fresh.apply(&cb, &r, &mut z2);
        assert!(z1.iter().zip(&z2).all(|(x, y)| x.to_bits() == y.to_bits()));
    }
}
