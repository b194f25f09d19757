//! Shared set-up of the checks: kernels from closures, verification plates and meshes, solver
//! settings, and the measurements (lumped integrals, L2 norms, mode amplitudes) they take.

use std::sync::Arc;

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::kernel::{BatchKernel, ClosureKernel, SpeciesKind};
use agarium_core::mesh::{build_mesh, Mesh, MeshOptions, Spot};
use agarium_core::problem::{ChemotaxisSpec, SpeciesSpec};
use agarium_core::time::{Control, Outcome, Scheme, Simulation, StepperParams};

use crate::check::Context;
use crate::error::VerifyError;

/// Per-node values: (species values, x, y, t, outputs).
pub type Values = dyn Fn(&[f64], f64, f64, f64, &mut [f64]) + Send + Sync;

/// A kernel from one closure computing values and (when `jac` is given) the Jacobian
/// `jac[o * inputs + s]`, so value and derivative code cannot drift apart.
pub fn kernel(
    inputs: usize,
    outputs: usize,
    f: impl Fn(&[f64], f64, f64, f64, &mut [f64], Option<&mut [f64]>) + Send + Sync + 'static,
) -> Arc<dyn BatchKernel> {
    let f = Arc::new(f);
    let g = f.clone();
    Arc::new(ClosureKernel::new(
        inputs,
        outputs,
        move |u: &[f64], x, y, t, out: &mut [f64]| f(u, x, y, t, out, None),
        move |u: &[f64], x, y, t, out: &mut [f64], jac: &mut [f64]| {
            jac.iter_mut().for_each(|v| *v = 0.0);
            g(u, x, y, t, out, Some(jac))
        },
    ))
}

/// Initial values, one function of (x, y) per species.
pub fn initial(fs: Vec<Box<dyn Fn(f64, f64) -> f64 + Send + Sync>>) -> Arc<dyn BatchKernel> {
    let s = fs.len();
    kernel(s, s, move |_u, x, y, _t, out, _jac| {
        for (o, f) in out.iter_mut().zip(&fs) {
            *o = f(x, y);
        }
    })
}

/// The potential χ(c) = `chi`·c of species `signal` among `s`.
pub fn linear_potential(s: usize, signal: usize, chi: f64) -> Arc<dyn BatchKernel> {
    kernel(s, 1, move |u, _x, _y, _t, out, jac| {
        out[0] = chi * u[signal];
        if let Some(j) = jac {
            j[signal] = chi;
        }
    })
}

/// The Keller–Segel reactions of (u, c): none for the cells, c production u − c.
pub fn keller_segel_reactions() -> Arc<dyn BatchKernel> {
    kernel(2, 2, |s, _x, _y, _t, out, jac| {
        out[0] = 0.0;
        out[1] = s[0] - s[1];
        if let Some(j) = jac {
            j[2] = 1.0;
            j[3] = -1.0;
        }
    })
}

/// A mobile species.
pub fn mobile(name: &str, diffusion: f64) -> SpeciesSpec {
    SpeciesSpec {
        name: name.into(),
        kind: SpeciesKind::Mobile { diffusion },
    }
}

/// Species `cells` climbs the gradient of `chi`·(species `signal`), among `s` species.
pub fn linear_chemotaxis(s: usize, cells: usize, signal: usize, chi: f64) -> ChemotaxisSpec {
    ChemotaxisSpec {
        cells,
        signal,
        form: agarium_core::kernel::SensitivityForm::Potential,
        sensitivity: linear_potential(s, signal, chi),
        factor: None,
    }
}

/// A mesh of `outer` at edge length `h` (with an optional refinement spot and its grading),
/// through the mesher users run.
pub fn mesh(
    check: &str,
    outer: Shape,
    h: f64,
    spot: Option<(Spot, f64)>,
) -> Result<Arc<Mesh>, VerifyError> {
    let plate = PlateSpec {
        outer,
        holes: vec![],
        cuts: vec![],
    };
    let mut options = MeshOptions {
        size: h,
        ..MeshOptions::default()
    };
    if let Some((spot, grading)) = spot {
        options.spots.push(spot);
        options.grading = grading;
    }
    build_mesh(&plate, &options)
        .map(|b| Arc::new(b.mesh))
        .map_err(|source| VerifyError::Mesh {
            check: check.into(),
            h,
            source,
        })
}

