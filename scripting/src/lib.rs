//! agarium-scripting: model files written in Rhai, compiled to fast batch kernels with exact
//! derivatives.
//!
//! A model file is a Rhai script. Its top-level code runs once, in a sandbox (no file or network
//! access, bounded operations, call depth and sizes), and declares the model by calling
//! `param`, `species`, `chemotaxis`, `integral` and `field`. Terms (reactions, sensitivities,
//! density factors, initial conditions, diagnostics) are given as numbers, as expression
//! strings over species, parameters, `x`, `y`, `t`, or as functions of the file whose parameter
//! names say which of those they read:
//!
//! ```rhai
//! param("r", 1.0, #{ unit: "1/h", about: "growth rate", min: 0.0 });
//! param("D", 0.1, #{ unit: "mm^2/h", min: 0.0 });
//! fn growth(u, r) { r * u * (1.0 - u) }
//! species("u", #{ kind: "motile", diffusion: "D", reaction: Fn("growth"),
//!                 initial: "bump(x, y, 0.0, 0.0, 1.0)" });
//! integral("mass", "u");
//! ```
//!
//! Terms are never interpreted per node: [`rhai_ast`] converts the functions' syntax trees into
//! a numeric subset ([`syntax`]), [`lower`] inlines calls and folds them onto one hash-consed
//! expression [`graph`], [`diff`] differentiates that graph symbolically, and [`tape`] turns the
//! nodes each kernel needs into a flat instruction tape evaluated over chunks of nodes. Values
//! are bit-identical to the engine's own evaluation ([`oracle`]), including its integer
//! arithmetic, its `powf` for `**` and its relative-epsilon float comparisons.
//!
//! Entry points: [`Model::load`] / [`Model::load_file`], [`Model::compile`],
//! [`Overrides::parse`] for `--set name=value`, and [`inspect`] for the checks of
//! `agarium check`.

#![deny(missing_docs)]
// Errors carry positions and context for the user; they are built once, on the failure path.
#![allow(clippy::result_large_err)]

pub mod declare;
pub mod diff;
pub mod error;
pub mod graph;
pub mod inspect;
pub mod lower;
pub mod model;
pub mod oracle;
pub mod overrides;
pub mod rhai_ast;
pub mod syntax;
pub mod tape;

pub use declare::{Declarations, KindDecl, TermSrc};
pub use error::{ModelError, SourcePos};
pub use inspect::{describe, inspect, Findings};
pub use model::{Chemotaxis, CompiledModel, Diagnostic, Model, Species};
pub use oracle::Interpreted;
pub use overrides::{parse_set, OverrideError, Overrides};
pub use tape::{GraphKernel, CHUNK};
