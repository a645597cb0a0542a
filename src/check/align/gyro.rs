//! The gyro part of `align` (docs/alignment.md, "Gyro"): its result, the verdicts shared
//! by the turntable and the hand tumble, and the turntable's table rate against the gyro.

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

use super::judge;
use super::result::{AxisResult, AxisVerdict, Handedness};
use crate::check::{Gate, GateRole};
use crate::fit::gyro::{fit_rate_mapping, slope_through_origin};
use crate::fit::wahba::nearest_signed_permutation;
use crate::log::plan::AlignTest;
use crate::log::SweepLog;

/// Default limit on `|scale| − 1` of a gyro axis (docs/alignment.md).
pub const GYRO_SCALE_TOL: f64 = 0.05;

/// Table rates below this count as still, deg/s (common practice: well above an
/// encoder's jitter over one sample, well below any test rate).
pub const STILL_DEG_S: f64 = 0.05;

/// Forward and backward rates within this share of each other count as steady (not a
/// start or stop of the table).
const STEADY_SHARE: f64 = 0.02;

/// What the gyro is judged against.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum GyroReference {
    /// The turntable's rate about its +z axis.
    Table,
    /// The magnetometer, through `Ḃ_body = −ω_body × B_body` (hand tumble).
    Magnetometer,
}

/// The gyro's result: the `gyro` object of the JSON.
#[derive(Debug, Clone, Serialize)]
pub struct GyroResult {
    /// What the gyro was judged against.
    pub reference: GyroReference,
    /// Gyro sensor → body, rows; the unconstrained orthogonal fit (improper when mirrored).
    pub sensor_to_body_measured: [[f64; 3]; 3],
    /// Rotation vector (body frame, deg) from the reference mapping (the plan's `[gyro]`
    /// when every axis is ok, else the detected signed permutation) to the measured one;
    /// null where unobservable.
    pub misalignment_deg: [Option<f64>; 3],
    /// 1σ of each component, deg; null where unobservable.
    pub misalignment_sigma_deg: [Option<f64>; 3],
    /// Angle of the misalignment rotation over its observable components, deg.
    pub misalignment_total_deg: f64,
    /// 1σ of `misalignment_total_deg`, deg.
    pub misalignment_total_sigma_deg: f64,
    /// Per body axis x, y, z, against the plan's `[gyro] sensor_to_body`.
    pub axes: Vec<AxisResult>,
    /// Handedness of the measured mapping (inconclusive when a rotation is unobservable).
    pub handedness: Handedness,
    /// Scale factor per body axis through the plan's mapping, signed (≈ −1: flipped);
    /// null for an axis never spun.
    pub scale: [Option<f64>; 3],
    /// 1σ of each scale.
    pub scale_sigma: [Option<f64>; 3],
    /// Bias per body axis through the plan's mapping, deg/s; null when not measured.
    pub bias_deg_s: [Option<f64>; 3],
    /// 1σ of each bias, deg/s.
    pub bias_sigma_deg_s: [Option<f64>; 3],
    /// Limit on `|scale| − 1`.
    pub gyro_scale_tol: f64,
    /// Readings the mapping was fitted on (turning rows, or tumble rows).
    pub samples: usize,
    /// Rows with the table still (bias), turntable only.
    pub still_samples: usize,
}

/// The numbers a gyro fit hands to [`judge_gyro`].
pub struct GyroFitted {
    /// Measured gyro sensor → body.
    pub a: Matrix3<f64>,
    /// Rotation covariance, rad².
    pub cov: Matrix3<f64>,
    /// Null rotation directions.
    pub null: Vec<Vector3<f64>>,
    /// (scale, σ) per body axis.
    pub scale: [Option<(f64, f64)>; 3],
    /// (bias, σ) per body axis, rad/s.
    pub bias_rad_s: [Option<(f64, f64)>; 3],
    /// Body axes the data turned about (others are `inconclusive`).
    pub seen: [bool; 3],
}

