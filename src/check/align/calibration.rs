//! The calibration `align --calibration FILE.json` applies: the JSON `calibrate --json`
//! prints or the flight parameters file, read for `hard_iron_nt` and `soft_iron`.

use std::path::Path;

use nalgebra::{Matrix3, Vector3};
use serde::Deserialize;

use crate::Error;

/// A magnetometer calibration in the sensor frame: `b ≈ W (b_meas − h)`.
#[derive(Debug, Clone)]
pub struct Calibration {
    /// Hard iron h, sensor frame (S), nT.
    pub hard_iron_nt: Vector3<f64>,
    /// Soft-iron correction W, sensor frame to sensor frame.
    pub soft_iron: Matrix3<f64>,
}

#[derive(Deserialize)]
struct RawCalibration {
    hard_iron_nt: Option<[f64; 3]>,
    soft_iron: Option<[[f64; 3]; 3]>,
    soft_iron_frame: Option<String>,
}

impl Calibration {
    /// The corrected reading `W (s − h)`, sensor frame, nT.
    pub fn apply(&self, s: &Vector3<f64>) -> Vector3<f64> {
        self.soft_iron * (s - self.hard_iron_nt)
    }

    /// Parse the JSON text of `path`.
    pub fn parse(text: &str, path: &Path) -> Result<Self, Error> {
        let shown = path.display();
        let raw: RawCalibration = serde_json::from_str(text).map_err(|e| {
            Error::Usage(format!(
                "{shown} line {}: not a calibration JSON object ({e})",
                e.line()
            ))
        })?;
        let h = raw.hard_iron_nt.ok_or_else(|| {
            Error::Usage(format!("{shown}: no `hard_iron_nt` [3] (nT, sensor frame)"))
        })?;
        let w = raw
            .soft_iron
            .ok_or_else(|| Error::Usage(format!("{shown}: no `soft_iron` [3][3]")))?;
        if raw.soft_iron_frame.as_deref() == Some("body") {
            return Err(Error::Usage(format!(
                "{shown}: `soft_iron_frame` is \"body\" (a cage calibration maps into the \
                 body frame and so already assumes the mapping align tests); give a tumble \
                 calibration, or none to fit the hard iron jointly"
            )));
        }
        let soft_iron = Matrix3::from_fn(|i, j| w[i][j]);
        if !(h.iter().all(|x| x.is_finite()) && soft_iron.iter().all(|x| x.is_finite())) {
            return Err(Error::Usage(format!(
                "{shown}: `hard_iron_nt` and `soft_iron` must be finite"
            )));
        }
        if soft_iron.determinant() <= 0.0 {
            return Err(Error::Usage(format!(
                "{shown}: `soft_iron` has a determinant ≤ 0; a correction never reverses or \
                 collapses an axis"
            )));
        }
        Ok(Calibration {
            hard_iron_nt: Vector3::from(h),
            soft_iron,
        })
    }

    /// Read it from `path`.
    pub fn read(path: &Path) -> Result<Self, Error> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::parse(&text, path)
    }
}
