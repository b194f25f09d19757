//! The variable-step, variable-order BDF ([`super::Scheme::Bdf`], orders 1 to 5): coefficients
//! on the actual past times, the local error estimate of the current order and of its two
//! neighbours, and the step and order control of one attempt.
//!
//! Coefficients. Order k uses the polynomial through U_{n+1}, U_n, …, U_{n+1−k} at the
//! actual times t_{n+1}, …, t_{n+1−k} (fully variable coefficients, not a fixed-leading-
//! coefficient or Nordsieck form: the Jacobian is refreshed at every step anyway, so nothing is
//! gained by keeping the leading coefficient fixed, and variable coefficients have the better
//! stability on variable grids). The derivative at t_{n+1} is Σⱼ ℓ'ⱼ(t_{n+1}) U_{n+1−j} with the
//! Lagrange basis ℓⱼ; with τⱼ = t_{n+1} − t_{n+1−j}:
//!
//! ```text
//! ℓ'₀(t_{n+1}) = Σ_{j=1..k} 1/τⱼ                                   (TimeTerm::coef)
//! ℓ'ⱼ(t_{n+1}) = −1/τⱼ · Π_{i=1..k, i≠j} τᵢ/(τᵢ − τⱼ),  j ≥ 1      (hist = Σ ℓ'ⱼ U_{n+1−j})
//! ```
//!
//! Local error (Milne's device, derived here for variable steps; the derivation is common
//! practice). Write M = u^{(k+1)}/(k+1)! and S_k = Σ_{j=1..k} 1/τⱼ. The polynomial through the
//! exact solution misses its derivative at t_{n+1} by d = M Π_{j=1..k} τⱼ, so the corrector's
//! error is e = u(t_{n+1}) − U_{n+1} ≈ −d/S_k (neglecting J·e against S_k·e). The predictor P of
//! order k (through U_n … U_{n−k}) misses u(t_{n+1}) by M Π_{j=1..k+1} τⱼ. Hence
//! U_{n+1} − P ≈ M Π_{j=1..k} τⱼ (τ_{k+1} + 1/S_k) and
//!
//! ```text
//! e_k ≈ (U_{n+1} − P) / (1 + S_k τ_{k+1})
//! ```
//!
//! (constant steps: 1/3 for k = 1, 2/11 for k = 2, the classical constants). U_{n+1} − P is
//! exactly Π_{j=1..k+1} τⱼ times the divided difference U[t_{n+1}, …, t_{n−k}], which is how it
//! is computed (no clamping, unlike the Newton start).
//!
//! Neighbouring orders, for the order selection: the divided difference over q + 2 points
//! estimates u^{(q+1)}/(q+1)!, so the error order q would make is
//! e_q ≈ U[t_{n+1}, …, t_{n−q}] · Π_{j=1..q} τⱼ / S_q, for q = k − 1 (k + 1 points) and
//! q = k + 1 (k + 3 points: k + 2 stored states).
//!
//! Control (common practice): each order's step factor is 0.9·(b_q·err_q)^{−1/(q+1)} with a bias
//! b = 1 for the current order, 1.3 for k − 1 and 1.4 for k + 1 (recalled from memory: a
//! change must promise clearly larger steps); the order with the largest factor is taken, at
//! most one up or down, and only after k + 1 steps at the current order. A rejection by the
//! error test may lower the order by one at once when that promises a larger step; a failed
//! nonlinear solve restarts at order 1; a solution that leaves the positive cone is redone
//! with backward Euler at the same dt, which leaves the order state alone.
//!
//! Step-ratio limits (zero-stability on variable grids). Variable-coefficient BDF-k stays
//! zero-stable when every ratio ω = h_{n+1}/h_n stays below a bound that falls with k; for
//! k = 2 the bound is 1 + √2 (Grigorieff, "Stability of multistep-methods on variable grids",
//! Numer. Math. 42, 1983); for k = 3 to 5 the bounds recalled from memory are roughly 1.6,
//! 1.3 and 1.1. The limits used are below those: 2 for k ≤ 2, 1.5 for k = 3, 1.25 for k = 4,
//! 1.1 for k = 5 (`ratio_limit`). Step decreases are not limited by stability; an accepted
//! step shrinks the next by at most 5×, a rejection retries with 0.1× to 0.9×.

