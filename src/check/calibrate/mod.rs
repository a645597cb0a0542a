//! `calibrate`: magnetometer calibration from a coil-cage sweep (when the log has
//! `hx hy hz`) or a tumble test (otherwise), turned into a [`CalibrationResult`] whose
//! JSON keys are listed in docs/calibration.md ("Output keys").
//!
//! Methods (details in `docs/calibration.md`): cage — linear least squares
//! `b = A h + b₀` ([`crate::fit::cage`]); tumble — Li & Griffiths (2004) algebraic
//! ellipsoid fit refined by Levenberg–Marquardt on the magnitude residual with Tukey
//! reweighting ([`crate::fit::tumble`]; Alonso & Shuster 2002, Crassidis et al. 2005,
//! Vasconcelos et al. 2011).
//!
//! Frames: readings are in the sensor frame (S). The correction is
//! `b_true ≈ W (b_meas − hard_iron)`; `soft_iron_frame` says which frame `b_true` is in:
//! S for a tumble (a tumble cannot see misalignment), the cage frame (C) for a cage
//! sweep, or the body frame (B) when the plan gives `[cage] article_to_cage`
//! (then `W = article_to_cageᵀ · A⁻¹`).

mod cage;
mod gates;
mod rods;
pub mod seam;
mod warnings;

use nalgebra::{Matrix3, Vector3};
use rayon::prelude::*;
use serde::Serialize;

pub use gates::{
    ALIGNMENT_MAX_DEG, COVERAGE_MIN, DESIGN_CONDITION_MAX, HARD_IRON_MAX_UNANCHORED_NT,
    RESIDUAL_MAX_FRACTION, RODS_ON_SHARE_MAX, SAMPLES_USED_MIN, SOFT_IRON_MAX, SOFT_IRON_MIN,
};
pub use rods::DEFAULT_SETTLE_S;
pub use warnings::CalibrationWarning;

use crate::fit::coverage::{axis_name, direction_spread_mapped};
use crate::fit::samples::{FieldColumns, FieldSamples};
use crate::fit::tumble::{fit_tumble, Robust, TumbleOptions, SYM_INDEX};
use crate::log::plan::Site;
use crate::log::{RowLines, SweepLog};
use crate::Error;

use super::outcome::{self, Gate, Verdict};
use super::units_sense::{check_unit_sense, ExpectedField};
use super::CheckRequest;

/// Temperature span above which a bias slope is fitted, °C.
pub const TEMP_SPAN_FOR_SLOPE_C: f64 = 10.0;

/// Tumble coverage below which a warning is given (a hemisphere gives 0.5).
pub const LOW_COVERAGE: f64 = 0.6;

/// The calibration's own options; the log and plan come with the [`CheckRequest`].
#[derive(Debug, Clone, Copy)]
pub struct CalibrateOptions {
    /// Reference field magnitude, nT, given by the user (beats the plan's `[site]`).
    pub reference_nt: Option<f64>,
    /// Robust reweighting of the tumble fit.
    pub robust: Robust,
    /// Keep the per-sample readings and corrected field in [`CalibrationData`]
    /// (`samples_nt`, `corrected_nt`, `t_s`; the report's plots need them). Off, a tumble
    /// fit leaves `corrected_nt` empty, and `samples_nt` too when every row was used (the
    /// fit then reads the log's field columns in place): on a 10⁶-sample log that saves
    /// two copies of 24 MB. The coverage is computed either way.
    pub keep_samples: bool,
}

impl Default for CalibrateOptions {
    fn default() -> Self {
        CalibrateOptions {
            reference_nt: None,
            robust: Robust::Tukey,
            keep_samples: true,
        }
    }
}

/// What to calibrate: the screened log, the plan (optional: `[site]`, `[cage]`,
/// `[limits] calibration_residual_max_nt` are used) and [`CalibrateOptions`].
pub type CalibrateRequest<'a> = CheckRequest<'a, CalibrateOptions>;

