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

use super::lanes::{
    gradient_block, triangle_block, LaneTriangle, Mask2, Rows, BLOCK, GROUPS, L2, LANES,
};
use super::problem::{CHUNK, MAX_P};
use super::{sym_from_params, TUKEY_C};
use crate::fit::coverage::{DirectionSpread, DirectionSums};
use crate::fit::robust::median_and_sigma_near;
use crate::fit::samples::FieldSamples;

mod spread;
use spread::SpreadLanes;

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
    /// Spread of the corrected directions W (b − c − k τ) of the samples with non-zero
    /// weight, at `p` (see [`crate::fit::coverage`]).
    pub kept_direction_spread: Option<DirectionSpread>,
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
                kept_direction_spread: acc.spread.finish(),
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
    /// The kept samples' unweighted JᵀJ, and the spread of their corrected directions.
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
    /// Directions W (b − c − k τ) / |…| of the kept samples (with `Want::kept`).
    spread: DirectionSums,
}

impl Default for PassAcc {
    fn default() -> Self {
        PassAcc {
            hessian: [[0.0; MAX_P]; MAX_P],
            gradient: [0.0; MAX_P],
            sum_sq_w: 0.0,
            jtj_kept: [[0.0; MAX_P]; MAX_P],
            count: 0,
            spread: DirectionSums::default(),
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
        self.spread = self.spread.merge(o.spread);
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

    /// Samples `lo .. lo + res.len()`, in blocks of [`BLOCK`]: the Jacobian rows of a
    /// block go into per-parameter arrays first (zero for a dropped sample and for the
    /// padding after a short last block), then the triangles are summed tile by tile
    /// (see [`triangle_block`]), so each loaded value feeds several products and the partial sums
    /// stay in registers. Only the order of the additions differs from a per-sample sum.
    #[inline(always)]
    fn chunk<const NP: usize, const NEWTON: bool, const KEPT: bool>(
        &self,
        lo: usize,
        res: &mut [f64],
        wts: &mut [f64],
    ) -> PassAcc {
        let mut acc = PassAcc::default();
        let mut jtj: LaneTriangle<NP> = [[[0.0; LANES]; NP]; NP];
        let mut jtj_kept: LaneTriangle<NP> = [[[0.0; LANES]; NP]; NP];
        let mut jtr = [[0.0; LANES]; NP];
        // Per block: J of the kept samples, slope × J, and w r, by parameter then sample.
        let mut jb: Rows<NP> = [[[0.0; LANES]; GROUPS]; NP];
        let mut sjb: Rows<NP> = [[[0.0; LANES]; GROUPS]; NP];
        let mut wrb = [[0.0; LANES]; GROUPS];
        // With KEPT: sums of the kept samples' corrected directions v̂.
        let mut spread = SpreadLanes::default();
        let hi = lo + res.len();
        let taus = self.temp_dev_c.and_then(|t| t.get(lo..hi));
        let blocks = res.chunks_mut(BLOCK).zip(wts.chunks_mut(BLOCK));
        let mut sum_sq_w = [0.0; LANES];
        let mut count = 0;
        for (blk, (rs, ws)) in blocks.enumerate() {
            let ts = taus.and_then(|t| t.get(blk * BLOCK..blk * BLOCK + rs.len()));
            count += self.block_rows::<NP, NEWTON, KEPT>(
                lo + blk * BLOCK,
                ts,
                rs,
                ws,
                &mut jb,
                &mut sjb,
                &mut wrb,
                &mut spread,
                &mut sum_sq_w,
            );
            gradient_block(&jb, &wrb, &mut jtr);
            if NEWTON {
                triangle_block(&sjb, &jb, &mut jtj);
            }
            if KEPT {
                triangle_block(&jb, &jb, &mut jtj_kept);
            }
        }
        acc.sum_sq_w = sum_sq_w[0] + sum_sq_w[1];
        acc.count = count;
        acc.spread = spread.sums();
        for a in 0..NP {
            acc.gradient[a] = jtr[a][0] + jtr[a][1];
            for b in a..NP {
                acc.hessian[a][b] = jtj[a][b][0] + jtj[a][b][1];
                acc.jtj_kept[a][b] = jtj_kept[a][b][0] + jtj_kept[a][b][1];
            }
        }
        acc
    }

    /// One block, samples `first ..` (as many as `rs` holds): residuals and weights
    /// (into `rs`, `ws`) and, lane by lane, its rows: J of the kept samples into `jb`,
    /// ψ′ × J into `sjb` (if NEWTON), w r into `wrb`, zero for a dropped sample and
    /// past the end of a short block; with KEPT, the corrected direction v̂ of each kept
    /// sample added to `spread`. Adds Σ w r² to `sum_sq_w` and returns the number kept. The arithmetic is that of
    /// [`jacobian_row`], written out over the samples of a lane group so that two
    /// samples share each SSE2 operation (square root and divisions included).
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn block_rows<const NP: usize, const NEWTON: bool, const KEPT: bool>(
        &self,
        first: usize,
        ts: Option<&[f64]>,
        rs: &mut [f64],
        ws: &mut [f64],
        jb: &mut Rows<NP>,
        sjb: &mut Rows<NP>,
        wrb: &mut [[f64; LANES]; GROUPS],
        spread: &mut SpreadLanes,
        sum_sq_w: &mut [f64; LANES],
    ) -> usize {
        let len = rs.len();
        let (d, tau) = self.block_offsets::<NP>(first, len, ts);
        let w = &self.w;
        let zero = L2::splat(0.0);
        let one = L2::splat(1.0);
        let mut r_out = [[0.0; LANES]; GROUPS];
        let mut w_out = [[0.0; LANES]; GROUPS];
        let mut kept = [[false; LANES]; GROUPS];
        let mut ssw = zero;
        for g in 0..GROUPS {
            let dv = [L2(d[0][g]), L2(d[1][g]), L2(d[2][g])];
            let mut v = [zero; 3];
            for i in 0..3 {
                v[i] = L2::splat(w[(i, 0)]) * dv[0]
                    + L2::splat(w[(i, 1)]) * dv[1]
                    + L2::splat(w[(i, 2)]) * dv[2];
            }
            let n = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
            // v̂ = v / n, 0 where n = 0 (then v = 0, and 0 / 1 = 0); dividing by a
            // selected denominator keeps the divisions unconditional. A NaN n gives a
            // NaN row (not 0 as in `jacobian_row`), but such a sample has weight 0 and
            // its row is masked out below.
            let den = L2::select(n.gt(zero), n, one);
            let vh = [v[0] / den, v[1] / den, v[2] / den];
            // W symmetric: ∂n/∂d = (W v̂)ᵀ.
            let mut wv = [zero; 3];
            for i in 0..3 {
                wv[i] = L2::splat(w[(i, 0)]) * vh[0]
                    + L2::splat(w[(i, 1)]) * vh[1]
                    + L2::splat(w[(i, 2)]) * vh[2];
            }
            let r = n - L2::splat(self.reference_nt);
            let u = r * L2::splat(self.inv_scale);
            let one_u2 = one - u * u;
            let wt = L2::select(u.abs().lt(one), one_u2 * one_u2, zero);
            let in_block = Mask2([
                if g * LANES < len { !0 } else { 0 },
                if g * LANES + 1 < len { !0 } else { 0 },
            ]);
            let keep = wt.gt(zero).and(in_block);
            // ψ(r) = w r; its slope dψ/dr = (1 − u²)(1 − 5u²) weights the Newton matrix.
            let slope = L2::select(keep, one_u2 * (one - L2::splat(5.0) * u * u), zero);
            r_out[g] = r.0;
            w_out[g] = wt.0;
            kept[g] = [keep.0[0] != 0, keep.0[1] != 0];
            let wr = L2::select(keep, wt * r, zero);
            wrb[g] = wr.0;
            ssw = ssw + L2::select(keep, wr * r, zero);
            let t = L2(tau[g]);
            let j = lane_jacobian(vh, dv, wv, t);
            if KEPT {
                // v̂ = 0 (n = 0) has no direction and is not counted.
                spread.add(keep.and(n.gt(zero)), vh);
            }
            // Selects, not products: a dropped sample's row may hold NaN.
            for a in 0..NP {
                let ja = L2::select(keep, j[a], zero);
                jb[a][g] = ja.0;
                if NEWTON {
                    sjb[a][g] = (slope * ja).0;
                }
            }
        }
        sum_sq_w[0] += ssw.0[0];
        sum_sq_w[1] += ssw.0[1];
        write_back(rs, ws, &r_out, &w_out, &kept)
    }

    /// d = b − c − k τ per axis (nT) and τ (°C) of the `len` samples from `first`, laid
    /// out by lane group; zero past the end of the block.
    #[inline(always)]
    #[allow(clippy::type_complexity)]
    fn block_offsets<const NP: usize>(
        &self,
        first: usize,
        len: usize,
        ts: Option<&[f64]>,
    ) -> ([[[f64; LANES]; GROUPS]; 3], [[f64; LANES]; GROUPS]) {
        // d = b − c − k τ per axis; zero past the end of the block.
        let mut d = [[[0.0; LANES]; GROUPS]; 3];
        let mut tau = [[0.0; LANES]; GROUPS];
        for kk in 0..len {
            let bi = self.samples_nt.at(first + kk);
            let (g, l) = (kk / LANES, kk % LANES);
            let t = if NP == 12 {
                ts.and_then(|t| t.get(kk)).copied().unwrap_or(0.0)
            } else {
                0.0
            };
            tau[g][l] = t;
            for i in 0..3 {
                d[i][g][l] = bi[i] - self.c[i] - self.k[i] * t;
            }
        }
        (d, tau)
    }
}

/// The Jacobian row of two samples at once: ∂r/∂c = −W v̂, ∂r/∂W from v̂ and d, and
/// ∂r/∂k = −W v̂ τ (the last three used only with temperature).
#[inline(always)]
fn lane_jacobian(vh: [L2; 3], dv: [L2; 3], wv: [L2; 3], t: L2) -> [L2; MAX_P] {
    let zero = L2::splat(0.0);
    let mut j = [zero; MAX_P];
    for i in 0..3 {
        j[i] = zero - wv[i];
        j[9 + i] = (zero - wv[i]) * t;
    }
    j[3] = vh[0] * dv[0];
    j[4] = vh[1] * dv[1];
    j[5] = vh[2] * dv[2];
    j[6] = vh[0] * dv[1] + vh[1] * dv[0];
    j[7] = vh[0] * dv[2] + vh[2] * dv[0];
    j[8] = vh[1] * dv[2] + vh[2] * dv[1];
    j
}

/// Store the block's residuals (nT) and weights; returns the number kept.
#[inline(always)]
fn write_back(
    rs: &mut [f64],
    ws: &mut [f64],
    r_out: &[[f64; LANES]; GROUPS],
    w_out: &[[f64; LANES]; GROUPS],
    kept: &[[bool; LANES]; GROUPS],
) -> usize {
    let mut count = 0;
    for (kk, (ri, wi)) in rs.iter_mut().zip(ws.iter_mut()).enumerate() {
        let (g, l) = (kk / LANES, kk % LANES);
        *ri = r_out[g][l];
        *wi = w_out[g][l];
        count += kept[g][l] as usize;
    }
    count
}

#[cfg(test)]
mod tests;