use super::failure::Failure;
use super::simulation::Simulation;
use super::{SolveError, BDF_MAX_ORDER};
use crate::fem::TimeTerm;

/// Largest ratio of a step to the one before it at `order` (see the module docs).
pub(super) fn ratio_limit(order: usize) -> f64 {
    match order {
        0..=2 => 2.0,
        3 => 1.5,
        4 => 1.25,
        _ => 1.1,
    }
}

/// ℓ'ⱼ(ts[0]) for the Lagrange basis through the distinct times `ts` (ts[0] the new time):
/// the BDF coefficients of order ts.len() − 1 on these times.
pub(super) fn bdf_coefficients(ts: &[f64]) -> Vec<f64> {
    let t0 = ts[0];
    let m = ts.len();
    let mut c = vec![0.0; m];
    c[0] = ts[1..].iter().map(|&t| 1.0 / (t0 - t)).sum();
    for j in 1..m {
        let mut p = 1.0 / (ts[j] - t0);
        for (i, &ti) in ts.iter().enumerate().skip(1) {
            if i != j {
                p *= (t0 - ti) / (ts[j] - ti);
            }
        }
        c[j] = p;
    }
    c
}

/// Weights of the divided difference u[ts[0], …, ts[m−1]] = Σⱼ wⱼ uⱼ,
/// wⱼ = 1/Πᵢ≠ⱼ (tⱼ − tᵢ).
pub(super) fn divided_difference_weights(ts: &[f64]) -> Vec<f64> {
    (0..ts.len())
        .map(|j| {
            1.0 / ts
                .iter()
                .enumerate()
                .filter(|&(i, _)| i != j)
                .map(|(_, &ti)| ts[j] - ti)
                .product::<f64>()
        })
        .collect()
}

/// τⱼ = ts[0] − ts[j], j = 1..=q.
fn taus(ts: &[f64], q: usize) -> impl Iterator<Item = f64> + '_ {
    ts[1..=q].iter().map(move |&t| ts[0] - t)
}

/// Milne's constant of order k: the local error is this times U[t_{n+1}, …, t_{n−k}]
/// (Π_{j=1..k+1} τⱼ / (1 + S_k τ_{k+1}), see the module docs).
pub(super) fn milne_constant(ts: &[f64], k: usize) -> f64 {
    let s: f64 = taus(ts, k).map(|t| 1.0 / t).sum();
    let tk1 = ts[0] - ts[k + 1];
    taus(ts, k + 1).product::<f64>() / (1.0 + s * tk1)
}

/// The error order q would make per unit of the divided difference over q + 2 points
/// (Π_{j=1..q} τⱼ / S_q).
pub(super) fn order_constant(ts: &[f64], q: usize) -> f64 {
    let s: f64 = taus(ts, q).map(|t| 1.0 / t).sum();
    taus(ts, q).product::<f64>() / s
}

/// The step factor the error estimate `err` of order `q` allows, with bias `bias`.
fn factor(err: f64, q: usize, bias: f64) -> f64 {
    if err > 0.0 {
        0.9 * (bias * err).powf(-1.0 / (q as f64 + 1.0))
    } else {
        f64::INFINITY
    }
}

impl Simulation {
    /// Accepted states kept: three for backward Euler and BDF2; `max_order + 1` (at least
    /// three) for the variable-order BDF, whose order-(k+1) estimate needs k + 2 stored
    /// states and whose order is at most `max_order`.
    pub(super) fn history_cap(&self) -> usize {
        if self.params.scheme == super::Scheme::Bdf {
            (self.params.max_order.clamp(1, BDF_MAX_ORDER) + 1).max(3)
        } else {
            3
        }
    }

    /// Replaces the accepted states (oldest first, times increasing; the last is the new
    /// current state), so that a multistep scheme starts at its full order from states known
    /// to be accurate: for verification. States beyond what the scheme keeps are dropped (the
    /// oldest first).
    pub fn set_history(&mut self, states: Vec<(f64, Vec<f64>)>) -> Result<(), SolveError> {
        let len = self.n * self.names.len();
        let mut t_prev = f64::NEG_INFINITY;
        if states.is_empty() {
            return Err(SolveError::Settings("no states given".into()));
        }
        for (t, u) in &states {
            if !(t.is_finite() && *t > t_prev) {
                return Err(SolveError::Settings(format!(
                    "state at t = {t} is not after the earlier ones"
                )));
            }
            if u.len() != len || u.iter().any(|v| !v.is_finite()) {
                return Err(SolveError::Settings(format!(
                    "state at t = {t} has not {len} finite values"
                )));
            }
            t_prev = *t;
        }
        let mut history = states;
        let excess = history.len().saturating_sub(self.history_cap());
        history.drain(..excess);
        self.history = history;
        Ok(())
    }

