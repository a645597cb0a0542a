//! Attitude-independent magnetometer calibration against a reference magnitude that
//! changes from sample to sample (on orbit), with bias terms linear in regressors.
//!
//! Model (Alonso & Shuster 2002, "Complete linear attitude-independent magnetometer
//! calibration", J. Astronaut. Sci. 50(4); bias terms linear in spacecraft currents as in
//! Springmann & Cutler 2012, "Attitude-independent magnetometer calibration with
//! time-varying bias", J. Guid. Control Dyn. 35(4)):
//!
//! ```text
//! r_i = |W (b_i − c − Σ_j k_j x_ij)| − R_i
//! ```
//!
//! with `b` the reading (nT, sensor frame), `c` the hard iron (nT), `W` symmetric (soft
//! iron, 6 unknowns), `k_j` the bias per unit of regressor j (nT per A, per command, per
//! °C), `R` the reference magnitude. Start: the linear least-squares solution of
//! `|b − c − Σk x|² = s R²` (unknowns linear after expanding the square), then
//! Levenberg–Marquardt (Marquardt 1963) on normal equations accumulated in parallel
//! (no N×P Jacobian kept), with Tukey biweights (Beaton & Tukey 1974) at 4.685 robust σ
//! recomputed until the set of rejected samples settles. Covariance:
//! σ̂² (JᵀWJ)⁻¹ with σ̂² the weighted residual variance.

use nalgebra::{DMatrix, DVector, Matrix3, Vector3};
use rayon::prelude::*;

use super::robust::{robust_sigma, tukey_weight};
use super::FitError;
use start::linear_start;

mod start;

/// Tukey tuning constant, in robust σ (95 % efficiency for Gaussian noise).
pub const TUKEY_C: f64 = 4.685;

/// Most reweighting rounds.
const MAX_ROUNDS: usize = 6;

/// Rows per parallel task.
const CHUNK: usize = 16_384;

/// The data of an orbit fit. Every slice has one entry per sample.
#[derive(Debug, Clone, Copy)]
pub struct OrbitFitData<'a> {
    /// Readings, sensor frame, nT: `[bx, by, bz]`.
    pub b_nt: [&'a [f64]; 3],
    /// Reference magnitude per sample, nT.
    pub reference_nt: &'a [f64],
    /// Regressor columns (each in its own unit).
    pub regressors: &'a [&'a [f64]],
    /// Samples to leave out from the start (saturated); empty: none.
    pub excluded: &'a [bool],
}

/// Options.
#[derive(Debug, Clone, Copy)]
pub struct OrbitFitOptions {
    /// Reweight with Tukey's biweight (else plain least squares).
    pub robust: bool,
}

/// The fit's answer.
#[derive(Debug, Clone)]
pub struct OrbitFit {
    /// Hard iron c, sensor frame, nT.
    pub hard_iron_nt: Vector3<f64>,
    /// Soft iron W (symmetric).
    pub soft_iron: Matrix3<f64>,
    /// Bias per unit of each regressor, sensor frame, nT per unit.
    pub regressors: Vec<Vector3<f64>>,
    /// Covariance of the parameters `[c(3), W00 W11 W22 W01 W02 W12, k_1(3), …]`.
    pub covariance: DMatrix<f64>,
    /// RMS of the residual over the samples used (weight > 0), nT.
    pub residual_rms_nt: f64,
    /// Robust σ of the residual, nT.
    pub residual_sigma_nt: f64,
    /// Samples with weight > 0.
    pub samples_used: usize,
    /// Samples the robust weights set to zero.
    pub samples_rejected: usize,
    /// Whether the solver met its tolerance.
    pub converged: bool,
    /// Solver iterations, all reweighting rounds together.
    pub iterations: usize,
}

/// Symmetric W's parameter order.
pub const SYM: [(usize, usize); 6] = [(0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2)];

fn unpack(p: &[f64], m: usize) -> (Vector3<f64>, Matrix3<f64>, Vec<Vector3<f64>>) {
    let c = Vector3::new(p[0], p[1], p[2]);
    let mut w = Matrix3::zeros();
    for (k, &(i, j)) in SYM.iter().enumerate() {
        w[(i, j)] = p[3 + k];
        w[(j, i)] = p[3 + k];
    }
    let ks = (0..m)
        .map(|q| Vector3::new(p[9 + 3 * q], p[10 + 3 * q], p[11 + 3 * q]))
        .collect();
    (c, w, ks)
}

/// The residual of sample `i` under parameters (c, W, K).
pub fn residual_at(
    d: &OrbitFitData,
    i: usize,
    c: &Vector3<f64>,
    w: &Matrix3<f64>,
    ks: &[Vector3<f64>],
) -> f64 {
    let mut x = Vector3::new(d.b_nt[0][i], d.b_nt[1][i], d.b_nt[2][i]) - c;
    for (k, col) in ks.iter().zip(d.regressors) {
        x -= k * col[i];
    }
    (w * x).norm() - d.reference_nt[i]
}

