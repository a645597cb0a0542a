//! The least-squares passes of the polarity check, in order (module doc, steps 2–3):
//! pass 1 without lag gives the couplings that the lag's matched filter projects on;
//! pass 2 with the lag, refitted without the transient rows after edges; then the delay
//! and each rod's rise (`rise`) and pass 3 with the commands passed through them.

use nalgebra::Vector3;

use super::commands::Sampling;
use super::passes::FitContext;
use super::rise::{self, Response, RiseFit, RiseInput};
use super::timing::{self, Pulse};
use super::warning::PolarityWarning;
use crate::fit::linear::LinearFit;
use crate::Error;

/// The final fit and the delay and rise behind its modelled commands.
pub(super) struct FinalFit {
    /// Pass 3: commands through the delay and rise, remanence and drift terms.
    pub(super) fit: LinearFit,
    /// The modelled commands (head regressors) of `fit`, per row.
    pub(super) response: Response,
    /// The pure delay (s) and each command column's rise time constant (s).
    pub(super) rise: RiseFit,
}

/// What the passes share besides the [`FitContext`].
pub(super) struct PassInput<'a> {
    /// The pulses of every command column.
    pub(super) pulses: &'a [Pulse],
    /// Sampling interval and pulse durations.
    pub(super) sampling: &'a Sampling,
    /// White-noise σ per sensor axis, nT.
    pub(super) noise_nt: [f64; 3],
    /// SNR below which a column's rise is not fitted.
    pub(super) snr_min: f64,
    /// Largest lag searched, s (`None`: half the shortest pulse, at most 2 s).
    pub(super) max_lag_s: Option<f64>,
}

impl PassInput<'_> {
    /// How far after an edge transient rows are looked for, s: half the shortest pulse
    /// plus a positive lag `lag_s`.
    fn transient_window_s(&self, lag_s: f64) -> f64 {
        0.5 * self.sampling.shortest_pulse_s + lag_s.max(0.0)
    }
}

/// Run the three passes; leaves `ctx.lag_s` at the final delay, s.
pub(super) fn fit_passes(
    ctx: &mut FitContext,
    inp: &PassInput,
    warnings: &mut Vec<PolarityWarning>,
) -> Result<FinalFit, Error> {
    let no_guard = vec![0.0; ctx.columns.len()];
    let lag_s = lag_from_first_fit(ctx, inp, &no_guard, warnings)?;
    let rows = timing::shifted_rows(ctx.t, lag_s);
    ctx.lag_s = lag_s;
    let fit2 = fit_without_transients(ctx, inp, &rows, &no_guard)?;
    let rise = rise::fit_rise(
        &RiseInput {
            ctx,
            fit: &fit2,
            rows: &rows,
            lag0_s: lag_s,
            dt_s: inp.sampling.dt_s,
            noise_nt: inp.noise_nt,
            shortest_pulse_s: inp.sampling.shortest_pulse_s,
            snr_min: inp.snr_min,
        },
        warnings,
    );
    ctx.lag_s = rise.lag_s;
    // The held-command rows of the first passes are not read again (16 bytes a row).
    drop(rows);
    let response = Response::new(ctx, rise.lag_s, &rise.tau_s);
    let fit = fit_response(ctx, inp, &response, &no_guard)?;
    Ok(FinalFit {
        fit,
        response,
        rise,
    })
}

/// Pass 1: no lag, every row; then the lag, s, from cross-correlating each command's
/// first difference with the field's projected on that column's pass-1 coupling
/// (0 with a warning when no edge gives one; warned when at the end of the search).
fn lag_from_first_fit(
    ctx: &FitContext,
    inp: &PassInput,
    no_guard: &[f64],
    warnings: &mut Vec<PolarityWarning>,
) -> Result<f64, Error> {
    let (t, n, dt) = (ctx.t, ctx.t.len(), inp.sampling.dt_s);
    let fit1 = ctx.fit(&timing::shifted_rows(t, 0.0), inp.pulses, no_guard, None)?;
    let couplings1: Vec<Vector3<f64>> =
        (0..ctx.columns.len()).map(|c| coupling(&fit1, c)).collect();
    let max_lag_s = inp
        .max_lag_s
        .unwrap_or((inp.sampling.shortest_pulse_s / 2.0).min(2.0));
    let max_lag_samples = ((max_lag_s / dt).round() as usize).clamp(1, n / 4 + 1);
    let lag_s = timing::estimate_lag_s(ctx.columns, &couplings1, ctx.b, dt, max_lag_samples)
        .unwrap_or_else(|| {
            warnings.push(PolarityWarning::NoLagEdge);
            0.0
        });
    if lag_s.abs() >= 0.95 * max_lag_samples as f64 * dt {
        warnings.push(PolarityWarning::LagAtEdge {
            lag_s,
            max_s: max_lag_samples as f64 * dt,
        });
    }
    Ok(lag_s)
}

/// Pass 2: commands held from the lag-shifted `rows`, fitted, then twice refitted
/// without the rows far off the model after edges (transients), so that they do not
/// bend the baseline.
fn fit_without_transients(
    ctx: &FitContext,
    inp: &PassInput,
    rows: &[Option<usize>],
    no_guard: &[f64],
) -> Result<LinearFit, Error> {
    let window_s = inp.transient_window_s(ctx.lag_s);
    let mut fit = ctx.fit(rows, inp.pulses, no_guard, None)?;
    for _ in 0..2 {
        let reject = ctx.transients(&fit, rows, inp.noise_nt, inp.pulses, window_s);
        fit = ctx.fit(rows, inp.pulses, no_guard, Some(&reject))?;
    }
    Ok(fit)
}

/// Pass 3: every row with the modelled commands of `response`, refitted without the
/// rows still far off the model when there are any.
fn fit_response(
    ctx: &FitContext,
    inp: &PassInput,
    response: &Response,
    no_guard: &[f64],
) -> Result<LinearFit, Error> {
    let mut fit = ctx.fit(response, inp.pulses, no_guard, None)?;
    let reject = ctx.transients(
        &fit,
        response,
        inp.noise_nt,
        inp.pulses,
        inp.transient_window_s(ctx.lag_s),
    );
    if reject.iter().any(|&r| r) {
        fit = ctx.fit(response, inp.pulses, no_guard, Some(&reject))?;
    }
    Ok(fit)
}

/// Coupling of command column `c`, sensor frame, nT per command unit.
fn coupling(fit: &LinearFit, c: usize) -> Vector3<f64> {
    Vector3::from_fn(|a, _| fit.coefficients[(c, a)])
}
