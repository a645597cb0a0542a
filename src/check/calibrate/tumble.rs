//! The tumble branch of `calibrate`: the ellipsoid fit of the readings' magnitude
//! against the reference (or with its scale fixed when unanchored), its warnings, the
//! coverage of the corrected directions and the tumble fields of the result.

use nalgebra::{Matrix3, Vector3};
use rayon::prelude::*;

use super::{
    conditioning_warning, resolve_reference, rows, CalibrationData, CalibrationResult,
    CalibrationWarning, Ctx, Method, ReferenceSource, TemperatureFit, LOW_COVERAGE, PAR_CHUNK,
};
use crate::check::outcome::Verdict;
use crate::fit::coverage::direction_spread_mapped;
use crate::fit::samples::FieldSamples;
use crate::fit::tumble::{fit_tumble, Robust, TumbleFit, TumbleOptions, SYM_INDEX};
use crate::log::RowLines;
use crate::Error;

/// The tumble calibration: the reference, the fit and its warnings, the corrected
/// directions and their coverage, then the result (its verdict and gates are set by
/// `run_calibrate`).
pub(super) fn calibrate_tumble<S: FieldSamples + ?Sized>(
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
    warn_fit(&fit, reference, samples.len(), ctx.saturated, warnings);
    let correction = Correction::new(&fit, ctx.temp);
    let corrected = corrected_view(ctx, samples, &fit, &correction)?;
    if corrected.coverage < LOW_COVERAGE {
        warnings.push(CalibrationWarning::LowCoverage {
            coverage: corrected.coverage,
        });
    }
    let cov_c: Matrix3<f64> = fit.covariance.fixed_view::<3, 3>(0, 0).into_owned();
    warnings.extend(conditioning_warning(&cov_c));
    notes.push(
        "a tumble cannot see misalignment (W is symmetric): misalignment needs a cage sweep \
         or a reference attitude"
            .into(),
    );
    Ok(tumble_result(ctx, fit, (reference, source), corrected))
}

/// Warnings about the fit itself: solver problems, unsettled reweighting, many samples
/// rejected (of `n_used` samples and `n_saturated` left out before), and, with a
/// reference, a soft-iron scale far from 1.
fn warn_fit(
    fit: &TumbleFit,
    reference_nt: Option<f64>,
    n_used: usize,
    n_saturated: usize,
    warnings: &mut Vec<CalibrationWarning>,
) {
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
    let total = n_used + n_saturated;
    if fit.samples_rejected * 10 > n_used {
        warnings.push(CalibrationWarning::ManyRejected {
            rejected: fit.samples_rejected,
            total,
        });
    }
    if reference_nt.is_some() {
        let dev = fit.soft_iron.determinant().cbrt() - 1.0;
        if dev.abs() > 0.2 {
            warnings.push(CalibrationWarning::ScaleMismatch { deviation: dev });
        }
    }
}

/// The fitted correction of a reading, sensor frame (S), nT:
/// W (b − hard iron − k (T − T̄)).
struct Correction<'a> {
    /// Soft-iron correction W, S → S.
    w: Matrix3<f64>,
    /// Hard iron, S, nT.
    hard_iron_nt: Vector3<f64>,
    /// Bias slope k, S, nT/°C (zero without a temperature fit).
    slope_nt_per_c: Vector3<f64>,
    /// Per-sample temperature, °C, and its mean T̄, °C (0 without a column).
    temp_c: Option<&'a [f64]>,
    mean_temp_c: f64,
}

