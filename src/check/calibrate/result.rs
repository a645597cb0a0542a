//! What a calibration returns: the result whose JSON keys docs/calibration.md lists,
//! with its cage details, temperature fit and the per-sample data kept for plots.

use nalgebra::Vector3;
use serde::Serialize;

use super::CalibrationWarning;
use crate::check::outcome::{self, Gate, Verdict};
use crate::log::RowLines;

/// Which fit was done.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Coil-cage sweep with known applied fields.
    Cage,
    /// Tumble test in the ambient field.
    Tumble,
}

/// Where the reference magnitude came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ReferenceSource {
    /// Given by the user (command line or request).
    Flag,
    /// The plan's `[site] reference_nt`.
    Plan,
    /// The plan's `[site]` through the geomagnetic model.
    Model,
    /// None: scale fixed by det W = 1.
    Unanchored,
    /// A cage sweep needs none (the applied fields are the reference).
    AppliedField,
}

/// Temperature dependence, when the log's `temp` spans more than 10 °C.
#[derive(Debug, Clone, Serialize)]
pub struct TemperatureFit {
    /// Span of the temperature column, °C.
    pub span_c: f64,
    /// Mean temperature the hard iron refers to, °C.
    pub reference_c: f64,
    /// Bias slope, sensor frame, nT/°C.
    pub slope_nt_per_c: [f64; 3],
    /// 1σ of the slope, nT/°C.
    pub slope_sigma_nt_per_c: [f64; 3],
}

impl TemperatureFit {
    /// From a fitted bias slope and its 1σ (sensor frame, nT/°C) and the temperature
    /// column (°C per used sample, and its span, °C); the reference is the column's mean.
    /// `None` unless all three are there.
    pub(super) fn from_slope(
        slope_nt_per_c: Option<Vector3<f64>>,
        slope_sigma_nt_per_c: Option<Vector3<f64>>,
        temp: Option<(&[f64], f64)>,
    ) -> Option<Self> {
        match (slope_nt_per_c, slope_sigma_nt_per_c, temp) {
            (Some(k), Some(ks), Some((t, span))) => Some(TemperatureFit {
                span_c: span,
                reference_c: t.iter().sum::<f64>() / t.len() as f64,
                slope_nt_per_c: k.into(),
                slope_sigma_nt_per_c: ks.into(),
            }),
            _ => None,
        }
    }
}

/// Cage-only details.
#[derive(Debug, Clone, Serialize)]
pub struct CageDetails {
    /// Response A (reading in S per applied field in the reference frame), rows.
    pub response: [[f64; 3]; 3],
    /// 1σ of each element of A.
    pub response_sigma: [[f64; 3]; 3],
    /// Scale factor of each sensor axis (row lengths of A), dimensionless.
    pub scale_factors: [f64; 3],
    /// 1σ of each scale factor.
    pub scale_factor_sigma: [f64; 3],
    /// Approximate 1σ of `misalignment_deg` and `non_orthogonality_deg`, deg.
    pub angle_sigma_deg: f64,
    /// Non-orthogonality of the sensor axes xy, xz, yz: 90° minus the angle between
    /// their sensitive directions, deg.
    pub non_orthogonality_deg: [f64; 3],
    /// Rotation R of the polar decomposition A = R·S (reference frame → sensor).
    pub rotation: [[f64; 3]; 3],
    /// Symmetric part S of A = R·S.
    pub stretch: [[f64; 3]; 3],
    /// Angle between R and the nominal mounting, deg (nominal: `[magnetometer]
    /// sensor_to_body` with `[cage]`, else sensor axes parallel to the cage axes).
    pub misalignment_deg: f64,
    /// Largest residual vector length, nT.
    pub worst_residual_nt: f64,
    /// File line of the worst residual.
    pub worst_residual_line: u64,
    /// Residual standard deviation per sensor axis, nT.
    pub axis_sigma_nt: [f64; 3],
    /// Condition number of the (equilibrated) normal matrix.
    pub condition_number: f64,
    /// Ratio of the largest to the smallest singular value of the applied fields.
    pub design_condition: f64,
    /// Mean magnitude of the applied fields, nT.
    pub applied_mean_nt: f64,
    /// The sensor axis whose sign is reversed when the response is a reflection
    /// (det A < 0), against the nominal mounting.
    pub flipped_axis: Option<&'static str>,
}

