//! The `agarium` command line: thin wiring of `agarium-core` and `agarium-scripting`.

mod check;
mod error;
mod mesh;
mod plate_args;
mod progress;
mod run;
mod stability;
mod sweep;
mod verify;

use clap::{Parser, Subcommand};
use error::CliError;

/// Implicit finite-element workbench for chemotaxis–growth models on agar plates.
#[derive(Parser)]
#[command(name = "agarium", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Build a quality triangle mesh of a plate and report on it.
    Mesh(Box<mesh::MeshArgs>),
    /// Parse and compile a model file and report on its terms.
    Check(check::CheckArgs),
    /// Integrate a model in time on a plate and write the states as .vtu files.
    Run(Box<run::RunArgs>),
    /// Continue an interrupted run from its output folder.
    Resume(run::ResumeArgs),
    /// Run a model over a plan of parameter values (in parallel, or as one shard of a job
    /// array) and tabulate the outcomes; `sweep merge` combines shards.
    Sweep(Box<sweep::SweepArgs>),
    /// Predict patterns before simulating: homogeneous steady states, the dispersion
    /// relation, the plate's unstable Neumann modes and parameter thresholds.
    Stability(Box<stability::StabilityArgs>),
    /// Check the solver against manufactured solutions and published results; print a table
    /// and exit 1 if any check fails.
    Verify(verify::VerifyArgs),
}

/// Exit status when standard output is closed under us (`agarium … | head`): 128 + SIGPIPE,
/// what a program killed by the signal reports (common practice).
const EXIT_CLOSED_PIPE: i32 = 141;

/// `println!` panics when the reader of a pipe has gone; end quietly instead, as programs
/// killed by SIGPIPE do (Rust ignores the signal, so the write fails instead).
fn quiet_on_closed_pipe() {
    let default = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        let payload = info.payload();
        let message = payload
            .downcast_ref::<String>()
            .map(String::as_str)
            .or_else(|| payload.downcast_ref::<&str>().copied())
            .unwrap_or("");
        if message.contains("Broken pipe") {
            std::process::exit(EXIT_CLOSED_PIPE);
        }
        default(info);
    }));
}

fn main() {
    quiet_on_closed_pipe();
    let cli = Cli::parse();
    let result: Result<i32, CliError> = match &cli.command {
        Command::Mesh(args) => mesh::run(args).map(|()| 0),
        Command::Check(args) => check::run(args).map(|()| 0),
        Command::Run(args) => run::run(args),
        Command::Resume(args) => run::resume(args),
        Command::Sweep(args) => sweep::run(args),
        Command::Stability(args) => stability::run(args),
        Command::Verify(args) => verify::run(args),
    };
    match result {
        Ok(0) => {}
        Ok(code) => std::process::exit(code),
        Err(err) => {
            eprintln!("error: {}", err.message);
            std::process::exit(err.code);
        }
    }
}
