//! Rows whose head regressors are all given, in order, and whose tail regressors are one
//! contiguous run: the shape of every row of the polarity regression (all commands and
//! remanence terms, then the two knots of a hat function or every term of a polynomial).
//! [`ArrowLeastSquares::add_dense_head_row`] adds such a row without index lists, column
//! by column over the flat column-major sums. Each sum receives the same product,
//! `(w·xₐ)·x_b`, as through [`ArrowLeastSquares::add_sparse_row`], so the normal
//! equations, and every fit solved from them, are bit for bit the same.

use super::ArrowLeastSquares;
use crate::Error;

impl ArrowLeastSquares {
    /// Add one row: head regressors `head_vals` (all `head` of them), tail regressors
    /// `tail_vals` at tail positions `tail_start..` (parameters `head + tail_start ..`),
    /// outputs `y`, weight `w`. The same row as `add_sparse_row` with the indices
    /// `0..head` and `head + tail_start ..`, with the same checks: a row of zero weight
    /// or with a non-finite value is ignored; wrong lengths, a tail past the last
    /// parameter or wider than the bandwidth are an internal error.
    pub fn add_dense_head_row(
        &mut self,
        head_vals: &[f64],
        tail_start: usize,
        tail_vals: &[f64],
        y: &[f64],
        w: f64,
    ) -> Result<(), Error> {
        let (p, m) = (self.names.len(), self.head);
        let tail_end = tail_start + tail_vals.len();
        if head_vals.len() != m
            || y.len() != self.outputs
            || m + tail_end > p
            || tail_vals.len() > self.bandwidth + 1
        {
            return Err(Error::Internal(format!(
                "arrow fit: a row of {} head and {} tail values from tail position {tail_start} does not fit {p} parameters, head {m}, bandwidth {}",
                head_vals.len(),
                tail_vals.len(),
                self.bandwidth
            )));
        }
        let finite = |v: &[f64]| v.iter().all(|x| x.is_finite());
        if w <= 0.0 || !w.is_finite() || !(finite(head_vals) && finite(tail_vals) && finite(y)) {
            return Ok(());
        }
        self.accumulate_dense_head(head_vals, tail_start, tail_vals, y, w);
        self.rows += 1;
        Ok(())
    }

    /// The sums of a checked row (see [`Self::add_dense_head_row`]). Matrices are
    /// column-major: entry (r, c) of an R-row matrix is element r + c·R. Heads of up to
    /// eight regressors and tails of up to four take a copy of their loops with the
    /// length fixed at compile time (unrolled; loops over a handful of entries otherwise
    /// cost more than their products).
    fn accumulate_dense_head(&mut self, x: &[f64], ts: usize, xt: &[f64], y: &[f64], w: f64) {
        let (p, k, stride) = (self.names.len(), self.outputs, self.bandwidth + 1);
        let sums = HeadSums {
            a: self.a.as_mut_slice(),
            c: self.c.as_mut_slice(),
            xty: self.xty.as_mut_slice(),
            p,
            ts,
        };
        match x.len() {
            1 => sums.add::<1>(x, xt, y, w),
            2 => sums.add::<2>(x, xt, y, w),
            3 => sums.add::<3>(x, xt, y, w),
            4 => sums.add::<4>(x, xt, y, w),
            5 => sums.add::<5>(x, xt, y, w),
            6 => sums.add::<6>(x, xt, y, w),
            7 => sums.add::<7>(x, xt, y, w),
            8 => sums.add::<8>(x, xt, y, w),
            _ => sums.add_any(x, xt, y, w),
        }
        let m = x.len();
        let tail = TailSums {
            band: &mut self.band[ts * stride..],
            stride,
            xty: self.xty.as_mut_slice(),
            p,
            first: m + ts,
        };
        match xt.len() {
            1 => tail.add::<1>(xt, y, w),
            2 => tail.add::<2>(xt, y, w),
            3 => tail.add::<3>(xt, y, w),
            4 => tail.add::<4>(xt, y, w),
            _ => tail.add_any(xt, y, w),
        }
        let yty = self.yty.as_mut_slice();
        for (j, &yj) in y.iter().enumerate() {
            let wyj = w * yj;
            for (l, &yl) in y.iter().enumerate().skip(j) {
                yty[j + l * k] += wyj * yl;
            }
        }
    }
}

