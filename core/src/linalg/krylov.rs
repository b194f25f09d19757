//! Krylov iterations: preconditioned CG (symmetric positive definite), BiCGSTAB and restarted
//! GMRES with right preconditioning (nonsymmetric).
//!
//! Hand-written: the maintained Rust sparse crates (`sprs`, faer) offer no preconditioned
//! Krylov solvers on these matrices. Every method stops on the *true* residual
//! ‖b − A x‖ ≤ rtol·‖b‖: when the recurrence claims convergence the residual is recomputed,
//! and the iteration restarts from it if the claim does not hold.

use super::ops::{axpy, dot, norm, Csr};
use super::precond::Apply;
use super::LinalgError;
use serde::{Deserialize, Serialize};

/// Which Krylov method an iterative solve uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "kebab-case")]
pub enum Krylov {
    /// CG when the matrix is numerically symmetric (checked at every prepare), else GMRES:
    /// measured against BiCGSTAB on exponentially fitted blocks (`cargo bench --bench
    /// linalg -- precond`, dt·D/h² from 0.3 to 300, 1e4 and 1e5 nodes), GMRES was as fast or
    /// faster with multigrid (1e5, dt·D/h² = 30 to 1e-8: 250 against 437 ms; at 300: 443
    /// against 533 ms; ties at 1e4) and with ILU(0) (1e5, 300: 1,700 against 1,900 ms), its
    /// fewer preconditioner applications outweighing the orthogonalisation at these counts.
    #[default]
    Auto,
    /// Conjugate gradients (symmetric positive definite systems only).
    Cg,
    /// BiCGSTAB.
    Bicgstab,
    /// Restarted GMRES, right preconditioned.
    Gmres,
}

/// Stopping rule shared by the methods.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Stop {
    pub rtol: f64,
    pub max_iterations: usize,
}

/// Iterations done and true relative residual reached.
pub(crate) type Outcome = Result<(usize, f64), LinalgError>;

/// Work vectors of the iterations, kept by the solver and reused across solves so a solve in
/// steady state allocates nothing (fresh pages cost the kernel a zeroing pass each time).
/// Every entry is written before it is read, so stale values from an earlier solve never
/// reach a result.
#[derive(Default)]
pub(crate) struct Work {
    r: Vec<f64>,
    w: Vec<f64>,
    z: Vec<f64>,
    p: Vec<f64>,
    q: Vec<f64>,
    s: Vec<f64>,
    t: Vec<f64>,
    ph: Vec<f64>,
    sh: Vec<f64>,
    r0: Vec<f64>,
    /// The initial guess, for a CG attempt that falls back to GMRES.
    pub(crate) guess: Vec<f64>,
    /// GMRES basis, grown on demand up to restart + 1 vectors (a solve converging in k
    /// iterations never holds more than k + 1).
    basis: Vec<Vec<f64>>,
    /// Hessenberg columns (restart + 1 entries each, flat), rotations, rotated rhs, y.
    h: Vec<f64>,
    cs: Vec<f64>,
    sn: Vec<f64>,
    g: Vec<f64>,
    y: Vec<f64>,
}

/// `v` resized to `n` (contents unspecified: callers write before reading).
fn sized(v: &mut Vec<f64>, n: usize) -> &mut [f64] {
    v.resize(n, 0.0);
    v
}

/// True relative residual into `r`; `bnorm` > 0.
fn true_residual(a: &Csr, b: &[f64], x: &[f64], r: &mut [f64], bnorm: f64) -> f64 {
    a.residual(b, x, r);
    norm(r) / bnorm
}

fn not_converged(iterations: usize, residual: f64) -> LinalgError {
    LinalgError::NotConverged {
        iterations,
        residual,
    }
}

/// Handles b = 0 (solution 0) and returns ‖b‖ otherwise.
fn start(b: &[f64], x: &mut [f64]) -> Option<f64> {
    let bnorm = norm(b);
    if bnorm == 0.0 {
        x.fill(0.0);
        None
    } else {
        Some(bnorm)
    }
}

fn finite(v: f64) -> Result<f64, LinalgError> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(LinalgError::NonFinite)
    }
}

