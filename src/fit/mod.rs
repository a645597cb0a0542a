//! Fits: algebraic ellipsoid fit, geometric refinement with argmin, linear cage fit,
//! dipole fit, robust weights and covariance (DESIGN §8).
pub mod dipole;

pub mod linear;
