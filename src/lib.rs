//! # magproof
//!
//! Magnetics checks for small-spacecraft integration day: magnetometer calibration
//! (hard and soft iron) from a coil-cage sweep or a tumble test, torque-rod polarity,
//! the vehicle's residual magnetic dipole and its in-orbit disturbance torque, and a
//! ledger of results per serial number and build.
//!
//! The library does the work; the `magproof` binary only parses the command line,
//! calls into this crate and maps errors to exit codes (see README.md and `docs/`).
//!
//! Conventions (docs/formats.md): field in nanotesla (nT), dipole moment in A·m², length in
//! m, time in s, angles in radians inside the library (degrees only in files and on
//! screen). Frames: sensor (S), body (B), lab/table (L). A rotation named `a_to_b`
//! maps coordinates in frame a to frame b: `v_b = a_to_b * v_a`.
#![warn(missing_docs)]
#![deny(clippy::float_cmp)]

pub mod check;
pub mod error;
pub mod fit;
pub mod ledger;
pub mod log;
pub mod physics;
pub mod report;
pub mod screen;
pub mod sim;
pub mod text;

pub use error::Error;

/// The tool's version, as recorded in ledger entries and report footers.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
