//! Residual magnetic dipole of the article and its in-orbit disturbance torque
//! (`magproof dipole`, docs/dipole.md).
//!
//! Two ways to measure, told apart by the log's columns:
//! * **turntable** (`angle` column): the article turns about the table's +z axis under
//!   one or more mounts (`mount` column, labels from the plan's `[[dipole_test.mount]]`)
//!   while a probe at the plan's `probe_position_m` (or the log's `px py pz`) records the
//!   field, probe axes parallel to the table's;
//! * **static** (`px py pz` columns, no `angle`): the article stays put and the probe is
//!   moved to several known positions around it.
//!
//! Either way, rows whose `mount` is empty or `none` are article-absent: consecutive such
//! rows form background segments; the ambient field at any time is interpolated linearly
//! in time between the segment means (held at the nearest segment outside them) and
//! subtracted. The moment then comes from the least-squares fit of
//! [`crate::fit::dipole`]. Method: residual dipole from field mapping around the article
//! (docs/dipole.md); torque τ = m × B, worst case |m|·Bmax (Wertz, *Spacecraft Attitude
//! Determination and Control*, 1978, §17.2).
//!
//! For the static method, a probe position with article-absent rows of its own gets its
//! own background (room gradients cancel); other positions use the background of all
//! absent rows, which assumes a uniform ambient field (warned).
//!
//! Requirements: at least one background segment (refused otherwise), every mount label
//! of the log listed in the plan.

use crate::fit::FitError;
use nalgebra::{Matrix3, Vector3};

use crate::check::outcome::{Gate, GateRole, Verdict};
use crate::check::CheckRequest;
use crate::fit::dipole::{
    fit_moment, fit_moment_and_offset, model_field_nt, DipoleFit, DipoleSample,
};
use crate::log::{LogError, Plan, Shown, SweepLog};
use crate::physics::frames::rotation_z;
use crate::screen::saturation::without_rows;
use crate::Error;

mod background;
mod orbit;
mod result;
pub mod seam;
mod uncertainty;
mod warning;

pub use background::{
    estimate_background, estimate_position_backgrounds, position_key_of, Background,
    BackgroundSegment,
};
pub use orbit::{orbit_field, ORBIT_MODEL};
pub use result::{DipoleMethod, DipolePoint, DipoleResult, RodFraction};
pub use warning::DipoleWarning;

use uncertainty::{background_covariance, hidden_component};

/// Orbit altitude used when none is given, km.
pub const DEFAULT_ALTITUDE_KM: f64 = 500.0;
/// Orbit inclination used when none is given, deg (a sun-synchronous orbit near 500 km).
pub const DEFAULT_INCLINATION_DEG: f64 = 97.4;
/// Singular-value ratio of the angle-varying design below which a body direction is
/// reported as hidden from the rotation (seen only against the background level).
pub const HIDDEN_RATIO: f64 = 0.05;

/// Where the dipole sits.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum DipolePosition {
    /// At the body point placed on the table origin (docs/formats.md, `[dipole_test]`).
    #[default]
    AtTableOrigin,
    /// Fitted: three more unknowns (nonlinear fit).
    Fitted,
}

/// The dipole check's own options; the log and plan come with the [`CheckRequest`].
#[derive(Debug, Clone, Copy)]
pub struct DipoleOptions {
    /// Orbit altitude, km.
    pub altitude_km: f64,
    /// Orbit inclination, deg; `None` uses [`DEFAULT_INCLINATION_DEG`] and says so.
    pub inclination_deg: Option<f64>,
    /// Dipole at the table origin, or fitted.
    pub position: DipolePosition,
}

impl Default for DipoleOptions {
    /// The default orbit, the dipole at the table origin.
    fn default() -> Self {
        DipoleOptions {
            altitude_km: DEFAULT_ALTITUDE_KM,
            inclination_deg: None,
            position: DipolePosition::AtTableOrigin,
        }
    }
}

