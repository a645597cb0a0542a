//! Errors of the log and plan readers. Every variant about a place in a file names the
//! file and the 1-based line (counting every line of the file, comments included), and
//! where it concerns a cell, the column as written in the header and the text found.

use std::fmt;
use std::path::PathBuf;

/// Shows a path the way a user typed it.
#[derive(Debug, Clone)]
pub struct Shown(pub PathBuf);

impl fmt::Display for Shown {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.0.display())
    }
}

/// A sweep log could not be read, or holds something the reader refuses.
#[derive(Debug, thiserror::Error)]
pub enum LogError {
    /// The file could not be opened or read.
    #[error("{path}: cannot read: {source}")]
    Io {
        /// The log file.
        path: Shown,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// Lines end with a bare carriage return (no line feed): the whole file reads as one
    /// line, and any other diagnosis would be wrong.
    #[error("{path}:{line}: lines end with a bare carriage return (CR, as old Mac files do); save the log with line feeds (LF or CRLF)")]
    BareCarriageReturns {
        /// The file.
        path: Shown,
        /// The line holding the carriage returns.
        line: u64,
    },
    /// The file has no header line: it is empty or holds only comments and blank lines.
    #[error("{path}: no header line: the file is empty or holds only comments and blank lines")]
    NoHeader {
        /// The log file.
        path: Shown,
    },
    /// The header is followed by no data row.
    #[error("{path}:{header_line}: the header is not followed by any data row")]
    NoRows {
        /// The log file.
        path: Shown,
        /// Line of the header.
        header_line: u64,
    },
    /// The header is malformed: unknown unit, duplicated column, empty name.
    #[error("{path}:{line}: column \"{column}\": {problem}")]
    Header {
        /// The log file.
        path: Shown,
        /// Line of the header.
        line: u64,
        /// The column as written in the header.
        column: String,
        /// What is wrong, and what was expected.
        problem: String,
    },
    /// A cell could not be used: not a number, not finite, empty, bad timestamp.
    #[error("{path}:{line}: column \"{column}\": {problem}, found \"{found}\"")]
    Cell {
        /// The log file.
        path: Shown,
        /// Line of the row.
        line: u64,
        /// The column as written in the header.
        column: String,
        /// What was expected.
        problem: String,
        /// The text found (shortened if long).
        found: String,
    },
    /// A row has a different number of fields from the header.
    #[error("{path}:{line}: the row has {found} fields but the header has {expected}")]
    RowLength {
        /// The log file.
        path: Shown,
        /// Line of the row.
        line: u64,
        /// Fields in the header.
        expected: usize,
        /// Fields in the row.
        found: usize,
    },
    /// Time decreased from one row to the next.
    #[error("{path}:{line}: column \"{column}\": time goes backwards ({found} s after {previous} s on the row before)")]
    TimeBackwards {
        /// The log file.
        path: Shown,
        /// Line of the row.
        line: u64,
        /// The time column as written in the header.
        column: String,
        /// This row's time, s from the first row.
        found: f64,
        /// The previous row's time, s from the first row.
        previous: f64,
    },
    /// A line is not text: it holds control bytes (a binary file).
    #[error(
        "{path}:{line}: the line is not UTF-8 text but control bytes (is this a binary file?)"
    )]
    NotUtf8 {
        /// The log file.
        path: Shown,
        /// Line number.
        line: u64,
    },
    /// The file is text in another encoding than UTF-8 (Latin-1, UTF-16).
    #[error("{path}:{line}: the file is not UTF-8 text: it looks like {encoding}; save it as UTF-8 (spreadsheet programs offer \"CSV UTF-8\") and read it again")]
    Encoding {
        /// The log file.
        path: Shown,
        /// Line number.
        line: u64,
        /// The encoding it looks like.
        encoding: super::encoding::Encoding,
    },
    /// A column holds a quantity that needs something from the plan to be used (coil
    /// currents without `[cage] nt_per_amp`): refused, never ignored.
    #[error("{path}: {column}: {needs}")]
    Unusable {
        /// The log file.
        path: Shown,
        /// The column or columns as written in the header, quoted (`columns "ix [A]",
        /// "iy [A]", "iz [A]"`).
        column: String,
        /// What is needed, and where to give it.
        needs: String,
    },
    /// A column the computation needs is absent.
    #[error("{path}: missing column \"{column}\": {why}")]
    MissingColumn {
        /// The log file.
        path: Shown,
        /// The missing column's name.
        column: String,
        /// Why it is needed.
        why: String,
    },
}

impl LogError {
    /// Line this error refers to, if any (1-based).
    pub fn line(&self) -> Option<u64> {
        match self {
            LogError::Header { line, .. }
            | LogError::Cell { line, .. }
            | LogError::RowLength { line, .. }
            | LogError::TimeBackwards { line, .. }
            | LogError::NotUtf8 { line, .. }
            | LogError::Encoding { line, .. } => Some(*line),
            LogError::NoRows { header_line, .. } => Some(*header_line),
            _ => None,
        }
    }
}

/// A test plan could not be read or is invalid.
#[derive(Debug, thiserror::Error)]
pub enum PlanError {
    /// The file could not be opened or read.
    #[error("{path}: cannot read plan: {source}")]
    Io {
        /// The plan file.
        path: Shown,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// TOML syntax error, unknown key or wrong type; the message from the TOML parser
    /// names the line and column.
    #[error("{path}: {message}")]
    Syntax {
        /// The plan file.
        path: Shown,
        /// The parser's message, with line and column.
        message: String,
    },
    /// A value is present but invalid (bad rotation, zero axis, non-positive limit…).
    #[error("{path}: key \"{key}\": {problem}")]
    Invalid {
        /// The plan file.
        path: Shown,
        /// Dotted key, e.g. `magnetometer.sensor_to_body`.
        key: String,
        /// What is wrong.
        problem: String,
    },
    /// A value written on a line of the plan is invalid (the same checks as
    /// [`PlanError::Invalid`], with the line of the key).
    #[error("{path}:{line}: key \"{key}\": {problem}")]
    InvalidAt {
        /// The plan file.
        path: Shown,
        /// 1-based line of the key.
        line: usize,
        /// Dotted key, e.g. `rod[1].position_m`.
        key: String,
        /// What is wrong.
        problem: String,
    },
    /// A section the command needs is absent.
    #[error("{path}: missing [{section}] section: {why}")]
    MissingSection {
        /// The plan file.
        path: Shown,
        /// The section's name.
        section: String,
        /// Why the command needs it.
        why: String,
    },
}
