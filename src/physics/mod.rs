//! Physics: the dipole field, frames and rotations, and (elsewhere in this module) the
//! geomagnetic reference field and coil fields.

pub mod coil;
pub mod demag;
pub mod dipole;
pub mod finite_rod;
pub mod frames;
pub mod geomag;
pub mod igrf;
pub mod orbit;
