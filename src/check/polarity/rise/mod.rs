//! The rise of each rod's field: the command, delayed by the lag (a pure delay common to
//! all rods), passes through a first-order lag of time constant τ fitted per command
//! column. [`first_order`] builds the modelled command; [`fit_rise`] estimates the lag
//! and every τ by least squares on the rows right after command edges, with the
//! couplings, remanence and drift held at a first fit's values.
//!
//! Model of one edge at tₑ (a change ΔM of the rod's target field, sensor frame, nT):
//! ΔM·h(t − tₑ − lag), h(s) = 1 − exp(−s/τ) for s ≥ 0 and 0 before (h is a step for
//! τ = 0). With the weights 1/σ²ₐ of the white noise per axis, the sum of squares of an
//! edge window is Σᵢ Σₐ wₐ (zᵢₐ − ΔMₐ hᵢ)², z the field minus everything else; it is
//! minimised on a grid of (lag, τ) and then by Gauss–Newton steps, and the 1σ of lag
//! and τ come from the Gauss–Newton normal matrix.

use super::warning::PolarityWarning;
use nalgebra::{DMatrix, Matrix3, Vector3};

use super::passes::FitContext;
use crate::fit::linear::LinearFit;

/// The command `u` (held from each sample to the next) delayed by `lag_s` and passed
/// through a first-order lag of time constant `tau_s` (0: none), at the sample times
/// `t_s`: Σ steps · (1 − exp(−(t − tⱼ − lag)/τ)) over the steps of u at rows j with
/// tⱼ ≤ t − lag, from the level u[0] held before the log. For τ = 0 this is the command
/// of the row that `timing::shifted_rows` picks.
pub fn first_order(t_s: &[f64], u: &[f64], lag_s: f64, tau_s: f64) -> Vec<f64> {
    let n = t_s.len().min(u.len());
    let mut out = Vec::with_capacity(n);
    let mut next = 1; // first row whose step is not yet applied
    let mut level = u.first().copied().unwrap_or(0.0);
    let mut tail = 0.0; // Σ steps · exp(−(t − tⱼ − lag)/τ)
    let mut t_prev = t_s.first().copied().unwrap_or(0.0);
    let (mut last_gap, mut decay) = (f64::NAN, 0.0);
    for &ti in &t_s[..n] {
        if tau_s > 0.0 {
            let gap = ti - t_prev;
            if gap.to_bits() != last_gap.to_bits() {
                decay = (-gap / tau_s).exp();
                last_gap = gap;
            }
            tail *= decay;
        }
        t_prev = ti;
        let target = ti - lag_s;
        while next < n && t_s[next] <= target {
            let step = u[next] - u[next - 1];
            if step != 0.0 {
                level = u[next];
                if tau_s > 0.0 {
                    tail += step * (-(target - t_s[next]) / tau_s).exp();
                }
            }
            next += 1;
        }
        out.push(level - tail);
    }
    out
}

/// Commands and remanence terms after the delay and rise, per row: the head regressors
/// of the final fit.
pub(super) struct Response {
    /// Modelled command per command column, command units.
    pub commands: Vec<Vec<f64>>,
    /// Modelled remanence state per remanence term (same order as `FitContext::rem`).
    pub rem: Vec<Vec<f64>>,
    /// Rows whose delayed command lies inside the log.
    pub valid: Vec<bool>,
}

impl Response {
    /// Build the modelled regressors for a lag and one τ per command column.
    pub fn new(ctx: &FitContext, lag_s: f64, tau_s: &[f64]) -> Self {
        let t = ctx.t;
        let commands = ctx
            .columns
            .iter()
            .zip(tau_s)
            .map(|(u, &tau)| first_order(t, u, lag_s, tau))
            .collect();
        let rem = ctx
            .rem
            .iter()
            .map(|(c, s)| first_order(t, s, lag_s, tau_s[*c]))
            .collect();
        let valid = t.iter().map(|&ti| ti - lag_s >= t[0]).collect();
        Self {
            commands,
            rem,
            valid,
        }
    }
}

