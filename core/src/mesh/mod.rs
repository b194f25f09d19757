//! Meshes.
