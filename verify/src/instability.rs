//! Chemotactic (Turing-type) instability of the uniform state.
//!
//! For u_t = Du Δu − ∇·(χ u ∇v) + r u (1 − u), v_t = Dv Δv + α u − β v the uniform state
//! (ū, v̄) = (1, α/β) linearised on the Neumann mode cos(kx) (k² an eigenvalue of −Δ) evolves
//! by the matrix [[−Du k² − r, χ k²], [α, −Dv k² − β]] (linear stability analysis, common
//! practice). Its largest eigenvalue σ = ½(tr + √(tr² − 4 det)) is positive iff det < 0 for
//! some k², and minimising det over k² gives instability iff αχ > (√(Du β) + √(r Dv))²
//! (the minimiser k² = √(rβ/(Du Dv)); common practice). With all coefficients 1, χ = 5 and
//! k² = 1: σ = √5 − 2.
//!
//! The run starts on the continuous eigenvector (v̂/û = (σ + Du k² + r)/(χ k²)) with amplitude
//! 1e-3 on [0, π]², so k² = 1 with cos x; the rate is measured under fixed backward Euler
//! steps by inverting the scheme's amplification exactly, leaving the O(h²) spatial error of
//! the discrete eigenvalue. Nonlinear terms enter at O(amplitude²) = 1e-6 relative.

use std::f64::consts::PI;

use agarium_core::problem::Problem;
use agarium_core::time::Scheme;

use crate::check::{Check, Context, Criterion, Row};
use crate::error::VerifyError;
use crate::rates::order_from_errors;
use crate::support::{self, at_nodes};

const SOURCE: &str = "linear stability (common practice)";

/// The instability check.
pub const CHECK: Check = Check {
    name: "instability",
    about: "growth rate of the mode cos x of the chemotaxis–growth system vs the linear \
        stability eigenvalue; the sign flips at αχ = (√(Du β) + √(r Dv))²",
    source: "linear stability analysis of the uniform state (common practice): largest \
        eigenvalue of [[−Du k² − r, χk²], [α, −Dv k² − β]]; threshold αχ > (√(Du β) + √(r Dv))²",
    run,
};

/// Coefficients of the system.
#[derive(Clone, Copy, Debug)]
pub struct Coefficients {
    /// Cell diffusion.
    pub du: f64,
    /// Signal diffusion.
    pub dv: f64,
    /// Chemotactic sensitivity.
    pub chi: f64,
    /// Growth rate.
    pub r: f64,
    /// Signal production.
    pub alpha: f64,
    /// Signal decay.
    pub beta: f64,
}

impl Coefficients {
    /// Largest eigenvalue of the linearisation on mode k².
    pub fn sigma(&self, k2: f64) -> f64 {
        let (a, b) = (-self.du * k2 - self.r, self.chi * k2);
        let (c, d) = (self.alpha, -self.dv * k2 - self.beta);
        let (tr, det) = (a + d, a * d - b * c);
        0.5 * (tr + (tr * tr - 4.0 * det).sqrt())
    }

    /// The instability criterion αχ > (√(Du β) + √(r Dv))².
    pub fn unstable(&self) -> bool {
        self.alpha * self.chi > ((self.du * self.beta).sqrt() + (self.r * self.dv).sqrt()).powi(2)
    }
}