/// What the dipole check needs: the screened log (saturated rows are left out), the
/// plan (`[dipole_test]`, `[limits] residual_dipole_max_am2`) and [`DipoleOptions`].
pub type DipoleRequest<'a> = CheckRequest<'a, DipoleOptions>;

fn missing_column(log: &SweepLog, column: &str, why: &str) -> Error {
    Error::Log(LogError::MissingColumn {
        path: Shown(log.path.clone()),
        column: column.into(),
        why: why.into(),
    })
}

/// Run the dipole check. Saturated rows are dropped first and counted in
/// `samples_saturated`.
pub fn run_dipole(req: &DipoleRequest) -> Result<DipoleResult, Error> {
    let plan = req.require_plan("dipole", "its [dipole_test] gives the mounts and positions")?;
    let input = req.input;
    let sat = &input.saturation;
    let mut res = if sat.count() == 0 {
        evaluate_unsaturated(&input.log, plan, &req.options)?
    } else {
        let kept = without_rows(&input.log, &sat.flagged);
        evaluate_unsaturated(&kept, plan, &req.options)?
    };
    res.samples_saturated = sat.count();
    res.rows_skipped = input.log.skipped_rows.len();
    let mut warnings: Vec<DipoleWarning> = input
        .warnings
        .iter()
        .cloned()
        .map(DipoleWarning::Input)
        .collect();
    warnings.append(&mut res.warnings);
    res.warnings = warnings;
    Ok(res)
}

