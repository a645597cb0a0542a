//! `orbit`: magnetometer calibration from on-orbit telemetry against the IGRF-14
//! magnitude along the orbit (docs/orbit.md; JSON keys listed there).
//!
//! Steps: positions (logged Earth-fixed or geodetic, else SGP4 from the plan's
//! `[orbit] tle`), the model magnitude per sample ([`mod@reference`]), the attitude-independent
//! fit with regressor biases and robust weights ([`crate::fit::orbit`]), the gates, and the
//! comparison with the latest ground calibration of the same serial ([`ground`]).
//!
//! Frames: readings and every bias are in the sensor frame (S); the correction is
//! `b_true ≈ W (b − c − Σ k_j x_j)`.

mod estimate;
pub mod ground;
pub mod reference;
pub mod seam;
mod sensor;
#[cfg(test)]
mod tests;
mod warning;

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

pub use ground::{GroundCalibration, GroundComparison, GroundLookup, NoGround};
pub use reference::{Route, DEFAULT_GRID_S};
pub use warning::OrbitWarning;

use super::outcome::{serialize_tally, Gate, Verdict};
use super::CheckRequest;
use crate::fit::orbit::{fit_orbit, OrbitFitData, OrbitFitOptions};
use crate::log::telemetry::OrbitColumns;
use crate::physics::orbit::Orbit;
use crate::Error;

/// Residual gate: RMS at most this share of the mean model magnitude.
pub const RESIDUAL_MAX_FRACTION: f64 = 0.05;
/// Samples-used gate: at least this share of the rows not flagged.
pub const SAMPLES_USED_MIN: f64 = 0.9;
/// Element-set age beyond which a warning is given, days (common practice).
pub const TLE_AGE_WARN_DAYS: f64 = 3.0;
/// Temperature span below which no slope is fitted, °C.
pub const TEMP_SPAN_MIN_C: f64 = 5.0;

/// The orbit calibration's own options.
#[derive(Debug, Clone)]
pub struct OrbitOptions<'a> {
    /// The orbit columns of the log (absolute time, positions, regressors).
    pub columns: &'a OrbitColumns,
    /// The ground calibration to compare with, or why there is none.
    pub ground: GroundLookup,
    /// Tukey reweighting.
    pub robust: bool,
    /// Model node spacing, s (0: synthesise every sample).
    pub grid_s: f64,
    /// Keep per-sample residuals for the report.
    pub keep_samples: bool,
}

/// What to calibrate.
pub type OrbitRequest<'a> = CheckRequest<'a, OrbitOptions<'a>>;

/// One regressor's bias.
#[derive(Debug, Clone, Serialize)]
pub struct RegressorBias {
    /// Column name as written (`i_solar`, `cmd_x`).
    pub name: String,
    /// Unit of the regressor (`A`, `command`).
    pub unit: String,
    /// Bias per unit, sensor frame, nT per unit.
    pub bias_nt_per_unit: [f64; 3],
    /// 1σ, same unit.
    pub sigma: [f64; 3],
}

/// Per-sample data for the report.
#[derive(Debug, Clone, Default)]
pub struct OrbitSamples {
    /// Time after the first sample, s (decimated).
    pub t_s: Vec<f64>,
    /// Residual |W(b − c − Σk x)| − |B_model|, nT (decimated).
    pub residual_nt: Vec<f64>,
    /// Geodetic latitude, deg, and the residual there, nT (at the model nodes).
    pub latitude_residual: Vec<(f64, f64)>,
    /// Each regressor's values and the bias it explains along its largest axis, nT.
    pub regressor_effect: Vec<(String, Vec<(f64, f64)>)>,
    /// Per regressor (in the order of `regressor_effect`), at each sample: its value, the
    /// magnitude its fitted bias accounts for |W(v + k x)| − |W v| (nT, v the fully
    /// corrected reading) and the residual with that bias put back (nT).
    pub regressor_partial: Vec<Vec<(f64, f64, f64)>>,
}