/// Measured growth rate of the mode cos x on [0, π]² at edge length `h`.
pub fn growth_rate(ctx: &Context, k: Coefficients, h: f64) -> Result<f64, VerifyError> {
    let name = "instability";
    let mesh = support::mesh(name, support::rectangle(0.0, 0.0, PI, PI), h, None)?;
    let eps = 1e-3;
    let sigma = k.sigma(1.0);
    let ratio = (sigma + k.du + k.r) / k.chi;
    let vbar = k.alpha / k.beta;
    let reactions = support::kernel(2, 2, move |s, _x, _y, _t, out, jac| {
        out[0] = k.r * s[0] * (1.0 - s[0]);
        out[1] = k.alpha * s[0] - k.beta * s[1];
        if let Some(j) = jac {
            j[0] = k.r * (1.0 - 2.0 * s[0]);
            j[2] = k.alpha;
            j[3] = -k.beta;
        }
    });
    let problem = Problem {
        species: vec![support::mobile("u", k.du), support::mobile("v", k.dv)],
        reactions,
        initial: support::initial(vec![
            Box::new(move |x, _| 1.0 + eps * x.cos()),
            Box::new(move |x, _| vbar + eps * ratio * x.cos()),
        ]),
        chemotaxis: vec![support::linear_chemotaxis(2, 0, 1, k.chi)],
        diagnostics: vec![],
    };
    // dt = 0.05: the other mode of the pair (rate tr − σ ≤ −3) loses a factor ≥ 1.15 per step
    // relative to this one, so after 40 steps its trace (from the O(h²) difference between
    // the continuous and discrete eigenvectors) is below 1e-2 of that; 40 more are measured.
    let dt = 0.05;
    let mut sim = support::simulation(
        name,
        ctx,
        problem,
        &mesh,
        support::fixed_steps(Scheme::BackwardEuler, dt),
    )?;
    let pattern = at_nodes(&mesh, |x, _| x.cos());
    support::mode_rate(name, &mut sim, &pattern, 0, dt, 40, 40)
}

fn run(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    let ones = |chi| Coefficients {
        du: 1.0,
        dv: 1.0,
        chi,
        r: 1.0,
        alpha: 1.0,
        beta: 1.0,
    };
    // Finer meshes than h = 0.05 reach the measurement floor (≈ 1e-5 relative: the other
    // mode and the O(ε²) nonlinear terms), so both levels use the same three.
    let hs: [f64; 3] = [0.2, 0.1, 0.05];
    let mut rows = Vec::new();
    // The textbook case at three meshes, with the order of the rate error.
    let k = ones(5.0);
    let exact = 5f64.sqrt() - 2.0;
    let mut pts = Vec::new();
    for &h in &hs {
        let got = growth_rate(ctx, k, h)?;
        pts.push((h, got, (got - exact).abs() / exact));
    }
    let (h3, got3, _) = pts[2];
    rows.push(Row::value(
        format!("instability σ, all coefficients 1, χ = 5, k² = 1, h {h3}"),
        SOURCE,
        Criterion::Rel {
            expected: exact,
            tol: 0.1 * h3 * h3, // measured 0.038·h² at h 0.05
        },
        got3,
    ));
    for w in pts.windows(2) {
        let ((h1, _, e1), (h2, _, e2)) = (w[0], w[1]);
        rows.push(Row::value(
            format!("instability σ error order, χ = 5, h {h1}→{h2}"),
            "Strang & Fix 1973 ch. 6",
            Criterion::Abs {
                expected: 2.0,
                tol: 0.3,
            },
            order_from_errors(e1, e2, h1, h2),
        ));
    }
    // Either side of the threshold, with unequal coefficients: threshold
    // (√(0.5·1) + √(0.5·1))² = 2 = αχ at χ = 1, minimiser k² = √(rβ/(Du Dv)) = 1.
    let h = hs[1];
    let unequal = |chi| Coefficients {
        du: 0.5,
        dv: 1.0,
        chi,
        r: 0.5,
        alpha: 2.0,
        beta: 1.0,
    };
    for k in [ones(2.0), unequal(1.2), unequal(0.8)] {
        let chi = k.chi;
        let exact = k.sigma(1.0);
        let got = growth_rate(ctx, k, h)?;
        let side = if k.unstable() { "unstable" } else { "stable" };
        rows.push(Row::value(
            format!(
                "instability σ, Du {} Dv {} r {} α {} β {} χ {chi} ({side}), h {h}",
                k.du, k.dv, k.r, k.alpha, k.beta
            ),
            SOURCE,
            Criterion::Rel {
                expected: exact,
                tol: 0.1 * h * h, // measured 0.031–0.033·h² at h 0.1
            },
            got,
        ));
        rows.push(Row::event(
            format!("instability sign at χ {chi}: grows iff αχ > (√(Du β) + √(r Dv))²"),
            SOURCE,
            if k.unstable() { "grows" } else { "decays" },
            if got > 0.0 { "grows" } else { "decays" },
            (got > 0.0) == k.unstable(),
        ));
    }
    Ok(rows)
}
