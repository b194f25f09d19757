//! The linearisation of a problem at a spatially homogeneous state.

use crate::kernel::{BatchKernel, KernelInput, Scratch, SensitivityForm, SpeciesKind};
use crate::problem::Problem;

use super::StabilityError;

/// Everything the dispersion relation needs at one homogeneous state (s species).
#[derive(Clone, Debug, PartialEq)]
pub struct Linearisation {
    /// Species count.
    pub n: usize,
    /// Reaction values at the state (zero at a steady state).
    pub reaction: Vec<f64>,
    /// Reaction Jacobian, row-major: `jac[r * n + s]` = ∂f_r/∂u_s.
    pub jac: Vec<f64>,
    /// Diffusion coefficient per species (0 for immobile species).
    pub diffusion: Vec<f64>,
    /// Chemotactic cross-diffusion, row-major: `cross[cells * n + signal]` = −f(ū) χ'(c̄).
    pub cross: Vec<f64>,
    /// Species with a time derivative (false for quasi-steady species).
    pub dynamic: Vec<bool>,
}

/// Evaluates `kernel` (one output) with its Jacobian at the single state `u`.
fn at_point(
    kernel: &dyn BatchKernel,
    u: &[f64],
    point: [f64; 2],
    out: &mut [f64],
    jac: &mut [f64],
) -> Result<(), StabilityError> {
    let slices: Vec<[f64; 1]> = u.iter().map(|&v| [v]).collect();
    let species: Vec<&[f64]> = slices.iter().map(|s| &s[..]).collect();
    let input = KernelInput {
        species: &species,
        x: &[point[0]],
        y: &[point[1]],
        t: 0.0,
    };
    let mut scratch = Scratch::new();
    kernel
        .eval_with_jacobian(&input, out, jac, &mut scratch)
        .map_err(|e| StabilityError::Kernel(e.to_string()))
}

/// The linearisation of `problem` at the homogeneous state `u` (one value per species),
/// evaluated at `point` (only terms that depend on x and y care).
pub fn linearise(
    problem: &Problem,
    u: &[f64],
    point: [f64; 2],
) -> Result<Linearisation, StabilityError> {
    let n = problem.species.len();
    let mut reaction = vec![0.0; n];
    let mut jac = vec![0.0; n * n];
    at_point(
        problem.reactions.as_ref(),
        u,
        point,
        &mut reaction,
        &mut jac,
    )?;
    // The kernel's Jacobian layout is output-major then species: (o * n + s) per node.
    let diffusion = problem
        .species
        .iter()
        .map(|s| match s.kind {
            SpeciesKind::Mobile { diffusion } | SpeciesKind::QuasiSteady { diffusion } => diffusion,
            SpeciesKind::Immobile => 0.0,
        })
        .collect();
    let dynamic = problem
        .species
        .iter()
        .map(|s| !matches!(s.kind, SpeciesKind::QuasiSteady { .. }))
        .collect();
    let mut cross = vec![0.0; n * n];
    for term in &problem.chemotaxis {
        let mut v = [0.0];
        let mut d = vec![0.0; n];
        at_point(term.sensitivity.as_ref(), u, point, &mut v, &mut d)?;
        let slope = match term.form {
            SensitivityForm::Potential => d[term.signal],
            SensitivityForm::Derivative => v[0],
        };
        let mobility = match &term.factor {
            Some(f) => {
                let mut fv = [0.0];
                let mut fd = vec![0.0; n];
                at_point(f.as_ref(), u, point, &mut fv, &mut fd)?;
                fv[0]
            }
            None => u[term.cells],
        };
        cross[term.cells * n + term.signal] -= mobility * slope;
    }
    Ok(Linearisation {
        n,
        reaction,
        jac,
        diffusion,
        cross,
        dynamic,
    })
}