/// The sums only a row's tail takes part in: the band rows from the row's first tail
/// parameter on, and the tail rows (from parameter `first`) of Σ w x yᵀ (p×k).
struct TailSums<'s> {
    band: &'s mut [f64],
    stride: usize,
    xty: &'s mut [f64],
    p: usize,
    first: usize,
}

impl TailSums<'_> {
    /// For a tail of exactly `T` regressors.
    #[inline]
    fn add<const T: usize>(self, xt: &[f64], y: &[f64], w: f64) {
        let xt: &[f64; T] = xt.try_into().expect("tail of T regressors");
        let wx: [f64; T] = std::array::from_fn(|t| w * xt[t]);
        for t in 0..T {
            let row = &mut self.band[t * self.stride..][..T - t];
            for o in 0..T - t {
                row[o] += wx[t] * xt[t + o];
            }
        }
        for (j, &yj) in y.iter().enumerate() {
            let col: &mut [f64; T] = (&mut self.xty[j * self.p + self.first..][..T])
                .try_into()
                .expect("rows");
            for t in 0..T {
                col[t] += wx[t] * yj;
            }
        }
    }

    /// For a tail of any length.
    fn add_any(self, xt: &[f64], y: &[f64], w: f64) {
        for (t, &xa) in xt.iter().enumerate() {
            let wxa = w * xa;
            let row = &mut self.band[t * self.stride..][..xt.len() - t];
            for (s, &xb) in row.iter_mut().zip(&xt[t..]) {
                *s += wxa * xb;
            }
        }
        for (j, &yj) in y.iter().enumerate() {
            for (s, &xa) in self.xty[j * self.p + self.first..].iter_mut().zip(xt) {
                *s += w * xa * yj;
            }
        }
    }
}

/// The sums a row's head takes part in: the head block `a` (m×m, upper triangle), the
/// head × tail block `c` (m×d) and the head rows of Σ w x yᵀ (p×k), column-major.
struct HeadSums<'s> {
    a: &'s mut [f64],
    c: &'s mut [f64],
    xty: &'s mut [f64],
    p: usize,
    ts: usize,
}

