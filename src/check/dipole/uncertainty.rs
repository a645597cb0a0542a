//! What the dipole check adds to the fit's own statistics: which body direction the
//! mounts cannot resolve from the turning alone (singular values of the angle-varying
//! part of the design), and the moment covariance due to the background means' noise.

use nalgebra::{Matrix3, Vector3};

use super::{Background, DipolePoint, DipoleWarning, HIDDEN_RATIO};
use crate::fit::dipole::{describe_direction, model_matrix, weakest_direction, DipoleSample};

/// The part of the design that changes with angle (or probe position) within each
/// mount: subtract each mount's mean model matrix. A body direction that this part
/// cannot see is constrained only by the background level.
pub(super) fn hidden_component(
    samples: &[DipoleSample],
    points: &[DipolePoint],
    offset_body_m: &Vector3<f64>,
) -> Option<DipoleWarning> {
    let groups = points.iter().map(|p| p.mount).max()? + 1;
    let mut sum = vec![Matrix3::zeros(); groups];
    let mut count = vec![0usize; groups];
    let mut n = Matrix3::zeros();
    for (s, p) in samples.iter().zip(points) {
        let a = model_matrix(s, offset_body_m)?;
        n += a.transpose() * a;
        sum[p.mount] += a;
        count[p.mount] += 1;
    }
    for (s, c) in sum.iter().zip(&count) {
        if *c > 0 {
            n -= s.transpose() * s / *c as f64;
        }
    }
    let (ratio, dir) = weakest_direction(&n);
    (ratio < HIDDEN_RATIO).then(|| DipoleWarning::HiddenComponent {
        component: describe_direction(&dir),
        ratio,
    })
}

/// Moment covariance from the noise of the background segment means, (A·m²)². The
/// residual-based covariance treats samples as independent; a background mean is shared
/// by every sample interpolated from it, so its error moves the moment coherently:
/// δm = −N⁻¹ Σₛ Cₛ δbₛ with Cₛ = Σᵢ wᵢₛ Aᵢᵀ, hence Cov = N⁻¹ (Σₛ Cₛ Σₛ Cₛᵀ) N⁻¹. It
/// matters most for a component seen only against the background level.
pub(super) fn background_covariance(
    samples: &[DipoleSample],
    points: &[DipolePoint],
    backgrounds: &[&Background],
    bg_of_sample: &[usize],
    offset_body_m: &Vector3<f64>,
) -> Matrix3<f64> {
    let mut n = Matrix3::zeros();
    let mut c: Vec<Vec<Matrix3<f64>>> = backgrounds
        .iter()
        .map(|g| vec![Matrix3::zeros(); g.segments.len()])
        .collect();
    for ((s, p), &j) in samples.iter().zip(points).zip(bg_of_sample) {
        let (Some(a), Some(g), Some(cj)) = (
            model_matrix(s, offset_body_m),
            backgrounds.get(j),
            c.get_mut(j),
        ) else {
            continue;
        };
        n += a.transpose() * a;
        for (k, w) in g.weights(p.t_s) {
            if let Some(ck) = cj.get_mut(k) {
                *ck += a.transpose() * w;
            }
        }
    }
    let Some(n_inv) = n.try_inverse() else {
        return Matrix3::zeros();
    };
    let mut inner = Matrix3::zeros();
    for (cj, g) in c.iter().zip(backgrounds) {
        for (ck, seg) in cj.iter().zip(&g.segments) {
            let var = Matrix3::from_diagonal(&seg.sigma_mean_nt.component_mul(&seg.sigma_mean_nt));
            inner += ck * var * ck.transpose();
        }
    }
    n_inv * inner * n_inv
}
