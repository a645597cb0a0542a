//! The tumble fit's least-squares problem: the magnitude residual
//! `rᵢ = |W (bᵢ − c − k τᵢ)| − R` for fixed per-sample weights, its analytic Jacobian
//! (argmin `Operator` + `Jacobian`, dense, for tests and small problems) and its normal
//! equations accumulated in one pass (in parallel chunks for large logs).

// Index loops mirror the maths.
#![allow(clippy::needless_range_loop)]

use argmin::core::{Error as ArgminError, Jacobian, Operator};
use nalgebra::{DMatrix, DVector, Matrix3, Vector3};
use rayon::prelude::*;

use super::SYM_INDEX;
use crate::fit::lm::{LeastSquaresProblem, NormalEquations};

pub(super) const MAX_P: usize = 12;
pub(super) const CHUNK: usize = 16_384;

/// The magnitude-residual problem for fixed per-sample weights.
#[derive(Debug, Clone)]
pub struct TumbleProblem<'a> {
    /// Samples, sensor frame, nT.
    pub samples_nt: &'a [Vector3<f64>],
    /// Temperature minus its mean, °C, per sample (enables the 3 slope parameters).
    pub temp_dev_c: Option<&'a [f64]>,
    /// Weight per sample (0 drops a sample); `None` means all 1.
    pub weights: Option<&'a [f64]>,
    /// Reference field magnitude R, nT.
    pub reference_nt: f64,
}

/// W from the 6 unique parameters.
pub fn sym_from_params(w6: &[f64]) -> Matrix3<f64> {
    let mut w = Matrix3::zeros();
    for (k, &(i, j)) in SYM_INDEX.iter().enumerate() {
        w[(i, j)] = w6[k];
        w[(j, i)] = w6[k];
    }
    w
}

