//! Weighted linear least squares whose normal matrix has an "arrowhead" structure: a few
//! dense head parameters (commands, remanence, …) followed by a long tail of parameters
//! of local support (a piecewise-linear baseline: each row touches two adjacent knots),
//! so the tail block of `Σ w x xᵀ` is banded. Same estimator, same [`LinearFit`] as
//! [`crate::fit::linear::LinearLeastSquares`]; only the algebra exploits the structure.
//!
//! Normal matrix, Jacobi-scaled to unit diagonal, in blocks `M = [A C; Cᵀ D]` with head
//! `A` (m×m), coupling `C` (m×d) and banded tail `D` (d×d, half-bandwidth `bw`). Block
//! elimination (Schur complement `S = A − C D⁻¹ Cᵀ`; e.g. Golub & Van Loan, *Matrix
//! Computations*, 4th ed., §3.2 and §4.3 for banded Cholesky, cited from memory) gives
//! `M⁻¹ = [S⁻¹, −S⁻¹Zᵀ; −Z S⁻¹, D⁻¹ + Z S⁻¹ Zᵀ]` with `Z = D⁻¹Cᵀ`; the coefficients are
//! `M⁻¹ (Σ w x yᵀ)` as in the dense solver.
//!
//! Cost: accumulation O(nnz²) per row with no allocation; the solve O(d·bw² + d·m·bw +
//! m³) to factor plus O(d²·m) to write out the full p×p `normal_inverse` (the dense solver
//! is O(p³) with an eigen-decomposition on top).
//!
//! Rank check: a tail pivot of the banded Cholesky at or below
//! [`MIN_RECIPROCAL_CONDITION`] (scaled diagonal is 1, and every pivot bounds the smallest
//! eigenvalue from above), or a reciprocal condition of the scaled Schur complement at or
//! below it, is refused with [`Error::Degenerate`] naming the parameters involved.

use nalgebra::{DMatrix, DVector};

use crate::fit::linear::{fit_from_inverse, LinearFit, MIN_RECIPROCAL_CONDITION};
use crate::Error;

mod dense_head;

/// Normal-equation accumulator for a weighted linear least-squares fit with `k` outputs,
/// `m` dense head parameters and `d` banded tail parameters.
#[derive(Debug, Clone)]
pub struct ArrowLeastSquares {
    names: Vec<String>,
    head: usize,
    bandwidth: usize,
    outputs: usize,
    /// Σ w x xᵀ, head block, upper triangle (m×m).
    a: DMatrix<f64>,
    /// Σ w x xᵀ, head × tail block (m×d).
    c: DMatrix<f64>,
    /// Σ w x xᵀ, tail block: `band[i·(bw+1) + o] = D[i, i+o]`, o = 0..=bw.
    band: Vec<f64>,
    /// Σ w x yᵀ (p×k).
    xty: DMatrix<f64>,
    /// Σ w y yᵀ (k×k), upper triangle.
    yty: DMatrix<f64>,
    rows: usize,
}

impl ArrowLeastSquares {
    /// A fit with the given parameter names, the first `head` of them dense, the rest a
    /// tail in which one row's non-zero regressors lie at most `bandwidth` apart, and
    /// `outputs` outputs.
    pub fn new(
        names: Vec<String>,
        head: usize,
        bandwidth: usize,
        outputs: usize,
    ) -> Result<Self, Error> {
        let p = names.len();
        if p == 0 || outputs == 0 || head > p {
            return Err(Error::Internal(format!(
                "arrow fit: {p} parameters with a head of {head} and {outputs} outputs"
            )));
        }
        let d = p - head;
        Ok(Self {
            names,
            head,
            bandwidth,
            outputs,
            a: DMatrix::zeros(head, head),
            c: DMatrix::zeros(head, d),
            band: vec![0.0; d * (bandwidth + 1)],
            xty: DMatrix::zeros(p, outputs),
            yty: DMatrix::zeros(outputs, outputs),
            rows: 0,
        })
    }

    /// Number of parameters.
    pub fn parameters(&self) -> usize {
        self.names.len()
    }