/// From a fit to the gyro's result: axes, handedness and misalignment as for the
/// magnetometer ([`judge`]).
pub fn judge_gyro(
    fit: GyroFitted,
    planned: &Matrix3<f64>,
    reference: GyroReference,
    tol: f64,
    counts: (usize, usize),
) -> GyroResult {
    let mut axes = judge::axes(&fit.a, planned, &fit.null);
    for (a, seen) in axes.iter_mut().zip(fit.seen) {
        if !seen {
            a.verdict = AxisVerdict::Inconclusive;
            a.measured = None;
        }
    }
    let all_ok = axes.iter().all(|a| a.verdict == AxisVerdict::Ok);
    let reference_map = if all_ok {
        *planned
    } else {
        nearest_signed_permutation(&fit.a)
    };
    let mis = judge::misalignment(&fit.a, &reference_map, &fit.cov, &fit.null);
    let decided = fit.null.is_empty() && fit.seen.iter().all(|s| *s);
    let handedness = match (decided, fit.a.determinant() > 0.0) {
        (false, _) => Handedness::Inconclusive,
        (true, true) => Handedness::Right,
        (true, false) => Handedness::Mirrored,
    };
    let deg = |v: [Option<f64>; 3]| v.map(|x| x.map(f64::to_degrees));
    GyroResult {
        reference,
        sensor_to_body_measured: [0, 1, 2].map(|i| [fit.a[(i, 0)], fit.a[(i, 1)], fit.a[(i, 2)]]),
        misalignment_deg: deg(mis.vector_rad),
        misalignment_sigma_deg: deg(mis.sigma_rad),
        misalignment_total_deg: mis.total_rad.to_degrees(),
        misalignment_total_sigma_deg: mis.total_sigma_rad.to_degrees(),
        axes,
        handedness,
        scale: fit.scale.map(|s| s.map(|x| x.0)),
        scale_sigma: fit.scale.map(|s| s.map(|x| x.1)),
        bias_deg_s: fit.bias_rad_s.map(|s| s.map(|x| x.0.to_degrees())),
        bias_sigma_deg_s: fit.bias_rad_s.map(|s| s.map(|x| x.1.to_degrees())),
        gyro_scale_tol: tol,
        samples: counts.0,
        still_samples: counts.1,
    }
}

/// The gyro's gates: each axis as planned (or unobserved), each spun axis's scale within
/// the tolerance and resolved, and the misalignment within `limit_deg` when every axis is
/// ok and observable.
pub fn gyro_gates(g: &GyroResult, limit_deg: f64) -> Vec<Gate> {
    let mut gates = Vec::new();
    for (i, a) in g.axes.iter().enumerate() {
        if a.verdict == AxisVerdict::Inconclusive {
            let name = format!("gyro_axis_observed:{}", a.axis);
            gates.push(Gate::at_least(name, 0.0, 1.0, GateRole::Data));
            continue;
        }
        let ok = if a.verdict == AxisVerdict::Ok {
            1.0
        } else {
            0.0
        };
        let name = format!("gyro_axis:{}", a.axis);
        gates.push(Gate::at_least(name, ok, 1.0, GateRole::Article));
        if let (Some(s), Some(sigma), false) = (
            g.scale[i],
            g.scale_sigma[i],
            a.verdict == AxisVerdict::Swapped,
        ) {
            let name = format!("gyro_scale:{}", a.axis);
            let err = (s.abs() - 1.0).abs();
            gates.push(Gate::at_most(
                name,
                err,
                g.gyro_scale_tol,
                GateRole::Article,
            ));
            let name = format!("gyro_scale_sigma:{}", a.axis);
            let resolved = g.gyro_scale_tol / 3.0;
            gates.push(Gate::at_most(name, sigma, resolved, GateRole::Data));
        }
    }
    let observable = g.misalignment_deg.iter().all(Option::is_some);
    if observable && g.axes.iter().all(|a| a.verdict == AxisVerdict::Ok) {
        let (v, s) = (g.misalignment_total_deg, g.misalignment_total_sigma_deg);
        gates.push(Gate::at_most(
            "gyro_misalignment",
            v,
            limit_deg,
            GateRole::Article,
        ));
        gates.push(Gate::at_most(
            "gyro_misalignment_sigma",
            s,
            limit_deg / 3.0,
            GateRole::Data,
        ));
    }
    gates
}

/// One row of the turntable as the gyro part reads it.
struct RateRow {
    /// Table rate in the body frame, rad/s.
    body_rad_s: Vector3<f64>,
    /// The gyro's reading, sensor frame, rad/s.
    gyro_rad_s: Vector3<f64>,
    /// The table was still.
    still: bool,
}

