//! Method of manufactured solutions (Roache, "Code verification by the method of manufactured
//! solutions", J. Fluids Eng. 124, 2002; Salari & Knupp, "Code verification by the method of
//! manufactured solutions", Sandia report SAND2000-1444, 2000).
//!
//! The system is the diffusion–reaction–chemotaxis pair
//!
//! ```text
//! u_t = Du Δu − ∇·(χ u ∇v) + ρ u (1 − u) + f(x, y, t)
//! v_t = Dv Δv + α u − β v + g(x, y, t)
//! ```
//!
//! with no-flux boundaries and the manufactured solution u = 1 + a(t) φ(x, y),
//! v = 1 + b(t) ψ(x, y), |φ|, |ψ| ≤ 1, |a|, |b| ≤ ½, so u, v ≥ ½ > 0 and ∂φ/∂n = ∂ψ/∂n = 0 on the
//! boundary. Substituting (∇u = a∇φ, Δu = aΔφ, ∇·(u∇v) = ∇u·∇v + uΔv = ab ∇φ·∇ψ + u b Δψ):
//!
//! ```text
//! f = a'φ − Du a Δφ + χ (a b ∇φ·∇ψ + u b Δψ) − ρ u (1 − u)
//! g = b'ψ − Dv b Δψ − α u + β v
//! ```
//!
//! The sources enter through the reaction kernel (which receives x, y, t), so the solver runs
//! exactly the code path of a model.
//!
//! Plates and patterns:
//! - unit square [0, 1]²: φ = cos πx cos πy (Δφ = −2π²φ), ψ = cos πx cos 2πy (Δψ = −5π²ψ);
//! - unit disk: φ = cos(πr²) (∇φ = −2π sin(πr²)·(x, y), Δφ = −4π sin(πr²) − 4π²r² cos(πr²)),
//!   ψ = (1 − r²)² (∇ψ = −4(1 − r²)·(x, y), Δψ = 16r² − 8); both have zero r-derivative at
//!   r = 1 and are smooth at the centre (functions of r²).
//!
//! Errors are measured in the lumped (nodal) L2 norm (Σᵢ mᵢ (Uᵢ − u(xᵢ))²)^½ against the
//! exact solution at the nodes.
//!
//! Expected orders. Diffusion–reaction: P1 elements with lumped mass and nodal sources converge
//! at order 2 in L2 for smooth solutions (common practice). Chemotaxis: the edge flux is the
//! exponentially fitted (Scharfetter–Gummel) one, w·D·[B(−P)uᵢ − B(P)uⱼ] with P = χ(vⱼ − vᵢ)/D.
//! B(−P) = 1 + P/2 + O(P²) and B(P) = 1 − P/2 + O(P²), so the flux is the central one
//! w·[D(uᵢ − uⱼ) − χ(vⱼ − vᵢ)(uᵢ + uⱼ)/2] plus O(w·D·P²). As h → 0 the local Péclet number
//! P ~ χ|∇v|h/D → 0 and the difference to the central (second-order) flux is O(h²) relative,
//! so order 2 is expected for smooth data; order 1 is the guaranteed worst case (the upwind
//! limit of large P).
//!
//! Time: with the mesh fixed, three runs with steps dt, dt/2, dt/4 give the observed order by
//! the three-solution formula (ASME V&V 20-2009, eq. 2.4-1; the spatial error is the same in
//! all three and cancels): 1 for backward Euler, 2 for BDF2, k for the variable-order BDF held
//! at order k (`max_order` k with fixed steps). A fixed-step BDF-k started from one state would
//! show order 2 at most (the backward Euler start-up step leaves an O(dt²) error), and exact
//! past values would not do either (the interpolant misses the discrete solution by the
//! spatial error, an O(h²) defect that the first step turns into an O(h² dt) error, order 1).
//! So those runs start from the discrete solution at 0, step, …, (k−1)·step computed by an
//! adaptive run of the same scheme at rtol 1e-12, far below the differences measured.

