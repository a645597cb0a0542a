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
use nalgebra::Vector3;

use crate::check::outcome::{Gate, GateRole, Verdict};
use crate::check::CheckRequest;
use crate::fit::dipole::{fit_moment, fit_moment_and_offset, model_field_nt, DipoleFit};
use crate::log::{Plan, SweepLog};
use crate::screen::saturation::without_rows;
use crate::Error;

mod background;
mod layout;
mod orbit;
mod result;
mod rows;
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

use layout::Layout;
use rows::{ArticleRows, Backgrounds};
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

/// The check on a log without saturated rows: the layout, the backgrounds, the
/// article-present rows minus their background, the fit, then the result.
fn evaluate_unsaturated(
    log: &SweepLog,
    plan: &Plan,
    opts: &DipoleOptions,
) -> Result<DipoleResult, Error> {
    let inclination_deg = opts.inclination_deg.unwrap_or(DEFAULT_INCLINATION_DEG);
    validate_orbit(opts.altitude_km, inclination_deg)?;
    let layout = Layout::read(log, plan)?;
    let mut warnings = Vec::new();
    if opts.inclination_deg.is_none() {
        warnings.push(DipoleWarning::DefaultInclination);
    }
    let row_time = row_times_s(log, &mut warnings);
    let bgs = Backgrounds::estimate(&layout, &row_time, &mut warnings)?;
    let mut rows = rows::article_rows(&layout, &row_time, &bgs, &mut warnings)?;
    let fit = fit_dipole(log, opts.position, &rows, &bgs)?;
    if let Some(w) = hidden_component(&rows.samples, &rows.points, &fit.offset_body_m) {
        warnings.push(w);
    }
    for (p, s) in rows.points.iter_mut().zip(&rows.samples) {
        p.model_nt = model_field_nt(s, &fit.moment_body_am2, &fit.offset_body_m)
            .unwrap_or_else(Vector3::zeros);
    }
    assemble(
        plan,
        opts,
        Evaluated {
            method: layout.method,
            inclination_deg,
            fit,
            bg: bgs.overall,
            points: rows.points,
            warnings,
        },
        log,
    )
}

/// Each row's time, s: the log's `t`, else the row index with a warning.
fn row_times_s(log: &SweepLog, warnings: &mut Vec<DipoleWarning>) -> Vec<f64> {
    match &log.t_s {
        Some(t) => t.clone(),
        None => {
            warnings.push(DipoleWarning::NoTimeColumn);
            (0..log.len()).map(|i| i as f64).collect()
        }
    }
}

/// The moment (at the table origin, or with its position) fitted to the article rows,
/// its covariance widened by the backgrounds' uncertainty.
fn fit_dipole(
    log: &SweepLog,
    position: DipolePosition,
    rows: &ArticleRows,
    bgs: &Backgrounds,
) -> Result<DipoleFit, Error> {
    let mut fit = match position {
        DipolePosition::AtTableOrigin => fit_moment(&rows.samples, &Vector3::zeros()),
        DipolePosition::Fitted => fit_moment_and_offset(&rows.samples),
    }
    .map_err(|e| fit_error(log, e))?;
    fit.moment_cov_am2sq += background_covariance(
        &rows.samples,
        &rows.points,
        &bgs.list(),
        &rows.bg_of_sample,
        &fit.offset_body_m,
    );
    Ok(fit)
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

/// What the evaluation found, for [`assemble`].
struct Evaluated {
    method: DipoleMethod,
    /// Orbit inclination used, deg.
    inclination_deg: f64,
    fit: DipoleFit,
    /// The background of all article-absent rows.
    bg: Background,
    points: Vec<DipolePoint>,
    warnings: Vec<DipoleWarning>,
}

/// The result: the moment and its σ, the gate against the plan's limit, the in-orbit
/// field and torque (N·m), each rod's nominal dipole against the residual.
fn assemble(
    plan: &Plan,
    req: &DipoleOptions,
    ev: Evaluated,
    log: &SweepLog,
) -> Result<DipoleResult, Error> {
    let Evaluated {
        method,
        inclination_deg,
        fit,
        bg,
        points,
        mut warnings,
    } = ev;
    let (mag, mag_sigma) = fit.magnitude_am2();
    let (bmax_nt, bmean_nt) = orbit_field(req.altitude_km, inclination_deg, orbit::model_date())?;
    let limit = plan.limits.residual_dipole_max_am2;
    let gates = moment_gates(limit, mag, mag_sigma, &mut warnings);
    let verdict = Verdict::from_gates(&gates);
    Ok(DipoleResult {
        moment_body_am2: fit.moment_body_am2.into(),
        magnitude_am2: mag,
        moment_sigma_am2: fit.moment_sigma_am2().into(),
        residual_rms_nt: fit.residual_rms_nt,
        altitude_km: req.altitude_km,
        orbit_torque_max_n_m: mag * bmax_nt * 1e-9,
        pass: verdict.pass(),
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
        rods: rod_fractions(plan, mag, mag_sigma),
        residual_dipole_max_am2: limit,
        samples_used: fit.samples,
        background_samples: bg.segments.iter().map(|s| s.rows).sum(),
        background_segments: bg.segments.len(),
        rows_skipped: log.skipped_rows.len(),
        samples_saturated: 0,
        iterations: fit.iterations,
        hidden_components: hidden_components(&warnings),
        warnings,
        mount_labels: log.mount_labels.clone(),
        points,
        background: bg.segments,
    })
}

/// The `moment` gate when the plan sets a limit (A·m²) on |m| = `mag` (A·m², 1σ
/// `mag_sigma`); warns when |m| lies within 2σ of it.
fn moment_gates(
    limit_am2: Option<f64>,
    mag: f64,
    mag_sigma: f64,
    warnings: &mut Vec<DipoleWarning>,
) -> Vec<Gate> {
    let gates: Vec<Gate> = limit_am2
        .map(|l| Gate::at_most("moment", mag, l, GateRole::Article))
        .into_iter()
        .collect();
    if let Some(l) = limit_am2 {
        if (mag - l).abs() < 2.0 * mag_sigma {
            warnings.push(DipoleWarning::NearLimit { limit_am2: l });
        }
    }
    gates
}

/// The residual |m| (A·m², 1σ `mag_sigma`) as a fraction of each plan rod's nominal
/// dipole per command, for the rods that give one.
fn rod_fractions(plan: &Plan, mag: f64, mag_sigma: f64) -> Vec<RodFraction> {
    plan.rods
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
        .collect()
}

/// The body-frame components the rotation could not see, named by the warnings.
fn hidden_components(warnings: &[DipoleWarning]) -> Vec<String> {
    warnings
        .iter()
        .filter_map(|w| match w {
            DipoleWarning::HiddenComponent { component, .. } => Some(component.clone()),
            _ => None,
        })
        .collect()
}

#[cfg(test)]
mod tests;
