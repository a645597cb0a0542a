//! `[rod_bench]` of a plan: one torque rod on the bench (its serial, winding and core)
//! and the probe stations around it, as written and as validated (docs/rods.md).

use nalgebra::{Matrix3, Vector3};
use serde::Deserialize;

use crate::log::error::{PlanError, Shown};

/// `[rod_bench]`: the rod under test and the probe stations.
#[derive(Debug, Clone)]
pub struct RodBench {
    /// The rod's serial: the ledger files its runs under it.
    pub serial: String,
    /// The rod's batch, when given: the ledger's build label for the run.
    pub batch: Option<String>,
    /// Turns of the winding.
    pub turns: f64,
    /// Length of the rod's core (or of the winding for an air core), m.
    pub length_m: f64,
    /// Area enclosed by one turn, m² (from `coil_area_m2`, or π d²/4 of `coil_diameter_m`).
    pub coil_area_m2: f64,
    /// Core diameter, m, when the rod has a core.
    pub core_diameter_m: Option<f64>,
    /// Relative permeability of the core material, when known.
    pub core_mu_r: Option<f64>,
    /// Probe stations.
    pub positions: Vec<RodPosition>,
}

/// `[[rod_bench.position]]`: one probe station.
#[derive(Debug, Clone)]
pub struct RodPosition {
    /// Label as written in the log's `position` column.
    pub label: String,
    /// Probe position, rod frame (axis +z along the rod's marked + end, origin at the
    /// rod's centre), m.
    pub position_m: Vector3<f64>,
    /// Rotation probe → rod: `v_rod = probe_to_rod * v_probe`.
    pub probe_to_rod: Matrix3<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawRodBench {
    serial: String,
    batch: Option<String>,
    turns: f64,
    length_m: f64,
    coil_diameter_m: Option<f64>,
    coil_area_m2: Option<f64>,
    core_diameter_m: Option<f64>,
    core_mu_r: Option<f64>,
    #[serde(default)]
    position: Vec<RawRodPosition>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRodPosition {
    label: String,
    position_m: [f64; 3],
    probe_to_rod: Option<toml::Value>,
}

/// What validation needs from the plan reader: errors naming the key, and the checks
/// of single values it already has.
pub(super) trait Check {
    fn invalid(&self, key: &str, problem: String) -> PlanError;
    fn position(&self, key: &str, v: [f64; 3]) -> Result<Vector3<f64>, PlanError>;
    fn rotation(&self, key: &str, v: Option<&toml::Value>) -> Result<Matrix3<f64>, PlanError>;
    fn plain_text(&self, key: &str, value: &str) -> Result<(), PlanError>;
}

fn positive(v: &dyn Check, key: &str, x: f64) -> Result<f64, PlanError> {
    if x.is_finite() && x > 0.0 {
        Ok(x)
    } else {
        Err(v.invalid(key, format!("must be a positive number, found {x}")))
    }
}

/// Validate `[rod_bench]`.
pub(super) fn rod_bench(v: &dyn Check, r: RawRodBench) -> Result<RodBench, PlanError> {
    let (serial, batch) = identity(v, r.serial, r.batch)?;
    let coil_area_m2 = coil_area_m2(v, r.coil_diameter_m, r.coil_area_m2)?;
    let core_mu_r = r
        .core_mu_r
        .map(|m| {
            if m.is_finite() && m >= 1.0 {
                Ok(m)
            } else {
                Err(v.invalid(
                    "rod_bench.core_mu_r",
                    format!("must be a relative permeability ≥ 1, found {m}"),
                ))
            }
        })
        .transpose()?;
    let positions = positions(v, r.position)?;
    Ok(RodBench {
        serial,
        batch,
        turns: positive(v, "rod_bench.turns", r.turns)?,
        length_m: positive(v, "rod_bench.length_m", r.length_m)?,
        coil_area_m2,
        core_diameter_m: r
            .core_diameter_m
            .map(|d| positive(v, "rod_bench.core_diameter_m", d))
            .transpose()?,
        core_mu_r,
        positions,
    })
}

/// The rod's serial and batch, trimmed: plain text, not empty.
fn identity(
    v: &dyn Check,
    serial: String,
    batch: Option<String>,
) -> Result<(String, Option<String>), PlanError> {
    let serial = serial.trim().to_string();
    if serial.is_empty() {
        return Err(v.invalid("rod_bench.serial", "must not be empty".into()));
    }
    v.plain_text("rod_bench.serial", &serial)?;
    let batch = batch.map(|b| b.trim().to_string());
    if let Some(b) = &batch {
        if b.is_empty() {
            return Err(v.invalid("rod_bench.batch", "must not be empty when given".into()));
        }
        v.plain_text("rod_bench.batch", b)?;
    }
    Ok((serial, batch))
}

/// The area of one turn, m²: `coil_area_m2`, or π d²/4 of `coil_diameter_m` (m); exactly
/// one of the two.
fn coil_area_m2(
    v: &dyn Check,
    diameter_m: Option<f64>,
    area_m2: Option<f64>,
) -> Result<f64, PlanError> {
    match (diameter_m, area_m2) {
        (Some(_), Some(_)) => Err(v.invalid(
            "rod_bench.coil_area_m2",
            "give coil_diameter_m or coil_area_m2, not both".into(),
        )),
        (Some(d), None) => {
            let d = positive(v, "rod_bench.coil_diameter_m", d)?;
            Ok(std::f64::consts::PI * d * d / 4.0)
        }
        (None, Some(a)) => positive(v, "rod_bench.coil_area_m2", a),
        (None, None) => Err(v.invalid(
            "rod_bench.coil_diameter_m",
            "the nominal moment needs the winding's size: give coil_diameter_m or coil_area_m2"
                .into(),
        )),
    }
}

/// The probe stations: at least one, labels plain, unique and not empty, none at the
/// rod's centre (rod frame, m).
fn positions(v: &dyn Check, raw: Vec<RawRodPosition>) -> Result<Vec<RodPosition>, PlanError> {
    let mut positions: Vec<RodPosition> = Vec::new();
    for (i, p) in raw.into_iter().enumerate() {
        let key = |k: &str| format!("rod_bench.position[{i}].{k}");
        let label = p.label.trim().to_string();
        if label.is_empty() {
            return Err(v.invalid(&key("label"), "must not be empty".into()));
        }
        v.plain_text(&key("label"), &label)?;
        if positions.iter().any(|o| o.label == label) {
            return Err(v.invalid(&key("label"), format!("\"{label}\" is listed twice")));
        }
        let position_m = v.position(&key("position_m"), p.position_m)?;
        if position_m.norm() < 1e-6 {
            return Err(v.invalid(
                &key("position_m"),
                "the probe cannot sit at the rod's centre".into(),
            ));
        }
        positions.push(RodPosition {
            label,
            position_m,
            probe_to_rod: v.rotation(&key("probe_to_rod"), p.probe_to_rod.as_ref())?,
        });
    }
    if positions.is_empty() {
        return Err(v.invalid(
            "rod_bench.position",
            "list at least one [[rod_bench.position]] (label, position_m, probe_to_rod)".into(),
        ));
    }
    Ok(positions)
}

/// `[limits]` of a rod on the bench (docs/rods.md).
#[derive(Debug, Clone, Copy, Default)]
pub struct RodLimits {
    /// The rod's rated current, A: the moment, linearity and remanence are judged up to it.
    pub current_max_a: Option<f64>,
    /// Smallest acceptable |m| at the rated current, A·m².
    pub moment_min_am2: Option<f64>,
    /// Largest acceptable remanence, % of |m| at the rated current.
    pub remanence_max_pct: Option<f64>,
    /// Largest acceptable deviation from the line, % of its value at the rated current.
    pub linearity_max_pct: Option<f64>,
}

impl RodLimits {
    /// Validated limits (each positive when given).
    pub(super) fn new(
        path: &std::path::Path,
        raw: [Option<f64>; 4],
    ) -> Result<RodLimits, PlanError> {
        let keys = [
            "rod_current_max_a",
            "rod_moment_min_am2",
            "rod_remanence_max_pct",
            "rod_linearity_max_pct",
        ];
        for (k, x) in keys.iter().zip(raw) {
            if let Some(x) = x.filter(|x| !(x.is_finite() && *x > 0.0)) {
                return Err(PlanError::Invalid {
                    path: Shown(path.to_path_buf()),
                    key: format!("limits.{k}"),
                    problem: format!("must be a positive number, found {x}"),
                });
            }
        }
        Ok(RodLimits {
            current_max_a: raw[0],
            moment_min_am2: raw[1],
            remanence_max_pct: raw[2],
            linearity_max_pct: raw[3],
        })
    }
}
