//! The validated test plan and its sections, in internal units (m, nT, rad) and named
//! frames (body B, sensor S, table L, cage C).

use std::path::{Path, PathBuf};

use nalgebra::{Matrix3, Vector3};

use crate::log::error::{PlanError, Shown};
use crate::log::units::FieldUnit;
use crate::physics::geomag::GeoSite;

/// A validated test plan.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The plan file.
    pub path: PathBuf,
    /// The folder log paths are relative to.
    pub dir: PathBuf,
    /// `[article]`: identity for the ledger.
    pub article: Option<Article>,
    /// The magnetometer in use: the plan's one `[magnetometer]`, or the
    /// `[[magnetometer]]` entry chosen by [`Plan::select_sensor`] (`None` until then when
    /// the plan lists several).
    pub magnetometer: Option<Magnetometer>,
    /// Every magnetometer the plan lists, in order.
    pub magnetometers: Vec<Magnetometer>,
    /// `[columns]`: our quantity (lower case) → the log's column name.
    pub columns: Vec<(String, String)>,
    /// `[log]`: how the logs are written.
    pub log: LogSettings,
    /// `[gyro]`: the gyro whose rates a log may hold.
    pub gyro: Option<Gyro>,
    /// `[probe]`: an external probe used instead of the flight magnetometer.
    pub probe: Option<Probe>,
    /// `[site]`: where a tumble test was done.
    pub site: Option<Site>,
    /// `[cage]`: how the article sits in the cage.
    pub cage: Option<Cage>,
    /// `[[rod]]`: torque rods.
    pub rods: Vec<Rod>,
    /// `[dipole_test]`: turntable geometry.
    pub dipole_test: Option<DipoleTest>,
    /// `[align_test]`: the turntable alignment test.
    pub align_test: Option<super::align::AlignTest>,
    /// `[rod_bench]`: a torque rod on the bench and the probe stations around it.
    pub rod_bench: Option<super::RodBench>,
    /// `[orbit]`: the element set and orbit of the flight (`orbit`, `dipole`).
    pub orbit: Option<super::orbit::OrbitPlan>,
    /// `[control]`: the magnetic control law `loop` checks.
    pub control: Option<super::control::ControlPlan>,
    /// `[[step]]`: what `closeout` runs, in order.
    pub steps: Vec<Step>,
    /// `[limits]`: pass/fail limits.
    pub limits: Limits,
    /// SHA-256 (lower-case hex) of the plan's bytes, hashed from the text parsed.
    pub sha256: String,
}

/// `[article]`.
#[derive(Debug, Clone)]
pub struct Article {
    /// Serial number.
    pub serial: String,
    /// Build label.
    pub build: String,
    /// Who ran the tests (shown in reports and flight parameters).
    pub operator: Option<String>,
    /// Where the tests were run.
    pub facility: Option<String>,
    /// Free text shown in reports (one paragraph; line breaks kept).
    pub notes: Option<String>,
}

/// `[log]`.
#[derive(Debug, Clone, Copy, Default)]
pub struct LogSettings {
    /// Command columns hold a value only when it changes (`hold_commands = true`).
    pub hold_commands: bool,
    /// Numbers are written with a decimal comma (`decimal = ","`).
    pub decimal_comma: bool,
}

/// `[gyro]`.
#[derive(Debug, Clone)]
pub struct Gyro {
    /// Rotation gyro → body: `w_b = sensor_to_body * w_g`.
    pub sensor_to_body: Matrix3<f64>,
    /// Serial number, when given.
    pub serial: Option<String>,
    /// `scale_tol`: limit on `|scale| − 1` of each gyro axis in `align` (a fraction).
    pub scale_tol: Option<f64>,
}

/// `[magnetometer]` or one `[[magnetometer]]` entry.
#[derive(Debug, Clone)]
pub struct Magnetometer {
    /// Name (`--sensor NAME`, a step's `sensor`); required when the plan lists several.
    pub name: Option<String>,
    /// The log's three field columns of this sensor (x, y, z), when not `bx by bz`.
    pub columns: Option<[String; 3]>,
    /// Serial number, when given.
    pub serial: Option<String>,
    /// Field columns without a unit are raw counts (`unit = "counts"` or `"LSB"`).
    pub counts: bool,
    /// Field per count, nT, per sensor axis (x, y, z).
    pub nt_per_count: Option<[f64; 3]>,
    /// Rotation sensor → body: `v_b = sensor_to_body * v_s`.
    pub sensor_to_body: Matrix3<f64>,
    /// Sensor position, body frame (B), m.
    pub position_m: Option<Vector3<f64>>,
    /// Field unit of logs whose columns carry none.
    pub unit: Option<FieldUnit>,
    /// Full-scale range per axis, nT: readings at or beyond it are flagged as saturated.
    pub range_nt: Option<f64>,
}

