//! The ground comparison: the latest `calibrate` run of the same serial and the same
//! magnetometer (the plan's sensor name; the unnamed single magnetometer counts as one
//! name) in the ledger, against the orbit hard iron; and, when there is none, why.

use std::path::{Path, PathBuf};

use serde::Serialize;

use crate::ledger::{tracks, Ledger, QuantityValue, Run, RunFilter};
use crate::log::Plan;
use crate::Error;

/// The ground calibration an orbit run is compared with, or why there is none.
#[derive(Debug, Clone, PartialEq)]
pub enum GroundLookup {
    /// The latest ground calibration of the serial and sensor.
    Found(GroundCalibration),
    /// No comparison was asked for (`--no-ground`).
    NotAsked,
    /// None could be made (a warning of the run says why).
    Missing(NoGround),
}

/// Why an orbit run has no ground calibration to compare with.
#[derive(Debug, Clone, PartialEq)]
pub enum NoGround {
    /// Nothing to look up: the plan has no `[article]` serial.
    NoSerial,
    /// No ledger to look in: the file does not exist, or the run records into none.
    NoLedger {
        /// The ledger looked for (`None`: the run uses no ledger).
        ledger: Option<PathBuf>,
    },
    /// The ledger holds no `calibrate` run of this serial and sensor.
    NoneRecorded {
        /// The ledger looked in.
        ledger: PathBuf,
        /// Serial looked up.
        serial: String,
        /// Magnetometer looked up (`None`: the unnamed single one).
        sensor: Option<String>,
    },
    /// The latest such run holds no hard iron with 1σ (a run of an older version, or a
    /// failed fit).
    Incomplete {
        /// Its build.
        build: String,
        /// When it was recorded.
        recorded_at: String,
    },
}

/// A ground calibration as the ledger holds it.
#[derive(Debug, Clone, PartialEq)]
pub struct GroundCalibration {
    /// Build it was filed under.
    pub build: String,
    /// When it was recorded (ISO-8601 UTC).
    pub recorded_at: String,
    /// Its hard iron, sensor frame, nT.
    pub hard_iron_nt: [f64; 3],
    /// Its 1σ, nT.
    pub hard_iron_sigma_nt: [f64; 3],
}

/// The comparison in the result (`ground` in the JSON).
#[derive(Debug, Clone, Serialize)]
pub struct GroundComparison {
    /// Build of the ground calibration.
    pub build: String,
    /// When it was recorded.
    pub recorded_at: String,
    /// Ground hard iron, nT.
    pub ground_hard_iron_nt: [f64; 3],
    /// Orbit − ground, sensor frame, nT.
    pub hard_iron_delta_nt: [f64; 3],
    /// Combined 1σ of the difference, nT.
    pub sigma_nt: [f64; 3],
    /// True when any axis differs by more than 3σ.
    pub flag: bool,
}

/// Flag threshold, combined σ.
pub const GROUND_FLAG_SIGMA: f64 = 3.0;

/// Compare the orbit hard iron (with 1σ) to a ground calibration.
pub fn compare(
    ground: &GroundCalibration,
    orbit: [f64; 3],
    orbit_sigma: [f64; 3],
) -> GroundComparison {
    let mut delta = [0.0; 3];
    let mut sigma = [0.0; 3];
    for a in 0..3 {
        delta[a] = orbit[a] - ground.hard_iron_nt[a];
        sigma[a] = orbit_sigma[a].hypot(ground.hard_iron_sigma_nt[a]);
    }
    let flag = (0..3).any(|a| delta[a].abs() > GROUND_FLAG_SIGMA * sigma[a]);
    GroundComparison {
        build: ground.build.clone(),
        recorded_at: ground.recorded_at.clone(),
        ground_hard_iron_nt: ground.hard_iron_nt,
        hard_iron_delta_nt: delta,
        sigma_nt: sigma,
        flag,
    }
}