use std::f64::consts::PI;

use agarium_core::kernel::SpeciesKind;
use agarium_core::problem::Problem;
use agarium_core::time::{Coupling, Scheme, StepperParams};

use crate::check::{Check, Context, Criterion, Row};
use crate::error::VerifyError;
use crate::rates::{order_from_distances, order_from_errors};
use crate::support::{self, at_nodes, l2};

const SOURCE: &str = "Roache 2002; Salari & Knupp 2000 (MMS)";
const FULL_SOURCE: &str = "P. J. Roache, Code verification by the method of manufactured \
    solutions, J. Fluids Eng. 124 (2002); K. Salari & P. Knupp, Code verification by the method \
    of manufactured solutions, Sandia report SAND2000-1444 (2000); observed order: ASME V&V \
    20-2009, section 2.4";
const ORDER_SOURCE: &str = "Roache 2002; ASME V&V 20-2009 §2.4";

/// Spatial order on the unit square.
pub const SPACE_SQUARE: Check = Check {
    name: "mms-space-square",
    about: "manufactured solution on the unit square: L2 order 2, with and without chemotaxis",
    source: FULL_SOURCE,
    run: space_square,
};

/// Spatial order on the unit disk.
pub const SPACE_DISK: Check = Check {
    name: "mms-space-disk",
    about: "manufactured solution on the unit disk: L2 order 2, with and without chemotaxis",
    source: FULL_SOURCE,
    run: space_disk,
};

/// Time order of backward Euler, BDF2 and the variable-order BDF held at order 3.
pub const TIME: Check = Check {
    name: "mms-time",
    about: "manufactured solution in time on a fixed mesh: order 1 (backward Euler), 2 (BDF2, \
        also linearly implicit), 3 (variable-order BDF held at order 3)",
    source: FULL_SOURCE,
    run: time_orders,
};

/// A smooth spatial pattern with its gradient and Laplacian.
#[derive(Clone, Copy)]
struct Pattern {
    f: fn(f64, f64) -> f64,
    grad: fn(f64, f64) -> [f64; 2],
    lap: fn(f64, f64) -> f64,
}

/// Where the manufactured solution lives.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Plate {
    /// [0, 1]².
    Square,
    /// Unit disk.
    Disk,
}

impl Plate {
    fn patterns(self) -> (Pattern, Pattern) {
        match self {
            Plate::Square => (
                Pattern {
                    f: |x, y| (PI * x).cos() * (PI * y).cos(),
                    grad: |x, y| {
                        [
                            -PI * (PI * x).sin() * (PI * y).cos(),
                            -PI * (PI * x).cos() * (PI * y).sin(),
                        ]
                    },
                    lap: |x, y| -2.0 * PI * PI * (PI * x).cos() * (PI * y).cos(),
                },
                Pattern {
                    f: |x, y| (PI * x).cos() * (2.0 * PI * y).cos(),
                    grad: |x, y| {
                        [
                            -PI * (PI * x).sin() * (2.0 * PI * y).cos(),
                            -2.0 * PI * (PI * x).cos() * (2.0 * PI * y).sin(),
                        ]
                    },
                    lap: |x, y| -5.0 * PI * PI * (PI * x).cos() * (2.0 * PI * y).cos(),
                },
            ),
            Plate::Disk => (
                Pattern {
                    f: |x, y| (PI * (x * x + y * y)).cos(),
                    grad: |x, y| {
                        let s = -2.0 * PI * (PI * (x * x + y * y)).sin();
                        [s * x, s * y]
                    },
                    lap: |x, y| {
                        let r2 = x * x + y * y;
                        -4.0 * PI * (PI * r2).sin() - 4.0 * PI * PI * r2 * (PI * r2).cos()
                    },
                },
                Pattern {
                    f: |x, y| (1.0 - x * x - y * y).powi(2),
                    grad: |x, y| {
                        let s = -4.0 * (1.0 - x * x - y * y);
                        [s * x, s * y]
                    },
                    lap: |x, y| 16.0 * (x * x + y * y) - 8.0,
                },
            ),
        }
    }

