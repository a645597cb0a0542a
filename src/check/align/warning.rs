//! What the alignment check warns about; each text says cause and remedy.

use std::fmt;

use crate::check::InputWarning;

/// A warning of the alignment check.
#[derive(Debug, Clone, PartialEq)]
pub enum AlignWarning {
    /// Something the input builder found.
    Input(InputWarning),
    /// No calibration was given: the hard iron was fitted with the mapping.
    HardIronFitted,
    /// Neither `[align_test] field_table_nt` nor `[site]` gives the field's vertical
    /// sign, or the field is too close to horizontal: handedness cannot be decided.
    FieldSignUnknown,
    /// The field is this close to the table axis, deg (below 25° the headings barely
    /// move it in the body frame).
    FieldNearTableAxis {
        /// Angle between the field and table +z (or −z), deg.
        angle_deg: f64,
    },
    /// Only one mount: the rotation about its vertical body axis is unobservable.
    OneMount,
    /// A hand tumble without a calibration: the field in `−ω × B` carries the hard iron.
    TumbleUncalibrated,
    /// The log has gyro columns but the gyro could not be judged on the turntable.
    GyroNotJudged {
        /// Why, with the remedy.
        reason: String,
    },
    /// A mount's headings leave a gap in the circle, deg.
    HeadingGap {
        /// The mount's label.
        mount: String,
        /// Largest gap between consecutive headings, deg.
        gap_deg: f64,
        /// Distinct headings.
        headings: usize,
    },
}

impl fmt::Display for AlignWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            AlignWarning::Input(w) => w.fmt(f),
            AlignWarning::HardIronFitted => f.write_str(
                "no calibration was given: the hard iron was fitted together with the mapping \
                 (hard_iron_nt); give align the calibration JSON that calibrate wrote to fix it \
                 instead",
            ),
            AlignWarning::FieldSignUnknown => f.write_str(
                "the field's vertical sign is not known (no [align_test] field_table_nt, no \
                 [site] date or the field nearly horizontal): a sensor and its mirror explain \
                 the data equally, so handedness is inconclusive and axis signs were taken as \
                 the explanation closest to the plan; give field_table_nt from a reference probe",
            ),
            AlignWarning::FieldNearTableAxis { angle_deg } => write!(
                f,
                "the field is only {angle_deg:.1}° from the table axis (below 25°): turning \
                 the table barely moves it and the mapping is poorly seen; tilt the table or \
                 use a cage field well off vertical (common practice: ≥ 30°)"
            ),
            AlignWarning::OneMount => f.write_str(
                "only one mount: the rotation about its vertical body axis is unobservable, so \
                 that component is null and the axes it touches are inconclusive; add a mount \
                 with another body axis up",
            ),
            AlignWarning::TumbleUncalibrated => f.write_str(
                "hand tumble without a calibration: the field in −ω × B still carries the hard \
                 iron (a bias of h/|B| of the gyro's scale, typically under 1 %); give align the \
                 calibration JSON that calibrate wrote",
            ),
            AlignWarning::GyroNotJudged { reason } => {
                write!(f, "the gyro columns were not judged: {reason}")
            }
            AlignWarning::HeadingGap {
                mount,
                gap_deg,
                headings,
            } => write!(
                f,
                "mount \"{mount}\": {headings} headings leave a {gap_deg:.0}° gap; take at \
                 least 8 headings spread over 360°"
            ),
        }
    }
}
