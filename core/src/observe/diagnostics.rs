//! Integrals use the lumped quadrature Σᵢ mᵢ f(Uᵢ): the quantity the scheme conserves exactly,
//! so a conserved combination's drift measures the solver, not the quadrature.

use crate::kernel::{BatchKernel, KernelError, KernelInput, Scratch};
use crate::mesh::Mesh;
use crate::problem::Problem;

/// Integral, minimum and maximum of one species.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SpeciesStats {
    /// ∫ u.
    pub integral: f64,
    /// Smallest node value.
    pub min: f64,
    /// Largest node value.
    pub max: f64,
}

/// The value of one declared integral.
#[derive(Clone, Debug, PartialEq)]
pub struct IntegralValue {
    /// Name.
    pub name: String,
    /// Declared as conserved.
    pub conserved: bool,
    /// Value.
    pub value: f64,
}

/// Everything observed of one state.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostics {
    /// Time.
    pub time: f64,
    /// Per species, in model order.
    pub species: Vec<SpeciesStats>,
    /// Declared integrals, in model order.
    pub integrals: Vec<IntegralValue>,
    /// Declared derived fields: (name, node values).
    pub fields: Vec<(String, Vec<f64>)>,
}

impl Diagnostics {
    /// Evaluates the statistics, integrals and fields of `state` (species-major) at time `t`.
    pub fn evaluate(
        problem: &Problem,
        mesh: &Mesh,
        state: &[f64],
        t: f64,
    ) -> Result<Self, KernelError> {
        let n = mesh.num_nodes();
        let sc = problem.n_species();
        let species = (0..sc)
            .map(|s| {
                let u = &state[s * n..(s + 1) * n];
                SpeciesStats {
                    integral: u.iter().zip(&mesh.node_areas).map(|(v, m)| v * m).sum(),
                    min: u.iter().copied().fold(f64::INFINITY, f64::min),
                    max: u.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                }
            })
            .collect();
        let x = mesh.nodes.column(0).to_vec();
        let y = mesh.nodes.column(1).to_vec();
        let slices: Vec<&[f64]> = (0..sc).map(|s| &state[s * n..(s + 1) * n]).collect();
        let input = KernelInput {
            species: &slices,
            x: &x,
            y: &y,
            t,
        };
        let mut scratch = Scratch::new();
        let mut integrals = Vec::new();
        let mut fields = Vec::new();
        for d in &problem.diagnostics {
            let mut out = vec![0.0; n];
            let k: &dyn BatchKernel = &*d.kernel;
            k.eval(&input, &mut out, &mut scratch)?;
            if d.integral {
                integrals.push(IntegralValue {
                    name: d.name.clone(),
                    conserved: d.conserved,
                    value: out.iter().zip(&mesh.node_areas).map(|(v, m)| v * m).sum(),
                });
            } else {
                fields.push((d.name.clone(), out));
            }
        }
        Ok(Self {
            time: t,
            species,
            integrals,
            fields,
        })
    }

    /// Relative drift of each conserved integral from `start`: (name, |I − I₀| / max(|I₀|, tiny)).
    pub fn conserved_drift(&self, start: &Diagnostics) -> Vec<(String, f64)> {
        self.integrals
            .iter()
            .zip(&start.integrals)
            .filter(|(a, _)| a.conserved)
            .map(|(a, b)| {
                (
                    a.name.clone(),
                    (a.value - b.value).abs() / b.value.abs().max(f64::MIN_POSITIVE),
                )
            })
            .collect()
    }
}
