//! Why a simulation stops and why a step attempt is rejected (typed, so callers and the
//! step controller can tell the reasons apart).

use thiserror::Error;

use crate::kernel::KernelError;
use crate::linalg::LinalgError;
use crate::problem::ProblemError;

/// Why a simulation could not continue.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum SolveError {
    /// The problem does not fit together.
    #[error(transparent)]
    Problem(#[from] ProblemError),
    /// A kernel was handed buffers of the wrong shape (a defect, not a user error).
    #[error("kernel evaluation failed: {0}")]
    Kernel(#[from] KernelError),
    /// The initial condition is not finite somewhere.
    #[error("initial value of `{species}` is {value} at node {node} ({x}, {y})")]
    InitialValue {
        /// Species.
        species: String,
        /// Node.
        node: usize,
        /// Coordinates.
        x: f64,
        /// Coordinates.
        y: f64,
        /// Value.
        value: f64,
    },
    /// The initial condition is negative somewhere: densities start non-negative (the
    /// stepper keeps them so and would reject every step).
    #[error("initial value of `{species}` is negative, {value} at node {node} ({x}, {y}): densities must start non-negative")]
    NegativeInitial {
        /// Species.
        species: String,
        /// Node.
        node: usize,
        /// Coordinates.
        x: f64,
        /// Coordinates.
        y: f64,
        /// Value.
        value: f64,
    },
    /// The quasi-steady species could not be solved for at the start.
    #[error("could not solve for the quasi-steady species at t = {time}: {reason}")]
    QuasiSteadyStart {
        /// Time.
        time: f64,
        /// Why.
        reason: String,
    },
    /// Steps kept failing down to the minimum step size.
    #[error("step size {dt:.3e} fell below the minimum at t = {time:.6e}; last failure: {reason}")]
    StepTooSmall {
        /// Time of the last accepted state.
        time: f64,
        /// Step tried.
        dt: f64,
        /// The last rejection's reason.
        reason: String,
    },
    /// A fixed-step run could not take a step.
    #[error("fixed step dt = {dt:.3e} failed at t = {time:.6e}: {reason}")]
    FixedStepFailed {
        /// Time.
        time: f64,
        /// Step.
        dt: f64,
        /// Why.
        reason: String,
    },
    /// Invalid settings.
    #[error("invalid solver settings: {0}")]
    Settings(String),
}

/// Why one step attempt was rejected.
#[derive(Debug, Clone)]
pub(super) enum Failure {
    Newton(String),
    Linear(LinalgError),
    NonFinite,
    Negative {
        species: usize,
        node: usize,
        value: f64,
    },
    Error(f64),
}

impl Failure {
    pub(super) fn describe(&self, names: &[String]) -> String {
        match self {
            Failure::Newton(s) => format!("Newton: {s}"),
            Failure::Linear(e) => format!("linear solver: {e}"),
            Failure::NonFinite => "non-finite values".into(),
            Failure::Negative {
                species,
                node,
                value,
            } => format!(
                "`{}` negative ({value:.3e}) at node {node}",
                names[*species]
            ),
            Failure::Error(e) => format!("local error estimate {e:.3e} above tolerance"),
        }
    }
}
