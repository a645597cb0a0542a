//! The full-data rounds of a robust tumble fit on a long log: Newton iterations on the
//! Tukey M-estimate with one pass over the samples per iteration.
//!
//! After the decimated-subsample seed (see [`super::fit_tumble`]) the parameters are
//! already within a few standard errors of the answer. Each pass here, at the current
//! parameters p and robust scale σ̂:
//!
//! 1. computes every residual rᵢ and stores it, gives the sample its Tukey weight
//!    wᵢ = (1 − uᵢ²)² with uᵢ = rᵢ / (4.685 σ̂), and sums the gradient g = Σ wᵢ rᵢ Jᵢ and
//!    the Gauss–Newton Hessian of the biweight objective H = Σ ψ′(uᵢ) JᵢᵀJᵢ with
//!    ψ′(u) = (1 − u²)(1 − 5u²), the slope of ψ(r) = w r (and, on a pass that may be
//!    the last, the unweighted JᵀJ of the kept samples that the covariance needs);
//! 2. then takes the new scale σ̂′ = 1.4826 × MAD of the stored residuals and the
//!    Newton step δ = −H⁻¹ g.
//!
//! It stops when the step is below [`STEP_TOL`] of the parameters' standard error
//! (√(δᵀHδ / s²), s² = Σwr²/(n − p)) and σ̂ moved by less than a relative
//! [`SCALE_TOL`]. Where the gradient vanishes with the weights and σ̂ of the residuals
//! at p is the fixed point of the damped reweighting rounds of [`super::irls`] — the
//! same estimate. The rounds (weights held fixed while a Levenberg–Marquardt solve
//! runs, the Hessian Σ wᵢ JᵢᵀJᵢ) close in on it linearly, at about a fifth of the
//! distance a round on tumble data, and each round costs two normal-equation passes,
//! a trial-cost pass and a residual pass; Newton's step with ψ′ closes in
//! quadratically, so from the seed two passes usually suffice (measured on the 10⁶
//! sample benchmark log: a step of 14.7 σ, then 0.003 σ). The answer is the point p
//! of the last pass, so the stored residuals, weights, σ̂ and JᵀJ all belong to the
//! parameters returned.
//!
//! ψ′ is negative for |u| > 1/√5, so H need not be positive definite on badly
//! contaminated data: if its Cholesky factorisation fails, or the passes have not
//! settled within [`MAX_PASSES`], this gives up and the caller runs the damped rounds
//! from the seed as before.

// `!(x > 0.0)` is deliberate: it also rejects NaN. Index loops mirror the maths.
#![allow(clippy::neg_cmp_op_on_partial_ord, clippy::needless_range_loop)]

use nalgebra::{DMatrix, DVector, Matrix3, Vector3};
use rayon::prelude::*;

use super::problem::{jacobian_row, CHUNK, MAX_P};
use super::{sym_from_params, tukey_weight, TUKEY_C};
use crate::fit::robust::median_and_sigma_near;
use crate::fit::samples::FieldSamples;

/// Stop when the step is below this fraction of the parameters' standard error.
pub(super) const STEP_TOL: f64 = 1e-2;
/// ... and the robust scale changed by less than this, relative.
pub(super) const SCALE_TOL: f64 = 1e-3;
/// Give up (and fall back to the damped rounds) after this many passes.
pub(super) const MAX_PASSES: usize = 12;

/// Where the passes settled.
#[derive(Debug)]
pub(super) struct Settled {
    /// Parameters (order as in [`super`]).
    pub p: DVector<f64>,
    /// Residual of every sample at `p`, nT.
    pub residuals_nt: Vec<f64>,
    /// Tukey weight of every sample at `p` and `sigma_nt`.
    pub weights: Vec<f64>,
    /// Robust scale the weights were computed with, nT.
    pub sigma_nt: f64,
    /// Unweighted JᵀJ over the samples with non-zero weight, at `p`.
    pub jtj_kept: DMatrix<f64>,
    /// Passes done.
    pub passes: usize,
}

