//! The turntable alignment fit (method: `docs/alignment.md`): the sensor-to-body mapping,
//! the steady field in the table frame and, when no calibration is given, the hard iron,
//! from a magnetometer turned through known headings in known mounts.
//!
//! Model, per sample k: `sₖ = Aᵀ Tₖᵀ F + h + nₖ`, with `sₖ` the reading (sensor frame,
//! nT), `A` sensor → body (orthogonal, possibly improper), `Tₖ` body → table at the
//! sample's heading (`R_z(θₖ) · mount`), `F` the field in the table frame (nT), `h` the
//! hard iron (sensor frame, nT) and `nₖ` white noise of σ per axis.
//!
//! Solved by alternation: with `A` fixed the model is linear in `(F, h)` (linear least
//! squares, minimum-norm where one mount leaves `F_z` and `h` inseparable); with `(F, h)`
//! fixed, `A` solves Wahba's problem by the SVD without the determinant fix (Markley
//! 1988). The alternation starts from each of the 24 proper signed permutations and keeps
//! the lowest cost, so a swapped or reversed axis is found as such rather than as a local
//! minimum near the plan's mapping. (`A`, `F`) and (`−A`, `−F`) explain the data equally:
//! the caller picks the sign.
//!
//! Covariance: the Gauss–Newton information of all unknowns, the rotation block after
//! the field and hard iron are marginalised (Schur complement). With `F` and `h` known this
//! is the QUEST covariance of Shuster & Oh (1981), `σ² (Σ |bₖ|² I − bₖ bₖᵀ)⁻¹`.

// Index loops mirror the maths.
#![allow(clippy::needless_range_loop)]

use nalgebra::{DMatrix, DVector, Matrix3, SymmetricEigen, Vector3};

use super::wahba::{signed_permutations, skew, wahba_svd, Determinant};
use super::FitError;

/// One reading of the turntable test.
#[derive(Debug, Clone, Copy)]
pub struct AlignSample {
    /// Body → table at this sample's heading: `R_z(θ) · body_to_table` of the mount.
    pub body_to_table: Matrix3<f64>,
    /// The reading, sensor frame (S), nT (calibration applied when there is one).
    pub sensor_nt: Vector3<f64>,
}

/// The fit's answer.
#[derive(Debug, Clone)]
pub struct AlignFit {
    /// Sensor → body, the unconstrained orthogonal fit (improper when mirrored).
    pub sensor_to_body: Matrix3<f64>,
    /// The steady field, table frame (L), nT.
    pub field_table_nt: Vector3<f64>,
    /// Hard iron, sensor frame (S), nT, when fitted.
    pub hard_iron_nt: Option<Vector3<f64>>,
    /// RMS of the residual vector's length, nT.
    pub residual_rms_nt: f64,
    /// Noise per axis estimated from the residuals, nT.
    pub sigma_nt: f64,
    /// Covariance of the body-frame rotation vector, rad² (pseudo-inverse: zero along
    /// unobservable directions).
    pub rotation_cov_rad2: Matrix3<f64>,
    /// Unit directions (body frame) about which a rotation is unobservable.
    pub unobservable: Vec<Vector3<f64>>,
}

/// (cost, A, F, h) of one alternation.
type Solution = (f64, Matrix3<f64>, Vector3<f64>, Vector3<f64>);

/// Alternation steps per start, at most.
const MAX_ITER: usize = 400;

/// Eigenvalues of an information matrix below this share of the largest count as null.
const NULL_SHARE: f64 = 1e-9;

/// Fit the mapping, the field and (when `fit_hard_iron`) the hard iron.
pub fn fit_alignment(samples: &[AlignSample], fit_hard_iron: bool) -> Result<AlignFit, FitError> {
    let unknowns = if fit_hard_iron { 9 } else { 6 };
    if 3 * samples.len() <= unknowns + 3 {
        return Err(FitError::TooFewSamples {
            found: samples.len(),
            unknowns,
            needed: (unknowns + 6) / 3,
        });
    }
    let mut best: Option<Solution> = None;
    for start in signed_permutations()
        .into_iter()
        .filter(|p| p.determinant() > 0.0)
    {
        let s = alternate(samples, start, fit_hard_iron);
        if best.as_ref().map_or(true, |b| s.0 < b.0) {
            best = Some(s);
        }
    }
    let (cost, a, f, h) = best.ok_or(FitError::Degenerate("no start converged".into()))?;
    if !cost.is_finite() {
        return Err(FitError::Degenerate(
            "the alignment fit did not converge".into(),
        ));
    }
    let dof = (3 * samples.len() - unknowns) as f64;
    let sigma_nt = (cost / dof).sqrt();
    let (rotation_cov_rad2, unobservable) =
        rotation_covariance(samples, &a, &f, fit_hard_iron, sigma_nt);
    Ok(AlignFit {
        sensor_to_body: a,
        field_table_nt: f,
        hard_iron_nt: fit_hard_iron.then_some(h),
        residual_rms_nt: (cost / samples.len() as f64).sqrt(),
        sigma_nt,
        rotation_cov_rad2,
        unobservable,
    })
}

