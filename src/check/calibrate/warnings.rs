//! Warnings of a calibration: each says what was seen and what to do about it.

use std::fmt;

use crate::check::InputWarning;

/// Something the user should know about a calibration result.
#[derive(Debug, Clone, PartialEq)]
pub enum CalibrationWarning {
    /// No reference magnitude: the scale of W is fixed by det W = 1.
    Unanchored,
    /// The directions cover little of the sphere.
    LowCoverage {
        /// Coverage, 0..1.
        coverage: f64,
    },
    /// The hard iron is much less certain along one axis.
    IllConditioned {
        /// Axis name in the sensor frame (e.g. "z").
        axis: String,
        /// 1σ along that axis, nT.
        worst_sigma_nt: f64,
        /// 1σ along the best axis, nT.
        best_sigma_nt: f64,
    },
    /// A solve stopped before converging.
    NotConverged {
        /// The solver's reason.
        reason: String,
    },
    /// Robust reweighting did not settle.
    ReweightingUnsettled {
        /// Rounds done.
        rounds: usize,
    },
    /// Many samples were rejected.
    ManyRejected {
        /// Rejected samples.
        rejected: usize,
        /// All samples.
        total: usize,
    },
    /// Something the input builder found (saturation, skipped rows).
    Input(InputWarning),
    /// The fitted scale is far from the reference magnitude.
    ScaleMismatch {
        /// det W^(1/3) − 1 as a fraction.
        deviation: f64,
    },
    /// The cage response includes a reflection (det A < 0).
    Reflection {
        /// The sensor axis that looks reversed, when one stands out.
        axis: Option<&'static str>,
    },
    /// Rows with a torque rod on or settling were left out.
    RodsOn {
        /// Rows left out.
        rows: usize,
        /// All rows.
        total: usize,
        /// Command columns in the log.
        columns: usize,
    },
    /// A temperature column is present but spans too little for a slope.
    TemperatureSpanSmall {
        /// Span, °C.
        span_c: f64,
    },
}

impl fmt::Display for CalibrationWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use CalibrationWarning as W;
        match self {
            W::Unanchored => write!(
                f,
                "no reference field magnitude: the scale is unanchored (fixed by det W = 1), \
                 so corrected fields are right in shape but not in size; give the reference \
                 magnitude, or [site] reference_nt or the site's position and date in the plan"
            ),
            W::LowCoverage { coverage } => write!(
                f,
                "coverage is only {coverage:.2} of the sphere: tumble the vehicle through more \
                 orientations (see docs/calibration.md)"
            ),
            W::IllConditioned {
                axis,
                worst_sigma_nt,
                best_sigma_nt,
            } => write!(
                f,
                "the fit is ill-conditioned: hard iron along sensor {axis} is poorly observed \
                 (1σ {worst_sigma_nt:.1} nT against {best_sigma_nt:.1} nT on the best axis); \
                 add orientations that point the field along and against {axis}"
            ),
            W::NotConverged { reason } => write!(
                f,
                "the solver stopped before converging ({reason}): the result may be inexact"
            ),
            W::ReweightingUnsettled { rounds } => write!(
                f,
                "robust reweighting had not settled after {rounds} rounds: look for a \
                 disturbance that lasts much of the log"
            ),
            W::ManyRejected { rejected, total } => write!(
                f,
                "{rejected} of {total} samples were rejected as outliers: check for torque-rod \
                 firings, moving magnetic objects or a varying ambient field during the test"
            ),
            W::Input(w) => write!(f, "{w}"),
            W::ScaleMismatch { deviation } => write!(
                f,
                "the fitted scale differs from the reference magnitude by {:.1} %: check the \
                 reference field and the log's field unit",
                deviation * 100.0
            ),
            W::Reflection { axis } => match axis {
                Some(a) => write!(
                    f,
                    "the cage response contains a reflection (det A < 0): sensor {a} reads \
                     against the plan's mounting; check that axis's wiring and the plan's \
                     sensor_to_body"
                ),
                None => write!(
                    f,
                    "the cage response contains a reflection (det A < 0): a sensor axis or a \
                     coil pair is wired or labelled with the wrong sign"
                ),
            },
            W::RodsOn {
                rows,
                total,
                columns,
            } => write!(
                f,
                "{rows} of {total} rows had a torque rod on or settling ({columns} command \
                 column(s)) and were left out of the fit; calibrate with the rods off"
            ),
            W::TemperatureSpanSmall { span_c } => write!(
                f,
                "temperature spans only {span_c:.1} °C (10 °C needed): no bias slope fitted"
            ),
        }
    }
}