    /// Add one sparse row: regressor `idx[q]` has value `vals[q]`, all others are zero;
    /// outputs `y` (length k), weight `w ≥ 0`. Rows of zero weight and rows with a
    /// non-finite value are ignored, as in the dense solver. A row that breaks the
    /// structure (indices not strictly increasing or out of range, tail indices more
    /// than the bandwidth apart, wrong lengths) is an internal error.
    #[inline]
    pub fn add_sparse_row(
        &mut self,
        idx: &[usize],
        vals: &[f64],
        y: &[f64],
        w: f64,
    ) -> Result<(), Error> {
        let p = self.names.len();
        let first_tail = idx.iter().position(|&a| a >= self.head);
        let band_ok = match first_tail {
            Some(q) => idx.last().is_some_and(|&l| l - idx[q] <= self.bandwidth),
            None => true,
        };
        if idx.len() != vals.len()
            || y.len() != self.outputs
            || idx.last().is_some_and(|&a| a >= p)
            || idx.windows(2).any(|v| v[0] >= v[1])
            || !band_ok
        {
            return Err(Error::Internal(format!(
                "arrow fit: row with indices {idx:?} does not fit {p} parameters, head {}, bandwidth {}",
                self.head, self.bandwidth
            )));
        }
        if w <= 0.0 || !w.is_finite() || vals.iter().chain(y).any(|v| !v.is_finite()) {
            return Ok(());
        }
        let (m, stride) = (self.head, self.bandwidth + 1);
        // Row entries split into head (< m) and tail; each block without a branch per pair.
        let h = first_tail.unwrap_or(idx.len());
        let (head_idx, tail_idx) = idx.split_at(h);
        let (head_vals, tail_vals) = vals.split_at(h);
        for (qa, (&a, &xa)) in head_idx.iter().zip(head_vals).enumerate() {
            let wxa = w * xa;
            for (&b, &xb) in head_idx[qa..].iter().zip(&head_vals[qa..]) {
                self.a[(a, b)] += wxa * xb;
            }
            for (&b, &xb) in tail_idx.iter().zip(tail_vals) {
                self.c[(a, b - m)] += wxa * xb;
            }
        }
        for (qa, (&a, &xa)) in tail_idx.iter().zip(tail_vals).enumerate() {
            let wxa = w * xa;
            let row = (a - m) * stride;
            // b − a ≤ bandwidth was checked above.
            for (&b, &xb) in tail_idx[qa..].iter().zip(&tail_vals[qa..]) {
                self.band[row + (b - a)] += wxa * xb;
            }
        }
        for (&a, &xa) in idx.iter().zip(vals) {
            let wxa = w * xa;
            for (j, yj) in y.iter().enumerate() {
                self.xty[(a, j)] += wxa * yj;
            }
        }
        for (j, &yj) in y.iter().enumerate() {
            let wyj = w * yj;
            for (l, &yl) in y.iter().enumerate().skip(j) {
                self.yty[(j, l)] += wyj * yl;
            }
        }
        self.rows += 1;
        Ok(())
    }

    /// Solve the normal equations.
    pub fn solve(&self) -> Result<LinearFit, Error> {
        let p = self.names.len();
        let (m, d, k) = (self.head, p - self.head, self.outputs);
        let (bw, stride) = (self.bandwidth, self.bandwidth + 1);
        if self.rows <= p {
            return Err(Error::Degenerate(format!(
                "linear fit: {} usable rows for {} parameters; more data are needed",
                self.rows, p
            )));
        }
        // Jacobi scaling to unit diagonal, as in the dense solver.
        let scale = self.jacobi_scale()?;
        let a_s = DMatrix::from_fn(m, m, |i, j| {
            let (lo, hi) = (i.min(j), i.max(j));
            self.a[(lo, hi)] * scale[i] * scale[j]
        });
        let c_s = DMatrix::from_fn(m, d, |i, j| self.c[(i, j)] * scale[i] * scale[m + j]);
        let mut band = self.band.clone();
        for i in 0..d {
            for o in 0..stride.min(d - i) {
                band[i * stride + o] *= scale[m + i] * scale[m + i + o];
            }
        }
        let chol = BandCholesky::factor(&band, d, bw).map_err(|i| {
            let lo = i.saturating_sub(bw);
            let list: Vec<&str> = (lo..=i).map(|q| self.names[m + q].as_str()).collect();
            Error::Degenerate(format!(
                "linear fit: the regressors {} cannot be told apart in these data; they move together",
                list.join(", ")
            ))
        })?;
        // Z = D⁻¹ Cᵀ (d×m) and the Schur complement S = A − C Z (m×m).
        let mut z = c_s.transpose();
        for col in 0..m {
            chol.solve_in_place(z.column_mut(col).as_mut_slice());
        }
        let mut s = &a_s - &c_s * &z;
        s = (&s + s.transpose()) * 0.5;
        let s_inv = if m == 0 {
            DMatrix::zeros(0, 0)
        } else {
            self.check_head_rank(&s)?;
            s.cholesky()
                .ok_or_else(|| {
                    Error::Degenerate(
                        "linear fit: the normal matrix is not positive definite".into(),
                    )
                })?
                .inverse()
        };
        // Scaled inverse in blocks, then unscaled.
        let scaled_inv = scaled_inverse(&z, &s_inv, &chol);
        let mut yty = self.yty.clone();
        for j in 0..k {
            for l in 0..j {
                yty[(j, l)] = yty[(l, j)];
            }
        }
        Ok(fit_from_inverse(
            &self.names,
            &scaled_inv,
            &scale,
            &self.xty,
            &yty,
            self.rows,
        ))
    }

