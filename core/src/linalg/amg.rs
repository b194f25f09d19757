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
//! the numeric part (smoothed P, Galerkin products, coarse LU) is redone.

use super::direct::DirectLu;
use super::ops::Csr;
use super::precond::Apply;
use super::LinalgError;
use sprs::CsMat;

/// Strength threshold θ (0.08 is the customary smoothed-aggregation value; value from memory).
const THETA: f64 = 0.08;
/// Levels with at most this many unknowns are solved directly.
const COARSE_SIZE: usize = 400;
const MAX_LEVELS: usize = 20;

struct Level {
    a: Csr,
    /// Aggregate of each node (kept for refresh).
    aggregates: Vec<usize>,
    p: Csr,
    r: Csr,
    /// Unknowns, right-hand side and residual of this level's cycle.
    x: Vec<f64>,
    b: Vec<f64>,
    res: Vec<f64>,
}

enum Coarse {
    Lu(Box<DirectLu>),
    /// The coarsest matrix could not be factored (e.g. singular): smooth instead.
    Smooth,
}

/// A multigrid hierarchy for one matrix pattern.
pub(crate) struct Amg {
    levels: Vec<Level>,
    coarse_a: Csr,
    coarse: Coarse,
    coarse_x: Vec<f64>,
    coarse_b: Vec<f64>,
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

/// Piecewise constant prolongator, columns scaled to unit length.
fn tentative(agg: &[usize], nc: usize) -> CsMat<f64> {
    let mut size = vec![0usize; nc];
    for &g in agg {
        size[g] += 1;
    }
    let n = agg.len();
    CsMat::new(
        (n, nc),
        (0..=n).collect(),
        agg.to_vec(),
        agg.iter().map(|&g| 1.0 / (size[g] as f64).sqrt()).collect(),
    )
}

/// Smoothed prolongator, restriction and coarse matrix for fine matrix `a`.
fn transfer(a: &Csr, agg: &[usize], nc: usize) -> Result<(Csr, Csr, Csr), LinalgError> {
    let d = a.diagonal();
    if let Some(index) = d.iter().position(|v| *v == 0.0) {
        return Err(LinalgError::Singular { index });
    }
    // Gershgorin bound of ρ(D⁻¹A).
    let rho = (0..a.n)
        .map(|i| a.row(i).1.iter().map(|v| v.abs()).sum::<f64>() / d[i].abs())
        .fold(0.0f64, f64::max);
    let omega = 4.0 / 3.0 / rho;
    let a_sp = a.to_sprs();
    let p0 = tentative(agg, nc);
    let ap = &a_sp * &p0;
    let mut ap = Csr::from_sprs(&ap);
    for (i, di) in d.iter().enumerate() {
        let s = omega / di;
        let r = ap.ptr[i]..ap.ptr[i + 1];
        ap.val[r].iter_mut().for_each(|v| *v *= s);
    }
    let p = &p0 - &ap.to_sprs();
    let r = p.transpose_view().to_csr();
    let ac = &r * &(&a_sp * &p);
    Ok((Csr::from_sprs(&p), Csr::from_sprs(&r), Csr::from_sprs(&ac)))
}

fn gauss_seidel(a: &Csr, b: &[f64], x: &mut [f64], forward: bool) {
    let mut sweep = |i: usize| {
        let (c, v) = a.row(i);
        let mut s = b[i];
        let mut diag = 0.0;
        for (&j, &aij) in c.iter().zip(v) {
            if j == i {
                diag = aij;
            } else {
                s -= aij * x[j];
            }
        }
        x[i] = s / diag;
    };
    if forward {
        (0..a.n).for_each(&mut sweep);
    } else {
        (0..a.n).rev().for_each(&mut sweep);
    }
}

impl Amg {
    /// Builds the hierarchy for `a`.
    pub(crate) fn new(a: &Csr) -> Result<Self, LinalgError> {
        let mut levels = Vec::new();
        let mut current = a.clone();
        while current.n > COARSE_SIZE && levels.len() + 1 < MAX_LEVELS {
            let (aggregates, nc) = aggregate(&current);
            // Too little coarsening (e.g. a mass-dominated matrix has no strong couplings):
            // stop here; smoothing alone is effective for such a level.
            if nc * 10 > current.n * 8 {
                break;
            }
            let (p, r, ac) = transfer(&current, &aggregates, nc)?;
            let n = current.n;
            levels.push(Level {
                a: current,
                aggregates,
                p,
                r,
                x: vec![0.0; n],
                b: vec![0.0; n],
                res: vec![0.0; n],
            });
            current = ac;
        }
        let coarse = Self::factor_coarse(&current, None);
        let nc = current.n;
        Ok(Self {
            levels,
            coarse_a: current,
            coarse,
            coarse_x: vec![0.0; nc],
            coarse_b: vec![0.0; nc],
        })
    }

