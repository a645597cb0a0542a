//! Tumble calibration: geometric refinement of hard iron and soft iron on the magnitude
//! residual, seeded by the Li & Griffiths (2004) algebraic ellipsoid fit.
//!
//! Model (attitude-independent calibration; Alonso & Shuster 2002 "TWOSTEP";
//! Crassidis, Lai & Harman 2005; Vasconcelos et al. 2011): in a uniform ambient field of
//! magnitude R, each reading b (sensor frame, nT) satisfies `|W (b − c − k τ)| = R`, with
//! c the hard iron (nT), W the symmetric positive-definite soft-iron correction, and,
//! when the temperature spans enough, k a bias slope per degree (nT/°C) with
//! τ = T − T̄ (°C). The residual `rᵢ = |W (bᵢ − c − k τᵢ)| − R` is minimised by our
//! Levenberg–Marquardt solver ([`super::lm`]); the temperature term follows the spirit of
//! Springmann & Cutler (2012), who fit current-dependent bias the same way.
//!
//! Parameters, in order: c₀ c₁ c₂ | W₀₀ W₁₁ W₂₂ W₀₁ W₀₂ W₁₂ | k₀ k₁ k₂ (the last three
//! only with temperature).
//!
//! Robustness: iteratively reweighted least squares with Tukey's biweight
//! (c = 4.685 σ̂, σ̂ = 1.4826 × median absolute deviation; 95 % efficient for Gaussian
//! noise); samples with zero weight (|r| > 4.685 σ̂, e.g. torque-rod firings) are counted
//! as rejected. Covariance: Huber's (1981) M-estimator form
//! `Σψ²/(n−p) / (mean ψ′)² · (JᵀJ)⁻¹` over the kept samples, which reduces to the usual
//! `s² (JᵀJ)⁻¹` without reweighting.
//!
//! The normal equations are accumulated in one pass over the samples (in parallel
//! chunks for large logs); the N×p Jacobian is never built except through the argmin
//! `Jacobian` impl, which exists for tests and small problems.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use nalgebra::{DMatrix, DVector, Matrix3, Vector3};

use super::coverage::DirectionSpread;
use super::ellipsoid::{fit_ellipsoid, EllipsoidFit};
use super::lm::{LeastSquaresProblem, LmTermination};
pub use super::robust::{robust_sigma, tukey_weight};
use super::samples::FieldSamples;
use super::FitError;

mod check;
mod finish;
mod irls;
mod lanes;
mod large;
mod problem;
pub use check::{check_tumble_data, MIN_SAMPLES};
use finish::{finish, FinishInfo};
use irls::{irls, Irls};
pub use problem::{sym_from_params, TumbleProblem};

/// Index pairs of the 6 unique elements of the symmetric W, in parameter order.
pub const SYM_INDEX: [(usize, usize); 6] = [(0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2)];
/// Tukey biweight tuning constant (95 % Gaussian efficiency).
pub const TUKEY_C: f64 = 4.685;

/// Robust reweighting choice.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Robust {
    /// Tukey biweight IRLS; gross outliers get zero weight and are counted.
    #[default]
    Tukey,
    /// Plain least squares (every sample weight 1).
    Off,
}

/// Result of [`fit_tumble`].
#[derive(Debug, Clone)]
pub struct TumbleFit {
    /// Hard iron c, sensor frame (S), nT (at the mean temperature when a slope is fitted).
    pub hard_iron_nt: Vector3<f64>,
    /// Soft-iron correction W (symmetric positive definite), sensor frame, dimensionless.
    pub soft_iron: Matrix3<f64>,
    /// Bias slope k, sensor frame, nT/°C, when temperature was given.
    pub temp_slope_nt_per_c: Option<Vector3<f64>>,
    /// 1σ of the bias slope, nT/°C.
    pub temp_slope_sigma_nt_per_c: Option<Vector3<f64>>,
    /// Reference magnitude R used, nT.
    pub reference_nt: f64,
    /// 1σ of the hard iron per axis, nT.
    pub hard_iron_sigma_nt: Vector3<f64>,
    /// Covariance of all parameters (order as in the module doc).
    pub covariance: DMatrix<f64>,
    /// RMS of the magnitude residual over the kept samples, nT.
    pub residual_rms_nt: f64,
    /// Magnitude residual of every sample (kept or not), nT.
    pub residuals_nt: Vec<f64>,
    /// Final robust weight of every sample (0 = rejected).
    pub weights: Vec<f64>,
    /// Samples with non-zero weight.
    pub samples_used: usize,
    /// Samples given zero weight by the robust fit.
    pub samples_rejected: usize,
    /// Robust scale estimate σ̂ (1.4826 × MAD of the residuals), nT.
    pub robust_sigma_nt: f64,
    /// LM iterations summed over all reweighting rounds.
    pub iterations: u64,
    /// Reweighting rounds done.
    pub irls_rounds: usize,
    /// True when the weights stopped changing before the round limit.
    pub irls_converged: bool,
    /// Every solve that did not end in convergence (empty when all converged).
    pub solver_problems: Vec<LmTermination>,
    /// Spread of the corrected directions W (b − hard iron − slope τ) of the kept
    /// samples, when the fit found it on the way (the one-pass route of long logs sums
    /// it in its last pass); `None` otherwise. Equal to
    /// [`crate::fit::coverage::direction_spread_mapped`] of the same samples up to
    /// rounding.
    pub kept_direction_spread: Option<DirectionSpread>,
}

