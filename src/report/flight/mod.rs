//! Flight parameters a flight team can paste: one JSON file and one C header written
//! from the same [`FlightParams`], with one naming prefix ([`PREFIX`]), `double` and
//! `float` arrays, and the identity and provenance of every number (serial, build,
//! date, tool version, SHA-256 of every input). The layout is documented in
//! `docs/flight-parameters.md`.
//!
//! What goes in comes from the results that measured it
//! ([`FlightPart`](crate::check::FlightPart)): a calibration
//! gives each magnetometer's hard iron and W, a polarity check the rods' coupling at the
//! magnetometer, their measured dipole per command and the blanking window
//! ([`blanking`]). Flight software applies them in one order, per magnetometer
//! ([`ORDER_OF_OPERATIONS`]): subtract the rods' coupling from the raw reading, then
//! `W · (b − c)`, then `sensor_to_body`.
//!
//! Written only for a passing verdict; with `--force` for any other, and then the file
//! says so (`verdict_passed: false`, `MAGPROOF_VERDICT_PASSED 0` and a warning).

pub mod blanking;
mod build;
pub mod c_header;
mod c_named;
mod per_sensor;
pub mod writer;

use serde::Serialize;

pub use blanking::{blanking_window, BlankingWindow, BLANKING_PERCENTILE};
pub use build::FlightSources;
pub use writer::{FlightParamsWriter, ParamsPaths};

use crate::check::Verdict;

/// Layout identifier, in both files.
pub const LAYOUT: &str = "magproof-flight-params-1";

/// The one prefix of every C name in the header.
pub const PREFIX: &str = "MAGPROOF";

/// Name of the plan's single `[magnetometer]`, which has no name of its own.
pub const UNNAMED_MAGNETOMETER: &str = "magnetometer";

/// How flight software applies the numbers to one magnetometer's raw reading, in order.
pub const ORDER_OF_OPERATIONS: [&str; 4] = [
    "1. b1 = b_raw - sum over rods r of rod_coupling_nt_per_command[r] * command[r]   (sensor frame, nT)",
    "2. c = hard_iron_nt + temp_slope_nt_per_c * (T - temp_ref_c)   (sensor frame, nT; slope zero when not measured)",
    "3. b2 = W * (b1 - c)   (sensor frame, nT; W row-major)",
    "4. b_body = sensor_to_body * b2   (body frame, nT)",
];

/// Where a number came from: measured on this article, or taken from the plan.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Source {
    /// Measured on this article.
    Measured,
    /// The plan's nominal value (not measured).
    Plan,
    /// Neither: no plan gave it (identity assumed).
    Assumed,
}

/// The flight parameters, as written to JSON (the C header carries the same numbers).
#[derive(Debug, Clone, Serialize)]
pub struct FlightParams {
    /// [`LAYOUT`].
    pub layout: &'static str,
    /// [`PREFIX`] of the header's names.
    pub prefix: &'static str,
    /// Who, what, when, from which inputs.
    pub identity: Identity,
    /// The verdict the parameters rest on (a closeout: the worst of its steps).
    pub verdict: Verdict,
    /// True only when `verdict` is pass; false in a file written with `--force`.
    pub verdict_passed: bool,
    /// How to apply the numbers, in order.
    pub order_of_operations: Vec<&'static str>,
    /// Rod names in the order of every per-rod array (`rods[]`, each magnetometer's
    /// `rod_coupling_nt_per_command`).
    pub rod_order: Vec<String>,
    /// One entry per magnetometer, keyed by its name.
    pub magnetometers: Vec<MagnetometerParams>,
    /// One entry per torque rod, in plan order (empty without a polarity check).
    pub rods: Vec<RodParams>,
    /// The window to blank every magnetometer after any rod command change: the largest
    /// of the rods' windows (null when a rod has none or no rod was measured).
    pub blanking_window_s: Option<f64>,
    /// Command-to-response delay, s (null without a polarity check).
    pub rod_lag_s: Option<f64>,
    /// Gyro bias and scale, one entry per gyro, when measured (empty: none measured).
    pub gyros: Vec<GyroParams>,
    /// Facts a flight engineer should read with the numbers.
    pub notes: Vec<String>,
    /// Worked examples: a raw reading and commands, and the body-frame field the tool
    /// computed from them, to check an implementation against.
    pub test_vectors: Vec<TestVector>,
}

/// Identity and provenance.
#[derive(Debug, Clone, Serialize)]
pub struct Identity {
    /// `[article] serial` (null without a plan).
    pub serial: Option<String>,
    /// `[article] build`.
    pub build: Option<String>,
    /// `[article] operator`.
    pub operator: Option<String>,
    /// `[article] facility`.
    pub facility: Option<String>,
    /// When the file was written, UTC, ISO 8601.
    pub generated_at: String,
    /// `magproof <version>`.
    pub generated_by: String,
    /// Every file the numbers come from, with its SHA-256.
    pub inputs: Vec<InputHash>,
}

