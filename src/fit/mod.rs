//! Fits: algebraic ellipsoid fit, geometric refinement with argmin, linear cage fit,
//! dipole fit, robust weights and covariance (DESIGN §8).

/// Coil-cage linear fit.
pub mod cage;
/// Direction coverage of the sphere.
pub mod coverage;
/// Li & Griffiths algebraic ellipsoid fit.
pub mod ellipsoid;
/// Levenberg–Marquardt solver on argmin.
pub mod lm;
/// Robust statistics (Tukey biweight, MAD).
pub mod robust;
/// Tumble refinement of hard and soft iron.
pub mod tumble;

pub use error::FitError;
mod error;