/// The result of `orbit` (keys in docs/orbit.md).
#[derive(Debug, Clone, Serialize)]
pub struct OrbitResult {
    /// Hard iron at zero regressors and the reference temperature, sensor frame, nT.
    pub hard_iron_nt: [f64; 3],
    /// Its 1σ, nT.
    pub hard_iron_sigma_nt: [f64; 3],
    /// Soft iron W (symmetric), rows.
    pub soft_iron: [[f64; 3]; 3],
    /// Its 1σ per element.
    pub soft_iron_sigma: [[f64; 3]; 3],
    /// Regressor biases.
    pub regressors: Vec<RegressorBias>,
    /// Bias per °C, sensor frame, nT/°C (null without a temperature column or span).
    pub temperature_slope_nt_per_c: Option<[f64; 3]>,
    /// Its 1σ.
    pub temperature_slope_sigma_nt_per_c: Option<[f64; 3]>,
    /// Temperature the hard iron refers to, °C (null without temperature).
    pub reference_temperature_c: Option<f64>,
    /// Where the positions came from.
    pub reference: Route,
    /// The field model.
    pub model: &'static str,
    /// Largest interpolation error of the model magnitude at the check samples, nT.
    pub model_grid_error_nt: f64,
    /// Model node spacing, s (0: every sample synthesised).
    pub model_grid_s: f64,
    /// Mean model magnitude over the log, nT.
    pub mean_model_nt: f64,
    /// Days from the element set's epoch to the first sample (null without a TLE).
    pub tle_age_days: Option<f64>,
    /// RMS residual over used samples, nT.
    pub residual_rms_nt: f64,
    /// Robust σ of the residual, nT.
    pub residual_sigma_nt: f64,
    /// Samples with non-zero weight.
    pub samples_used: usize,
    /// Samples given zero weight by the robust weights.
    pub samples_rejected: usize,
    /// Samples flagged as saturated before the fit.
    pub samples_saturated: usize,
    /// Rows in the log.
    pub rows: usize,
    /// Solver iterations.
    pub iterations: usize,
    /// The ground comparison.
    pub ground: Option<GroundComparison>,
    /// The verdict.
    pub verdict: Verdict,
    /// Every gate.
    pub gates: Vec<Gate>,
    /// `verdict == pass`.
    pub pass: Option<bool>,
    /// Warnings.
    #[serde(serialize_with = "serialize_tally")]
    pub warnings: Vec<OrbitWarning>,
    /// Per-sample data for the report (not in the JSON).
    #[serde(skip)]
    pub samples: OrbitSamples,
}

/// The element set of the plan, parsed.
fn plan_orbit(req: &OrbitRequest) -> Result<Option<Orbit>, Error> {
    let Some(tle) = req
        .plan
        .and_then(|p| p.orbit.as_ref())
        .and_then(|o| o.tle.as_ref())
    else {
        return Ok(None);
    };
    Orbit::from_tle(&tle[0], &tle[1])
        .map(Some)
        .map_err(|e| Error::Usage(format!("the plan's [orbit] tle: {e}")))
}

fn route(req: &OrbitRequest, orbit: Option<&Orbit>) -> Result<Route, Error> {
    use crate::log::telemetry::LoggedPositions as P;
    match (&req.options.columns.positions, orbit) {
        (Some(P::EcefKm(_)), _) => Ok(Route::PositionsEcef),
        (Some(P::Geodetic(_)), _) => Ok(Route::PositionsGeodetic),
        (None, Some(_)) => Ok(Route::TleSgp4),
        (None, None) => Err(Error::Usage(
            "orbit needs positions: the log's rx ry rz (km, Earth-fixed) or lat lon alt, or a \
             two-line element set in the plan's [orbit] tle"
                .into(),
        )),
    }
}

/// Regressor columns to fit (constant ones left out with a warning), and the temperature.
struct Regressors {
    names: Vec<(String, String)>,
    columns: Vec<Vec<f64>>,
    temp_ref_c: Option<f64>,
    has_slope: bool,
}

