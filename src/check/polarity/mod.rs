//! Torque-rod polarity and coupling check (docs/polarity.md).
//!
//! Method:
//! 1. Pulses are found in every `cmd_<rod>` column (runs where the command is on).
//! 2. The field, sensor frame, is fitted by weighted linear least squares on all command
//!    columns together plus drift terms (a piecewise-linear baseline, or a polynomial in
//!    time), so that ambient drift and the other rods do not leak into a rod's coupling.
//! 3. The command-to-response lag is estimated by cross-correlating each command's first
//!    difference with the field's first difference projected on that rod's coupling
//!    (a matched filter), refined to a fraction of a sample by a parabola through the
//!    peak; the commands are shifted by it and the fit is repeated without the rows far
//!    off the model after edges. From that fit, a pure delay and each rod's first-order
//!    rise time constant are fitted on the rows after command edges (`rise`), and the
//!    final fit uses every row with the commands passed through that delay and rise.
//! 4. After each pulse the settle time (back within 3σ of the noise around the settled
//!    level) and the field step it leaves behind (remanence) are measured.
//! 5. The expected response of each rod at the sensor follows from the dipole field
//!    B = μ0/(4π r³)(3(m·r̂)r̂ − m) (Jackson, *Classical Electrodynamics*, 3rd ed.,
//!    eq. 5.56) with the rod's axis and position and the sensor's position and mounting.
//!    The verdict compares the measured coupling with that geometry — never a bare sign.
//!
//! Requirements: a time column, `bx by bz`, a `cmd_<rod>` column for every plan rod with
//! at least one pulse, a plan with `[[rod]]` and the sensor's position (`[magnetometer]
//! position_m`, or a `[probe]`).

mod assess;
mod commands;
mod finite;
mod fitting;
mod gates;
mod mapping;
mod passes;
mod result;
mod rise;
pub mod seam;
mod sensor;
mod stack_rows;
mod timing;
mod verdict;
mod warning;

use serde::Serialize;

pub use result::{PolarityResult, PolaritySeries, PulseResult, RodResult};
pub use timing::DriftModel;
pub use verdict::{consistency_limit_deg, Verdict, MODEL_ERROR_DEG};
pub use warning::PolarityWarning;

use crate::check::CheckRequest;
use crate::log::Plan;
use crate::Error;
use commands::Sampling;
use fitting::PassInput;
use passes::FitContext;
use timing::DriftBasis;

/// Angle limit used when the plan's `[limits]` sets no `polarity_angle_max_deg`, deg.
pub const DEFAULT_ANGLE_MAX_DEG: f64 = 30.0;
/// Default SNR below which a rod is called `no-response`.
pub const DEFAULT_SNR_MIN: f64 = 5.0;
/// Point-dipole validity: the sensor should be at least this many rod lengths away
/// (common practice).
pub const DIPOLE_VALID_ROD_LENGTHS: f64 = 3.0;

/// Which sensor recorded the log.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum SensorChoice {
    /// `[probe]` when the plan has one, else `[magnetometer]`.
    Auto,
    /// The flight magnetometer (`[magnetometer]`).
    Magnetometer,
    /// An external probe (`[probe]`).
    Probe,
}

/// The polarity check's own options; the log and plan come with the [`CheckRequest`].
#[derive(Debug, Clone, Copy)]
pub struct PolarityOptions {
    /// Which sensor recorded the log.
    pub sensor: SensorChoice,
    /// SNR below which a rod is `no-response`.
    pub snr_min: f64,
    /// Drift terms of the regression.
    pub drift: DriftModel,
    /// Largest lag searched, s (default: half the shortest pulse, at most 2 s).
    pub max_lag_s: Option<f64>,
}

impl Default for PolarityOptions {
    fn default() -> Self {
        PolarityOptions {
            sensor: SensorChoice::Auto,
            snr_min: DEFAULT_SNR_MIN,
            drift: DriftModel::Auto,
            max_lag_s: None,
        }
    }
}

/// What to check: the screened pulse log (needs `t`, `bx by bz`, `cmd_<rod>` per plan
/// rod), the plan (`[[rod]]`, the sensor's geometry, `[limits]
/// polarity_angle_max_deg`) and [`PolarityOptions`].
pub type PolarityRequest<'a> = CheckRequest<'a, PolarityOptions>;

/// Whether the plan's `[magnetometer] range_nt` applies to a log recorded by `choice`:
/// only when the flight magnetometer recorded it.
pub fn magnetometer_recorded(plan: &Plan, choice: SensorChoice) -> bool {
    match choice {
        SensorChoice::Magnetometer => true,
        SensorChoice::Probe => false,
        SensorChoice::Auto => plan.probe.is_none(),
    }
}

