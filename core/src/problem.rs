//! What the solver is asked to solve: a model's species, terms and diagnostics as batch
//! kernels, independent of where they came from (a model script or plain Rust).
//!
//! A [`Problem`] is cheap to clone (kernels are shared), so a sweep can build many runs from
//! one problem with different meshes or settings.

use std::sync::Arc;

use thiserror::Error;

use crate::kernel::{BatchKernel, SensitivityForm, SpeciesKind};

/// One species.
#[derive(Clone, Debug, PartialEq)]
pub struct SpeciesSpec {
    /// Name (field name in outputs).
    pub name: String,
    /// How it evolves, with its diffusion coefficient.
    pub kind: SpeciesKind,
}

/// One chemotaxis term: species `cells` climbs the gradient of χ(`signal`).
#[derive(Clone)]
pub struct ChemotaxisSpec {
    /// Index of the climbing species.
    pub cells: usize,
    /// Index of the signal species.
    pub signal: usize,
    /// Whether `sensitivity` is the potential χ(c) or its derivative χ'(c).
    pub form: SensitivityForm,
    /// One output over all species: χ or χ'.
    pub sensitivity: Arc<dyn BatchKernel>,
    /// One output over all species: the mobility f(u) replacing u in the flux (volume
    /// filling), or `None` for the linear mobility u.
    pub factor: Option<Arc<dyn BatchKernel>>,
}

/// A diagnostic: an integral over the plate, or a derived field written with the species.
#[derive(Clone)]
pub struct DiagnosticSpec {
    /// Name.
    pub name: String,
    /// Integral (true) or per-node field (false).
    pub integral: bool,
    /// The integral should stay constant; runs report its relative drift.
    pub conserved: bool,
    /// One output over all species: the integrand or field value.
    pub kernel: Arc<dyn BatchKernel>,
}

/// A model ready for the solver.
#[derive(Clone)]
pub struct Problem {
    /// Species in order; every kernel reads the species in this order.
    pub species: Vec<SpeciesSpec>,
    /// One output per species: its reaction term (with derivatives).
    pub reactions: Arc<dyn BatchKernel>,
    /// One output per species: its initial value as a function of x and y.
    pub initial: Arc<dyn BatchKernel>,
    /// Chemotaxis terms.
    pub chemotaxis: Vec<ChemotaxisSpec>,
    /// Diagnostics.
    pub diagnostics: Vec<DiagnosticSpec>,
}

impl std::fmt::Debug for Problem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Problem")
            .field("species", &self.species)
            .field("chemotaxis", &self.chemotaxis.len())
            .field("diagnostics", &self.diagnostics.len())
            .finish_non_exhaustive()
    }
}

/// A problem whose parts do not fit together.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum ProblemError {
    /// No species.
    #[error("the model declares no species")]
    NoSpecies,
    /// A kernel reads or writes the wrong number of values.
    #[error("{what}: kernel has {got} {side}, expected {expected}")]
    KernelShape {
        /// Which kernel.
        what: String,
        /// "inputs" or "outputs".
        side: &'static str,
        /// Expected count.
        expected: usize,
        /// Actual count.
        got: usize,
    },
    /// A chemotaxis term names a species index out of range.
    #[error("chemotaxis term {term}: species index {index} out of range")]
    SpeciesIndex {
        /// Term number.
        term: usize,
        /// Offending index.
        index: usize,
    },
    /// A chemotaxis term moves a species that does not move.
    #[error("chemotaxis term {term}: species `{species}` is immobile and cannot climb a gradient")]
    ImmobileCells {
        /// Term number.
        term: usize,
        /// Species name.
        species: String,
    },
    /// A diffusion coefficient is negative or not finite.
    #[error("species `{species}`: diffusion coefficient {value} must be finite and non-negative")]
    Diffusion {
        /// Species name.
        species: String,
        /// The value.
        value: f64,
    },
    /// A quasi-steady species needs diffusion (its equation is elliptic).
    #[error("species `{species}` is quasi-steady but has zero diffusion")]
    QuasiSteadyWithoutDiffusion {
        /// Species name.
        species: String,
    },
}

impl Problem {
    /// Number of species.
    pub fn n_species(&self) -> usize {
        self.species.len()
    }

    /// Index of the species called `name`.
    pub fn species_index(&self, name: &str) -> Option<usize> {
        self.species.iter().position(|s| s.name == name)
    }

    /// Checks that every kernel has the shape the species table implies.
    pub fn validate(&self) -> Result<(), ProblemError> {
        let s = self.n_species();
        if s == 0 {
            return Err(ProblemError::NoSpecies);
        }
        let shape = |what: &str, k: &dyn BatchKernel, outputs: usize| {
            if k.n_inputs() != s {
                return Err(ProblemError::KernelShape {
                    what: what.to_string(),
                    side: "inputs",
                    expected: s,
                    got: k.n_inputs(),
                });
            }
            if k.n_outputs() != outputs {
                return Err(ProblemError::KernelShape {
                    what: what.to_string(),
                    side: "outputs",
                    expected: outputs,
                    got: k.n_outputs(),
                });
            }
            Ok(())
        };
        shape("reactions", &*self.reactions, s)?;
        shape("initial conditions", &*self.initial, s)?;
        for sp in &self.species {
            let d = sp.kind.diffusion();
            if !d.is_finite() || d < 0.0 {
                return Err(ProblemError::Diffusion {
                    species: sp.name.clone(),
                    value: d,
                });
            }
            if matches!(sp.kind, SpeciesKind::QuasiSteady { .. }) && d == 0.0 {
                return Err(ProblemError::QuasiSteadyWithoutDiffusion {
                    species: sp.name.clone(),
                });
            }
        }
        for (t, c) in self.chemotaxis.iter().enumerate() {
            for index in [c.cells, c.signal] {
                if index >= s {
                    return Err(ProblemError::SpeciesIndex { term: t, index });
                }
            }
            if self.species[c.cells].kind == SpeciesKind::Immobile {
                return Err(ProblemError::ImmobileCells {
                    term: t,
                    species: self.species[c.cells].name.clone(),
                });
            }
            shape(
                &format!("chemotaxis term {t} sensitivity"),
                &*c.sensitivity,
                1,
            )?;
            if let Some(f) = &c.factor {
                shape(&format!("chemotaxis term {t} mobility"), &**f, 1)?;
            }
        }
        for d in &self.diagnostics {
            shape(&format!("diagnostic `{}`", d.name), &*d.kernel, 1)?;
        }
        Ok(())
    }
}