fn regressors(req: &OrbitRequest, warnings: &mut Vec<OrbitWarning>) -> Regressors {
    let mut out = Regressors {
        names: Vec::new(),
        columns: Vec::new(),
        temp_ref_c: None,
        has_slope: false,
    };
    let spread = |v: &[f64]| {
        let (lo, hi) = v
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
                (a.min(*x), b.max(*x))
            });
        hi - lo
    };
    for r in &req.options.columns.regressors {
        if spread(&r.values) > 0.0 {
            out.names.push((r.name.clone(), r.unit.to_string()));
            out.columns.push(r.values.clone());
        } else {
            warnings.push(OrbitWarning::ConstantRegressor {
                name: r.name.clone(),
            });
        }
    }
    let rods_on =
        req.input
            .log
            .commands
            .iter()
            .fold(vec![false; req.input.log.len()], |mut on, c| {
                on.iter_mut()
                    .zip(&c.values)
                    .for_each(|(o, v)| *o |= *v != 0.0);
                on
            });
    let rows = rods_on.iter().filter(|x| **x).count();
    if rows > 0 {
        warnings.push(OrbitWarning::RodsOn { rows });
    }
    if let Some(temp) = &req.input.log.temp_c {
        let mean = temp.iter().sum::<f64>() / temp.len().max(1) as f64;
        let t0 = req
            .plan
            .and_then(|p| p.orbit.as_ref())
            .and_then(|o| o.reference_temperature_c)
            .unwrap_or(mean);
        out.temp_ref_c = Some(t0);
        let span = spread(temp);
        if span >= TEMP_SPAN_MIN_C {
            out.columns.push(temp.iter().map(|t| t - t0).collect());
            out.has_slope = true;
        } else {
            warnings.push(OrbitWarning::TemperatureSpanSmall { span_c: span });
        }
    }
    out
}

/// Run the orbit calibration.
pub fn run_orbit(req: &OrbitRequest) -> Result<OrbitResult, Error> {
    sensor::require_telemetry_columns(req.plan)?;
    let log = &req.input.log;
    let b = log.require_field("an orbit calibration needs the measured field")?;
    let cols = req.options.columns;
    if cols.t_unix_s.len() != log.len() {
        return Err(Error::Internal(
            "orbit columns and log differ in length".into(),
        ));
    }
    let mut warnings = input_warnings(req);
    let (route, orbit_used) = route_and_orbit(req)?;
    let tle_age_days = estimate::tle_age_days(cols.t_unix_s[0], orbit_used.as_ref(), &mut warnings);
    let model = reference::reference_field(cols, orbit_used.as_ref(), req.options.grid_s)?;
    let regs = regressors(req, &mut warnings);
    let reg_slices: Vec<&[f64]> = regs.columns.iter().map(|c| c.as_slice()).collect();
    let excluded = &req.input.saturation.flagged;
    let data = OrbitFitData {
        b_nt: [&b[0], &b[1], &b[2]],
        reference_nt: &model.magnitude_nt,
        regressors: &reg_slices,
        excluded,
    };
    let fit = fit_orbit(
        &data,
        OrbitFitOptions {
            robust: req.options.robust,
        },
    )?;
    let (hard_iron_sigma_nt, soft_iron_sigma) = estimate::iron_sigmas(&fit);
    let (regressors, slope) = estimate::regressor_biases(&fit, &regs);
    let hard_iron_nt = [
        fit.hard_iron_nt[0],
        fit.hard_iron_nt[1],
        fit.hard_iron_nt[2],
    ];
    let ground = compare_with_ground(
        &req.options.ground,
        hard_iron_nt,
        hard_iron_sigma_nt,
        &mut warnings,
    );
    let offered = log.len() - req.input.saturated_rows();
    rejected_warning(&fit, offered, &mut warnings);
    let mean_model_nt = model.magnitude_nt.iter().sum::<f64>() / model.magnitude_nt.len() as f64;
    let gates = estimate::gates(&fit, offered, mean_model_nt);
    let verdict = Verdict::from_gates(&gates);
    let samples = report_samples(req, &data, &fit, &model, &regs);
    let w = fit.soft_iron;
    Ok(OrbitResult {
        hard_iron_nt,
        hard_iron_sigma_nt,
        soft_iron: rows(&w),
        soft_iron_sigma,
        regressors,
        temperature_slope_nt_per_c: slope.map(|s| s.0),
        temperature_slope_sigma_nt_per_c: slope.map(|s| s.1),
        reference_temperature_c: regs.temp_ref_c,
        reference: route,
        model: crate::physics::igrf::MODEL_NAME,
        model_grid_error_nt: model.grid_error_nt,
        model_grid_s: model.grid_s,
        mean_model_nt,
        tle_age_days,
        residual_rms_nt: fit.residual_rms_nt,
        residual_sigma_nt: fit.residual_sigma_nt,
        samples_used: fit.samples_used,
        samples_rejected: fit.samples_rejected,
        samples_saturated: req.input.saturated_rows(),
        rows: log.len(),
        iterations: fit.iterations,
        ground,
        verdict,
        pass: verdict.pass(),
        gates,
        warnings,
        samples,
    })
}