/// A disk of radius `radius` centred at the origin.
pub fn disk(radius: f64) -> Shape {
    Shape::Circle {
        centre: [0.0, 0.0],
        radius,
    }
}

/// The rectangle [x0, x1] × [y0, y1].
pub fn rectangle(x0: f64, y0: f64, x1: f64, y1: f64) -> Shape {
    Shape::Rectangle {
        centre: [0.5 * (x0 + x1), 0.5 * (y0 + y1)],
        width: x1 - x0,
        height: y1 - y0,
    }
}

/// The V&V 20 representative mesh size h = (|Ω|/N)^½ (ASME V&V 20-2009, section 2.4), which
/// is what orders on non-nested unstructured meshes are measured against.
pub fn mesh_size(mesh: &Mesh) -> f64 {
    (mesh.area() / mesh.num_nodes() as f64).sqrt()
}

/// Fixed steps of `dt` with a Newton tolerance far below the discretisation errors measured
/// (Newton stops at updates of 1e-3 × (atol + rtol|u|) ≈ 1e-11 for u ~ 1; much tighter and
/// round-off in the fluxes keeps it from converging).
pub fn fixed_steps(scheme: Scheme, dt: f64) -> StepperParams {
    StepperParams {
        scheme,
        adaptive: false,
        dt_initial: Some(dt),
        rtol: 1e-8,
        atol: 1e-10,
        newton_tol: 1e-3,
        ..StepperParams::default()
    }
}

/// Adaptive BDF2 at relative tolerance `rtol` (absolute `atol`), Newton converged to 1e-3 of
/// the error target (tighter than the default 0.1, so iteration error stays far below what
/// the checks measure).
pub fn adaptive(rtol: f64, atol: f64) -> StepperParams {
    StepperParams {
        rtol,
        atol,
        newton_tol: 1e-3,
        ..StepperParams::default()
    }
}

/// A simulation of the problem with the context's faults applied.
pub fn simulation(
    check: &str,
    ctx: &Context,
    problem: agarium_core::problem::Problem,
    mesh: &Arc<Mesh>,
    params: StepperParams,
) -> Result<Simulation, VerifyError> {
    Simulation::new(ctx.solver_problem(problem), mesh.clone(), params, 0.0).map_err(|source| {
        VerifyError::Solve {
            check: check.into(),
            source,
        }
    })
}

/// Advances to `t`, calling `watch` with the state after every accepted step.
pub fn advance(
    check: &str,
    sim: &mut Simulation,
    t: f64,
    watch: &mut dyn FnMut(&[f64]),
) -> Result<Outcome, VerifyError> {
    sim.advance_to(t, &mut |r| {
        if let Some(u) = r.state.as_slice() {
            watch(u);
        }
        Control::Continue
    })
    .map_err(|source| VerifyError::Solve {
        check: check.into(),
        source,
    })
}

/// Advances to `t` and insists on reaching it.
pub fn reach(check: &str, sim: &mut Simulation, t: f64) -> Result<(), VerifyError> {
    match advance(check, sim, t, &mut |_| {})? {
        Outcome::Reached => Ok(()),
        other => Err(VerifyError::measurement(
            check,
            format!("stopped at t = {} before {t}: {other:?}", sim.time()),
        )),
    }
}

/// Species `s` of a species-major state.
pub fn species(mesh: &Mesh, state: &[f64], s: usize) -> Vec<f64> {
    let n = mesh.num_nodes();
    state[s * n..(s + 1) * n].to_vec()
}

/// Σᵢ mᵢ f(i) with the lumped mass: the quadrature the scheme conserves.
pub fn lumped(mesh: &Mesh, f: impl Fn(usize) -> f64) -> f64 {
    mesh.node_areas
        .iter()
        .enumerate()
        .map(|(i, m)| m * f(i))
        .sum()
}

