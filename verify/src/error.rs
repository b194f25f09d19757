//! The typed error of the verification crate.

use agarium_core::mesh::MeshError;
use agarium_core::time::SolveError;
use agarium_scripting::ModelError;
use thiserror::Error;

/// Why a check could not produce its rows (as opposed to producing a failing row).
#[derive(Debug, Error)]
pub enum VerifyError {
    /// A mesh of a verification plate could not be built.
    #[error("{check}: mesh with h = {h}: {source}")]
    Mesh {
        /// Check name.
        check: String,
        /// Requested edge length.
        h: f64,
        /// The mesher's error.
        #[source]
        source: MeshError,
    },
    /// The solver stopped with an error.
    #[error("{check}: solver: {source}")]
    Solve {
        /// Check name.
        check: String,
        /// The solver's error.
        #[source]
        source: SolveError,
    },
    /// A bundled model file could not be loaded or compiled.
    #[error("{check}: model {file}: {message}")]
    Model {
        /// Check name.
        check: String,
        /// File.
        file: String,
        /// The scripting crate's message.
        message: String,
    },
    /// The reference ODE integration failed.
    #[error("{check}: reference integration: {message}")]
    Reference {
        /// Check name.
        check: String,
        /// What failed.
        message: String,
    },
    /// The solver ran but the quantity a check measures could not be formed (for example a
    /// front that never crossed the measuring level).
    #[error("{check}: {message}")]
    Measurement {
        /// Check name.
        check: String,
        /// What is missing.
        message: String,
    },
}

impl VerifyError {
    pub(crate) fn model(check: &str, file: &str, e: &ModelError) -> Self {
        VerifyError::Model {
            check: check.into(),
            file: file.into(),
            message: e.to_string(),
        }
    }

    pub(crate) fn measurement(check: &str, message: impl Into<String>) -> Self {
        VerifyError::Measurement {
            check: check.into(),
            message: message.into(),
        }
    }
}