/// Per-sample data kept for plots and reports (not in the JSON).
#[derive(Debug, Clone, Default)]
pub struct CalibrationData {
    /// Readings used by the fit, sensor frame, nT (may be empty without
    /// [`super::CalibrateOptions::keep_samples`]).
    pub samples_nt: Vec<Vector3<f64>>,
    /// Corrected field `W (b − hard_iron)` per sample, `soft_iron_frame`, nT (empty
    /// for a tumble fit asked without [`super::CalibrateOptions::keep_samples`]).
    pub corrected_nt: Vec<Vector3<f64>>,
    /// Residual per sample, nT (tumble: magnitude residual; cage: residual length).
    pub residuals_nt: Vec<f64>,
    /// Whether each sample was kept (false: rejected by the robust fit).
    pub kept: Vec<bool>,
    /// File line of each sample.
    pub lines: RowLines,
    /// Time of each sample, s, when the log has one.
    pub t_s: Option<Vec<f64>>,
}

/// Result of a calibration. The first eleven fields are the stable keys of docs/calibration.md.
#[derive(Debug, Clone, Serialize)]
pub struct CalibrationResult {
    /// `"cage"` or `"tumble"`.
    pub method: Method,
    /// Hard iron, sensor frame (S), nT.
    pub hard_iron_nt: [f64; 3],
    /// Correction W, rows: `b_true ≈ W (b_meas − hard_iron)`, into `soft_iron_frame`.
    pub soft_iron: [[f64; 3]; 3],
    /// Reference field magnitude used, nT (null for a cage sweep or when unanchored).
    pub reference_nt: Option<f64>,
    /// RMS residual, nT (tumble: of |W(b−c)| − R over kept samples; cage: of the
    /// residual vector's length).
    pub residual_rms_nt: f64,
    /// Samples the fit used.
    pub samples_used: usize,
    /// Samples given zero weight by the robust fit or flagged unusable (saturated).
    pub samples_rejected: usize,
    /// 1σ of the hard iron per axis, nT.
    pub hard_iron_sigma_nt: [f64; 3],
    /// Direction coverage 0..1 (fraction of 48 equal-area sphere cells hit).
    pub coverage: f64,
    /// Warnings, each with cause and remedy (as text: each once, with a count).
    #[serde(serialize_with = "outcome::serialize_tally")]
    pub warnings: Vec<CalibrationWarning>,
    /// True only when `verdict` is pass; null when there is nothing to judge against.
    pub pass: Option<bool>,
    /// `pass`, `fail` or `inconclusive`, from the gates.
    pub verdict: Verdict,
    /// Whether every solve converged and the robust reweighting settled.
    pub converged: bool,
    /// Rows left out because a torque rod was on or settling (`cmd_<rod>` columns).
    pub samples_rod_on: usize,
    /// Every gate evaluated, failed or not.
    pub gates: Vec<Gate>,
    // ---- further keys ----
    /// The log file.
    pub log: String,
    /// Frame of `W (b − hard_iron)`: "sensor", "cage" or "body".
    pub soft_iron_frame: &'static str,
    /// 1σ of each element of W.
    pub soft_iron_sigma: [[f64; 3]; 3],
    /// 1σ of `residual_rms_nt`, nT: RMS/√(2n) over the samples used.
    pub residual_rms_sigma_nt: f64,
    /// Where `reference_nt` came from.
    pub reference_source: ReferenceSource,
    /// The residual limit applied, nT.
    pub residual_limit_nt: Option<f64>,
    /// Robust noise estimate (1.4826 × MAD of residuals), nT (tumble).
    pub robust_sigma_nt: Option<f64>,
    /// Temperature dependence, when fitted.
    pub temperature: Option<TemperatureFit>,
    /// Cage-only details.
    pub cage: Option<CageDetails>,
    /// Solver iterations (tumble, summed over reweighting rounds).
    pub iterations: Option<u64>,
    /// Rows the reader skipped (when asked to skip bad rows).
    pub rows_skipped: usize,
    /// Rows flagged as saturated (beyond the range or on a rail) and left out; they are
    /// also counted in `samples_rejected`.
    pub samples_saturated: usize,
    /// Facts about the method the reader should keep in mind.
    pub notes: Vec<String>,
    /// Per-sample data for plots.
    #[serde(skip)]
    pub data: CalibrationData,
}
