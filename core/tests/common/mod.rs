//! Problems built from plain Rust closures, for the solver tests.
#![allow(dead_code)]

use std::sync::Arc;

use agarium_core::geometry::{PlateSpec, Shape};
use agarium_core::kernel::{BatchKernel, ClosureKernel, SensitivityForm, SpeciesKind};
use agarium_core::mesh::{build_mesh, Mesh, MeshOptions};
use agarium_core::problem::{ChemotaxisSpec, DiagnosticSpec, Problem, SpeciesSpec};

pub type Values = fn(&[f64], f64, f64, f64, &mut [f64]);
pub type Jacobian = fn(&[f64], f64, f64, f64, &mut [f64], &mut [f64]);

pub fn kernel(
    inputs: usize,
    outputs: usize,
    value: impl Fn(&[f64], f64, f64, f64, &mut [f64]) + Send + Sync + 'static,
    jacobian: impl Fn(&[f64], f64, f64, f64, &mut [f64], &mut [f64]) + Send + Sync + 'static,
) -> Arc<dyn BatchKernel> {
    Arc::new(ClosureKernel::new(inputs, outputs, value, jacobian))
}

/// Initial conditions as functions of (x, y), one per species.
pub fn initial(fs: Vec<Box<dyn Fn(f64, f64) -> f64 + Send + Sync>>) -> Arc<dyn BatchKernel> {
    let s = fs.len();
    let fs = Arc::new(fs);
    let f2 = fs.clone();
    kernel(
        s,
        s,
        move |_u, x, y, _t, out| {
            for (o, f) in out.iter_mut().zip(fs.iter()) {
                *o = f(x, y);
            }
        },
        move |_u, x, y, _t, out, jac| {
            for (o, f) in out.iter_mut().zip(f2.iter()) {
                *o = f(x, y);
            }
            jac.iter_mut().for_each(|v| *v = 0.0);
        },
    )
}

pub fn no_reactions(s: usize) -> Arc<dyn BatchKernel> {
    kernel(
        s,
        s,
        |_u, _x, _y, _t, out| out.iter_mut().for_each(|v| *v = 0.0),
        |_u, _x, _y, _t, out, jac| {
            out.iter_mut().for_each(|v| *v = 0.0);
            jac.iter_mut().for_each(|v| *v = 0.0);
        },
    )
}

/// χ(c) = chi · c for species `signal` of `s`.
pub fn linear_potential(s: usize, signal: usize, chi: f64) -> Arc<dyn BatchKernel> {
    kernel(
        s,
        1,
        move |u, _x, _y, _t, out| out[0] = chi * u[signal],
        move |u, _x, _y, _t, out, jac| {
            out[0] = chi * u[signal];
            jac.iter_mut().for_each(|v| *v = 0.0);
            jac[signal] = chi;
        },
    )
}

pub fn mobile(name: &str, d: f64) -> SpeciesSpec {
    SpeciesSpec {
        name: name.into(),
        kind: SpeciesKind::Mobile { diffusion: d },
    }
}

pub fn chemotaxis(cells: usize, signal: usize, sens: Arc<dyn BatchKernel>) -> ChemotaxisSpec {
    ChemotaxisSpec {
        cells,
        signal,
        form: SensitivityForm::Potential,
        sensitivity: sens,
        factor: None,
    }
}

pub fn integral(name: &str, k: Arc<dyn BatchKernel>, conserved: bool) -> DiagnosticSpec {
    DiagnosticSpec {
        name: name.into(),
        integral: true,
        conserved,
        kernel: k,
    }
}

/// Keller–Segel: u_t = Du Δu − ∇·(u ∇(χ c)), c_t = Dc Δc + α u − β c.
pub fn keller_segel(
    du: f64,
    dc: f64,
    chi: f64,
    alpha: f64,
    beta: f64,
    u0: impl Fn(f64, f64) -> f64 + Send + Sync + 'static,
    c0: impl Fn(f64, f64) -> f64 + Send + Sync + 'static,
) -> Problem {
    Problem {
        species: vec![mobile("u", du), mobile("c", dc)],
        reactions: kernel(
            2,
            2,
            move |u, _x, _y, _t, out| {
                out[0] = 0.0;
                out[1] = alpha * u[0] - beta * u[1];
            },
            move |u, _x, _y, _t, out, jac| {
                out[0] = 0.0;
                out[1] = alpha * u[0] - beta * u[1];
                jac.copy_from_slice(&[0.0, 0.0, alpha, -beta]);
            },
        ),
        initial: initial(vec![Box::new(u0), Box::new(c0)]),
        chemotaxis: vec![chemotaxis(0, 1, linear_potential(2, 1, chi))],
        diagnostics: vec![],
    }
}

pub fn disk(radius: f64, h: f64) -> Arc<Mesh> {
    mesh(
        PlateSpec {
            outer: Shape::Circle {
                centre: [0.0, 0.0],
                radius,
            },
            holes: vec![],
            cuts: vec![],
        },
        h,
    )
}

pub fn rectangle(x0: f64, y0: f64, x1: f64, y1: f64, h: f64) -> Arc<Mesh> {
    mesh(
        PlateSpec {
            outer: Shape::Polygon {
                points: vec![[x0, y0], [x1, y0], [x1, y1], [x0, y1]],
            },
            holes: vec![],
            cuts: vec![],
        },
        h,
    )
}

pub fn mesh(plate: PlateSpec, h: f64) -> Arc<Mesh> {
    let opts = MeshOptions {
        size: h,
        ..MeshOptions::default()
    };
    Arc::new(build_mesh(&plate, &opts).expect("mesh").mesh)
}

/// ∫ species s (lumped quadrature, the quantity the scheme conserves).
pub fn integral_of(mesh: &Mesh, state: &[f64], s: usize) -> f64 {
    let n = mesh.num_nodes();
    state[s * n..(s + 1) * n]
        .iter()
        .zip(&mesh.node_areas)
        .map(|(u, m)| u * m)
        .sum()
}
