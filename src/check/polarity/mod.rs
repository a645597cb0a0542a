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

mod finite;
mod gates;
mod mapping;
mod passes;
mod result;
mod rise;
pub mod seam;
mod timing;
mod verdict;
mod warning;

use nalgebra::{Matrix3, Vector3};
use serde::Serialize;

pub use result::{PolarityResult, PolaritySeries, PulseResult};
pub use timing::DriftModel;
pub use verdict::{consistency_limit_deg, RodResult, Verdict, MODEL_ERROR_DEG};
pub use warning::PolarityWarning;

use crate::check::outcome::Gate;
use crate::check::CheckRequest;
use crate::fit::linear::LinearFit;
use crate::log::Plan;
use crate::Error;
use passes::FitContext;
use timing::{AfterPulse, Pulse};

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

/// The sensor's geometry in the body frame.
struct SensorGeometry {
    position_m: Vector3<f64>,
    sensor_to_body: Matrix3<f64>,
    kind: SensorChoice,
}

fn sensor_geometry(plan: &Plan, choice: SensorChoice) -> Result<SensorGeometry, Error> {
    let probe = || {
        plan.probe.as_ref().map(|p| SensorGeometry {
            position_m: p.position_m,
            sensor_to_body: p.sensor_to_body,
            kind: SensorChoice::Probe,
        })
    };
    let mag = || -> Result<SensorGeometry, Error> {
        let m = plan.magnetometer.as_ref().ok_or_else(|| {
            plan.missing(
                "magnetometer",
                "polarity needs the magnetometer's position_m and sensor_to_body (or a [probe])",
            )
        })?;
        let position_m = m.position_m.ok_or_else(|| {
            plan.invalid(
                "magnetometer.position_m",
                "polarity needs the magnetometer's position (body frame, m) to predict each rod's field",
            )
        })?;
        Ok(SensorGeometry {
            position_m,
            sensor_to_body: m.sensor_to_body,
            kind: SensorChoice::Magnetometer,
        })
    };
    match choice {
        SensorChoice::Probe => probe().ok_or_else(|| {
            plan.missing(
                "probe",
                "a log recorded by the probe needs the probe's position_m",
            )
            .into()
        }),
        SensorChoice::Magnetometer => mag(),
        SensorChoice::Auto => match probe() {
            Some(p) => Ok(p),
            None => mag(),
        },
    }
}