    /// One attempt of the variable-order BDF (see the module docs); the same contract as
    /// [`Simulation::attempt`]. The order state is updated here: an accepted attempt is
    /// always taken by the loop.
    pub(super) fn attempt_bdf(
        &mut self,
        dt: f64,
    ) -> Result<(Vec<f64>, usize, f64), (Failure, f64)> {
        let n = self.n;
        let sc = self.names.len();
        let t = self.time();
        let t_new = t + dt;
        let hlen = self.history.len();
        let max_order = self.params.max_order.clamp(1, BDF_MAX_ORDER);
        let k = if self.force_euler {
            1
        } else if self.params.adaptive {
            self.order.clamp(1, max_order)
        } else {
            max_order
        }
        .min(hlen);
        // Times newest first: t_{n+1}, t_n, t_{n−1}, …
        let ts: Vec<f64> = std::iter::once(t_new)
            .chain(self.history.iter().rev().map(|h| h.0))
            .collect();
        let c = bdf_coefficients(&ts[..=k]);
        let mut hist = vec![0.0; sc * n];
        for (j, &cj) in c.iter().enumerate().skip(1) {
            let state = &self.history[hlen - j].1;
            for (h, &v) in hist.iter_mut().zip(state) {
                *h += cj * v;
            }
        }
        let time = TimeTerm {
            coef: c[0],
            hist: &hist,
        };
        let mut u = self.predictor(t_new, k);
        let restart = |sim: &mut Self| {
            if sim.params.adaptive {
                sim.order = 1;
                sim.order_steps = 0;
            }
        };
        let solved = match self.solve_step(&mut u, t_new, time) {
            Ok(s) => s,
            Err(f) => {
                restart(self);
                return Err((f, 0.25));
            }
        };
        let iterations = solved.iterations;
        if u.iter().any(|v| !v.is_finite()) {
            restart(self);
            return Err((Failure::NonFinite, 0.25));
        }
        if let Some(f) = self.negativity(&u) {
            if k > 1 {
                self.force_euler = true;
                return Err((f, 1.0));
            }
            return Err((f, 0.5));
        }
        if !self.params.adaptive {
            return Ok((u, iterations, 1.0));
        }
        if hlen < k + 1 {
            // First step: no history to estimate from; the start-up step is small by design.
            self.order_steps += 1;
            return Ok((u, iterations, 1.0));
        }
        // Error estimates of orders k − 1, k (Milne) and k + 1, where the history allows.
        let forced = self.force_euler;
        let lower = (k >= 2 && !forced).then_some(k - 1);
        let higher = (!forced && k < max_order && hlen >= k + 2).then_some(k + 1);
        let weights_of = |q: usize, milne: bool| {
            let pts = &ts[..q + 2];
            let constant = if milne {
                milne_constant(pts, q)
            } else {
                order_constant(pts, q)
            };
            divided_difference_weights(pts)
                .into_iter()
                .map(|w| w * constant)
                .collect::<Vec<f64>>()
        };
        let mut estimates: Vec<(usize, Vec<f64>, f64)> = vec![(k, weights_of(k, true), 0.0)];
        if let Some(q) = lower {
            estimates.push((q, weights_of(q, false), 0.0));
        }
        if let Some(q) = higher {
            estimates.push((q, weights_of(q, false), 0.0));
        }
        let un = &self.history[hlen - 1].1;
        let mut count = 0usize;
        for s in 0..sc {
            if self.is_steady(s) {
                continue;
            }
            for i in 0..n {
                let idx = s * n + i;
                let w = self.params.atol + self.params.rtol * u[idx].abs().max(un[idx].abs());
                for (_, weights, sum) in estimates.iter_mut() {
                    let mut e = weights[0] * u[idx];
                    for (j, wj) in weights.iter().enumerate().skip(1) {
                        e += wj * self.history[hlen - j].1[idx];
                    }
                    *sum += (e / w) * (e / w);
                }
                count += 1;
            }
        }
        // What the nonlinear solve left undone (the linearly implicit mode's splitting
        // defect) is error the controller must see as well, whatever the order.
        let errs: Vec<(usize, f64)> = estimates
            .iter()
            .map(|(q, _, sum)| {
                let rms = if count > 0 {
                    (sum / count as f64).sqrt()
                } else {
                    0.0
                };
                (*q, rms + solved.defect)
            })
            .collect();
        let err = errs[0].1;
        let own = factor(err, k, 1.0);
        let lower_factor = errs
            .iter()
            .find(|e| Some(e.0) == lower)
            .map(|e| factor(e.1, e.0, 1.3));
        let higher_factor = errs
            .iter()
            .find(|e| Some(e.0) == higher)
            .map(|e| factor(e.1, e.0, 1.4));
        if err > 1.0 {
            let mut f = own;
            if let Some(fl) = lower_factor.filter(|&fl| fl > own) {
                self.order = k - 1;
                self.order_steps = 0;
                f = fl;
            }
            return Err((Failure::Error(err), f.clamp(0.1, 0.9)));
        }
        if forced {
            // A backward Euler step redone for positivity: keep the order, do not grow.
            return Ok((u, iterations, own.clamp(0.2, 1.0)));
        }
        self.order_steps += 1;
        let mut next = k;
        let mut f = own;
        if self.order_steps > k {
            if let Some(fl) = lower_factor.filter(|&fl| fl > f) {
                next = k - 1;
                f = fl;
            }
            if let Some(fh) = higher_factor.filter(|&fh| fh > f) {
                next = k + 1;
                f = fh;
            }
        }
        if next != k {
            self.order = next;
            self.order_steps = 0;
        } else {
            self.order = k;
        }
        Ok((u, iterations, f.clamp(0.2, ratio_limit(next))))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Deterministic pseudo-random numbers in [0, 1) (a 64-bit LCG, Knuth's constants).
    fn lcg(state: &mut u64) -> f64 {
        *state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (*state >> 11) as f64 / (1u64 << 53) as f64
    }

    #[test]
    fn constant_step_coefficients_are_the_classical_ones() {
        // Constant-step BDF coefficients times h, U_{n+1} first (common practice).
        let table: [&[f64]; 5] = [
            &[1.0, -1.0],
            &[1.5, -2.0, 0.5],
            &[11.0 / 6.0, -3.0, 1.5, -1.0 / 3.0],
            &[25.0 / 12.0, -4.0, 3.0, -4.0 / 3.0, 0.25],
            &[137.0 / 60.0, -5.0, 5.0, -10.0 / 3.0, 1.25, -0.2],
        ];
        let h = 0.01;
        for (k, expected) in table.iter().enumerate() {
            let ts: Vec<f64> = (0..=k + 1).map(|j| 2.0 - j as f64 * h).collect();
            let c = bdf_coefficients(&ts);
            for (a, b) in c.iter().zip(expected.iter()) {
                assert!((a * h - b).abs() < 1e-11, "order {}: {c:?}", k + 1);
            }
        }
    }

    #[test]
    fn coefficients_are_exact_on_polynomials_on_random_grids() {
        let mut seed = 7u64;
        for k in 1..=5 {
            for _ in 0..20 {
                let mut ts = vec![1.0 + lcg(&mut seed)];
                for _ in 0..k {
                    let last = ts[ts.len() - 1];
                    ts.push(last - 0.01 * (0.2 + 2.0 * lcg(&mut seed)));
                }
                let c = bdf_coefficients(&ts);
                for degree in 0..=k {
                    let p = |t: f64| (t - 0.3).powi(degree);
                    let dp = if degree == 0 {
                        0.0
                    } else {
                        degree as f64 * (ts[0] - 0.3).powi(degree - 1)
                    };
                    let got: f64 = c.iter().zip(&ts).map(|(cj, &t)| cj * p(t)).sum();
                    let scale = c.iter().map(|x| x.abs()).sum::<f64>();
                    assert!(
                        (got - dp).abs() <= 1e-12 * scale.max(1.0),
                        "order {k}, degree {degree}: {got} vs {dp}"
                    );
                }
            }
        }
    }

    #[test]
    fn milne_constants_are_the_classical_ones_for_constant_steps() {
        // e_k / (U_{n+1} − P): 1/3 for BE and 2/11 for BDF2 with constant steps (common
        // practice); in general 1/(1 + (k+1) H_k) with the harmonic number H_k.
        let h = 0.1;
        let ts: Vec<f64> = (0..8).map(|j| -(j as f64) * h).collect();
        for k in 1..=5 {
            let dd = divided_difference_weights(&ts[..k + 2]);
            // U_{n+1} − P = Π τ_j · divided difference, so the ratio is the constant over Π τ.
            let prod: f64 = (1..=k + 1).map(|j| j as f64 * h).product();
            let ratio = milne_constant(&ts, k) / prod;
            let harmonic: f64 = (1..=k).map(|j| 1.0 / j as f64).sum();
            assert!((ratio - 1.0 / (1.0 + (k + 1) as f64 * harmonic)).abs() < 1e-12);
            assert_eq!(dd.len(), k + 2);
        }
    }

    #[test]
    fn the_order_k_estimate_predicts_the_error_of_a_step() {
        // One BDF-k step of y' = y from exact past values on an uneven grid: the estimate
        // from the corrector–predictor difference matches the true error to leading order.
        let mut seed = 3u64;
        for k in 1..=4 {
            let h = 1e-2;
            let mut ts = vec![0.5];
            for _ in 0..=k {
                let last = ts[ts.len() - 1];
                ts.push(last - h * (0.5 + lcg(&mut seed)));
            }
            let c = bdf_coefficients(&ts[..=k]);
            let hist: f64 = (1..=k).map(|j| c[j] * ts[j].exp()).sum();
            let y = -hist / (c[0] - 1.0);
            let truth = ts[0].exp() - y;
            let dd = divided_difference_weights(&ts[..k + 2]);
            let diff = dd[0] * y + (1..k + 2).map(|j| dd[j] * ts[j].exp()).sum::<f64>();
            let estimate = -diff * milne_constant(&ts, k);
            assert!(
                (estimate / truth - 1.0).abs() < 0.1,
                "order {k}: estimate {estimate:e}, error {truth:e}"
            );
        }
    }

    /// Max error over [0, 1] of fixed-order BDF-k for y' = λ(y − cos t) − sin t (exact
    /// y = cos t) with exact starting values, on a grid whose steps alternate between h and
    /// 1.5 h (so the variable coefficients are exercised).
    fn scalar_error(k: usize, steps: usize) -> f64 {
        let lambda = -4.0;
        let exact = |t: f64| t.cos();
        let base = 1.0 / (1.25 * steps as f64);
        let grid = |i: i64| -> f64 {
            // t_i for i possibly negative (starting values before 0).
            let pairs = i.div_euclid(2) as f64;
            let odd = i.rem_euclid(2) as f64;
            pairs * 2.5 * base + odd * base
        };
        let mut ts: Vec<f64> = (1 - k as i64..=0).map(grid).collect();
        let mut ys: Vec<f64> = ts.iter().map(|&t| exact(t)).collect();
        let mut worst: f64 = 0.0;
        let mut i = 0i64;
        while grid(i) < 1.0 - 1e-12 {
            i += 1;
            let t_new = grid(i);
            let mut pts = vec![t_new];
            pts.extend(ts.iter().rev().take(k));
            let c = bdf_coefficients(&pts);
            let hist: f64 = (1..=k).map(|j| c[j] * ys[ys.len() - j]).sum();
            // c0 y + hist = λ (y − cos t) − sin t
            let y = (-hist - lambda * t_new.cos() - t_new.sin()) / (c[0] - lambda);
            worst = worst.max((y - exact(t_new)).abs());
            ts.push(t_new);
            ys.push(y);
        }
        worst
    }

    #[test]
    fn each_fixed_order_converges_at_its_order_on_a_scalar_ode() {
        for k in 1..=5 {
            let (e1, e2) = (scalar_error(k, 40), scalar_error(k, 80));
            let observed = (e1 / e2).log2();
            assert!(
                (observed - k as f64).abs() < 0.2,
                "order {k}: observed {observed} ({e1:e}, {e2:e})"
            );
        }
    }

    #[test]
    fn ratio_limits_fall_with_the_order() {
        assert!(ratio_limit(2) < 1.0 + 2f64.sqrt());
        for k in 1..BDF_MAX_ORDER {
            assert!(ratio_limit(k + 1) <= ratio_limit(k));
        }
    }
}
