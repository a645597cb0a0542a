//! Algebraic ellipsoid fit: Li & Griffiths (2004), "Least squares ellipsoid specific
//! fitting", Proc. Geometric Modeling and Processing, pp. 335–340.
//!
//! The quadric `a x² + b y² + c z² + 2f yz + 2g xz + 2h xy + 2p x + 2q y + 2r z + d = 0`
//! is fitted under the ellipsoid constraint `4J − I² = 1` (with k = 4), which turns the
//! least-squares problem into a generalised eigenproblem `S̃ v = μ C₁ v` whose unique
//! positive eigenvalue gives the ellipsoid.
//!
//! Requirements: at least 10 samples spread in three dimensions (callers refuse fewer
//! than 30 and coplanar data first). The data are centred and scaled before the fit for
//! conditioning, and the result is mapped back to the original units.
//!
//! Speed: the 10×10 scatter matrix DᵀD is accumulated in one pass over the samples
//! (upper triangle only, 55 products per sample) without building D.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use nalgebra::{Matrix3, Matrix6, SMatrix, Vector3, Vector4, Vector6};
use rayon::prelude::*;

use super::samples::FieldSamples;
use super::FitError;

/// Samples per parallel chunk of the scatter pass.
const CHUNK: usize = 16_384;

/// Result of the algebraic fit: the ellipsoid `|shape · (b − centre_nt)| = 1`.
#[derive(Debug, Clone)]
pub struct EllipsoidFit {
    /// Centre of the ellipsoid (hard iron), same frame and unit as the samples, nT.
    pub centre_nt: Vector3<f64>,
    /// Symmetric positive-definite matrix mapping `b − centre` onto the unit sphere,
    /// 1/nT.
    pub shape_per_nt: Matrix3<f64>,
}

type Matrix10 = SMatrix<f64, 10, 10>;

/// Degree in x, y, z of each column of D (for undoing the scaling).
const DEGREE: [i32; 10] = [2, 2, 2, 2, 2, 2, 1, 1, 1, 0];

/// Upper triangle of DᵀD for the samples `rows` of `samples_nt` centred on `mean`, and
/// Σ|b − mean|².
fn scatter<S: FieldSamples + ?Sized>(
    samples_nt: &S,
    rows: std::ops::Range<usize>,
    mean: &Vector3<f64>,
) -> (Matrix10, f64) {
    let mut s = Matrix10::zeros();
    let mut sum_sq = 0.0;
    for i in rows {
        let b = samples_nt.at(i);
        let (x, y, z) = (b.x - mean.x, b.y - mean.y, b.z - mean.z);
        sum_sq += x * x + y * y + z * z;
        let d = [
            x * x,
            y * y,
            z * z,
            2.0 * y * z,
            2.0 * x * z,
            2.0 * x * y,
            2.0 * x,
            2.0 * y,
            2.0 * z,
            1.0,
        ];
        for i in 0..10 {
            let di = d[i];
            for j in i..10 {
                s[(i, j)] += di * d[j];
            }
        }
    }
    (s, sum_sq)
}

