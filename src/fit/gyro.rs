//! Gyro axes against the body (method: `docs/alignment.md`, "Gyro").
//!
//! - **Turntable** ([`fit_rate_mapping`]): pairs of the table rate in the body frame
//!   `ωₖ` (rad/s, exact: from the table's heading) and the gyro reading with its bias
//!   removed `gₖ` (sensor frame, rad/s). The mapping `A` (gyro sensor → body) minimises
//!   `Σ |S ωₖ − A gₖ|²` — Wahba's problem, solved by the SVD without the determinant fix
//!   (Markley 1988) so that a reversed axis shows as a reflection — alternated with the
//!   per-body-axis scale `S = diag(s)` so that a scale error does not pass for noise.
//!   With a body axis never spun a reflection through the spun plane fits equally well,
//!   so the fit keeps to proper rotations and that axis's sign is left unjudged.
//!   Covariance of the rotation vector: the QUEST form `σ² (Σ |vₖ|² I − vₖ vₖᵀ)⁻¹`,
//!   `vₖ = S ωₖ` (Shuster & Oh 1981); rotations about a direction no pair spans are null.
//! - **Hand tumble** ([`fit_tumble`]): a field steady in inertial space seen from a
//!   turning body obeys Poisson's kinematic equation `Ḃ_body = −ω_body × B_body`
//!   (Wertz 1978, §12; Markley & Crassidis 2014, ch. 3). With `ω = C g − d` (`C` the gyro
//!   sensor → body mapping with scales, `d` the bias in the body frame) the relation
//!   `Ḃ = [B]× (C g − d)` is linear in the 12 unknowns: linear least squares, covariance
//!   `σ² (JᵀJ)⁻¹` with σ from the residuals.

// Index loops mirror the maths.
#![allow(clippy::needless_range_loop)]

use nalgebra::{DMatrix, DVector, Matrix3, SymmetricEigen, Vector3};

use super::wahba::{skew, wahba_svd, Determinant};
use super::FitError;

/// Eigenvalues of an information matrix below this share of the largest count as null.
const NULL_SHARE: f64 = 1e-6;

/// A tumble's rate must vary about its weakest direction with at least this share of
/// the strongest direction's variance (≈ 3 % in RMS; our choice, so that noise alone
/// never passes for rotation).
const MIN_SPIN_SHARE: f64 = 1e-3;

/// A body axis counts as spun when its share of `Σ ω²` exceeds this.
const SPUN_SHARE: f64 = 1e-3;

/// The turntable's answer.
#[derive(Debug, Clone)]
pub struct RateMappingFit {
    /// Gyro sensor → body, the unconstrained orthogonal fit (improper when mirrored).
    pub sensor_to_body: Matrix3<f64>,
    /// Noise per axis estimated from the residuals, rad/s.
    pub sigma_rad_s: f64,
    /// Covariance of the body-frame rotation vector, rad² (zero along null directions).
    pub rotation_cov_rad2: Matrix3<f64>,
    /// Unit directions (body frame) about which a rotation is unobservable.
    pub unobservable: Vec<Vector3<f64>>,
    /// Body axes the table turned about.
    pub spun: [bool; 3],
}

/// Fit the gyro's mapping from (table rate in body, gyro reading less bias) pairs, rad/s.
pub fn fit_rate_mapping(
    pairs: &[(Vector3<f64>, Vector3<f64>)],
) -> Result<RateMappingFit, FitError> {
    if pairs.len() < 3 {
        return Err(FitError::TooFewSamples {
            found: pairs.len(),
            unknowns: 3,
            needed: 3,
        });
    }
    let power: Vector3<f64> = pairs
        .iter()
        .fold(Vector3::zeros(), |acc, (w, _)| acc + w.component_mul(w));
    if power.max() <= 0.0 {
        return Err(FitError::Degenerate(
            "the table never turned while the gyro was read: no rate to compare".into(),
        ));
    }
    let spun = power.map(|p| p > SPUN_SHARE * power.max());
    // With an axis never spun, a reflection through the spun plane fits as well as the
    // rotation: that axis's sign is unseen, so keep to proper rotations.
    let det = if spun.iter().all(|s| *s) {
        Determinant::Free
    } else {
        Determinant::Proper
    };
    let mut scale = Vector3::from_element(1.0);
    let mut a = Matrix3::identity();
    for _ in 0..4 {
        let profile = pairs.iter().fold(Matrix3::zeros(), |acc, (w, g)| {
            acc + scale.component_mul(w) * g.transpose()
        });
        a = wahba_svd(&profile, det);
        for i in 0..3 {
            if spun[i] {
                let num: f64 = pairs.iter().map(|(w, g)| (a * g)[i] * w[i]).sum();
                scale[i] = num / power[i];
            }
        }
    }
    let ssr: f64 = pairs
        .iter()
        .map(|(w, g)| (scale.component_mul(w) - a * g).norm_squared())
        .sum();
    let unknowns = 3 + spun.iter().filter(|s| **s).count();
    let dof = (3 * pairs.len()).saturating_sub(unknowns).max(1) as f64;
    let sigma_rad_s = (ssr / dof).sqrt();
    let info = pairs.iter().fold(Matrix3::zeros(), |acc, (w, _)| {
        let v = scale.component_mul(w);
        acc + Matrix3::identity() * v.norm_squared() - v * v.transpose()
    });
    let (rotation_cov_rad2, unobservable) = split_information(&info, sigma_rad_s);
    Ok(RateMappingFit {
        sensor_to_body: a,
        sigma_rad_s,
        rotation_cov_rad2,
        unobservable,
        spun: [spun[0], spun[1], spun[2]],
    })
}