/// Run the passes from `p0` (parameters) and `sigma0_nt` (robust scale, > 0).
/// `None` when they did not settle; the caller then falls back.
pub(super) fn newton_passes<S: FieldSamples + ?Sized>(
    samples_nt: &S,
    temp_dev_c: Option<&[f64]>,
    reference_nt: f64,
    p0: DVector<f64>,
    sigma0_nt: f64,
) -> Option<Settled> {
    let n = samples_nt.len();
    let np = p0.len();
    if !(sigma0_nt > 0.0) || temp_dev_c.is_some_and(|t| t.len() != n) {
        return None;
    }
    let mut p = p0;
    let mut sigma = sigma0_nt;
    let mut residuals = vec![0.0; n];
    let mut weights = vec![0.0; n];
    // The residuals' median, for the bracket of the next scale estimate.
    let mut median = 0.0;
    // Cholesky factor of the Newton matrix H, kept while the steps are small.
    let mut newton: Option<nalgebra::Cholesky<f64, nalgebra::Dyn>> = None;
    // Squared length of the previous step, in standard errors.
    let mut last_step2 = f64::INFINITY;
    for pass in 1..=MAX_PASSES {
        // H is summed on the first pass; later passes take chord steps with it (the
        // weights ψ′ move by about 1 % over a step of 15 standard errors) and sum the
        // kept samples' JᵀJ instead, since each is likely the last. H is summed again
        // only if a step did not shrink the one before by at least half its length.
        let want = Want {
            newton: newton.is_none(),
            kept: pass > 1,
        };
        let ctx = PassCtx::new(samples_nt, temp_dev_c, reference_nt, &p, sigma);
        let acc = if np == 12 {
            ctx.run::<12>(&mut residuals, &mut weights, want)
        } else {
            ctx.run::<9>(&mut residuals, &mut weights, want)
        };
        let (med, new_sigma) = median_and_sigma_near(&residuals, median, sigma);
        median = med;
        if acc.count <= np || !(new_sigma > 0.0) {
            return None;
        }
        if want.newton {
            newton = Some(acc.symmetric(&acc.hessian, np).cholesky()?);
        }
        let chol = newton.as_ref()?;
        let gradient = DVector::from_column_slice(&acc.gradient[..np]);
        let delta = -chol.solve(&gradient);
        let s2 = acc.sum_sq_w / (acc.count - np) as f64;
        let step2 = -gradient.dot(&delta) / s2;
        let scale_change = (new_sigma - sigma).abs() / sigma;
        if !(step2.is_finite() && delta.iter().all(|x| x.is_finite())) {
            return None;
        }
        let settled = step2 <= STEP_TOL * STEP_TOL && scale_change <= SCALE_TOL;
        if settled && want.kept {
            return Some(Settled {
                jtj_kept: acc.symmetric(&acc.jtj_kept, np),
                p,
                residuals_nt: residuals,
                weights,
                sigma_nt: sigma,
                passes: pass,
            });
        }
        if step2 > 0.25 * last_step2 {
            newton = None;
        }
        last_step2 = step2;
        p += delta;
        sigma = new_sigma;
    }
    None
}

/// What a pass sums besides the gradient.
#[derive(Clone, Copy)]
struct Want {
    /// The Newton matrix H = Σ ψ′ JᵀJ.
    newton: bool,
    /// The kept samples' unweighted JᵀJ.
    kept: bool,
}

/// One pass's fixed inputs.
struct PassCtx<'a, S: ?Sized> {
    samples_nt: &'a S,
    temp_dev_c: Option<&'a [f64]>,
    reference_nt: f64,
    c: Vector3<f64>,
    w: Matrix3<f64>,
    k: Vector3<f64>,
    /// 1 / (Tukey c · σ̂), 1/nT.
    inv_scale: f64,
}

/// Sums of one pass (upper triangles only).
#[derive(Clone, Copy)]
struct PassAcc {
    hessian: [[f64; MAX_P]; MAX_P],
    gradient: [f64; MAX_P],
    sum_sq_w: f64,
    jtj_kept: [[f64; MAX_P]; MAX_P],
    count: usize,
}

impl Default for PassAcc {
    fn default() -> Self {
        PassAcc {
            hessian: [[0.0; MAX_P]; MAX_P],
            gradient: [0.0; MAX_P],
            sum_sq_w: 0.0,
            jtj_kept: [[0.0; MAX_P]; MAX_P],
            count: 0,
        }
    }
}

impl PassAcc {
    fn add(mut self, o: PassAcc) -> PassAcc {
        for a in 0..MAX_P {
            self.gradient[a] += o.gradient[a];
            for b in 0..MAX_P {
                self.hessian[a][b] += o.hessian[a][b];
                self.jtj_kept[a][b] += o.jtj_kept[a][b];
            }
        }
        self.sum_sq_w += o.sum_sq_w;
        self.count += o.count;
        self
    }