/// Which fit was done.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Coil-cage sweep with known applied fields.
    Cage,
    /// Tumble test in the ambient field.
    Tumble,
}

/// Where the reference magnitude came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ReferenceSource {
    /// Given by the user (command line or request).
    Flag,
    /// The plan's `[site] reference_nt`.
    Plan,
    /// The plan's `[site]` through the geomagnetic model.
    Model,
    /// None: scale fixed by det W = 1.
    Unanchored,
    /// A cage sweep needs none (the applied fields are the reference).
    AppliedField,
}

/// Temperature dependence, when the log's `temp` spans more than 10 °C.
#[derive(Debug, Clone, Serialize)]
pub struct TemperatureFit {
    /// Span of the temperature column, °C.
    pub span_c: f64,
    /// Mean temperature the hard iron refers to, °C.
    pub reference_c: f64,
    /// Bias slope, sensor frame, nT/°C.
    pub slope_nt_per_c: [f64; 3],
    /// 1σ of the slope, nT/°C.
    pub slope_sigma_nt_per_c: [f64; 3],
}

/// Cage-only details.
#[derive(Debug, Clone, Serialize)]
pub struct CageDetails {
    /// Response A (reading in S per applied field in the reference frame), rows.
    pub response: [[f64; 3]; 3],
    /// 1σ of each element of A.
    pub response_sigma: [[f64; 3]; 3],
    /// Scale factor of each sensor axis (row lengths of A), dimensionless.
    pub scale_factors: [f64; 3],
    /// 1σ of each scale factor.
    pub scale_factor_sigma: [f64; 3],
    /// Approximate 1σ of `misalignment_deg` and `non_orthogonality_deg`, deg.
    pub angle_sigma_deg: f64,
    /// Non-orthogonality of the sensor axes xy, xz, yz: 90° minus the angle between
    /// their sensitive directions, deg.
    pub non_orthogonality_deg: [f64; 3],
    /// Rotation R of the polar decomposition A = R·S (reference frame → sensor).
    pub rotation: [[f64; 3]; 3],
    /// Symmetric part S of A = R·S.
    pub stretch: [[f64; 3]; 3],
    /// Angle between R and the nominal mounting, deg (nominal: `[magnetometer]
    /// sensor_to_body` with `[cage]`, else sensor axes parallel to the cage axes).
    pub misalignment_deg: f64,
    /// Largest residual vector length, nT.
    pub worst_residual_nt: f64,
    /// File line of the worst residual.
    pub worst_residual_line: u64,
    /// Residual standard deviation per sensor axis, nT.
    pub axis_sigma_nt: [f64; 3],
    /// Condition number of the (equilibrated) normal matrix.
    pub condition_number: f64,
    /// Ratio of the largest to the smallest singular value of the applied fields.
    pub design_condition: f64,
    /// Mean magnitude of the applied fields, nT.
    pub applied_mean_nt: f64,
    /// The sensor axis whose sign is reversed when the response is a reflection
    /// (det A < 0), against the nominal mounting.
    pub flipped_axis: Option<&'static str>,
}

/// Per-sample data kept for plots and reports (not in the JSON).
#[derive(Debug, Clone, Default)]
pub struct CalibrationData {
    /// Readings used by the fit, sensor frame, nT (may be empty without
    /// [`CalibrateOptions::keep_samples`]).
    pub samples_nt: Vec<Vector3<f64>>,
    /// Corrected field `W (b − hard_iron)` per sample, `soft_iron_frame`, nT (empty
    /// for a tumble fit asked without [`CalibrateOptions::keep_samples`]).
    pub corrected_nt: Vec<Vector3<f64>>,
    /// Residual per sample, nT (tumble: magnitude residual; cage: residual length).
    pub residuals_nt: Vec<f64>,
    /// Whether each sample was kept (false: rejected by the robust fit).
    pub kept: Vec<bool>,
    /// File line of each sample.
    pub lines: RowLines,
    /// Time of each sample, s, when the log has one.
    pub t_s: Option<Vec<f64>>,
}