/// Fit an ellipsoid to `samples_nt` (Li & Griffiths 2004).
///
/// Returns [`FitError::Degenerate`] when the samples do not define an ellipsoid
/// (too few, singular scatter matrix, or the fitted quadric is not an ellipsoid).
pub fn fit_ellipsoid<S: FieldSamples + ?Sized>(samples_nt: &S) -> Result<EllipsoidFit, FitError> {
    let n = samples_nt.len();
    if n < 10 {
        return Err(FitError::Degenerate(format!(
            "an ellipsoid needs at least 10 samples, found {n}"
        )));
    }
    let (mean, s, scale) = centred_scatter(samples_nt)?;
    let s11: Matrix6<f64> = s.fixed_view::<6, 6>(0, 0).into_owned();
    let s12: SMatrix<f64, 6, 4> = s.fixed_view::<6, 4>(0, 6).into_owned();
    let s22: SMatrix<f64, 4, 4> = s.fixed_view::<4, 4>(6, 6).into_owned();
    let s22_chol = s22.cholesky().ok_or_else(|| {
        FitError::Degenerate("the samples' linear terms are singular (no spread)".into())
    })?;
    let s22_inv_s21 = s22_chol.solve(&s12.transpose()); // 4×6
    let mut s_red = s11 - s12 * s22_inv_s21;
    s_red = 0.5 * (s_red + s_red.transpose());

    // Constraint matrix C1 for k = 4.
    let mut c1 = Matrix6::zeros();
    for i in 0..3 {
        for j in 0..3 {
            c1[(i, j)] = if i == j { -1.0 } else { 1.0 };
        }
        c1[(i + 3, i + 3)] = -4.0;
    }
    let v1 = constrained_eigvec(&s_red, &c1)?;
    let v2: Vector4<f64> = -(s22_inv_s21 * v1);
    let (a, bb, cc, f, g, h) = (v1[0], v1[1], v1[2], v1[3], v1[4], v1[5]);
    let q = Matrix3::new(a, h, g, h, bb, f, g, f, cc);
    let lin = Vector3::new(v2[0], v2[1], v2[2]);
    let d = v2[3];
    let x0 = -q
        .lu()
        .solve(&lin)
        .ok_or_else(|| FitError::Degenerate("the fitted quadric has no centre".into()))?;
    let gain = (x0.transpose() * q * x0)[0] - d;
    if !(gain.is_finite() && gain.abs() > 0.0) {
        return Err(FitError::Degenerate(
            "the fitted quadric is not an ellipsoid".into(),
        ));
    }
    let mut shape = q / gain;
    let eig = nalgebra::SymmetricEigen::new(0.5 * (shape + shape.transpose()));
    if eig.eigenvalues.max() <= 0.0 {
        shape = -shape;
    }
    let l = sqrtm_spd(&shape).ok_or_else(|| {
        FitError::Degenerate(
            "the fitted quadric is not an ellipsoid (the samples may be coplanar or lie on \
             a small patch of the sphere)"
                .into(),
        )
    })?;
    Ok(EllipsoidFit {
        centre_nt: mean + scale * x0,
        shape_per_nt: l / scale,
    })
}

/// The mean of the samples (nT), the scatter matrix of the centred design rows (full,
/// in units of the unscaled rows) and the RMS distance from the mean used to scale them
/// (nT). Identical samples are refused.
fn centred_scatter<S: FieldSamples + ?Sized>(
    samples_nt: &S,
) -> Result<(Vector3<f64>, Matrix10, f64), FitError> {
    let n = samples_nt.len();
    // Pass 1: mean.
    let mean = (0..n).fold(Vector3::zeros(), |a, i| a + samples_nt.at(i)) / n as f64;
    // Pass 2: scatter matrix of the centred (unscaled) design rows, upper triangle; in
    // parallel chunks for long logs (exact up to the order of the sums).
    let (mut s, sum_sq) = if n > 4 * CHUNK {
        (0..n.div_ceil(CHUNK))
            .into_par_iter()
            .map(|c| scatter(samples_nt, c * CHUNK..((c + 1) * CHUNK).min(n), &mean))
            .reduce(|| (Matrix10::zeros(), 0.0), |a, b| (a.0 + b.0, a.1 + b.1))
    } else {
        scatter(samples_nt, 0..n, &mean)
    };
    let scale = (sum_sq / n as f64).sqrt();
    if !(scale.is_finite() && scale > 0.0) {
        return Err(FitError::Degenerate(
            "all samples are identical: no ellipsoid can be fitted".into(),
        ));
    }
    // Undo scaling: column i of the scaled D is column i of D divided by scale^deg(i).
    for i in 0..10 {
        for j in i..10 {
            let v = s[(i, j)] / scale.powi(DEGREE[i] + DEGREE[j]);
            s[(i, j)] = v;
            s[(j, i)] = v;
        }
    }
    Ok((mean, s, scale))
}

