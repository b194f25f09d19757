//! Tests of the [`super::LinearSolver`] dispatch, each method against the direct LU.
