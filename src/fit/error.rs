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
}

impl From<FitError> for crate::Error {
    fn from(e: FitError) -> Self {
        match e {
            FitError::Degenerate(s) => crate::Error::Degenerate(s),
            FitError::Solver(s) => crate::Error::Internal(s),
        }
    }
}
