//! Errors of loading and compiling a model, each carrying where in which file it arose.

use std::fmt;

use thiserror::Error;

use crate::lower::LowerError;
use crate::overrides::OverrideError;

/// A position in a named source file.
#[derive(Clone, Debug, PartialEq, Eq, Default)]
pub struct SourcePos {
    /// File name as given by the caller.
    pub file: String,
    /// Line, 1-based (0 when unknown).
    pub line: usize,
    /// Column, 1-based (0 when unknown).
    pub column: usize,
}

impl fmt::Display for SourcePos {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        // A position outside any file (a command-line option) has no line.
        if self.line == 0 {
            write!(f, "{}", self.file)
        } else {
            write!(f, "{}:{}:{}", self.file, self.line, self.column)
        }
    }
}

/// Why a model could not be loaded or compiled.
#[derive(Debug, Error, Clone, PartialEq)]
pub enum ModelError {
    /// The file is not valid script syntax.
    #[error("{at}: syntax error: {message}")]
    Syntax {
        /// Where.
        at: SourcePos,
        /// The parser's explanation.
        message: String,
    },
    /// The top-level code hit a safety limit (operations, call depth, sizes).
    #[error("{at}: the model's top-level code stopped: {limit}")]
    Limit {
        /// Where it stopped.
        at: SourcePos,
        /// Which limit.
        limit: String,
    },
    /// The top-level code failed (for example calling an unknown function).
    #[error("{at}: {message}")]
    Script {
        /// Where.
        at: SourcePos,
        /// Explanation.
        message: String,
    },
    /// A name declared twice (parameters, species, diagnostics share one namespace).
    #[error(
        "{at}: `{name}` is declared twice (first declared at line {first_line}) or is reserved"
    )]
    Duplicate {
        /// The name.
        name: String,
        /// Second declaration.
        at: SourcePos,
        /// Line of the first declaration (0 for reserved names such as x, y, t).
        first_line: usize,
    },
    /// A species declaration without `kind`.
    #[error("{at}: species `{species}` has no kind (add kind: \"mobile\", \"immobile\" or \"quasi-steady\")")]
    MissingKind {
        /// The species.
        species: String,
        /// Where.
        at: SourcePos,
    },
    /// A malformed declaration (unknown key, wrong type, unknown kind...).
    #[error("{at}: {message}")]
    Declaration {
        /// Where.
        at: SourcePos,
        /// Explanation.
        message: String,
    },
    /// A diffusion coefficient that is negative (or not finite).
    #[error("{at}: diffusion coefficient of `{species}` is {value}; it must be positive")]
    BadDiffusion {
        /// The species.
        species: String,
        /// Its value.
        value: f64,
        /// Where.
        at: SourcePos,
    },
    /// A `--set` value that does not fit the model.
    #[error("{0}")]
    Override(#[from] OverrideError),
    /// A parameter outside its declared bounds.
    #[error("{at}: parameter `{name}` = {value} is outside its bounds [{min}, {max}]")]
    OutOfBounds {
        /// Parameter.
        name: String,
        /// Value given.
        value: f64,
        /// Lower bound.
        min: f64,
        /// Upper bound.
        max: f64,
        /// Declaration.
        at: SourcePos,
    },
    /// A term could not be compiled.
    #[error("{at}: {context}: {source}")]
    Compile {
        /// Where (inside the file for function terms, the declaration for expression strings).
        at: SourcePos,
        /// Which term.
        context: String,
        /// What went wrong.
        source: LowerError,
    },
    /// The model file could not be read.
    #[error("cannot read {file}: {message}")]
    Io {
        /// File.
        file: String,
        /// Explanation.
        message: String,
    },
}
