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
mod result;
mod rods;
pub mod seam;
mod tumble;
mod warnings;

use nalgebra::{Matrix3, Vector3};
use rayon::prelude::*;

pub use gates::{
    ALIGNMENT_MAX_DEG, APPLIED_FIELD_CONDITION_MAX, COVERAGE_MIN, HARD_IRON_MAX_UNANCHORED_NT,
    RESIDUAL_MAX_FRACTION, RODS_ON_SHARE_MAX, SAMPLES_USED_MIN, SOFT_IRON_MAX, SOFT_IRON_MIN,
};
pub use result::{
    CageDetails, CalibrationData, CalibrationResult, Method, ReferenceSource, TemperatureFit,
};
pub use rods::DEFAULT_SETTLE_S;
pub use warnings::CalibrationWarning;

use crate::fit::coverage::axis_name;
use crate::fit::samples::{FieldColumns, FieldSamples};
use crate::fit::tumble::Robust;
use crate::log::plan::Site;
use crate::log::SweepLog;
use crate::Error;

use super::outcome::Verdict;
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
    let idx = used_rows(req, &rods, &mut warnings);
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
        Samples::Columns(c) => tumble::calibrate_tumble(&ctx, c, &mut warnings, &mut notes)?,
        Samples::Copied(v) => {
            tumble::calibrate_tumble(&ctx, v.as_slice(), &mut warnings, &mut notes)?
        }
    };
    res.samples_rod_on = rods.rows;
    judge(
        &mut res,
        req,
        ctx.samples.len(),
        rods.rows as f64 / log.len().max(1) as f64,
    );
    res.residual_rms_sigma_nt = rms_sigma(res.residual_rms_nt, res.samples_used);
    res.warnings = warnings;
    res.notes = notes;
    res.rows_skipped = log.skipped_rows.len();
    res.samples_saturated = saturated;
    keep_per_sample_data(&mut res, ctx, req.options.keep_samples);
    Ok(res)
}

/// The rows the fit uses: every row but the saturated ones and, when the log has
/// command columns, those with a rod on or settling (said in a warning).
fn used_rows(
    req: &CalibrateRequest,
    rods: &rods::RodBlanking,
    warnings: &mut Vec<CalibrationWarning>,
) -> UsedRows {
    let n = req.input.log.len();
    if rods.rows == 0 {
        return UsedRows::new(n, &req.input.saturation.flagged);
    }
    let flagged: Vec<bool> = (0..n)
        .map(|i| rods.blanked[i] || req.input.saturation.flagged.get(i) == Some(&true))
        .collect();
    warnings.push(CalibrationWarning::RodsOn {
        rows: rods.rows,
        total: n,
        columns: rods.columns,
    });
    UsedRows::new(n, &flagged)
}

/// Evaluate every gate and set the verdict, given the samples offered to the fit and
/// the share of rows with a rod on.
fn judge(
    res: &mut CalibrationResult,
    req: &CalibrateRequest,
    samples_offered: usize,
    rods_on_share: f64,
) {
    let limit = req.plan.and_then(|p| p.limits.calibration_residual_max_nt);
    res.residual_limit_nt = limit;
    let facts = gates::GateFacts {
        samples_offered,
        rods_on_share,
        design_condition: res.cage.as_ref().map(|c| c.design_condition),
        alignment_known: req
            .plan
            .is_some_and(|p| p.cage.is_some() && p.magnetometer.is_some()),
    };
    let limits = req.plan.map(|p| p.limits.gates).unwrap_or_default();
    res.gates = gates::calibration_gates(res, &facts, &limits, limit);
    res.verdict = Verdict::from_gates(&res.gates);
    res.pass = res.verdict.pass();
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

#[cfg(test)]
mod tests;