/// `[probe]`: an external magnetometer placed near the article.
#[derive(Debug, Clone)]
pub struct Probe {
    /// Probe position, body frame (B), m.
    pub position_m: Vector3<f64>,
    /// Rotation probe → body.
    pub sensor_to_body: Matrix3<f64>,
}

/// `[site]`.
#[derive(Debug, Clone)]
pub struct Site {
    /// Geodetic latitude, deg (−90..90).
    pub lat_deg: f64,
    /// Longitude, deg east.
    pub lon_deg: f64,
    /// Altitude above the WGS-84 ellipsoid, m.
    pub alt_m: f64,
    /// Date of the test.
    pub date: Option<time::Date>,
    /// Reference field magnitude, nT; overrides the geomagnetic model.
    pub reference_nt: Option<f64>,
}

impl Site {
    /// The site as the geomagnetic model takes it.
    pub fn geo_site(&self) -> GeoSite {
        GeoSite {
            lat_deg: self.lat_deg,
            lon_deg: self.lon_deg,
            alt_m: self.alt_m,
            date: self.date,
            reference_nt: self.reference_nt,
        }
    }
}

/// `[cage]`.
#[derive(Debug, Clone)]
pub struct Cage {
    /// Rotation article (body) → cage: `v_c = article_to_cage * v_b`.
    pub article_to_cage: Matrix3<f64>,
    /// Field per coil current, cage frame, nT/A, row by row: `h_nt = nt_per_amp * i_a`
    /// (for logs of coil currents `ix iy iz`).
    pub nt_per_amp: Option<Matrix3<f64>>,
    /// Ambient field at the article with the coils off, cage frame, nT; added to the
    /// coils' field. Without it the ambient field folds into the hard iron.
    pub ambient_nt: Option<Vector3<f64>>,
}

/// `[[rod]]`.
#[derive(Debug, Clone)]
pub struct Rod {
    /// Name; its log column is `cmd_<name>`.
    pub name: String,
    /// Unit vector of the positive dipole for a positive command, body frame (B).
    pub axis_body: Vector3<f64>,
    /// Rod centre, body frame (B), m.
    pub position_m: Vector3<f64>,
    /// Nominal dipole per unit command, A·m² per command unit.
    pub dipole_per_command_am2: Option<f64>,
    /// Rod length, m (for the point-dipole validity check).
    pub length_m: Option<f64>,
    /// Time the rod's field takes to settle after a command change, s (the blanking
    /// window of a calibration with rods in the log; default 0.2 s).
    pub settle_s: Option<f64>,
    /// Part serial number.
    pub serial: Option<String>,
    /// The rod's field in the magnetometer's readings per unit command, sensor frame (S),
    /// nT per command unit; `loop` subtracts it when given.
    pub coupling_nt_per_command: Option<Vector3<f64>>,
    /// Largest command the flight software can give (its saturation), command units.
    pub command_max: Option<f64>,
}

/// `[dipole_test]`.
#[derive(Debug, Clone)]
pub struct DipoleTest {
    /// Probe position, table frame (L), m.
    pub probe_position_m: Option<Vector3<f64>>,
    /// Mounts of the article on the table.
    pub mounts: Vec<Mount>,
}

/// `[[dipole_test.mount]]`.
#[derive(Debug, Clone)]
pub struct Mount {
    /// Label as written in the log's `mount` column.
    pub label: String,
    /// Rotation body → table at angle zero.
    pub body_to_table: Matrix3<f64>,
}

/// `[[step]]`.
#[derive(Debug, Clone)]
pub struct Step {
    /// What to run: a check kind's name, as written (the registry of checks in
    /// `check::kind` says which names exist; closeout refuses any other by its line).
    pub kind: String,
    /// 1-based line of the step's `kind` in the plan file.
    pub kind_line: usize,
    /// Log path, resolved against the plan's folder.
    pub log: PathBuf,
    /// The magnetometer whose columns the step reads (a `[[magnetometer]]` name).
    pub sensor: Option<String>,
}

