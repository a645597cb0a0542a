//! The linear start of the orbit fit: expanding the square of
//! `|b − c − Σ k_j x_j| = R / √s` makes the unknowns linear,
//!
//! ```text
//! |b|² = 2bᵀc + Σ 2x_j bᵀk_j − q₀ − Σ x_j q_j − Σ x_j x_l q_jl + s R²
//! ```
//!
//! solved by unweighted linear least squares over the samples whose weight is not zero,
//! on column-scaled normal equations. The start keeps c and the k_j and sets W = I/√s;
//! Levenberg–Marquardt refines it (the model: the parent module's doc).

use nalgebra::DVector;
use rayon::prelude::*;

use super::{symmetric, Normal, OrbitFitData, CHUNK};
use crate::fit::FitError;

/// Linear start: the parameters `[c(3), W(6), k_1(3), …]` of the fit, W = I/√s.
pub(super) fn linear_start(d: &OrbitFitData, weights: &[f64]) -> Result<Vec<f64>, FitError> {
    let m = d.regressors.len();
    let nq = m * (m + 1) / 2;
    let nu = 3 + 3 * m + 1 + m + nq + 1;
    let n = d.reference_nt.len();
    let acc = (0..n.div_ceil(CHUNK))
        .into_par_iter()
        .map(|chunk| {
            let mut a = Normal::new(nu);
            let mut row = vec![0.0; nu];
            let (lo, hi) = (chunk * CHUNK, ((chunk + 1) * CHUNK).min(n));
            for (i, wt) in (lo..hi).zip(&weights[lo..hi]) {
                if *wt == 0.0 {
                    continue;
                }
                let y = linear_row(d, i, &mut row);
                for p in 0..nu {
                    a.jtr[p] += row[p] * y;
                    for q in p..nu {
                        a.jtj[p * nu + q] += row[p] * row[q];
                    }
                }
            }
            a
        })
        .reduce(|| Normal::new(nu), Normal::add);
    let sol = solve_scaled(&acc, nu)?;
    let s = sol[nu - 1];
    if !(s > 0.0 && s.is_finite()) {
        return Err(FitError::Degenerate(
            "the readings do not scale with the reference magnitude (linear start gave a \
             non-positive scale): check the field unit and the positions"
                .into(),
        ));
    }
    let w0 = 1.0 / s.sqrt();
    let mut p = vec![0.0; 9 + 3 * m];
    p[..3].copy_from_slice(&sol[..3]);
    p[3] = w0;
    p[4] = w0;
    p[5] = w0;
    p[9..9 + 3 * m].copy_from_slice(&sol[3..3 + 3 * m]);
    Ok(p)
}

/// Fill `row` with sample `i`'s coefficients of the linear unknowns
/// `[c(3), k_1(3), …, q₀, q_1, …, q_jl (j ≤ l), s]` and return its left side `|b|²` (nT²).
fn linear_row(d: &OrbitFitData, i: usize, row: &mut [f64]) -> f64 {
    let m = d.regressors.len();
    let b = [d.b_nt[0][i], d.b_nt[1][i], d.b_nt[2][i]];
    let mut k = 0;
    for v in b {
        row[k] = 2.0 * v;
        k += 1;
    }
    for col in d.regressors {
        for v in b {
            row[k] = 2.0 * col[i] * v;
            k += 1;
        }
    }
    row[k] = -1.0;
    k += 1;
    for col in d.regressors {
        row[k] = -col[i];
        k += 1;
    }
    for j in 0..m {
        for l in j..m {
            row[k] = -d.regressors[j][i] * d.regressors[l][i];
            k += 1;
        }
    }
    let r = d.reference_nt[i];
    row[k] = r * r;
    b[0] * b[0] + b[1] * b[1] + b[2] * b[2]
}

/// Solve the accumulated normal equations with the columns scaled to unit diagonal (for
/// conditioning), by Cholesky; the solution in the unknowns' own units.
fn solve_scaled(acc: &Normal, nu: usize) -> Result<Vec<f64>, FitError> {
    let mut ata = symmetric(&acc.jtj, nu);
    let scale: Vec<f64> = (0..nu).map(|k| ata[(k, k)].sqrt().max(1e-300)).collect();
    for a in 0..nu {
        for b in 0..nu {
            ata[(a, b)] /= scale[a] * scale[b];
        }
    }
    let rhs = DVector::from_fn(nu, |k, _| acc.jtr[k] / scale[k]);
    let sol = ata
        .cholesky()
        .ok_or_else(|| {
            FitError::Degenerate(
                "the readings cannot separate the hard iron from the regressor biases (the \
                 linear start is singular): the log needs more orbit, more attitude change or \
                 regressors that vary"
                    .into(),
            )
        })?
        .solve(&rhs);
    Ok(sol.iter().zip(&scale).map(|(v, s)| v / s).collect())
}