/// Covariance `σ² I⁻¹` over the observable directions and the null directions.
fn split_information(info: &Matrix3<f64>, sigma: f64) -> (Matrix3<f64>, Vec<Vector3<f64>>) {
    let sym = Matrix3::from_fn(|i, j| 0.5 * (info[(i, j)] + info[(j, i)]));
    let eig = SymmetricEigen::new(sym);
    let top = eig.eigenvalues.amax().max(1e-300);
    let mut cov = Matrix3::zeros();
    let mut null = Vec::new();
    for k in 0..3 {
        let v: Vector3<f64> = eig.eigenvectors.column(k).into();
        let lambda = eig.eigenvalues[k];
        if lambda <= NULL_SHARE * top {
            null.push(v.normalize());
        } else {
            cov += v * v.transpose() * (sigma * sigma / lambda);
        }
    }
    (cov, null)
}

/// One sample of a hand tumble, body frame by the magnetometer's mapping.
#[derive(Debug, Clone, Copy)]
pub struct TumbleSample {
    /// The field, body frame, nT.
    pub field_body_nt: Vector3<f64>,
    /// Its time derivative, body frame, nT/s.
    pub field_rate_body_nt_s: Vector3<f64>,
    /// The gyro's reading, gyro sensor frame, rad/s.
    pub gyro_rad_s: Vector3<f64>,
}

/// The hand tumble's answer.
#[derive(Debug, Clone)]
pub struct TumbleGyroFit {
    /// `C`: gyro sensor → body (the magnetometer's body) with scales, unconstrained.
    pub linear: Matrix3<f64>,
    /// Covariance of `C`'s entries, column-major (`C[(i, j)]` at `3 j + i`).
    pub linear_cov: Matrix3x3Cov,
    /// The bias seen in the body frame, rad/s.
    pub bias_body_rad_s: Vector3<f64>,
    /// Its 1σ, rad/s.
    pub bias_sigma_rad_s: Vector3<f64>,
    /// Its covariance, (rad/s)².
    pub bias_cov_rad2_s2: Matrix3<f64>,
    /// The orthogonal part of `C` (polar decomposition; improper when mirrored).
    pub sensor_to_body: Matrix3<f64>,
    /// Covariance of the rotation vector between the orthogonal part and the truth, rad².
    pub rotation_cov_rad2: Matrix3<f64>,
    /// Residual RMS per axis, nT/s.
    pub sigma_nt_s: f64,
}

/// Covariance of the 9 entries of a 3×3 matrix, column-major.
pub type Matrix3x3Cov = nalgebra::SMatrix<f64, 9, 9>;

