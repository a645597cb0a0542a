//! Coil-cage calibration: linear least squares `b = A h + b₀ (+ k τ)` (see
//! `docs/calibration.md`).
//!
//! h is the applied field (cage frame, nT), b the reading (sensor frame, nT), A the
//! sensor's 3×3 response (gain, non-orthogonality, misalignment), b₀ the hard iron
//! (sensor frame, nT) and, when temperature is given, k a bias slope (nT/°C) with
//! τ = T − T̄. Each sensor axis is an independent linear regression on the same design
//! matrix X = [hx hy hz 1 (τ)], so the 12 (or 15) parameters come from one 4×4 (5×5)
//! normal matrix XᵀX, accumulated in one pass, equilibrated and solved by Cholesky.
//! Covariance per axis: σ̂ₐ² (XᵀX)⁻¹ with σ̂ₐ² = RSSₐ/(N − p) (ordinary least squares,
//! any regression text, e.g. Seber & Lee, *Linear Regression Analysis*, §3).
//!
//! A is split by the polar decomposition A = R·S (R orthogonal, S symmetric positive
//! definite; through the SVD A = UΣVᵀ: R = UVᵀ, S = VΣVᵀ): R is the misalignment of
//! the sensor axes relative to the reference frame, S the gain and cross-axis part.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use nalgebra::{Matrix3, SMatrix, Vector3};

use super::FitError;

/// Result of [`fit_cage`].
#[derive(Debug, Clone)]
pub struct CageFit {
    /// Response A: reading (sensor frame) per applied field (cage frame), dimensionless.
    pub response: Matrix3<f64>,
    /// 1σ of each element of A.
    pub response_sigma: Matrix3<f64>,
    /// Covariance of row a of A (the response of sensor axis a), one 3×3 per axis.
    /// Rows are independent of each other.
    pub response_row_cov: [Matrix3<f64>; 3],
    /// Hard iron b₀, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// 1σ of b₀ per axis, nT.
    pub hard_iron_sigma_nt: Vector3<f64>,
    /// Bias slope k, sensor frame, nT/°C (with temperature).
    pub temp_slope_nt_per_c: Option<Vector3<f64>>,
    /// 1σ of the slope, nT/°C.
    pub temp_slope_sigma_nt_per_c: Option<Vector3<f64>>,
    /// Residual b − (A h + b₀) of every sample, sensor frame, nT.
    pub residuals_nt: Vec<Vector3<f64>>,
    /// Residual standard deviation per sensor axis, nT (RSS/(N − p)).
    pub axis_sigma_nt: Vector3<f64>,
    /// RMS of the residual vector's length, nT.
    pub residual_rms_nt: f64,
    /// Largest residual vector length, nT, and its sample index.
    pub worst_residual: (f64, usize),
    /// Condition number of the equilibrated normal matrix.
    pub condition: f64,
}

