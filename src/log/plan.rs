//! Test-plan reader (DESIGN §5): the article, its geometry and its limits, in TOML.
//!
//! Unknown keys are refused by name so that a typo never passes silently; rotations are
//! checked to be proper (orthonormal, det +1, within 1e-6); every vector is finite.

use std::path::{Path, PathBuf};

use nalgebra::{Matrix3, Vector3};
use serde::Deserialize;

use super::error::{PlanError, Shown};
use super::units::FieldUnit;
use crate::physics::frames::{check_rotation, rotation_from_axes};

/// A validated test plan.
#[derive(Debug, Clone)]
pub struct Plan {
    /// The plan file.
    pub path: PathBuf,
    /// The folder log paths are relative to.
    pub dir: PathBuf,
    /// `[article]`: identity for the ledger.
    pub article: Option<Article>,
    /// `[magnetometer]`: the flight magnetometer as installed.
    pub magnetometer: Option<Magnetometer>,
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
    /// `[[step]]`: what `closeout` runs, in order.
    pub steps: Vec<Step>,
    /// `[limits]`: pass/fail limits.
    pub limits: Limits,
}

/// `[article]`.
#[derive(Debug, Clone)]
pub struct Article {
    /// Serial number.
    pub serial: String,
    /// Build label.
    pub build: String,
}

/// `[magnetometer]`.
#[derive(Debug, Clone)]
pub struct Magnetometer {
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

/// `[cage]`.
#[derive(Debug, Clone)]
pub struct Cage {
    /// Rotation article (body) → cage: `v_c = article_to_cage * v_b`.
    pub article_to_cage: Matrix3<f64>,
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

    /// Resolve a path written in the plan against the plan's folder.
    pub fn resolve(&self, p: &Path) -> PathBuf {
        if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.dir.join(p)
        }
    }
}