/// Estimated delay and rise.
#[derive(Debug, Clone)]
pub(super) struct RiseFit {
    /// Pure delay common to all rods, s.
    pub lag_s: f64,
    /// 1σ of the delay, s.
    pub lag_sigma_s: f64,
    /// Rise time constant per command column, s (0: a step).
    pub tau_s: Vec<f64>,
    /// 1σ of τ per command column, s; `None` when it was not fitted (a step, a column
    /// without a response, or no edge far enough from the next).
    pub tau_sigma_s: Vec<Option<f64>>,
}

/// One edge window: the change ΔM of the target; per row the time since the edge, s,
/// p = Σₐ wₐ zₐ ΔMₐ and q = Σₐ wₐ zₐ²; and g = Σₐ wₐ ΔMₐ².
struct Edge {
    column: usize,
    g: f64,
    rows: Vec<(f64, f64, f64)>,
}

/// h(s) and its derivatives with respect to the lag and to τ.
#[inline]
fn step(s: f64, tau: f64) -> (f64, f64, f64) {
    if s < 0.0 {
        return (0.0, 0.0, 0.0);
    }
    if tau <= 0.0 || s > 40.0 * tau {
        return (1.0, 0.0, 0.0);
    }
    let e = (-s / tau).exp();
    (1.0 - e, -e / tau, -s * e / (tau * tau))
}

/// Σ over an edge's rows of q − 2hp + h²g: its weighted sum of squares (χ²).
fn edge_ss(e: &Edge, lag: f64, tau: f64) -> f64 {
    e.rows
        .iter()
        .map(|&(s0, p, q)| {
            let h = step(s0 - lag, tau).0;
            q + h * (h * e.g - 2.0 * p)
        })
        .sum()
}

mod refine;
#[cfg(test)]
mod tests;

use refine::gauss_newton;

/// What [`fit_rise`] needs: the first fit (commands held from the rows `rows`, at the
/// lag `lag0_s` of the cross-correlation) and the sampling.
pub(super) struct RiseInput<'a> {
    pub ctx: &'a FitContext<'a>,
    pub fit: &'a LinearFit,
    pub rows: &'a [Option<usize>],
    pub lag0_s: f64,
    pub dt_s: f64,
    pub noise_nt: [f64; 3],
    pub shortest_pulse_s: f64,
    pub snr_min: f64,
}

/// Edges per column used on the coarse grid, and in the Gauss–Newton refinement.
const COARSE_EDGES: usize = 8;
const FINE_EDGES: usize = 512;