/// Run the polarity check: the steps of the module doc, in order.
pub fn run_polarity(req: &PolarityRequest<'_>) -> Result<PolarityResult, Error> {
    let plan = checked_plan(req)?;
    let opts = &req.options;
    let sensor = sensor::sensor_geometry(plan, opts.sensor)?;
    let log = &req.input.log;
    let t = log.require_time("polarity needs time for the lag and settle times")?;
    let b = log.require_field("polarity fits the measured field")?;
    let mut warnings = input_warnings(req);
    // 1. The pulses of every command column.
    let (names, columns) = commands::command_columns(plan, log, &mut warnings)?;
    commands::require_equal_lengths(log, t, b, &columns)?;
    let (n, n_rods) = (t.len(), plan.rods.len());
    let pulses = timing::find_pulses(&columns);
    commands::refuse_unpulsed(plan, log, &pulses, n)?;
    let sampling = Sampling::measure(log, t, &pulses, &mut warnings)?;
    let noise = timing::noise_sigma_nt(b, &commands::any_command_on(&pulses, n));
    let basis = drift_basis(opts.drift, t, &sampling)?;
    let rem = commands::remanence_states(&columns, &pulses, n, &names[..n_rods], &mut warnings);
    // 2–3. The least-squares passes, the lag, the delay and the rise.
    let mut ctx = FitContext {
        t,
        b,
        columns: &columns,
        names: &names,
        rem: &rem,
        excluded: excluded_rows(req, n),
        lag_s: 0.0,
        basis: &basis,
        centre: centre_nt(b),
    };
    let passes = PassInput {
        pulses: &pulses,
        sampling: &sampling,
        noise_nt: noise,
        snr_min: opts.snr_min,
        max_lag_s: opts.max_lag_s,
    };
    let fitted = fitting::fit_passes(&mut ctx, &passes, &mut warnings)?;
    // 4. Settle times and steps after each pulse.
    let (after, dminus) = ctx.after_pulses(&fitted.fit, &pulses, fitted.rise.lag_s, noise);
    let pulse_results = assess::pulse_results(t, &names, &pulses, &after);
    // 5. Each rod against the dipole geometry, then the gates.
    let (angle_max_deg, angle_max_source) = assess::angle_limit(plan, &mut warnings);
    let measured = assess::measured_rods(&fitted, &pulses, &after, &rem, n_rods, columns.len());
    let mut rods = verdict::judge(
        plan,
        &sensor,
        &measured,
        angle_max_deg.to_radians(),
        opts.snr_min,
        &mut warnings,
    )?;
    assess::attach_rise(&mut rods, &fitted);
    warnings.extend(assess::mapping_warning(&rods, opts.snr_min));
    let gates = assess::all_gates(&rods, opts.snr_min, angle_max_deg);
    let verdict = crate::check::Verdict::from_gates(&gates);
    let plot_rows = timing::shifted_rows(t, fitted.rise.lag_s);
    let dense = stack_rows::stack_rows(t, &pulse_results);
    let series = ctx.series(&fitted.fit, &fitted.response, &plot_rows, &dminus, &dense);
    Ok(PolarityResult {
        coupling_matrix_nt_per_command: assess::coupling_matrix(&rods),
        rods,
        lag_s: fitted.rise.lag_s,
        lag_sigma_s: fitted.rise.lag_sigma_s,
        pass: verdict == crate::check::Verdict::Pass,
        verdict,
        gates,
        angle_max_deg,
        angle_max_source,
        snr_min: opts.snr_min,
        sensor: sensor.kind,
        noise_sigma_nt: noise,
        residual_sigma_nt: std::array::from_fn(|a| fitted.fit.residual_sigma(a)),
        drift: basis.describe(),
        samples_used: fitted.fit.rows_used,
        samples_saturated: req.input.saturated_rows(),
        pulses: pulse_results,
        warnings,
        series,
    })
}

/// What the input builder found, as the check's warnings.
fn input_warnings(req: &PolarityRequest<'_>) -> Vec<PolarityWarning> {
    req.input
        .warnings
        .iter()
        .cloned()
        .map(PolarityWarning::Input)
        .collect()
}

/// The request's plan, refused when absent or without `[[rod]]`, and the SNR threshold
/// refused unless positive.
fn checked_plan<'a>(req: &PolarityRequest<'a>) -> Result<&'a Plan, Error> {
    let plan = req.require_plan(
        "polarity",
        "its [[rod]] entries give each rod's axis and position",
    )?;
    if plan.rods.is_empty() {
        return Err(plan
            .missing(
                "[rod]",
                "polarity needs every torque rod's name, axis_body and position_m",
            )
            .into());
    }
    let snr_min = req.options.snr_min;
    if !(snr_min.is_finite() && snr_min > 0.0) {
        return Err(Error::Usage(format!(
            "the SNR threshold must be positive, found {snr_min}"
        )));
    }
    Ok(plan)
}

/// The drift terms for the log's span, refused when they would be too many for its
/// rows (more than 2000, or more than a quarter of the rows).
fn drift_basis(model: DriftModel, t_s: &[f64], sampling: &Sampling) -> Result<DriftBasis, Error> {
    let n = t_s.len();
    let basis = timing::drift_basis(model, t_s[0], sampling.span_s, sampling.longest_pulse_s);
    if basis.len() > 2000 || basis.len() * 4 > n {
        return Err(Error::Usage(format!(
            "the drift model needs {} terms for {n} rows ({}); choose wider knots or a lower degree",
            basis.len(),
            basis.describe()
        )));
    }
    Ok(basis)
}

/// Mean field of the first (at most 100) rows per sensor axis, nT: subtracted from the
/// field before the fits, for conditioning.
fn centre_nt(b_nt: &[Vec<f64>; 3]) -> [f64; 3] {
    let head = b_nt[0].len().min(100);
    std::array::from_fn(|a| b_nt[a][..head].iter().sum::<f64>() / head as f64)
}

/// Rows never used, one flag per row of `n`: saturated readings (at or beyond the
/// range, or piled up on a rail).
fn excluded_rows(req: &PolarityRequest<'_>, n: usize) -> Vec<bool> {
    let mut excluded = req.input.saturation.flagged.clone();
    excluded.resize(n, false);
    excluded
}

#[cfg(test)]
mod finite_tests;
#[cfg(test)]
mod tests;
