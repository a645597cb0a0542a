//! Screens run on a sweep log before any fit: readings at or beyond the sensor's range
//! or piled up on its rail ([`saturation`]), field values no sensor can give
//! ([`plausible`], usually a wrong field unit), and an axis stuck at one value
//! ([`stuck`]). All work in nT, in the sensor frame.

pub mod plausible;
pub mod saturation;
pub mod stuck;
