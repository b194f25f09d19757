//! Observed orders of convergence.
//!
//! Two formulas, both from ASME V&V 20-2009 ("Standard for Verification and Validation in
//! Computational Fluid Dynamics and Heat Transfer", section 2.4) and Roache, "Verification and
//! Validation in Computational Science and Engineering" (1998): with a known exact value, the
//! order between two meshes is p = ln(e₁/e₂)/ln(h₁/h₂); without one, three solutions on meshes
//! refined by a constant ratio r give p = ln|(f₃ − f₂)/(f₂ − f₁)|/ln r (f₁ the finest).

/// Observed order from the errors `e_coarse`, `e_fine` at mesh sizes `h_coarse`, `h_fine`.
pub fn order_from_errors(e_coarse: f64, e_fine: f64, h_coarse: f64, h_fine: f64) -> f64 {
    (e_coarse / e_fine).ln() / (h_coarse / h_fine).ln()
}

/// Observed order from three solutions `f1` (finest), `f2`, `f3` (coarsest) with refinement
/// ratio `r` (ASME V&V 20-2009, eq. 2.4-1 for constant r).
pub fn order_from_three(f1: f64, f2: f64, f3: f64, r: f64) -> f64 {
    ((f3 - f2) / (f2 - f1)).abs().ln() / r.ln()
}

/// The same with distances between solution vectors in place of differences of scalars:
/// `d32` = ‖f₃ − f₂‖, `d21` = ‖f₂ − f₁‖ (the convergence of the whole field).
pub fn order_from_distances(d32: f64, d21: f64, r: f64) -> f64 {
    (d32 / d21).ln() / r.ln()
}

/// The growth rate σ of a linear mode from its amplitude ratio `ratio` over `steps` backward
/// Euler steps of `dt`: each step multiplies the mode by z = 1/(1 − σ·dt) exactly (the
/// discrete-mode solution of the scheme), so σ = (1 − z⁻¹)/dt with z = ratio^(1/steps). This
/// removes the time-discretisation error from a measured rate, leaving the spatial one.
pub fn backward_euler_rate(ratio: f64, steps: usize, dt: f64) -> f64 {
    let z = ratio.powf(1.0 / steps as f64);
    (1.0 - 1.0 / z) / dt
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_power_laws_give_their_exponent() {
        // e = C h^p for p = 2 and 1.
        let e = |h: f64, p: f64| 0.7 * h.powf(p);
        assert!((order_from_errors(e(0.1, 2.0), e(0.05, 2.0), 0.1, 0.05) - 2.0).abs() < 1e-12);
        assert!((order_from_errors(e(0.3, 1.0), e(0.2, 1.0), 0.3, 0.2) - 1.0).abs() < 1e-12);
        // f(h) = f* + C h^p on h, 2h, 4h.
        let f = |h: f64| 3.0 + 0.4 * h.powi(2);
        let p = order_from_three(f(0.01), f(0.02), f(0.04), 2.0);
        assert!((p - 2.0).abs() < 1e-6, "{p}");
        let g = |h: f64| 1.0 - 5.0 * h;
        let p = order_from_three(g(0.1), g(0.3), g(0.9), 3.0);
        assert!((p - 1.0).abs() < 1e-9, "{p}");
        assert!((order_from_distances(4.0, 1.0, 2.0) - 2.0).abs() < 1e-12);
    }

    #[test]
    fn backward_euler_rate_inverts_the_amplification() {
        let (sigma, dt) = (-3.4f64, 0.03);
        let ratio = (1.0 / (1.0 - sigma * dt)).powi(20);
        assert!((backward_euler_rate(ratio, 20, dt) - sigma).abs() < 1e-12);
    }

    #[test]
    fn no_convergence_gives_order_zero() {
        assert!(order_from_errors(1e-2, 1e-2, 0.1, 0.05).abs() < 1e-12);
    }
}