impl RiseInput<'_> {
    /// Couplings and remanence of column c from the first fit: (C, R, remanence state).
    fn target(&self, c: usize) -> (Vector3<f64>, Vector3<f64>, Option<&[f64]>) {
        let nc = self.ctx.columns.len();
        let row = |q: usize| Vector3::from_fn(|a, _| self.fit.coefficients[(q, a)]);
        match self.ctx.rem.iter().position(|(rc, _)| *rc == c) {
            Some(r) => (row(c), row(nc + r), Some(&self.ctx.rem[r].1[..])),
            None => (row(c), Vector3::zeros(), None),
        }
    }

    /// |C| over its 1σ along C, from the first fit.
    fn snr(&self, c: usize) -> f64 {
        let (cc, _, _) = self.target(c);
        let cov = Matrix3::from_fn(|a, b| self.fit.covariance(c, a, c, b));
        match cc.try_normalize(0.0) {
            Some(u) => cc.norm() / (u.transpose() * cov * u)[0].max(1e-300).sqrt(),
            None => 0.0,
        }
    }

    /// Edge windows of column c: rows from `lo_off` to `hi_off` seconds after each edge
    /// (and before the next edge's `lo_off`), at most `max_edges` edges evenly taken.
    fn windows(
        &self,
        c: usize,
        resid: &[Vec<f64>; 3],
        lo_off: f64,
        hi_off: f64,
        max_edges: usize,
    ) -> Vec<Edge> {
        let (t, u) = (self.ctx.t, self.ctx.columns[c]);
        let (cc, rr, s) = self.target(c);
        let m = |j: usize| cc * u[j] + s.map_or(Vector3::zeros(), |s| rr * s[j]);
        let changed = |j: usize| {
            (u[j] - u[j - 1]).abs() > 0.0 || s.is_some_and(|s| (s[j] - s[j - 1]).abs() > 0.0)
        };
        let edges: Vec<usize> = (1..t.len()).filter(|&j| changed(j)).collect();
        let w: [f64; 3] = std::array::from_fn(|a| 1.0 / self.noise_nt[a].max(1e-6).powi(2));
        let stride = edges.len().div_ceil(max_edges.max(1)).max(1);
        let mut out = Vec::new();
        for k in (0..edges.len()).step_by(stride) {
            let (j, te) = (edges[k], t[edges[k]]);
            let end = edges.get(k + 1).map_or(f64::INFINITY, |&jn| t[jn] + lo_off);
            let lo = t.partition_point(|&x| x < te + lo_off);
            let hi = t.partition_point(|&x| x < (te + hi_off).min(end));
            let (before, dm) = (m(j - 1), m(j) - m(j - 1));
            let g = (0..3).map(|a| w[a] * dm[a] * dm[a]).sum();
            let rows = (lo..hi)
                .filter(|&i| !self.ctx.excluded[i] && resid[0][i].is_finite())
                .filter_map(|i| {
                    let z = Vector3::from_fn(|a, _| resid[a][i]) + m(self.rows[i]?) - before;
                    let p = (0..3).map(|a| w[a] * z[a] * dm[a]).sum();
                    let q = (0..3).map(|a| w[a] * z[a] * z[a]).sum();
                    Some((t[i] - te, p, q))
                })
                .collect();
            out.push(Edge { column: c, g, rows });
        }
        out
    }
}

/// χ² of every edge of the given columns at one lag, with τ per column.
fn total_ss(edges: &[Edge], lag: f64, tau: &[f64]) -> f64 {
    edges.iter().map(|e| edge_ss(e, lag, tau[e.column])).sum()
}

/// Middle of the run of grid lags whose χ² equals the smallest within 1e-9 (relative):
/// a step response is the same for every lag within one sample interval.
fn plateau_middle(lags: &[f64], totals: &[f64]) -> f64 {
    let k = (0..lags.len())
        .min_by(|&a, &b| totals[a].total_cmp(&totals[b]))
        .unwrap_or(0);
    let same = |j: usize| (totals[j] - totals[k]).abs() <= 1e-9 * totals[k].abs();
    let (mut left, mut right) = (k, k);
    while left > 0 && same(left - 1) {
        left -= 1;
    }
    while right + 1 < lags.len() && same(right + 1) {
        right += 1;
    }
    0.5 * (lags[left] + lags[right])
}

/// Estimate the delay and the rise time constant of every column with a response (see
/// the module doc). A rise is kept only where it is fitted at more than twice its 1σ;
/// otherwise the column's response is a step (τ = 0), as are those of columns below the
/// SNR threshold or without an edge window. Warnings name limits that were reached.
pub(super) fn fit_rise(inp: &RiseInput, warnings: &mut Vec<PolarityWarning>) -> RiseFit {
    let search = RiseSearch::new(inp);
    let (lag0, mut tau) = search.coarse_grid();
    // Gauss–Newton refinement of the lag and every τ > 0, on more edges; rises not
    // fitted at more than 2σ are dropped and the rest refitted.
    loop {
        let free: Vec<usize> = search
            .active
            .iter()
            .copied()
            .filter(|&c| tau[c] > 0.0)
            .collect();
        if free.is_empty() {
            return search.step_fit(warnings);
        }
        let fine = search.fine_windows(lag0, &tau);
        let mut t = tau.clone();
        let dt = inp.dt_s;
        let bounds = (lag0 - 1.5 * dt, lag0 + 1.5 * dt);
        let (lag, cov) = gauss_newton(&fine, &free, lag0, &mut t, bounds, dt / 100.0);
        let Some(cov) = cov else {
            return search.step_fit(warnings);
        };
        let weak = weak_rises(&free, &t, &cov);
        if !weak.is_empty() {
            weak.iter().for_each(|&c| tau[c] = 0.0);
            continue;
        }
        return search.accept(lag, t, &free, &cov, warnings);
    }
}