/// Run the polarity check.
#[allow(clippy::needless_range_loop)]
pub fn run_polarity(req: &PolarityRequest<'_>) -> Result<PolarityResult, Error> {
    let plan = req.require_plan(
        "polarity",
        "its [[rod]] entries give each rod's axis and position",
    )?;
    let log = &req.input.log;
    let req_opts = &req.options;
    if plan.rods.is_empty() {
        return Err(plan
            .missing(
                "[rod]",
                "polarity needs every torque rod's name, axis_body and position_m",
            )
            .into());
    }
    if !(req_opts.snr_min.is_finite() && req_opts.snr_min > 0.0) {
        return Err(Error::Usage(format!(
            "the SNR threshold must be positive, found {}",
            req_opts.snr_min
        )));
    }
    let sensor = sensor_geometry(plan, req_opts.sensor)?;
    let t = log.require_time("polarity needs time for the lag and settle times")?;
    let b = log.require_field("polarity fits the measured field")?;
    let mut warnings: Vec<PolarityWarning> = req
        .input
        .warnings
        .iter()
        .cloned()
        .map(PolarityWarning::Input)
        .collect();
    let (names, columns) = command_columns(plan, log, &mut warnings)?;
    let n = t.len();
    let n_rods = plan.rods.len();
    if b.iter().any(|c| c.len() != n) || columns.iter().any(|c| c.len() != n) {
        return Err(Error::Internal(format!(
            "{}: columns of different lengths in the log",
            log.path.display()
        )));
    }
    let pulses = timing::find_pulses(&columns);
    refuse_unpulsed(plan, log, &pulses, n)?;
    let dt = timing::median_interval_s(t)
        .filter(|d| *d > 0.0)
        .ok_or_else(|| {
            Error::Degenerate(format!("{}: time does not advance", log.path.display()))
        })?;
    let span = t[n - 1] - t[0];
    let dur = |p: &Pulse| t.get(p.end).copied().unwrap_or(t[n - 1] + dt) - t[p.start];
    let longest = pulses.iter().map(dur).fold(0.0, f64::max);
    let shortest = pulses.iter().map(dur).fold(f64::INFINITY, f64::min);
    let mut any_on = vec![false; n];
    for p in &pulses {
        any_on[p.start..p.end].iter_mut().for_each(|v| *v = true);
    }
    if t.windows(2).any(|w| w[1] - w[0] > 5.0 * dt) {
        warnings.push(PolarityWarning::Gaps);
    }
    let noise = timing::noise_sigma_nt(b, &any_on);
    let basis = timing::drift_basis(req_opts.drift, t[0], span, longest);
    if basis.len() > 2000 || basis.len() * 4 > n {
        return Err(Error::Usage(format!(
            "the drift model needs {} terms for {n} rows ({}); choose wider knots or a lower degree",
            basis.len(),
            basis.describe()
        )));
    }
    // Centre the outputs for conditioning.
    let head = n.min(100);
    let centre: [f64; 3] = std::array::from_fn(|a| b[a][..head].iter().sum::<f64>() / head as f64);

    let rem = remanence_states(&columns, &pulses, n, &names[..n_rods], &mut warnings);
    // Saturated readings (at or beyond the range, or piled up on a rail): flagged,
    // never used.
    let mut excluded = req.input.saturation.flagged.clone();
    excluded.resize(n, false);
    let saturated = req.input.saturated_rows();
    let mut ctx = FitContext {
        t,
        b,
        columns: &columns,
        names: &names,
        rem: &rem,
        excluded,
        lag_s: 0.0,
        basis: &basis,
        centre,
    };
    // Pass 1: no lag, every row.
    let no_guard = vec![0.0; columns.len()];
    let fit1 = ctx.fit(&timing::shifted_rows(t, 0.0), &pulses, &no_guard, None)?;
    let couplings1: Vec<Vector3<f64>> = (0..columns.len()).map(|c| coupling(&fit1, c)).collect();
    let max_lag_s = req_opts.max_lag_s.unwrap_or((shortest / 2.0).min(2.0));
    let max_lag_samples = ((max_lag_s / dt).round() as usize).clamp(1, n / 4 + 1);
    let lag_s = timing::estimate_lag_s(&columns, &couplings1, b, dt, max_lag_samples)
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
    let rows = timing::shifted_rows(t, lag_s);
    ctx.lag_s = lag_s;
    // Pass 2: lag applied, then again without the rows far off the model (transients
    // after edges), so that they do not bend the baseline; settle times from its drift.
    let mut fit2 = ctx.fit(&rows, &pulses, &no_guard, None)?;
    for _ in 0..2 {
        let reject = ctx.transients(
            &fit2,
            &rows,
            noise,
            &pulses,
            0.5 * shortest + lag_s.max(0.0),
        );
        fit2 = ctx.fit(&rows, &pulses, &no_guard, Some(&reject))?;
    }
    // Pass 3: the delay and each rod's first-order rise, fitted on the rows after edges;
    // then every row with the modelled commands (rows still far off are set aside).
    let rise = rise::fit_rise(
        &rise::RiseInput {
            ctx: &ctx,
            fit: &fit2,
            rows: &rows,
            lag0_s: lag_s,
            dt_s: dt,
            noise_nt: noise,
            shortest_pulse_s: shortest,
            snr_min: req_opts.snr_min,
        },
        &mut warnings,
    );
    let lag_s = rise.lag_s;
    ctx.lag_s = lag_s;
    // The held-command rows of the first passes are not read again (16 bytes a row).
    drop(rows);
    let response = rise::Response::new(&ctx, lag_s, &rise.tau_s);
    let mut fit = ctx.fit(&response, &pulses, &no_guard, None)?;
    let reject = ctx.transients(
        &fit,
        &response,
        noise,
        &pulses,
        0.5 * shortest + lag_s.max(0.0),
    );
    if reject.iter().any(|&r| r) {
        fit = ctx.fit(&response, &pulses, &no_guard, Some(&reject))?;
    }
    let (after, dminus) = ctx.after_pulses(&fit, &pulses, lag_s, noise);

    let pulse_results: Vec<PulseResult> = pulses
        .iter()
        .zip(&after)
        .map(|(p, a)| PulseResult {
            rod: names[p.column].clone(),
            t_on_s: t[p.start],
            t_off_s: t.get(p.end).copied().unwrap_or(t[n - 1]),
            command: p.command,
            settle_time_s: a.and_then(|a| a.settle_time_s),
            step_nt: a.map(|a| a.step_nt.into()),
            step_sigma_nt: a.map(|a| a.step_sigma_nt.into()),
        })
        .collect();
    let angle_max_deg = plan
        .limits
        .polarity_angle_max_deg
        .unwrap_or(DEFAULT_ANGLE_MAX_DEG);
    let angle_max_source = if plan.limits.polarity_angle_max_deg.is_some() {
        "plan"
    } else {
        warnings.push(PolarityWarning::DefaultAngleLimit {
            limit_deg: DEFAULT_ANGLE_MAX_DEG,
        });
        "default"
    };
    let measured: Vec<verdict::Measured> = (0..n_rods)
        .map(|c| {
            let mine: Vec<(&Pulse, &AfterPulse)> = pulses
                .iter()
                .zip(&after)
                .filter(|(p, _)| p.column == c)
                .filter_map(|(p, a)| a.as_ref().map(|a| (p, a)))
                .collect();
            let rem_index = rem
                .iter()
                .position(|(rc, _)| *rc == c)
                .map(|r| columns.len() + r);
            verdict::Measured::new(&fit, c, rem_index, &mine)
        })
        .collect();
    let mut rods = verdict::judge(
        plan,
        &sensor.position_m,
        &sensor.sensor_to_body,
        &measured,
        angle_max_deg.to_radians(),
        req_opts.snr_min,
        &mut warnings,
    )?;
    for (c, r) in rods.iter_mut().enumerate() {
        r.rise_time_s = Some(rise.tau_s[c]);
        r.rise_time_sigma_s = rise.tau_sigma_s[c];
    }
    let decidable: Vec<_> = rods
        .iter()
        .filter(|r| r.snr >= req_opts.snr_min)
        .map(|r| {
            (
                Vector3::from(r.coupling_nt_per_command),
                Vector3::from(r.expected_nt_per_am2),
                verdict::consistency_limit_deg(r.angle_sigma_deg),
            )
        })
        .collect();
    if let Some(m) = mapping::better_mapping(&decidable) {
        warnings.push(PolarityWarning::MappingFits {
            description: m.description,
            worst_angle_deg: m.worst_angle_deg,
        });
    }
    let gates: Vec<Gate> = rods
        .iter()
        .flat_map(|r| gates::rod_gates(r, req_opts.snr_min, angle_max_deg))
        .collect();
    let verdict = crate::check::Verdict::from_gates(&gates);
    let pass = verdict == crate::check::Verdict::Pass;
    let coupling_matrix_nt_per_command = (0..3)
        .map(|a| rods.iter().map(|r| r.coupling_nt_per_command[a]).collect())
        .collect();
    let rows = timing::shifted_rows(t, lag_s);
    let series = ctx.series(&fit, &response, &rows, &dminus);
    Ok(PolarityResult {
        rods,
        lag_s,
        lag_sigma_s: rise.lag_sigma_s,
        pass,
        verdict,
        gates,
        angle_max_deg,
        angle_max_source,
        snr_min: req_opts.snr_min,
        sensor: sensor.kind,
        coupling_matrix_nt_per_command,
        noise_sigma_nt: noise,
        residual_sigma_nt: std::array::from_fn(|a| fit.residual_sigma(a)),
        drift: basis.describe(),
        samples_used: fit.rows_used,
        samples_saturated: saturated,
        pulses: pulse_results,
        warnings,
        series,
    })
}