/// Fit `b = A h + b₀ (+ k τ)`. `applied_nt` (cage frame) and `samples_nt` (sensor
/// frame) have one entry per sample; `temp_c` too when given.
pub fn fit_cage(
    applied_nt: &[Vector3<f64>],
    samples_nt: &[Vector3<f64>],
    temp_c: Option<&[f64]>,
) -> Result<CageFit, FitError> {
    let n = samples_nt.len();
    if applied_nt.len() != n || temp_c.is_some_and(|t| t.len() != n) {
        return Err(FitError::Solver("columns of different lengths".into()));
    }
    let p = if temp_c.is_some() { 5 } else { 4 };
    if n < 3 * p {
        return Err(FitError::Degenerate(format!(
            "a cage fit needs at least {} samples, found {n}",
            3 * p
        )));
    }
    check_grid_rank(applied_nt)?;
    let tmean = temp_c
        .map(|t| t.iter().sum::<f64>() / n as f64)
        .unwrap_or(0.0);
    let design = Design {
        applied_nt,
        temp_c,
        tmean_c: tmean,
    };
    let (xtx, xty) = design.normal_equations(samples_nt, p);
    let (xtx_inv, condition) = invert_normal_matrix(&xtx, p)?;
    let mut beta = SMatrix::<f64, 5, 3>::zeros();
    for a in 0..p {
        for c in 0..3 {
            beta[(a, c)] = (0..p).map(|k| xtx_inv[(a, k)] * xty[(k, c)]).sum();
        }
    }
    let res = design.residuals(samples_nt, &beta, p);
    let dof = (n - p) as f64;
    let axis_var = res.rss / dof;
    let sd = |k: usize, axis: usize| (axis_var[axis] * xtx_inv[(k, k)]).max(0.0).sqrt();
    let response = Matrix3::from_fn(|a, j| beta[(j, a)]);
    let response_sigma = Matrix3::from_fn(|a, j| sd(j, a));
    let (slope, slope_sd) = if p == 5 {
        (
            Some(Vector3::new(beta[(4, 0)], beta[(4, 1)], beta[(4, 2)])),
            Some(Vector3::new(sd(4, 0), sd(4, 1), sd(4, 2))),
        )
    } else {
        (None, None)
    };
    let response_row_cov =
        [0, 1, 2].map(|a| Matrix3::from_fn(|j, l| axis_var[a] * xtx_inv[(j, l)]));
    Ok(CageFit {
        response,
        response_sigma,
        response_row_cov,
        hard_iron_nt: Vector3::new(beta[(3, 0)], beta[(3, 1)], beta[(3, 2)]),
        hard_iron_sigma_nt: Vector3::new(sd(3, 0), sd(3, 1), sd(3, 2)),
        temp_slope_nt_per_c: slope,
        temp_slope_sigma_nt_per_c: slope_sd,
        residuals_nt: res.residuals_nt,
        axis_sigma_nt: axis_var.map(f64::sqrt),
        residual_rms_nt: (res.sum_len2 / n as f64).sqrt(),
        worst_residual: res.worst,
        condition,
    })
}

/// The design matrix X = [hx hy hz 1 (τ)] of a cage fit, row by row.
struct Design<'a> {
    /// Applied field per sample, cage frame, nT.
    applied_nt: &'a [Vector3<f64>],
    /// Temperature per sample, °C, when fitted.
    temp_c: Option<&'a [f64]>,
    /// Mean temperature, °C (0 without temperature).
    tmean_c: f64,
}

/// Residuals of a cage fit and their sums.
struct CageResiduals {
    /// b − X β per sample, sensor frame, nT.
    residuals_nt: Vec<Vector3<f64>>,
    /// Residual sum of squares per sensor axis, nT².
    rss: Vector3<f64>,
    /// Σ |residual|², nT².
    sum_len2: f64,
    /// Largest |residual| (nT) and its sample index.
    worst: (f64, usize),
}

impl Design<'_> {
    /// Row `i` of X (the fifth element is 0 without temperature).
    fn row(&self, i: usize) -> [f64; 5] {
        let h = self.applied_nt[i];
        let tau = self.temp_c.map(|t| t[i] - self.tmean_c).unwrap_or(0.0);
        [h.x, h.y, h.z, 1.0, tau]
    }

    /// XᵀX (upper triangle of the leading p×p block) and XᵀY, Y the readings (nT), in
    /// one pass.
    fn normal_equations(
        &self,
        samples_nt: &[Vector3<f64>],
        p: usize,
    ) -> (SMatrix<f64, 5, 5>, SMatrix<f64, 5, 3>) {
        let mut xtx = SMatrix::<f64, 5, 5>::zeros();
        let mut xty = SMatrix::<f64, 5, 3>::zeros();
        for (i, b) in samples_nt.iter().enumerate() {
            let x = self.row(i);
            for a in 0..p {
                for c in a..p {
                    xtx[(a, c)] += x[a] * x[c];
                }
                for c in 0..3 {
                    xty[(a, c)] += x[a] * b[c];
                }
            }
        }
        (xtx, xty)
    }

    /// Residuals b − X β of every sample, with their sums.
    fn residuals(
        &self,
        samples_nt: &[Vector3<f64>],
        beta: &SMatrix<f64, 5, 3>,
        p: usize,
    ) -> CageResiduals {
        let mut residuals_nt = Vec::with_capacity(samples_nt.len());
        let mut rss = Vector3::zeros();
        let (mut sum_len2, mut worst) = (0.0, (0.0, 0usize));
        for (i, b) in samples_nt.iter().enumerate() {
            let x = self.row(i);
            let mut r = *b;
            for c in 0..3 {
                r[c] -= (0..p).map(|a| x[a] * beta[(a, c)]).sum::<f64>();
            }
            rss += r.component_mul(&r);
            let l2 = r.norm_squared();
            sum_len2 += l2;
            if l2.sqrt() > worst.0 {
                worst = (l2.sqrt(), i);
            }
            residuals_nt.push(r);
        }
        CageResiduals {
            residuals_nt,
            rss,
            sum_len2,
            worst,
        }
    }
}