/// `[limits]`.
#[derive(Debug, Clone, Default)]
pub struct Limits {
    /// Largest acceptable residual dipole magnitude, A·m².
    pub residual_dipole_max_am2: Option<f64>,
    /// Largest acceptable calibration residual RMS, nT.
    pub calibration_residual_max_nt: Option<f64>,
    /// Largest acceptable angle between measured and expected rod response, deg.
    pub polarity_angle_max_deg: Option<f64>,
    /// Calibration gates (docs/calibration.md, "Gates"); `None` takes the default.
    pub gates: GateLimits,
    /// Limits of a rod on the bench (docs/rods.md).
    pub rod: super::RodLimits,
}

/// Limits of the calibration gates, each overriding its default when given
/// (docs/calibration.md, "Gates", gives the defaults and the reason for each).
#[derive(Debug, Clone, Copy, Default)]
pub struct GateLimits {
    /// Smallest tumble coverage, 0..1.
    pub coverage_min: Option<f64>,
    /// Largest |hard iron|, nT.
    pub hard_iron_max_nt: Option<f64>,
    /// Smallest eigenvalue of W.
    pub soft_iron_min: Option<f64>,
    /// Largest eigenvalue of W.
    pub soft_iron_max: Option<f64>,
    /// Largest residual RMS as a fraction of the reference magnitude.
    pub residual_max_fraction: Option<f64>,
    /// Smallest share of the unflagged samples the fit must use, 0..1.
    pub samples_used_min: Option<f64>,
    /// Largest share of a tumble's rows with a rod on (or settling), 0..1.
    pub rods_on_share_max: Option<f64>,
    /// Largest ratio of the largest to the smallest singular value of a cage's applied
    /// fields.
    pub design_condition_max: Option<f64>,
    /// Largest misalignment of a cage calibration against the plan's mounting, deg.
    pub alignment_max_deg: Option<f64>,
}

impl Plan {
    /// Error for a section this command needs.
    pub fn missing(&self, section: &str, why: &str) -> PlanError {
        PlanError::MissingSection {
            path: Shown(self.path.clone()),
            section: section.to_string(),
            why: why.to_string(),
        }
    }

    /// Error for an invalid value found while using the plan.
    pub fn invalid(&self, key: &str, problem: impl Into<String>) -> PlanError {
        PlanError::Invalid {
            path: Shown(self.path.clone()),
            key: key.to_string(),
            problem: problem.into(),
        }
    }

    /// Choose the magnetometer in use: `name` among `[[magnetometer]]`, or the plan's
    /// only one. A plan with several and no name is refused listing the names; a name
    /// the plan does not list is refused with the names it does.
    pub fn select_sensor(&mut self, name: Option<&str>) -> Result<(), PlanError> {
        let names: Vec<String> = self
            .magnetometers
            .iter()
            .map(|m| m.name.clone().unwrap_or_else(|| "(unnamed)".into()))
            .collect();
        let listed = || {
            if names.is_empty() {
                "the plan lists no magnetometer".to_string()
            } else {
                format!("the plan lists {}", names.join(", "))
            }
        };
        match name {
            None if self.magnetometers.len() > 1 => Err(self.invalid(
                "magnetometer",
                format!(
                    "{}: choose one with --sensor NAME (in closeout: sensor = \"NAME\" in \
                     the step)",
                    listed()
                ),
            )),
            None => {
                self.magnetometer = self.magnetometers.first().cloned();
                Ok(())
            }
            Some(n) => {
                let found = self
                    .magnetometers
                    .iter()
                    .find(|m| m.name.as_deref() == Some(n))
                    .cloned()
                    .ok_or_else(|| {
                        self.invalid(
                            "magnetometer",
                            format!("no magnetometer is named \"{n}\"; {}", listed()),
                        )
                    })?;
                self.magnetometer = Some(found);
                Ok(())
            }
        }
    }

    /// The name of the magnetometer in use, when it has one.
    pub fn sensor_name(&self) -> Option<&str> {
        self.magnetometer.as_ref()?.name.as_deref()
    }

    /// Resolve a path written in the plan against the plan's folder.
    pub fn resolve(&self, p: &Path) -> PathBuf {
        if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.dir.join(p)
        }
    }
}

/// Largest magnetic moment in a plan (a rod's per-command dipole, a dipole limit), A·m²:
/// the largest flight torque rods give some hundreds of A·m² (common practice).
pub const MAX_DIPOLE_AM2: f64 = 1.0e4;
/// Longest settle time of a rod, s.
pub const MAX_SETTLE_S: f64 = 3600.0;
/// Largest soft-iron scale in a limit (a soft-iron matrix is near the identity).
pub const MAX_SOFT_IRON: f64 = 100.0;
/// Largest condition-number limit (beyond it no fit is trustworthy in f64).
pub const MAX_CONDITION: f64 = 1.0e12;
