//! The plan's `[orbit]` table: the two-line element set `orbit` propagates, the
//! reference temperature of its fit, and the circular orbit `dipole` judges torques on.

use std::path::Path;

use serde::Deserialize;

use crate::log::{PlanError, Shown};

/// `[orbit]` as written.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOrbit {
    tle: Option<Vec<String>>,
    altitude_km: Option<f64>,
    inclination_deg: Option<f64>,
    reference_temperature_c: Option<f64>,
}

/// `[orbit]`.
#[derive(Debug, Clone, Default)]
pub struct OrbitPlan {
    /// Two-line element set (lines 1 and 2), checked when `orbit` propagates it.
    pub tle: Option<[String; 2]>,
    /// Altitude of a circular orbit, km (for `dipole`).
    pub altitude_km: Option<f64>,
    /// Inclination, deg, 0..180 (for `dipole`).
    pub inclination_deg: Option<f64>,
    /// Temperature the orbit fit's hard iron refers to, °C (default: the log's mean).
    pub reference_temperature_c: Option<f64>,
}

fn invalid(path: &Path, key: &str, problem: String) -> PlanError {
    PlanError::Invalid {
        path: Shown(path.to_path_buf()),
        key: key.to_string(),
        problem,
    }
}

/// Validate `[orbit]`.
pub(super) fn orbit(path: &Path, raw: RawOrbit) -> Result<OrbitPlan, PlanError> {
    let tle = match raw.tle {
        None => None,
        Some(lines) => {
            let [a, b]: [String; 2] = lines.try_into().map_err(|l: Vec<String>| {
                invalid(
                    path,
                    "orbit.tle",
                    format!("must hold two lines, found {}", l.len()),
                )
            })?;
            for (k, (line, first)) in [(&a, '1'), (&b, '2')].into_iter().enumerate() {
                let t = line.trim();
                if !t.starts_with(first) || t.len() < 69 || t.chars().any(|c| c.is_control()) {
                    return Err(invalid(
                        path,
                        "orbit.tle",
                        format!(
                            "line {} must be the element set's line {first}: 69 characters \
                             starting with \"{first} \", found \"{t}\"",
                            k + 1
                        ),
                    ));
                }
            }
            Some([a, b])
        }
    };
    if let Some(h) = raw.altitude_km {
        if !(h.is_finite() && (100.0..=40_000.0).contains(&h)) {
            return Err(invalid(
                path,
                "orbit.altitude_km",
                format!("must lie in 100..40000 km, found {h}"),
            ));
        }
    }
    if let Some(i) = raw.inclination_deg {
        if !(i.is_finite() && (0.0..=180.0).contains(&i)) {
            return Err(invalid(
                path,
                "orbit.inclination_deg",
                format!("must lie in 0..180, found {i}"),
            ));
        }
    }
    if let Some(t) = raw.reference_temperature_c {
        if !(t.is_finite() && (-150.0..=150.0).contains(&t)) {
            return Err(invalid(
                path,
                "orbit.reference_temperature_c",
                format!("must lie in −150..150 °C, found {t}"),
            ));
        }
    }
    Ok(OrbitPlan {
        tle,
        altitude_km: raw.altitude_km,
        inclination_deg: raw.inclination_deg,
        reference_temperature_c: raw.reference_temperature_c,
    })
}