/// Result of a calibration. The first eleven fields are the stable keys of docs/calibration.md.
#[derive(Debug, Clone, Serialize)]
pub struct CalibrationResult {
    /// `"cage"` or `"tumble"`.
    pub method: Method,
    /// Hard iron, sensor frame (S), nT.
    pub hard_iron_nt: [f64; 3],
    /// Correction W, rows: `b_true ≈ W (b_meas − hard_iron)`, into `soft_iron_frame`.
    pub soft_iron: [[f64; 3]; 3],
    /// Reference field magnitude used, nT (null for a cage sweep or when unanchored).
    pub reference_nt: Option<f64>,
    /// RMS residual, nT (tumble: of |W(b−c)| − R over kept samples; cage: of the
    /// residual vector's length).
    pub residual_rms_nt: f64,
    /// Samples the fit used.
    pub samples_used: usize,
    /// Samples given zero weight by the robust fit or flagged unusable (saturated).
    pub samples_rejected: usize,
    /// 1σ of the hard iron per axis, nT.
    pub hard_iron_sigma_nt: [f64; 3],
    /// Direction coverage 0..1 (fraction of 48 equal-area sphere cells hit).
    pub coverage: f64,
    /// Warnings, each with cause and remedy (as text: each once, with a count).
    #[serde(serialize_with = "outcome::serialize_tally")]
    pub warnings: Vec<CalibrationWarning>,
    /// True only when `verdict` is pass; null when there is nothing to judge against.
    pub pass: Option<bool>,
    /// `pass`, `fail` or `inconclusive`, from the gates.
    pub verdict: Verdict,
    /// Whether every solve converged and the robust reweighting settled.
    pub converged: bool,
    /// Rows left out because a torque rod was on or settling (`cmd_<rod>` columns).
    pub samples_rod_on: usize,
    /// Every gate evaluated, failed or not.
    pub gates: Vec<Gate>,
    // ---- further keys ----
    /// The log file.
    pub log: String,
    /// Frame of `W (b − hard_iron)`: "sensor", "cage" or "body".
    pub soft_iron_frame: &'static str,
    /// 1σ of each element of W.
    pub soft_iron_sigma: [[f64; 3]; 3],
    /// 1σ of `residual_rms_nt`, nT: RMS/√(2n) over the samples used.
    pub residual_rms_sigma_nt: f64,
    /// Where `reference_nt` came from.
    pub reference_source: ReferenceSource,
    /// The residual limit applied, nT.
    pub residual_limit_nt: Option<f64>,
    /// Robust noise estimate (1.4826 × MAD of residuals), nT (tumble).
    pub robust_sigma_nt: Option<f64>,
    /// Temperature dependence, when fitted.
    pub temperature: Option<TemperatureFit>,
    /// Cage-only details.
    pub cage: Option<CageDetails>,
    /// Solver iterations (tumble, summed over reweighting rounds).
    pub iterations: Option<u64>,
    /// Rows the reader skipped (when asked to skip bad rows).
    pub rows_skipped: usize,
    /// Rows flagged as saturated (beyond the range or on a rail) and left out; they are
    /// also counted in `samples_rejected`.
    pub samples_saturated: usize,
    /// Facts about the method the reader should keep in mind.
    pub notes: Vec<String>,
    /// Per-sample data for plots.
    #[serde(skip)]
    pub data: CalibrationData,
}