/// Fit `Ḃ = [B]× (C g − d)` over the tumble's samples.
pub fn fit_tumble(samples: &[TumbleSample]) -> Result<TumbleGyroFit, FitError> {
    const P: usize = 12;
    if 3 * samples.len() < 2 * P {
        return Err(FitError::TooFewSamples {
            found: samples.len(),
            unknowns: P,
            needed: 2 * P / 3,
        });
    }
    let mut jtj = DMatrix::<f64>::zeros(P, P);
    let mut jty = DVector::<f64>::zeros(P);
    let rows = |s: &TumbleSample| {
        let bx = skew(&s.field_body_nt);
        let mut j = DMatrix::<f64>::zeros(3, P);
        for c in 0..3 {
            j.view_mut((0, 3 * c), (3, 3))
                .copy_from(&(bx * s.gyro_rad_s[c]));
        }
        j.view_mut((0, 9), (3, 3)).copy_from(&(-bx));
        j
    };
    for s in samples {
        let j = rows(s);
        jtj += j.transpose() * &j;
        jty += j.transpose() * DVector::from_column_slice(s.field_rate_body_nt_s.as_slice());
    }
    // The bias is separable only where the rate's variations span all three axes.
    let mean = samples.iter().map(|s| s.gyro_rad_s).sum::<Vector3<f64>>() / samples.len() as f64;
    let spread = samples.iter().fold(Matrix3::zeros(), |acc, s| {
        let d = s.gyro_rad_s - mean;
        acc + d * d.transpose()
    });
    let eig = SymmetricEigen::new(spread);
    let (lo, hi) = (eig.eigenvalues.min(), eig.eigenvalues.max());
    if !(hi > 0.0 && lo > MIN_SPIN_SHARE * hi) {
        return Err(FitError::Degenerate(
            "the tumble's rate did not vary about all three axes (or the gyro read no rate): \
             the gyro's mapping and bias cannot be separated; turn the article about every \
             axis, unevenly"
                .into(),
        ));
    }
    let inv = jtj
        .try_inverse()
        .ok_or_else(|| FitError::Degenerate("the tumble's normal matrix is singular".into()))?;
    let x = &inv * jty;
    let ssr: f64 = samples
        .iter()
        .map(|s| {
            let r = DVector::from_column_slice(s.field_rate_body_nt_s.as_slice()) - rows(s) * &x;
            r.norm_squared()
        })
        .sum();
    let sigma2 = ssr / (3 * samples.len() - P) as f64;
    let cov = inv * sigma2;
    let linear = Matrix3::from_fn(|i, j| x[3 * j + i]);
    let linear_cov = Matrix3x3Cov::from_fn(|a, b| cov[(a, b)]);
    let a = wahba_svd(&linear, Determinant::Free);
    let phi = rotation_jacobian(&a);
    let rotation_cov_rad2 = phi * linear_cov * phi.transpose();
    Ok(TumbleGyroFit {
        linear,
        linear_cov,
        bias_body_rad_s: Vector3::new(x[9], x[10], x[11]),
        bias_sigma_rad_s: Vector3::from_fn(|i, _| cov[(9 + i, 9 + i)].max(0.0).sqrt()),
        bias_cov_rad2_s2: Matrix3::from_fn(|i, j| cov[(9 + i, 9 + j)]),
        sensor_to_body: a,
        rotation_cov_rad2,
        sigma_nt_s: sigma2.sqrt(),
    })
}

/// ∂φ/∂vec(C) at `C ≈ A`: the rotation vector of `δC Aᵀ`'s skew part,
/// `φ = vee((δC Aᵀ − A δCᵀ) / 2)`, a 3×9 matrix (column-major `vec`).
pub fn rotation_jacobian(a: &Matrix3<f64>) -> nalgebra::SMatrix<f64, 3, 9> {
    let mut j = nalgebra::SMatrix::<f64, 3, 9>::zeros();
    // (δC Aᵀ)[(r, c)] = Σ_k δC[(r, k)] A[(c, k)]; vee picks (2,1)−(1,2), (0,2)−(2,0), (1,0)−(0,1).
    for (comp, (p, q)) in [(2usize, 1usize), (0, 2), (1, 0)].into_iter().enumerate() {
        for k in 0..3 {
            j[(comp, 3 * k + p)] += 0.5 * a[(q, k)];
            j[(comp, 3 * k + q)] -= 0.5 * a[(p, k)];
        }
    }
    j
}

/// Slope of `y = s x` through the origin and its 1σ from the scatter, or `None` for
/// fewer than 3 points or no spread in x.
pub fn slope_through_origin(points: impl IntoIterator<Item = (f64, f64)>) -> Option<(f64, f64)> {
    let pts: Vec<(f64, f64)> = points.into_iter().collect();
    let sxx: f64 = pts.iter().map(|(x, _)| x * x).sum();
    if pts.len() < 3 || sxx <= 0.0 {
        return None;
    }
    let s = pts.iter().map(|(x, y)| x * y).sum::<f64>() / sxx;
    let ssr: f64 = pts.iter().map(|(x, y)| (y - s * x).powi(2)).sum();
    Some((s, (ssr / (pts.len() - 1) as f64 / sxx).sqrt()))
}

#[cfg(test)]
#[path = "gyro_tests.rs"]
mod tests;