/// Lumped L2 norm (Σᵢ mᵢ f(i)²)^½.
pub fn l2(mesh: &Mesh, f: impl Fn(usize) -> f64) -> f64 {
    lumped(mesh, |i| f(i).powi(2)).sqrt()
}

/// Amplitude of the pattern `phi` (node values) in `u` after removing the mean: the lumped
/// L2 projection ⟨u − ū, φ⟩/⟨φ, φ⟩.
pub fn amplitude(mesh: &Mesh, u: &[f64], phi: &[f64]) -> f64 {
    let mean = lumped(mesh, |i| u[i]) / lumped(mesh, |_| 1.0);
    lumped(mesh, |i| (u[i] - mean) * phi[i]) / lumped(mesh, |i| phi[i] * phi[i])
}

/// Node values of f(x, y).
pub fn at_nodes(mesh: &Mesh, f: impl Fn(f64, f64) -> f64) -> Vec<f64> {
    (0..mesh.num_nodes())
        .map(|i| {
            let p = mesh.node(i);
            f(p[0], p[1])
        })
        .collect()
}

/// Largest value.
pub fn max(v: &[f64]) -> f64 {
    v.iter().copied().fold(f64::NEG_INFINITY, f64::max)
}

/// Smallest value.
pub fn min(v: &[f64]) -> f64 {
    v.iter().copied().fold(f64::INFINITY, f64::min)
}

/// Growth rate of the pattern `phi` in species `s` of a run with fixed backward Euler steps
/// `dt`: `skip` steps let the other modes present in the start decay, then the amplitude
/// ratio over `steps` more steps is inverted exactly ([`crate::rates::backward_euler_rate`]).
pub fn mode_rate(
    check: &str,
    sim: &mut Simulation,
    phi: &[f64],
    s: usize,
    dt: f64,
    skip: usize,
    steps: usize,
) -> Result<f64, VerifyError> {
    let mesh = sim.mesh().clone();
    let t0 = sim.time() + skip as f64 * dt;
    reach(check, sim, t0)?;
    let a0 = amplitude(&mesh, &species(&mesh, sim.state_slice(), s), phi);
    reach(check, sim, t0 + steps as f64 * dt)?;
    let a1 = amplitude(&mesh, &species(&mesh, sim.state_slice(), s), phi);
    let ratio = a1 / a0;
    if !(ratio > 0.0 && ratio.is_finite()) {
        return Err(VerifyError::measurement(
            check,
            format!("mode amplitude went from {a0:.3e} to {a1:.3e}"),
        ));
    }
    Ok(crate::rates::backward_euler_rate(ratio, steps, dt))
}

/// A uniform triangulation of [x0, x1] × [y0, y1]: `nx` × `ny` cells, each cut along the
/// diagonal of alternating direction (right triangles: Delaunay, weights ≥ 0).
pub fn grid(
    check: &str,
    (x0, y0, x1, y1): (f64, f64, f64, f64),
    nx: usize,
    ny: usize,
) -> Result<Arc<Mesh>, VerifyError> {
    let id = |i: usize, j: usize| j * (nx + 1) + i;
    let mut nodes = ndarray::Array2::zeros(((nx + 1) * (ny + 1), 2));
    for j in 0..=ny {
        for i in 0..=nx {
            nodes[[id(i, j), 0]] = x0 + (x1 - x0) * i as f64 / nx as f64;
            nodes[[id(i, j), 1]] = y0 + (y1 - y0) * j as f64 / ny as f64;
        }
    }
    let mut triangles = Vec::with_capacity(2 * nx * ny);
    for j in 0..ny {
        for i in 0..nx {
            let (a, b, c, d) = (id(i, j), id(i + 1, j), id(i + 1, j + 1), id(i, j + 1));
            if (i + j) % 2 == 0 {
                triangles.push([a, b, c]);
                triangles.push([a, c, d]);
            } else {
                triangles.push([a, b, d]);
                triangles.push([b, c, d]);
            }
        }
    }
    Mesh::from_parts(nodes, triangles, &|_| 0)
        .map(Arc::new)
        .map_err(|e| VerifyError::measurement(check, format!("grid mesh: {e}")))
}