/// Eigenvector of `s v = μ c v` for the unique positive μ (`s` symmetric PSD, `c` with
/// one positive eigenvalue). Solved as a symmetric eigenproblem through the Cholesky
/// factor of `s` (regularised slightly if `s` is singular, as for noiseless data).
fn constrained_eigvec(s: &Matrix6<f64>, c: &Matrix6<f64>) -> Result<Vector6<f64>, FitError> {
    let tr = s.trace();
    if !(tr.is_finite() && tr > 0.0) {
        return Err(FitError::Degenerate("scatter matrix is zero".into()));
    }
    let mut ridge = 0.0;
    let chol = loop {
        if let Some(ch) = (s + Matrix6::identity() * ridge).cholesky() {
            break ch;
        }
        ridge = if ridge == 0.0 {
            1e-14 * tr
        } else {
            ridge * 100.0
        };
        if ridge > 1e-6 * tr {
            return Err(FitError::Degenerate(
                "scatter matrix is not positive semi-definite".into(),
            ));
        }
    };
    let l = chol.l();
    let l_inv = l
        .try_inverse()
        .ok_or_else(|| FitError::Degenerate("singular scatter matrix".into()))?;
    let m = l_inv * c * l_inv.transpose();
    let eig = nalgebra::SymmetricEigen::new(0.5 * (m + m.transpose()));
    let (imax, vmax) =
        eig.eigenvalues
            .iter()
            .enumerate()
            .fold(
                (0, f64::NEG_INFINITY),
                |acc, (i, &v)| {
                    if v > acc.1 {
                        (i, v)
                    } else {
                        acc
                    }
                },
            );
    if !(vmax > 0.0) {
        return Err(FitError::Degenerate(
            "no ellipsoid solution (no positive eigenvalue)".into(),
        ));
    }
    let w: Vector6<f64> = eig.eigenvectors.column(imax).into_owned();
    Ok(l_inv.transpose() * w)
}

/// Symmetric square root of a symmetric positive-definite matrix; `None` if not PD.
pub fn sqrtm_spd(m: &Matrix3<f64>) -> Option<Matrix3<f64>> {
    let eig = nalgebra::SymmetricEigen::new(0.5 * (m + m.transpose()));
    if eig.eigenvalues.iter().any(|&v| !(v > 0.0 && v.is_finite())) {
        return None;
    }
    let sq = Matrix3::from_diagonal(&eig.eigenvalues.map(f64::sqrt));
    Some(eig.eigenvectors * sq * eig.eigenvectors.transpose())
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    /// Points on a known ellipsoid from a spiral over the sphere.
    fn ellipsoid_points(n: usize, w_inv: &Matrix3<f64>, c: &Vector3<f64>) -> Vec<Vector3<f64>> {
        let golden = std::f64::consts::PI * (3.0 - 5f64.sqrt());
        (0..n)
            .map(|i| {
                let z = 1.0 - 2.0 * (i as f64 + 0.5) / n as f64;
                let r = (1.0 - z * z).sqrt();
                let phi = golden * i as f64;
                let u = Vector3::new(r * phi.cos(), r * phi.sin(), z);
                w_inv * (48_000.0 * u) + c
            })
            .collect()
    }

    #[test]
    fn recovers_a_noiseless_ellipsoid() {
        let w = Matrix3::new(1.05, 0.02, -0.01, 0.02, 0.97, 0.03, -0.01, 0.03, 1.01);
        let c = Vector3::new(1200.0, -800.0, 350.0);
        let pts = ellipsoid_points(500, &w.try_inverse().unwrap(), &c);
        let fit = fit_ellipsoid(&pts).unwrap();
        assert_relative_eq!(fit.centre_nt, c, epsilon = 1e-5);
        assert_relative_eq!(fit.shape_per_nt * 48_000.0, w, epsilon = 1e-8);
    }

    #[test]
    fn identical_samples_are_refused() {
        let pts = vec![Vector3::new(1.0, 2.0, 3.0); 50];
        assert!(matches!(fit_ellipsoid(&pts), Err(FitError::Degenerate(_))));
    }
}
