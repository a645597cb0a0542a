//! The library's top-level error and its mapping to the exit codes in README.md.
//!
//! Each area has its own typed error (`LogError`, `PlanError`, `FitError`, …); this enum
//! gathers them so the binary can choose an exit code: 2 for bad input or usage, 3 for an
//! internal error. (Exit code 1, "ran and a verdict failed", is not an error: it comes
//! from a result whose `pass` is false.)

use std::path::PathBuf;

use crate::ledger::LedgerError;
use crate::log::{LogError, PlanError};
use crate::physics::igrf::GeomagError;

/// Any failure of a magproof operation.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A sweep log could not be read or contains a bad value.
    #[error(transparent)]
    Log(#[from] LogError),
    /// A test plan could not be read or is invalid.
    #[error(transparent)]
    Plan(#[from] PlanError),
    /// A geomagnetic-field request was refused (date, latitude or altitude out of range).
    #[error(transparent)]
    Geomag(#[from] GeomagError),
    /// The input is valid text but cannot support the requested computation
    /// (too few samples, coplanar directions, no background segment, …).
    #[error("{0}")]
    Degenerate(String),
    /// A request is inconsistent or missing something it needs (bad flag values,
    /// a plan section the command requires, …).
    #[error("{0}")]
    Usage(String),
    /// Reading or writing a file failed.
    #[error("{path}: {source}")]
    Io {
        /// The file or folder involved.
        path: PathBuf,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// The ledger could not be opened, read or written.
    #[error(transparent)]
    Ledger(#[from] LedgerError),
    /// A closeout step could not run; the source says why.
    #[error("step {index} ({kind}, {}): {source}", log.display())]
    Step {
        /// 1-based position of the step in the plan.
        index: usize,
        /// The step's kind.
        kind: &'static str,
        /// The step's log.
        log: PathBuf,
        /// Why it could not run.
        source: Box<Error>,
    },
    /// A bug in magproof: an invariant that should hold did not.
    #[error("internal error (please report): {0}")]
    Internal(String),
}

impl Error {
    /// Exit code for this error (README.md): 2 bad input or usage, 3 internal error.
    pub fn exit_code(&self) -> u8 {
        match self {
            Error::Internal(_) => 3,
            Error::Step { source, .. } => source.exit_code(),
            Error::Geomag(GeomagError::Table(_)) => 3,
            Error::Ledger(e) => e.exit_code(),
            Error::Io { source, .. } if source.kind() == std::io::ErrorKind::NotFound => 2,
            Error::Io { .. } => 2,
            _ => 2,
        }
    }

    /// Wrap an I/O error with the path it concerns.
    pub fn io(path: impl Into<PathBuf>, source: std::io::Error) -> Self {
        Error::Io {
            path: path.into(),
            source,
        }
    }
}