/// Sampling, limits and edge windows shared by the steps of [`fit_rise`].
struct RiseSearch<'a> {
    inp: &'a RiseInput<'a>,
    /// Residuals of the first fit per sensor axis, nT (NaN where a row has no command).
    resid: [Vec<f64>; 3],
    /// Command columns at or above the SNR threshold: the ones whose rise is fitted.
    active: Vec<usize>,
    /// Largest τ searched, s: a tenth of the shortest pulse, at least two samples.
    tau_max: f64,
    /// Lags of the coarse grid, s: quarter samples from 3 before to 1.5 after the
    /// cross-correlation's lag.
    lags: Vec<f64>,
    /// Edge windows of the active columns for the coarse grid.
    coarse: Vec<Edge>,
}

impl<'a> RiseSearch<'a> {
    /// The first fit's residuals, the active columns, the grid of lags and the coarse
    /// edge windows.
    fn new(inp: &'a RiseInput<'a>) -> Self {
        let nc = inp.ctx.columns.len();
        let dt = inp.dt_s;
        let tau_max = (0.1 * inp.shortest_pulse_s).max(2.0 * dt);
        let (d_lo, d_hi) = (inp.lag0_s - 3.0 * dt, inp.lag0_s + 1.5 * dt);
        let resid = inp.ctx.residuals(inp.fit, inp.rows);
        let active: Vec<usize> = (0..nc).filter(|&c| inp.snr(c) >= inp.snr_min).collect();
        let coarse: Vec<Edge> = active
            .iter()
            .flat_map(|&c| inp.windows(c, &resid, d_lo, d_hi + 4.0 * tau_max, COARSE_EDGES))
            .collect();
        let lags: Vec<f64> = (0..=18).map(|k| d_lo + k as f64 * dt / 4.0).collect();
        RiseSearch {
            inp,
            resid,
            active,
            tau_max,
            lags,
            coarse,
        }
    }

    /// Every response a step (τ = 0): the lag in the middle of the coarse grid's
    /// plateau (the cross-correlation's lag without any edge row), its 1σ one sample
    /// interval over √12.
    fn step_fit(&self, warnings: &mut Vec<PolarityWarning>) -> RiseFit {
        let nc = self.inp.ctx.columns.len();
        let zero = vec![0.0; nc];
        let totals: Vec<f64> = self
            .lags
            .iter()
            .map(|&d| total_ss(&self.coarse, d, &zero))
            .collect();
        let lag = if self.coarse.iter().all(|e| e.rows.is_empty()) {
            self.inp.lag0_s
        } else {
            plateau_middle(&self.lags, &totals)
        };
        warn_lag_edge(lag, &self.lags, warnings);
        RiseFit {
            lag_s: lag,
            lag_sigma_s: self.inp.dt_s / 12f64.sqrt(),
            tau_s: zero,
            tau_sigma_s: vec![None; nc],
        }
    }

    /// Coarse grid: per lag, the best τ of each active column on a log grid (and 0);
    /// returns the lag in the middle of the best plateau, s, and the τ per column
    /// there, s.
    fn coarse_grid(&self) -> (f64, Vec<f64>) {
        let (nc, dt) = (self.inp.ctx.columns.len(), self.inp.dt_s);
        let taus: Vec<f64> = std::iter::once(0.0)
            .chain((0..10).map(|k| dt / 16.0 * (16.0 * self.tau_max / dt).powf(k as f64 / 9.0)))
            .collect();
        let by_column: Vec<Vec<&Edge>> = (0..nc)
            .map(|c| self.coarse.iter().filter(|e| e.column == c).collect())
            .collect();
        let totals: Vec<f64> = self
            .lags
            .iter()
            .map(|&d| self.best_taus(&by_column, &taus, d).0)
            .collect();
        let lag0 = plateau_middle(&self.lags, &totals);
        (lag0, self.best_taus(&by_column, &taus, lag0).1)
    }

