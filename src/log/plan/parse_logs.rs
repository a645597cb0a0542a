//! Validation of the plan's sections about how logs are written (`docs/formats.md`,
//! "Logs as labs and flight software write them"): one or several magnetometers with
//! their columns and raw-count scale, `[columns]`, `[log]`, `[gyro]` and the cage's coil
//! constants. Errors name the key.

use nalgebra::Matrix3;

use super::parse::{one_line, Validator};
use super::raw::{RawCage, RawGyro, RawLog, RawMagnetometer};
use super::types::{Cage, Gyro, LogSettings, Magnetometer, Step};
use crate::log::error::PlanError;
use crate::log::layout::is_known_quantity;
use crate::log::units::FieldUnit;
use crate::screen::plausible::MAX_FIELD_NT;

/// Largest |element| of a cage's coil constant, nT/A: a cage of a few metres gives
/// around 10⁴–10⁵ nT/A (common practice); beyond 10⁹ is a unit mistake.
const MAX_NT_PER_AMP: f64 = 1e9;

impl Validator<'_> {
    /// One `[magnetometer]` table, or `[[magnetometer]]` entries (each named, names
    /// unique).
    pub(super) fn magnetometers(&self, v: toml::Value) -> Result<Vec<Magnetometer>, PlanError> {
        let (tables, several) = match v {
            toml::Value::Array(a) => (a, true),
            other => (vec![other], false),
        };
        let mut out: Vec<Magnetometer> = Vec::with_capacity(tables.len());
        for (i, t) in tables.into_iter().enumerate() {
            let key = if several {
                format!("magnetometer[{i}]")
            } else {
                "magnetometer".to_string()
            };
            let raw: RawMagnetometer = t
                .try_into()
                .map_err(|e: toml::de::Error| self.invalid(&key, one_line(&e.to_string())))?;
            let m = self.magnetometer(&key, raw)?;
            if several && m.name.is_none() {
                return Err(self.invalid(
                    &format!("{key}.name"),
                    "each of several [[magnetometer]] entries needs a name".into(),
                ));
            }
            if let Some(n) = &m.name {
                if out.iter().any(|o| o.name.as_ref() == Some(n)) {
                    return Err(self.invalid(
                        &format!("{key}.name"),
                        format!("magnetometer \"{n}\" is listed twice"),
                    ));
                }
            }
            out.push(m);
        }
        Ok(out)
    }

    fn magnetometer(&self, key: &str, m: RawMagnetometer) -> Result<Magnetometer, PlanError> {
        let k = |s: &str| format!("{key}.{s}");
        let (unit, counts) = match m.unit.as_deref().map(str::trim) {
            None => (None, false),
            Some(u) if u.eq_ignore_ascii_case("counts") || u.eq_ignore_ascii_case("lsb") => {
                (None, true)
            }
            Some(u) => (
                Some(
                    u.parse::<FieldUnit>()
                        .map_err(|e| self.invalid(&k("unit"), format!("{e}, or counts")))?,
                ),
                false,
            ),
        };
        let nt_per_count = m
            .nt_per_count
            .as_ref()
            .map(|v| self.per_axis(&k("nt_per_count"), v))
            .transpose()?;
        if counts && nt_per_count.is_none() {
            return Err(self.invalid(
                &k("nt_per_count"),
                "the unit is raw counts: give nT per count (one number or one per axis)".into(),
            ));
        }
        let name = self.name(&k("name"), m.name)?;
        let serial = self.name(&k("serial"), m.serial)?;
        let columns = match m.columns {
            Some(c) => {
                for (i, n) in c.iter().enumerate() {
                    if n.trim().is_empty() {
                        return Err(self.invalid(
                            &format!("{}[{i}]", k("columns")),
                            "must name a log column".into(),
                        ));
                    }
                    self.plain_text(&k("columns"), n)?;
                }
                Some(c.map(|n| n.trim().to_string()))
            }
            None => None,
        };
        Ok(Magnetometer {
            name,
            columns,
            serial,
            counts,
            nt_per_count,
            sensor_to_body: self.rotation(&k("sensor_to_body"), m.sensor_to_body.as_ref())?,
            position_m: m
                .position_m
                .map(|p| self.position(&k("position_m"), p))
                .transpose()?,
            unit,
            range_nt: self.positive_at_most(&k("range_nt"), m.range_nt, MAX_FIELD_NT)?,
        })
    }

    /// A non-empty printable name, trimmed, when given.
    fn name(&self, key: &str, v: Option<String>) -> Result<Option<String>, PlanError> {
        let Some(v) = v else { return Ok(None) };
        let t = v.trim();
        if t.is_empty() {
            return Err(self.invalid(key, "must not be empty".into()));
        }
        self.plain_text(key, t)?;
        Ok(Some(t.to_string()))
    }

    /// A positive factor, one number for every axis or three (x, y, z).
    fn per_axis(&self, key: &str, v: &toml::Value) -> Result<[f64; 3], PlanError> {
        let num = |x: &toml::Value| x.as_float().or_else(|| x.as_integer().map(|i| i as f64));
        let values = match v {
            toml::Value::Array(a) if a.len() == 3 => {
                let got: Option<Vec<f64>> = a.iter().map(num).collect();
                got.map(|g| [g[0], g[1], g[2]])
            }
            x => num(x).map(|s| [s; 3]),
        };
        let values = values.ok_or_else(|| {
            self.invalid(
                key,
                "expected one number or an array of three numbers".into(),
            )
        })?;
        if values.iter().all(|x| x.is_finite() && *x > 0.0) {
            Ok(values)
        } else {
            Err(self.invalid(
                key,
                format!("every factor must be positive, found {values:?}"),
            ))
        }
    }

    /// `[columns]`: each key a quantity of ours, each value a column name.
    pub(super) fn columns(&self, t: toml::Table) -> Result<Vec<(String, String)>, PlanError> {
        let mut out: Vec<(String, String)> = Vec::with_capacity(t.len());
        for (key, value) in t {
            let q = key.trim().to_ascii_lowercase();
            let k = format!("columns.{key}");
            if !is_known_quantity(&q) {
                return Err(self.invalid(
                    &k,
                    "not a quantity of ours: map t, bx by bz, hx hy hz, ix iy iz, gx gy gz, \
                     temp, angle, mount, px py pz or cmd_<rod>"
                        .into(),
                ));
            }
            let name = value
                .as_str()
                .map(str::trim)
                .filter(|s| !s.is_empty())
                .ok_or_else(|| self.invalid(&k, "expected the log's column name as text".into()))?;
            self.plain_text(&k, name)?;
            if let Some((other, _)) = out.iter().find(|(_, n)| n.eq_ignore_ascii_case(name)) {
                return Err(self.invalid(
                    &k,
                    format!("column \"{name}\" is already mapped to {other}"),
                ));
            }
            out.push((q, name.to_string()));
        }
        Ok(out)
    }

    /// `[log]`.
    pub(super) fn log(&self, l: RawLog) -> Result<LogSettings, PlanError> {
        let decimal_comma = match l.decimal.as_deref() {
            None | Some(".") => false,
            Some(",") => true,
            Some(other) => {
                return Err(self.invalid(
                    "log.decimal",
                    format!("expected \".\" or \",\", found \"{other}\""),
                ))
            }
        };
        Ok(LogSettings {
            hold_commands: l.hold_commands.unwrap_or(false),
            decimal_comma,
        })
    }

    /// `[gyro]`.
    pub(super) fn gyro(&self, g: RawGyro) -> Result<Gyro, PlanError> {
        Ok(Gyro {
            sensor_to_body: self.rotation("gyro.sensor_to_body", g.sensor_to_body.as_ref())?,
            serial: self.name("gyro.serial", g.serial)?,
            scale_tol: self.positive_at_most("gyro.scale_tol", g.scale_tol, 1.0)?,
        })
    }

    /// `[cage]`: the mounting, and the coil constants for logs of coil currents.
    pub(super) fn cage(&self, c: RawCage) -> Result<Cage, PlanError> {
        let nt_per_amp = c
            .nt_per_amp
            .as_ref()
            .map(|v| {
                let m = parse_matrix(v).map_err(|p| self.invalid("cage.nt_per_amp", p))?;
                if m.iter().any(|x| x.abs() > MAX_NT_PER_AMP) {
                    return Err(self.invalid(
                        "cage.nt_per_amp",
                        format!("elements beyond {MAX_NT_PER_AMP:e} nT/A: the unit is nT per A"),
                    ));
                }
                if m.determinant().abs() < 1e-12 * m.norm().powi(3) || m.norm() == 0.0 {
                    return Err(self.invalid(
                        "cage.nt_per_amp",
                        "the matrix is singular: the three coils must give three independent \
                         fields"
                            .into(),
                    ));
                }
                Ok(m)
            })
            .transpose()?;
        Ok(Cage {
            article_to_cage: self.rotation("cage.article_to_cage", Some(&c.article_to_cage))?,
            nt_per_amp,
            ambient_nt: c
                .ambient_nt
                .map(|a| self.vec3("cage.ambient_nt", a))
                .transpose()?,
        })
    }

    /// Each step's sensor names one of the plan's magnetometers.
    pub(super) fn step_sensors(
        &self,
        steps: &[Step],
        magnetometers: &[Magnetometer],
    ) -> Result<(), PlanError> {
        for (i, s) in steps.iter().enumerate() {
            let Some(name) = &s.sensor else { continue };
            if !magnetometers.iter().any(|m| m.name.as_ref() == Some(name)) {
                let names: Vec<&str> = magnetometers
                    .iter()
                    .filter_map(|m| m.name.as_deref())
                    .collect();
                return Err(self.invalid(
                    &format!("step[{i}].sensor"),
                    format!(
                        "no magnetometer is named \"{name}\" (named ones: {})",
                        if names.is_empty() {
                            "none".to_string()
                        } else {
                            names.join(", ")
                        }
                    ),
                ));
            }
        }
        Ok(())
    }
}

/// A 3×3 matrix of finite numbers, row by row.
fn parse_matrix(v: &toml::Value) -> Result<Matrix3<f64>, String> {
    let rows = v
        .as_array()
        .filter(|a| a.len() == 3)
        .ok_or_else(|| "expected a 3×3 matrix, row by row".to_string())?;
    let mut m = Matrix3::zeros();
    for (i, row) in rows.iter().enumerate() {
        let row = row
            .as_array()
            .filter(|r| r.len() == 3)
            .ok_or_else(|| format!("row {} must be an array of 3 numbers", i + 1))?;
        for (j, x) in row.iter().enumerate() {
            let x = x
                .as_float()
                .or_else(|| x.as_integer().map(|k| k as f64))
                .filter(|x| x.is_finite())
                .ok_or_else(|| format!("row {} element {} is not a finite number", i + 1, j + 1))?;
            m[(i, j)] = x;
        }
    }
    Ok(m)
}