/// One input file.
#[derive(Debug, Clone, Serialize)]
pub struct InputHash {
    /// What it is: "plan", or the check that read it ("calibrate", "polarity").
    pub role: String,
    /// Path as given.
    pub path: String,
    /// Lower-case hex SHA-256 of the bytes read.
    pub sha256: String,
}

/// One magnetometer's parameters.
#[derive(Debug, Clone, Serialize)]
pub struct MagnetometerParams {
    /// Its name (the plan's single `[magnetometer]`: [`UNNAMED_MAGNETOMETER`]).
    pub name: String,
    /// Part serial, from the plan.
    pub serial: Option<String>,
    /// Hard iron and W, when a calibration ran (null: not calibrated).
    pub calibration: Option<MagCalibration>,
    /// Rotation sensor → body, row-major: `v_body = sensor_to_body · v_sensor`.
    pub sensor_to_body: [[f64; 3]; 3],
    /// Whether `sensor_to_body` was measured or is the plan's.
    pub sensor_to_body_source: Source,
    /// Rod coupling at this magnetometer, nT per command unit, sensor frame, one row per
    /// rod in `rod_order` (null: not measured at this magnetometer).
    pub rod_coupling_nt_per_command: Option<Vec<[f64; 3]>>,
    /// 1σ of each element, same layout.
    pub rod_coupling_sigma_nt_per_command: Option<Vec<[f64; 3]>>,
}

/// A magnetometer calibration.
#[derive(Debug, Clone, Serialize)]
pub struct MagCalibration {
    /// "cage" or "tumble".
    pub method: String,
    /// The log it came from.
    pub log: String,
    /// Hard iron c, sensor frame, nT.
    pub hard_iron_nt: [f64; 3],
    /// 1σ of the hard iron, nT.
    pub hard_iron_sigma_nt: [f64; 3],
    /// W, row-major, dimensionless, sensor frame → sensor frame.
    pub soft_iron: [[f64; 3]; 3],
    /// Hard-iron temperature slope, sensor frame, nT/°C (zeros when not measured).
    pub temp_slope_nt_per_c: [f64; 3],
    /// Temperature the hard iron refers to, °C (0 when no slope).
    pub temp_ref_c: f64,
    /// RMS residual of the fit, nT.
    pub residual_rms_nt: f64,
    /// The calibration's own verdict.
    pub verdict: Verdict,
}

/// One torque rod's parameters.
#[derive(Debug, Clone, Serialize)]
pub struct RodParams {
    /// Name (its command column is `cmd_<name>`).
    pub name: String,
    /// Part serial, from the plan.
    pub serial: Option<String>,
    /// Positive dipole direction for a positive command, body frame (the plan's).
    pub axis_body: [f64; 3],
    /// Measured dipole per command unit along `axis_body`, A·m² per command unit
    /// (negative: the rod pushes the other way); from the polarity check's coupling.
    pub dipole_per_command_am2: f64,
    /// 1σ of `dipole_per_command_am2`.
    pub dipole_per_command_sigma_am2: f64,
    /// The plan's nominal, A·m² per command unit.
    pub nominal_dipole_per_command_am2: Option<f64>,
    /// The rod's polarity verdict.
    pub polarity: String,
    /// Blanking window from this rod's pulses.
    pub blanking: Option<BlankingWindow>,
}

/// One gyro's bias and scale (no check measures them yet; the list stays empty).
#[derive(Debug, Clone, Serialize)]
pub struct GyroParams {
    /// Name.
    pub name: String,
    /// Bias per sensor axis, deg/s.
    pub bias_deg_s: [f64; 3],
    /// Scale factor per sensor axis.
    pub scale: [f64; 3],
}

/// A worked example.
#[derive(Debug, Clone, Serialize)]
pub struct TestVector {
    /// The magnetometer (index into `magnetometers`).
    pub magnetometer: usize,
    /// Raw reading, sensor frame, nT.
    pub raw_nt: [f64; 3],
    /// Command of each rod, in `rod_order`.
    pub commands: Vec<f64>,
    /// Temperature, °C (the reference temperature).
    pub temp_c: f64,
    /// Field the tool computed, body frame, nT.
    pub body_nt: [f64; 3],
    /// Where the example comes from.
    pub origin: String,
}

/// A number as written to a file: −0 written as 0.
pub(crate) fn clean(v: f64) -> f64 {
    if v == 0.0 {
        0.0
    } else {
        v
    }
}
