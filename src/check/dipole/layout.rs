//! The layout of a dipole test as the log and the plan give it: the method (turntable
//! or static map), the mount of each row and its rotation, the table angle and the
//! probe position of each row. Refuses a log or plan that lacks one of them.

use nalgebra::{Matrix3, Vector3};

use super::DipoleMethod;
use crate::log::plan::DipoleTest;
use crate::log::{LogError, Plan, Shown, SweepLog};
use crate::Error;

/// What the log and the plan say about where the article and the probe were.
pub(super) struct Layout<'a> {
    /// The log (article-absent rows included).
    pub(super) log: &'a SweepLog,
    /// Measured field per sensor axis, probe frame = table frame (L), nT.
    pub(super) b_nt: &'a [Vec<f64>; 3],
    /// Mount label index per row; `None` for article-absent (background) rows.
    pub(super) mounts: &'a [Option<u32>],
    /// Turntable (an `angle` column) or static map (`px py pz`, no `angle`).
    pub(super) method: DipoleMethod,
    /// Table angle per row, rad (turntable only).
    angle_rad: Option<&'a [f64]>,
    /// The probe position when the log has no `px py pz`, table frame (L), m.
    fixed_probe_m: Option<Vector3<f64>>,
    /// Rotation body → table at angle zero per mount label of the log, in label order.
    body_to_table: Vec<Matrix3<f64>>,
}

impl<'a> Layout<'a> {
    /// Read the layout; refuses a plan without `[[dipole_test.mount]]`, a log without
    /// field, `mount`, or `angle`/`px py pz` columns, a probe position given nowhere, and
    /// a mount label the plan does not list.
    pub(super) fn read(log: &'a SweepLog, plan: &Plan) -> Result<Self, Error> {
        let test = plan
            .dipole_test
            .as_ref()
            .filter(|t| !t.mounts.is_empty())
            .ok_or_else(|| {
                plan.missing(
                    "dipole_test",
                    "the dipole check needs [[dipole_test.mount]] entries giving body_to_table",
                )
            })?;
        let b_nt = log.require_field("the dipole check fits the measured field")?;
        let mounts = log.mount.as_deref().ok_or_else(|| {
            missing_column(
                log,
                "mount",
                "it tells article-present rows from article-absent (background) rows",
            )
        })?;
        let (method, angle_rad) = method_of(log)?;
        let fixed_probe_m = fixed_probe_m(log, plan, test)?;
        let body_to_table = mount_rotations(log, plan, test, mounts)?;
        Ok(Layout {
            log,
            b_nt,
            mounts,
            method,
            angle_rad,
            fixed_probe_m,
            body_to_table,
        })
    }

    /// Rotation body → table at angle zero of mount label index `k`.
    pub(super) fn body_to_table(&self, k: u32) -> Result<Matrix3<f64>, Error> {
        self.body_to_table
            .get(k as usize)
            .copied()
            .ok_or_else(|| Error::Internal(format!("mount index {k} outside the label list")))
    }

    /// Table angle of row `i`, rad (0 for the static method).
    pub(super) fn angle_rad(&self, i: usize) -> f64 {
        self.angle_rad
            .and_then(|a| a.get(i).copied())
            .unwrap_or(0.0)
    }

    /// Probe position of row `i`, table frame (L), m.
    pub(super) fn probe_m(&self, i: usize) -> Result<Vector3<f64>, Error> {
        match (self.fixed_probe_m, &self.log.probe_m) {
            (Some(p), _) => Ok(p),
            (None, Some(p)) => match (p[0].get(i), p[1].get(i), p[2].get(i)) {
                (Some(&x), Some(&y), Some(&z)) => Ok(Vector3::new(x, y, z)),
                _ => Err(Error::Internal(format!("row {i} has no probe position"))),
            },
            (None, None) => Err(Error::Internal("no probe position".into())),
        }
    }
}

/// A log column the dipole check needs, missing, and why it is needed.
fn missing_column(log: &SweepLog, column: &str, why: &str) -> Error {
    Error::Log(LogError::MissingColumn {
        path: Shown(log.path.clone()),
        column: column.into(),
        why: why.into(),
    })
}

/// The method from the log's columns and, for a turntable, the table angle per row, rad.
fn method_of(log: &SweepLog) -> Result<(DipoleMethod, Option<&[f64]>), Error> {
    match (&log.angle_rad, &log.probe_m) {
        (Some(a), _) => Ok((DipoleMethod::Turntable, Some(a.as_slice()))),
        (None, Some(_)) => Ok((DipoleMethod::Static, None)),
        (None, None) => Err(missing_column(
            log,
            "angle",
            "a turntable test needs the table angle (or, for a static test, give the probe position columns px, py, pz)",
        )),
    }
}

/// The plan's probe position (table frame, m) when the log has no `px py pz` columns
/// (then the plan must give it); `None` when the log has them.
fn fixed_probe_m(
    log: &SweepLog,
    plan: &Plan,
    test: &DipoleTest,
) -> Result<Option<Vector3<f64>>, Error> {
    match (&log.probe_m, test.probe_position_m) {
        (Some(_), _) => Ok(None),
        (None, Some(p)) => Ok(Some(p)),
        (None, None) => Err(plan
            .invalid(
                "dipole_test.probe_position_m",
                "the log has no px, py, pz columns, so the plan must give the probe position",
            )
            .into()),
    }
}

/// The plan's rotation body → table for each of the log's mount labels, in label order;
/// refuses (naming the first line that uses it) a label the plan does not list.
fn mount_rotations(
    log: &SweepLog,
    plan: &Plan,
    test: &DipoleTest,
    mounts: &[Option<u32>],
) -> Result<Vec<Matrix3<f64>>, Error> {
    let mut label_rot: Vec<Matrix3<f64>> = Vec::with_capacity(log.mount_labels.len());
    for label in &log.mount_labels {
        let m = test.mounts.iter().find(|m| &m.label == label);
        let Some(m) = m else {
            let line = log
                .lines
                .iter()
                .zip(mounts)
                .find(|(_, k)| k.and_then(|k| log.mount_labels.get(k as usize)) == Some(label))
                .map(|(l, _)| l)
                .unwrap_or(0);
            let known: Vec<&str> = test.mounts.iter().map(|m| m.label.as_str()).collect();
            return Err(Error::Usage(format!(
                "{}:{line}: column \"mount\": \"{label}\" is not a mount of the plan {} (known: {})",
                log.path.display(),
                plan.path.display(),
                known.join(", ")
            )));
        };
        label_rot.push(m.body_to_table);
    }
    Ok(label_rot)
}