/// Run a calibration on a screened log: choose the fit, compute the result and verdict.
pub fn run_calibrate(req: &CalibrateRequest) -> Result<CalibrationResult, Error> {
    if let Some(r) = req.options.reference_nt {
        if !(r.is_finite() && r > 0.0) {
            return Err(Error::Usage(format!(
                "the reference field magnitude must be a positive number of nT, found {r}"
            )));
        }
    }
    let log = &req.input.log;
    let b = log.require_field("a calibration needs the measured field")?;
    let mut warnings: Vec<CalibrationWarning> = req
        .input
        .warnings
        .iter()
        .cloned()
        .map(CalibrationWarning::Input)
        .collect();
    let mut notes = Vec::new();
    check_unit_sense(req.input, expected_field(req, log)?)?;
    // Usable rows: drop saturated readings (beyond the range, or piled up on a rail) and
    // rows with a rod on or settling.
    let saturated = req.input.saturated_rows();
    let rods = rods::rod_blanking(log, req.plan);
    let idx = if rods.rows > 0 {
        let flagged: Vec<bool> = (0..log.len())
            .map(|i| rods.blanked[i] || req.input.saturation.flagged.get(i) == Some(&true))
            .collect();
        warnings.push(CalibrationWarning::RodsOn {
            rows: rods.rows,
            total: log.len(),
            columns: rods.columns,
        });
        UsedRows::new(log.len(), &flagged)
    } else {
        UsedRows::new(log.len(), &req.input.saturation.flagged)
    };
    // Every row used: the fit reads the field columns in place. Else the used rows are
    // collected in parallel straight into a new vector (no serial zero-fill first).
    let samples = match &idx {
        UsedRows::All(_) => Samples::Columns(
            FieldColumns::new([&b[0], &b[1], &b[2]])
                .ok_or_else(|| Error::Degenerate("the field columns differ in length".into()))?,
        ),
        UsedRows::Listed(rows) => Samples::Copied(
            rows.par_iter()
                .with_min_len(PAR_CHUNK)
                .map(|&i| Vector3::new(b[0][i], b[1][i], b[2][i]))
                .collect(),
        ),
    };
    let temp = temperature_of_used_rows(log, &idx);
    let temp_for_fit = match &temp {
        Some((v, span)) if *span > TEMP_SPAN_FOR_SLOPE_C => Some((v.as_slice(), *span)),
        Some((_, span)) => {
            notes.push(CalibrationWarning::TemperatureSpanSmall { span_c: *span }.to_string());
            None
        }
        None => None,
    };
    let ctx = Ctx {
        req,
        log,
        idx: &idx,
        samples,
        temp: temp_for_fit,
        saturated,
    };
    let mut res = match &ctx.samples {
        _ if log.h_nt.is_some() => cage::calibrate_cage(&ctx, &mut warnings, &mut notes)?,
        Samples::Columns(c) => calibrate_tumble(&ctx, c, &mut warnings, &mut notes)?,
        Samples::Copied(v) => calibrate_tumble(&ctx, v.as_slice(), &mut warnings, &mut notes)?,
    };
    let limit = req.plan.and_then(|p| p.limits.calibration_residual_max_nt);
    res.residual_limit_nt = limit;
    res.samples_rod_on = rods.rows;
    let facts = gates::GateFacts {
        samples_offered: ctx.samples.len(),
        rods_on_share: rods.rows as f64 / log.len().max(1) as f64,
        design_condition: res.cage.as_ref().map(|c| c.design_condition),
        alignment_known: req
            .plan
            .is_some_and(|p| p.cage.is_some() && p.magnetometer.is_some()),
    };
    let limits = req.plan.map(|p| p.limits.gates).unwrap_or_default();
    res.gates = gates::calibration_gates(&res, &facts, &limits, limit);
    res.verdict = Verdict::from_gates(&res.gates);
    res.pass = res.verdict.pass();
    res.residual_rms_sigma_nt = rms_sigma(res.residual_rms_nt, res.samples_used);
    res.warnings = warnings;
    res.notes = notes;
    res.rows_skipped = log.skipped_rows.len();
    res.samples_saturated = saturated;
    keep_per_sample_data(&mut res, ctx, req.options.keep_samples);
    Ok(res)
}