    /// 1/√diag of the normal matrix (Jacobi scaling to unit diagonal); a parameter
    /// without data (zero diagonal) is refused by name.
    fn jacobi_scale(&self) -> Result<DVector<f64>, Error> {
        let p = self.names.len();
        let (m, stride) = (self.head, self.bandwidth + 1);
        let mut scale = DVector::zeros(p);
        for a in 0..p {
            let diag = if a < m {
                self.a[(a, a)]
            } else {
                self.band[(a - m) * stride]
            };
            if diag.is_nan() || diag <= 0.0 {
                return Err(Error::Degenerate(format!(
                    "linear fit: parameter \"{}\" has no data (its regressor is zero on every used row)",
                    self.names[a]
                )));
            }
            scale[a] = 1.0 / diag.sqrt();
        }
        Ok(scale)
    }

    /// Refuse a (near) singular scaled Schur complement, naming the head parameters of
    /// its weakest direction.
    fn check_head_rank(&self, s: &DMatrix<f64>) -> Result<(), Error> {
        let head = &self.names[..s.nrows().min(self.names.len())];
        super::linear::refuse_ill_conditioned(s, head)
    }
}

/// The scaled normal matrix's inverse, assembled in blocks from Z = D⁻¹ Cᵀ (d×m), the
/// Schur complement's inverse S⁻¹ (m×m) and the band factor of D (d×d).
fn scaled_inverse(z: &DMatrix<f64>, s_inv: &DMatrix<f64>, chol: &BandCholesky) -> DMatrix<f64> {
    let (d, m) = (z.nrows(), z.ncols());
    let p = m + d;
    let zs = z * s_inv; // d×m: Z S⁻¹
    let mut scaled_inv = DMatrix::zeros(p, p);
    scaled_inv.view_mut((0, 0), (m, m)).copy_from(s_inv);
    let top_right = -zs.transpose(); // −S⁻¹ Zᵀ (S⁻¹ symmetric)
    scaled_inv.view_mut((0, m), (m, d)).copy_from(&top_right);
    scaled_inv
        .view_mut((m, 0), (d, m))
        .copy_from(&top_right.transpose());
    let mut unit = vec![0.0; d];
    for col in 0..d {
        unit.iter_mut().for_each(|v| *v = 0.0);
        unit[col] = 1.0;
        chol.solve_in_place(&mut unit);
        for (row, u) in unit.iter().enumerate() {
            let zsz: f64 = (0..m).map(|q| zs[(row, q)] * z[(col, q)]).sum();
            scaled_inv[(m + row, m + col)] = u + zsz;
        }
    }
    scaled_inv
}

/// Cholesky factor `L` of a symmetric positive-definite band matrix, stored by rows:
/// `l[i·(bw+1) + o] = L[i, i−o]`.
struct BandCholesky {
    l: Vec<f64>,
    n: usize,
    bw: usize,
}

impl BandCholesky {
    /// Factor the upper band `band[i·(bw+1) + o] = D[i, i+o]`. On a pivot at or below
    /// [`MIN_RECIPROCAL_CONDITION`] (the matrix has unit diagonal) returns its row.
    fn factor(band: &[f64], n: usize, bw: usize) -> Result<Self, usize> {
        let stride = bw + 1;
        let mut l = vec![0.0; n * stride];
        for i in 0..n {
            let lo = i.saturating_sub(bw);
            for j in lo..=i {
                // D[j, i] with j ≤ i.
                let mut sum = band[j * stride + (i - j)];
                for q in lo..j {
                    sum -= l[i * stride + (i - q)] * l[j * stride + (j - q)];
                }
                if j == i {
                    if sum.is_nan() || sum <= MIN_RECIPROCAL_CONDITION {
                        return Err(i);
                    }
                    l[i * stride] = sum.sqrt();
                } else {
                    l[i * stride + (i - j)] = sum / l[j * stride];
                }
            }
        }
        Ok(Self { l, n, bw })
    }