/// Options of [`fit_tumble`].
#[derive(Debug, Clone, Copy)]
pub struct TumbleOptions {
    /// Reference magnitude R, nT; `None` fixes the scale from the algebraic fit so that
    /// det W = 1 (the result is then unanchored).
    pub reference_nt: Option<f64>,
    /// Robust reweighting.
    pub robust: Robust,
    /// Iteration limit of each Levenberg–Marquardt solve (default 200).
    pub max_iterations: u64,
}

impl Default for TumbleOptions {
    fn default() -> Self {
        TumbleOptions {
            reference_nt: None,
            robust: Robust::Tukey,
            max_iterations: 200,
        }
    }
}

/// Logs at least this long are first fitted on a decimated subsample.
const SEED_MIN_SAMPLES: usize = 100_000;
/// Size of that subsample (about).
const SEED_SAMPLES: usize = 10_000;

/// Fit hard iron, soft iron (and a temperature slope when `temp_c` is given) to tumble
/// samples (sensor frame, nT): a slice of 3-vectors or a log's field columns read in
/// place ([`FieldSamples`]). `temp_c`, if given, has one value per sample (°C).
pub fn fit_tumble<S: FieldSamples + ?Sized>(
    samples_nt: &S,
    temp_c: Option<&[f64]>,
    opts: &TumbleOptions,
) -> Result<TumbleFit, FitError> {
    let n = samples_nt.len();
    check_tumble_data(samples_nt)?;
    // With a given reference on a long log the algebraic fit only seeds the subsample
    // rounds below, so it runs on that subsample; without one it fixes the scale R and
    // uses every sample.
    let long_robust = opts.robust == Robust::Tukey && n >= SEED_MIN_SAMPLES;
    // The evenly decimated subsample of a long log (the seed and the first rounds).
    let stride = (n / SEED_SAMPLES).max(1);
    let sub: Vec<Vector3<f64>> = if long_robust {
        (0..n).step_by(stride).map(|i| samples_nt.at(i)).collect()
    } else {
        Vec::new()
    };
    let ell = if long_robust && opts.reference_nt.is_some() {
        fit_ellipsoid(&sub)?
    } else {
        fit_ellipsoid(samples_nt)?
    };
    let r = reference_magnitude_nt(&ell, opts)?;
    let tdev = temperature_deviation_c(temp_c, n)?;
    let mut p = initial_params(&ell, r, tdev.is_some());
    let mut st = Irls::new(opts.robust == Robust::Off);
    // Robust scale of the subsample rounds (0 when they did not run or found none).
    let mut seed_sigma = 0.0;
    if long_robust {
        // Large log: run the reweighting on an evenly decimated subsample first, then
        // reach the same fixed point on all samples with one-pass Newton iterations
        // (`large`), or, if those do not settle, with the damped rounds started from
        // the subsample's parameters and weights.
        let sub_t: Option<Vec<f64>> = tdev
            .as_ref()
            .map(|t| t.iter().step_by(stride).copied().collect());
        let mut seed = Irls::new(false);
        let mut sub_w = vec![1.0; sub.len()];
        p = irls(&sub, sub_t.as_deref(), r, p, &mut sub_w, opts, &mut seed)?.0;
        st.iterations += seed.iterations;
        seed_sigma = seed.sigma;
        if seed.sigma > 0.0 {
            if let Some(s) =
                large::newton_passes(samples_nt, tdev.as_deref(), r, p.clone(), seed.sigma)
            {
                return finish_one_pass(s, r, opts, st);
            }
        }
    }
    damped_fit(samples_nt, tdev.as_deref(), r, p, seed_sigma, opts, st)
}

/// The reference magnitude R, nT: the one given, else the scale of the algebraic fit
/// (det W = 1).
fn reference_magnitude_nt(ell: &EllipsoidFit, opts: &TumbleOptions) -> Result<f64, FitError> {
    let det = ell.shape_per_nt.determinant();
    match opts.reference_nt {
        Some(r) if r.is_finite() && r > 0.0 => Ok(r),
        Some(r) => Err(FitError::Degenerate(format!(
            "reference {r} nT is not positive"
        ))),
        None => Ok(det.powf(-1.0 / 3.0)),
    }
}