/// The command columns: the plan's rods first (each must have its `cmd_<rod>` column),
/// then any other `cmd_` column, which is fitted so it cannot leak into the others but
/// gets no verdict.
fn command_columns<'a>(
    plan: &Plan,
    log: &'a crate::log::SweepLog,
    warnings: &mut Vec<PolarityWarning>,
) -> Result<(Vec<String>, Vec<&'a [f64]>), Error> {
    let mut names: Vec<String> = Vec::new();
    let mut columns: Vec<&[f64]> = Vec::new();
    for rod in &plan.rods {
        let c = log.require_command(&rod.name, &format!("the plan lists rod \"{}\"", rod.name))?;
        names.push(rod.name.clone());
        columns.push(&c.values);
    }
    for c in &log.commands {
        if !names.iter().any(|n| n.eq_ignore_ascii_case(&c.rod)) {
            warnings.push(PolarityWarning::UnplannedColumn {
                header: c.header.clone(),
            });
            names.push(c.rod.clone());
            columns.push(&c.values);
        }
    }
    Ok((names, columns))
}

/// Refuse a log with no pulse at all, a plan rod never pulsed, or too few rows.
fn refuse_unpulsed(
    plan: &Plan,
    log: &crate::log::SweepLog,
    pulses: &[Pulse],
    n: usize,
) -> Result<(), Error> {
    if pulses.is_empty() {
        return Err(Error::Degenerate(format!(
            "{}: no pulses: every cmd_ column is zero, so no rod was driven",
            log.path.display()
        )));
    }
    for (ci, rod) in plan.rods.iter().enumerate() {
        if !pulses.iter().any(|p| p.column == ci) {
            return Err(Error::Degenerate(format!(
                "{}: rod \"{}\" was never pulsed (cmd_{} is zero throughout)",
                log.path.display(),
                rod.name,
                rod.name
            )));
        }
    }
    if n < 10 {
        return Err(Error::Degenerate(format!(
            "{}: {n} rows are too few for a polarity check",
            log.path.display()
        )));
    }
    Ok(())
}