/// The field the log should show: the applied fields of a cage, the reference of a
/// tumble, else the geomagnetic range.
fn expected_field(req: &CalibrateRequest, log: &SweepLog) -> Result<ExpectedField, Error> {
    if let Some(h) = &log.h_nt {
        let n = h[0].len().max(1);
        let mean = (0..h[0].len())
            .map(|i| (h[0][i] * h[0][i] + h[1][i] * h[1][i] + h[2][i] * h[2][i]).sqrt())
            .sum::<f64>()
            / n as f64;
        return Ok(ExpectedField::Magnitude {
            nt: mean,
            what: "mean applied field",
        });
    }
    Ok(match resolve_reference(req)?.0 {
        Some(nt) => ExpectedField::Magnitude {
            nt,
            what: "reference",
        },
        None => ExpectedField::Geomagnetic,
    })
}

/// 1σ of an RMS over `n` samples of Gaussian residuals: RMS/√(2n) (first-order
/// propagation; common practice).
pub fn rms_sigma(rms: f64, n: usize) -> f64 {
    rms / (2.0 * n.max(1) as f64).sqrt()
}

/// The temperature of the used rows and its span, °C, when the log has one.
fn temperature_of_used_rows(log: &SweepLog, idx: &UsedRows) -> Option<(Vec<f64>, f64)> {
    log.temp_c.as_ref().map(|t| {
        let v: Vec<f64> = idx.iter().map(|i| t[i]).collect();
        let (lo, hi) = v
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &x| {
                (l.min(x), h.max(x))
            });
        (v, hi - lo)
    })
}

/// Per-sample data for plots: the readings moved, not copied, when rows were dropped;
/// copied from the columns, with the times, only when asked for.
fn keep_per_sample_data(res: &mut CalibrationResult, ctx: Ctx, keep: bool) {
    let (log, idx) = (ctx.log, ctx.idx);
    res.data.samples_nt = match ctx.samples {
        Samples::Copied(v) => v,
        Samples::Columns(c) if keep => FieldSamples::to_vec(&c),
        Samples::Columns(_) => Vec::new(),
    };
    let all_rows = idx.len() == log.len();
    res.data.lines = if all_rows {
        log.lines.clone()
    } else {
        idx.iter().filter_map(|i| log.lines.get(i)).collect()
    };
    res.data.t_s = match &log.t_s {
        Some(t) if keep && all_rows => Some(t.clone()),
        Some(t) if keep => Some(idx.iter().map(|i| t[i]).collect()),
        _ => None,
    };
}

/// The readings a fit uses (sensor frame, nT), in `UsedRows` order.
enum Samples<'a> {
    /// Every row: the log's field columns, read in place.
    Columns(FieldColumns<'a>),
    /// The used rows, copied out.
    Copied(Vec<Vector3<f64>>),
}

impl Samples<'_> {
    fn len(&self) -> usize {
        match self {
            Samples::Columns(c) => FieldSamples::len(c),
            Samples::Copied(v) => v.len(),
        }
    }

    /// As one slice of 3-vectors (borrowed when copied out already).
    fn vectors(&self) -> std::borrow::Cow<'_, [Vector3<f64>]> {
        match self {
            Samples::Columns(c) => std::borrow::Cow::Owned(FieldSamples::to_vec(c)),
            Samples::Copied(v) => std::borrow::Cow::Borrowed(v),
        }
    }
}

/// The log rows a fit uses: every row, or the rows left after dropping flagged ones
/// (kept as a list only then, so a clean million-row log costs no index vector).
enum UsedRows {
    All(usize),
    Listed(Vec<usize>),
}

impl UsedRows {
    fn new(rows: usize, flagged: &[bool]) -> Self {
        if flagged.iter().any(|&f| f) {
            UsedRows::Listed(
                (0..rows)
                    .filter(|&i| !flagged.get(i).copied().unwrap_or(false))
                    .collect(),
            )
        } else {
            UsedRows::All(rows)
        }
    }

    fn len(&self) -> usize {
        match self {
            UsedRows::All(n) => *n,
            UsedRows::Listed(v) => v.len(),
        }
    }

    /// Log row of the `i`-th used sample.
    fn row(&self, i: usize) -> usize {
        match self {
            UsedRows::All(_) => i,
            UsedRows::Listed(v) => v[i],
        }
    }

