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

    /// An iterative solve stopped before it reached its tolerance.
    #[error(
        "the {} did not converge: {stall}; after {iterations} iterations the relative \
         residual is {relative_residual:.3e} (target {tolerance:.1e})",
        what_failed(*.solve, .method)
    )]
    NotConverged {
        /// Which solve of a run; `None` from a solver called on its own (the pipeline names
        /// its solves with [`Error::in_solve`]).
        solve: Option<Solve>,
        /// The method, e.g. "multigrid-preconditioned conjugate gradient".
        method: String,
        stall: Stall,
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

/// Which solve of a run did not converge.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Solve {
    /// The flow problem −∇²ũ = 1 (its first pass when the wall correction follows).
    Flow,
    /// The flow problem again, with the wall correction on the right-hand side.
    CorrectedFlow,
    /// The H1 heat-transfer problem −∇²ψ = ũ/ū.
    HeatH1,
    /// The Nu_T eigenproblem −∇²f = λ·(ũ/ū)·f.
    HeatT,
    /// A step of the developing-flow march (axial momentum).
    DevelopingFlow,
    /// The cross-flow potential of a developing-flow step.
    CrossFlow,
}

impl std::fmt::Display for Solve {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Solve::Flow => "flow solve",
            Solve::CorrectedFlow => "wall-corrected flow solve",
            Solve::HeatH1 => "H1 heat-transfer solve",
            Solve::HeatT => "Nu_T eigen-solve",
            Solve::DevelopingFlow => "developing-flow momentum solve",
            Solve::CrossFlow => "developing-flow cross-flow solve",
        })
    }
}

/// Why an iterative solve stopped short of its tolerance.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Stall {
    /// The iteration cap was reached.
    IterationLimit,
    /// A search direction with pᵀA·p ≤ 0, or a value that is not finite: the operator is not
    /// positive definite, or the arithmetic broke down.
    Breakdown,
    /// The true residual stayed above the target through repeated restarts.
    Stagnation,
    /// An eigen-solve's vector (the start, a block vector, the search space) has no weight: zero
    /// or not finite in the weighted norm.
    LostWeight,
}

impl std::fmt::Display for Stall {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Stall::IterationLimit => "the iteration limit was reached",
            Stall::Breakdown => {
                "breakdown (the operator is not positive definite, or a value is not finite)"
            }
            Stall::Stagnation => "the residual stagnates above the target",
            Stall::LostWeight => "a vector has no weight (zero or not finite in the weighted norm)",
        })
    }
}

/// "flow solve (multigrid-preconditioned conjugate gradient)", or "multigrid-preconditioned
/// conjugate gradient solve" when the solve is not named.
fn what_failed(solve: Option<Solve>, method: &str) -> String {
    match solve {
        Some(s) => format!("{s} ({method})"),
        None => format!("{method} solve"),
    }
}

impl Error {
    /// Names the solve of a run that did not converge; other errors pass unchanged.
    pub fn in_solve(self, which: Solve) -> Self {
        match self {
            Error::NotConverged {
                method,
                stall,
                iterations,
                relative_residual,
                tolerance,
                ..
            } => Error::NotConverged {
                solve: Some(which),
                method,
                stall,
                iterations,
                relative_residual,
                tolerance,
            },
            e => e,
        }
    }

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn non_convergence_names_the_solve_the_method_and_the_stall() {
        let e = Error::NotConverged {
            solve: None,
            method: "Jacobi-preconditioned conjugate gradient".into(),
            stall: Stall::IterationLimit,
            iterations: 3,
            relative_residual: 0.25,
            tolerance: 1e-10,
        };
        assert_eq!(
            e.to_string(),
            "the Jacobi-preconditioned conjugate gradient solve did not converge: the iteration \
             limit was reached; after 3 iterations the relative residual is 2.500e-1 (target \
             1.0e-10)"
        );
        let e = e.in_solve(Solve::CorrectedFlow);
        assert!(matches!(
            e,
            Error::NotConverged {
                solve: Some(Solve::CorrectedFlow),
                iterations: 3,
                ..
            }
        ));
        assert!(e
            .to_string()
            .starts_with("the wall-corrected flow solve (Jacobi-preconditioned"));
        assert!(!e.is_input_error());
        // Other errors pass through unchanged.
        let p = Error::param("--cells", "too few").in_solve(Solve::Flow);
        assert_eq!(p.to_string(), "--cells: too few");
    }
}
