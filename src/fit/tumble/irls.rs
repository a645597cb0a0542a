//! The damped reweighting rounds of the tumble fit: a Levenberg–Marquardt solve with
//! the current weights, then Tukey weights from the new residuals (nT), until no weight
//! changes by more than a tolerance.

use nalgebra::{DVector, Vector3};

use super::{robust_sigma, tukey_weight, Robust, TumbleOptions, TumbleProblem, TUKEY_C};
use crate::fit::lm::{solve, LmTermination};
use crate::fit::FitError;

/// At most this many reweighting rounds.
const MAX_ROUNDS: usize = 20;
/// Reweighting stops when no weight changes by more than this between rounds.
pub(super) const WEIGHT_TOL: f64 = 2e-3;

/// Book-keeping of the reweighting rounds.
pub(super) struct Irls {
    /// LM iterations summed over the rounds.
    pub(super) iterations: u64,
    /// Every solve that did not end in convergence.
    pub(super) solver_problems: Vec<LmTermination>,
    /// Reweighting rounds done.
    pub(super) rounds: usize,
    /// True when the weights settled (or no reweighting was asked for).
    pub(super) converged: bool,
    /// Robust scale σ̂ of the last round's residuals, nT (0 for noise-free data).
    pub(super) sigma: f64,
    /// Stop when no weight changes by more than this between rounds.
    pub(super) weight_tol: f64,
}

impl Irls {
    /// No round done yet; `converged` as given.
    pub(super) fn new(converged: bool) -> Self {
        Irls {
            iterations: 0,
            solver_problems: Vec::new(),
            rounds: 0,
            converged,
            sigma: 0.0,
            weight_tol: WEIGHT_TOL,
        }
    }
}

/// Solve, reweight, repeat until the weights settle. Returns the parameters and, when
/// computed at them, the residuals of every sample.
pub(super) fn irls(
    samples_nt: &[Vector3<f64>],
    tdev: Option<&[f64]>,
    r: f64,
    mut p: DVector<f64>,
    weights: &mut [f64],
    opts: &TumbleOptions,
    st: &mut Irls,
) -> Result<(DVector<f64>, Option<Vec<f64>>), FitError> {
    loop {
        let prob = TumbleProblem {
            samples_nt,
            temp_dev_c: tdev,
            weights: Some(weights),
            reference_nt: r,
        };
        let out = solve(prob, p.clone(), opts.max_iterations.max(1))?;
        st.iterations += out.iterations;
        if out.termination != LmTermination::Converged {
            st.solver_problems.push(out.termination.clone());
        }
        p = out.param;
        if opts.robust == Robust::Off || st.rounds >= MAX_ROUNDS {
            return Ok((p, None));
        }
        st.rounds += 1;
        let res = out.problem.residuals(&p);
        st.sigma = robust_sigma(&res);
        // Noise below 1e-9 of the field (noise-free data): nothing to reweight.
        if !(st.sigma > 1e-9 * r) {
            st.sigma = 0.0;
            st.converged = true;
            return Ok((p, Some(res)));
        }
        let mut change: f64 = 0.0;
        for (w, r) in weights.iter_mut().zip(&res) {
            let nw = tukey_weight(*r / (TUKEY_C * st.sigma));
            change = change.max((nw - *w).abs());
            *w = nw;
        }
        if change < st.weight_tol {
            st.converged = true;
            return Ok((p, Some(res)));
        }
    }
}