/// (XᵀX)⁻¹ of the leading p×p block of `xtx` (upper triangle given), through the
/// equilibrated matrix M = D⁻¹ XᵀX D⁻¹ (D = √diag), and the condition number of M. A
/// zero column or a rank-deficient grid is refused with the reason.
fn invert_normal_matrix(
    xtx: &SMatrix<f64, 5, 5>,
    p: usize,
) -> Result<(nalgebra::DMatrix<f64>, f64), FitError> {
    // Work on the leading p×p block; equilibrate for conditioning.
    let mut m = nalgebra::DMatrix::<f64>::zeros(p, p);
    let mut d = vec![0.0; p];
    for a in 0..p {
        d[a] = xtx[(a, a)].sqrt();
        if !(d[a] > 0.0) {
            return Err(FitError::Degenerate(if a == 4 {
                "the temperature never changes".into()
            } else {
                format!("column {a} of the cage design is zero")
            }));
        }
    }
    for a in 0..p {
        for c in a..p {
            let v = xtx[(a, c)] / (d[a] * d[c]);
            m[(a, c)] = v;
            m[(c, a)] = v;
        }
    }
    let eig = nalgebra::SymmetricEigen::new(m.clone());
    let (emin, emax) = eig
        .eigenvalues
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(lo, hi), &e| {
            (lo.min(e), hi.max(e))
        });
    let condition = emax / emin.max(f64::MIN_POSITIVE);
    if !(emin > 1e-12 * emax) {
        return Err(FitError::Degenerate(format!(
            "the cage grid is rank-deficient (condition number {condition:.1e}): the applied \
             fields (and temperature) do not vary independently"
        )));
    }
    let minv_eq = m
        .cholesky()
        .ok_or_else(|| FitError::Degenerate("cage normal matrix is not positive".into()))?
        .inverse();
    // (XᵀX)⁻¹ = D⁻¹ M⁻¹ D⁻¹.
    let mut xtx_inv = minv_eq;
    for a in 0..p {
        for c in 0..p {
            xtx_inv[(a, c)] /= d[a] * d[c];
        }
    }
    Ok((xtx_inv, condition))
}

/// Refuse a grid whose applied fields do not span three dimensions, naming the axis.
fn check_grid_rank(applied_nt: &[Vector3<f64>]) -> Result<(), FitError> {
    let n = applied_nt.len() as f64;
    let mean = applied_nt.iter().fold(Vector3::zeros(), |a, h| a + h) / n;
    let cov = applied_nt.iter().fold(Matrix3::zeros(), |a, h| {
        let d = h - mean;
        a + d * d.transpose()
    }) / n;
    let eig = nalgebra::SymmetricEigen::new(cov);
    let (imin, emin) =
        eig.eigenvalues
            .iter()
            .enumerate()
            .fold(
                (0, f64::INFINITY),
                |acc, (i, &e)| if e < acc.1 { (i, e) } else { acc },
            );
    let emax = eig.eigenvalues.max();
    if !(emax > 0.0) {
        return Err(FitError::Degenerate(
            "the applied field never changes: a cage fit needs a sweep".into(),
        ));
    }
    if emin < 1e-8 * emax {
        let axis = super::coverage::axis_name(&eig.eigenvectors.column(imin).into_owned());
        return Err(FitError::Degenerate(format!(
            "the cage grid is rank-deficient: the applied fields never vary along cage {axis}, \
             so the response to that axis cannot be found; sweep all three coil pairs"
        )));
    }
    Ok(())
}