impl TumbleProblem<'_> {
    /// Number of parameters: 9, or 12 with temperature.
    pub fn num_params(&self) -> usize {
        if self.temp_dev_c.is_some() {
            12
        } else {
            9
        }
    }

    fn unpack(&self, p: &DVector<f64>) -> (Vector3<f64>, Matrix3<f64>, Vector3<f64>) {
        let c = Vector3::new(p[0], p[1], p[2]);
        let w = sym_from_params(&p.as_slice()[3..9]);
        let k = if p.len() >= 12 {
            Vector3::new(p[9], p[10], p[11])
        } else {
            Vector3::zeros()
        };
        (c, w, k)
    }

    fn tau(&self, i: usize) -> f64 {
        self.temp_dev_c
            .and_then(|t| t.get(i).copied())
            .unwrap_or(0.0)
    }

    fn weight(&self, i: usize) -> f64 {
        self.weights.and_then(|w| w.get(i).copied()).unwrap_or(1.0)
    }

    /// Unweighted residual of sample `i`, nT, and (into `jrow`) its Jacobian row.
    fn residual_row(
        &self,
        i: usize,
        c: &Vector3<f64>,
        w: &Matrix3<f64>,
        k: &Vector3<f64>,
        jrow: &mut [f64; MAX_P],
    ) -> f64 {
        jacobian_row(&self.samples_nt[i], self.tau(i), c, w, k, jrow) - self.reference_nt
    }

    /// Unweighted residuals of every sample at `p`, nT.
    pub fn residuals(&self, p: &DVector<f64>) -> Vec<f64> {
        let (c, w, k) = self.unpack(p);
        let n = self.samples_nt.len();
        let mut out = vec![0.0; n];
        let fill = |lo: usize, dst: &mut [f64]| {
            let b = &self.samples_nt[lo..lo + dst.len()];
            match self.temp_dev_c.and_then(|t| t.get(lo..lo + dst.len())) {
                Some(t) => {
                    for ((o, bi), &tau) in dst.iter_mut().zip(b).zip(t) {
                        *o = (w * (bi - c - k * tau)).norm() - self.reference_nt;
                    }
                }
                None => {
                    for (o, bi) in dst.iter_mut().zip(b) {
                        *o = (w * (bi - c)).norm() - self.reference_nt;
                    }
                }
            }
        };
        if n > 4 * CHUNK {
            out.par_chunks_mut(CHUNK)
                .enumerate()
                .for_each(|(ch, dst)| fill(ch * CHUNK, dst));
        } else {
            fill(0, &mut out);
        }
        out
    }

    /// Weighted normal equations accumulated over samples `lo..hi`.
    fn accumulate(&self, p: &DVector<f64>, lo: usize, hi: usize) -> Acc {
        let (c, w, k) = self.unpack(p);
        if self.num_params() == 12 {
            self.accumulate_np::<12>(&c, &w, &k, lo, hi)
        } else {
            self.accumulate_np::<9>(&c, &w, &k, lo, hi)
        }
    }

    /// The accumulation loop with the parameter count known at compile time, so the
    /// Jacobian row stays in registers and the triangle of JᵀJ is fully unrolled.
    #[inline(always)]
    fn accumulate_np<const NP: usize>(
        &self,
        c: &Vector3<f64>,
        w: &Matrix3<f64>,
        k: &Vector3<f64>,
        lo: usize,
        hi: usize,
    ) -> Acc {
        let mut acc = Acc::default();
        let mut jtj = [[0.0; NP]; NP];
        let mut jtr = [0.0; NP];
        let mut j = [0.0; MAX_P];
        let b = &self.samples_nt[lo..hi];
        let wts = self.weights.and_then(|x| x.get(lo..hi));
        let taus = self.temp_dev_c.and_then(|x| x.get(lo..hi));
        for (i, bi) in b.iter().enumerate() {
            let wt = wts.map_or(1.0, |x| x[i]);
            if wt <= 0.0 {
                continue;
            }
            let tau = if NP == 12 {
                taus.map_or(0.0, |x| x[i])
            } else {
                0.0
            };
            let r = jacobian_row(bi, tau, c, w, k, &mut j) - self.reference_nt;
            acc.sum_sq += wt * r * r;
            acc.count += 1;
            for a in 0..NP {
                let wja = wt * j[a];
                jtr[a] += wja * r;
                for bb in a..NP {
                    jtj[a][bb] += wja * j[bb];
                }
            }
        }
        for a in 0..NP {
            acc.jtr[a] = jtr[a];
            acc.jtj[a][..NP].copy_from_slice(&jtj[a]);
        }
        acc
    }
}

/// |W d| with d = b − c − k τ (nT), and into `j` its derivatives with respect to the
/// parameters (c, the six elements of W, k).
#[inline(always)]
pub(super) fn jacobian_row(
    b: &Vector3<f64>,
    tau: f64,
    c: &Vector3<f64>,
    w: &Matrix3<f64>,
    k: &Vector3<f64>,
    j: &mut [f64; MAX_P],
) -> f64 {
    let d = b - c - k * tau;
    let v = w * d;
    let n = v.norm();
    let vh = if n > 0.0 { v / n } else { Vector3::zeros() };
    let wv = w * vh; // W symmetric: ∂n/∂d = (W v̂)ᵀ
    for a in 0..3 {
        j[a] = -wv[a];
        j[9 + a] = -wv[a] * tau;
    }
    j[3] = vh[0] * d[0];
    j[4] = vh[1] * d[1];
    j[5] = vh[2] * d[2];
    j[6] = vh[0] * d[1] + vh[1] * d[0];
    j[7] = vh[0] * d[2] + vh[2] * d[0];
    j[8] = vh[1] * d[2] + vh[2] * d[1];
    n
}

#[derive(Debug, Clone, Copy)]
struct Acc {
    jtj: [[f64; MAX_P]; MAX_P],
    jtr: [f64; MAX_P],
    sum_sq: f64,
    count: usize,
}

impl Default for Acc {
    fn default() -> Self {
        Acc {
            jtj: [[0.0; MAX_P]; MAX_P],
            jtr: [0.0; MAX_P],
            sum_sq: 0.0,
            count: 0,
        }
    }
}

