//! Dipole fit: the body-frame moment of a point dipole from field samples taken at known
//! probe positions and article orientations (method: `docs/dipole.md`).
//!
//! Model, for sample i (table frame L; the probe's axes are parallel to the table's):
//!
//! ```text
//! B_i = G(p_i − R_i · o) · R_i · m
//! ```
//!
//! with `m` the moment in the body frame (A·m²), `R_i = R_z(angle_i) · body_to_table`
//! the body → table rotation of the sample, `p_i` the probe position (m), `o` the dipole's
//! position in the body frame relative to the body point placed at the table origin (m;
//! zero unless fitted) and `G(r) = μ0/(4π r³) (3 r̂ r̂ᵀ − I)` the dipole matrix (Jackson,
//! *Classical Electrodynamics*, 3rd ed., eq. 5.56).
//!
//! * [`fit_moment`]: with `o` fixed, the model is linear in `m`: ordinary least squares on
//!   the normal equations, accumulated sample by sample (no per-sample allocation);
//!   covariance `s² (AᵀA)⁻¹` with `s² = RSS / (3n − 3)`.
//! * [`fit_moment_and_offset`]: `m` and `o` together (six unknowns, nonlinear), solved by
//!   a damped Gauss–Newton (Levenberg–Marquardt; Levenberg 1944, Marquardt 1963) written
//!   as an argmin `Solver` (the project's one damped solver, [`crate::fit::lm`]), seeded from
//!   the linear fit at `o = 0`; covariance
//!   `s² (JᵀJ)⁻¹` at the solution.
//!
//! Requirements: samples must be background-subtracted (the model has no constant term)
//! and the probe must be well away from the article (point-dipole model; common practice:
//! a distance of several times the article's largest size).

use crate::fit::FitError;
use argmin::core::{CostFunction, Error as ArgminError, Jacobian, Operator};
use nalgebra::{DMatrix, DVector, Matrix3, SymmetricEigen, Vector3, Vector6};

use crate::physics::dipole::{dipole_matrix, MU0_OVER_4PI_NT_M_PER_A};

use crate::fit::lm::{solve, LmTermination};

/// One background-subtracted field sample.
#[derive(Debug, Clone, Copy)]
pub struct DipoleSample {
    /// Probe position, table frame (L), m.
    pub probe_m: Vector3<f64>,
    /// Rotation body → table at this sample: `R_z(angle) · body_to_table`.
    pub body_to_table: Matrix3<f64>,
    /// Article field at the probe (measured minus background), table frame (L), nT.
    pub b_nt: Vector3<f64>,
}

/// A fitted dipole.
#[derive(Debug, Clone)]
pub struct DipoleFit {
    /// Moment, body frame (B), A·m².
    pub moment_body_am2: Vector3<f64>,
    /// Covariance of the moment, body frame, (A·m²)².
    pub moment_cov_am2sq: Matrix3<f64>,
    /// Dipole position in the body frame relative to the body point at the table origin,
    /// m (zero when not fitted).
    pub offset_body_m: Vector3<f64>,
    /// 1σ of the offset, body frame, m; `None` when the offset was held at zero.
    pub offset_sigma_m: Option<Vector3<f64>>,
    /// RMS over all components of (measured − model), nT.
    pub residual_rms_nt: f64,
    /// Field samples used.
    pub samples: usize,
    /// Solver iterations (0 for the linear fit).
    pub iterations: u64,
}

impl DipoleFit {
    /// 1σ of each moment component, body frame, A·m².
    pub fn moment_sigma_am2(&self) -> Vector3<f64> {
        self.moment_cov_am2sq.diagonal().map(|v| v.max(0.0).sqrt())
    }

