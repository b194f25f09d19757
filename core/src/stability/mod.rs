//! Pattern prediction before simulating: the spatially homogeneous steady states of a
//! [`Problem`], the dispersion relation of small perturbations about each, and the plate's own
//! Neumann modes.
//!
//! A perturbation e^{σt} φ(x) of a homogeneous state ū, with −Δφ = k²φ and no-flux
//! boundaries, grows at the rate σ(k²) = the largest real part of the eigenvalues of
//! J − k²(D + T) (rows of quasi-steady species eliminated by their Schur complement, as they
//! carry no time derivative): J is the reaction Jacobian at ū, D the diagonal of diffusion
//! coefficients and T the chemotactic cross-diffusion, T[cells][signal] = −f(ū) χ'(c̄) for
//! each term −∇·(f(u) ∇χ(c)) (common practice of linear stability analysis). On a plate the
//! admissible k² are the Neumann eigenvalues of the plate ([`plate_modes`]).
//!
//! - [`linearise`]: `Linearisation` of a problem at a state (kernels evaluated at one point);
//! - [`dispersion`]: σ(k²), the unstable band and the fastest-growing mode;
//! - [`steady`]: homogeneous steady states by Newton from many starts, classified;
//! - [`plate_modes`]: the first Neumann eigenvalues of a mesh (shift-invert Lanczos).

pub mod dispersion;
pub mod linearise;
pub mod plate_modes;
pub mod steady;

pub use dispersion::{Band, Dispersion, Growth};
pub use linearise::{linearise, Linearisation};
pub use plate_modes::{neumann_modes, neumann_modes_near, PlateModes};
pub use steady::{find_steady_states, SteadyClass, SteadyOptions, SteadyState};

use thiserror::Error;

/// Why a stability analysis could not be made.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum StabilityError {
    /// A kernel could not be evaluated.
    #[error("evaluating the model's terms: {0}")]
    Kernel(String),
    /// A dense eigenvalue computation did not converge.
    #[error("eigenvalues of the {0}×{0} linearisation did not converge")]
    Eigen(usize),
    /// The plate's modes could not be computed.
    #[error("plate modes: {0}")]
    Modes(String),
}