    /// The mesh at edge length `h`: a uniform triangulation of the square (so the square
    /// isolates the discretisation from mesh irregularity), the mesher's unstructured mesh of
    /// the disk.
    fn mesh(self, h: f64) -> Result<std::sync::Arc<agarium_core::mesh::Mesh>, VerifyError> {
        match self {
            Plate::Square => {
                let cells = (1.0 / h).round().max(1.0) as usize;
                support::grid(self.name(), (0.0, 0.0, 1.0, 1.0), cells, cells)
            }
            Plate::Disk => support::mesh(self.name(), support::disk(1.0), h, None),
        }
    }

    /// The h orders are measured against: the cell size of the uniform square grid, the
    /// V&V 20 size (|Ω|/N)^½ of the unstructured disk meshes.
    fn mesh_size(self, mesh: &agarium_core::mesh::Mesh, h: f64) -> f64 {
        match self {
            Plate::Square => 1.0 / (1.0 / h).round().max(1.0),
            Plate::Disk => support::mesh_size(mesh),
        }
    }

    fn name(self) -> &'static str {
        match self {
            Plate::Square => "mms-square",
            Plate::Disk => "mms-disk",
        }
    }
}

/// Amplitudes a(t), b(t) and their derivatives.
#[derive(Clone, Copy)]
struct Amplitudes {
    a: fn(f64) -> [f64; 2],
    b: fn(f64) -> [f64; 2],
}

/// Constant amplitudes: a steady manufactured solution, reached from any nearby start.
const STEADY: Amplitudes = Amplitudes {
    a: |_| [0.25, 0.0],
    b: |_| [0.25, 0.0],
};

/// Oscillating amplitudes for the time order.
const MOVING: Amplitudes = Amplitudes {
    a: |t| [0.5 * (2.0 * t).cos(), -(2.0 * t).sin()],
    b: |t| [0.4 * (2.0 * t + 1.0).sin(), 0.8 * (2.0 * t + 1.0).cos()],
};

/// Coefficients of the manufactured system.
#[derive(Clone, Copy, Debug)]
struct Coefficients {
    du: f64,
    dv: f64,
    chi: f64,
    rho: f64,
    alpha: f64,
    beta: f64,
}

fn coefficients(chi: f64) -> Coefficients {
    // Below the chemotactic threshold of check 5 (αχ·max u = 3 < (√(Du β) + √(ρ Dv))² = 4),
    // so the steady manufactured state is stable and is reached by time stepping.
    Coefficients {
        du: 1.0,
        dv: 1.0,
        chi,
        rho: 1.0,
        alpha: 1.0,
        beta: 1.0,
    }
}

/// The exact (u, v) at (x, y, t).
fn exact(p: (Pattern, Pattern), amp: Amplitudes, x: f64, y: f64, t: f64) -> [f64; 2] {
    [
        1.0 + (amp.a)(t)[0] * (p.0.f)(x, y),
        1.0 + (amp.b)(t)[0] * (p.1.f)(x, y),
    ]
}