/// Preconditioned conjugate gradients.
pub(crate) fn cg(
    a: &Csr,
    pc: &mut dyn Apply,
    b: &[f64],
    x: &mut [f64],
    stop: Stop,
    work: &mut Work,
) -> Outcome {
    let Some(bnorm) = start(b, x) else {
        return Ok((0, 0.0));
    };
    let n = a.n;
    let r = sized(&mut work.r, n);
    let z = sized(&mut work.z, n);
    let p = sized(&mut work.p, n);
    let q = sized(&mut work.q, n);
    let mut res = finite(true_residual(a, b, x, r, bnorm))?;
    let mut it = 0;
    'outer: while it < stop.max_iterations {
        if res <= stop.rtol {
            return Ok((it, res));
        }
        pc.apply(a, r, z);
        p.copy_from_slice(z);
        let mut rz = dot(r, z);
        while it < stop.max_iterations {
            a.matvec(p, q);
            let pq = dot(p, q);
            if pq.is_nan() || rz.is_nan() || pq <= 0.0 || rz <= 0.0 {
                // Not positive definite (or preconditioner not SPD): CG does not apply.
                res = finite(true_residual(a, b, x, r, bnorm))?;
                return Err(not_converged(it, res));
            }
            let alpha = rz / pq;
            axpy(alpha, p, x);
            axpy(-alpha, q, r);
            it += 1;
            if finite(norm(r) / bnorm)? <= stop.rtol {
                res = true_residual(a, b, x, r, bnorm);
                continue 'outer;
            }
            pc.apply(a, r, z);
            let rz_new = dot(r, z);
            let beta = rz_new / rz;
            rz = rz_new;
            for (pi, zi) in p.iter_mut().zip(z.iter()) {
                *pi = zi + beta * *pi;
            }
        }
        res = true_residual(a, b, x, r, bnorm);
    }
    if res <= stop.rtol {
        Ok((it, res))
    } else {
        Err(not_converged(it, res))
    }
}

/// Right-preconditioned BiCGSTAB (x = P⁻¹y, so the recurrence residual is the true one).
pub(crate) fn bicgstab(
    a: &Csr,
    pc: &mut dyn Apply,
    b: &[f64],
    x: &mut [f64],
    stop: Stop,
    work: &mut Work,
) -> Outcome {
    let Some(bnorm) = start(b, x) else {
        return Ok((0, 0.0));
    };
    let n = a.n;
    let r = sized(&mut work.r, n);
    let r0 = sized(&mut work.r0, n);
    let p = sized(&mut work.p, n);
    let v = sized(&mut work.w, n);
    let s = sized(&mut work.s, n);
    let t = sized(&mut work.t, n);
    let ph = sized(&mut work.ph, n);
    let sh = sized(&mut work.sh, n);
    let mut res = finite(true_residual(a, b, x, r, bnorm))?;
    let mut it = 0;
    'outer: while it < stop.max_iterations {
        if res <= stop.rtol {
            return Ok((it, res));
        }
        r0.copy_from_slice(r);
        let (mut rho, mut alpha, mut omega) = (1.0, 1.0, 1.0);
        v.fill(0.0);
        p.fill(0.0);
        while it < stop.max_iterations {
            let rho_new = dot(r0, r);
            if rho_new == 0.0 || omega == 0.0 || !rho_new.is_finite() {
                // Breakdown: restart from the true residual with a new shadow vector.
                res = finite(true_residual(a, b, x, r, bnorm))?;
                it += 1;
                continue 'outer;
            }
            let beta = (rho_new / rho) * (alpha / omega);
            rho = rho_new;
            for ((pi, ri), vi) in p.iter_mut().zip(r.iter()).zip(v.iter()) {
                *pi = ri + beta * (*pi - omega * vi);
            }
            pc.apply(a, p, ph);
            a.matvec(ph, v);
            let r0v = dot(r0, v);
            if r0v == 0.0 || !r0v.is_finite() {
                res = finite(true_residual(a, b, x, r, bnorm))?;
                it += 1;
                continue 'outer;
            }
            alpha = rho / r0v;
            for ((si, ri), vi) in s.iter_mut().zip(r.iter()).zip(v.iter()) {
                *si = ri - alpha * vi;
            }
            it += 1;
            if finite(norm(s) / bnorm)? <= stop.rtol {
                axpy(alpha, ph, x);
                res = true_residual(a, b, x, r, bnorm);
                continue 'outer;
            }
            pc.apply(a, s, sh);
            a.matvec(sh, t);
            let tt = dot(t, t);
            omega = if tt > 0.0 { dot(t, s) / tt } else { 0.0 };
            axpy(alpha, ph, x);
            axpy(omega, sh, x);
            for ((ri, si), ti) in r.iter_mut().zip(s.iter()).zip(t.iter()) {
                *ri = si - omega * ti;
            }
            if finite(norm(r) / bnorm)? <= stop.rtol {
                res = true_residual(a, b, x, r, bnorm);
                continue 'outer;
            }
        }
        res = true_residual(a, b, x, r, bnorm);
    }
    if res <= stop.rtol {
        Ok((it, res))
    } else {
        Err(not_converged(it, res))
    }
}