/// The input's warnings, carried into the orbit check's own list.
fn input_warnings(req: &OrbitRequest) -> Vec<OrbitWarning> {
    req.input
        .warnings
        .iter()
        .cloned()
        .map(OrbitWarning::Input)
        .collect()
}

/// The route to positions and, only when that route is SGP4 from the plan's
/// element set, the orbit it propagates (TEME → Earth-fixed in [`mod@reference`]).
fn route_and_orbit(req: &OrbitRequest) -> Result<(Route, Option<Orbit>), Error> {
    let orbit = plan_orbit(req)?;
    let route = route(req, orbit.as_ref())?;
    let orbit_used = if route == Route::TleSgp4 { orbit } else { None };
    Ok((route, orbit_used))
}

/// Compare the fitted hard iron (sensor frame, nT, with its 1σ) with the ground
/// calibration `lookup` found, warning on a significant shift, or say why there is none.
fn compare_with_ground(
    lookup: &GroundLookup,
    hard_iron_nt: [f64; 3],
    hard_iron_sigma_nt: [f64; 3],
    warnings: &mut Vec<OrbitWarning>,
) -> Option<GroundComparison> {
    match lookup {
        GroundLookup::Found(g) => {
            let c = ground::compare(g, hard_iron_nt, hard_iron_sigma_nt);
            ground_warning(&c, warnings);
            Some(c)
        }
        GroundLookup::NotAsked => None,
        GroundLookup::Missing(why) => {
            warnings.push(OrbitWarning::NoGround(why.clone()));
            None
        }
    }
}

impl OrbitResult {
    /// Compare a result that was computed without a ground comparison (a closeout step)
    /// with the ground calibration `lookup` found; a comparison already made stays.
    pub fn compare_with_ground(&mut self, lookup: &GroundLookup) {
        if self.ground.is_none() {
            self.ground = compare_with_ground(
                lookup,
                self.hard_iron_nt,
                self.hard_iron_sigma_nt,
                &mut self.warnings,
            );
        }
    }
}

/// Warn when the robust weights rejected more than one in twenty of the
/// `offered` rows (rows not flagged as saturated).
fn rejected_warning(
    fit: &crate::fit::orbit::OrbitFit,
    offered: usize,
    warnings: &mut Vec<OrbitWarning>,
) {
    if fit.samples_rejected * 20 > offered {
        warnings.push(OrbitWarning::ManyRejected {
            rejected: fit.samples_rejected,
            of: offered,
        });
    }
}

