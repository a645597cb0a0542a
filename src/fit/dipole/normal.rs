//! Normal equations of the moment-and-offset problem, accumulated in one pass over the
//! samples: for each sample the 3×6 Jacobian block `Jᵢ = [G·R | −(∂(G·R·m)/∂d)·R]` and
//! the residual `rᵢ = G·R·m − bᵢ` are formed on the stack and added into `Σ JᵢᵀJᵢ`,
//! `Σ Jᵢᵀrᵢ` and `Σ |rᵢ|²`. No N×6 Jacobian or N-long residual vector is built, so the
//! cost per solver iteration is linear in N with constant memory.
//!
//! The samples are cut into fixed chunks of [`CHUNK`] samples; each chunk is summed in
//! order and the chunk sums are then added in chunk order. Above [`PARALLEL_MIN`] samples
//! the chunks are summed on rayon's thread pool; the order of every addition is the same
//! either way, so the result does not depend on the number of threads.

// Index loops mirror the maths.
#![allow(clippy::needless_range_loop)]

use argmin::core::Error as ArgminError;
use nalgebra::{DMatrix, DVector, Matrix3, Matrix6, SMatrix, Vector3, Vector6};
use rayon::prelude::*;

use super::{field_gradient, probe_at_dipole, DipoleSample, OffsetProblem};
use crate::fit::lm::{LeastSquaresProblem, NormalEquations};
use crate::physics::dipole::dipole_matrix;

/// Samples per chunk.
const CHUNK: usize = 8_192;
/// Sample count from which the chunks are summed in parallel.
const PARALLEL_MIN: usize = 4 * CHUNK;

/// Sums over one chunk (or the whole set).
#[derive(Debug, Clone, Copy)]
struct Sums {
    jtj: Matrix6<f64>,
    jtr: Vector6<f64>,
    sum_sq: f64,
}

impl Sums {
    fn zero() -> Self {
        Sums {
            jtj: Matrix6::zeros(),
            jtr: Vector6::zeros(),
            sum_sq: 0.0,
        }
    }
}

/// Residual (nT) and Jacobian block (nT per parameter) of one sample, or `None` when the
/// probe sits at the dipole. Same expressions as the dense `Operator` / `Jacobian`.
#[inline(always)]
fn sample_block(
    s: &DipoleSample,
    m: &Vector3<f64>,
    o: &Vector3<f64>,
) -> Option<(Vector3<f64>, SMatrix<f64, 3, 6>)> {
    let rot = s.body_to_table;
    let d = s.probe_m - rot * o;
    let a: Matrix3<f64> = dipole_matrix(&d)? * rot;
    let r = a * m - s.b_nt;
    // d depends on o through −R: ∂B/∂o = (∂B/∂d) · (−R).
    let dbdo = -field_gradient(&d, &(rot * m)) * rot;
    let mut j = SMatrix::<f64, 3, 6>::zeros();
    j.fixed_view_mut::<3, 3>(0, 0).copy_from(&a);
    j.fixed_view_mut::<3, 3>(0, 3).copy_from(&dbdo);
    Some((r, j))
}

/// Normal-equation sums over `chunk`, whose first sample has index `first`. Only the
/// upper triangle of JᵀJ is summed (21 of 36 entries), then mirrored.
fn chunk_sums(
    chunk: &[DipoleSample],
    first: usize,
    m: &Vector3<f64>,
    o: &Vector3<f64>,
) -> Result<Sums, usize> {
    let mut jtj = [[0.0; 6]; 6];
    let mut jtr = [0.0; 6];
    let mut sum_sq = 0.0;
    for (k, s) in chunk.iter().enumerate() {
        let (r, j) = sample_block(s, m, o).ok_or(first + k)?;
        for a in 0..6 {
            let (j0, j1, j2) = (j[(0, a)], j[(1, a)], j[(2, a)]);
            jtr[a] += j0 * r[0] + j1 * r[1] + j2 * r[2];
            for b in a..6 {
                jtj[a][b] += j0 * j[(0, b)] + j1 * j[(1, b)] + j2 * j[(2, b)];
            }
        }
        sum_sq += r.norm_squared();
    }
    Ok(Sums {
        jtj: Matrix6::from_fn(|a, b| if a <= b { jtj[a][b] } else { jtj[b][a] }),
        jtr: Vector6::from_column_slice(&jtr),
        sum_sq,
    })
}