/// Rows of steady table rate (still or turning evenly), each with the table rate mapped
/// to the body by its mount: the rate by forward and backward differences of the heading
/// within one mount's run of rows, kept where the two agree.
fn rate_rows(log: &SweepLog, test: &AlignTest, gyro: &[Vec<f64>; 3]) -> Vec<RateRow> {
    let (Some(angle), Some(mount), Some(t)) =
        (log.angle_rad.as_ref(), log.mount.as_ref(), log.t_s.as_ref())
    else {
        return Vec::new();
    };
    let still = STILL_DEG_S.to_radians();
    let wrap = |d: f64| {
        (d + std::f64::consts::PI).rem_euclid(std::f64::consts::TAU) - std::f64::consts::PI
    };
    let mut out = Vec::new();
    for i in 1..log.len().saturating_sub(1) {
        let m = mount[i];
        if m.is_none() || mount[i - 1] != m || mount[i + 1] != m {
            continue;
        }
        let label = m.and_then(|m| log.mount_labels.get(m as usize));
        let Some(mt) = label.and_then(|l| test.mounts.iter().find(|x| &x.label == l)) else {
            continue;
        };
        let (dtf, dtb) = (t[i + 1] - t[i], t[i] - t[i - 1]);
        if !(dtf > 0.0 && dtb > 0.0) {
            continue;
        }
        let fwd = wrap(angle[i + 1] - angle[i]) / dtf;
        let bwd = wrap(angle[i] - angle[i - 1]) / dtb;
        let big = fwd.abs().max(bwd.abs());
        if (fwd - bwd).abs() > STEADY_SHARE * big + still {
            continue;
        }
        let g = Vector3::new(gyro[0][i], gyro[1][i], gyro[2][i]);
        if !g.iter().all(|x| x.is_finite()) {
            continue;
        }
        let rate = 0.5 * (fwd + bwd);
        out.push(RateRow {
            body_rad_s: mt.body_to_table.transpose() * Vector3::z() * rate,
            gyro_rad_s: g,
            still: big <= still,
        });
    }
    out
}

/// Why the gyro could not be judged on a turntable run.
pub type NotJudged = String;

/// The gyro against the turntable's rate.
pub fn table_gyro(
    log: &SweepLog,
    test: &AlignTest,
    gyro: &[Vec<f64>; 3],
    planned: &Matrix3<f64>,
    tol: f64,
) -> Result<GyroResult, NotJudged> {
    if log.t_s.is_none() {
        return Err("the log has no time column `t`: the table's rate cannot be taken".into());
    }
    let rows = rate_rows(log, test, gyro);
    let still: Vec<&RateRow> = rows.iter().filter(|r| r.still).collect();
    let moving: Vec<&RateRow> = rows.iter().filter(|r| !r.still).collect();
    if still.len() < 2 {
        return Err(
            "no still segments (the table at rest between turns): the gyro's bias \
                    cannot be taken; hold the table still a few seconds at each heading"
                .into(),
        );
    }
    let planned_body = |r: &RateRow| planned * r.gyro_rad_s;
    let n = still.len() as f64;
    let mean: Vector3<f64> = still.iter().map(|r| planned_body(r)).sum::<Vector3<f64>>() / n;
    let var: Vector3<f64> = still
        .iter()
        .map(|r| (planned_body(r) - mean).map(|x| x * x))
        .sum::<Vector3<f64>>()
        / (n - 1.0);
    let bias = [0, 1, 2].map(|i| Some((mean[i], (var[i] / n).sqrt())));
    let scale = [0, 1, 2].map(|i| {
        let pts: Vec<(f64, f64)> = moving
            .iter()
            .filter(|r| r.body_rad_s[i].abs() > 0.5 * r.body_rad_s.norm())
            .map(|r| (r.body_rad_s[i], planned_body(r)[i] - mean[i]))
            .collect();
        slope_through_origin(pts)
    });
    let bias_sensor = planned.transpose() * mean;
    let pairs: Vec<(Vector3<f64>, Vector3<f64>)> = moving
        .iter()
        .map(|r| (r.body_rad_s, r.gyro_rad_s - bias_sensor))
        .collect();
    let fit = fit_rate_mapping(&pairs).map_err(|e| e.to_string())?;
    let fitted = GyroFitted {
        a: fit.sensor_to_body,
        cov: fit.rotation_cov_rad2,
        null: fit.unobservable,
        scale,
        bias_rad_s: bias,
        seen: fit.spun,
    };
    Ok(judge_gyro(
        fitted,
        planned,
        GyroReference::Table,
        tol,
        (moving.len(), still.len()),
    ))
}
