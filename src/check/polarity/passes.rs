//! The least-squares passes of the polarity check and what is measured from them: one
//! fit with lag-shifted commands, remanence and drift terms; transient rows after edges;
//! the field minus drift; settle times and steps after pulses; decimated plot series.

use crate::fit::arrow::ArrowLeastSquares;
use crate::fit::linear::LinearFit;
use crate::Error;

use super::rise::Response;
use super::timing::{self, AfterPulse, Pulse};
use super::PolaritySeries;

/// Where the head regressors of a row (commands, then remanence terms) come from.
pub(super) trait Drive {
    /// Write row i's head regressors into `out` (commands, then remanence terms); false
    /// when the row has no command (its delayed command precedes the log).
    fn head(&self, ctx: &FitContext, i: usize, out: &mut [f64]) -> bool;
}

/// Commands held from the row `rows[i]` (a pure delay, zero-order hold).
impl Drive for [Option<usize>] {
    #[inline]
    fn head(&self, ctx: &FitContext, i: usize, out: &mut [f64]) -> bool {
        let Some(j) = self[i] else { return false };
        let nc = ctx.columns.len();
        for (c, col) in ctx.columns.iter().enumerate() {
            out[c] = col[j];
        }
        for (r, (_, state)) in ctx.rem.iter().enumerate() {
            out[nc + r] = state[j];
        }
        true
    }
}

impl Drive for Vec<Option<usize>> {
    #[inline]
    fn head(&self, ctx: &FitContext, i: usize, out: &mut [f64]) -> bool {
        self.as_slice().head(ctx, i, out)
    }
}

/// Commands after the delay and the first-order rise.
impl Drive for Response {
    #[inline]
    fn head(&self, ctx: &FitContext, i: usize, out: &mut [f64]) -> bool {
        if !self.valid[i] {
            return false;
        }
        let nc = ctx.columns.len();
        for (c, col) in self.commands.iter().enumerate() {
            out[c] = col[i];
        }
        for (r, state) in self.rem.iter().enumerate() {
            out[nc + r] = state[i];
        }
        true
    }
}

/// What every fitting pass shares.
pub(super) struct FitContext<'a> {
    pub(super) t: &'a [f64],
    pub(super) b: &'a [Vec<f64>; 3],
    pub(super) columns: &'a [&'a [f64]],
    pub(super) names: &'a [String],
    /// Held sign of the last pulse, per command column that has one.
    pub(super) rem: &'a [(usize, Vec<f64>)],
    /// Rows never used: saturated readings.
    pub(super) excluded: Vec<bool>,
    /// Lag, s (only for guard windows; the fit's shift comes as `rows`).
    pub(super) lag_s: f64,
    pub(super) basis: &'a timing::DriftBasis,
    pub(super) centre: [f64; 3],
}