/// Remanence: after a pulse a rod keeps a small dipole along the sign of that pulse.
/// Modelled as the sign of the last pulse while the command is off and zero while it is
/// on (the field while on is the coupling's), for columns pulsed both ways (with one
/// sign only it cannot be told from the baseline: a plan rod gets a warning). Returns
/// (column, state per row).
fn remanence_states(
    columns: &[&[f64]],
    pulses: &[Pulse],
    n: usize,
    rod_names: &[String],
    warnings: &mut Vec<PolarityWarning>,
) -> Vec<(usize, Vec<f64>)> {
    let mut rem: Vec<(usize, Vec<f64>)> = Vec::new();
    for c in 0..columns.len() {
        let mine: Vec<&Pulse> = pulses.iter().filter(|p| p.column == c).collect();
        let both = mine.iter().any(|p| p.command > 0.0) && mine.iter().any(|p| p.command < 0.0);
        if !both {
            if let Some(rod) = rod_names.get(c) {
                warnings.push(PolarityWarning::OneSignOnly { rod: rod.clone() });
            }
            continue;
        }
        let mut state = vec![0.0; n];
        let mut k = 0;
        let mut s = 0.0;
        for (i, v) in state.iter_mut().enumerate() {
            while k < mine.len() && mine[k].start <= i {
                s = mine[k].command.signum();
                k += 1;
            }
            *v = if k > 0 && i < mine[k - 1].end { 0.0 } else { s };
        }
        rem.push((c, state));
    }
    rem
}

/// Coupling of command column `c`, sensor frame, nT per command unit.
fn coupling(fit: &LinearFit, c: usize) -> Vector3<f64> {
    Vector3::from_fn(|a, _| fit.coefficients[(c, a)])
}

#[cfg(test)]
mod finite_tests;
#[cfg(test)]
mod tests;
