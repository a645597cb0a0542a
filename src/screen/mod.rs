//! Screens run on a sweep log before any fit: readings at or beyond the sensor's range
//! or piled up on its rail ([`saturation`]), and field values no sensor can give
//! ([`plausible`], usually a wrong field unit). Both work in nT, in the sensor frame.

pub mod plausible;
pub mod saturation;
