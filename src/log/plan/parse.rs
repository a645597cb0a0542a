//! Validation of a plan read from TOML: each table of the raw shapes (`raw.rs`) is
//! checked and turned into the public types, with errors naming the offending key
//! (`rod[1].axis_body`, `site.lat_deg`, ...). Tables are checked in file-format order,
//! so the first error reported does not depend on how the checks are grouped.

use std::path::{Path, PathBuf};

use nalgebra::{Matrix3, Vector3};

use super::raw::{RawArticle, RawDipoleTest, RawPlan, RawProbe, RawRod, RawSite, RawStep};
use super::types::{Article, DipoleTest, Plan, Probe, Rod, Site, Step};
use super::types::{MAX_DIPOLE_AM2, MAX_SETTLE_S};
use crate::log::error::{PlanError, Shown};
use crate::physics::frames::{check_rotation, rotation_from_axes};
use crate::physics::igrf::{MAX_ALTITUDE_M, MIN_ALTITUDE_M};
use crate::screen::plausible::MAX_FIELD_NT;

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
    let sha256 = crate::log::hash::sha256_bytes(text.as_bytes());
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    let raw: RawPlan = toml::from_str(text).map_err(|e| PlanError::Syntax {
        path: Shown(path.to_path_buf()),
        message: one_line(&e.to_string()),
    })?;
    let v = Validator { path, text };
    let article = raw.article.map(|a| v.article(a)).transpose()?;
    let magnetometers = raw
        .magnetometer
        .map(|m| v.magnetometers(m))
        .transpose()?
        .unwrap_or_default();
    let magnetometer = match magnetometers.as_slice() {
        [one] => Some(one.clone()),
        _ => None,
    };
    let columns = raw
        .columns
        .map(|c| v.columns(c))
        .transpose()?
        .unwrap_or_default();
    let log = raw.log.map(|l| v.log(l)).transpose()?.unwrap_or_default();
    let gyro = raw.gyro.map(|g| v.gyro(g)).transpose()?;
    let probe = raw.probe.map(|p| v.probe(p)).transpose()?;
    let site = raw.site.map(|s| v.site(s)).transpose()?;
    let cage = raw.cage.map(|c| v.cage(c)).transpose()?;
    let rods = v.rods(raw.rod)?;
    let dipole_test = raw.dipole_test.map(|d| v.dipole_test(d)).transpose()?;
    let align_test = raw.align_test.map(|a| v.align_test(a)).transpose()?;
    let rod_bench = raw
        .rod_bench
        .map(|r| super::rod_bench::rod_bench(&v, r))
        .transpose()?;
    let orbit = raw.orbit.map(|o| super::orbit::orbit(&v, o)).transpose()?;
    let control = raw.control.map(|c| v.control(c)).transpose()?;
    let dir = plan_dir(path);
    let steps = steps(raw.step, &dir, text);
    v.step_sensors(&steps, &magnetometers)?;
    let limits = v.limits(raw.limits)?;
    Ok(Plan {
        path: path.to_path_buf(),
        dir,
        article,
        magnetometer,
        magnetometers,
        columns,
        log,
        gyro,
        probe,
        site,
        cage,
        rods,
        dipole_test,
        align_test,
        rod_bench,
        orbit,
        control,
        steps,
        limits,
        sha256,
    })
}

/// Largest |coordinate| of a position in a plan, m.
pub const MAX_POSITION_M: f64 = 100.0;

/// Checks of single values, with errors naming the key and the plan file.
pub(super) struct Validator<'a> {
    pub(super) path: &'a Path,
    /// The plan's text, to name the line of a refused key.
    pub(super) text: &'a str,
}

