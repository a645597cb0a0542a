//! What the polarity check returns: the result whose JSON keys docs/polarity.md lists,
//! each pulse and what it left behind, and the decimated series kept for plots.

use serde::Serialize;

use super::{PolarityWarning, SensorChoice, Verdict};
use crate::check::outcome::{self, Gate};

/// One rod's result; the first six keys are the stable ones of docs/polarity.md.
#[derive(Debug, Clone, Serialize)]
pub struct RodResult {
    /// Rod name.
    pub name: String,
    /// Verdict.
    pub verdict: Verdict,
    /// Angle between measured and expected response, deg; null if the coupling is zero.
    pub angle_to_expected_deg: Option<f64>,
    /// Measured response per unit command, sensor frame (S), nT per command unit.
    pub coupling_nt_per_command: [f64; 3],
    /// |coupling| over its 1σ along its own direction.
    pub snr: f64,
    /// Dipole inferred from the coupling through the geometry over the nominal
    /// `dipole_per_command_am2`; null without a nominal.
    pub gain_ratio: Option<f64>,
    /// 1σ of `gain_ratio`.
    pub gain_ratio_sigma: Option<f64>,
    /// True when the expected field comes from a model valid at the sensor's distance:
    /// the point dipole from three rod lengths on (common practice), the two-pole model
    /// closer; null when the plan gives no `length_m`.
    pub gain_reliable: Option<bool>,
    /// 1σ of the coupling per sensor axis, nT per command unit.
    pub coupling_sigma_nt_per_command: [f64; 3],
    /// 1σ of the angle, deg.
    pub angle_sigma_deg: Option<f64>,
    /// Expected field at the sensor per A·m² of this rod's positive dipole, sensor
    /// frame (S), nT/(A·m²).
    pub expected_nt_per_am2: [f64; 3],
    /// The model that gave `expected_nt_per_am2`: `point-dipole`, or `two-pole` within
    /// three rod lengths of a rod whose `length_m` the plan gives.
    pub expected_model: super::finite::RodFieldModel,
    /// Dipole inferred from the coupling: |coupling| / |expected per A·m²|, A·m² per
    /// command unit.
    pub dipole_per_command_am2: f64,
    /// For `wrong-axis`: the rod whose expected direction the response matches.
    pub matches_rod: Option<String>,
    /// For `wrong-axis`: whether it matches that rod's direction reversed.
    pub matches_reversed: Option<bool>,
    /// Distance rod centre → sensor, m.
    pub distance_m: f64,
    /// Longest settle time over this rod's pulses, s, from command off (includes the
    /// lag): what a magnetometer blanking window must cover. Null if none was measured.
    pub settle_time_s: Option<f64>,
    /// Remanent field once the rod is off after a positive pulse (the opposite after a
    /// negative one): half the difference between the two, sensor frame, nT; fitted with
    /// the couplings (rows before the first pulse are taken to sit at the midpoint).
    /// Null when the rod was pulsed with one sign only.
    pub remanent_offset_nt: Option<[f64; 3]>,
    /// 1σ of `remanent_offset_nt` per axis, nT.
    pub remanent_offset_sigma_nt: Option<[f64; 3]>,
    /// Time constant of the first-order rise of the rod's field after the delay `lag_s`,
    /// s (0: a step within one sample).
    pub rise_time_s: Option<f64>,
    /// 1σ of `rise_time_s`, s; null when the rise was not fitted (a step, or no response).
    pub rise_time_sigma_s: Option<f64>,
    /// Why this verdict, in words.
    pub note: String,
}

/// One pulse and what it left behind.
#[derive(Debug, Clone, Serialize)]
pub struct PulseResult {
    /// Rod (command column without `cmd_`).
    pub rod: String,
    /// Time the command turned on, s.
    pub t_on_s: f64,
    /// Time the command turned off, s.
    pub t_off_s: f64,
    /// Mean command during the pulse, command units.
    pub command: f64,
    /// From command off until the field stays within 3σ of its settled level, s
    /// (includes the lag); null if it did not settle before the next pulse.
    pub settle_time_s: Option<f64>,
    /// Settled field after the pulse minus before it, sensor frame, nT.
    pub step_nt: Option<[f64; 3]>,
    /// 1σ of `step_nt` per axis, nT.
    pub step_sigma_nt: Option<[f64; 3]>,
}

/// Series for plots: every row inside the stacked pulse windows, and elsewhere rows
/// thinned evenly to about [`PolaritySeries::MAX_POINTS`] over the log.
#[derive(Debug, Clone, Default)]
pub struct PolaritySeries {
    /// Time, s.
    pub t_s: Vec<f64>,
    /// Measured field minus the fitted drift, sensor frame, nT.
    pub field_minus_drift_nt: [Vec<f64>; 3],
    /// Fitted rod response (couplings × lag-shifted commands), sensor frame, nT.
    pub model_nt: [Vec<f64>; 3],
    /// Lag-shifted commands, one vector per command column (plan rods first).
    pub commands: Vec<Vec<f64>>,
    /// Per row: true when it belongs to the evenly thinned series the time plot draws
    /// (the other rows are kept for the stacked pulse view only).
    pub thinned: Vec<bool>,
}

impl PolaritySeries {
    /// Number of points the evenly thinned series holds at most.
    pub const MAX_POINTS: usize = 4000;
    /// Pulses per rod the stacked view draws, and keeps at full resolution.
    pub const STACK_PULSES_MAX: usize = 200;
}

/// Result of the polarity check; the first keys are the stable ones of docs/polarity.md.
#[derive(Debug, Clone, Serialize)]
pub struct PolarityResult {
    /// One entry per plan rod, in plan order.
    pub rods: Vec<RodResult>,
    /// Command-to-response pure delay, s (positive: the response follows the command);
    /// each rod's first-order rise comes after it (`rods[].rise_time_s`).
    pub lag_s: f64,
    /// 1σ of `lag_s`, s (for step responses: one sample interval over √12, as a step is
    /// seen the same for any delay within one sample).
    pub lag_sigma_s: f64,
    /// Every rod `ok`.
    pub pass: bool,
    /// Angle limit applied, deg.
    pub angle_max_deg: f64,
    /// Where the angle limit came from: "plan" or "default".
    pub angle_max_source: &'static str,
    /// SNR threshold for `no-response`.
    pub snr_min: f64,
    /// Which sensor's geometry was used.
    pub sensor: SensorChoice,
    /// Coupling matrix, sensor frame, nT per command unit: rows = sensor x, y, z;
    /// columns = rods in plan order.
    pub coupling_matrix_nt_per_command: Vec<Vec<f64>>,
    /// White-noise σ per sensor axis, nT (from first differences with every rod off).
    pub noise_sigma_nt: [f64; 3],
    /// Residual σ per sensor axis of the final fit, nT.
    pub residual_sigma_nt: [f64; 3],
    /// Drift terms used.
    pub drift: String,
    /// Rows with non-zero weight in the final fit.
    pub samples_used: usize,
    /// Rows flagged as saturated (beyond the range or on a rail) and left out.
    pub samples_saturated: usize,
    /// Every pulse found.
    pub pulses: Vec<PulseResult>,
    /// Anything the user should know (cause and remedy; each once, with a count).
    #[serde(serialize_with = "outcome::serialize_tally")]
    pub warnings: Vec<PolarityWarning>,
    /// `pass`, `fail` or `inconclusive`, from the gates.
    pub verdict: crate::check::Verdict,
    /// Every gate evaluated, failed or not.
    pub gates: Vec<Gate>,
    /// Decimated series for plots.
    #[serde(skip)]
    pub series: PolaritySeries,
}
