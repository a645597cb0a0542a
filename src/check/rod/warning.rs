//! Warnings of the rod bench check: each says its cause and its remedy, and is collected
//! into the result (never printed from the library).

use std::fmt;

use serde::{Serialize, Serializer};

use crate::check::InputWarning;

/// Something the user should know about a rod bench result: cause and remedy.
#[derive(Debug, Clone, PartialEq)]
pub enum RodWarning {
    /// A probe station is closer than three rod lengths: the point-dipole reading of the
    /// field is poor there.
    CloseStation {
        /// Station label.
        label: String,
        /// Distance from the rod's centre, m.
        distance_m: f64,
        /// Three rod lengths, m.
        needed_m: f64,
    },
    /// The plan gives no rated current; the largest current logged stands in.
    NoRatedCurrent {
        /// The largest |I| logged, A.
        current_a: f64,
    },
    /// No current level of the log lies at the rated current.
    RatedCurrentNotLogged {
        /// The rated current, A.
        current_a: f64,
    },
    /// A position has a single rod-off segment: its drift cannot be estimated.
    SingleBackground {
        /// Station label.
        label: String,
    },
    /// No rod-off segment after +I or after −I: remanence cannot be measured.
    NoRemanenceSegments,
    /// `core_mu_r` is given without `core_diameter_m`: no cored prediction.
    NoCoreDiameter,
    /// The fall-off exponent needs stations at two distances along the axis or broadside.
    NoFalloff,
    /// The probe field lags the current by more than the sampling resolves.
    TimeConstantUnresolved,
    /// Something the input builder found (saturation, skipped rows).
    Input(InputWarning),
}

impl fmt::Display for RodWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            RodWarning::CloseStation {
                label,
                distance_m,
                needed_m,
            } => write!(
                f,
                "station \"{label}\" is {distance_m:.3} m from the rod's centre, closer than \
                 three rod lengths ({needed_m:.3} m): the moment rests on the finite-rod model \
                 there; measure at least three rod lengths away"
            ),
            RodWarning::NoRatedCurrent { current_a } => write!(
                f,
                "no limits.rod_current_max_a in the plan: the largest current logged \
                 ({current_a:.4} A) stands in for the rated current; give the rod's rating"
            ),
            RodWarning::RatedCurrentNotLogged { current_a } => write!(
                f,
                "no current level lies at the rated current {current_a} A, so the moment there \
                 was not measured; include a step at the rated current"
            ),
            RodWarning::SingleBackground { label } => write!(
                f,
                "station \"{label}\" has one rod-off segment: its drift cannot be estimated; \
                 record rod-off rows at the start and the end of each station"
            ),
            RodWarning::NoRemanenceSegments => write!(
                f,
                "no rod-off step after both +I and −I: the remanence was not measured; return \
                 to zero current after each polarity's staircase"
            ),
            RodWarning::NoCoreDiameter => write!(
                f,
                "core_mu_r is given without core_diameter_m: no cored prediction; give the \
                 core's diameter"
            ),
            RodWarning::NoFalloff => write!(
                f,
                "no fall-off exponent: it needs stations at two or more distances on the \
                 rod's axis (or broadside)"
            ),
            RodWarning::TimeConstantUnresolved => write!(
                f,
                "the log does not resolve the rod's time constant (fewer than 5 samples per \
                 time constant); log faster to measure it"
            ),
            RodWarning::Input(w) => write!(f, "{w}"),
        }
    }
}

impl Serialize for RodWarning {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}