impl Validator<'_> {
    pub(super) fn invalid(&self, key: &str, problem: String) -> PlanError {
        match super::locate::line_of(self.text, key) {
            Some(line) => PlanError::InvalidAt {
                path: Shown(self.path.to_path_buf()),
                line,
                key: key.to_string(),
                problem,
            },
            None => PlanError::Invalid {
                path: Shown(self.path.to_path_buf()),
                key: key.to_string(),
                problem,
            },
        }
    }

    /// A position, m: finite and within [`MAX_POSITION_M`] of the origin on each axis
    /// (a bench test is metres across; a value beyond that is a wrong unit or a typo,
    /// and would make every geometry it enters degenerate).
    pub(super) fn position(&self, key: &str, v: [f64; 3]) -> Result<Vector3<f64>, PlanError> {
        let p = self.vec3(key, v)?;
        if p.iter().any(|x| x.abs() > MAX_POSITION_M) {
            return Err(self.invalid(
                key,
                format!(
                    "{v:?} m is beyond {MAX_POSITION_M} m from the origin; positions are in metres"
                ),
            ));
        }
        Ok(p)
    }

    /// A vector whose every element is finite.
    pub(super) fn vec3(&self, key: &str, v: [f64; 3]) -> Result<Vector3<f64>, PlanError> {
        if v.iter().all(|x| x.is_finite()) {
            Ok(Vector3::from(v))
        } else {
            Err(self.invalid(key, "every element must be a finite number".into()))
        }
    }

    /// An optional value that, when given, is finite and positive.
    pub(super) fn positive(&self, key: &str, v: Option<f64>) -> Result<Option<f64>, PlanError> {
        match v {
            Some(x) if !(x.is_finite() && x > 0.0) => {
                Err(self.invalid(key, format!("must be a positive number, found {x}")))
            }
            _ => Ok(v),
        }
    }

    /// An optional value that, when given, is finite, positive and at most `max` (in the
    /// key's unit): a larger value is a wrong unit or a typo, and would overflow the
    /// computations it enters.
    pub(super) fn positive_at_most(
        &self,
        key: &str,
        v: Option<f64>,
        max: f64,
    ) -> Result<Option<f64>, PlanError> {
        let v = self.positive(key, v)?;
        match v {
            Some(x) if x > max => {
                Err(self.invalid(key, format!("must be at most {max:e}, found {x:e}")))
            }
            _ => Ok(v),
        }
    }

    /// A proper rotation; identity when not given.
    pub(super) fn rotation(
        &self,
        key: &str,
        v: Option<&toml::Value>,
    ) -> Result<Matrix3<f64>, PlanError> {
        match v {
            None => Ok(Matrix3::identity()),
            Some(v) => parse_rotation(v).map_err(|p| self.invalid(key, p)),
        }
    }

    /// Refuse a control character (escape sequences, line breaks) in text that is shown
    /// on the terminal, in reports and in file names.
    pub(super) fn plain_text(&self, key: &str, value: &str) -> Result<(), PlanError> {
        match value.chars().find(|c| c.is_control()) {
            None => Ok(()),
            Some(c) => Err(self.invalid(
                key,
                format!(
                    "{value:?} holds the control character U+{:04X}; use printable text",
                    c as u32
                ),
            )),
        }
    }

    /// Optional one-line text (a serial, a name): trimmed, printable, empty as absent.
    fn label(&self, key: &str, v: Option<String>) -> Result<Option<String>, PlanError> {
        match v {
            Some(t) => {
                self.plain_text(key, &t)?;
                Ok(Some(t.trim().to_string()).filter(|t| !t.is_empty()))
            }
            None => Ok(None),
        }
    }

    fn article(&self, a: RawArticle) -> Result<Article, PlanError> {
        if a.serial.trim().is_empty() {
            return Err(self.invalid("article.serial", "must not be empty".into()));
        }
        if a.build.trim().is_empty() {
            return Err(self.invalid("article.build", "must not be empty".into()));
        }
        self.plain_text("article.serial", &a.serial)?;
        self.plain_text("article.build", &a.build)?;
        let notes = match a.notes {
            Some(n) => {
                // Line breaks are kept in notes; other control characters are refused.
                self.plain_text("article.notes", &n.replace(['\n', '\r', '\t'], " "))?;
                Some(n.trim().to_string()).filter(|n| !n.is_empty())
            }
            None => None,
        };
        Ok(Article {
            serial: a.serial.trim().to_string(),
            build: a.build.trim().to_string(),
            operator: self.label("article.operator", a.operator)?,
            facility: self.label("article.facility", a.facility)?,
            notes,
        })
    }

    fn probe(&self, p: RawProbe) -> Result<Probe, PlanError> {
        Ok(Probe {
            position_m: self.position("probe.position_m", p.position_m)?,
            sensor_to_body: self.rotation("probe.sensor_to_body", p.sensor_to_body.as_ref())?,
        })
    }

    fn site(&self, s: RawSite) -> Result<Site, PlanError> {
        if !(s.lat_deg.is_finite() && (-90.0..=90.0).contains(&s.lat_deg)) {
            return Err(self.invalid(
                "site.lat_deg",
                format!("must lie in −90..90, found {}", s.lat_deg),
            ));
        }
        if !(s.lon_deg.is_finite() && (-360.0..=360.0).contains(&s.lon_deg)) {
            return Err(self.invalid(
                "site.lon_deg",
                format!("must lie in −360..360, found {}", s.lon_deg),
            ));
        }
        if !(s.alt_m.is_finite() && (MIN_ALTITUDE_M..=MAX_ALTITUDE_M).contains(&s.alt_m)) {
            return Err(self.invalid(
                "site.alt_m",
                format!("must be a finite number from {MIN_ALTITUDE_M} m to {MAX_ALTITUDE_M:e} m, found {}", s.alt_m),
            ));
        }
        let date = s
            .date
            .as_deref()
            .map(|d| parse_date(d).map_err(|p| self.invalid("site.date", p)))
            .transpose()?;
        Ok(Site {
            lat_deg: s.lat_deg,
            lon_deg: s.lon_deg,
            alt_m: s.alt_m,
            date,
            reference_nt: self.positive_at_most(
                "site.reference_nt",
                s.reference_nt,
                MAX_FIELD_NT,
            )?,
        })
    }

    fn rods(&self, raw: Vec<RawRod>) -> Result<Vec<Rod>, PlanError> {
        let mut rods = Vec::with_capacity(raw.len());
        for (i, r) in raw.into_iter().enumerate() {
            let key = |k: &str| format!("rod[{i}].{k}");
            let name = r.name.trim().to_string();
            if name.is_empty()
                || !name
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
            {
                return Err(self.invalid(
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
                return Err(self.invalid(&key("name"), format!("rod \"{name}\" is listed twice")));
            }
            let axis = self.vec3(&key("axis_body"), r.axis_body)?;
            let n = axis.norm();
            if !n.is_finite() {
                return Err(self.invalid(
                    &key("axis_body"),
                    format!("{:?} is too long to be a direction", r.axis_body),
                ));
            }
            if n < 1e-9 {
                return Err(self.invalid(&key("axis_body"), "must not be the zero vector".into()));
            }
            rods.push(Rod {
                name,
                axis_body: axis / n,
                position_m: self.position(&key("position_m"), r.position_m)?,
                dipole_per_command_am2: self.positive_at_most(
                    &key("dipole_per_command_am2"),
                    r.dipole_per_command_am2,
                    MAX_DIPOLE_AM2,
                )?,
                length_m: self.positive_at_most(&key("length_m"), r.length_m, MAX_POSITION_M)?,
                settle_s: self.positive_at_most(&key("settle_s"), r.settle_s, MAX_SETTLE_S)?,
                serial: self.label(&key("serial"), r.serial)?,
                coupling_nt_per_command: self.rod_coupling(i, r.coupling_nt_per_command)?,
                command_max: self.positive(&key("command_max"), r.command_max)?,
            });
        }
        Ok(rods)
    }

    fn dipole_test(&self, d: RawDipoleTest) -> Result<DipoleTest, PlanError> {
        let mounts = self.mounts("dipole_test", d.mount)?;
        Ok(DipoleTest {
            probe_position_m: d
                .probe_position_m
                .map(|p| self.position("dipole_test.probe_position_m", p))
                .transpose()?,
            mounts,
        })
    }
}

/// The plan's folder, against which relative paths in it are resolved (`.` when the
/// plan path has none).
fn plan_dir(path: &Path) -> PathBuf {
    path.parent()
        .map(|p| {
            if p.as_os_str().is_empty() {
                Path::new(".")
            } else {
                p
            }
        })
        .unwrap_or(Path::new("."))
        .to_path_buf()
}

/// Closeout steps, their log paths resolved against the plan's folder `dir`; each
/// step's kind kept as written, with its line in `text` (the registry of checks says
/// which kinds exist).
fn steps(raw: Vec<RawStep>, dir: &Path, text: &str) -> Vec<Step> {
    raw.into_iter()
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
            sensor: s.sensor.map(|n| n.trim().to_string()),
        })
        .collect()
}

/// A rotation given as axis shorthand (`["+x","-z","+y"]`) or a 3×3 matrix row by row.
pub(super) fn parse_rotation(v: &toml::Value) -> Result<Matrix3<f64>, String> {
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
pub(super) fn one_line(msg: &str) -> String {
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

impl super::rod_bench::Check for Validator<'_> {
    fn invalid(&self, key: &str, problem: String) -> PlanError {
        Validator::invalid(self, key, problem)
    }
    fn position(&self, key: &str, v: [f64; 3]) -> Result<Vector3<f64>, PlanError> {
        Validator::position(self, key, v)
    }
    fn rotation(&self, key: &str, v: Option<&toml::Value>) -> Result<Matrix3<f64>, PlanError> {
        Validator::rotation(self, key, v)
    }
    fn plain_text(&self, key: &str, value: &str) -> Result<(), PlanError> {
        Validator::plain_text(self, key, value)
    }
}
