//! The alignment check's result: the JSON keys of docs/alignment.md.

use serde::Serialize;

use super::gyro::GyroResult;
use super::warning::AlignWarning;
use crate::check::{outcome, Gate, Verdict};

/// What one body axis was found to be.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum AxisVerdict {
    /// The sensor axis the plan names, with the plan's sign.
    Ok,
    /// The plan's sensor axis, reversed.
    Flipped,
    /// Another sensor axis than the plan's.
    Swapped,
    /// The data cannot tell (an unobservable rotation touches it).
    Inconclusive,
}

impl AxisVerdict {
    /// The word in the JSON and on screen.
    pub fn word(self) -> &'static str {
        match self {
            AxisVerdict::Ok => "ok",
            AxisVerdict::Flipped => "flipped",
            AxisVerdict::Swapped => "swapped",
            AxisVerdict::Inconclusive => "inconclusive",
        }
    }
}

/// Handedness of the measured mapping.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Handedness {
    /// A proper rotation (det +1).
    Right,
    /// A reflection (det −1): an odd number of reversed axes.
    Mirrored,
    /// The field's sign is unknown: a sensor and its mirror fit equally.
    Inconclusive,
}

/// One body axis.
#[derive(Debug, Clone, Serialize)]
pub struct AxisResult {
    /// Body axis: `"x"`, `"y"` or `"z"`.
    pub axis: &'static str,
    /// Its verdict against the plan.
    pub verdict: AxisVerdict,
    /// The signed sensor axis this body axis equals, e.g. `"-z"` (null when inconclusive).
    pub measured: Option<String>,
    /// The signed sensor axis the plan says, e.g. `"+x"`.
    pub planned: String,
}

/// The magnetometer's part of the result (null keys on a hand tumble).
#[derive(Debug, Clone, Serialize)]
pub struct MagAlignment {
    /// Sensor → body, rows; the unconstrained orthogonal fit (improper when mirrored).
    pub sensor_to_body_measured: [[f64; 3]; 3],
    /// Rotation vector (body frame, deg) from the reference mapping (the plan's when every
    /// axis is ok, else the detected signed permutation) to the measured one; null where
    /// unobservable.
    pub misalignment_deg: [Option<f64>; 3],
    /// 1σ of each component, deg (QUEST-type covariance); null where unobservable.
    pub misalignment_sigma_deg: [Option<f64>; 3],
    /// Angle of the misalignment rotation over its observable components, deg.
    pub misalignment_total_deg: f64,
    /// 1σ of `misalignment_total_deg`, deg.
    pub misalignment_total_sigma_deg: f64,
    /// Per body axis x, y, z.
    pub axes: Vec<AxisResult>,
    /// Handedness of the measured mapping.
    pub handedness: Handedness,
    /// The steady field, table frame (L, +z up), nT.
    pub field_table_nt: [f64; 3],
    /// Angle of the field from the table axis, deg.
    pub field_off_axis_deg: f64,
    /// Hard iron fitted jointly, sensor frame (S), nT; null when a calibration was given.
    pub hard_iron_nt: Option<[f64; 3]>,
    /// RMS length of the residual vectors, nT.
    pub residual_rms_nt: f64,
    /// Each reading against the fit, for the report's plots; not in the JSON.
    #[serde(skip)]
    pub points: Vec<AlignPoint>,
}

/// The JSON keys of [`MagAlignment`], all null on a hand tumble.
pub const MAG_KEYS: [&str; 11] = [
    "sensor_to_body_measured",
    "misalignment_deg",
    "misalignment_sigma_deg",
    "misalignment_total_deg",
    "misalignment_total_sigma_deg",
    "axes",
    "handedness",
    "field_table_nt",
    "field_off_axis_deg",
    "hard_iron_nt",
    "residual_rms_nt",
];

/// The magnetometer's keys, flattened into the result: its values, or every key null.
#[derive(Debug, Clone)]
pub struct MagPart(pub Option<MagAlignment>);

impl Serialize for MagPart {
    fn serialize<S: serde::Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeMap;
        match &self.0 {
            Some(m) => m.serialize(s),
            None => {
                let mut map = s.serialize_map(Some(MAG_KEYS.len()))?;
                for k in MAG_KEYS {
                    map.serialize_entry(k, &())?;
                }
                map.end()
            }
        }
    }
}

/// One reading of the turntable against the fit, body frame.
#[derive(Debug, Clone, Copy)]
pub struct AlignPoint {
    /// Index into the result's `mounts`.
    pub mount: usize,
    /// Table heading, deg.
    pub heading_deg: f64,
    /// The reading mapped to the body by the measured mapping (hard iron removed), nT.
    pub measured_body_nt: [f64; 3],
    /// The fitted field at this heading, body frame, nT.
    pub fitted_body_nt: [f64; 3],
}

/// Result of `magproof align`.
#[derive(Debug, Clone, Serialize)]
pub struct AlignResult {
    /// The magnetometer's keys (null on a hand tumble).
    #[serde(flatten)]
    pub magnetometer: MagPart,
    /// Readings used.
    pub samples: usize,
    /// Mount labels used, in log order (empty on a hand tumble).
    pub mounts: Vec<String>,
    /// The gyro's result, when the log has gyro columns and it could be judged.
    pub gyro: Option<GyroResult>,
    /// The limit on `misalignment_total_deg` (magnetometer and gyro), deg.
    pub alignment_max_deg: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// Every gate behind it.
    pub gates: Vec<Gate>,
    /// `pass` of the verdict.
    pub pass: Option<bool>,
    /// Warnings, each with cause and remedy.
    #[serde(serialize_with = "outcome::serialize_tally")]
    pub warnings: Vec<AlignWarning>,
}
