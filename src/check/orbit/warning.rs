//! Warnings of an orbit calibration: each says what was seen and what to do about it.

use std::fmt;

use super::ground::NoGround;
use crate::check::InputWarning;
use crate::text::printable;

/// Something the user should know about an orbit calibration.
#[derive(Debug, Clone, PartialEq)]
pub enum OrbitWarning {
    /// What the input builder found.
    Input(InputWarning),
    /// The element set is old at the log's first sample.
    OldTle {
        /// Days from the element set's epoch to the first sample (negative: before it).
        age_days: f64,
    },
    /// A regressor does not vary: its bias cannot be told from the hard iron.
    ConstantRegressor {
        /// Column name.
        name: String,
    },
    /// The temperature barely varies: no slope was fitted.
    TemperatureSpanSmall {
        /// Span, °C.
        span_c: f64,
    },
    /// Rod commands are regressors: their effect is estimated as a linear bias.
    RodsOn {
        /// Rows with any rod command non-zero.
        rows: usize,
    },
    /// The orbit hard iron moved from the ground calibration beyond 3σ.
    GroundShift {
        /// Build of the ground calibration.
        build: String,
        /// Largest |Δ| / σ over the axes.
        sigmas: f64,
        /// Axis of it.
        axis: &'static str,
        /// Δ on that axis, nT.
        delta_nt: f64,
    },
    /// No ground calibration to compare with, and why.
    NoGround(NoGround),
    /// Many samples were rejected by the robust weights.
    ManyRejected {
        /// Rejected samples.
        rejected: usize,
        /// Samples offered to the fit.
        of: usize,
    },
}

impl fmt::Display for OrbitWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            OrbitWarning::Input(w) => w.fmt(f),
            OrbitWarning::OldTle { age_days } if *age_days < 0.0 => write!(
                f,
                "the log starts {:.1} days before the element set's epoch; propagating \
                 backwards is as uncertain as forwards: use the set nearest the log",
                -age_days
            ),
            OrbitWarning::OldTle { age_days } => write!(
                f,
                "the element set is {age_days:.1} days old at the log's first sample; SGP4 \
                 along-track errors grow by about a kilometre a day: use a set from within a \
                 few days of the log, or logged positions"
            ),
            OrbitWarning::ConstantRegressor { name } => write!(
                f,
                "{name} does not vary in this log: its bias cannot be told from the hard iron \
                 and was not fitted (the hard iron includes it at the logged level)"
            ),
            OrbitWarning::TemperatureSpanSmall { span_c } => write!(
                f,
                "the temperature spans only {span_c:.1} °C: no temperature slope was fitted; \
                 use a log that spans an eclipse season"
            ),
            OrbitWarning::RodsOn { rows } => write!(
                f,
                "rods were commanded in {rows} samples: their field is estimated as a bias per \
                 unit command, which holds only for a settled, linear rod response; samples \
                 taken with the rods off are cleaner"
            ),
            OrbitWarning::GroundShift {
                build,
                sigmas,
                axis,
                delta_nt,
            } => write!(
                f,
                "the hard iron changed since the ground calibration of build {build}: \
                 {delta_nt:+.0} nT on {axis} ({sigmas:.1}σ); check for magnetised parts, new \
                 harness routing or an unmodelled current before replacing the ground values"
            ),
            OrbitWarning::NoGround(why) => no_ground(f, why),
            OrbitWarning::ManyRejected { rejected, of } => write!(
                f,
                "{rejected} of {of} samples were rejected as outliers; look for time-tag \
                 errors, rod firings or unlogged currents"
            ),
        }
    }
}

/// Cause and remedy of a missing ground comparison.
fn no_ground(f: &mut fmt::Formatter<'_>, why: &NoGround) -> fmt::Result {
    match why {
        NoGround::NoSerial => write!(
            f,
            "no ground comparison: the plan has no [article] serial to look the ground \
             calibration up by; add [article] with the serial the ground calibration was \
             recorded under"
        ),
        NoGround::NoLedger { ledger: None } => write!(
            f,
            "no ground comparison: this run reads no ledger; run it with the ledger that \
             holds the ground calibration (closeout without --no-record, or --ledger PATH)"
        ),
        NoGround::NoLedger { ledger: Some(p) } => write!(
            f,
            "no ground comparison: the ledger {} does not exist; name the ledger that holds \
             the ground calibration with --ledger PATH",
            printable(&p.display().to_string())
        ),
        NoGround::NoneRecorded {
            ledger,
            serial,
            sensor,
        } => write!(
            f,
            "no ground comparison: the ledger {} holds no calibrate run of serial {} with {}; \
             record the ground calibration (calibrate LOG --plan P --record{}), or choose the \
             magnetometer it read with --sensor NAME",
            printable(&ledger.display().to_string()),
            printable(serial),
            sensor
                .as_deref()
                .map_or("the unnamed magnetometer".to_string(), |s| format!(
                    "magnetometer {}",
                    printable(s)
                )),
            sensor
                .as_deref()
                .map_or(String::new(), |s| format!(" --sensor {}", printable(s)))
        ),
        NoGround::Incomplete { build, recorded_at } => write!(
            f,
            "no ground comparison: the latest ground calibration (build {}, recorded {}) \
             holds no hard iron with 1σ in the ledger; record a new ground calibration with \
             this version",
            printable(build),
            printable(recorded_at)
        ),
    }
}
