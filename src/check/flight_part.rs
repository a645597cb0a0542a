//! What a check's result gives the flight parameters (`report::flight`): a result that
//! measured something flight software applies says so through
//! [`super::CheckResult::flight_part`]; the flight-parameter writer never asks a result
//! for its kind.

use super::calibrate::CalibrationResult;
use super::polarity::PolarityResult;

/// A result's contribution to the flight parameters.
#[derive(Debug, Clone, Copy)]
pub enum FlightPart<'a> {
    /// A magnetometer calibration: hard iron, W (and the mounting a cage measured).
    Calibration(&'a CalibrationResult),
    /// A polarity check: rod coupling at the sensor, measured dipole per command and
    /// the per-pulse settle times the blanking window comes from.
    Polarity(&'a PolarityResult),
}