// ---- raw TOML shapes -------------------------------------------------------------

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlan {
    article: Option<RawArticle>,
    magnetometer: Option<RawMagnetometer>,
    probe: Option<RawProbe>,
    site: Option<RawSite>,
    cage: Option<RawCage>,
    #[serde(default)]
    rod: Vec<RawRod>,
    dipole_test: Option<RawDipoleTest>,
    #[serde(default)]
    step: Vec<RawStep>,
    #[serde(default)]
    limits: RawLimits,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawArticle {
    serial: String,
    build: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMagnetometer {
    sensor_to_body: Option<toml::Value>,
    position_m: Option<[f64; 3]>,
    unit: Option<String>,
    range_nt: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProbe {
    position_m: [f64; 3],
    sensor_to_body: Option<toml::Value>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSite {
    lat_deg: f64,
    lon_deg: f64,
    #[serde(default)]
    alt_m: f64,
    date: Option<String>,
    reference_nt: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCage {
    article_to_cage: toml::Value,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRod {
    name: String,
    axis_body: [f64; 3],
    position_m: [f64; 3],
    dipole_per_command_am2: Option<f64>,
    length_m: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDipoleTest {
    probe_position_m: Option<[f64; 3]>,
    #[serde(default)]
    mount: Vec<RawMount>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMount {
    label: String,
    body_to_table: toml::Value,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawStep {
    kind: toml::Spanned<String>,
    log: PathBuf,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
struct RawLimits {
    residual_dipole_max_am2: Option<f64>,
    calibration_residual_max_nt: Option<f64>,
    polarity_angle_max_deg: Option<f64>,
}

/// Read and validate a test plan.
pub fn read_plan(path: &Path) -> Result<Plan, PlanError> {
    let text = std::fs::read_to_string(path).map_err(|source| PlanError::Io {
        path: Shown(path.to_path_buf()),
        source,
    })?;
    parse_plan(&text, path)
}

/// Parse and validate plan text; `path` is used for messages and relative log paths.
pub fn parse_plan(text: &str, path: &Path) -> Result<Plan, PlanError> {
    let shown = || Shown(path.to_path_buf());
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let raw: RawPlan = toml::from_str(text).map_err(|e| PlanError::Syntax {
        path: shown(),
        message: one_line(&e.to_string()),
    })?;
    let invalid = |key: &str, problem: String| PlanError::Invalid {
        path: shown(),
        key: key.to_string(),
        problem,
    };
    let vec3 = |key: &str, v: [f64; 3]| -> Result<Vector3<f64>, PlanError> {
        if v.iter().all(|x| x.is_finite()) {
            Ok(Vector3::from(v))
        } else {
            Err(invalid(key, "every element must be a finite number".into()))
        }
    };
    let positive = |key: &str, v: Option<f64>| -> Result<Option<f64>, PlanError> {
        match v {
            Some(x) if !(x.is_finite() && x > 0.0) => Err(invalid(
                key,
                format!("must be a positive number, found {x}"),
            )),
            _ => Ok(v),
        }
    };
    let rotation = |key: &str, v: Option<&toml::Value>| -> Result<Matrix3<f64>, PlanError> {
        match v {
            None => Ok(Matrix3::identity()),
            Some(v) => parse_rotation(v).map_err(|p| invalid(key, p)),
        }
    };

    let article = match raw.article {
        Some(a) => {
            if a.serial.trim().is_empty() {
                return Err(invalid("article.serial", "must not be empty".into()));
            }
            if a.build.trim().is_empty() {
                return Err(invalid("article.build", "must not be empty".into()));
            }
            Some(Article {
                serial: a.serial.trim().to_string(),
                build: a.build.trim().to_string(),
            })
        }
        None => None,
    };
    let magnetometer = match raw.magnetometer {
        Some(m) => Some(Magnetometer {
            sensor_to_body: rotation("magnetometer.sensor_to_body", m.sensor_to_body.as_ref())?,
            position_m: m
                .position_m
                .map(|p| vec3("magnetometer.position_m", p))
                .transpose()?,
            unit: m
                .unit
                .map(|u| u.parse::<FieldUnit>())
                .transpose()
                .map_err(|e| invalid("magnetometer.unit", e.to_string()))?,
            range_nt: positive("magnetometer.range_nt", m.range_nt)?,
        }),
        None => None,
    };
    let probe = match raw.probe {
        Some(p) => Some(Probe {
            position_m: vec3("probe.position_m", p.position_m)?,
            sensor_to_body: rotation("probe.sensor_to_body", p.sensor_to_body.as_ref())?,
        }),
        None => None,
    };
    let site = match raw.site {
        Some(s) => {
            if !(s.lat_deg.is_finite() && (-90.0..=90.0).contains(&s.lat_deg)) {
                return Err(invalid(
                    "site.lat_deg",
                    format!("must lie in −90..90, found {}", s.lat_deg),
                ));
            }
            if !(s.lon_deg.is_finite() && (-360.0..=360.0).contains(&s.lon_deg)) {
                return Err(invalid(
                    "site.lon_deg",
                    format!("must lie in −360..360, found {}", s.lon_deg),
                ));
            }
            if !s.alt_m.is_finite() {
                return Err(invalid("site.alt_m", "must be a finite number".into()));
            }
            let date = s
                .date
                .as_deref()
                .map(|d| parse_date(d).map_err(|p| invalid("site.date", p)))
                .transpose()?;
            Some(Site {
                lat_deg: s.lat_deg,
                lon_deg: s.lon_deg,
                alt_m: s.alt_m,
                date,
                reference_nt: positive("site.reference_nt", s.reference_nt)?,
            })
        }
        None => None,
    };
    let cage = match raw.cage {
        Some(c) => Some(Cage {
            article_to_cage: rotation("cage.article_to_cage", Some(&c.article_to_cage))?,
        }),
        None => None,
    };
    let mut rods = Vec::with_capacity(raw.rod.len());
    for (i, r) in raw.rod.into_iter().enumerate() {
        let key = |k: &str| format!("rod[{i}].{k}");
        let name = r.name.trim().to_string();
        if name.is_empty()
            || !name
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
        {
            return Err(invalid(
                &key("name"),
                format!(
                    "\"{}\" must be a non-empty name of letters, digits, _ or -",
                    r.name
                ),
            ));
        }
        if rods
            .iter()
            .any(|o: &Rod| o.name.eq_ignore_ascii_case(&name))
        {
            return Err(invalid(
                &key("name"),
                format!("rod \"{name}\" is listed twice"),
            ));
        }
        let axis = vec3(&key("axis_body"), r.axis_body)?;
        let n = axis.norm();
        if n < 1e-9 {
            return Err(invalid(
                &key("axis_body"),
                "must not be the zero vector".into(),
            ));
        }
        rods.push(Rod {
            name,
            axis_body: axis / n,
            position_m: vec3(&key("position_m"), r.position_m)?,
            dipole_per_command_am2: positive(
                &key("dipole_per_command_am2"),
                r.dipole_per_command_am2,
            )?,
            length_m: positive(&key("length_m"), r.length_m)?,
        });
    }
    let dipole_test = match raw.dipole_test {
        Some(d) => {
            let mut mounts: Vec<Mount> = Vec::new();
            for (i, m) in d.mount.into_iter().enumerate() {
                let label = m.label.trim().to_string();
                let key = format!("dipole_test.mount[{i}]");
                if label.is_empty() || label.eq_ignore_ascii_case("none") {
                    return Err(invalid(&format!("{key}.label"), "must be a label other than empty or \"none\" (those mark article-absent rows)".into()));
                }
                if mounts.iter().any(|o| o.label == label) {
                    return Err(invalid(
                        &format!("{key}.label"),
                        format!("mount \"{label}\" is listed twice"),
                    ));
                }
                mounts.push(Mount {
                    label,
                    body_to_table: rotation(
                        &format!("{key}.body_to_table"),
                        Some(&m.body_to_table),
                    )?,
                });
            }
            Some(DipoleTest {
                probe_position_m: d
                    .probe_position_m
                    .map(|p| vec3("dipole_test.probe_position_m", p))
                    .transpose()?,
                mounts,
            })
        }
        None => None,
    };
    let dir = path
        .parent()
        .map(|p| {
            if p.as_os_str().is_empty() {
                Path::new(".")
            } else {
                p
            }
        })
        .unwrap_or(Path::new("."))
        .to_path_buf();
    let steps = raw
        .step
        .into_iter()
        .map(|s| Step {
            log: if s.log.is_absolute() {
                s.log
            } else {
                dir.join(s.log)
            },
            kind_line: text[..s.kind.span().start.min(text.len())]
                .matches('\n')
                .count()
                + 1,
            kind: s.kind.into_inner(),
        })
        .collect();
    let limits = Limits {
        residual_dipole_max_am2: positive(
            "limits.residual_dipole_max_am2",
            raw.limits.residual_dipole_max_am2,
        )?,
        calibration_residual_max_nt: positive(
            "limits.calibration_residual_max_nt",
            raw.limits.calibration_residual_max_nt,
        )?,
        polarity_angle_max_deg: positive(
            "limits.polarity_angle_max_deg",
            raw.limits.polarity_angle_max_deg,
        )?,
    };
    if let Some(a) = limits.polarity_angle_max_deg {
        if a >= 90.0 {
            return Err(invalid(
                "limits.polarity_angle_max_deg",
                format!("must be below 90°, found {a}"),
            ));
        }
    }
    Ok(Plan {
        path: path.to_path_buf(),
        dir,
        article,
        magnetometer,
        probe,
        site,
        cage,
        rods,
        dipole_test,
        steps,
        limits,
    })
}

/// A rotation given as axis shorthand (`["+x","-z","+y"]`) or a 3×3 matrix row by row.
fn parse_rotation(v: &toml::Value) -> Result<Matrix3<f64>, String> {
    let arr = v.as_array().ok_or_else(|| {
        "expected three signed axes such as [\"+x\", \"+y\", \"+z\"] or a 3×3 matrix".to_string()
    })?;
    if arr.iter().all(|e| e.is_str()) {
        let axes: Vec<&str> = arr.iter().filter_map(|e| e.as_str()).collect();
        return rotation_from_axes(&axes);
    }
    if arr.len() != 3 {
        return Err(format!(
            "a rotation matrix needs 3 rows, found {}",
            arr.len()
        ));
    }
    let mut m = Matrix3::zeros();
    for (i, row) in arr.iter().enumerate() {
        let row = row
            .as_array()
            .filter(|r| r.len() == 3)
            .ok_or_else(|| format!("row {} must be an array of 3 numbers", i + 1))?;
        for (j, x) in row.iter().enumerate() {
            m[(i, j)] = x
                .as_float()
                .or_else(|| x.as_integer().map(|k| k as f64))
                .ok_or_else(|| format!("row {} element {} is not a number", i + 1, j + 1))?;
        }
    }
    check_rotation(&m)?;
    Ok(m)
}

fn parse_date(s: &str) -> Result<time::Date, String> {
    let fmt = time::macros::format_description!("[year]-[month]-[day]");
    time::Date::parse(s.trim(), &fmt)
        .map_err(|_| format!("expected a date as YYYY-MM-DD, found \"{s}\""))
}

/// The TOML parser's message spans several lines with a source excerpt; keep its first
/// line (which names line and column) and its last (what is wrong).
fn one_line(msg: &str) -> String {
    let lines: Vec<&str> = msg
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect();
    match (lines.first(), lines.last()) {
        (Some(a), Some(b)) if lines.len() > 1 => format!("{a}: {b}"),
        (Some(a), _) => a.to_string(),
        _ => msg.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<Plan, PlanError> {
        parse_plan(text, Path::new("plan.toml"))
    }

    #[test]
    fn full_example_parses() {
        let p = parse(
            r#"
[article]
serial = "QX-7"
build = "B1"
[magnetometer]
sensor_to_body = ["+x", "-z", "+y"]
position_m = [0.02, 0.015, 0.21]
unit = "uT"
[site]
lat_deg = 47.0
lon_deg = 8.0
alt_m = 400.0
date = "2026-11-20"
[[rod]]
name = "x"
axis_body = [2.0, 0.0, 0.0]
position_m = [0.0, 0.04, 0.0]
dipole_per_command_am2 = 0.2
[dipole_test]
probe_position_m = [0.6, 0.0, 0.0]
[[dipole_test.mount]]
label = "upright"
body_to_table = [[1, 0, 0], [0, 1, 0], [0, 0, 1]]
[[step]]
kind = "calibrate"
log = "tumble.csv"
[limits]
residual_dipole_max_am2 = 0.005
"#,
        )
        .unwrap();
        assert_eq!(p.rods[0].axis_body, Vector3::x());
        assert_eq!(p.magnetometer.unwrap().unit, Some(FieldUnit::Microtesla));
        assert_eq!(p.steps[0].log, PathBuf::from("./tumble.csv"));
    }

    #[test]
    fn unknown_key_is_named() {
        let e = parse("[article]\nserial = \"A\"\nbuild = \"B\"\nbuidl = \"C\"\n").unwrap_err();
        let msg = e.to_string();
        assert!(msg.contains("buidl"), "{msg}");
        assert!(msg.contains("line 4"), "{msg}");
    }

    #[test]
    fn reflection_is_refused_with_its_key() {
        let e = parse("[cage]\narticle_to_cage = [\"+x\", \"+y\", \"-z\"]\n").unwrap_err();
        assert!(e.to_string().contains("cage.article_to_cage"), "{e}");
    }

    #[test]
    fn skewed_matrix_is_refused() {
        let e =
            parse("[cage]\narticle_to_cage = [[1, 0.01, 0], [0, 1, 0], [0, 0, 1]]\n").unwrap_err();
        assert!(e.to_string().contains("orthonormal"), "{e}");
    }

    #[test]
    fn syntax_error_names_line() {
        let e = parse("[article]\nserial = \"A\nbuild = \"B\"\n").unwrap_err();
        assert!(e.to_string().contains("line 2"), "{e}");
    }
}