/// Accumulated normal equations: JᵀWJ (upper, full stored), JᵀWr, Σw r², Σw.
#[derive(Clone)]
struct Normal {
    jtj: Vec<f64>,
    jtr: Vec<f64>,
    cost: f64,
}

impl Normal {
    fn new(np: usize) -> Self {
        Normal {
            jtj: vec![0.0; np * np],
            jtr: vec![0.0; np],
            cost: 0.0,
        }
    }
    fn add(mut self, o: Normal) -> Self {
        self.jtj.iter_mut().zip(&o.jtj).for_each(|(a, b)| *a += b);
        self.jtr.iter_mut().zip(&o.jtr).for_each(|(a, b)| *a += b);
        self.cost += o.cost;
        self
    }
}

fn normal(d: &OrbitFitData, p: &[f64], weights: &[f64], jac: bool) -> Normal {
    let m = d.regressors.len();
    let np = 9 + 3 * m;
    let (c, w, ks) = unpack(p, m);
    let n = d.reference_nt.len();
    (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|chunk| {
            let mut acc = Normal::new(np);
            let mut row = vec![0.0; np];
            for i in chunk * CHUNK..((chunk + 1) * CHUNK).min(n) {
                let wt = weights[i];
                if wt == 0.0 {
                    continue;
                }
                let mut x = Vector3::new(d.b_nt[0][i], d.b_nt[1][i], d.b_nt[2][i]) - c;
                for (k, col) in ks.iter().zip(d.regressors) {
                    x -= k * col[i];
                }
                let v = w * x;
                let norm = v.norm();
                let r = norm - d.reference_nt[i];
                acc.cost += wt * r * r;
                if !jac {
                    continue;
                }
                let vh = v / norm.max(1e-300);
                let g = w * vh;
                row[0] = -g[0];
                row[1] = -g[1];
                row[2] = -g[2];
                for (k, &(a, b)) in SYM.iter().enumerate() {
                    row[3 + k] = if a == b {
                        vh[a] * x[a]
                    } else {
                        vh[a] * x[b] + vh[b] * x[a]
                    };
                }
                for (q, col) in d.regressors.iter().enumerate() {
                    let xq = col[i];
                    row[9 + 3 * q] = -xq * g[0];
                    row[10 + 3 * q] = -xq * g[1];
                    row[11 + 3 * q] = -xq * g[2];
                }
                for a in 0..np {
                    let wa = wt * row[a];
                    acc.jtr[a] += wa * r;
                    let line = &mut acc.jtj[a * np..a * np + np];
                    for b in a..np {
                        line[b] += wa * row[b];
                    }
                }
            }
            acc
        })
        .reduce(|| Normal::new(np), Normal::add)
}

fn symmetric(jtj: &[f64], np: usize) -> DMatrix<f64> {
    DMatrix::from_fn(np, np, |a, b| {
        if a <= b {
            jtj[a * np + b]
        } else {
            jtj[b * np + a]
        }
    })
}

/// Levenberg–Marquardt from `p` with fixed weights; returns (p, converged, iterations).
fn levenberg_marquardt(
    d: &OrbitFitData,
    mut p: Vec<f64>,
    weights: &[f64],
) -> Result<(Vec<f64>, bool, usize), FitError> {
    let np = p.len();
    let mut lambda = 1e-6;
    let mut ne = normal(d, &p, weights, true);
    for it in 1..=100 {
        let a = symmetric(&ne.jtj, np);
        let diag: Vec<f64> = (0..np).map(|k| a[(k, k)].max(1e-300)).collect();
        let mut improved = false;
        for _ in 0..20 {
            let mut damped = a.clone();
            for k in 0..np {
                damped[(k, k)] += lambda * diag[k];
            }
            let g = DVector::from_column_slice(&ne.jtr);
            let Some(ch) = damped.cholesky() else {
                lambda *= 10.0;
                continue;
            };
            let step = ch.solve(&(-g.clone()));
            // Predicted decrease of the cost for this step (Gauss–Newton model, halved
            // cost convention): below rounding of the cost itself, the minimum is reached.
            let predicted = -g.dot(&step);
            if predicted <= 1e-12 * ne.cost.max(1e-300) {
                return Ok((p, true, it));
            }
            let trial: Vec<f64> = p.iter().zip(step.iter()).map(|(a, b)| a + b).collect();
            let cost = normal(d, &trial, weights, false).cost;
            if cost.is_finite() && cost <= ne.cost {
                let rel = (ne.cost - cost) / ne.cost.max(1e-300);
                let small = step
                    .iter()
                    .zip(&diag)
                    .all(|(s, dg)| (s * s * dg) <= 1e-12 * ne.cost.max(1e-300));
                p = trial;
                lambda = (lambda / 10.0).max(1e-12);
                if rel < 1e-12 || small {
                    return Ok((p, true, it));
                }
                ne = normal(d, &p, weights, true);
                improved = true;
                break;
            }
            lambda *= 10.0;
        }
        if !improved {
            // No step lowers the cost: at the minimum to rounding.
            return Ok((p, lambda < 1e6, it));
        }
    }
    Ok((p, false, 100))
}