/// Temperatures about their mean, τ = T − T̄ (°C), one per sample of `n`.
fn temperature_deviation_c(temp_c: Option<&[f64]>, n: usize) -> Result<Option<Vec<f64>>, FitError> {
    let tdev: Option<Vec<f64>> = temp_c.map(|t| {
        let mean = t.iter().sum::<f64>() / t.len().max(1) as f64;
        t.iter().map(|x| x - mean).collect()
    });
    if let Some(t) = &tdev {
        if t.len() != n {
            return Err(FitError::Degenerate(format!(
                "{} temperatures for {n} samples",
                t.len()
            )));
        }
    }
    Ok(tdev)
}

/// Starting parameters from the algebraic fit scaled to R = `r` nT (the temperature
/// slope, when fitted, starts at zero).
fn initial_params(ell: &EllipsoidFit, r: f64, with_temp: bool) -> DVector<f64> {
    let w0 = ell.shape_per_nt * r;
    let mut p = DVector::zeros(if with_temp { 12 } else { 9 });
    for a in 0..3 {
        p[a] = ell.centre_nt[a];
    }
    for (m, &(i, j)) in SYM_INDEX.iter().enumerate() {
        p[3 + m] = w0[(i, j)];
    }
    p
}

/// The fit from the one-pass Newton route of a long log.
fn finish_one_pass(
    s: large::Settled,
    r: f64,
    opts: &TumbleOptions,
    st: Irls,
) -> Result<TumbleFit, FitError> {
    finish(
        s.p,
        s.weights,
        s.sigma_nt,
        s.residuals_nt,
        s.jtj_kept,
        FinishInfo {
            reference_nt: r,
            kept_direction_spread: s.kept_direction_spread,
            robust: opts.robust,
            iterations: st.iterations + s.passes as u64,
            rounds: s.passes,
            irls_converged: true,
            solver_problems: st.solver_problems,
        },
    )
}

/// The damped reweighting rounds on every sample from parameters `p`; their weights
/// start from the subsample's robust scale `seed_sigma` (nT) when that is positive.
fn damped_fit<S: FieldSamples + ?Sized>(
    samples_nt: &S,
    tdev: Option<&[f64]>,
    r: f64,
    p: DVector<f64>,
    seed_sigma: f64,
    opts: &TumbleOptions,
    mut st: Irls,
) -> Result<TumbleFit, FitError> {
    let n = samples_nt.len();
    // The damped rounds run on one slice of 3-vectors (copied only when the samples
    // came as columns and the one-pass route did not answer).
    let owned;
    let samples_nt: &[Vector3<f64>] = match samples_nt.as_slice() {
        Some(v) => v,
        None => {
            owned = samples_nt.to_vec();
            &owned
        }
    };
    let problem = TumbleProblem {
        samples_nt,
        temp_dev_c: tdev,
        weights: None,
        reference_nt: r,
    };
    // The one-pass iterations did not settle: the damped rounds, from the seed.
    let mut weights = if seed_sigma > 0.0 {
        seed_weights(&problem, &p, r)
    } else {
        Vec::new()
    };
    if weights.len() != n {
        weights = vec![1.0; n];
    }
    let (p, res) = irls(samples_nt, tdev, r, p, &mut weights, opts, &mut st)?;
    let residuals_nt = match res {
        Some(res) => res,
        None => problem.residuals(&p),
    };
    // Unweighted JᵀJ of the kept samples, for the covariance.
    let kept: Vec<f64> = weights
        .iter()
        .map(|&w| if w > 0.0 { 1.0 } else { 0.0 })
        .collect();
    let jtj_kept = TumbleProblem {
        weights: Some(&kept),
        ..problem
    }
    .normal_equations(&p)
    .map_err(|e| FitError::Solver(e.to_string()))?
    .jtj;
    finish(
        p,
        weights,
        st.sigma,
        residuals_nt,
        jtj_kept,
        FinishInfo {
            reference_nt: r,
            kept_direction_spread: None,
            robust: opts.robust,
            iterations: st.iterations,
            rounds: st.rounds,
            irls_converged: st.converged,
            solver_problems: st.solver_problems,
        },
    )
}

/// Tukey weights of every sample at the subsample's parameters `p`, from the robust
/// scale of their residuals; empty when that scale is below 1e-9 of R = `r` nT.
fn seed_weights(problem: &TumbleProblem<'_>, p: &DVector<f64>, r: f64) -> Vec<f64> {
    let res = problem.residuals(p);
    let sigma = robust_sigma(&res);
    if sigma > 1e-9 * r {
        res.iter()
            .map(|r| tukey_weight(*r / (TUKEY_C * sigma)))
            .collect()
    } else {
        Vec::new()
    }
}

#[cfg(test)]
mod tests;
