//! Warnings of the dipole check: each says its cause and its remedy, and is collected
//! into the result (never printed from the library).

use std::fmt;

use serde::{Serialize, Serializer};

use super::DEFAULT_INCLINATION_DEG;
use crate::check::InputWarning;

/// Something the user should know about a dipole result: cause and remedy.
#[derive(Debug, Clone, PartialEq)]
pub enum DipoleWarning {
    /// The field does not vary with this body direction of the moment under the mounts
    /// and positions given: it is seen only against the background level.
    HiddenComponent {
        /// Body direction in words ("z", or a unit vector).
        component: String,
        /// Singular-value ratio of the varying part of the design.
        ratio: f64,
    },
    /// Only one background segment: drift cannot be estimated.
    SingleBackgroundSegment,
    /// Article-present rows before the first or after the last background segment.
    OutsideBackground {
        /// Rows before the first segment.
        before: usize,
        /// Rows after the last segment.
        after: usize,
    },
    /// The log has no time column; row order stands in for time.
    NoTimeColumn,
    /// Static map rows at positions without background rows of their own: the
    /// room-wide background was used, which assumes a uniform ambient field.
    UniformAmbientAssumed {
        /// Article rows concerned.
        rows: usize,
    },
    /// The inclination was not given; the default was used.
    DefaultInclination,
    /// Something the input builder found (saturation, skipped rows).
    Input(InputWarning),

    /// The verdict lies within 2σ of the limit.
    NearLimit {
        /// The limit, A·m².
        limit_am2: f64,
    },
}

impl fmt::Display for DipoleWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            DipoleWarning::HiddenComponent { component, ratio } => write!(
                f,
                "the moment along body {component} does not change the field as the table \
                 turns (singular-value ratio {ratio:.1e}), so it is seen only against the \
                 background level and rests on the background segments and drift model; \
                 add a mount that lays body {component} across the table axis"
            ),
            DipoleWarning::SingleBackgroundSegment => write!(
                f,
                "only one background segment: drift cannot be estimated; record an \
                 article-absent segment before and after the article"
            ),
            DipoleWarning::OutsideBackground { before, after } => write!(
                f,
                "{before} article rows precede the first and {after} follow the last \
                 background segment: drift there is not corrected; record background at \
                 both ends"
            ),
            DipoleWarning::NoTimeColumn => write!(
                f,
                "no time column: row order stands in for time in the drift model; log `t`"
            ),
            DipoleWarning::UniformAmbientAssumed { rows } => write!(
                f,
                "{rows} rows of the static map lie at probe positions with no background \
                 rows of their own, so the ambient field is assumed the same at every \
                 position (room gradients go into the moment); log article-absent rows at \
                 each position"
            ),
            DipoleWarning::DefaultInclination => write!(
                f,
                "orbit inclination not given: {DEFAULT_INCLINATION_DEG}° (sun-synchronous) \
                 assumed; give the planned orbit in the plan's [orbit] table (inclination_deg, \
                 altitude_km), or --inclination-deg to dipole"
            ),
            DipoleWarning::Input(w) => write!(f, "{w}"),
            DipoleWarning::NearLimit { limit_am2 } => write!(
                f,
                "the magnitude lies within 2σ of the limit {limit_am2} A·m²: the verdict is \
                 not firm; measure longer or closer"
            ),
        }
    }
}

impl Serialize for DipoleWarning {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.collect_str(self)
    }
}
