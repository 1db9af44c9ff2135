//! The one error type of the library.
//!
//! Owns: the kinds of failure a user can meet and their messages. Every message reads as a
//! sentence that names the file, line, parameter or quantity at fault, so that the binary can
//! print it as it is. Does not depend on any other module of the crate.

use std::path::PathBuf;

/// Result with the library's error type.
pub type Result<T> = std::result::Result<T, Error>;

/// Everything that can go wrong between a user's input and a report.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A file could not be read or written.
    #[error("{}: {source}", path.display())]
    Io {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },

    /// A shape file (or a built-in shape spec) could not be understood. `line` is 1-based when
    /// known.
    #[error("{}{}: {message}", origin, line.map(|l| format!(", line {l}")).unwrap_or_default())]
    ShapeParse {
        origin: String,
        line: Option<usize>,
        message: String,
    },

    /// The geometry is well formed as text but not as a cross-section (self-intersecting polygon,
    /// zero area, no fluid left, ...).
    #[error("invalid geometry: {0}")]
    Geometry(String),

    /// A mask image could not be used.
    #[error("{}: {message}", path.display())]
    Mask { path: PathBuf, message: String },

    /// A command-line or configuration value is out of range or malformed.
    #[error("{parameter}: {message}")]
    InvalidParameter { parameter: String, message: String },

    /// The iterative solver stopped before it reached its tolerance.
    #[error(
        "the {method} solver did not converge: after {iterations} iterations the relative \
         residual is {relative_residual:.3e} (target {tolerance:.1e})"
    )]
    NotConverged {
        method: String,
        iterations: usize,
        relative_residual: f64,
        tolerance: f64,
    },

    /// A numerical step failed on a well-formed problem, other than an iteration that did not
    /// converge: a direct factorisation that broke down (the multigrid coarsest level). Not the
    /// user's input, so exit code 1.
    #[error("numerical failure: {0}")]
    Numerical(String),

    /// A fluid property model was asked for a state it does not cover, or a property is missing.
    #[error("fluid: {0}")]
    Fluid(String),
}

impl Error {
    /// Shorthand for an [`Error::InvalidParameter`].
    pub fn param(parameter: impl Into<String>, message: impl Into<String>) -> Self {
        Error::InvalidParameter {
            parameter: parameter.into(),
            message: message.into(),
        }
    }

    /// Shorthand for an [`Error::Geometry`].
    pub fn geometry(message: impl Into<String>) -> Self {
        Error::Geometry(message.into())
    }

    /// True for failures caused by the user's input (exit code 2); false for runs that could not
    /// finish (exit code 1).
    pub fn is_input_error(&self) -> bool {
        !matches!(self, Error::NotConverged { .. } | Error::Numerical(_))
    }
}
