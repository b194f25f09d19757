//! Neumann eigenvalues of the Laplacian from the decay rates of single modes.
//!
//! u_t = D Δu with u₀ = 2 + φ for an eigenfunction φ (−Δφ = λφ, ∂φ/∂n = 0) decays as
//! 2 + e^{−Dλt}φ. The rate is measured from the lumped L2 projection of the solution onto φ
//! under fixed backward Euler steps, inverting the scheme's exact amplification 1/(1 + μ dt),
//! so what is compared is the semi-discrete eigenvalue μ of the P1 lumped-mass operator,
//! whose error is O(h²) (common practice for P1 elements; Strang & Fix, "An Analysis of the
//! Finite Element Method", 1973, ch. 6).
//!
//! - Unit disk: φ = Jₘ(j'ₘ,₁ r) cos mθ, λ = j'ₘ,₁², modes (m, 1) = (1, 1), (2, 1), (0, 1), with
//!   j'ₘ,₁ from Abramowitz & Stegun 1964, table 9.5 (1.8411838, 3.0542369, 3.8317060). The
//!   polygonal boundary of the mesh is O(h²) from the circle, which keeps the order at 2.
//! - Rectangle a × b: φ = cos(mπx/a) cos(nπy/b), λ = π²(m²/a² + n²/b²) (exact, separation of
//!   variables; common practice).

use std::f64::consts::PI;

use agarium_core::problem::Problem;
use agarium_core::time::Scheme;

use crate::check::{Check, Context, Criterion, Row};
use crate::error::VerifyError;
use crate::rates::order_from_errors;
use crate::reference::{bessel_j, j_prime_zero};
use crate::support::{self, at_nodes};

const DISK_SOURCE: &str = "Abramowitz & Stegun 1964, table 9.5";
const RECT_SOURCE: &str = "exact (separation of variables)";

/// Unit-disk Neumann eigenvalues.
pub const DISK: Check = Check {
    name: "eigen-disk",
    about: "unit-disk Neumann modes (1,1), (2,1), (0,1): decay rate D·j'² with error O(h²)",
    source: "M. Abramowitz & I. A. Stegun, Handbook of Mathematical Functions (1964), table 9.5 \
        (zeros of J'ₘ); O(h²) eigenvalue error of P1 elements: Strang & Fix, An Analysis of the \
        Finite Element Method (1973), ch. 6",
    run: disk,
};

/// Rectangle Neumann eigenvalues.
pub const RECTANGLE: Check = Check {
    name: "eigen-rectangle",
    about: "2×1 rectangle Neumann modes: decay rate D·π²(m²/a² + n²/b²) with error O(h²)",
    source: "exact eigenvalues π²(m²/a² + n²/b²) by separation of variables (common practice); \
        O(h²) error: Strang & Fix (1973), ch. 6",
    run: rectangle,
};

/// Diffusion coefficient of the decay runs (not 1, so a solver that dropped D would fail).
const D: f64 = 0.5;

/// Semi-discrete decay rate of the mode `phi` (exact rate `rate`) on `mesh`.
pub fn decay_rate(
    check: &str,
    ctx: &Context,
    mesh: &std::sync::Arc<agarium_core::mesh::Mesh>,
    phi: fn(f64, f64) -> f64,
    rate: f64,
) -> Result<f64, VerifyError> {
    let problem = Problem {
        species: vec![support::mobile("u", D)],
        reactions: support::kernel(1, 1, |_u, _x, _y, _t, out, _j| out[0] = 0.0),
        initial: support::initial(vec![Box::new(move |x, y| 2.0 + phi(x, y))]),
        chemotaxis: vec![],
        diagnostics: vec![],
    };
    // Steps of 0.2/rate: the next mode of the same symmetry (rate ≥ 3× this one) loses a factor
    // ≥ 1.4/1.2 per step relative to it, so after 15 steps its trace in the projection is
    // below 1e-1 of an O(h²) start; the 15 measured steps span a decay of e^{−2.6}.
    let dt = 0.2 / rate;
    let mut sim = support::simulation(
        check,
        ctx,
        problem,
        mesh,
        support::fixed_steps(Scheme::BackwardEuler, dt),
    )?;
    let pattern = at_nodes(mesh, phi);
    Ok(-support::mode_rate(
        check, &mut sim, &pattern, 0, dt, 15, 15,
    )?)
}

