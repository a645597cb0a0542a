//! Warnings of a loop check: each says what was seen and what to do about it.

use std::fmt;

use crate::check::InputWarning;

/// Something the user should know about a loop check.
#[derive(Debug, Clone, PartialEq)]
pub enum LoopWarning {
    /// What the input builder found.
    Input(InputWarning),
    /// No calibration was applied to the readings.
    NoCalibration,
    /// The plan has no `[magnetometer]`: the sensor frame was taken as the body frame.
    MagnetometerMappingAssumed,
    /// Gyro columns but no `[gyro]`: the gyro frame was taken as the body frame.
    GyroMappingAssumed,
    /// The body rate came from the field alone.
    RateFromField,
    /// An angle column but no `[align_test]` mounts to map it.
    TableWithoutMounts,
    /// Rods were commanded and the plan gives no coupling for them.
    NoCoupling {
        /// Rods without `coupling_nt_per_command`.
        rods: String,
    },
    /// Commands at the limit were left out of a rod's regression.
    Saturated {
        /// Rod.
        rod: String,
        /// Rows at the limit.
        count: usize,
        /// Rows compared.
        of: usize,
        /// Whether the limit came from the plan (else the log's largest command).
        from_plan: bool,
    },
    /// A rod was judged by sign agreement only.
    SignOnly {
        /// Rod.
        rod: String,
    },
    /// The log commands a rod the plan does not list.
    UnplannedCommand {
        /// Column as written.
        column: String,
    },
    /// A rate law checked without a gyro in the log.
    RateLawWithoutGyro,
}

impl fmt::Display for LoopWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            LoopWarning::Input(w) => w.fmt(f),
            LoopWarning::NoCalibration => f.write_str(
                "no magnetometer calibration was applied: the hard iron biases the torque \
                 (τ = m × B) though not Ḃ, so the power in watts is approximate (a B-dot \
                 law's rod verdicts rest on Ḃ alone); give the loop check the calibration JSON \
                 that calibrate wrote (a closeout step uses the readings as logged)",
            ),
            LoopWarning::MagnetometerMappingAssumed => f.write_str(
                "the plan has no [magnetometer]: sensor axes were taken as body axes; give \
                 its sensor_to_body so a mapping error in the software shows",
            ),
            LoopWarning::GyroMappingAssumed => f.write_str(
                "the log has gyro columns and the plan no [gyro]: gyro axes were taken as \
                 body axes; give [gyro] sensor_to_body",
            ),
            LoopWarning::RateFromField => f.write_str(
                "the body rate comes from the field alone (ω⊥ = Ḃ × B/|B|²): the part along B \
                 is unseen (it gives no torque power either) and the gyro is not checked; log \
                 gx gy gz or the table angle to check against an independent rate",
            ),
            LoopWarning::TableWithoutMounts => f.write_str(
                "the log has a table angle but the plan no [align_test] mounts: the rate was \
                 taken from the field instead; add [[align_test.mount]] entries",
            ),
            LoopWarning::NoCoupling { rods } => write!(
                f,
                "rods {rods} were commanded and the plan gives no coupling_nt_per_command for \
                 them: their own field in the readings was not removed; measure it with \
                 polarity and give it in [[rod]]"
            ),
            LoopWarning::Saturated {
                rod,
                count,
                of,
                from_plan,
            } => write!(
                f,
                "rod {rod}: {count} of {of} commands sit at the limit ({}) and carry only their \
                 sign: they were left out of the regression",
                if *from_plan {
                    "command_max of the plan"
                } else {
                    "the log's largest command; give [[rod]] command_max"
                }
            ),
            LoopWarning::SignOnly { rod } => write!(
                f,
                "rod {rod}: too few commands below the limit for a regression; judged by the \
                 agreement of signs only (slope null); lower the gain or the rate for a test \
                 that exercises the linear range"
            ),
            LoopWarning::UnplannedCommand { column } => write!(
                f,
                "{column} names a rod the plan does not list; it was not checked: add the rod \
                 to [[rod]]"
            ),
            LoopWarning::RateLawWithoutGyro => f.write_str(
                "the plan's law is \"rate\" and the log has no gyro columns: the software's \
                 own rate is not seen; log gx gy gz as the software reads them",
            ),
        }
    }
}
