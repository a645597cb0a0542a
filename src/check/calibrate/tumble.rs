//! The tumble branch of `calibrate`: the ellipsoid fit of the readings' magnitude
//! against the reference (or with its scale fixed when unanchored), its warnings, the
//! coverage of the corrected directions and the tumble fields of the result.

use nalgebra::{Matrix3, Vector3};
use rayon::prelude::*;

use super::{
    conditioning_warning, resolve_reference, rows, CalibrationData, CalibrationResult,
    CalibrationWarning, Ctx, Method, TemperatureFit, LOW_COVERAGE, PAR_CHUNK,
};
use crate::check::outcome::Verdict;
use crate::fit::coverage::direction_spread_mapped;
use crate::fit::samples::FieldSamples;
use crate::fit::tumble::{fit_tumble, Robust, TumbleOptions, SYM_INDEX};
use crate::log::RowLines;
use crate::Error;

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
