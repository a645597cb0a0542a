//! The magnetometer's part of a turntable alignment run (docs/alignment.md): readings
//! to fit samples, the fit, the sign, verdicts and gates.

use nalgebra::{Matrix3, Vector3};

use super::judge;
use super::result::{AlignPoint, AxisResult, AxisVerdict, Handedness, MagAlignment};
use super::warning::AlignWarning;
use super::{AlignRequest, FIELD_OFF_AXIS_WARN_DEG};
use crate::check::{Gate, GateRole};
use crate::fit::align::{fit_alignment, AlignSample};
use crate::fit::wahba::{nearest_signed_permutation, rotation_from_vector};
use crate::log::plan::AlignTest;
use crate::log::Plan;
use crate::Error;

/// The magnetometer's part of a turntable run: its result, its gates, the readings used
/// and the mounts.
pub fn magnetometer_part(
    req: &AlignRequest,
    plan: &Plan,
    test: &AlignTest,
    limit_deg: f64,
    warnings: &mut Vec<AlignWarning>,
) -> Result<(MagAlignment, Vec<Gate>, usize, Vec<String>), Error> {
    let (samples, tags, used_mounts) = samples(req, test, warnings)?;
    let fit_hard_iron = req.options.calibration.is_none();
    let fit = fit_alignment(&samples, fit_hard_iron)?;
    let planned = plan
        .magnetometer
        .as_ref()
        .map(|m| m.sensor_to_body)
        .unwrap_or_else(Matrix3::identity);
    let signed = judge::choose_sign(&fit, reference_up_nt(plan, test)?, &planned);
    if !signed.sign_known {
        warnings.push(AlignWarning::FieldSignUnknown);
    }
    let axes = judge::axes(&signed.a, &planned, &fit.unobservable);
    let handedness = judge::handedness(&signed);
    let all_ok = axes.iter().all(|a| a.verdict == AxisVerdict::Ok);
    let reference = if all_ok {
        planned
    } else {
        nearest_signed_permutation(&signed.a)
    };
    let mis = judge::misalignment(
        &signed.a,
        &reference,
        &fit.rotation_cov_rad2,
        &fit.unobservable,
    );
    let f = signed.field_nt;
    let off_axis_deg = off_axis_deg(&f);
    if off_axis_deg < FIELD_OFF_AXIS_WARN_DEG {
        warnings.push(AlignWarning::FieldNearTableAxis {
            angle_deg: off_axis_deg,
        });
    }
    let gates = gates(
        &axes,
        handedness,
        &mis,
        limit_deg,
        fit.unobservable.is_empty(),
    );
    let h = fit.hard_iron_nt.unwrap_or_else(Vector3::zeros);
    let points = samples
        .iter()
        .zip(&tags)
        .map(|(s, (mount, heading_deg))| {
            let m = signed.a * (s.sensor_nt - h);
            let b = s.body_to_table.transpose() * f;
            AlignPoint {
                mount: *mount,
                heading_deg: *heading_deg,
                measured_body_nt: [m.x, m.y, m.z],
                fitted_body_nt: [b.x, b.y, b.z],
            }
        })
        .collect();
    let deg = |v: [Option<f64>; 3]| v.map(|x| x.map(f64::to_degrees));
    let mag = MagAlignment {
        sensor_to_body_measured: rows(&signed.a),
        misalignment_deg: deg(mis.vector_rad),
        misalignment_sigma_deg: deg(mis.sigma_rad),
        misalignment_total_deg: mis.total_rad.to_degrees(),
        misalignment_total_sigma_deg: mis.total_sigma_rad.to_degrees(),
        axes,
        handedness,
        field_table_nt: [f.x, f.y, f.z],
        field_off_axis_deg: off_axis_deg,
        hard_iron_nt: fit.hard_iron_nt.map(|h| [h.x, h.y, h.z]),
        residual_rms_nt: fit.residual_rms_nt,
        points,
    };
    Ok((mag, gates, samples.len(), used_mounts))
}

/// Angle between the field and the table axis (+z or −z, whichever is nearer), deg.
fn off_axis_deg(f: &Vector3<f64>) -> f64 {
    (f.z.abs() / f.norm().max(1e-300))
        .clamp(0.0, 1.0)
        .acos()
        .to_degrees()
}

fn rows(m: &Matrix3<f64>) -> [[f64; 3]; 3] {
    [0, 1, 2].map(|i| [m[(i, 0)], m[(i, 1)], m[(i, 2)]])
}

/// The field's upward component in the table frame, nT, when known: the plan's
/// reference probe, else IGRF-14 at the `[site]` (its down component, negated).
fn reference_up_nt(plan: &Plan, test: &AlignTest) -> Result<Option<f64>, Error> {
    if let Some(f) = test.field_table_nt {
        return Ok(Some(f.z));
    }
    match plan.site.as_ref().and_then(|s| s.date.map(|d| (s, d))) {
        Some((s, date)) => {
            let g = crate::physics::igrf::igrf_field(s.lat_deg, s.lon_deg, s.alt_m, date)?;
            Ok(Some(-g.down_nt))
        }
        None => Ok(None),
    }
}

