//! Errors of the fits, and their mapping into the library's [`crate::Error`].

/// A fit could not be done.
#[derive(Debug, Clone, thiserror::Error)]
pub enum FitError {
    /// The data cannot support the fit (too few samples, coplanar or collinear
    /// directions, constant samples, rank-deficient cage grid…); the text says why.
    #[error("{0}")]
    Degenerate(String),
    /// The solver failed in a way that is not the data's fault.
    #[error("solver failed: {0}")]
    Solver(String),
    /// Fewer samples than unknowns allow a residual estimate for.
    #[error(
        "too few samples: {found} field samples for {unknowns} unknowns (need at least {needed})"
    )]
    TooFewSamples {
        /// Samples given.
        found: usize,
        /// Unknowns in the model.
        unknowns: usize,
        /// Samples needed.
        needed: usize,
    },
    /// A sample puts the probe at the dipole.
    #[error("sample {index}: the probe sits at the dipole's position; the point-dipole model is undefined there")]
    ProbeAtDipole {
        /// 0-based sample index.
        index: usize,
    },
    /// The design cannot separate some component: its normal matrix is singular.
    #[error("the geometry cannot separate {what}: the design matrix is singular (singular-value ratio {ratio:.1e})")]
    Singular {
        /// What cannot be separated.
        what: String,
        /// Smallest over largest singular value.
        ratio: f64,
    },
    /// A nonlinear solver failed or stopped without converging.
    #[error("the fit did not converge: {0}")]
    NotConverged(String),
}

impl From<FitError> for crate::Error {
    fn from(e: FitError) -> Self {
        match e {
            FitError::Degenerate(s) => crate::Error::Degenerate(s),
            FitError::Solver(s) => crate::Error::Internal(s),
            other => crate::Error::Degenerate(other.to_string()),
        }
    }
}