#[allow(clippy::needless_range_loop)] // rows, shifted rows and columns are indexed together
impl FitContext<'_> {
    /// One least-squares pass with lag-shifted commands; rows within `guard[c]` seconds
    /// after an edge of command column c get zero weight.
    pub(super) fn fit<D: Drive + ?Sized>(
        &self,
        drive: &D,
        pulses: &[Pulse],
        guard: &[f64],
        reject: Option<&[bool]>,
    ) -> Result<LinearFit, Error> {
        let nc = self.columns.len();
        let nr = self.rem.len();
        let nd = self.basis.len();
        let mut names: Vec<String> = self.names.iter().map(|n| format!("cmd_{n}")).collect();
        names.extend(
            self.rem
                .iter()
                .map(|(c, _)| format!("remanence_{}", self.names[*c])),
        );
        names.extend(self.basis.names());
        // Commands and remanence are dense; the drift terms have local support (banded).
        let mut ls = ArrowLeastSquares::new(names, nc + nr, self.basis.bandwidth(), 3)?;
        let mut weight = vec![1.0; self.t.len()];
        let n = self.t.len();
        for (i, w) in weight.iter_mut().enumerate() {
            if self.excluded[i] || reject.is_some_and(|r| r[i]) {
                *w = 0.0;
            }
        }
        for p in pulses {
            let g = guard[p.column];
            if g <= 0.0 {
                continue;
            }
            for edge in [p.start, p.end] {
                let Some(&t_edge) = self.t.get(edge) else {
                    continue;
                };
                let lo = self
                    .t
                    .partition_point(|&x| x < t_edge + self.lag_s.min(0.0));
                let hi = self.t.partition_point(|&x| x < t_edge + g);
                weight[lo..hi].iter_mut().for_each(|w| *w = 0.0);
            }
        }
        let mut x = vec![0.0; nc + nr + nd];
        for i in 0..n {
            if weight[i] <= 0.0 || !drive.head(self, i, &mut x[..nc + nr]) {
                continue;
            }
            let (head, tail) = x.split_at_mut(nc + nr);
            let range = self.basis.fill(self.t[i], tail);
            let y = [
                self.b[0][i] - self.centre[0],
                self.b[1][i] - self.centre[1],
                self.b[2][i] - self.centre[2],
            ];
            ls.add_dense_head_row(head, range.start, &tail[range], &y, weight[i])?;
        }
        ls.solve()
    }

    /// Transient rows after command edges: walking forward from each edge (at most
    /// `max_s`), rows whose residual exceeds 5 times the larger of the white-noise σ and
    /// the residuals' robust σ (1.4826·MAD) on any axis, up to the first three rows in a
    /// row that do not. Only the run right after an edge is taken, so the steady part of
    /// a pulse can never be set aside. The walk does not stop before the lag has passed.
    pub(super) fn transients<D: Drive + ?Sized>(
        &self,
        fit: &LinearFit,
        rows: &D,
        noise: [f64; 3],
        pulses: &[Pulse],
        max_s: f64,
    ) -> Vec<bool> {
        let res = self.residuals(fit, rows);
        let limit: [f64; 3] = std::array::from_fn(|a| {
            let mut abs: Vec<f64> = res[a]
                .iter()
                .filter(|v| v.is_finite())
                .map(|v| v.abs())
                .collect();
            let robust = 1.4826 * timing::median(&mut abs).unwrap_or(0.0);
            5.0 * robust.max(noise[a]).max(1e-9)
        });
        let off = |i: usize| (0..3).any(|a| res[a][i].is_finite() && res[a][i].abs() > limit[a]);
        let n = self.t.len();
        let mut reject = vec![false; n];
        for p in pulses {
            for edge in [p.start, p.end] {
                let Some(&t_edge) = self.t.get(edge) else {
                    continue;
                };
                let lo = self
                    .t
                    .partition_point(|&x| x < t_edge + self.lag_s.min(0.0));
                let hi = self.t.partition_point(|&x| x < t_edge + max_s);
                let mut quiet = 0;
                let mut last_off = None;
                for i in lo..hi {
                    if off(i) {
                        last_off = Some(i);
                        quiet = 0;
                    } else {
                        quiet += 1;
                        // Before the lag has passed the model and the data agree trivially.
                        if quiet >= 3 && self.t[i] >= t_edge + self.lag_s {
                            break;
                        }
                    }
                }
                if let Some(last) = last_off {
                    reject[lo..=last].iter_mut().for_each(|r| *r = true);
                }
            }
        }
        reject
    }

    /// Residual of every row per axis (NaN for rows without a command).
    pub(super) fn residuals<D: Drive + ?Sized>(&self, fit: &LinearFit, drive: &D) -> [Vec<f64>; 3] {
        let p = fit.names.len();
        let mut x = vec![0.0; p];
        let head = self.columns.len() + self.rem.len();
        // Column a of the p×3 coefficient matrix (column-major) is contiguous.
        let rows = fit.coefficients.nrows();
        let coef: [&[f64]; 3] =
            std::array::from_fn(|a| &fit.coefficients.as_slice()[a * rows..][..rows]);
        let mut out: [Vec<f64>; 3] = std::array::from_fn(|_| Vec::with_capacity(self.t.len()));
        for i in 0..self.t.len() {
            if !drive.head(self, i, &mut x[..head]) {
                out.iter_mut().for_each(|o| o.push(f64::NAN));
                continue;
            }
            let range = self.basis.fill(self.t[i], &mut x[head..]);
            let tail = range.start + head..range.end + head;
            for (a, o) in out.iter_mut().enumerate() {
                // Head terms, then the drift terms in order, from −0 as `Iterator::sum`
                // adds: the same value bit for bit as summing the chained terms.
                let c = coef[a];
                let mut model = -0.0;
                for (xq, cq) in x[..head].iter().zip(&c[..head]) {
                    model += xq * cq;
                }
                for (xq, cq) in x[tail.clone()].iter().zip(&c[tail.clone()]) {
                    model += xq * cq;
                }
                o.push(self.b[a][i] - self.centre[a] - model);
            }
        }
        out
    }

    /// Field minus the fitted drift (and centre), per axis.
    pub(super) fn minus_drift(&self, fit: &LinearFit) -> [Vec<f64>; 3] {
        let nc = self.columns.len() + self.rem.len();
        let nd = self.basis.len();
        let mut out: [Vec<f64>; 3] = std::array::from_fn(|_| Vec::with_capacity(self.t.len()));
        let mut basis = vec![0.0; nd];
        for i in 0..self.t.len() {
            // Only the written range is valid (a knot basis leaves the rest untouched).
            let range = self.basis.fill(self.t[i], &mut basis);
            for (a, o) in out.iter_mut().enumerate() {
                let drift: f64 = range
                    .clone()
                    .map(|k| basis[k] * fit.coefficients[(nc + k, a)])
                    .sum();
                o.push(self.b[a][i] - self.centre[a] - drift);
            }
        }
        out
    }

    /// Settle time and step after every pulse whose off window is free of other pulses.
    pub(super) fn after_pulses(
        &self,
        fit: &LinearFit,
        pulses: &[Pulse],
        lag_s: f64,
        noise: [f64; 3],
    ) -> (Vec<Option<AfterPulse>>, [Vec<f64>; 3]) {
        let d = self.minus_drift(fit);
        let n = self.t.len();
        let t = self.t;
        // Row at or after a time.
        let row_at = |time: f64| t.partition_point(|&x| x < time);
        // Latest end among earlier pulses, earliest start among later ones.
        let mut prev_ends = Vec::with_capacity(pulses.len());
        let mut latest = 0;
        for p in pulses {
            prev_ends.push(latest);
            latest = latest.max(p.end);
        }
        let mut next_starts = vec![n; pulses.len()];
        let mut earliest = n;
        for (k, p) in pulses.iter().enumerate().rev() {
            next_starts[k] = earliest;
            earliest = earliest.min(p.start);
        }
        let out = pulses
            .iter()
            .enumerate()
            .map(|(k, p)| {
                if p.end >= n {
                    return None;
                }
                let prev_end = prev_ends[k];
                if prev_end > p.start {
                    return None; // overlapping pulses: no clean window
                }
                let next_start = next_starts[k];
                if next_start < p.end {
                    return None;
                }
                let shift = |row: usize| {
                    row_at(t.get(row).copied().unwrap_or(t[n - 1] + 1.0) + lag_s.max(0.0)).min(n)
                };
                // A window ends where the next command starts (its response cannot come
                // earlier unless the lag is negative).
                let end_at = |row: usize| {
                    row_at(t.get(row).copied().unwrap_or(t[n - 1] + 1.0) + lag_s.min(0.0)).min(n)
                };
                let pre = shift(prev_end)..end_at(p.start).max(shift(prev_end));
                let post = shift(p.end)..end_at(next_start).max(shift(p.end));
                timing::after_pulse(&d, t, pre, post, t[p.end], noise)
            })
            .collect();
        (out, d)
    }

    /// Series for plots: the model from `drive`, the commands from `rows`; every row
    /// where `dense` is true, elsewhere an evenly thinned subset.
    pub(super) fn series<D: Drive + ?Sized>(
        &self,
        fit: &LinearFit,
        drive: &D,
        rows: &[Option<usize>],
        d: &[Vec<f64>; 3],
        dense: &[bool],
    ) -> PolaritySeries {
        let n = self.t.len();
        let nc = self.columns.len();
        let mut head = vec![0.0; nc + self.rem.len()];
        let step = n.div_ceil(PolaritySeries::MAX_POINTS).max(1);
        let mut s = PolaritySeries {
            commands: vec![Vec::new(); nc],
            ..Default::default()
        };
        for i in (0..n).filter(|&i| i % step == 0 || dense.get(i) == Some(&true)) {
            s.t_s.push(self.t[i]);
            s.thinned.push(i % step == 0);
            let on = drive.head(self, i, &mut head);
            for a in 0..3 {
                s.field_minus_drift_nt[a].push(d[a][i]);
                let m: f64 = if on {
                    (0..nc).map(|c| head[c] * fit.coefficients[(c, a)]).sum()
                } else {
                    0.0
                };
                s.model_nt[a].push(m);
            }
            for (c, col) in self.columns.iter().enumerate() {
                s.commands[c].push(rows[i].map_or(0.0, |j| col[j]));
            }
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Field minus drift against the piecewise-linear baseline written out in closed form,
    // drift(t) = Σ_k β_k · max(0, 1 − |x − k|) with x = (t − t0)/spacing (the hat-function
    // basis of a linear spline), from the fitted coefficients. Weights of earlier knots
    // must not linger from row to row.
    #[test]
    fn field_minus_drift_equals_the_closed_form_baseline() {
        let n = 400;
        let t: Vec<f64> = (0..n).map(|i| i as f64 * 0.1).collect();
        let cmd: Vec<f64> = (0..n)
            .map(|i| match (i / 20) % 4 {
                1 => 1.0,
                3 => -1.0,
                _ => 0.0,
            })
            .collect();
        let b: [Vec<f64>; 3] = std::array::from_fn(|a| {
            (0..n)
                .map(|i| {
                    let ti = t[i];
                    (a as f64 + 1.0) * 30.0 * cmd[i] + 5.0 * (0.3 * ti).sin() + 2.0 * ti
                        - 40.0 * a as f64
                        + 0.01 * ((i * 7919) % 13) as f64
                })
                .collect()
        });
        let basis = timing::drift_basis(
            timing::DriftModel::Knots { spacing_s: 4.0 },
            t[0],
            t[n - 1] - t[0],
            2.0,
        );
        let columns: Vec<&[f64]> = vec![&cmd];
        let names = vec!["x".to_string()];
        let ctx = FitContext {
            t: &t,
            b: &b,
            columns: &columns,
            names: &names,
            rem: &[],
            excluded: vec![false; n],
            lag_s: 0.0,
            basis: &basis,
            centre: [1.0, 2.0, 3.0],
        };
        let pulses = timing::find_pulses(&columns);
        let fit = ctx
            .fit(&timing::shifted_rows(&t, 0.0), &pulses, &[0.0], None)
            .unwrap();
        let timing::DriftBasis::Knots {
            t0_s, spacing_s, ..
        } = basis
        else {
            panic!("knot basis expected");
        };
        let d = ctx.minus_drift(&fit);
        for i in 0..n {
            let x = (t[i] - t0_s) / spacing_s;
            for a in 0..3 {
                let drift: f64 = (0..basis.len())
                    .map(|k| (1.0 - (x - k as f64).abs()).max(0.0) * fit.coefficients[(1 + k, a)])
                    .sum();
                let want = b[a][i] - ctx.centre[a] - drift;
                assert!(
                    (d[a][i] - want).abs() < 1e-9,
                    "row {i} axis {a}: {} vs {want}",
                    d[a][i]
                );
            }
        }
    }
}