/// Per-sample residuals for the report when asked for, else empty; time is the
/// log's relative time, s.
fn report_samples(
    req: &OrbitRequest,
    data: &OrbitFitData,
    fit: &crate::fit::orbit::OrbitFit,
    model: &reference::ReferenceField,
    regs: &Regressors,
) -> OrbitSamples {
    if req.options.keep_samples {
        samples(
            data,
            fit,
            model,
            regs,
            req.input.log.t_s.as_deref().unwrap_or(&[]),
        )
    } else {
        OrbitSamples::default()
    }
}

fn rows(w: &Matrix3<f64>) -> [[f64; 3]; 3] {
    [0, 1, 2].map(|i| [w[(i, 0)], w[(i, 1)], w[(i, 2)]])
}

fn ground_warning(g: &GroundComparison, warnings: &mut Vec<OrbitWarning>) {
    if !g.flag {
        return;
    }
    let (a, sig) = (0..3)
        .map(|a| (a, g.hard_iron_delta_nt[a].abs() / g.sigma_nt[a]))
        .fold((0, 0.0), |best, x| if x.1 > best.1 { x } else { best });
    warnings.push(OrbitWarning::GroundShift {
        build: g.build.clone(),
        sigmas: sig,
        axis: ["x", "y", "z"][a],
        delta_nt: g.hard_iron_delta_nt[a],
    });
}

/// Decimated residuals for the report (about 4000 points along the orbit).
fn samples(
    d: &OrbitFitData,
    fit: &crate::fit::orbit::OrbitFit,
    model: &reference::ReferenceField,
    regs: &Regressors,
    t_s: &[f64],
) -> OrbitSamples {
    let n = d.reference_nt.len();
    let ks: Vec<_> = fit.regressors.clone();
    let res =
        |i: usize| crate::fit::orbit::residual_at(d, i, &fit.hard_iron_nt, &fit.soft_iron, &ks);
    let step = (n / 4000).max(1);
    let idx: Vec<usize> = (0..n).step_by(step).collect();
    let lat_step = (model.node_latitude_deg.len() / 4000).max(1);
    OrbitSamples {
        t_s: idx
            .iter()
            .map(|&i| t_s.get(i).copied().unwrap_or(i as f64))
            .collect(),
        residual_nt: idx.iter().map(|&i| res(i)).collect(),
        latitude_residual: model
            .node_latitude_deg
            .iter()
            .step_by(lat_step)
            .map(|&(i, lat)| (lat, res(i)))
            .collect(),
        regressor_effect: regs
            .names
            .iter()
            .enumerate()
            .map(|(q, (name, _))| {
                let k = fit.regressors[q];
                let a = k.iamax();
                (
                    name.clone(),
                    idx.iter()
                        .map(|&i| (regs.columns[q][i], k[a] * regs.columns[q][i]))
                        .collect(),
                )
            })
            .collect(),
        regressor_partial: (0..regs.names.len())
            .map(|q| regressor_partial(d, fit, &idx, q))
            .collect(),
    }
}

/// Regressor `q` at the samples `idx`: its value, the magnitude its fitted bias accounts
/// for (nT) and the residual with that bias put back (nT).
fn regressor_partial(
    d: &OrbitFitData,
    fit: &crate::fit::orbit::OrbitFit,
    idx: &[usize],
    q: usize,
) -> Vec<(f64, f64, f64)> {
    let (w, ks) = (&fit.soft_iron, &fit.regressors);
    idx.iter()
        .map(|&i| {
            let x = d.regressors[q][i];
            // v: the reading with every fitted term removed.
            let mut v = Vector3::new(d.b_nt[0][i], d.b_nt[1][i], d.b_nt[2][i]) - fit.hard_iron_nt;
            for (k, col) in ks.iter().zip(d.regressors) {
                v -= k * col[i];
            }
            let explained = (w * (v + ks[q] * x)).norm() - (w * v).norm();
            let residual = (w * v).norm() - d.reference_nt[i];
            (x, explained, residual + explained)
        })
        .collect()
}
