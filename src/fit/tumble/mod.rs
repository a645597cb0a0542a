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
//! only with temperature). This matches `/work/shared/bench`'s reference layout.
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
use rayon::prelude::*;

use super::coverage::DirectionSpread;
use super::ellipsoid::fit_ellipsoid;
use super::lm::{solve, LeastSquaresProblem, LmTermination};
pub use super::robust::{robust_sigma, tukey_weight};
use super::samples::FieldSamples;
use super::FitError;

mod lanes;
mod large;
mod problem;
use problem::CHUNK;
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

const MAX_ROUNDS: usize = 20;
/// Reweighting stops when no weight changes by more than this between rounds.
const WEIGHT_TOL: f64 = 2e-3;

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
    let det = ell.shape_per_nt.determinant();
    let r = match opts.reference_nt {
        Some(r) if r.is_finite() && r > 0.0 => r,
        Some(r) => {
            return Err(FitError::Degenerate(format!(
                "reference {r} nT is not positive"
            )))
        }
        None => det.powf(-1.0 / 3.0),
    };
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
    let w0 = ell.shape_per_nt * r;
    let mut p = DVector::zeros(if tdev.is_some() { 12 } else { 9 });
    for a in 0..3 {
        p[a] = ell.centre_nt[a];
    }
    for (m, &(i, j)) in SYM_INDEX.iter().enumerate() {
        p[3 + m] = w0[(i, j)];
    }
    let mut st = Irls {
        iterations: 0,
        solver_problems: Vec::new(),
        rounds: 0,
        converged: opts.robust == Robust::Off,
        sigma: 0.0,
        weight_tol: WEIGHT_TOL,
    };
    // Filled only when the damped rounds run (the one-pass route brings its own).
    let mut weights = Vec::new();
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
        let mut seed = Irls {
            iterations: 0,
            solver_problems: Vec::new(),
            rounds: 0,
            converged: false,
            sigma: 0.0,
            weight_tol: WEIGHT_TOL,
        };
        let mut sub_w = vec![1.0; sub.len()];
        p = irls(&sub, sub_t.as_deref(), r, p, &mut sub_w, opts, &mut seed)?.0;
        st.iterations += seed.iterations;
        seed_sigma = seed.sigma;
        if seed.sigma > 0.0 {
            if let Some(s) =
                large::newton_passes(samples_nt, tdev.as_deref(), r, p.clone(), seed.sigma)
            {
                return finish(
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
                );
            }
        }
    }
    // The damped rounds run on one slice of 3-vectors (copied only when the samples
    // came as columns and the one-pass route above did not answer).
    let owned;
    let samples_nt: &[Vector3<f64>] = match samples_nt.as_slice() {
        Some(v) => v,
        None => {
            owned = samples_nt.to_vec();
            &owned
        }
    };
    if long_robust && seed_sigma > 0.0 {
        // The one-pass iterations did not settle: the damped rounds, from the seed.
        let prob = TumbleProblem {
            samples_nt,
            temp_dev_c: tdev.as_deref(),
            weights: None,
            reference_nt: r,
        };
        let res = prob.residuals(&p);
        let sigma = robust_sigma(&res);
        if sigma > 1e-9 * r {
            weights = res
                .iter()
                .map(|r| tukey_weight(*r / (TUKEY_C * sigma)))
                .collect();
        }
    }
    if weights.len() != n {
        weights = vec![1.0; n];
    }
    let (p, res) = irls(
        samples_nt,
        tdev.as_deref(),
        r,
        p,
        &mut weights,
        opts,
        &mut st,
    )?;
    let problem = TumbleProblem {
        samples_nt,
        temp_dev_c: tdev.as_deref(),
        weights: None,
        reference_nt: r,
    };
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

/// Logs at least this long are first fitted on a decimated subsample.
const SEED_MIN_SAMPLES: usize = 100_000;
/// Size of that subsample (about).
const SEED_SAMPLES: usize = 10_000;

/// Book-keeping of the reweighting rounds.
struct Irls {
    iterations: u64,
    solver_problems: Vec<LmTermination>,
    rounds: usize,
    converged: bool,
    sigma: f64,
    /// Stop when no weight changes by more than this between rounds.
    weight_tol: f64,
}

