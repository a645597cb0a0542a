//! The expected field of a torque rod at the magnetometer: the point dipole (Jackson eq.
//! 5.56) when the magnetometer is at least three rod lengths away or the plan gives no
//! `length_m`, else the rod's two-pole model (poles ±m/L at the rod's ends;
//! [`crate::physics::finite_rod`]), so that both the expected direction and the gain
//! ratio stay meaningful for rods close to the sensor inside a vehicle
//! (docs/polarity.md, "Rods close to the magnetometer").

use nalgebra::Vector3;

use super::DIPOLE_VALID_ROD_LENGTHS;
use crate::log::plan::Rod;
use crate::physics::dipole::dipole_matrix;
use crate::physics::finite_rod::two_pole_field_nt;

/// Which model gave a rod's expected field.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum RodFieldModel {
    /// Point dipole.
    PointDipole,
    /// Two-pole model of a rod of the plan's `length_m`.
    TwoPole,
}

/// The model for a rod at displacement `r_m` (sensor minus rod centre, m).
pub fn model_for(rod: &Rod, r_m: &Vector3<f64>) -> RodFieldModel {
    match rod.length_m {
        Some(l) if r_m.norm() < DIPOLE_VALID_ROD_LENGTHS * l => RodFieldModel::TwoPole,
        _ => RodFieldModel::PointDipole,
    }
}

/// Field at displacement `r_m` (body frame, m) per A·m² of the rod's moment along its
/// axis, body frame, nT. `None` at the rod's centre or a pole.
pub fn field_per_am2(rod: &Rod, r_m: &Vector3<f64>) -> Option<Vector3<f64>> {
    match (model_for(rod, r_m), rod.length_m) {
        (RodFieldModel::TwoPole, Some(l)) => two_pole_field_nt(&rod.axis_body, l, r_m),
        _ => Some(dipole_matrix(r_m)? * rod.axis_body),
    }
}
