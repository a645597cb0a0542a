//! The cage branch of `calibrate`: linear fit, frames (cage or body), polar
//! decomposition and the cage details of the result.

use nalgebra::{Matrix3, Vector3};

use super::{
    conditioning_warning, rows, CageDetails, CalibrationData, CalibrationResult,
    CalibrationWarning, Ctx, Method, ReferenceSource, TemperatureFit,
};
use crate::fit::cage::{
    fit_cage, inverse_sigma, polar_decomposition, rotation_angle, scale_and_non_orthogonality,
    CageFit,
};
use crate::fit::coverage::direction_spread;
use crate::log::RowLines;
use crate::Error;

/// The cage calibration: the applied fields, the linear fit, the frame W maps into,
/// the response's decomposition and the result (its verdict and gates are set by
/// `run_calibrate`).
pub(super) fn calibrate_cage(
    ctx: &Ctx,
    warnings: &mut Vec<CalibrationWarning>,
    notes: &mut Vec<String>,
) -> Result<CalibrationResult, Error> {
    let applied = applied_fields_nt(ctx)?;
    let samples = ctx.samples.vectors();
    let fit = fit_cage(&applied, &samples, ctx.temp.map(|t| t.0))?;
    let frames = Frames::new(ctx, &fit)?;
    let flipped_axis =
        (frames.a_f.determinant() < 0.0).then(|| flipped_axis(&frames.a_f, &frames.nominal));
    if let Some(axis) = flipped_axis {
        warnings.push(CalibrationWarning::Reflection { axis });
    }
    let details = cage_details(ctx, &fit, &frames, &applied, flipped_axis.flatten())?;
    let spread = direction_spread(&applied)
        .ok_or_else(|| Error::Degenerate("the applied field is always zero".into()))?;
    warnings.extend(conditioning_warning(&Matrix3::from_diagonal(
        &fit.hard_iron_sigma_nt
            .component_mul(&fit.hard_iron_sigma_nt),
    )));
    notes.push(format!(
        "W maps readings (sensor frame) to the {} frame; the applied field is taken as \
         the truth, so the cage's own calibration bounds this result",
        frames.frame
    ));
    let corrected: Vec<Vector3<f64>> = samples
        .iter()
        .map(|b| frames.w * (b - fit.hard_iron_nt))
        .collect();
    Ok(cage_result(
        ctx,
        fit,
        &frames,
        details,
        spread.coverage,
        corrected,
    ))
}

/// The applied field of every used row, cage frame (C), nT.
fn applied_fields_nt(ctx: &Ctx) -> Result<Vec<Vector3<f64>>, Error> {
    let h = ctx
        .log
        .h_nt
        .as_ref()
        .ok_or_else(|| Error::Internal("cage fit without applied field".into()))?;
    Ok(ctx
        .idx
        .iter()
        .map(|i| Vector3::new(h[0][i], h[1][i], h[2][i]))
        .collect())
}

/// The reference frame F of the result (the body when the plan's `[cage]` gives
/// `article_to_cage`, else the cage) and the fit expressed in it.
struct Frames {
    /// Response A, F → sensor frame (S).
    a_f: Matrix3<f64>,
    /// F's name: "body" or "cage".
    frame: &'static str,
    /// Correction W, S → F.
    w: Matrix3<f64>,
    /// 1σ of each element of W.
    w_sigma: Matrix3<f64>,
    /// Nominal F → S: body → sensor from `[magnetometer]` when F is the body, else I.
    nominal: Matrix3<f64>,
}

impl Frames {
    /// Refuses a singular response (a sensor axis that does not respond).
    fn new(ctx: &Ctx, fit: &CageFit) -> Result<Self, Error> {
        let plan = ctx.req.plan;
        let article_to_cage = plan
            .and_then(|p| p.cage.as_ref())
            .map(|c| c.article_to_cage);
        // A maps the reference frame F to S. F = body when [cage] is given: b = A·a2c·h_B.
        let (a_f, frame) = match article_to_cage {
            Some(a2c) => (fit.response * a2c, "body"),
            None => (fit.response, "cage"),
        };
        let a_inv = fit.response.try_inverse().ok_or_else(|| {
            Error::Degenerate(
                "the fitted cage response is singular: the sensor does not respond on every axis"
                    .into(),
            )
        })?;
        let w_sigma_c = inverse_sigma(&a_inv, &fit.response_row_cov);
        // W in F: cage→body is a2cᵀ; a rotation moves the sigmas only approximately, so
        // propagate element sigmas through |R| (exact for axis permutations).
        let (w, w_sigma) = match article_to_cage {
            Some(a2c) => {
                let c2b = a2c.transpose();
                let abs = c2b.map(f64::abs);
                let var = abs.component_mul(&abs) * w_sigma_c.component_mul(&w_sigma_c);
                (c2b * a_inv, var.map(|v| v.max(0.0).sqrt()))
            }
            None => (a_inv, w_sigma_c),
        };
        let nominal = match (article_to_cage, plan.and_then(|p| p.magnetometer.as_ref())) {
            (Some(_), Some(m)) => m.sensor_to_body.transpose(),
            _ => Matrix3::identity(),
        };
        Ok(Frames {
            a_f,
            frame,
            w,
            w_sigma,
            nominal,
        })
    }
}

