//! Errors of the ledger and their exit codes.

use crate::log::Shown;

/// A ledger operation failed.
#[derive(Debug, thiserror::Error)]
pub enum LedgerError {
    /// A read was asked of a ledger file that does not exist (reads never create one).
    #[error("{path}: no ledger file here")]
    Missing {
        /// The path looked at.
        path: Shown,
    },
    /// The file exists but is not a magproof ledger (not SQLite, another program's
    /// database, empty, or damaged).
    #[error("{path}: not a magproof ledger: {reason}")]
    NotALedger {
        /// The file.
        path: Shown,
        /// What was found instead.
        reason: String,
    },
    /// No ledger file is here but SQLite side files (`-wal`, `-shm`) of an earlier one
    /// are: a new ledger would replay them and be corrupt from its first write.
    #[error("{path}: no ledger here, but {files} left beside it (by a crash, or by a ledger deleted without them); a new ledger would take them in and be corrupt. Restore the ledger they belong to, or move them away, then run again")]
    StaleSideFiles {
        /// The ledger path.
        path: Shown,
        /// The side files found, as paths joined by " and ".
        files: String,
    },
    /// The ledger was written by a newer magproof whose schema this one does not know.
    #[error("{path}: ledger schema version {found} is newer than this magproof {} understands (up to {supported}); use a newer magproof", crate::VERSION)]
    NewerSchema {
        /// The file.
        path: Shown,
        /// Version stored in the file.
        found: i64,
        /// Newest version this build reads.
        supported: i64,
    },
    /// The file could not be opened or created (permissions, missing folder, …).
    #[error("{path}: cannot open the ledger: {source}")]
    CannotOpen {
        /// The file.
        path: Shown,
        /// SQLite's error.
        source: rusqlite::Error,
    },
    /// A stored run cannot be decoded (bad JSON, unknown kind): the file was edited by hand
    /// or damaged.
    #[error("{path}: run #{id}: {problem}")]
    BadRow {
        /// The ledger file.
        path: Shown,
        /// The run's id.
        id: i64,
        /// What is wrong with it.
        problem: String,
    },
    /// An input file could not be read to hash it.
    #[error("{path}: cannot read the file to hash it for the ledger: {source}")]
    Input {
        /// The input file.
        path: Shown,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// A run was to be recorded from a plan without `[article]`.
    #[error("{plan}: missing [article] section: recording in the ledger needs the article's serial and build, e.g.\n[article]\nserial = \"KST-002\"\nbuild = \"B4\"")]
    NoArticle {
        /// The plan file.
        plan: Shown,
    },
    /// A run given to the ledger is malformed (empty serial, no inputs, result not an
    /// object). The binary only builds runs from validated plans, so this is a bug there.
    #[error("run not recorded: {0}")]
    InvalidRun(String),
    /// A rule for judging changes is out of range (e.g. a non-positive sigma threshold).
    #[error("{0}")]
    InvalidRule(String),
    /// SQLite failed (disk full, lock held longer than the busy timeout, …).
    #[error("{path}: ledger database error: {source}")]
    Database {
        /// The ledger file.
        path: Shown,
        /// SQLite's error.
        source: rusqlite::Error,
    },
}

impl LedgerError {
    /// Exit code (README.md, "Commands"): 2 for what the user can fix (missing or foreign file, newer
    /// schema, unreadable input, plan without `[article]`), 3 for internal failures.
    pub fn exit_code(&self) -> u8 {
        match self {
            LedgerError::InvalidRun(_) | LedgerError::Database { .. } => 3,
            _ => 2,
        }
    }
}