/// Sum of squared residuals.
fn cost(samples: &[AlignSample], a: &Matrix3<f64>, f: &Vector3<f64>, h: &Vector3<f64>) -> f64 {
    samples
        .iter()
        .map(|s| (s.sensor_nt - h - a.transpose() * s.body_to_table.transpose() * f).norm_squared())
        .sum()
}

/// Alternate from `start` until the cost settles: (cost, A, F, h).
fn alternate(samples: &[AlignSample], start: Matrix3<f64>, fit_hard_iron: bool) -> Solution {
    let mut a = start;
    let mut prev = f64::INFINITY;
    let (mut f, mut h) = (Vector3::zeros(), Vector3::zeros());
    for _ in 0..MAX_ITER {
        (f, h) = field_and_hard_iron(samples, &a, fit_hard_iron);
        let profile = samples.iter().fold(Matrix3::zeros(), |acc, s| {
            acc + (s.body_to_table.transpose() * f) * (s.sensor_nt - h).transpose()
        });
        a = wahba_svd(&profile, Determinant::Free);
        let c = cost(samples, &a, &f, &h);
        if (prev - c).abs() <= 1e-13 * c.max(1e-30) {
            prev = c;
            break;
        }
        prev = c;
    }
    (prev, a, f, h)
}

/// Linear least squares for `(F, h)` with `A` fixed; minimum norm where inseparable.
fn field_and_hard_iron(
    samples: &[AlignSample],
    a: &Matrix3<f64>,
    fit_hard_iron: bool,
) -> (Vector3<f64>, Vector3<f64>) {
    let p = if fit_hard_iron { 6 } else { 3 };
    let mut jtj = DMatrix::<f64>::zeros(p, p);
    let mut jtr = DVector::<f64>::zeros(p);
    for s in samples {
        let mut j = DMatrix::<f64>::zeros(3, p);
        j.view_mut((0, 0), (3, 3))
            .copy_from(&(a.transpose() * s.body_to_table.transpose()));
        if fit_hard_iron {
            j.view_mut((0, 3), (3, 3)).fill_with_identity();
        }
        jtj += j.transpose() * &j;
        jtr += j.transpose() * DVector::from_column_slice(s.sensor_nt.as_slice());
    }
    let x = jtj
        .svd(true, true)
        .solve(&jtr, 1e-10 * jtr.norm().max(1e-30))
        .unwrap_or_else(|_| DVector::zeros(p));
    let f = Vector3::new(x[0], x[1], x[2]);
    let h = if fit_hard_iron {
        Vector3::new(x[3], x[4], x[5])
    } else {
        Vector3::zeros()
    };
    (f, h)
}

/// The rotation vector's covariance with the field and hard iron marginalised, and the
/// body-frame directions about which a rotation is not seen.
fn rotation_covariance(
    samples: &[AlignSample],
    a: &Matrix3<f64>,
    f: &Vector3<f64>,
    fit_hard_iron: bool,
    sigma_nt: f64,
) -> (Matrix3<f64>, Vec<Vector3<f64>>) {
    let p = if fit_hard_iron { 9 } else { 6 };
    let mut info = DMatrix::<f64>::zeros(p, p);
    for s in samples {
        let b = s.body_to_table.transpose() * f;
        let mut j = DMatrix::<f64>::zeros(3, p);
        // Perturbation A = exp([φ]×) Â: ∂(Aᵀ b)/∂φ = Âᵀ [b]×.
        j.view_mut((0, 0), (3, 3))
            .copy_from(&(a.transpose() * skew(&b)));
        j.view_mut((0, 3), (3, 3))
            .copy_from(&(a.transpose() * s.body_to_table.transpose()));
        if fit_hard_iron {
            j.view_mut((0, 6), (3, 3)).fill_with_identity();
        }
        info += j.transpose() * &j;
    }
    let n = p - 3;
    let ipp = info.view((0, 0), (3, 3)).into_owned();
    let ipn = info.view((0, 3), (3, n)).into_owned();
    let inn = info.view((3, 3), (n, n)).into_owned();
    let inn_pinv = inn
        .clone()
        .pseudo_inverse(NULL_SHARE * inn.amax().max(1e-300))
        .unwrap_or_else(|_| DMatrix::zeros(n, n));
    let schur = ipp - &ipn * inn_pinv * ipn.transpose();
    let schur = Matrix3::from_fn(|i, j| 0.5 * (schur[(i, j)] + schur[(j, i)]));
    let eig = SymmetricEigen::new(schur);
    let top = eig.eigenvalues.amax().max(1e-300);
    let mut cov = Matrix3::zeros();
    let mut null = Vec::new();
    for k in 0..3 {
        let v: Vector3<f64> = eig.eigenvectors.column(k).into();
        let lambda = eig.eigenvalues[k];
        if lambda <= NULL_SHARE * 1e3 * top {
            null.push(v.normalize());
        } else {
            cov += v * v.transpose() * (sigma_nt * sigma_nt / lambda);
        }
    }
    (cov, null)
}

#[cfg(test)]
#[path = "align_tests.rs"]
mod tests;