fn evaluate_unsaturated(
    log: &SweepLog,
    plan: &Plan,
    req: &DipoleOptions,
) -> Result<DipoleResult, Error> {
    let inclination_deg = req.inclination_deg.unwrap_or(DEFAULT_INCLINATION_DEG);
    validate_orbit(req.altitude_km, inclination_deg)?;
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
    let b = log.require_field("the dipole check fits the measured field")?;
    let mounts = log.mount.as_deref().ok_or_else(|| {
        missing_column(
            log,
            "mount",
            "it tells article-present rows from article-absent (background) rows",
        )
    })?;
    let (method, angle) = match (&log.angle_rad, &log.probe_m) {
        (Some(a), _) => (DipoleMethod::Turntable, Some(a.as_slice())),
        (None, Some(_)) => (DipoleMethod::Static, None),
        (None, None) => {
            return Err(missing_column(
                log,
                "angle",
                "a turntable test needs the table angle (or, for a static test, give the probe position columns px, py, pz)",
            ))
        }
    };
    let fixed_probe =
        match (&log.probe_m, test.probe_position_m) {
            (Some(_), _) => None,
            (None, Some(p)) => Some(p),
            (None, None) => return Err(plan
                .invalid(
                    "dipole_test.probe_position_m",
                    "the log has no px, py, pz columns, so the plan must give the probe position",
                )
                .into()),
        };
    // Map the log's mount labels to the plan's rotations; refuse unknown labels.
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

    let mut warnings = Vec::new();
    if req.inclination_deg.is_none() {
        warnings.push(DipoleWarning::DefaultInclination);
    }
    let row_time: Vec<f64> = match &log.t_s {
        Some(t) => t.clone(),
        None => {
            warnings.push(DipoleWarning::NoTimeColumn);
            (0..log.len()).map(|i| i as f64).collect()
        }
    };
    let bg = estimate_background(&row_time, mounts, b, &log.lines).ok_or_else(|| {
        Error::Degenerate(format!(
            "{}: no background segment: every row has a mount label, so the ambient field \
             cannot be told from the article's; record rows with the article away (mount \
             empty or \"none\") before and after",
            log.path.display()
        ))
    })?;
    if bg.segments.len() == 1 {
        warnings.push(DipoleWarning::SingleBackgroundSegment);
    }

    // Static map: each probe position's own background where it has one.
    let local = match (method, &log.probe_m) {
        (DipoleMethod::Static, Some(p)) => {
            estimate_position_backgrounds(&row_time, mounts, b, p, &log.lines)
        }
        _ => Vec::new(),
    };
    let mut backgrounds: Vec<&Background> = vec![&bg];
    backgrounds.extend(local.iter().map(|(_, g)| g));
    let mut bg_of_sample: Vec<usize> = Vec::with_capacity(log.len());
    let mut uniform_rows = 0;

    let mut samples = Vec::with_capacity(log.len());
    let mut points = Vec::with_capacity(log.len());
    let (mut before, mut after) = (0, 0);
    for i in 0..log.len() {
        let (Some(&Some(k)), Some(&t), Some(line)) =
            (mounts.get(i), row_time.get(i), log.lines.get(i))
        else {
            continue;
        };
        let rot0 = label_rot
            .get(k as usize)
            .copied()
            .ok_or_else(|| Error::Internal(format!("mount index {k} outside the label list")))?;
        let angle_rad = angle.and_then(|a| a.get(i).copied()).unwrap_or(0.0);
        let probe_m = match (fixed_probe, &log.probe_m) {
            (Some(p), _) => p,
            (None, Some(p)) => match (p[0].get(i), p[1].get(i), p[2].get(i)) {
                (Some(&x), Some(&y), Some(&z)) => Vector3::new(x, y, z),
                _ => return Err(Error::Internal(format!("row {i} has no probe position"))),
            },
            (None, None) => return Err(Error::Internal("no probe position".into())),
        };
        let meas = log
            .field_at(i)
            .ok_or_else(|| Error::Internal(format!("row {i} has no field")))?;
        let which = match method {
            DipoleMethod::Static => {
                let key = position_key_of(&probe_m);
                match local.iter().position(|(k, _)| *k == key) {
                    Some(j) => j + 1,
                    None => {
                        uniform_rows += 1;
                        0
                    }
                }
            }
            DipoleMethod::Turntable => 0,
        };
        let this_bg = backgrounds.get(which).copied().unwrap_or(&bg);
        let (t_first, t_last) = this_bg.span_s();
        if t < t_first {
            before += 1;
        } else if t > t_last {
            after += 1;
        }
        bg_of_sample.push(which);
        let measured_nt = meas - this_bg.at(t);
        samples.push(DipoleSample {
            probe_m,
            body_to_table: rotation_z(angle_rad) * rot0,
            b_nt: measured_nt,
        });
        points.push(DipolePoint {
            t_s: t,
            angle_rad,
            mount: k as usize,
            probe_m,
            measured_nt,
            model_nt: Vector3::zeros(),
            line,
        });
    }
    if before + after > 0 {
        warnings.push(DipoleWarning::OutsideBackground { before, after });
    }
    if uniform_rows > 0 {
        warnings.push(DipoleWarning::UniformAmbientAssumed { rows: uniform_rows });
    }

    let fit = match req.position {
        DipolePosition::AtTableOrigin => fit_moment(&samples, &Vector3::zeros()),
        DipolePosition::Fitted => fit_moment_and_offset(&samples),
    }
    .map_err(|e| fit_error(log, e))?;
    let mut fit = fit;
    fit.moment_cov_am2sq += background_covariance(
        &samples,
        &points,
        &backgrounds,
        &bg_of_sample,
        &fit.offset_body_m,
    );
    if let Some(w) = hidden_component(&samples, &points, &fit.offset_body_m) {
        warnings.push(w);
    }
    for (p, s) in points.iter_mut().zip(&samples) {
        p.model_nt = model_field_nt(s, &fit.moment_body_am2, &fit.offset_body_m)
            .unwrap_or_else(Vector3::zeros);
    }
    assemble(
        plan,
        req,
        method,
        inclination_deg,
        fit,
        bg,
        points,
        warnings,
        log,
    )
}

fn fit_error(log: &SweepLog, e: FitError) -> Error {
    match e {
        FitError::NotConverged(_) => Error::Degenerate(format!(
            "{}: {e}; try the dipole at the table origin (no fitted offset)",
            log.path.display()
        )),
        _ => Error::Degenerate(format!("{}: {e}", log.path.display())),
    }
}