/// Σ |rᵢ|² over `chunk`, whose first sample has index `first`.
fn chunk_sum_sq(
    chunk: &[DipoleSample],
    first: usize,
    m: &Vector3<f64>,
    o: &Vector3<f64>,
) -> Result<f64, usize> {
    let mut s2 = 0.0;
    for (k, s) in chunk.iter().enumerate() {
        let a =
            dipole_matrix(&(s.probe_m - s.body_to_table * o)).ok_or(first + k)? * s.body_to_table;
        s2 += (a * m - s.b_nt).norm_squared();
    }
    Ok(s2)
}

/// Apply `f` to every chunk (in parallel for large sets) and return the per-chunk
/// results in chunk order. `Err(i)`: sample `i` (the first such) has the probe at the
/// dipole.
fn per_chunk<T: Send>(
    samples: &[DipoleSample],
    f: impl Fn(&[DipoleSample], usize) -> Result<T, usize> + Sync,
) -> Result<Vec<T>, usize> {
    let run = |(c, chunk): (usize, &[DipoleSample])| f(chunk, c * CHUNK);
    let parts: Vec<Result<T, usize>> = if samples.len() >= PARALLEL_MIN {
        samples.par_chunks(CHUNK).enumerate().map(run).collect()
    } else {
        samples.chunks(CHUNK).enumerate().map(run).collect()
    };
    parts.into_iter().collect()
}

/// `(JᵀJ, Jᵀr, Σ rᵢ²)` of the moment-and-offset problem at moment `m` (body, A·m²)
/// and offset `o` (body, m), accumulated in one pass; `Err(i)` names the first sample
/// with the probe at the dipole.
pub(super) fn offset_normal_equations(
    samples: &[DipoleSample],
    m: &Vector3<f64>,
    o: &Vector3<f64>,
) -> Result<(Matrix6<f64>, Vector6<f64>, f64), usize> {
    let mut total = Sums::zero();
    for part in per_chunk(samples, |c, first| chunk_sums(c, first, m, o))? {
        total.jtj += part.jtj;
        total.jtr += part.jtr;
        total.sum_sq += part.sum_sq;
    }
    Ok((total.jtj, total.jtr, total.sum_sq))
}

/// Σ rᵢ² of the moment-and-offset problem, in one pass.
pub(super) fn offset_sum_sq(
    samples: &[DipoleSample],
    m: &Vector3<f64>,
    o: &Vector3<f64>,
) -> Result<f64, usize> {
    Ok(per_chunk(samples, |c, first| chunk_sum_sq(c, first, m, o))?
        .into_iter()
        .sum())
}