    fn factor_coarse(a: &Csr, old: Option<Coarse>) -> Coarse {
        if a.n > 4 * COARSE_SIZE.max(1000) {
            return Coarse::Smooth;
        }
        let sp = a.to_sprs();
        let lu = match old {
            Some(Coarse::Lu(mut lu)) if lu.same_pattern(&sp) => lu.refactor(&sp).map(|_| lu),
            _ => DirectLu::new(&sp).map(Box::new),
        };
        lu.map(Coarse::Lu).unwrap_or(Coarse::Smooth)
    }

    /// Levels including the coarsest.
    #[cfg(test)]
    pub(crate) fn num_levels(&self) -> usize {
        self.levels.len() + 1
    }

    /// Unknowns per level, finest first.
    #[cfg(test)]
    pub(crate) fn level_sizes(&self) -> Vec<usize> {
        let mut v: Vec<usize> = self.levels.iter().map(|l| l.a.n).collect();
        v.push(self.coarse_a.n);
        v
    }

    /// New values on the pattern the hierarchy was built for: the aggregates are kept.
    pub(crate) fn refresh(&mut self, a: &Csr) -> Result<(), LinalgError> {
        let mut current = a.clone();
        for level in &mut self.levels {
            if current.ptr != level.a.ptr || current.col != level.a.col {
                *self = Self::new(a)?;
                return Ok(());
            }
            let nc = level.r.n;
            let (p, r, ac) = transfer(&current, &level.aggregates, nc)?;
            level.a = current;
            level.p = p;
            level.r = r;
            current = ac;
        }
        let old = std::mem::replace(&mut self.coarse, Coarse::Smooth);
        self.coarse = Self::factor_coarse(&current, Some(old));
        self.coarse_a = current;
        Ok(())
    }

    fn solve_coarse(&mut self) {
        match &mut self.coarse {
            Coarse::Lu(lu) => {
                self.coarse_x.copy_from_slice(&self.coarse_b);
                if lu.solve_in_place(&mut self.coarse_x).is_err() {
                    self.coarse_x.fill(0.0);
                }
            }
            Coarse::Smooth => {
                self.coarse_x.fill(0.0);
                for _ in 0..2 {
                    gauss_seidel(&self.coarse_a, &self.coarse_b, &mut self.coarse_x, true);
                    gauss_seidel(&self.coarse_a, &self.coarse_b, &mut self.coarse_x, false);
                }
            }
        }
    }
}

/// x_fine += P x_coarse.
fn prolong_add(p: &Csr, xc: &[f64], x: &mut [f64]) {
    for (i, xi) in x.iter_mut().enumerate() {
        *xi += p.row_dot(i, xc);
    }
}

impl Apply for Amg {
    /// One V-cycle from a zero initial guess. The finest level's matrix is the hierarchy's
    /// own copy, so `_a` is not read.
    fn apply(&mut self, _a: &Csr, r: &[f64], z: &mut [f64]) {
        let nl = self.levels.len();
        if nl == 0 {
            self.coarse_b.copy_from_slice(r);
            self.solve_coarse();
            z.copy_from_slice(&self.coarse_x);
            return;
        }
        self.levels[0].b.copy_from_slice(r);
        for k in 0..nl {
            let (fine, rest) = self.levels.split_at_mut(k + 1);
            let l = &mut fine[k];
            l.x.fill(0.0);
            gauss_seidel(&l.a, &l.b, &mut l.x, true);
            l.a.residual(&l.b, &l.x, &mut l.res);
            let next_b = match rest.first_mut() {
                Some(next) => &mut next.b,
                None => &mut self.coarse_b,
            };
            l.r.matvec(&l.res, next_b);
        }
        self.solve_coarse();
        for k in (0..nl).rev() {
            let (fine, rest) = self.levels.split_at_mut(k + 1);
            let l = &mut fine[k];
            let xc = match rest.first() {
                Some(next) => &next.x,
                None => &self.coarse_x,
            };
            prolong_add(&l.p, xc, &mut l.x);
            gauss_seidel(&l.a, &l.b, &mut l.x, false);
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
