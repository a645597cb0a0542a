//! What the rod bench check returns: the result whose JSON keys docs/rods.md lists, the
//! moment of every current level, the probe stations, and the step responses kept for
//! plots.

use serde::Serialize;

use super::RodWarning;
use crate::check::outcome::{Gate, Verdict};

/// The rod's polarity against its marked +axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RodPolarity {
    /// A positive current gives a moment along the marked +axis.
    Ok,
    /// A positive current gives a moment against it.
    Reversed,
}

/// One current level: the moment fitted over every station.
#[derive(Debug, Clone, Serialize)]
pub struct RodLevel {
    /// Mean current of the level, A.
    pub current_a: f64,
    /// Moment along the rod's +axis, A·m².
    pub moment_am2: f64,
    /// 1σ of `moment_am2`, A·m².
    pub moment_sigma_am2: f64,
    /// Time the level started at the first station, s.
    pub t_start_s: f64,
}

/// One probe station.
#[derive(Debug, Clone, Serialize)]
pub struct RodStation {
    /// Label in the log's `position` column.
    pub label: String,
    /// Distance from the rod's centre, m.
    pub distance_m: f64,
    /// That distance in rod lengths.
    pub rod_lengths: f64,
    /// Axial field per ampere (slope of B_z against I over the slope's levels), rod
    /// frame, nT/A.
    pub field_per_amp_nt_per_a: f64,
    /// 1σ of `field_per_amp_nt_per_a`.
    pub field_per_amp_sigma: f64,
    /// "on-axis", "broadside" or "oblique".
    pub kind: &'static str,
}

/// A step response: the normalised approach of the probe field to its new level.
#[derive(Debug, Clone)]
pub struct StepResponse {
    /// Current before and after the step, A.
    pub from_to_a: (f64, f64),
    /// (time since the step, s; remaining fraction of the change, 1 → 0).
    pub points: Vec<(f64, f64)>,
}

/// Result of `magproof rod` (the keys of docs/rods.md "JSON keys" first; more after).
#[derive(Debug, Clone, Serialize)]
pub struct RodResult {
    /// Slope of m(I) through the levels with |I| ≤ half the largest current, A·m²/A.
    pub moment_per_amp_am2_per_a: f64,
    /// 1σ of the slope.
    pub moment_per_amp_sigma: f64,
    /// Nominal air-core moment per ampere N·A, A·m²/A.
    pub air_core_am2_per_a: f64,
    /// Measured slope over the air-core value.
    pub core_gain: f64,
    /// The cored prediction over the air-core value (prolate-ellipsoid demagnetising
    /// factor, an approximation); null without `core_mu_r` and `core_diameter_m`.
    pub core_gain_predicted: Option<f64>,
    /// Largest deviation of a level's moment from the line, % of the line at the rated
    /// current.
    pub linearity_max_dev_pct: f64,
    /// Smallest |I| where the incremental gain falls to half the slope, A; null if never.
    pub saturation_current_a: Option<f64>,
    /// Remanence: half the difference of the moments at I = 0 after +I and after −I,
    /// along the marked +axis, A·m²; null without both.
    pub remanence_am2: Option<f64>,
    /// 1σ of `remanence_am2`.
    pub remanence_sigma_am2: Option<f64>,
    /// Remanence in % of |m| at the rated current.
    pub remanence_pct: Option<f64>,
    /// Time constant of the probe field after a current step, s; null when unresolved.
    pub time_constant_s: Option<f64>,
    /// Fall-off exponent of the field with distance (−3 for a point dipole); null
    /// without two distances.
    pub falloff_exponent: Option<f64>,
    /// "ok" or "reversed".
    pub polarity: RodPolarity,
    /// `pass`, `fail`, `inconclusive` or `no-limit`, from the gates.
    pub verdict: Verdict,
    /// Every gate evaluated, failed or not.
    pub gates: Vec<Gate>,
    /// True only when `verdict` is pass; null without a limit.
    pub pass: Option<bool>,
    /// Cautions, each with cause and remedy.
    #[serde(serialize_with = "crate::check::outcome::serialize_tally")]
    pub warnings: Vec<RodWarning>,
    /// The rod's serial.
    pub serial: String,
    /// The rod's batch, when the plan gives one.
    pub batch: Option<String>,
    /// Intercept of the m(I) line, A·m².
    pub intercept_am2: f64,
    /// The rated current the figures are judged at, A.
    pub rod_current_max_a: f64,
    /// Measured |m| at the rated current, A·m²; null when no level lies there.
    pub moment_at_max_am2: Option<f64>,
    /// 1σ of `moment_at_max_am2`.
    pub moment_at_max_sigma_am2: Option<f64>,
    /// Demagnetising factor used for the prediction (prolate ellipsoid, Osborn 1945).
    pub demag_factor: Option<f64>,
    /// 1σ of `time_constant_s`.
    pub time_constant_sigma_s: Option<f64>,
    /// Uncertainty of `falloff_exponent` as a reading of −3: the measurement's 1σ plus
    /// how far a uniformly magnetised rod of this size departs from −3 at the stations
    /// used (the point-dipole model's own error there).
    pub falloff_exponent_sigma: Option<f64>,
    /// The measurement's 1σ of `falloff_exponent` alone.
    pub falloff_exponent_measurement_sigma: Option<f64>,
    /// What a uniformly magnetised rod of the plan's size gives at those stations.
    pub falloff_exponent_finite_rod: Option<f64>,
    /// Which stations gave the fall-off: "on-axis" or "broadside".
    pub falloff_stations: Option<&'static str>,
    /// Every current level in time order.
    pub levels: Vec<RodLevel>,
    /// Every station.
    pub stations: Vec<RodStation>,
    /// Rows used (settled, rod on or off).
    pub rows_used: usize,
    /// Rows between levels (runs shorter than a step: ramps, demagnetising) left out.
    pub rows_between_levels: usize,
    /// Step responses, for plots.
    #[serde(skip)]
    pub responses: Vec<StepResponse>,
}