/// Polar decomposition A = R·S: `(R, S)` with R orthogonal (det ±1) and S symmetric
/// positive semi-definite. `None` if the SVD fails.
pub fn polar_decomposition(a: &Matrix3<f64>) -> Option<(Matrix3<f64>, Matrix3<f64>)> {
    let svd = a.svd(true, true);
    let u = svd.u?;
    let v_t = svd.v_t?;
    let r = u * v_t;
    let s = v_t.transpose() * Matrix3::from_diagonal(&svd.singular_values) * v_t;
    Some((r, 0.5 * (s + s.transpose())))
}

/// 1σ of each element of W = A⁻¹ by first-order propagation,
/// dW = −W dA W, with the per-row covariances of A (rows independent).
pub fn inverse_sigma(a_inv: &Matrix3<f64>, row_cov: &[Matrix3<f64>; 3]) -> Matrix3<f64> {
    Matrix3::from_fn(|i, j| {
        let mut var = 0.0;
        for k in 0..3 {
            // dW_ij = −Σ_l W_ik W_lj dA_kl: a linear form g·dA_k· with g_l = W_ik W_lj.
            let g = Vector3::new(
                a_inv[(i, k)] * a_inv[(0, j)],
                a_inv[(i, k)] * a_inv[(1, j)],
                a_inv[(i, k)] * a_inv[(2, j)],
            );
            var += (g.transpose() * row_cov[k] * g)[0];
        }
        var.max(0.0).sqrt()
    })
}

/// Rotation angle of a rotation matrix, rad (0..π).
pub fn rotation_angle(r: &Matrix3<f64>) -> f64 {
    let c = ((r.trace() - 1.0) / 2.0).clamp(-1.0, 1.0);
    let s = 0.5
        * Vector3::new(
            r[(2, 1)] - r[(1, 2)],
            r[(0, 2)] - r[(2, 0)],
            r[(1, 0)] - r[(0, 1)],
        )
        .norm();
    s.atan2(c)
}