/// Look up the ground calibration of the plan's serial and magnetometer (the one the
/// plan has selected, by name) in the ledger at `ledger` (`None`: the run uses no
/// ledger). Runs are read as they stand, so a closeout's own steps, recorded after it
/// ran, are never among them.
pub fn find_ground(ledger: Option<&Path>, plan: &Plan) -> Result<GroundLookup, Error> {
    let Some(article) = &plan.article else {
        return Ok(GroundLookup::Missing(NoGround::NoSerial));
    };
    let Some(path) = ledger else {
        return Ok(GroundLookup::Missing(NoGround::NoLedger { ledger: None }));
    };
    latest_ground(path, &article.serial, plan.sensor_name())
}

/// The latest `calibrate` run of `serial` that read the magnetometer `sensor` (`None`:
/// the unnamed single one) in the ledger at `path`, or why there is none.
pub fn latest_ground(
    path: &Path,
    serial: &str,
    sensor: Option<&str>,
) -> Result<GroundLookup, Error> {
    if !path.exists() {
        return Ok(GroundLookup::Missing(NoGround::NoLedger {
            ledger: Some(path.to_path_buf()),
        }));
    }
    let ledger = Ledger::open_for_reading(path)?;
    let runs = ledger.runs(&RunFilter {
        serial: Some(serial.to_string()),
        kind: Some(crate::check::calibrate::seam::KIND),
    })?;
    let Some(run) = runs.iter().rev().find(|r| tracks::sensor_of(r) == sensor) else {
        return Ok(GroundLookup::Missing(NoGround::NoneRecorded {
            ledger: path.to_path_buf(),
            serial: serial.to_string(),
            sensor: sensor.map(String::from),
        }));
    };
    Ok(hard_iron_of(run, sensor).map_or_else(
        || {
            GroundLookup::Missing(NoGround::Incomplete {
                build: run.build.clone(),
                recorded_at: run.recorded_at.clone(),
            })
        },
        GroundLookup::Found,
    ))
}

/// The hard iron with 1σ a `calibrate` run recorded (`hard_iron_x_nt`, or
/// `hard_iron_x_nt@NAME` for a named magnetometer).
fn hard_iron_of(run: &Run, sensor: Option<&str>) -> Option<GroundCalibration> {
    let mut v = [f64::NAN; 3];
    let mut s = [f64::NAN; 3];
    for (a, axis) in ["x", "y", "z"].iter().enumerate() {
        let name = match sensor {
            Some(n) => format!("hard_iron_{axis}_nt@{n}"),
            None => format!("hard_iron_{axis}_nt"),
        };
        if let Some(q) = run.quantities.iter().find(|q| q.name == name) {
            if let QuantityValue::Number { value, sigma } = q.value {
                v[a] = value;
                s[a] = sigma.unwrap_or(f64::NAN);
            }
        }
    }
    if v.iter().chain(&s).any(|x| !x.is_finite()) {
        return None;
    }
    Some(GroundCalibration {
        build: run.build.clone(),
        recorded_at: run.recorded_at.clone(),
        hard_iron_nt: v,
        hard_iron_sigma_nt: s,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_300_nt_shift_is_flagged_and_noise_is_not() {
        let g = GroundCalibration {
            build: "B3".into(),
            recorded_at: "2026-01-01T00:00:00.000Z".into(),
            hard_iron_nt: [100.0, 200.0, 300.0],
            hard_iron_sigma_nt: [20.0, 20.0, 20.0],
        };
        let same = compare(&g, [110.0, 190.0, 320.0], [30.0, 30.0, 30.0]);
        assert!(!same.flag);
        let moved = compare(&g, [100.0, 500.0, 300.0], [30.0, 30.0, 30.0]);
        assert!(moved.flag);
        assert!((moved.hard_iron_delta_nt[1] - 300.0).abs() < 1e-12);
        assert!((moved.sigma_nt[1] - 36.055_512_754_639_89).abs() < 1e-9);
    }
}