/// Gates: every observable axis as planned, a right-handed mapping when decided, and
/// the misalignment within the limit and resolved by the data.
fn gates(
    axes: &[AxisResult],
    handedness: Handedness,
    mis: &judge::Misalignment,
    limit_deg: f64,
    all_observable: bool,
) -> Vec<Gate> {
    let mut gates = Vec::new();
    for a in axes {
        let ok = |b: bool| if b { 1.0 } else { 0.0 };
        match a.verdict {
            AxisVerdict::Inconclusive => gates.push(Gate::at_least(
                format!("axis_observed:{}", a.axis),
                0.0,
                1.0,
                GateRole::Data,
            )),
            v => gates.push(Gate::at_least(
                format!("axis:{}", a.axis),
                ok(v == AxisVerdict::Ok),
                1.0,
                GateRole::Article,
            )),
        }
    }
    if handedness != Handedness::Inconclusive {
        let right = if handedness == Handedness::Right {
            1.0
        } else {
            0.0
        };
        gates.push(Gate::at_least("handedness", right, 1.0, GateRole::Article));
    }
    if all_observable && axes.iter().all(|a| a.verdict == AxisVerdict::Ok) {
        let total = mis.total_rad.to_degrees();
        gates.push(Gate::at_most(
            "misalignment",
            total,
            limit_deg,
            GateRole::Article,
        ));
        let sigma = mis.total_sigma_rad.to_degrees();
        gates.push(Gate::at_most(
            "misalignment_sigma",
            sigma,
            limit_deg / 3.0,
            GateRole::Data,
        ));
    }
    gates
}

/// The readings as fit samples: the field (calibration applied), each row's mount
/// rotation and heading; rows flagged saturated are left out; headings, mounts and the
/// hard-iron choice warned about.
/// Fit samples, each one's (mount index, heading deg), and the mounts used.
type Samples = (Vec<AlignSample>, Vec<(usize, f64)>, Vec<String>);

fn samples(
    req: &AlignRequest,
    test: &AlignTest,
    warnings: &mut Vec<AlignWarning>,
) -> Result<Samples, Error> {
    let log = &req.input.log;
    let path = log.path.display();
    let b = log.require_field("align reads the field")?;
    let angle = log.angle_rad.as_ref().ok_or_else(|| {
        Error::Usage(format!(
            "{path}: align needs an `angle` column (table heading, deg)"
        ))
    })?;
    let mount = log.mount.as_ref().ok_or_else(|| {
        Error::Usage(format!(
            "{path}: align needs a `mount` column naming each row's mount"
        ))
    })?;
    let flagged = &req.input.saturation.flagged;
    let mut out = Vec::new();
    let mut tags = Vec::new();
    let mut per_mount: Vec<(String, Vec<f64>)> = Vec::new();
    for i in 0..log.len() {
        if flagged.get(i).copied().unwrap_or(false) {
            continue;
        }
        let Some(label) = mount[i].and_then(|m| log.mount_labels.get(m as usize)) else {
            continue; // article-absent rows
        };
        let m = test
            .mounts
            .iter()
            .find(|m| &m.label == label)
            .ok_or_else(|| {
                Error::Usage(format!(
                    "{path} line {}: mount \"{label}\" is not in the plan's [[align_test.mount]]",
                    log.lines.get(i).unwrap_or(0)
                ))
            })?;
        let theta = angle[i];
        let rz = rotation_from_vector(&Vector3::new(0.0, 0.0, theta));
        let mut s = Vector3::new(b[0][i], b[1][i], b[2][i]);
        if let Some(c) = &req.options.calibration {
            s = c.apply(&s);
        }
        out.push(AlignSample {
            body_to_table: rz * m.body_to_table,
            sensor_nt: s,
        });
        let k = match per_mount.iter().position(|(l, _)| l == label) {
            Some(k) => k,
            None => {
                per_mount.push((label.clone(), Vec::new()));
                per_mount.len() - 1
            }
        };
        per_mount[k].1.push(theta);
        tags.push((k, theta.to_degrees()));
    }
    for (label, headings) in &per_mount {
        let (gap_deg, n) = heading_gap_deg(headings);
        if gap_deg > 60.0 || n < 8 {
            warnings.push(AlignWarning::HeadingGap {
                mount: label.clone(),
                gap_deg,
                headings: n,
            });
        }
    }
    if req.options.calibration.is_none() {
        warnings.push(AlignWarning::HardIronFitted);
    }
    if per_mount.len() == 1 {
        warnings.push(AlignWarning::OneMount);
    }
    Ok((out, tags, per_mount.into_iter().map(|(l, _)| l).collect()))
}

/// Largest gap between distinct headings around the circle, deg, and their number
/// (headings within 1° count as one).
fn heading_gap_deg(headings_rad: &[f64]) -> (f64, usize) {
    let mut d: Vec<f64> = headings_rad
        .iter()
        .map(|h| h.to_degrees().rem_euclid(360.0))
        .collect();
    d.sort_by(f64::total_cmp);
    d.dedup_by(|a, b| (*a - *b).abs() < 1.0);
    if d.is_empty() {
        return (360.0, 0);
    }
    let mut gap = 360.0 - d[d.len() - 1] + d[0];
    for w in d.windows(2) {
        gap = f64::max(gap, w[1] - w[0]);
    }
    (gap, d.len())
}
