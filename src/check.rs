//! `agarium check` (owned by the model-scripts work; replaced there).

use crate::error::CliError;

/// Arguments of `agarium check`.
#[derive(clap::Args)]
pub struct CheckArgs {
    /// The model file.
    pub model: std::path::PathBuf,
}

/// Runs `agarium check`.
pub fn run(_args: &CheckArgs) -> Result<(), CliError> {
    Err(CliError::failure("check is not built yet"))
}