impl Acc {
    fn add(mut self, o: Acc) -> Acc {
        for a in 0..MAX_P {
            self.jtr[a] += o.jtr[a];
            for b in 0..MAX_P {
                self.jtj[a][b] += o.jtj[a][b];
            }
        }
        self.sum_sq += o.sum_sq;
        self.count += o.count;
        self
    }
}

impl LeastSquaresProblem for TumbleProblem<'_> {
    fn sum_sq(&self, p: &DVector<f64>) -> Result<f64, ArgminError> {
        let (c, w, k) = self.unpack(p);
        let part = |lo: usize, hi: usize| -> f64 {
            let b = &self.samples_nt[lo..hi];
            let wts = self.weights.and_then(|x| x.get(lo..hi));
            let taus = self.temp_dev_c.and_then(|x| x.get(lo..hi));
            let mut s = 0.0;
            for (i, bi) in b.iter().enumerate() {
                let wt = wts.map_or(1.0, |x| x[i]);
                if wt <= 0.0 {
                    continue;
                }
                let tau = taus.map_or(0.0, |x| x[i]);
                let r = (w * (bi - c - k * tau)).norm() - self.reference_nt;
                s += wt * r * r;
            }
            s
        };
        let n = self.samples_nt.len();
        Ok(if n > 4 * CHUNK {
            (0..n.div_ceil(CHUNK))
                .into_par_iter()
                .map(|ch| part(ch * CHUNK, ((ch + 1) * CHUNK).min(n)))
                .sum()
        } else {
            part(0, n)
        })
    }

    fn normal_equations(&self, p: &DVector<f64>) -> Result<NormalEquations, ArgminError> {
        let n = self.samples_nt.len();
        let acc = if n > 4 * CHUNK {
            (0..n.div_ceil(CHUNK))
                .into_par_iter()
                .map(|ch| self.accumulate(p, ch * CHUNK, ((ch + 1) * CHUNK).min(n)))
                .reduce(Acc::default, Acc::add)
        } else {
            self.accumulate(p, 0, n)
        };
        let np = self.num_params();
        let mut jtj = DMatrix::zeros(np, np);
        for a in 0..np {
            for b in a..np {
                jtj[(a, b)] = acc.jtj[a][b];
                jtj[(b, a)] = acc.jtj[a][b];
            }
        }
        Ok(NormalEquations {
            jtj,
            jtr: DVector::from_column_slice(&acc.jtr[..np]),
            sum_sq: acc.sum_sq,
            residual_count: acc.count,
        })
    }
}

impl Operator for TumbleProblem<'_> {
    type Param = DVector<f64>;
    type Output = DVector<f64>;
    /// Weighted residuals √wᵢ·rᵢ, nT.
    fn apply(&self, p: &DVector<f64>) -> Result<DVector<f64>, ArgminError> {
        let r = self.residuals(p);
        Ok(DVector::from_iterator(
            r.len(),
            r.iter()
                .enumerate()
                .map(|(i, r)| self.weight(i).max(0.0).sqrt() * r),
        ))
    }
}

impl Jacobian for TumbleProblem<'_> {
    type Param = DVector<f64>;
    type Jacobian = DMatrix<f64>;
    /// Jacobian of the weighted residuals (N×p).
    fn jacobian(&self, p: &DVector<f64>) -> Result<DMatrix<f64>, ArgminError> {
        let (c, w, k) = self.unpack(p);
        let np = self.num_params();
        let n = self.samples_nt.len();
        let mut jac = DMatrix::zeros(n, np);
        let mut j = [0.0; MAX_P];
        for i in 0..n {
            self.residual_row(i, &c, &w, &k, &mut j);
            let s = self.weight(i).max(0.0).sqrt();
            for a in 0..np {
                jac[(i, a)] = s * j[a];
            }
        }
        Ok(jac)
    }
}