    /// |m|, A·m², and its 1σ by first-order propagation through the covariance.
    pub fn magnitude_am2(&self) -> (f64, f64) {
        let m = self.moment_body_am2;
        let mag = m.norm();
        let var = if mag > 0.0 {
            let u = m / mag;
            (u.transpose() * self.moment_cov_am2sq * u)[(0, 0)]
        } else {
            // At |m| = 0 the magnitude's spread is that of the largest component.
            self.moment_cov_am2sq.diagonal().max()
        };
        (mag, var.max(0.0).sqrt())
    }
}

/// The 3×3 matrix A (nT per A·m²) with `B = A · m_body` for one sample and a dipole at
/// `offset_body_m` in the body frame: `A = G(p − R·o) · R`. `None` when the probe is at
/// the dipole.
pub fn model_matrix(sample: &DipoleSample, offset_body_m: &Vector3<f64>) -> Option<Matrix3<f64>> {
    let r = sample.probe_m - sample.body_to_table * offset_body_m;
    Some(dipole_matrix(&r)? * sample.body_to_table)
}

/// Field the model predicts for one sample, table frame, nT.
pub fn model_field_nt(
    sample: &DipoleSample,
    moment_body_am2: &Vector3<f64>,
    offset_body_m: &Vector3<f64>,
) -> Option<Vector3<f64>> {
    Some(model_matrix(sample, offset_body_m)? * moment_body_am2)
}

/// Normal matrix `Σ AᵢᵀAᵢ` and right-hand side `Σ Aᵢᵀbᵢ` at a fixed offset.
fn normal_equations(
    samples: &[DipoleSample],
    offset_body_m: &Vector3<f64>,
) -> Result<(Matrix3<f64>, Vector3<f64>), FitError> {
    let mut n = Matrix3::zeros();
    let mut g = Vector3::zeros();
    for (index, s) in samples.iter().enumerate() {
        let a = model_matrix(s, offset_body_m).ok_or(FitError::ProbeAtDipole { index })?;
        n += a.transpose() * a;
        g += a.transpose() * s.b_nt;
    }
    Ok((n, g))
}

/// Ratio of the smallest to the largest singular value of a design whose normal matrix
/// is `n`, with the right singular vector of the smallest. Eigenvalues of the normal
/// matrix are the squared singular values.
pub fn weakest_direction(n: &Matrix3<f64>) -> (f64, Vector3<f64>) {
    let eig = SymmetricEigen::new(*n);
    let (mut imin, mut imax) = (0, 0);
    for i in 1..3 {
        if eig.eigenvalues[i] < eig.eigenvalues[imin] {
            imin = i;
        }
        if eig.eigenvalues[i] > eig.eigenvalues[imax] {
            imax = i;
        }
    }
    let (lo, hi) = (eig.eigenvalues[imin].max(0.0), eig.eigenvalues[imax]);
    let ratio = if hi > 0.0 { (lo / hi).sqrt() } else { 0.0 };
    (ratio, eig.eigenvectors.column(imin).into_owned())
}

/// Singular-value ratio below which a design is treated as singular.
pub const SINGULAR_RATIO: f64 = 1e-6;

/// Linear least-squares fit of the body-frame moment with the dipole at
/// `offset_body_m` (zero: at the table origin). See the module doc for the model.
pub fn fit_moment(
    samples: &[DipoleSample],
    offset_body_m: &Vector3<f64>,
) -> Result<DipoleFit, FitError> {
    if samples.len() < 2 {
        return Err(FitError::TooFewSamples {
            found: samples.len(),
            unknowns: 3,
            needed: 2,
        });
    }
    let (n, g) = normal_equations(samples, offset_body_m)?;
    let (ratio, dir) = weakest_direction(&n);
    if ratio < SINGULAR_RATIO {
        return Err(FitError::Singular {
            what: format!("the moment along body {}", describe_direction(&dir)),
            ratio,
        });
    }
    let inv = n.try_inverse().ok_or_else(|| FitError::Singular {
        what: "the moment components".into(),
        ratio,
    })?;
    let m = inv * g;
    let mut rss = 0.0;
    for s in samples {
        let a = model_matrix(s, offset_body_m).unwrap_or_else(Matrix3::zeros);
        rss += (a * m - s.b_nt).norm_squared();
    }
    let dof = (3 * samples.len() - 3) as f64;
    Ok(DipoleFit {
        moment_body_am2: m,
        moment_cov_am2sq: inv * (rss / dof),
        offset_body_m: *offset_body_m,
        offset_sigma_m: None,
        residual_rms_nt: (rss / (3 * samples.len()) as f64).sqrt(),
        samples: samples.len(),
        iterations: 0,
    })
}