fn validate_orbit(altitude_km: f64, inclination_deg: f64) -> Result<(), Error> {
    if !(altitude_km.is_finite() && (100.0..=100_000.0).contains(&altitude_km)) {
        return Err(Error::Usage(format!(
            "the orbit altitude must lie in 100..100000 km, found {altitude_km}"
        )));
    }
    if !(inclination_deg.is_finite() && (0.0..=180.0).contains(&inclination_deg)) {
        return Err(Error::Usage(format!(
            "the orbit inclination must lie in 0..180°, found {inclination_deg}"
        )));
    }
    Ok(())
}

#[allow(clippy::too_many_arguments)]
fn assemble(
    plan: &Plan,
    req: &DipoleOptions,
    method: DipoleMethod,
    inclination_deg: f64,
    fit: DipoleFit,
    bg: Background,
    points: Vec<DipolePoint>,
    mut warnings: Vec<DipoleWarning>,
    log: &SweepLog,
) -> Result<DipoleResult, Error> {
    let (mag, mag_sigma) = fit.magnitude_am2();
    let (bmax_nt, bmean_nt) = orbit_field(req.altitude_km, inclination_deg, orbit::model_date())?;
    let limit = plan.limits.residual_dipole_max_am2;
    let gates: Vec<Gate> = limit
        .map(|l| Gate::at_most("moment", mag, l, GateRole::Article))
        .into_iter()
        .collect();
    let verdict = Verdict::from_gates(&gates);
    let pass = verdict.pass();
    if let Some(l) = limit {
        if (mag - l).abs() < 2.0 * mag_sigma {
            warnings.push(DipoleWarning::NearLimit { limit_am2: l });
        }
    }
    let rods = plan
        .rods
        .iter()
        .filter_map(|r| {
            let d = r.dipole_per_command_am2?;
            Some(RodFraction {
                name: r.name.clone(),
                nominal_dipole_am2: d,
                residual_fraction: mag / d,
                residual_fraction_sigma: mag_sigma / d,
            })
        })
        .collect();
    let sig = fit.moment_sigma_am2();
    Ok(DipoleResult {
        moment_body_am2: fit.moment_body_am2.into(),
        magnitude_am2: mag,
        moment_sigma_am2: sig.into(),
        residual_rms_nt: fit.residual_rms_nt,
        altitude_km: req.altitude_km,
        orbit_torque_max_n_m: mag * bmax_nt * 1e-9,
        pass,
        verdict,
        gates,
        method,
        magnitude_sigma_am2: mag_sigma,
        offset_m: fit.offset_sigma_m.map(|_| fit.offset_body_m.into()),
        offset_sigma_m: fit.offset_sigma_m.map(Into::into),
        inclination_deg,
        orbit_field_max_nt: bmax_nt,
        orbit_field_mean_nt: bmean_nt,
        orbit_field_model: ORBIT_MODEL.to_string(),
        orbit_torque_max_sigma_n_m: mag_sigma * bmax_nt * 1e-9,
        orbit_torque_mean_n_m: mag * bmean_nt * 1e-9,
        orbit_torque_mean_sigma_n_m: mag_sigma * bmean_nt * 1e-9,
        rods,
        residual_dipole_max_am2: limit,
        samples_used: fit.samples,
        background_samples: bg.segments.iter().map(|s| s.rows).sum(),
        background_segments: bg.segments.len(),
        rows_skipped: log.skipped_rows.len(),
        samples_saturated: 0,
        iterations: fit.iterations,
        hidden_components: warnings
            .iter()
            .filter_map(|w| match w {
                DipoleWarning::HiddenComponent { component, .. } => Some(component.clone()),
                _ => None,
            })
            .collect(),
        warnings,
        mount_labels: log.mount_labels.clone(),
        points,
        background: bg.segments,
    })
}

#[cfg(test)]
mod tests;
