//! The seam between scripting and core: batch kernels (owned by the model-scripts work).