impl HeadSums<'_> {
    /// For a head of exactly `M` regressors.
    #[inline]
    fn add<const M: usize>(self, x: &[f64], xt: &[f64], y: &[f64], w: f64) {
        let x: &[f64; M] = x.try_into().expect("head of M regressors");
        // w·xᵣ once per row: the same first product as `w * x[r] * x[b]`.
        let wx: [f64; M] = std::array::from_fn(|r| w * x[r]);
        for (b, &xb) in x.iter().enumerate() {
            let col: &mut [f64; M] = (&mut self.a[b * M..][..M]).try_into().expect("column");
            for r in 0..=b {
                col[r] += wx[r] * xb;
            }
        }
        for (t, &xb) in xt.iter().enumerate() {
            let col: &mut [f64; M] = (&mut self.c[(self.ts + t) * M..][..M])
                .try_into()
                .expect("column");
            for r in 0..M {
                col[r] += wx[r] * xb;
            }
        }
        for (j, &yj) in y.iter().enumerate() {
            let col: &mut [f64; M] = (&mut self.xty[j * self.p..][..M])
                .try_into()
                .expect("column");
            for r in 0..M {
                col[r] += wx[r] * yj;
            }
        }
    }

    /// For a head of any length.
    fn add_any(self, x: &[f64], xt: &[f64], y: &[f64], w: f64) {
        let m = x.len();
        for (b, col) in self.a.chunks_exact_mut(m).enumerate() {
            let xb = x[b];
            for (s, &xa) in col[..=b].iter_mut().zip(x) {
                *s += w * xa * xb;
            }
        }
        for (t, &xb) in xt.iter().enumerate() {
            for (s, &xa) in self.c[(self.ts + t) * m..][..m].iter_mut().zip(x) {
                *s += w * xa * xb;
            }
        }
        for (j, &yj) in y.iter().enumerate() {
            for (s, &xa) in self.xty[j * self.p..][..m].iter_mut().zip(x) {
                *s += w * xa * yj;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::tests::hat_rows;
    use super::*;

    /// The same rows through both entry points give bit-identical fits: the hat basis
    /// (bandwidth 1, tail of two) and a dense polynomial tail (the whole tail in one run).
    #[test]
    fn dense_head_rows_sum_what_sparse_rows_sum() {
        for m in [5, 10] {
            hat_rows_agree(m);
        }
        for d in [4, 7] {
            polynomial_rows_agree(d);
        }
    }

    /// Hat-basis rows with a head of `m` (a fixed-length and a general head loop).
    fn hat_rows_agree(m: usize) {
        let (n, d) = (500, 17);
        let names: Vec<String> = (0..m + d).map(|q| format!("x{q}")).collect();
        let mut sparse = ArrowLeastSquares::new(names.clone(), m, 1, 3).unwrap();
        let mut dense = ArrowLeastSquares::new(names, m, 1, 3).unwrap();
        for (i, (idx, vals, y, w)) in hat_rows(n, m, d, 11).into_iter().enumerate() {
            let mut vals = vals;
            if i == 40 {
                vals[2] = f64::NAN; // ignored by both
            }
            sparse.add_sparse_row(&idx, &vals, &y, w).unwrap();
            dense
                .add_dense_head_row(&vals[..m], idx[m] - m, &vals[m..], &y, w)
                .unwrap();
        }
        assert_eq!(sparse.rows, dense.rows);
        assert_eq!(sparse.a, dense.a);
        assert_eq!(sparse.c, dense.c);
        assert_eq!(sparse.band, dense.band);
        assert_eq!(sparse.xty, dense.xty);
        assert_eq!(sparse.yty, dense.yty);
        let (fs, fd) = (sparse.solve().unwrap(), dense.solve().unwrap());
        assert_eq!(fs.coefficients, fd.coefficients);
        assert_eq!(fs.normal_inverse, fd.normal_inverse);
    }

    /// A dense polynomial tail of `d` terms: the whole tail in one run.
    fn polynomial_rows_agree(d: usize) {
        let m = 2;
        let names: Vec<String> = (0..m + d).map(|q| format!("x{q}")).collect();
        let mut sparse = ArrowLeastSquares::new(names.clone(), m, d - 1, 2).unwrap();
        let mut dense = ArrowLeastSquares::new(names, m, d - 1, 2).unwrap();
        let idx: Vec<usize> = (0..m + d).collect();
        for i in 0..50 {
            let t = i as f64 / 49.0 - 0.5;
            let mut vals = vec![t.sin(), (3.0 * t).cos()];
            vals.extend((0..d).map(|e| t.powi(e as i32)));
            let y = [2.0 * vals[0] + t, 0.1 * i as f64];
            sparse.add_sparse_row(&idx, &vals, &y, 1.5).unwrap();
            dense
                .add_dense_head_row(&vals[..m], 0, &vals[m..], &y, 1.5)
                .unwrap();
        }
        assert_eq!(sparse.a, dense.a);
        assert_eq!(sparse.c, dense.c);
        assert_eq!(sparse.band, dense.band);
        assert_eq!(sparse.xty, dense.xty);
        assert_eq!(sparse.yty, dense.yty);
    }

    #[test]
    fn a_dense_head_row_that_does_not_fit_is_an_internal_error() {
        let names: Vec<String> = (0..6).map(|q| format!("x{q}")).collect();
        let mut f = ArrowLeastSquares::new(names, 2, 1, 1).unwrap();
        let bad = [
            f.add_dense_head_row(&[1.0], 0, &[1.0, 1.0], &[0.0], 1.0), // head too short
            f.add_dense_head_row(&[1.0, 1.0], 3, &[1.0, 1.0], &[0.0], 1.0), // past the end
            f.add_dense_head_row(&[1.0, 1.0], 0, &[1.0; 3], &[0.0], 1.0), // wider than the band
            f.add_dense_head_row(&[1.0, 1.0], 0, &[1.0, 1.0], &[0.0, 0.0], 1.0), // outputs
        ];
        assert!(bad.iter().all(|e| matches!(e, Err(Error::Internal(_)))));
        assert!(f
            .add_dense_head_row(&[1.0, 1.0], 2, &[1.0, 1.0], &[0.0], 1.0)
            .is_ok());
        assert_eq!(f.rows, 1);
    }
}