/// Fit hard iron, soft iron and regressor biases to the reference magnitudes.
pub fn fit_orbit(d: &OrbitFitData, opt: OrbitFitOptions) -> Result<OrbitFit, FitError> {
    let n = d.reference_nt.len();
    let m = d.regressors.len();
    let np = 9 + 3 * m;
    let mut weights: Vec<f64> = (0..n)
        .map(|i| {
            if d.excluded.get(i).copied().unwrap_or(false) {
                0.0
            } else {
                1.0
            }
        })
        .collect();
    let usable = weights.iter().filter(|w| **w > 0.0).count();
    if usable < 3 * np {
        return Err(FitError::TooFewSamples {
            found: usable,
            unknowns: np,
            needed: 3 * np,
        });
    }
    let prior: Vec<bool> = weights.iter().map(|w| *w > 0.0).collect();
    let mut p = linear_start(d, &weights)?;
    let mut iterations = 0;
    let mut converged;
    let mut sigma;
    let mut residuals = vec![0.0; n];
    let mut rounds = 0;
    let mut last_sigma = f64::NAN;
    loop {
        let (q, conv, it) = levenberg_marquardt(d, p, &weights)?;
        p = q;
        converged = conv;
        iterations += it;
        let (c, w, ks) = unpack(&p, m);
        residuals
            .par_iter_mut()
            .enumerate()
            .for_each(|(i, r)| *r = residual_at(d, i, &c, &w, &ks));
        let used: Vec<f64> = residuals
            .iter()
            .zip(&prior)
            .filter(|(_, ok)| **ok)
            .map(|(r, _)| *r)
            .collect();
        sigma = robust_sigma(&used);
        rounds += 1;
        if !opt.robust || rounds > MAX_ROUNDS || sigma <= 0.0 {
            break;
        }
        let new: Vec<f64> = residuals
            .par_iter()
            .zip(&prior)
            .map(|(r, ok)| {
                if *ok {
                    tukey_weight(r / (TUKEY_C * sigma))
                } else {
                    0.0
                }
            })
            .collect();
        // Settled: the same samples rejected and the scale steady to 0.1 %.
        let same_set = new
            .iter()
            .zip(&weights)
            .all(|(a, b)| (*a == 0.0) == (*b == 0.0));
        let settled = rounds > 1 && same_set && (sigma - last_sigma).abs() <= 1e-3 * sigma;
        last_sigma = sigma;
        if settled {
            break;
        }
        weights = new;
    }
    finish(
        d, p, &weights, &residuals, &prior, sigma, converged, iterations,
    )
}

#[allow(clippy::too_many_arguments)]
fn finish(
    d: &OrbitFitData,
    p: Vec<f64>,
    weights: &[f64],
    residuals: &[f64],
    prior: &[bool],
    sigma: f64,
    converged: bool,
    iterations: usize,
) -> Result<OrbitFit, FitError> {
    let m = d.regressors.len();
    let np = p.len();
    let ne = normal(d, &p, weights, true);
    let used = weights.iter().filter(|w| **w > 0.0).count();
    let wsum: f64 = weights.iter().sum();
    let dof = (wsum - np as f64).max(1.0);
    let s2 = ne.cost / dof;
    let a = symmetric(&ne.jtj, np);
    let inv = a.clone().try_inverse().ok_or_else(|| FitError::Singular {
        what: "the hard iron, soft iron and regressor biases".into(),
        ratio: 0.0,
    })?;
    let covariance = inv * s2;
    let (c, w, ks) = unpack(&p, m);
    let (ss, cnt) = residuals
        .iter()
        .zip(weights)
        .filter(|(_, w)| **w > 0.0)
        .fold((0.0, 0usize), |(s, k), (r, _)| (s + r * r, k + 1));
    Ok(OrbitFit {
        hard_iron_nt: c,
        soft_iron: w,
        regressors: ks,
        covariance,
        residual_rms_nt: (ss / cnt.max(1) as f64).sqrt(),
        residual_sigma_nt: sigma,
        samples_used: used,
        samples_rejected: prior.iter().filter(|x| **x).count() - used,
        converged,
        iterations,
    })
}

#[cfg(test)]
mod tests;
