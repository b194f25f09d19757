//! The time scheme: BDF coefficients, the local error estimate and the step-size control of
//! one step attempt (backward Euler and BDF2 here; the variable-order BDF in `vbdf.rs`).

use super::failure::Failure;
use super::simulation::Simulation;
use super::Scheme;
use crate::fem::TimeTerm;

impl Simulation {
    /// The starting guess of the nonlinear solve at `t_new`: the polynomial through the last
    /// `order + 1` accepted states (fewer at the start), extrapolated. Its weights sum to one,
    /// so it keeps every linear invariant of the accepted states; values that extrapolate
    /// below zero from a non-negative state are clamped to zero (the first Newton update
    /// restores the invariants whatever the start, see `newton.rs`).
    pub(super) fn predictor(&self, t_new: f64, order: usize) -> Vec<f64> {
        let hlen = self.history.len();
        let points = hlen.min(order + 1);
        let newest = &self.history[hlen - 1].1;
        if points < 2 {
            return newest.clone();
        }
        let past = &self.history[hlen - points..];
        let weights: Vec<f64> = (0..points)
            .map(|a| {
                (0..points)
                    .filter(|&b| b != a)
                    .map(|b| (t_new - past[b].0) / (past[a].0 - past[b].0))
                    .product()
            })
            .collect();
        let mut u = vec![0.0; newest.len()];
        for (w, (_, state)) in weights.iter().zip(past) {
            for (ui, si) in u.iter_mut().zip(state) {
                *ui += w * si;
            }
        }
        for (ui, &last) in u.iter_mut().zip(newest) {
            if *ui < 0.0 && last >= 0.0 {
                *ui = 0.0;
            }
        }
        u
    }

    /// One step attempt of size dt from the newest state: the new state, Newton iterations
    /// and the factor for the next step; or the failure and the factor to retry with.
    pub(super) fn attempt(&mut self, dt: f64) -> Result<(Vec<f64>, usize, f64), (Failure, f64)> {
        if self.params.scheme == Scheme::Bdf {
            return self.attempt_bdf(dt);
        }
        let n = self.n;
        let sc = self.names.len();
        let t = self.time();
        let hlen = self.history.len();
        let bdf2 = self.params.scheme == Scheme::Bdf2 && hlen >= 2 && !self.force_euler;
        let un = self.history[hlen - 1].1.clone();
        let mut hist = vec![0.0; sc * n];
        let coef;
        if bdf2 {
            let (tp, up) = (&self.history[hlen - 2].0, &self.history[hlen - 2].1);
            let w = dt / (t - tp);
            coef = (1.0 + 2.0 * w) / ((1.0 + w) * dt);
            let a1 = -(1.0 + w) / dt;
            let a2 = w * w / ((1.0 + w) * dt);
            for k in 0..sc * n {
                hist[k] = a1 * un[k] + a2 * up[k];
            }
        } else {
            coef = 1.0 / dt;
            for k in 0..sc * n {
                hist[k] = -un[k] / dt;
            }
        }
        let time = TimeTerm { coef, hist: &hist };
        let mut u = self.predictor(t + dt, if bdf2 { 2 } else { 1 });
        let solved = self
            .solve_step(&mut u, t + dt, time)
            .map_err(|f| (f, 0.25))?;
        let iterations = solved.iterations;
        if u.iter().any(|v| !v.is_finite()) {
            return Err((Failure::NonFinite, 0.25));
        }
        if let Some(f) = self.negativity(&u) {
            if bdf2 {
                self.force_euler = true;
                return Err((f, 1.0));
            }
            return Err((f, 0.5));
        }
        if !self.params.adaptive {
            return Ok((u, iterations, 1.0));
        }
        // Local error from the distance to an explicit extrapolation of the accepted states
        // (Milne's device; the factor dt/(t_{n+1} − t_{n−k}) for order k is common practice).
        let order = if bdf2 { 2 } else { 1 };
        let points = hlen.min(order + 1);
        if points < 2 {
            // First step: no history to estimate from; the start-up step is small by design.
            return Ok((u, iterations, 1.0));
        }
        let ts: Vec<f64> = self.history[hlen - points..].iter().map(|h| h.0).collect();
        let t_new = t + dt;
        // Lagrange weights of the extrapolation to t_new through the last `points` states.
        let weights: Vec<f64> = (0..points)
            .map(|a| {
                (0..points)
                    .filter(|&b| b != a)
                    .map(|b| (t_new - ts[b]) / (ts[a] - ts[b]))
                    .product()
            })
            .collect();
        let scale = dt / (t_new - ts[0]);
        let mut sum = 0.0;
        let mut count = 0usize;
        for s in 0..sc {
            if self.is_steady(s) {
                continue;
            }
            for i in 0..n {
                let k = s * n + i;
                let pred: f64 = (0..points)
                    .map(|a| weights[a] * self.history[hlen - points + a].1[k])
                    .sum();
                let e = scale * (u[k] - pred);
                let w = self.params.atol + self.params.rtol * u[k].abs().max(un[k].abs());
                sum += (e / w) * (e / w);
                count += 1;
            }
        }
        // What the nonlinear solve left undone (the linearly implicit mode's splitting
        // defect) is error the controller must see as well.
        let err = if count > 0 {
            (sum / count as f64).sqrt()
        } else {
            0.0
        } + solved.defect;
        let p = f64::from(order as u8);
        let factor = if err > 0.0 {
            0.9 * err.powf(-1.0 / (p + 1.0))
        } else {
            2.0
        };
        if err > 1.0 {
            return Err((Failure::Error(err), factor.clamp(0.1, 0.9)));
        }
        Ok((u, iterations, factor.clamp(0.2, 2.0)))
    }

    pub(super) fn negativity(&self, u: &[f64]) -> Option<Failure> {
        let tol = self.params.negativity_tol;
        if tol < 0.0 {
            return None;
        }
        let n = self.n;
        for s in 0..self.names.len() {
            let v = &u[s * n..(s + 1) * n];
            let big = v.iter().fold(0.0f64, |a, x| a.max(x.abs()));
            if let Some((node, &value)) = v.iter().enumerate().find(|(_, x)| **x < -tol * big) {
                return Some(Failure::Negative {
                    species: s,
                    node,
                    value,
                });
            }
        }
        None
    }
}
