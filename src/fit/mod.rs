//! Fits: algebraic ellipsoid fit, geometric refinement with argmin, linear cage fit,
//! dipole fit, robust weights and covariance (methods: `docs/calibration.md`,
//! `docs/dipole.md`).

pub mod align;
pub mod arrow;
pub mod cage;
pub mod coverage;
pub mod dipole;
pub mod ellipsoid;
pub mod gyro;
pub mod linear;
pub mod lm;
pub mod orbit;
pub mod robust;
pub mod samples;
pub mod tumble;
pub mod wahba;

pub use error::FitError;
mod error;