    /// At one lag (s), each active column's τ from `taus` with the smallest χ² over its
    /// edges `by_column[c]`: (the sum of those χ², τ per column).
    fn best_taus(&self, by_column: &[Vec<&Edge>], taus: &[f64], lag: f64) -> (f64, Vec<f64>) {
        let mut best = vec![0.0; by_column.len()];
        let mut total = 0.0;
        for &c in &self.active {
            let (ss, t) = taus
                .iter()
                .map(|&t| {
                    (
                        by_column[c].iter().map(|e| edge_ss(e, lag, t)).sum::<f64>(),
                        t,
                    )
                })
                .fold((f64::INFINITY, 0.0), |a, b| if b.0 < a.0 { b } else { a });
            best[c] = t;
            total += ss;
        }
        (total, best)
    }

    /// Edge windows of the active columns for the refinement around the lag `lag0`
    /// (s): from 1.5 samples before it to ten rise times (capped at `tau_max`) after.
    fn fine_windows(&self, lag0: f64, tau: &[f64]) -> Vec<Edge> {
        let dt = self.inp.dt_s;
        self.active
            .iter()
            .flat_map(|&c| {
                let hi = lag0 + 1.5 * dt + 10.0 * (2.0 * tau[c]).min(self.tau_max);
                self.inp
                    .windows(c, &self.resid, lag0 - 1.5 * dt, hi, FINE_EDGES)
            })
            .collect()
    }

    /// The refined fit: the lag and its 1σ (s), every τ (s) with the 1σ of the `free`
    /// ones from `cov` (parameter order: lag, then `free`); warns of a τ at its limit.
    fn accept(
        &self,
        lag: f64,
        tau_s: Vec<f64>,
        free: &[usize],
        cov: &DMatrix<f64>,
        warnings: &mut Vec<PolarityWarning>,
    ) -> RiseFit {
        let sigma = |k: usize| cov[(k, k)].max(0.0).sqrt();
        let mut tau_sigma_s = vec![None; self.inp.ctx.columns.len()];
        for (k, &c) in free.iter().enumerate() {
            tau_sigma_s[c] = Some(sigma(k + 1));
            if tau_s[c] >= 0.99 * self.tau_max {
                warnings.push(PolarityWarning::RiseAtLimit {
                    column: self.inp.ctx.names[c].clone(),
                    tau_max_s: self.tau_max,
                });
            }
        }
        warn_lag_edge(lag, &self.lags, warnings);
        RiseFit {
            lag_s: lag,
            lag_sigma_s: sigma(0),
            tau_s,
            tau_sigma_s,
        }
    }
}

/// The `free` columns whose fitted τ (`tau`, s) is not more than twice its 1σ from
/// `cov` (parameter order: lag, then `free`).
fn weak_rises(free: &[usize], tau: &[f64], cov: &DMatrix<f64>) -> Vec<usize> {
    let sigma = |k: usize| cov[(k, k)].max(0.0).sqrt();
    (0..free.len())
        .filter(|&k| tau[free[k]] <= 2.0 * sigma(k + 1))
        .map(|k| free[k])
        .collect()
}

/// Warn when the delay lies at an end of the lags searched.
fn warn_lag_edge(lag: f64, lags: &[f64], warnings: &mut Vec<PolarityWarning>) {
    let (lo, hi) = (lags[0], lags[lags.len() - 1]);
    if lag <= lo + 1e-12 || lag >= hi - 1e-12 {
        warnings.push(PolarityWarning::RiseDelayAtEdge {
            lag_s: lag,
            lo_s: lo,
            hi_s: hi,
        });
    }
}