/// A direction in words: `"z"` or `"-x"` when within about 18° of an axis, else the
/// unit vector to two decimals.
pub fn describe_direction(v: &Vector3<f64>) -> String {
    let i = v.iamax();
    let n = v.norm();
    if n > 0.0 && v[i].abs() / n > 0.95 {
        let axis = ["x", "y", "z"][i];
        return axis.to_string();
    }
    let u = if n > 0.0 { v / n } else { *v };
    format!("direction ({:.2}, {:.2}, {:.2})", u.x, u.y, u.z)
}

/// Derivative of `G(d) · M` with respect to `d` (nT per m), for a table-frame moment M:
/// `k [3 (d Mᵀ + (M·d) I + M dᵀ) / |d|⁵ − 15 (M·d) d dᵀ / |d|⁷]`, `k = μ0/4π`.
fn field_gradient(d: &Vector3<f64>, moment_table_am2: &Vector3<f64>) -> Matrix3<f64> {
    let r2 = d.norm_squared();
    let r = r2.sqrt();
    let r5 = r2 * r2 * r;
    let md = moment_table_am2.dot(d);
    let k = MU0_OVER_4PI_NT_M_PER_A;
    k * ((d * moment_table_am2.transpose()
        + Matrix3::identity() * md
        + moment_table_am2 * d.transpose())
        * (3.0 / r5)
        - d * d.transpose() * (15.0 * md / (r5 * r2)))
}

/// The nonlinear problem of [`fit_moment_and_offset`]: parameters `[m (3), o (3)]`,
/// residuals `model − measured` stacked per sample (x, y, z). The solver uses its
/// [`LeastSquaresProblem`](crate::fit::lm::LeastSquaresProblem) side, whose normal
/// equations are accumulated in one pass without an N×6 Jacobian; the dense argmin
/// `Operator` + `Jacobian` side is kept as the reference for tests and small problems.
pub struct OffsetProblem<'a> {
    samples: &'a [DipoleSample],
}

impl<'a> OffsetProblem<'a> {
    /// A problem over these samples.
    pub fn new(samples: &'a [DipoleSample]) -> Self {
        Self { samples }
    }

    fn split(p: &DVector<f64>) -> Result<(Vector3<f64>, Vector3<f64>), ArgminError> {
        if p.len() != 6 {
            return Err(ArgminError::msg(format!(
                "expected 6 parameters, got {}",
                p.len()
            )));
        }
        Ok((
            Vector3::new(p[0], p[1], p[2]),
            Vector3::new(p[3], p[4], p[5]),
        ))
    }
}

fn probe_at_dipole(index: usize) -> ArgminError {
    ArgminError::msg(FitError::ProbeAtDipole { index }.to_string())
}

impl Operator for OffsetProblem<'_> {
    type Param = DVector<f64>;
    type Output = DVector<f64>;

    fn apply(&self, p: &Self::Param) -> Result<Self::Output, ArgminError> {
        let (m, o) = Self::split(p)?;
        let mut r = DVector::zeros(3 * self.samples.len());
        for (i, s) in self.samples.iter().enumerate() {
            let b = model_field_nt(s, &m, &o).ok_or_else(|| probe_at_dipole(i))?;
            r.fixed_rows_mut::<3>(3 * i).copy_from(&(b - s.b_nt));
        }
        Ok(r)
    }
}