impl<'a> Correction<'a> {
    fn new(fit: &TumbleFit, temp: Option<(&'a [f64], f64)>) -> Self {
        Correction {
            w: fit.soft_iron,
            hard_iron_nt: fit.hard_iron_nt,
            slope_nt_per_c: fit.temp_slope_nt_per_c.unwrap_or_else(Vector3::zeros),
            temp_c: temp.map(|t| t.0),
            mean_temp_c: temp
                .map(|(t, _)| t.iter().sum::<f64>() / t.len() as f64)
                .unwrap_or(0.0),
        }
    }

    /// The corrected field of sample `i` read as `b_nt` (S, nT).
    #[inline]
    fn apply(&self, i: usize, b_nt: &Vector3<f64>) -> Vector3<f64> {
        let tau = self.temp_c.map_or(0.0, |t| t[i] - self.mean_temp_c);
        self.w * (b_nt - self.hard_iron_nt - self.slope_nt_per_c * tau)
    }
}

/// The corrected samples as the result shows them.
struct CorrectedView {
    /// Per sample, whether the robust fit kept it (weight > 0).
    kept: Vec<bool>,
    /// Share of the sphere's cells the kept corrected directions visit, 0..1.
    coverage: f64,
    /// Every corrected sample, S, nT; empty unless the request keeps samples.
    corrected_nt: Vec<Vector3<f64>>,
}

/// The kept samples, the coverage of their corrected directions and, when the request
/// keeps samples, every corrected sample.
fn corrected_view<S: FieldSamples + ?Sized>(
    ctx: &Ctx,
    samples: &S,
    fit: &TumbleFit,
    correction: &Correction,
) -> Result<CorrectedView, Error> {
    let correct = |i: usize, b: &Vector3<f64>| correction.apply(i, b);
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
    let corrected_nt: Vec<Vector3<f64>> = if ctx.req.options.keep_samples {
        (0..samples.len())
            .into_par_iter()
            .with_min_len(PAR_CHUNK)
            .map(|i| correct(i, &samples.at(i)))
            .collect()
    } else {
        Vec::new()
    };
    Ok(CorrectedView {
        kept,
        coverage: spread.coverage,
        corrected_nt,
    })
}

/// 1σ of each element of the symmetric soft-iron matrix W, from the fit's covariance
/// (W's six elements follow the three hard-iron terms).
fn soft_iron_sigma(fit: &TumbleFit) -> Matrix3<f64> {
    let mut w_sigma = Matrix3::zeros();
    for (m, &(i, j)) in SYM_INDEX.iter().enumerate() {
        let s = fit.covariance[(3 + m, 3 + m)].max(0.0).sqrt();
        w_sigma[(i, j)] = s;
        w_sigma[(j, i)] = s;
    }
    w_sigma
}

/// The tumble's result, verdict and gates still to be set; the readings are moved in by
/// `run_calibrate`.
fn tumble_result(
    ctx: &Ctx,
    fit: TumbleFit,
    (reference, source): (Option<f64>, ReferenceSource),
    view: CorrectedView,
) -> CalibrationResult {
    let temperature = TemperatureFit::from_slope(
        fit.temp_slope_nt_per_c,
        fit.temp_slope_sigma_nt_per_c,
        ctx.temp,
    );
    CalibrationResult {
        method: Method::Tumble,
        hard_iron_nt: fit.hard_iron_nt.into(),
        soft_iron: rows(&fit.soft_iron),
        reference_nt: reference,
        residual_rms_nt: fit.residual_rms_nt,
        samples_used: fit.samples_used,
        samples_rejected: fit.samples_rejected + ctx.saturated,
        hard_iron_sigma_nt: fit.hard_iron_sigma_nt.into(),
        coverage: view.coverage,
        warnings: Vec::new(),
        pass: None,
        verdict: Verdict::NoLimit,
        gates: Vec::new(),
        converged: fit.solver_problems.is_empty() && fit.irls_converged,
        samples_rod_on: 0,
        log: ctx.log.path.display().to_string(),
        soft_iron_frame: "sensor",
        soft_iron_sigma: rows(&soft_iron_sigma(&fit)),
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
            corrected_nt: view.corrected_nt,
            residuals_nt: fit.residuals_nt,
            kept: view.kept,
            lines: RowLines::new(),
            t_s: None,
        },
    }
}