fn problem(p: (Pattern, Pattern), amp: Amplitudes, k: Coefficients) -> Problem {
    let (phi, psi) = p;
    let reactions = support::kernel(2, 2, move |s, x, y, t, out, jac| {
        let ([a, da], [b, db]) = ((amp.a)(t), (amp.b)(t));
        let [ue, ve] = exact(p, amp, x, y, t);
        let [px, py] = (phi.grad)(x, y);
        let [qx, qy] = (psi.grad)(x, y);
        let f = da * (phi.f)(x, y) - k.du * a * (phi.lap)(x, y)
            + k.chi * (a * b * (px * qx + py * qy) + ue * b * (psi.lap)(x, y))
            - k.rho * ue * (1.0 - ue);
        let g = db * (psi.f)(x, y) - k.dv * b * (psi.lap)(x, y) - k.alpha * ue + k.beta * ve;
        out[0] = k.rho * s[0] * (1.0 - s[0]) + f;
        out[1] = k.alpha * s[0] - k.beta * s[1] + g;
        if let Some(j) = jac {
            j[0] = k.rho * (1.0 - 2.0 * s[0]);
            j[2] = k.alpha;
            j[3] = -k.beta;
        }
    });
    Problem {
        species: vec![support::mobile("u", k.du), support::mobile("v", k.dv)],
        reactions,
        initial: support::initial(vec![
            Box::new(move |x, y| exact(p, amp, x, y, 0.0)[0]),
            Box::new(move |x, y| exact(p, amp, x, y, 0.0)[1]),
        ]),
        chemotaxis: if k.chi == 0.0 {
            vec![]
        } else {
            vec![support::linear_chemotaxis(2, 0, 1, k.chi)]
        },
        diagnostics: vec![],
    }
}

/// Mesh size and L2 error of u at the discrete steady state on `plate` at edge length `h`.
///
/// Both species are declared quasi-steady, so the solver's own Newton iteration solves the
/// stationary equations (the same fluxes and reaction rows as a transient step, without the
/// time term) from the exact solution's interpolant when the simulation is set up. Stepping
/// to the steady state instead would make the result depend on its stability.
pub fn steady_error(
    ctx: &Context,
    plate: Plate,
    h: f64,
    chi: f64,
) -> Result<(f64, f64), VerifyError> {
    let (mesh, u, ue) = steady_solution(ctx, plate, h, chi)?;
    Ok((plate.mesh_size(&mesh, h), l2(&mesh, |i| u[i] - ue[i])))
}

/// The mesh, the discrete steady u and the exact u at its nodes.
pub type SteadySolution = (std::sync::Arc<agarium_core::mesh::Mesh>, Vec<f64>, Vec<f64>);

/// The discrete steady state of the manufactured problem (see [`steady_error`]).
pub fn steady_solution(
    ctx: &Context,
    plate: Plate,
    h: f64,
    chi: f64,
) -> Result<SteadySolution, VerifyError> {
    let name = plate.name();
    let mesh = plate.mesh(h)?;
    let p = plate.patterns();
    let mut problem = problem(p, STEADY, coefficients(chi));
    for s in &mut problem.species {
        s.kind = SpeciesKind::QuasiSteady {
            diffusion: s.kind.diffusion(),
        };
    }
    let sim = support::simulation(
        name,
        ctx,
        problem,
        &mesh,
        support::fixed_steps(Scheme::BackwardEuler, 1.0),
    )?;
    let u = support::species(&mesh, sim.state_slice(), 0);
    let ue = at_nodes(&mesh, |x, y| exact(p, STEADY, x, y, 0.0)[0]);
    Ok((mesh, u, ue))
}

/// One configuration of the spatial check.
struct SpaceCase {
    chi: f64,
    label: &'static str,
    /// Bound on e/h² at the finest mesh: about twice the measured asymptotic constant
    /// (noted beside each value), far below what a wrong coefficient gives (e/h² then grows
    /// like 1/h²).
    constant_bound: f64,
}

