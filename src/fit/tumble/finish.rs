//! The end of every route of the tumble fit: from the final parameters, weights and
//! residuals (nT), the Huber M-estimator covariance and the [`TumbleFit`] reported.

use nalgebra::{DMatrix, DVector, Vector3};
use rayon::prelude::*;

use super::problem::CHUNK;
use super::{sym_from_params, tukey_weight, Robust, TumbleFit, TUKEY_C};
use crate::fit::coverage::DirectionSpread;
use crate::fit::lm::LmTermination;
use crate::fit::FitError;

/// What the fit's route knows besides the parameters and residuals.
pub(super) struct FinishInfo {
    /// Reference magnitude R, nT.
    pub(super) reference_nt: f64,
    /// See [`TumbleFit::kept_direction_spread`].
    pub(super) kept_direction_spread: Option<DirectionSpread>,
    /// Robust reweighting asked for.
    pub(super) robust: Robust,
    /// LM iterations (or one-pass Newton passes) summed.
    pub(super) iterations: u64,
    /// Reweighting rounds (or passes) done.
    pub(super) rounds: usize,
    /// True when the weights settled.
    pub(super) irls_converged: bool,
    /// Every solve that did not end in convergence.
    pub(super) solver_problems: Vec<LmTermination>,
}

/// The fit at parameters `p` with the final `weights`, robust scale `sigma` (nT), the
/// residuals there and the kept samples' unweighted JᵀJ there.
pub(super) fn finish(
    p: DVector<f64>,
    weights: Vec<f64>,
    sigma: f64,
    residuals_nt: Vec<f64>,
    jtj: DMatrix<f64>,
    info: FinishInfo,
) -> Result<TumbleFit, FitError> {
    let np = p.len();
    // σ̂ = 0 (noise-free data): the biweight is undefined; use plain least squares.
    let robust = if sigma > 0.0 {
        info.robust
    } else {
        Robust::Off
    };
    let (psi2, dpsi, rss, used) = kept_sums(&residuals_nt, &weights, robust, sigma);
    if used <= np {
        return Err(FitError::Degenerate(format!(
            "only {used} samples kept after outlier rejection, fewer than the {} unknowns",
            np + 1
        )));
    }
    let mean_dpsi = dpsi / used as f64;
    if !(mean_dpsi > 0.0) {
        return Err(FitError::Degenerate(
            "the robust fit kept no sample near the model".into(),
        ));
    }
    let s2 = psi2 / (used - np) as f64 / (mean_dpsi * mean_dpsi);
    let inv = jtj.try_inverse().ok_or_else(|| {
        FitError::Degenerate(
            "the fit's normal matrix is singular: the directions do not constrain every \
             parameter"
                .into(),
        )
    })?;
    let covariance = inv * s2;
    let sd = |i: usize| covariance[(i, i)].max(0.0).sqrt();
    let c = Vector3::new(p[0], p[1], p[2]);
    let w = sym_from_params(&p.as_slice()[3..9]);
    let (slope, slope_sd) = if np == 12 {
        (
            Some(Vector3::new(p[9], p[10], p[11])),
            Some(Vector3::new(sd(9), sd(10), sd(11))),
        )
    } else {
        (None, None)
    };
    Ok(TumbleFit {
        hard_iron_nt: c,
        soft_iron: w,
        temp_slope_nt_per_c: slope,
        temp_slope_sigma_nt_per_c: slope_sd,
        reference_nt: info.reference_nt,
        hard_iron_sigma_nt: Vector3::new(sd(0), sd(1), sd(2)),
        covariance,
        residual_rms_nt: (rss / used as f64).sqrt(),
        residuals_nt,
        samples_used: used,
        samples_rejected: weights.len() - used,
        weights,
        robust_sigma_nt: sigma,
        iterations: info.iterations,
        irls_rounds: info.rounds,
        irls_converged: info.irls_converged,
        solver_problems: info.solver_problems,
        kept_direction_spread: info.kept_direction_spread,
    })
}

/// Σψ², Σψ′, Σr² (nT²) and the count over the kept samples (weight > 0), in chunks on
/// long logs; ψ is the `robust` influence function at scale `sigma` (nT).
fn kept_sums(
    residuals_nt: &[f64],
    weights: &[f64],
    robust: Robust,
    sigma: f64,
) -> (f64, f64, f64, usize) {
    let sums = |res: &[f64], wts: &[f64]| {
        let (mut psi2, mut dpsi, mut rss, mut used) = (0.0, 0.0, 0.0, 0usize);
        for (res, w) in res.iter().zip(wts) {
            if *w <= 0.0 {
                continue;
            }
            used += 1;
            rss += res * res;
            match robust {
                Robust::Off => {
                    psi2 += res * res;
                    dpsi += 1.0;
                }
                Robust::Tukey => {
                    let u = res / (TUKEY_C * sigma);
                    let psi = res * tukey_weight(u);
                    psi2 += psi * psi;
                    dpsi += (1.0 - u * u) * (1.0 - 5.0 * u * u);
                }
            }
        }
        (psi2, dpsi, rss, used)
    };
    if residuals_nt.len() > 4 * CHUNK {
        residuals_nt
            .par_chunks(CHUNK)
            .zip(weights.par_chunks(CHUNK))
            .map(|(r, w)| sums(r, w))
            .reduce(
                || (0.0, 0.0, 0.0, 0),
                |a, b| (a.0 + b.0, a.1 + b.1, a.2 + b.2, a.3 + b.3),
            )
    } else {
        sums(residuals_nt, weights)
    }
}
