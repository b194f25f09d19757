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
    /// CG when the matrix is numerically symmetric (checked at every prepare), else GMRES.
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
pub(crate) fn cg(a: &Csr, pc: &mut dyn Apply, b: &[f64], x: &mut [f64], stop: Stop) -> Outcome {
    let Some(bnorm) = start(b, x) else {
        return Ok((0, 0.0));
    };
    let n = a.n;
    let (mut r, mut z, mut p, mut q) = (vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let mut res = finite(true_residual(a, b, x, &mut r, bnorm))?;
    let mut it = 0;
    'outer: while it < stop.max_iterations {
        if res <= stop.rtol {
            return Ok((it, res));
        }
        pc.apply(a, &r, &mut z);
        p.copy_from_slice(&z);
        let mut rz = dot(&r, &z);
        while it < stop.max_iterations {
            a.matvec(&p, &mut q);
            let pq = dot(&p, &q);
            if pq.is_nan() || rz.is_nan() || pq <= 0.0 || rz <= 0.0 {
                // Not positive definite (or preconditioner not SPD): CG does not apply.
                res = finite(true_residual(a, b, x, &mut r, bnorm))?;
                return Err(not_converged(it, res));
            }
            let alpha = rz / pq;
            axpy(alpha, &p, x);
            axpy(-alpha, &q, &mut r);
            it += 1;
            if finite(norm(&r) / bnorm)? <= stop.rtol {
                res = true_residual(a, b, x, &mut r, bnorm);
                continue 'outer;
            }
            pc.apply(a, &r, &mut z);
            let rz_new = dot(&r, &z);
            let beta = rz_new / rz;
            rz = rz_new;
            for (pi, zi) in p.iter_mut().zip(&z) {
                *pi = zi + beta * *pi;
            }
        }
        res = true_residual(a, b, x, &mut r, bnorm);
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
) -> Outcome {
    let Some(bnorm) = start(b, x) else {
        return Ok((0, 0.0));
    };
    let n = a.n;
    let mut r = vec![0.0; n];
    let (mut p, mut v, mut s, mut t) = (vec![0.0; n], vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let (mut ph, mut sh) = (vec![0.0; n], vec![0.0; n]);
    let mut res = finite(true_residual(a, b, x, &mut r, bnorm))?;
    let mut it = 0;
    'outer: while it < stop.max_iterations {
        if res <= stop.rtol {
            return Ok((it, res));
        }
        let r0 = r.clone();
        let (mut rho, mut alpha, mut omega) = (1.0, 1.0, 1.0);
        v.fill(0.0);
        p.fill(0.0);
        while it < stop.max_iterations {
            let rho_new = dot(&r0, &r);
            if rho_new == 0.0 || omega == 0.0 || !rho_new.is_finite() {
                // Breakdown: restart from the true residual with a new shadow vector.
                res = finite(true_residual(a, b, x, &mut r, bnorm))?;
                it += 1;
                continue 'outer;
            }
            let beta = (rho_new / rho) * (alpha / omega);
            rho = rho_new;
            for ((pi, ri), vi) in p.iter_mut().zip(&r).zip(&v) {
                *pi = ri + beta * (*pi - omega * vi);
            }
            pc.apply(a, &p, &mut ph);
            a.matvec(&ph, &mut v);
            let r0v = dot(&r0, &v);
            if r0v == 0.0 || !r0v.is_finite() {
                res = finite(true_residual(a, b, x, &mut r, bnorm))?;
                it += 1;
                continue 'outer;
            }
            alpha = rho / r0v;
            for ((si, ri), vi) in s.iter_mut().zip(&r).zip(&v) {
                *si = ri - alpha * vi;
            }
            it += 1;
            if finite(norm(&s) / bnorm)? <= stop.rtol {
                axpy(alpha, &ph, x);
                res = true_residual(a, b, x, &mut r, bnorm);
                continue 'outer;
            }
            pc.apply(a, &s, &mut sh);
            a.matvec(&sh, &mut t);
            let tt = dot(&t, &t);
            omega = if tt > 0.0 { dot(&t, &s) / tt } else { 0.0 };
            axpy(alpha, &ph, x);
            axpy(omega, &sh, x);
            for ((ri, si), ti) in r.iter_mut().zip(&s).zip(&t) {
                *ri = si - omega * ti;
            }
            if finite(norm(&r) / bnorm)? <= stop.rtol {
                res = true_residual(a, b, x, &mut r, bnorm);
                continue 'outer;
            }
        }
        res = true_residual(a, b, x, &mut r, bnorm);
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
) -> Outcome {
    let Some(bnorm) = start(b, x) else {
        return Ok((0, 0.0));
    };
    let n = a.n;
    let m = restart.max(1);
    let mut r = vec![0.0; n];
    let mut w = vec![0.0; n];
    let mut zt = vec![0.0; n];
    let mut basis: Vec<Vec<f64>> = Vec::with_capacity(m + 1);
    // Hessenberg columns, rotations, and the rotated right-hand side g.
    let mut h = vec![vec![0.0; m + 1]; m];
    let (mut cs, mut sn, mut g) = (vec![0.0; m], vec![0.0; m], vec![0.0; m + 1]);
    let mut res = finite(true_residual(a, b, x, &mut r, bnorm))?;
    let mut it = 0;
    while it < stop.max_iterations && res > stop.rtol {
        let beta = res * bnorm;
        basis.clear();
        basis.push(r.iter().map(|v| v / beta).collect());
        g.fill(0.0);
        g[0] = beta;
        let mut k = 0;
        while k < m && it < stop.max_iterations {
            pc.apply(a, &basis[k], &mut zt);
            a.matvec(&zt, &mut w);
            let hk = &mut h[k];
            for (j, vj) in basis.iter().enumerate() {
                hk[j] = dot(&w, vj);
                axpy(-hk[j], vj, &mut w);
            }
            let wn = norm(&w);
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
            basis.push(w.iter().map(|v| v / wn).collect());
        }
        if k == 0 {
            return Err(not_converged(it, res));
        }
        // y = H⁻¹ g (upper triangular), x += P⁻¹ V y.
        let mut y = vec![0.0; k];
        for i in (0..k).rev() {
            let mut s = g[i];
            for (j, yj) in y.iter().enumerate().skip(i + 1) {
                s -= h[j][i] * yj;
            }
            y[i] = s / h[i][i];
        }
        w.fill(0.0);
        for (vj, yj) in basis.iter().zip(&y) {
            axpy(*yj, vj, &mut w);
        }
        pc.apply(a, &w, &mut zt);
        axpy(1.0, &zt, x);
        let prev = res;
        res = finite(true_residual(a, b, x, &mut r, bnorm))?;
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