struct Mode {
    label: String,
    phi: fn(f64, f64) -> f64,
    lambda: f64,
    /// Bound on the relative error / h² at the finest mesh: about twice the measured constant
    /// (in the comments; the same within 10 % at the full level's meshes).
    constant_bound: f64,
}

fn rows_for(
    ctx: &Context,
    check: &str,
    source: &str,
    mesh_at: &dyn Fn(f64) -> Result<std::sync::Arc<agarium_core::mesh::Mesh>, VerifyError>,
    modes: &[Mode],
) -> Result<Vec<Row>, VerifyError> {
    let hs: [f64; 3] = ctx.pick([0.1, 0.05, 0.025], [0.05, 0.025, 0.0125]);
    let meshes = hs
        .iter()
        .map(|&h| mesh_at(h))
        .collect::<Result<Vec<_>, _>>()?;
    let mut rows = Vec::new();
    for mode in modes {
        let exact = D * mode.lambda;
        let mut pts = Vec::new();
        for mesh in &meshes {
            let got = decay_rate(check, ctx, mesh, mode.phi, exact)?;
            pts.push((support::mesh_size(mesh), got, (got - exact).abs() / exact));
        }
        let (h3, got3, _) = pts[2];
        rows.push(Row::value(
            format!("{check} {} rate D·λ, h {h3:.4}", mode.label),
            source,
            Criterion::Rel {
                expected: exact,
                tol: mode.constant_bound * h3 * h3,
            },
            got3,
        ));
        for w in pts.windows(2) {
            let ((h1, _, e1), (h2, _, e2)) = (w[0], w[1]);
            rows.push(Row::value(
                format!("{check} {} error order, h {h1:.4}→{h2:.4}", mode.label),
                "Strang & Fix 1973 ch. 6",
                Criterion::Abs {
                    expected: 2.0,
                    tol: 0.3,
                },
                order_from_errors(e1, e2, h1, h2),
            ));
        }
    }
    Ok(rows)
}

fn disk(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    fn zero(m: u32) -> f64 {
        // The three tabulated zeros are present by construction.
        j_prime_zero(m).unwrap_or(f64::NAN)
    }
    fn radial(m: u32, x: f64, y: f64) -> f64 {
        bessel_j(m, zero(m) * x.hypot(y))
    }
    let modes = [
        Mode {
            label: "(1,1)".into(),
            phi: |x, y| {
                let r = x.hypot(y);
                if r == 0.0 {
                    0.0
                } else {
                    radial(1, x, y) * x / r
                }
            },
            lambda: zero(1).powi(2),
            constant_bound: 0.35, // measured 0.16 at h 0.0226
        },
        Mode {
            label: "(2,1)".into(),
            phi: |x, y| {
                let r2 = x * x + y * y;
                if r2 == 0.0 {
                    0.0
                } else {
                    // cos 2θ = (x² − y²)/r².
                    radial(2, x, y) * (x * x - y * y) / r2
                }
            },
            lambda: zero(2).powi(2),
            constant_bound: 1.5, // measured 0.71 at h 0.0226
        },
        Mode {
            label: "(0,1)".into(),
            phi: |x, y| radial(0, x, y),
            lambda: zero(0).powi(2),
            constant_bound: 2.0, // measured 0.93 at h 0.0226
        },
    ];
    rows_for(
        ctx,
        "eigen-disk",
        DISK_SOURCE,
        &|h| support::mesh("eigen-disk", support::disk(1.0), h, None),
        &modes,
    )
}

fn rectangle(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    // a × b = 2 × 1 on [0, 2] × [0, 1].
    let modes = [
        Mode {
            label: "(1,0)".into(),
            phi: |x, _| (PI * x / 2.0).cos(),
            lambda: PI * PI / 4.0,
            constant_bound: 0.45, // measured 0.20 at h 0.0225
        },
        Mode {
            label: "(0,1)".into(),
            phi: |_, y| (PI * y).cos(),
            lambda: PI * PI,
            constant_bound: 1.6, // measured 0.79 at h 0.0225
        },
        Mode {
            label: "(1,1)".into(),
            phi: |x, y| (PI * x / 2.0).cos() * (PI * y).cos(),
            lambda: PI * PI * (0.25 + 1.0),
            constant_bound: 2.0, // measured 0.98 at h 0.0225
        },
    ];
    rows_for(
        ctx,
        "eigen-rectangle",
        RECT_SOURCE,
        &|h| {
            support::mesh(
                "eigen-rectangle",
                support::rectangle(0.0, 0.0, 2.0, 1.0),
                h,
                None,
            )
        },
        &modes,
    )
}