    /// The full symmetric matrix from an upper triangle.
    fn symmetric(&self, upper: &[[f64; MAX_P]; MAX_P], np: usize) -> DMatrix<f64> {
        DMatrix::from_fn(np, np, |a, b| upper[a.min(b)][a.max(b)])
    }
}

impl<'a, S: FieldSamples + ?Sized> PassCtx<'a, S> {
    fn new(
        samples_nt: &'a S,
        temp_dev_c: Option<&'a [f64]>,
        reference_nt: f64,
        p: &DVector<f64>,
        sigma_nt: f64,
    ) -> Self {
        PassCtx {
            samples_nt,
            temp_dev_c,
            reference_nt,
            c: Vector3::new(p[0], p[1], p[2]),
            w: sym_from_params(&p.as_slice()[3..9]),
            k: if p.len() >= 12 {
                Vector3::new(p[9], p[10], p[11])
            } else {
                Vector3::zeros()
            },
            inv_scale: 1.0 / (TUKEY_C * sigma_nt),
        }
    }

    /// The pass over every sample, in parallel chunks; fills `residuals` and `weights`.
    fn run<const NP: usize>(
        &self,
        residuals: &mut [f64],
        weights: &mut [f64],
        want: Want,
    ) -> PassAcc {
        let chunk = |lo: usize, res: &mut [f64], wts: &mut [f64]| match (want.newton, want.kept) {
            (true, true) => self.chunk::<NP, true, true>(lo, res, wts),
            (true, false) => self.chunk::<NP, true, false>(lo, res, wts),
            (false, true) => self.chunk::<NP, false, true>(lo, res, wts),
            (false, false) => self.chunk::<NP, false, false>(lo, res, wts),
        };
        if residuals.len() > 4 * CHUNK {
            residuals
                .par_chunks_mut(CHUNK)
                .zip(weights.par_chunks_mut(CHUNK))
                .enumerate()
                .map(|(ch, (res, wts))| chunk(ch * CHUNK, res, wts))
                .reduce(PassAcc::default, PassAcc::add)
        } else {
            chunk(0, residuals, weights)
        }
    }

    /// Samples `lo .. lo + res.len()`.
    #[inline(always)]
    fn chunk<const NP: usize, const NEWTON: bool, const KEPT: bool>(
        &self,
        lo: usize,
        res: &mut [f64],
        wts: &mut [f64],
    ) -> PassAcc {
        let mut acc = PassAcc::default();
        let mut jtj = [[0.0; NP]; NP];
        let mut jtj_kept = [[0.0; NP]; NP];
        let mut jtr = [0.0; NP];
        let mut j = [0.0; MAX_P];
        let hi = lo + res.len();
        let taus = self.temp_dev_c.and_then(|t| t.get(lo..hi));
        for (i, (ri, wi)) in res.iter_mut().zip(wts.iter_mut()).enumerate() {
            let bi = self.samples_nt.at(lo + i);
            let tau = if NP == 12 {
                taus.map_or(0.0, |t| t[i])
            } else {
                0.0
            };
            let r = jacobian_row(&bi, tau, &self.c, &self.w, &self.k, &mut j) - self.reference_nt;
            *ri = r;
            let u = r * self.inv_scale;
            let wt = tukey_weight(u);
            *wi = wt;
            if !(wt > 0.0) {
                continue;
            }
            // ψ(r) = w r; its slope dψ/dr = (1 − u²)(1 − 5u²) weights the Newton matrix.
            let slope = (1.0 - u * u) * (1.0 - 5.0 * u * u);
            acc.sum_sq_w += wt * r * r;
            acc.count += 1;
            let wr = wt * r;
            for a in 0..NP {
                jtr[a] += wr * j[a];
            }
            if NEWTON {
                for a in 0..NP {
                    let hja = slope * j[a];
                    for bb in a..NP {
                        jtj[a][bb] += hja * j[bb];
                    }
                }
            }
            if KEPT {
                for a in 0..NP {
                    for bb in a..NP {
                        jtj_kept[a][bb] += j[a] * j[bb];
                    }
                }
            }
        }
        for a in 0..NP {
            acc.gradient[a] = jtr[a];
            acc.hessian[a][..NP].copy_from_slice(&jtj[a]);
            acc.jtj_kept[a][..NP].copy_from_slice(&jtj_kept[a]);
        }
        acc
    }
}