    /// Log rows in order.
    fn iter(&self) -> impl Iterator<Item = usize> + '_ {
        (0..self.len()).map(|i| self.row(i))
    }
}

/// Samples per task of the per-sample copies (split over threads on long logs).
const PAR_CHUNK: usize = 16_384;

struct Ctx<'a> {
    req: &'a CalibrateRequest<'a>,
    log: &'a SweepLog,
    idx: &'a UsedRows,
    samples: Samples<'a>,
    temp: Option<(&'a [f64], f64)>,
    saturated: usize,
}

/// The reference magnitude from a plan's `[site]` through the geomagnetic model
/// (IGRF-14 total field at the site's latitude, longitude, altitude and date).
fn reference_from_site(site: &Site) -> Result<f64, Error> {
    Ok(crate::physics::geomag::site_reference(&site.geo_site())?.total_nt)
}

/// Flag, else plan `[site] reference_nt`, else the plan's site through the model,
/// else none (unanchored).
fn resolve_reference(req: &CalibrateRequest) -> Result<(Option<f64>, ReferenceSource), Error> {
    if let Some(r) = req.options.reference_nt {
        return Ok((Some(r), ReferenceSource::Flag));
    }
    if let Some(site) = req.plan.and_then(|p| p.site.as_ref()) {
        if let Some(r) = site.reference_nt {
            return Ok((Some(r), ReferenceSource::Plan));
        }
        return Ok((Some(reference_from_site(site)?), ReferenceSource::Model));
    }
    Ok((None, ReferenceSource::Unanchored))
}

fn rows(m: &Matrix3<f64>) -> [[f64; 3]; 3] {
    [0, 1, 2].map(|i| [m[(i, 0)], m[(i, 1)], m[(i, 2)]])
}

/// Warn when the hard-iron covariance is much wider along one axis.
fn conditioning_warning(cov: &Matrix3<f64>) -> Option<CalibrationWarning> {
    let eig = nalgebra::SymmetricEigen::new(*cov);
    let (imax, vmax) = eig.eigenvalues.argmax();
    let vmin = eig.eigenvalues.min().max(0.0);
    if vmax > 9.0 * vmin {
        Some(CalibrationWarning::IllConditioned {
            axis: axis_name(&eig.eigenvectors.column(imax).into_owned()),
            worst_sigma_nt: vmax.sqrt(),
            best_sigma_nt: vmin.sqrt(),
        })
    } else {
        None
    }
}