fn space(ctx: &Context, plate: Plate, cases: &[SpaceCase]) -> Result<Vec<Row>, VerifyError> {
    let hs: [f64; 3] = ctx.pick([0.1, 0.05, 0.025], [0.05, 0.025, 0.0125]);
    let mut rows = Vec::new();
    for case in cases {
        let mut pts = Vec::new();
        for &h in &hs {
            pts.push(steady_error(ctx, plate, h, case.chi)?);
        }
        let (h3, e3) = pts[2];
        for w in pts.windows(2) {
            let ((h1, e1), (h2, e2)) = (w[0], w[1]);
            // Measured 2.00–2.16 on the square grid and 2.03–2.08 on the disk (fast and
            // full meshes); ±0.3 allows for the scatter of non-nested unstructured meshes,
            // while a wrong coefficient stops the convergence (order ≈ 0) and an upwind
            // (first-order) flux gives ≈ 1.
            rows.push(Row::value(
                format!(
                    "{} u L2 order, {}, h {:.4}→{:.4}",
                    plate.name(),
                    case.label,
                    h1,
                    h2
                ),
                ORDER_SOURCE,
                Criterion::Abs {
                    expected: 2.0,
                    tol: 0.3,
                },
                order_from_errors(e1, e2, h1, h2),
            ));
        }
        rows.push(Row::value(
            format!(
                "{} u L2 error / h², {}, h {:.4}",
                plate.name(),
                case.label,
                h3
            ),
            SOURCE,
            Criterion::AtMost(case.constant_bound),
            e3 / (h3 * h3),
        ));
    }
    Ok(rows)
}

fn space_square(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    space(
        ctx,
        Plate::Square,
        &[
            SpaceCase {
                chi: 0.0,
                label: "diffusion–reaction",
                constant_bound: 0.35, // measured 0.166 at h 1/40, 0.170 at 1/80
            },
            SpaceCase {
                chi: 2.0,
                label: "with chemotaxis χ = 2",
                constant_bound: 0.4, // measured 0.182 at h 1/40, 0.187 at 1/80
            },
        ],
    )
}

fn space_disk(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    space(
        ctx,
        Plate::Disk,
        &[
            SpaceCase {
                chi: 0.0,
                label: "diffusion–reaction",
                constant_bound: 18.0, // measured 8.9 at h 0.0226, 8.8 at 0.0114
            },
            SpaceCase {
                chi: 2.0,
                label: "with chemotaxis χ = 2",
                constant_bound: 12.0, // measured 6.1 at h 0.0226, 5.9 at 0.0114
            },
        ],
    )
}

/// Observed time order of `scheme` on the square at mesh size `h` from steps dt, dt/2, dt/4.
pub fn time_order(ctx: &Context, scheme: Scheme, h: f64, dt: f64) -> Result<f64, VerifyError> {
    time_order_coupled(ctx, scheme, Coupling::Newton, h, dt)
}

/// As [`time_order`], with the species coupled as `coupling` says (the linearly implicit
/// mode solves u and v one after the other within each step).
pub fn time_order_coupled(
    ctx: &Context,
    scheme: Scheme,
    coupling: Coupling,
    h: f64,
    dt: f64,
) -> Result<f64, VerifyError> {
    let plate = Plate::Square;
    let mesh = plate.mesh(h)?;
    let p = plate.patterns();
    let t_end = 1.0;
    let mut finals = Vec::new();
    for k in 0..3 {
        let step = dt / f64::from(1u32 << k);
        let mut sim = support::simulation(
            "mms-time",
            ctx,
            problem(p, MOVING, coefficients(2.0)),
            &mesh,
            StepperParams {
                coupling,
                ..support::fixed_steps(scheme, step)
            },
        )?;
        support::reach("mms-time", &mut sim, t_end)?;
        finals.push(sim.state_slice().to_vec());
    }
    let dist = |a: &[f64], b: &[f64]| l2(&mesh, |i| a[i] - b[i]);
    Ok(order_from_distances(
        dist(&finals[0], &finals[1]),
        dist(&finals[1], &finals[2]),
        2.0,
    ))
}