impl Jacobian for OffsetProblem<'_> {
    type Param = DVector<f64>;
    type Jacobian = DMatrix<f64>;

    fn jacobian(&self, p: &Self::Param) -> Result<Self::Jacobian, ArgminError> {
        let (m, o) = Self::split(p)?;
        let mut j = DMatrix::zeros(3 * self.samples.len(), 6);
        for (i, s) in self.samples.iter().enumerate() {
            let rot = s.body_to_table;
            let d = s.probe_m - rot * o;
            let g = dipole_matrix(&d).ok_or_else(|| probe_at_dipole(i))?;
            j.fixed_view_mut::<3, 3>(3 * i, 0).copy_from(&(g * rot));
            // d depends on o through −R: ∂B/∂o = (∂B/∂d) · (−R).
            let dbdo = -field_gradient(&d, &(rot * m)) * rot;
            j.fixed_view_mut::<3, 3>(3 * i, 3).copy_from(&dbdo);
        }
        Ok(j)
    }
}

impl CostFunction for OffsetProblem<'_> {
    type Param = DVector<f64>;
    type Output = f64;

    fn cost(&self, p: &Self::Param) -> Result<f64, ArgminError> {
        Ok(self.apply(p)?.norm_squared())
    }
}

/// Fit the moment and the dipole's position offset together (see the module doc),
/// seeded from the linear fit at zero offset. Stopping at the iteration limit is an
/// error, never a silent result.
pub fn fit_moment_and_offset(samples: &[DipoleSample]) -> Result<DipoleFit, FitError> {
    if samples.len() < 3 {
        return Err(FitError::TooFewSamples {
            found: samples.len(),
            unknowns: 6,
            needed: 3,
        });
    }
    let seed = fit_moment(samples, &Vector3::zeros())?;
    let m0 = seed.moment_body_am2;
    let p0 = DVector::from_vec(vec![m0.x, m0.y, m0.z, 0.0, 0.0, 0.0]);
    // The project's damped solver (fit::lm, Levenberg–Marquardt on argmin's Solver), fed
    // normal equations accumulated in one pass over the samples (see `normal`).
    let out = solve(OffsetProblem::new(samples), p0, 200)
        .map_err(|e| FitError::NotConverged(e.to_string()))?;
    if !matches!(out.termination, LmTermination::Converged) {
        return Err(FitError::NotConverged(format!(
            "solver stopped: {}",
            out.termination
        )));
    }
    let p = out.param;
    let (m, o) = (
        Vector3::new(p[0], p[1], p[2]),
        Vector3::new(p[3], p[4], p[5]),
    );
    let (jtj, _, rss) = normal::offset_normal_equations(samples, &m, &o)
        .map_err(|index| FitError::ProbeAtDipole { index })?;
    let eig = SymmetricEigen::new(jtj);
    let (lo, hi) = (eig.eigenvalues.min().max(0.0), eig.eigenvalues.max());
    let ratio = if hi > 0.0 { (lo / hi).sqrt() } else { 0.0 };
    let inv = jtj
        .try_inverse()
        .filter(|_| ratio > 1e-9)
        .ok_or_else(|| FitError::Singular {
            what: "the moment from the dipole's position".into(),
            ratio,
        })?;
    let dof = (3 * samples.len() - 6) as f64;
    let cov = inv * (rss / dof);
    let sig = Vector6::from_fn(|i, _| cov[(i, i)].max(0.0).sqrt());
    Ok(DipoleFit {
        moment_body_am2: Vector3::new(p[0], p[1], p[2]),
        moment_cov_am2sq: cov.fixed_view::<3, 3>(0, 0).into_owned(),
        offset_body_m: Vector3::new(p[3], p[4], p[5]),
        offset_sigma_m: Some(Vector3::new(sig[3], sig[4], sig[5])),
        residual_rms_nt: (rss / (3 * samples.len()) as f64).sqrt(),
        samples: samples.len(),
        iterations: out.iterations,
    })
}

mod normal;

#[cfg(test)]
mod tests;