fn calibrate_tumble<S: FieldSamples + ?Sized>(
    ctx: &Ctx,
    samples: &S,
    warnings: &mut Vec<CalibrationWarning>,
    notes: &mut Vec<String>,
) -> Result<CalibrationResult, Error> {
    let (reference, source) = resolve_reference(ctx.req)?;
    if reference.is_none() {
        warnings.push(CalibrationWarning::Unanchored);
    }
    let fit = fit_tumble(
        samples,
        ctx.temp.map(|t| t.0),
        &TumbleOptions {
            reference_nt: reference,
            robust: ctx.req.options.robust,
            ..TumbleOptions::default()
        },
    )?;
    for t in &fit.solver_problems {
        warnings.push(CalibrationWarning::NotConverged {
            reason: t.to_string(),
        });
    }
    if !fit.irls_converged {
        warnings.push(CalibrationWarning::ReweightingUnsettled {
            rounds: fit.irls_rounds,
        });
    }
    let total = samples.len() + ctx.saturated;
    if fit.samples_rejected * 10 > samples.len() {
        warnings.push(CalibrationWarning::ManyRejected {
            rejected: fit.samples_rejected,
            total,
        });
    }
    if reference.is_some() {
        let dev = fit.soft_iron.determinant().cbrt() - 1.0;
        if dev.abs() > 0.2 {
            warnings.push(CalibrationWarning::ScaleMismatch { deviation: dev });
        }
    }
    let c_nt = fit.hard_iron_nt;
    let w = fit.soft_iron;
    let k = fit.temp_slope_nt_per_c.unwrap_or_else(Vector3::zeros);
    let tmean = ctx
        .temp
        .map(|(t, _)| t.iter().sum::<f64>() / t.len() as f64)
        .unwrap_or(0.0);
    let correct = |i: usize, b: &Vector3<f64>| {
        let tau = ctx.temp.map_or(0.0, |(t, _)| t[i] - tmean);
        w * (b - c_nt - k * tau)
    };
    let kept: Vec<bool> = fit
        .weights
        .par_iter()
        .with_min_len(PAR_CHUNK)
        .map(|&x| x > 0.0)
        .collect();
    // The long-log route sums the spread in its last pass; else one pass here.
    let spread = match fit.kept_direction_spread.clone() {
        Some(s) => s,
        None => direction_spread_mapped(samples, &kept, correct)
            .ok_or_else(|| Error::Degenerate("no usable field direction".into()))?,
    };
    let corrected: Vec<Vector3<f64>> = if ctx.req.options.keep_samples {
        (0..samples.len())
            .into_par_iter()
            .with_min_len(PAR_CHUNK)
            .map(|i| correct(i, &samples.at(i)))
            .collect()
    } else {
        Vec::new()
    };
    if spread.coverage < LOW_COVERAGE {
        warnings.push(CalibrationWarning::LowCoverage {
            coverage: spread.coverage,
        });
    }
    let cov_c: Matrix3<f64> = fit.covariance.fixed_view::<3, 3>(0, 0).into_owned();
    warnings.extend(conditioning_warning(&cov_c));
    notes.push(
        "a tumble cannot see misalignment (W is symmetric): misalignment needs a cage sweep \
         or a reference attitude"
            .into(),
    );
    let mut w_sigma = Matrix3::zeros();
    for (m, &(i, j)) in SYM_INDEX.iter().enumerate() {
        let s = fit.covariance[(3 + m, 3 + m)].max(0.0).sqrt();
        w_sigma[(i, j)] = s;
        w_sigma[(j, i)] = s;
    }
    let temperature = match (
        fit.temp_slope_nt_per_c,
        fit.temp_slope_sigma_nt_per_c,
        ctx.temp,
    ) {
        (Some(k), Some(ks), Some((_, span))) => Some(TemperatureFit {
            span_c: span,
            reference_c: tmean,
            slope_nt_per_c: k.into(),
            slope_sigma_nt_per_c: ks.into(),
        }),
        _ => None,
    };
    Ok(CalibrationResult {
        method: Method::Tumble,
        hard_iron_nt: c_nt.into(),
        soft_iron: rows(&w),
        reference_nt: reference,
        residual_rms_nt: fit.residual_rms_nt,
        samples_used: fit.samples_used,
        samples_rejected: fit.samples_rejected + ctx.saturated,
        hard_iron_sigma_nt: fit.hard_iron_sigma_nt.into(),
        coverage: spread.coverage,
        warnings: Vec::new(),
        pass: None,
        verdict: Verdict::NoLimit,
        gates: Vec::new(),
        converged: fit.solver_problems.is_empty() && fit.irls_converged,
        samples_rod_on: 0,
        log: ctx.log.path.display().to_string(),
        soft_iron_frame: "sensor",
        soft_iron_sigma: rows(&w_sigma),
        residual_rms_sigma_nt: 0.0,
        reference_source: source,
        residual_limit_nt: None,
        robust_sigma_nt: (ctx.req.options.robust == Robust::Tukey).then_some(fit.robust_sigma_nt),
        temperature,
        cage: None,
        iterations: Some(fit.iterations),
        rows_skipped: 0,
        samples_saturated: 0,
        notes: Vec::new(),
        data: CalibrationData {
            // Filled by `run_calibrate` by moving, not copying (1e6-sample logs).
            samples_nt: Vec::new(),
            corrected_nt: corrected,
            residuals_nt: fit.residuals_nt,
            kept,
            lines: RowLines::new(),
            t_s: None,
        },
    })
}

#[cfg(test)]
mod tests;