/// Observed time order of the variable-order BDF held at `order` (fixed steps, exact past
/// states, see the module docs) on the square at mesh size `h` from steps dt, dt/2, dt/4.
pub fn bdf_time_order(ctx: &Context, order: usize, h: f64, dt: f64) -> Result<f64, VerifyError> {
    let plate = Plate::Square;
    let mesh = plate.mesh(h)?;
    let p = plate.patterns();
    let t_end = 1.0;
    let mut finals = Vec::new();
    for k in 0..3 {
        let step = dt / f64::from(1u32 << k);
        let params = StepperParams {
            max_order: order,
            ..support::fixed_steps(Scheme::Bdf, step)
        };
        let mut sim = support::simulation(
            "mms-time",
            ctx,
            problem(p, MOVING, coefficients(2.0)),
            &mesh,
            params,
        )?;
        let mut start = support::simulation(
            "mms-time",
            ctx,
            problem(p, MOVING, coefficients(2.0)),
            &mesh,
            StepperParams {
                scheme: Scheme::Bdf,
                ..support::adaptive(1e-12, 1e-12)
            },
        )?;
        let mut states = vec![(0.0, start.state_slice().to_vec())];
        for j in 1..order {
            let t = j as f64 * step;
            support::reach("mms-time", &mut start, t)?;
            states.push((t, start.state_slice().to_vec()));
        }
        sim.set_history(states)
            .map_err(|source| VerifyError::Solve {
                check: "mms-time".into(),
                source,
            })?;
        support::reach("mms-time", &mut sim, t_end)?;
        finals.push(sim.state_slice().to_vec());
    }
    let dist = |a: &[f64], b: &[f64]| l2(&mesh, |i| a[i] - b[i]);
    Ok(order_from_distances(
        dist(&finals[0], &finals[1]),
        dist(&finals[1], &finals[2]),
        2.0,
    ))
}

fn time_orders(ctx: &Context) -> Result<Vec<Row>, VerifyError> {
    let h = ctx.pick(0.1, 0.05);
    let dt = ctx.pick(0.05, 0.025);
    let mut rows = Vec::new();
    for (scheme, coupling, label, expected) in [
        (
            Scheme::BackwardEuler,
            Coupling::Newton,
            "backward Euler",
            1.0,
        ),
        (Scheme::Bdf2, Coupling::Newton, "BDF2", 2.0),
        // The linearly implicit mode keeps the order: each species is solved from the
        // scheme's extrapolation of the others, and what the splitting leaves is swept away
        // while it exceeds half the error target.
        (
            Scheme::Bdf2,
            Coupling::Lagged,
            "BDF2, linearly implicit",
            2.0,
        ),
    ] {
        let p = time_order_coupled(ctx, scheme, coupling, h, dt)?;
        rows.push(Row::value(
            format!(
                "mms-time order of {label}, dt {dt}→{}, square h {h}",
                dt / 4.0
            ),
            "ASME V&V 20-2009 eq. 2.4-1",
            Criterion::Abs {
                expected,
                tol: 0.15,
            },
            p,
        ));
    }
    // Half the steps of the rows above: at dt 0.05 the fast modes of the square (dt·λ up to
    // about 20) keep order 3 short of its asymptotic value (measured 2.84; 3.03 from 0.025).
    // Order 4 has no row yet: measured 3.42 from dt 0.05 and 4.50 from 0.025 (pre-asymptotic),
    // and from 0.0125 the differences reach the accuracy of the start-up states and of Newton.
    let (order, expected, dt) = (3usize, 3.0, dt / 2.0);
    let p = bdf_time_order(ctx, order, h, dt)?;
    rows.push(Row::value(
        format!(
            "mms-time order of variable-order BDF held at {order}, dt {dt}→{}, square h {h}",
            dt / 4.0
        ),
        "ASME V&V 20-2009 eq. 2.4-1",
        // Same margin as the rows above: a wrong coefficient drops the order by one or
        // more (an inconsistent one to 0).
        Criterion::Abs {
            expected,
            tol: 0.15,
        },
        p,
    ));
    Ok(rows)
}