    /// Overwrite `x` (length n) with `(L Lᵀ)⁻¹ x`.
    #[allow(clippy::needless_range_loop)] // band indices q and i are used together
    fn solve_in_place(&self, x: &mut [f64]) {
        let (n, bw, stride) = (self.n, self.bw, self.bw + 1);
        for i in 0..n {
            let mut sum = x[i];
            for q in i.saturating_sub(bw)..i {
                sum -= self.l[i * stride + (i - q)] * x[q];
            }
            x[i] = sum / self.l[i * stride];
        }
        for i in (0..n).rev() {
            let mut sum = x[i];
            for q in i + 1..(i + stride).min(n) {
                sum -= self.l[q * stride + (q - i)] * x[q];
            }
            x[i] = sum / self.l[i * stride];
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::linear::LinearLeastSquares;
    use rand::{Rng, SeedableRng};

    /// ‖a − b‖ / ‖b‖ (Frobenius).
    pub(super) fn rel(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
        (a - b).norm() / b.norm()
    }

    /// Rows of a problem shaped like the polarity regression: `m` random head regressors
    /// (commands switching between −1, 0, 1 and a held sign), a piecewise-linear baseline
    /// on `d` knots (hat functions: each row touches two adjacent knots), three outputs
    /// and weights of which some are zero.
    #[allow(clippy::type_complexity)]
    pub(super) fn hat_rows(
        n: usize,
        m: usize,
        d: usize,
        seed: u64,
    ) -> Vec<(Vec<usize>, Vec<f64>, [f64; 3], f64)> {
        let mut rng = rand::rngs::StdRng::seed_from_u64(seed);
        let truth: Vec<[f64; 3]> = (0..m + d)
            .map(|_| std::array::from_fn(|_| rng.gen_range(-50.0..50.0)))
            .collect();
        (0..n)
            .map(|i| {
                let mut idx: Vec<usize> = (0..m).collect();
                let mut vals: Vec<f64> = (0..m)
                    .map(|_| f64::from(rng.gen_range(-1i32..=1)))
                    .collect();
                let x = i as f64 / (n - 1) as f64 * (d - 1) as f64;
                let j = (x.floor() as usize).min(d - 2);
                let u = x - j as f64;
                idx.extend([m + j, m + j + 1]);
                vals.extend([1.0 - u, u]);
                let y = std::array::from_fn(|a| {
                    idx.iter()
                        .zip(&vals)
                        .map(|(&q, v)| v * truth[q][a])
                        .sum::<f64>()
                        + rng.gen_range(-1.0..1.0)
                });
                let w = if i % 17 == 3 {
                    0.0
                } else {
                    rng.gen_range(0.5..2.0)
                };
                (idx, vals, y, w)
            })
            .collect()
    }

    // Reference 1: the dense normal-equation solver (`LinearLeastSquares`, Σ w x xᵀ as a
    // full p×p matrix, eigen rank check, Cholesky inverse). Reference 2: nalgebra's SVD
    // least-squares solve of the explicit √w-weighted N×p design, which never forms the
    // normal equations (the textbook weighted least-squares problem
    // min ‖W^½ (Y − X B)‖, solved by a general-purpose library).
    #[test]
    fn hat_basis_fit_equals_dense_normal_equations_and_svd() {
        let (n, m, d) = (600, 4, 21);
        let names: Vec<String> = (0..m + d).map(|q| format!("x{q}")).collect();
        let rows = hat_rows(n, m, d, 5);
        let mut arrow = ArrowLeastSquares::new(names.clone(), m, 1, 3).unwrap();
        let mut dense = LinearLeastSquares::new(names, 3).unwrap();
        let mut xw = DMatrix::zeros(n, m + d);
        let mut yw = DMatrix::zeros(n, 3);
        for (i, (idx, vals, y, w)) in rows.iter().enumerate() {
            arrow.add_sparse_row(idx, vals, y, *w).unwrap();
            dense.add_sparse_row(idx, vals, y, *w);
            for (&q, v) in idx.iter().zip(vals) {
                xw[(i, q)] = w.sqrt() * v;
            }
            for a in 0..3 {
                yw[(i, a)] = w.sqrt() * y[a];
            }
        }
        let (fa, fd) = (arrow.solve().unwrap(), dense.solve().unwrap());
        assert!(rel(&fa.coefficients, &fd.coefficients) < 1e-9);
        assert!(rel(&fa.normal_inverse, &fd.normal_inverse) < 1e-9);
        assert!(rel(&fa.residual_covariance, &fd.residual_covariance) < 1e-9);
        assert_eq!((fa.rows_used, fa.dof), (fd.rows_used, fd.dof));
        let svd = xw.svd(true, true);
        let b = svd.solve(&yw, 1e-14).unwrap();
        assert!(
            rel(&fa.coefficients, &b) < 1e-9,
            "{}",
            rel(&fa.coefficients, &b)
        );
        // (XᵀWX)⁻¹ from the SVD: V Σ⁻² Vᵀ.
        let v_t = svd.v_t.unwrap();
        let inv_s2 = DMatrix::from_diagonal(&svd.singular_values.map(|s| 1.0 / (s * s)));
        let cov = v_t.transpose() * inv_s2 * v_t;
        assert!(
            rel(&fa.normal_inverse, &cov) < 1e-9,
            "{}",
            rel(&fa.normal_inverse, &cov)
        );
    }

    #[test]
    fn full_band_tail_equals_dense() {
        // A polynomial drift touches every tail term: bandwidth d − 1 is a dense tail.
        let (n, m, d) = (300, 3, 4);
        let names: Vec<String> = (0..m + d).map(|q| format!("x{q}")).collect();
        let mut rng = rand::rngs::StdRng::seed_from_u64(9);
        let mut arrow = ArrowLeastSquares::new(names.clone(), m, d - 1, 2).unwrap();
        let mut dense = LinearLeastSquares::new(names, 2).unwrap();
        let idx: Vec<usize> = (0..m + d).collect();
        for i in 0..n {
            let t = 2.0 * i as f64 / n as f64 - 1.0;
            let mut vals: Vec<f64> = (0..m).map(|_| rng.gen_range(-1.0..1.0)).collect();
            vals.extend([1.0, t, t * t, t * t * t]);
            let y = [
                rng.gen_range(-1.0..1.0) + 3.0 * vals[0],
                t + rng.gen_range(-1.0..1.0),
            ];
            arrow.add_sparse_row(&idx, &vals, &y, 1.0).unwrap();
            dense.add_row(&vals, &y, 1.0);
        }
        let (fa, fd) = (arrow.solve().unwrap(), dense.solve().unwrap());
        assert!(rel(&fa.coefficients, &fd.coefficients) < 1e-9);
        assert!(rel(&fa.normal_inverse, &fd.normal_inverse) < 1e-9);
        assert!(rel(&fa.residual_covariance, &fd.residual_covariance) < 1e-9);
    }

    #[test]
    fn degenerate_designs_are_refused_with_names() {
        let (n, m, d) = (200, 2, 6);
        let names: Vec<String> = ["cmd_a", "cmd_b"]
            .iter()
            .map(|s| s.to_string())
            .chain((0..d).map(|q| format!("knot{q}")))
            .collect();
        // cmd_b = 2 cmd_a: the head cannot be told apart.
        let mut f = ArrowLeastSquares::new(names.clone(), m, 1, 1).unwrap();
        for (idx, vals, y, w) in hat_rows(n, m, d, 3) {
            let mut vals = vals;
            vals[1] = 2.0 * vals[0];
            f.add_sparse_row(&idx, &vals, &y[..1], w).unwrap();
        }
        let msg = f.solve().unwrap_err().to_string();
        assert!(msg.contains("cmd_a") && msg.contains("cmd_b"), "{msg}");
        // A knot that no used row touches has no data.
        let mut f = ArrowLeastSquares::new(names.clone(), m, 1, 1).unwrap();
        for (idx, vals, y, w) in hat_rows(n, m, d, 4) {
            let w = if idx.contains(&(m + 5)) { 0.0 } else { w };
            f.add_sparse_row(&idx, &vals, &y[..1], w).unwrap();
        }
        let msg = f.solve().unwrap_err().to_string();
        assert!(msg.contains("knot5") && msg.contains("no data"), "{msg}");
        // A row wider than the band is an internal error, never a silent drop.
        let mut f = ArrowLeastSquares::new(names, m, 1, 1).unwrap();
        let e = f.add_sparse_row(&[0, m, m + 2], &[1.0, 1.0, 1.0], &[0.0], 1.0);
        assert!(matches!(e, Err(Error::Internal(_))));
    }
}
