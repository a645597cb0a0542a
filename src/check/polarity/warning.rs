//! Warnings of the polarity check: each says its cause and its remedy, and is collected
//! into the result (never printed from the library).

use std::fmt;

use super::DIPOLE_VALID_ROD_LENGTHS;
use crate::check::InputWarning;

/// Something the user should know about a polarity result: cause and remedy.
#[derive(Debug, Clone, PartialEq)]
pub enum PolarityWarning {
    /// A command column with no `[[rod]]` in the plan.
    UnplannedColumn {
        /// The column's header.
        header: String,
    },
    /// The log has gaps longer than five sample intervals.
    Gaps,
    /// A rod was pulsed with one sign only: its remanence is not measured.
    OneSignOnly {
        /// Rod name.
        rod: String,
    },
    /// No command edge far enough inside the log to estimate the lag.
    NoLagEdge,
    /// The lag estimate sits at the edge of the searched range.
    LagAtEdge {
        /// The estimate, s.
        lag_s: f64,
        /// The searched range, ± s.
        max_s: f64,
    },
    /// The plan sets no angle limit; the default was used.
    DefaultAngleLimit {
        /// The default, deg.
        limit_deg: f64,
    },
    /// Two rods' expected fields lie along nearly the same line at the sensor.
    Ambiguous {
        /// First rod.
        a: String,
        /// Second rod.
        b: String,
        /// Angle between their expected lines, deg.
        angle_deg: f64,
        /// The angle limit, deg.
        limit_deg: f64,
    },
    /// The sensor is closer than the point-dipole model's range to a rod.
    CloseToRod {
        /// Rod name.
        rod: String,
        /// Sensor distance, m.
        distance_m: f64,
        /// Distance the model needs, m.
        needed_m: f64,
    },
    /// A rod's fitted rise time constant reached the searched limit.
    RiseAtLimit {
        /// Command column.
        column: String,
        /// The limit, s.
        tau_max_s: f64,
    },
    /// The delay fitted with the rise sits at the edge of the range searched.
    RiseDelayAtEdge {
        /// The delay, s.
        lag_s: f64,
        /// Lower end of the range, s.
        lo_s: f64,
        /// Upper end of the range, s.
        hi_s: f64,
    },
    /// Another magnetometer mapping explains every rod's response; the plan's does not.
    MappingFits {
        /// The sensor axes as they read against the plan's ("z reads −z").
        description: String,
        /// Largest angle of a response from its expected direction under it, deg.
        worst_angle_deg: f64,
    },
    /// Something the input builder found (saturation, skipped rows).
    Input(InputWarning),
}

impl fmt::Display for PolarityWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use PolarityWarning as W;
        match self {
            W::UnplannedColumn { header } => write!(
                f,
                "column \"{header}\" has no [[rod]] in the plan: it is fitted (so it cannot \
                 leak into the others) but gets no verdict"
            ),
            W::Gaps => write!(
                f,
                "the log has gaps longer than five sample intervals; lag and settle times \
                 assume even sampling"
            ),
            W::OneSignOnly { rod } => write!(
                f,
                "rod \"{rod}\" was pulsed with one sign only: its remanence cannot be told \
                 from the baseline and is not measured; pulse it both ways"
            ),
            W::NoLagEdge => write!(
                f,
                "no command edge lies far enough inside the log to estimate the lag; 0 s assumed"
            ),
            W::LagAtEdge { lag_s, max_s } => write!(
                f,
                "the lag estimate {lag_s:.4} s is at the edge of the searched range \
                 (±{max_s:.4} s): the true lag may be larger"
            ),
            W::DefaultAngleLimit { limit_deg } => write!(
                f,
                "the plan sets no [limits] polarity_angle_max_deg: the default {limit_deg}° \
                 is used"
            ),
            W::Ambiguous {
                a,
                b,
                angle_deg,
                limit_deg,
            } => write!(
                f,
                "rods \"{a}\" and \"{b}\" produce fields along nearly the same line at the \
                 sensor ({angle_deg:.1}° apart, limit {limit_deg:.1}°): a swap between them \
                 cannot be seen, both are inconclusive; move the sensor or use a probe elsewhere"
            ),
            W::CloseToRod {
                rod,
                distance_m,
                needed_m,
            } => write!(
                f,
                "rod \"{rod}\": the sensor is {distance_m:.3} m away, less than \
                 {DIPOLE_VALID_ROD_LENGTHS} rod lengths ({needed_m:.3} m), where the point \
                 dipole is poor: the expected direction and the gain ratio use the rod's \
                 two-pole model (poles at its ends; a real core's poles sit somewhat \
                 inside them, docs/polarity.md)"
            ),
            W::RiseAtLimit { column, tau_max_s } => write!(
                f,
                "column \"{column}\": the rise time constant reached the searched limit \
                 {tau_max_s:.4} s (a tenth of the shortest pulse): the rise is not first-order \
                 or the pulses are too short; pulse longer"
            ),
            W::RiseDelayAtEdge { lag_s, lo_s, hi_s } => write!(
                f,
                "the delay fitted with the rise ({lag_s:.4} s) is at the edge of the range \
                 searched around the cross-correlation lag ({lo_s:.4} to {hi_s:.4} s): the \
                 true delay may lie outside it"
            ),
            W::MappingFits {
                description,
                worst_angle_deg,
            } => write!(
                f,
                "the responses fit a magnetometer whose {description} (every rod within \
                 {worst_angle_deg:.1}° of its expected direction), not the plan's mapping: \
                 check the magnetometer's harness and the plan's sensor_to_body"
            ),
            W::Input(w) => write!(f, "{w}"),
        }
    }
}