/// The cage details of the result: the response, its polar decomposition (rotation
/// and stretch), scale factors, non-orthogonality and misalignment (deg) against the
/// nominal mounting, the worst residual and the conditioning of the design.
fn cage_details(
    ctx: &Ctx,
    fit: &CageFit,
    frames: &Frames,
    applied: &[Vector3<f64>],
    flipped_axis: Option<&'static str>,
) -> Result<CageDetails, Error> {
    let a_f = &frames.a_f;
    let (r, s) = polar_decomposition(a_f)
        .ok_or_else(|| Error::Internal("SVD of the cage response failed".into()))?;
    let misalignment_deg = rotation_angle(&(r * frames.nominal.transpose())).to_degrees();
    let (scale, nonorth) = scale_and_non_orthogonality(a_f);
    Ok(CageDetails {
        response: rows(a_f),
        response_sigma: rows(&fit.response_sigma),
        scale_factors: scale.into(),
        scale_factor_sigma: scale_sigma(a_f, &fit.response_sigma),
        angle_sigma_deg: angle_sigma_deg(&fit.response_sigma),
        non_orthogonality_deg: nonorth.map(f64::to_degrees),
        rotation: rows(&r),
        stretch: rows(&s),
        misalignment_deg,
        worst_residual_nt: fit.worst_residual.0,
        worst_residual_line: ctx
            .log
            .lines
            .get(ctx.idx.row(fit.worst_residual.1))
            .unwrap_or(0),
        axis_sigma_nt: fit.axis_sigma_nt.into(),
        condition_number: fit.condition,
        design_condition: design_condition(applied),
        applied_mean_nt: applied.iter().map(|h| h.norm()).sum::<f64>()
            / applied.len().max(1) as f64,
        flipped_axis,
    })
}

/// The cage's result, verdict and gates still to be set; the readings are moved in by
/// `run_calibrate`. `coverage`: share of the sphere's cells the applied field visits.
fn cage_result(
    ctx: &Ctx,
    fit: CageFit,
    frames: &Frames,
    details: CageDetails,
    coverage: f64,
    corrected_nt: Vec<Vector3<f64>>,
) -> CalibrationResult {
    let n = ctx.samples.len();
    CalibrationResult {
        method: Method::Cage,
        hard_iron_nt: fit.hard_iron_nt.into(),
        soft_iron: rows(&frames.w),
        reference_nt: None,
        residual_rms_nt: fit.residual_rms_nt,
        samples_used: n,
        samples_rejected: ctx.saturated,
        hard_iron_sigma_nt: fit.hard_iron_sigma_nt.into(),
        coverage,
        warnings: Vec::new(),
        pass: None,
        verdict: super::Verdict::NoLimit,
        gates: Vec::new(),
        converged: true,
        samples_rod_on: 0,
        log: ctx.log.path.display().to_string(),
        soft_iron_frame: frames.frame,
        soft_iron_sigma: rows(&frames.w_sigma),
        residual_rms_sigma_nt: 0.0,
        reference_source: ReferenceSource::AppliedField,
        residual_limit_nt: None,
        robust_sigma_nt: None,
        temperature: TemperatureFit::from_slope(
            fit.temp_slope_nt_per_c,
            fit.temp_slope_sigma_nt_per_c,
            ctx.temp,
        ),
        cage: Some(details),
        iterations: None,
        rows_skipped: 0,
        samples_saturated: 0,
        notes: Vec::new(),
        data: CalibrationData {
            // Filled by `run_calibrate` by moving, not copying (1e6-sample logs).
            samples_nt: Vec::new(),
            corrected_nt,
            residuals_nt: fit.residuals_nt.iter().map(|r| r.norm()).collect(),
            kept: vec![true; n],
            lines: RowLines::new(),
            t_s: None,
        },
    }
}

/// 1σ of each axis's scale factor (row length of A), by first-order propagation of the
/// element σ of that row: σ² = Σ (a_ij/|a_i|)² σ_ij².
fn scale_sigma(a: &Matrix3<f64>, sigma: &Matrix3<f64>) -> [f64; 3] {
    [0, 1, 2].map(|i| {
        let n = a.row(i).norm();
        if n > 0.0 {
            (0..3)
                .map(|j| (a[(i, j)] / n * sigma[(i, j)]).powi(2))
                .sum::<f64>()
                .sqrt()
        } else {
            f64::NAN
        }
    })
}

/// Approximate 1σ of the small angles read off A (misalignment, non-orthogonality),
/// deg: √2 × the mean element σ of A (two elements set each small angle; A's rows are
/// near unit length). An approximation, stated as such in docs/calibration.md.
fn angle_sigma_deg(sigma: &Matrix3<f64>) -> f64 {
    let mean = sigma.iter().sum::<f64>() / 9.0;
    (2.0f64).sqrt() * mean.to_degrees()
}

/// Ratio of the largest to the smallest singular value of the applied fields (rows of
/// the n × 3 design); infinite when they do not span three dimensions.
fn design_condition(applied: &[Vector3<f64>]) -> f64 {
    let mut gram = Matrix3::zeros();
    for h in applied {
        gram += h * h.transpose();
    }
    let ev = gram.symmetric_eigenvalues();
    let (lo, hi) = (ev.min().max(0.0), ev.max());
    if lo > 0.0 {
        (hi / lo).sqrt()
    } else {
        f64::INFINITY
    }
}

/// The sensor axis that reads against the nominal mounting in a reflected response:
/// the one whose diagonal element of A·nominalᵀ (sensor → sensor, ≈ I when mounted as
/// planned) is negative, when exactly one is.
fn flipped_axis(a: &Matrix3<f64>, nominal: &Matrix3<f64>) -> Option<&'static str> {
    let d = a * nominal.transpose();
    let negative: Vec<usize> = (0..3).filter(|&i| d[(i, i)] < 0.0).collect();
    match negative.as_slice() {
        [i] => Some(["x", "y", "z"][*i]),
        _ => None,
    }
}
