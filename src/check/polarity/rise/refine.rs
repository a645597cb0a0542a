//! The refinement of the delay and the rise time constants: damped Gauss–Newton
//! (Levenberg–Marquardt) steps on the edge windows' χ², from the coarse grid's values.

use nalgebra::{DMatrix, DVector};

use super::{step, total_ss, Edge};

/// Levenberg–Marquardt on θ = (lag, τ of the `free` columns) within the lag bounds and
/// τ ≥ `tau_min`; returns the lag and the covariance of θ, (JᵀWJ)⁻¹ scaled by the
/// reduced χ² when it exceeds 1 (`None` when singular).
pub(super) fn gauss_newton(
    edges: &[Edge],
    free: &[usize],
    lag0: f64,
    tau: &mut [f64],
    lag_bounds: (f64, f64),
    tau_min: f64,
) -> (f64, Option<DMatrix<f64>>) {
    let np = 1 + free.len();
    let slot = |c: usize| free.iter().position(|&f| f == c).map(|k| k + 1);
    // Gradient and JᵀWJ of the χ² at (lag, tau).
    let normal = |lag: f64, tau: &[f64]| {
        let mut grad = DVector::zeros(np);
        let mut jtj = DMatrix::zeros(np, np);
        for e in edges {
            let k = slot(e.column);
            for &(s0, p, _) in &e.rows {
                let (h, dl, dt) = step(s0 - lag, tau[e.column]);
                let r = 2.0 * (h * e.g - p);
                grad[0] += dl * r;
                jtj[(0, 0)] += dl * dl * e.g;
                if let Some(k) = k {
                    grad[k] += dt * r;
                    jtj[(0, k)] += dl * dt * e.g;
                    jtj[(k, k)] += dt * dt * e.g;
                }
            }
        }
        for k in 1..np {
            jtj[(k, 0)] = jtj[(0, k)];
        }
        (grad, jtj)
    };
    let mut lag = lag0;
    let mut ss = total_ss(edges, lag, tau);
    let mut lambda = 1e-3;
    for _ in 0..30 {
        let (grad, jtj) = normal(lag, tau);
        let mut improved = false;
        for _ in 0..12 {
            let mut a = jtj.clone();
            for q in 0..np {
                a[(q, q)] *= 1.0 + lambda;
                a[(q, q)] += 1e-300;
            }
            let Some(delta) = a.cholesky().map(|ch| ch.solve(&(-&grad * 0.5))) else {
                lambda *= 10.0;
                continue;
            };
            let lag_new = (lag + delta[0]).clamp(lag_bounds.0, lag_bounds.1);
            let mut tau_new = tau.to_vec();
            for (k, &c) in free.iter().enumerate() {
                tau_new[c] = (tau[c] + delta[k + 1]).max(tau_min);
            }
            let ss_new = total_ss(edges, lag_new, &tau_new);
            if ss_new <= ss {
                let done = ss - ss_new <= 1e-6; // χ² units: nothing in statistical terms
                lag = lag_new;
                tau.copy_from_slice(&tau_new);
                ss = ss_new;
                lambda = (lambda / 10.0).max(1e-9);
                improved = !done;
                break;
            }
            lambda *= 10.0;
        }
        if !improved {
            break;
        }
    }
    let (_, jtj) = normal(lag, tau);
    let rows: usize = edges.iter().map(|e| e.rows.len()).sum();
    let dof = (3 * rows).saturating_sub(np).max(1);
    let chi2_red = (ss / dof as f64).max(1.0);
    let cov = jtj.try_inverse().map(|m| m * chi2_red);
    (lag, cov)
}
