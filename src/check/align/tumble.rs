//! The hand tumble (docs/alignment.md, "Hand tumble"): a log with gyro columns and no
//! `angle`. The gyro's axes are judged against the magnetometer's through Poisson's
//! kinematic equation `Ḃ_body = −ω_body × B_body`; the magnetometer itself is not judged.

use nalgebra::{Matrix3, Vector3};

use super::gyro::{judge_gyro, GyroFitted, GyroReference, GyroResult};
use super::AlignRequest;
use crate::fit::gyro::{fit_tumble, TumbleSample};
use crate::Error;

/// The samples: the field in the body by the magnetometer's planned mapping (calibration
/// applied when given), its rate by central differences over rows with good neighbours,
/// and the gyro's reading.
fn samples(req: &AlignRequest, mag: &Matrix3<f64>) -> Result<Vec<TumbleSample>, Error> {
    let log = &req.input.log;
    let b = log.require_field("align reads the field")?;
    let g = log.gyro_rad_s.as_ref().ok_or_else(|| {
        Error::Usage(format!(
            "{}: a hand tumble needs gyro columns gx, gy, gz",
            log.path.display()
        ))
    })?;
    let t = log.require_time("a hand tumble differentiates the field in time")?;
    let flagged = &req.input.saturation.flagged;
    let bad = |i: usize| flagged.get(i).copied().unwrap_or(false);
    let body = |i: usize| {
        let mut s = Vector3::new(b[0][i], b[1][i], b[2][i]);
        if let Some(c) = &req.options.calibration {
            s = c.apply(&s);
        }
        mag * s
    };
    let mut out = Vec::new();
    for i in 1..log.len().saturating_sub(1) {
        if bad(i - 1) || bad(i) || bad(i + 1) {
            continue;
        }
        let dt = t[i + 1] - t[i - 1];
        let gyro = Vector3::new(g[0][i], g[1][i], g[2][i]);
        let (before, here, after) = (body(i - 1), body(i), body(i + 1));
        let finite = [before, here, after, gyro]
            .iter()
            .all(|v| v.iter().all(|x| x.is_finite()));
        if !(dt > 0.0 && finite) {
            continue;
        }
        out.push(TumbleSample {
            field_body_nt: here,
            field_rate_body_nt_s: (after - before) / dt,
            gyro_rad_s: gyro,
        });
    }
    Ok(out)
}

/// The gyro against the magnetometer over a hand tumble.
pub fn tumble_gyro(
    req: &AlignRequest,
    mag: &Matrix3<f64>,
    planned: &Matrix3<f64>,
    tol: f64,
) -> Result<GyroResult, Error> {
    let samples = samples(req, mag)?;
    let fit = fit_tumble(&samples).map_err(|e| {
        Error::Degenerate(format!(
            "{}: hand tumble: {e}",
            req.input.log.path.display()
        ))
    })?;
    let c = fit.linear;
    let c_inv = c.try_inverse().ok_or_else(|| {
        Error::Degenerate("hand tumble: the gyro's fitted mapping is singular".into())
    })?;
    // Through the plan: y = G g = G C⁻¹ (ω + d); scale_i = (G C⁻¹)_ii, bias = G C⁻¹ d.
    let m = planned * c_inv;
    let scale = [0, 1, 2].map(|i| {
        // ∂(G C⁻¹)_ii / ∂C_ab = −(G C⁻¹)_ia (C⁻¹)_bi, C_ab at 3 b + a.
        let grad = nalgebra::SVector::<f64, 9>::from_fn(|k, _| {
            let (a, b) = (k % 3, k / 3);
            -m[(i, a)] * c_inv[(b, i)]
        });
        let var = (grad.transpose() * fit.linear_cov * grad)[(0, 0)];
        Some((m[(i, i)], var.max(0.0).sqrt()))
    });
    let bias = m * fit.bias_body_rad_s;
    let bias_cov = m * fit.bias_cov_rad2_s2 * m.transpose();
    let bias_rad_s = [0, 1, 2].map(|i| Some((bias[i], bias_cov[(i, i)].max(0.0).sqrt())));
    let fitted = GyroFitted {
        a: fit.sensor_to_body,
        cov: fit.rotation_cov_rad2,
        null: Vec::new(),
        scale,
        bias_rad_s,
        seen: [true; 3],
    };
    Ok(judge_gyro(
        fitted,
        planned,
        GyroReference::Magnetometer,
        tol,
        (samples.len(), 0),
    ))
}