/// Solve, reweight, repeat until the weights settle. Returns the parameters and, when
/// computed at them, the residuals of every sample.
fn irls(
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

struct FinishInfo {
    /// Reference magnitude R, nT.
    reference_nt: f64,
    /// See [`TumbleFit::kept_direction_spread`].
    kept_direction_spread: Option<DirectionSpread>,
    robust: Robust,
    iterations: u64,
    rounds: usize,
    irls_converged: bool,
    solver_problems: Vec<LmTermination>,
}

/// The fit at parameters `p` with the final `weights`, robust scale `sigma` (nT), the
/// residuals there and the kept samples' unweighted JᵀJ there.
fn finish(
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
    // Σψ², Σψ′, Σr² and the count over the kept samples, in chunks on long logs.
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
    let (psi2, dpsi, rss, used) = if residuals_nt.len() > 4 * CHUNK {
        residuals_nt
            .par_chunks(CHUNK)
            .zip(weights.par_chunks(CHUNK))
            .map(|(r, w)| sums(r, w))
            .reduce(
                || (0.0, 0.0, 0.0, 0),
                |a, b| (a.0 + b.0, a.1 + b.1, a.2 + b.2, a.3 + b.3),
            )
    } else {
        sums(&residuals_nt, &weights)
    };
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

/// Samples per task of the data check's sums on long logs.
const CHECK_CHUNK: usize = 65_536;

/// Smallest number of samples a tumble fit accepts.
pub const MIN_SAMPLES: usize = 30;

/// Refuse data a tumble fit cannot use, with the reason: fewer than [`MIN_SAMPLES`],
/// constant readings, readings along one line (collinear) or in one plane (coplanar:
/// the spread across the plane is below 2 % of the spread along it, as when the vehicle
/// was turned about one axis only), naming the unobserved axis.
pub fn check_tumble_data<S: FieldSamples + ?Sized>(samples_nt: &S) -> Result<(), FitError> {
    let n = samples_nt.len();
    if n < MIN_SAMPLES {
        return Err(FitError::Degenerate(format!(
            "a tumble fit needs at least {MIN_SAMPLES} samples, found {n}"
        )));
    }
    // One pass, in parallel chunks on long logs: sums of d = b − b₀ and of d dᵀ about
    // the first sample b₀ (shifted so that the field's offset does not cancel
    // digits), then cov = Σ d dᵀ / n − d̄ d̄ᵀ.
    let origin = samples_nt.at(0);
    let (sum, sum_sq) = (0..n.div_ceil(CHECK_CHUNK))
        .into_par_iter()
        .map(|c| {
            (c * CHECK_CHUNK..((c + 1) * CHECK_CHUNK).min(n)).fold(
                (Vector3::zeros(), Matrix3::zeros()),
                |(s, ss): (Vector3<f64>, Matrix3<f64>), i| {
                    let d = samples_nt.at(i) - origin;
                    (s + d, ss + d * d.transpose())
                },
            )
        })
        .reduce(
            || (Vector3::zeros(), Matrix3::zeros()),
            |a, b| (a.0 + b.0, a.1 + b.1),
        );
    let shift = sum / n as f64;
    let mean = origin + shift;
    let cov = sum_sq / n as f64 - shift * shift.transpose();
    let eig = nalgebra::SymmetricEigen::new(cov);
    let mut idx = [0usize, 1, 2];
    idx.sort_by(|&a, &b| eig.eigenvalues[a].total_cmp(&eig.eigenvalues[b]));
    let sd = idx.map(|i| eig.eigenvalues[i].max(0.0).sqrt());
    let scale = mean.norm().max(sd[2]);
    if !(sd[2] > 1e-9 * scale.max(1.0)) {
        return Err(FitError::Degenerate(
            "the readings are constant: the sensor was not turned (or is stuck)".into(),
        ));
    }
    let axis = |k: usize| super::coverage::axis_name(&eig.eigenvectors.column(idx[k]).into_owned());
    if sd[1] < 0.02 * sd[2] {
        return Err(FitError::Degenerate(format!(
            "the readings lie along one line (along sensor {}): the field direction barely \
             changed; tumble the vehicle through all orientations",
            axis(2)
        )));
    }
    if sd[0] < 0.02 * sd[2] {
        return Err(FitError::Degenerate(format!(
            "the readings are coplanar (no spread along sensor {}): the vehicle was turned \
             about one axis only, so the hard iron along that axis cannot be found; tumble \
             it through all orientations",
            axis(0)
        )));
    }
    Ok(())
}

#[cfg(test)]
mod tests;
