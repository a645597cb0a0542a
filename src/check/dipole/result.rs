//! What the dipole check returns: the result whose JSON keys docs/dipole.md lists, the
//! moment as a share of each rod's authority, and the per-sample points kept for plots.

use nalgebra::Vector3;
use serde::Serialize;

use super::{BackgroundSegment, DipoleWarning};
use crate::check::outcome::{Gate, Verdict};

/// How the field was mapped.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DipoleMethod {
    /// Article turned on a turntable, fixed probe.
    Turntable,
    /// Article fixed, probe at several positions.
    Static,
}

/// The residual dipole as a fraction of one torque rod's nominal dipole.
#[derive(Debug, Clone, Serialize)]
pub struct RodFraction {
    /// Rod name.
    pub name: String,
    /// The plan's `dipole_per_command_am2` (the rod's dipole at command 1), A·m².
    pub nominal_dipole_am2: f64,
    /// |m| over the nominal dipole.
    pub residual_fraction: f64,
    /// 1σ of that fraction.
    pub residual_fraction_sigma: f64,
}

/// One article-present sample, for plots (field against table angle, per mount).
#[derive(Debug, Clone)]
pub struct DipolePoint {
    /// Time, s (row index when the log has no time).
    pub t_s: f64,
    /// Turntable angle, rad (0 for the static method).
    pub angle_rad: f64,
    /// Index into [`DipoleResult::mount_labels`].
    pub mount: usize,
    /// Probe position, table frame, m.
    pub probe_m: Vector3<f64>,
    /// Measured minus background, table frame, nT.
    pub measured_nt: Vector3<f64>,
    /// Fitted model, table frame, nT.
    pub model_nt: Vector3<f64>,
    /// File line of the row.
    pub line: u64,
}

/// Result of `magproof dipole` (the keys of docs/dipole.md "JSON keys" first; more keys after).
#[derive(Debug, Clone, Serialize)]
pub struct DipoleResult {
    /// Fitted moment, body frame (B), A·m².
    pub moment_body_am2: [f64; 3],
    /// |m|, A·m².
    pub magnitude_am2: f64,
    /// 1σ of each moment component, body frame, A·m².
    pub moment_sigma_am2: [f64; 3],
    /// RMS of (measured − background − model) over all components, nT.
    pub residual_rms_nt: f64,
    /// Orbit altitude, km.
    pub altitude_km: f64,
    /// Worst-case disturbance torque |m|·Bmax, N·m.
    pub orbit_torque_max_n_m: f64,
    /// True only when `verdict` is pass; null without a limit.
    pub pass: Option<bool>,
    /// `pass`, `fail` or `no-limit`, from the gates.
    pub verdict: Verdict,
    /// Every gate evaluated, failed or not.
    pub gates: Vec<Gate>,
    /// "turntable" or "static".
    pub method: DipoleMethod,
    /// 1σ of |m|, A·m².
    pub magnitude_sigma_am2: f64,
    /// Dipole position, body frame relative to the body point at the table origin, m;
    /// null unless fitted.
    pub offset_m: Option<[f64; 3]>,
    /// 1σ of `offset_m`, m.
    pub offset_sigma_m: Option<[f64; 3]>,
    /// Orbit inclination used, deg.
    pub inclination_deg: f64,
    /// Largest field magnitude on the orbit, nT.
    pub orbit_field_max_nt: f64,
    /// Orbit-average field magnitude, nT.
    pub orbit_field_mean_nt: f64,
    /// The field model used for the orbit.
    pub orbit_field_model: String,
    /// 1σ of the worst-case torque, N·m.
    pub orbit_torque_max_sigma_n_m: f64,
    /// Orbit-average torque with m ⊥ B throughout (attitude-independent bound), N·m.
    pub orbit_torque_mean_n_m: f64,
    /// 1σ of the orbit-average torque, N·m (from the σ of |m|).
    pub orbit_torque_mean_sigma_n_m: f64,
    /// |m| as a fraction of each rod's nominal dipole.
    pub rods: Vec<RodFraction>,
    /// The plan's limit, A·m².
    pub residual_dipole_max_am2: Option<f64>,
    /// Article-present samples fitted.
    pub samples_used: usize,
    /// Article-absent samples used for the background.
    pub background_samples: usize,
    /// Background segments found.
    pub background_segments: usize,
    /// Log rows skipped as asked (bad rows skipped, not refused).
    pub rows_skipped: usize,
    /// Rows flagged as saturated (beyond the range or on a rail) and left out.
    pub samples_saturated: usize,
    /// Solver iterations of the offset fit (0 for the linear fit).
    pub iterations: u64,
    /// Body directions ("x", "y", "z" or a unit vector) the mounts given cannot resolve
    /// from the table's turning: seen only against the background level.
    pub hidden_components: Vec<String>,
    /// Cautions, each with cause and remedy.
    pub warnings: Vec<DipoleWarning>,
    /// Mount labels, indexed by [`DipolePoint::mount`].
    #[serde(skip)]
    pub mount_labels: Vec<String>,
    /// Per-sample measured and model fields, for plots.
    #[serde(skip)]
    pub points: Vec<DipolePoint>,
    /// Background segments, for plots.
    #[serde(skip)]
    pub background: Vec<BackgroundSegment>,
}
