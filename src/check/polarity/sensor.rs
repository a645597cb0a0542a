//! Which sensor recorded a polarity log and where it sits: its position and mounting in
//! the body frame, from the plan's `[probe]` or `[magnetometer]`.

use nalgebra::{Matrix3, Vector3};

use super::SensorChoice;
use crate::log::Plan;
use crate::Error;

/// The sensor's geometry in the body frame.
pub(super) struct SensorGeometry {
    /// Sensor position, body frame (B), m.
    pub(super) position_m: Vector3<f64>,
    /// Rotation from the sensor frame (S) to the body frame (B).
    pub(super) sensor_to_body: Matrix3<f64>,
    /// Which sensor it is (never `Auto`).
    pub(super) kind: SensorChoice,
}

/// The geometry of the sensor `choice` names (`Auto`: the `[probe]` when the plan has
/// one, else the `[magnetometer]`, which then needs its `position_m`).
pub(super) fn sensor_geometry(plan: &Plan, choice: SensorChoice) -> Result<SensorGeometry, Error> {
    let probe = || {
        plan.probe.as_ref().map(|p| SensorGeometry {
            position_m: p.position_m,
            sensor_to_body: p.sensor_to_body,
            kind: SensorChoice::Probe,
        })
    };
    let mag = || -> Result<SensorGeometry, Error> {
        let m = plan.magnetometer.as_ref().ok_or_else(|| {
            plan.missing(
                "magnetometer",
                "polarity needs the magnetometer's position_m and sensor_to_body (or a [probe])",
            )
        })?;
        let position_m = m.position_m.ok_or_else(|| {
            plan.invalid(
                "magnetometer.position_m",
                "polarity needs the magnetometer's position (body frame, m) to predict each rod's field",
            )
        })?;
        Ok(SensorGeometry {
            position_m,
            sensor_to_body: m.sensor_to_body,
            kind: SensorChoice::Magnetometer,
        })
    };
    match choice {
        SensorChoice::Probe => probe().ok_or_else(|| {
            plan.missing(
                "probe",
                "a log recorded by the probe needs the probe's position_m",
            )
            .into()
        }),
        SensorChoice::Magnetometer => mag(),
        SensorChoice::Auto => match probe() {
            Some(p) => Ok(p),
            None => mag(),
        },
    }
}