impl LeastSquaresProblem for OffsetProblem<'_> {
    fn sum_sq(&self, p: &DVector<f64>) -> Result<f64, ArgminError> {
        let (m, o) = Self::split(p)?;
        offset_sum_sq(self.samples, &m, &o).map_err(probe_at_dipole)
    }

    fn normal_equations(&self, p: &DVector<f64>) -> Result<NormalEquations, ArgminError> {
        let (m, o) = Self::split(p)?;
        let (jtj, jtr, sum_sq) =
            offset_normal_equations(self.samples, &m, &o).map_err(probe_at_dipole)?;
        Ok(NormalEquations {
            jtj: DMatrix::from_column_slice(6, 6, jtj.as_slice()),
            jtr: DVector::from_column_slice(jtr.as_slice()),
            sum_sq,
            residual_count: 3 * self.samples.len(),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::lm::DenseProblem;
    use crate::physics::frames::rotation_z;

    /// Two mounts, probe off the table axis, `n` table angles, a little noise: not
    /// at the solution, so the residuals and Jᵀr are not small.
    fn samples(n: usize) -> Vec<DipoleSample> {
        let m = Vector3::new(0.3, -0.2, 0.5);
        let o = Vector3::new(0.03, -0.02, 0.05);
        let on_side = Matrix3::new(1.0, 0.0, 0.0, 0.0, 0.0, -1.0, 0.0, 1.0, 0.0);
        (0..n)
            .map(|i| {
                let mount = if i % 2 == 0 {
                    Matrix3::identity()
                } else {
                    on_side
                };
                let rot = rotation_z(0.37 * i as f64) * mount;
                let mut s = DipoleSample {
                    probe_m: Vector3::new(0.6, 0.05, 0.02),
                    body_to_table: rot,
                    b_nt: Vector3::zeros(),
                };
                let wobble = Vector3::new((i as f64).sin(), (1.7 * i as f64).cos(), 0.3);
                s.b_nt = super::super::model_field_nt(&s, &m, &o).unwrap() + wobble;
                s
            })
            .collect()
    }

    /// `max |a − b| / max |b|` over all elements.
    fn rel_diff(a: &[f64], b: &[f64]) -> f64 {
        let scale = b.iter().fold(0.0_f64, |s, x| s.max(x.abs()));
        let diff = a
            .iter()
            .zip(b)
            .fold(0.0_f64, |s, (x, y)| s.max((x - y).abs()));
        diff / scale
    }

    /// The one-pass sums against the dense formulation: the 3N×6 Jacobian and residual
    /// vector built by the argmin `Jacobian` / `Operator` impls, with JᵀJ and Jᵀr formed
    /// by nalgebra's matrix product (`DenseProblem`). The dense formulation is the
    /// reference; only the summation order differs, so 1e-10 relative is ample. Sizes
    /// below and above `PARALLEL_MIN` cover the serial and the rayon path.
    #[test]
    fn one_pass_normal_equations_equal_the_dense_products() {
        let p = DVector::from_vec(vec![0.25, -0.1, 0.4, 0.02, 0.01, -0.03]);
        for n in [7, 100, PARALLEL_MIN + 1_234] {
            let data = samples(n);
            let fast = OffsetProblem::new(&data).normal_equations(&p).unwrap();
            let dense = DenseProblem(OffsetProblem::new(&data))
                .normal_equations(&p)
                .unwrap();
            assert!(
                rel_diff(fast.jtj.as_slice(), dense.jtj.as_slice()) < 1e-10,
                "{n}"
            );
            assert!(
                rel_diff(fast.jtr.as_slice(), dense.jtr.as_slice()) < 1e-10,
                "{n}"
            );
            assert!(
                (fast.sum_sq - dense.sum_sq).abs() <= 1e-10 * dense.sum_sq,
                "{n}"
            );
            assert_eq!(fast.residual_count, dense.residual_count);
            let s2 = OffsetProblem::new(&data).sum_sq(&p).unwrap();
            assert!((s2 - dense.sum_sq).abs() <= 1e-10 * dense.sum_sq, "{n}");
        }
    }

    /// The parallel and the serial path add in the same order: bit-identical sums.
    #[test]
    fn parallel_sums_equal_serial_sums_exactly() {
        let data = samples(PARALLEL_MIN + 5_000);
        let (m, o) = (Vector3::new(0.2, 0.1, -0.3), Vector3::new(0.01, 0.0, 0.02));
        let par = offset_normal_equations(&data, &m, &o).unwrap();
        let mut serial = Sums::zero();
        for (c, chunk) in data.chunks(CHUNK).enumerate() {
            let s = chunk_sums(chunk, c * CHUNK, &m, &o).unwrap();
            serial.jtj += s.jtj;
            serial.jtr += s.jtr;
            serial.sum_sq += s.sum_sq;
        }
        assert_eq!(par.0, serial.jtj);
        assert_eq!(par.1, serial.jtr);
        assert_eq!(par.2.to_bits(), serial.sum_sq.to_bits());
    }

    /// A probe at the dipole is reported with the first such sample's index, in the
    /// parallel path too.
    #[test]
    fn probe_at_dipole_names_the_first_sample() {
        let mut data = samples(PARALLEL_MIN + 10);
        let o = Vector3::zeros();
        for i in [20_000, PARALLEL_MIN + 3] {
            data[i].probe_m = Vector3::zeros();
        }
        let m = Vector3::new(0.1, 0.0, 0.0);
        assert_eq!(offset_normal_equations(&data, &m, &o).unwrap_err(), 20_000);
        assert_eq!(offset_sum_sq(&data, &m, &o).unwrap_err(), 20_000);
    }
}
