//! Finite elements on the plate mesh: P1 with lumped mass, diffusion through cotangent edge
//! weights, chemotaxis by edge-based exponential fitting, homogeneous Neumann (no-flux)
//! boundaries (natural: boundary edges simply carry no flux out of the plate).
//!
//! [`pattern`] builds the sparsity patterns once; [`assemble`] refills residuals and Jacobians
//! in place; [`bernoulli`] is the fitting function.

pub mod assemble;
pub mod bernoulli;
pub mod pattern;

pub use assemble::{Discretisation, TimeTerm, Workspace};
pub use pattern::{BlockKind, BlockLayout, NodeGraph};
