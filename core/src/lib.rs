//! agarium-core: plate geometry, quality triangle meshes, finite-element operators, time
//! stepping, diagnostics and output for chemotaxis–growth models.
//!
//! This crate knows nothing of scripting: models reach it through the batch-kernel seam in
//! [`kernel`]. Data flows one way: a [`geometry::PlateSpec`] is discretised into boundary loops,
//! [`mesh::build_mesh`] turns them into a [`mesh::Mesh`] (constrained Delaunay with quality
//! refinement, renumbered for locality), [`mesh::QualityReport`] describes it, and
//! [`output`] writes it (VTK XML, PNG) without ever leaving a half-written file.

#![deny(missing_docs)]

pub mod fault;
pub mod fem;
pub mod geometry;
pub mod kernel;
pub mod linalg;
pub mod mesh;
pub mod observe;
pub mod output;
pub mod problem;
pub mod stability;
pub mod time;