/// Restarted GMRES(`restart`) with right preconditioning: the minimised residual is that of
/// the original system. Modified Gram–Schmidt, Givens rotations.
pub(crate) fn gmres(
    a: &Csr,
    pc: &mut dyn Apply,
    b: &[f64],
    x: &mut [f64],
    stop: Stop,
    restart: usize,
    work: &mut Work,
) -> Outcome {
    let Some(bnorm) = start(b, x) else {
        return Ok((0, 0.0));
    };
    let n = a.n;
    let m = restart.max(1);
    let r = sized(&mut work.r, n);
    let w = sized(&mut work.w, n);
    let zt = sized(&mut work.z, n);
    let basis = &mut work.basis;
    // Hessenberg column k is h[k*(m+1)..(k+1)*(m+1)].
    let ld = m + 1;
    let h = sized(&mut work.h, m * ld);
    let cs = sized(&mut work.cs, m);
    let sn = sized(&mut work.sn, m);
    let g = sized(&mut work.g, m + 1);
    let mut res = finite(true_residual(a, b, x, r, bnorm))?;
    let mut it = 0;
    while it < stop.max_iterations && res > stop.rtol {
        let beta = res * bnorm;
        set_basis(basis, 0, r, beta);
        g.fill(0.0);
        g[0] = beta;
        let mut k = 0;
        while k < m && it < stop.max_iterations {
            pc.apply(a, &basis[k], zt);
            a.matvec(zt, w);
            let hk = &mut h[k * ld..(k + 1) * ld];
            for (j, vj) in basis[..=k].iter().enumerate() {
                hk[j] = dot(w, vj);
                axpy(-hk[j], vj, w);
            }
            let wn = norm(w);
            hk[k + 1] = wn;
            for j in 0..k {
                let (a0, a1) = (hk[j], hk[j + 1]);
                hk[j] = cs[j] * a0 + sn[j] * a1;
                hk[j + 1] = -sn[j] * a0 + cs[j] * a1;
            }
            let d = hk[k].hypot(hk[k + 1]);
            if d == 0.0 || !d.is_finite() {
                break;
            }
            cs[k] = hk[k] / d;
            sn[k] = hk[k + 1] / d;
            hk[k] = d;
            hk[k + 1] = 0.0;
            g[k + 1] = -sn[k] * g[k];
            g[k] *= cs[k];
            k += 1;
            it += 1;
            if (g[k].abs() / bnorm) <= stop.rtol || wn == 0.0 {
                break;
            }
            set_basis(basis, k, w, wn);
        }
        if k == 0 {
            return Err(not_converged(it, res));
        }
        // y = H⁻¹ g (upper triangular), x += P⁻¹ V y.
        let y = sized(&mut work.y, k);
        for i in (0..k).rev() {
            let mut s = g[i];
            for (j, yj) in y.iter().enumerate().skip(i + 1) {
                s -= h[j * ld + i] * yj;
            }
            y[i] = s / h[i * ld + i];
        }
        w.fill(0.0);
        for (vj, yj) in basis.iter().zip(y.iter()) {
            axpy(*yj, vj, w);
        }
        pc.apply(a, w, zt);
        axpy(1.0, zt, x);
        let prev = res;
        res = finite(true_residual(a, b, x, r, bnorm))?;
        if k < m && res > stop.rtol && res >= prev {
            // A lucky breakdown that did not reduce the residual: no progress is possible.
            return Err(not_converged(it, res));
        }
    }
    if res <= stop.rtol {
        Ok((it, res))
    } else {
        Err(not_converged(it, res))
    }
}

/// basis[k] ← v / scale, reusing the vector stored there by an earlier cycle or solve.
fn set_basis(basis: &mut Vec<Vec<f64>>, k: usize, v: &[f64], scale: f64) {
    if k < basis.len() {
        basis[k].resize(v.len(), 0.0);
        for (bi, vi) in basis[k].iter_mut().zip(v) {
            *bi = vi / scale;
        }
    } else {
        basis.push(v.iter().map(|x| x / scale).collect());
    }
}