/// Per-axis scale factors (length of each row of A) and non-orthogonality angles
/// (90° minus the angle between the sensitive directions of axes xy, xz, yz), rad.
pub fn scale_and_non_orthogonality(a: &Matrix3<f64>) -> (Vector3<f64>, [f64; 3]) {
    let rows: [Vector3<f64>; 3] = [0, 1, 2].map(|i| a.row(i).transpose());
    let scale = Vector3::new(rows[0].norm(), rows[1].norm(), rows[2].norm());
    let ang = |i: usize, j: usize| {
        std::f64::consts::FRAC_PI_2
            - crate::physics::frames::angle_between(&rows[i], &rows[j]).unwrap_or(0.0)
    };
    (scale, [ang(0, 1), ang(0, 2), ang(1, 2)])
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::{simulate_cage, CageConfig, CageGrid};
    use approx::assert_relative_eq;

    #[test]
    fn recovers_simulated_response_within_four_sigma() {
        let cfg = CageConfig::default();
        let sim = simulate_cage(&cfg, 7).unwrap();
        let fit = fit_cage(&sim.applied_nt, &sim.samples_nt, None).unwrap();
        for a in 0..3 {
            let err = (fit.hard_iron_nt[a] - cfg.hard_iron_nt[a]).abs();
            assert!(err < 4.0 * fit.hard_iron_sigma_nt[a], "axis {a}: {err}");
            for j in 0..3 {
                let e = (fit.response[(a, j)] - cfg.response[(a, j)]).abs();
                assert!(e < 4.0 * fit.response_sigma[(a, j)], "A[{a}{j}] off by {e}");
            }
        }
        assert_relative_eq!(fit.axis_sigma_nt.x, 30.0, max_relative = 0.15);
    }

    #[test]
    fn temperature_slope_is_fitted_with_the_response() {
        let cfg = CageConfig::default();
        let sim = simulate_cage(&cfg, 12).unwrap();
        let n = sim.samples_nt.len();
        let k = Vector3::new(2.0, -3.0, 0.5);
        // Temperature cycles independently of the grid order (a slow sine over the sweep).
        let temp: Vec<f64> = (0..n)
            .map(|i| 20.0 + 15.0 * (i as f64 * 0.037).sin())
            .collect();
        let tmean = temp.iter().sum::<f64>() / n as f64;
        let b: Vec<Vector3<f64>> = sim
            .samples_nt
            .iter()
            .zip(&temp)
            .map(|(b, t)| b + k * (t - tmean))
            .collect();
        let fit = fit_cage(&sim.applied_nt, &b, Some(&temp)).unwrap();
        let got = fit.temp_slope_nt_per_c.unwrap();
        let sd = fit.temp_slope_sigma_nt_per_c.unwrap();
        for a in 0..3 {
            assert!((got[a] - k[a]).abs() < 4.0 * sd[a], "axis {a}: {got}");
            let e = (fit.hard_iron_nt[a] - cfg.hard_iron_nt[a]).abs();
            assert!(e < 4.0 * fit.hard_iron_sigma_nt[a]);
        }
    }

    #[test]
    fn monte_carlo_hard_iron_sigma_is_honest() {
        // Ordinary least squares: the reported σ should match the scatter over runs.
        let cfg = CageConfig {
            grid: CageGrid::Cube {
                per_axis: 3,
                max_nt: 50_000.0,
            },
            repeats: 2,
            ..CageConfig::default()
        };
        let runs = 200;
        let (mut sq, mut sig) = (0.0, 0.0);
        for seed in 0..runs {
            let sim = simulate_cage(&cfg, 500 + seed).unwrap();
            let fit = fit_cage(&sim.applied_nt, &sim.samples_nt, None).unwrap();
            let e = fit.hard_iron_nt - cfg.hard_iron_nt;
            sq += e.norm_squared() / 3.0;
            sig += fit.hard_iron_sigma_nt.sum() / 3.0;
        }
        let ratio = (sq / runs as f64).sqrt() / (sig / runs as f64);
        assert!(
            (0.85..=1.15).contains(&ratio),
            "RMS error / mean σ = {ratio}"
        );
    }

    #[test]
    fn planar_grid_is_refused_naming_z() {
        let cfg = CageConfig {
            grid: CageGrid::PlaneXy {
                per_axis: 5,
                max_nt: 50_000.0,
            },
            ..CageConfig::default()
        };
        let sim = simulate_cage(&cfg, 1).unwrap();
        let e = fit_cage(&sim.applied_nt, &sim.samples_nt, None).unwrap_err();
        assert!(e.to_string().contains("along cage z"), "{e}");
    }

    #[test]
    fn polar_decomposition_recovers_rotation_and_stretch() {
        let r = nalgebra::Rotation3::from_euler_angles(0.1, -0.2, 0.3).into_inner();
        let s = Matrix3::new(1.1, 0.02, 0.0, 0.02, 0.95, 0.01, 0.0, 0.01, 1.0);
        let (r2, s2) = polar_decomposition(&(r * s)).unwrap();
        assert_relative_eq!(r2, r, epsilon = 1e-12);
        assert_relative_eq!(s2, s, epsilon = 1e-12);
        assert_relative_eq!(rotation_angle(&Matrix3::identity()), 0.0);
    }
}
