//! `magproof align`: the magnetometer's axes against the body frame and the
//! misalignment a tumble cannot see, from a turntable test in two or more mounts; the
//! gyro's axes, scale and bias against the table, or against the magnetometer on a hand
//! tumble (method, definitions and cautions: docs/alignment.md).

pub mod calibration;
pub mod gyro;
pub mod judge;
pub mod magnetometer;
pub mod result;
pub mod seam;
pub mod tumble;
pub mod warning;

#[cfg(test)]
mod gyro_tests;
#[cfg(test)]
mod tests;

use nalgebra::Matrix3;

pub use calibration::Calibration;
pub use gyro::{GyroReference, GyroResult, GYRO_SCALE_TOL};
pub use result::{
    AlignPoint, AlignResult, AxisResult, AxisVerdict, Handedness, MagAlignment, MagPart,
};
pub use warning::AlignWarning;

use super::{CheckRequest, Gate, GateRole, Verdict};
use crate::check::calibrate::ALIGNMENT_MAX_DEG;
use crate::Error;

/// Below this angle between the field and the table axis the report warns, deg.
pub const FIELD_OFF_AXIS_WARN_DEG: f64 = 25.0;

/// Options of `magproof align`.
#[derive(Debug, Clone, Default)]
pub struct AlignOptions {
    /// Calibration applied to the readings before the fit; without one the hard iron is
    /// fitted jointly.
    pub calibration: Option<Calibration>,
}

/// What `magproof align` is asked.
pub type AlignRequest<'a> = CheckRequest<'a, AlignOptions>;

/// Run the alignment check: a turntable run (an `angle` column) judges the magnetometer
/// and, with gyro columns, the gyro against the table; a hand tumble (gyro columns, no
/// `angle`) judges the gyro against the magnetometer.
pub fn run_align(req: &AlignRequest) -> Result<AlignResult, Error> {
    let plan = req.require_plan("align", "its [align_test] names the mounts")?;
    let log = &req.input.log;
    let mut warnings: Vec<AlignWarning> = req
        .input
        .warnings
        .iter()
        .cloned()
        .map(AlignWarning::Input)
        .collect();
    let limit = plan
        .limits
        .gates
        .alignment_max_deg
        .unwrap_or(ALIGNMENT_MAX_DEG);
    let tol = plan
        .gyro
        .as_ref()
        .and_then(|g| g.scale_tol)
        .unwrap_or(GYRO_SCALE_TOL);
    let gyro_planned = plan
        .gyro
        .as_ref()
        .map(|g| g.sensor_to_body)
        .unwrap_or_else(Matrix3::identity);
    if log.angle_rad.is_none() && log.gyro_rad_s.is_some() {
        return run_tumble(req, &gyro_planned, (limit, tol), warnings);
    }
    let test = plan.align_test.as_ref().ok_or_else(|| {
        Error::Usage(format!(
            "{}: align needs an [align_test] section with [[align_test.mount]] entries \
             (or, for a hand tumble, a log with gyro columns and no `angle`)",
            plan.path.display()
        ))
    })?;
    if log.angle_rad.is_none() {
        return Err(Error::Usage(format!(
            "{}: align needs an `angle` column (table heading, deg) for a turntable run, \
             or gyro columns gx, gy, gz for a hand tumble",
            log.path.display()
        )));
    }
    let (mag, mut gates, samples, mounts) =
        magnetometer::magnetometer_part(req, plan, test, limit, &mut warnings)?;
    let gyro = match &log.gyro_rad_s {
        None => None,
        Some(g) => match gyro::table_gyro(log, test, g, &gyro_planned, tol) {
            Ok(r) => {
                gates.extend(gyro::gyro_gates(&r, limit));
                Some(r)
            }
            Err(reason) => {
                warnings.push(AlignWarning::GyroNotJudged { reason });
                gates.push(Gate::at_least("gyro_judged", 0.0, 1.0, GateRole::Data));
                None
            }
        },
    };
    Ok(finish(
        MagPart(Some(mag)),
        samples,
        mounts,
        gyro,
        limit,
        gates,
        warnings,
    ))
}

/// A hand tumble: the gyro against the magnetometer; the magnetometer's keys are null.
/// `limits` = (alignment limit, deg; gyro scale tolerance).
fn run_tumble(
    req: &AlignRequest,
    gyro_planned: &Matrix3<f64>,
    limits: (f64, f64),
    mut warnings: Vec<AlignWarning>,
) -> Result<AlignResult, Error> {
    let (limit, tol) = limits;
    let mag_planned = req
        .plan
        .and_then(|p| p.magnetometer.as_ref())
        .map(|m| m.sensor_to_body)
        .unwrap_or_else(Matrix3::identity);
    let g = tumble::tumble_gyro(req, &mag_planned, gyro_planned, tol)?;
    if req.options.calibration.is_none() {
        warnings.push(AlignWarning::TumbleUncalibrated);
    }
    let gates = gyro::gyro_gates(&g, limit);
    Ok(finish(
        MagPart(None),
        g.samples,
        Vec::new(),
        Some(g),
        limit,
        gates,
        warnings,
    ))
}

fn finish(
    magnetometer: MagPart,
    samples: usize,
    mounts: Vec<String>,
    gyro: Option<GyroResult>,
    alignment_max_deg: f64,
    gates: Vec<Gate>,
    warnings: Vec<AlignWarning>,
) -> AlignResult {
    let verdict = Verdict::from_gates(&gates);
    AlignResult {
        magnetometer,
        samples,
        mounts,
        gyro,
        alignment_max_deg,
        pass: verdict.pass(),
        verdict,
        gates,
        warnings,
    }
}
