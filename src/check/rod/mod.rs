//! Torque-rod bench characterisation (`magproof rod`, docs/rods.md): one rod, a probe at
//! one or more stations around it, a current staircase up and down in both polarities,
//! rod-off segments for the background.
//!
//! Method:
//! 1. The log is cut into steps (runs of rows at one station and one current level).
//!    Each station's first and last rod-off steps are its background; drift is
//!    interpolated linearly in time between them. Every other rod-off step holds
//!    remanence.
//! 2. Each step's settled field (rows from 10τ after the step, or its later half) minus
//!    the background, in the rod frame (axis +z toward the marked end, origin at the
//!    centre).
//! 3. The moment of each current level by weighted least squares over the stations, with
//!    the field of a uniformly magnetised rod along the axis
//!    ([`crate::physics::finite_rod`]; the point dipole of Jackson eq. 5.56 far away) and
//!    the point dipole across it.
//! 4. The m(I) curve: slope, linearity, saturation knee, remanence (`curve.rs`); the time
//!    constant and the fall-off exponent (`response.rs`).
//! 5. Nominal: air core m/I = N·A; cored N·A·[1 + (μr − 1)/(1 + N_d(μr − 1))] with N_d of
//!    a prolate ellipsoid of the core's aspect ratio (Osborn 1945; an approximation for
//!    a cylinder, Chen, Brug & Goldfarb 1991).
//!
//! Requirements: columns `t`, `i`, `bx by bz`, `position`; `[rod_bench]` with its
//! stations; each station runs the same staircase between its two rod-off segments.

use crate::check::outcome::{Gate, GateRole, Verdict};
use crate::check::CheckRequest;
use crate::log::{Plan, RodBench, SweepLog};
use crate::physics::demag::{cored_gain, ellipsoid_demag_factor};
use crate::physics::finite_rod::FiniteRod;
use crate::screen::saturation::without_rows;
use crate::Error;

mod curve;
mod levels;
mod response;
mod result;
pub mod seam;
mod steps;
mod warning;

pub use result::{RodLevel, RodPolarity, RodResult, RodStation, StepResponse};
pub use warning::RodWarning;

/// Distance from the rod below which the point-dipole model is poor, rod lengths
/// (common practice).
pub const DIPOLE_VALID_ROD_LENGTHS: f64 = 3.0;

/// Rows of a step count as settled from this many time constants after it (the lag's
/// residue is then below e⁻¹⁰ ≈ 5·10⁻⁵ of the change).
pub const SETTLE_TAUS: f64 = 10.0;

/// The rod check's own options (none yet); the log and plan come with the request.
#[derive(Debug, Clone, Copy, Default)]
pub struct RodOptions;

/// What the rod check needs: the screened log, the plan (`[rod_bench]`, `[limits]`).
pub type RodRequest<'a> = CheckRequest<'a, RodOptions>;

/// Run the rod bench check. Saturated rows are left out first.
pub fn run_rod(req: &RodRequest) -> Result<RodResult, Error> {
    let plan = req.require_plan("rod", "its [rod_bench] gives the rod and the stations")?;
    let bench = plan.rod_bench.as_ref().ok_or_else(|| {
        plan.missing(
            "rod_bench",
            "the rod check needs the rod (serial, turns, length_m, coil size) and its \
             [[rod_bench.position]] stations",
        )
    })?;
    let input = req.input;
    let sat = &input.saturation;
    let mut res = if sat.count() == 0 {
        evaluate(&input.log, plan, bench)?
    } else {
        evaluate(&without_rows(&input.log, &sat.flagged), plan, bench)?
    };
    let mut warnings: Vec<RodWarning> = input
        .warnings
        .iter()
        .cloned()
        .map(RodWarning::Input)
        .collect();
    warnings.append(&mut res.warnings);
    res.warnings = warnings;
    Ok(res)
}

/// The finite rod the fit and the fall-off model use: the core when its diameter is
/// given, else the winding.
fn rod_model(bench: &RodBench) -> FiniteRod {
    let radius_m = bench
        .core_diameter_m
        .map(|d| d / 2.0)
        .unwrap_or_else(|| (bench.coil_area_m2 / std::f64::consts::PI).sqrt());
    FiniteRod {
        length_m: bench.length_m,
        radius_m,
    }
}

fn evaluate(log: &SweepLog, plan: &Plan, bench: &RodBench) -> Result<RodResult, Error> {
    let degenerate = |e: Error| match e {
        Error::Degenerate(m) => Error::Degenerate(format!("{}: {m}", log.path.display())),
        other => other,
    };
    let bl = steps::bench_log(log, plan, bench)?;
    let mut warnings = Vec::new();
    let (all_steps, dropped) = steps::cut_steps(&bl);
    let bgs = steps::backgrounds(&bl, &all_steps, bench.positions.len());
    for (s, bg) in bgs.iter().enumerate() {
        if bg.as_ref().is_some_and(|b| b.steps[0] == b.steps[1]) {
            warnings.push(RodWarning::SingleBackground {
                label: bench.positions[s].label.clone(),
            });
        }
    }
    let (tau, responses) = response::time_constant(&bl, &all_steps);
    if tau.is_none() {
        warnings.push(RodWarning::TimeConstantUnresolved);
    }
    let settle_s = tau.map_or(0.0, |(t, _)| SETTLE_TAUS * t);
    let mut levels =
        levels::match_levels(bench, &all_steps, &bgs, bl.level_tol_a).map_err(degenerate)?;
    let rod = rod_model(bench);
    let rows_used = levels::fit_levels(&bl, bench, &rod, &all_steps, &bgs, &mut levels, settle_s)
        .map_err(degenerate)?;
    let used: Vec<usize> = (0..bench.positions.len())
        .filter(|&s| bgs[s].is_some())
        .collect();
    let i_max = levels.iter().fold(0.0_f64, |m, l| m.max(l.current_a.abs()));
    let line = curve::fit_line(&levels, i_max).ok_or_else(|| {
        degenerate(Error::Degenerate(
            "fewer than two distinct currents within half the largest: the slope needs \
             levels below half the rated current"
                .into(),
        ))
    })?;
    let rated = plan.limits.rod.current_max_a.unwrap_or_else(|| {
        warnings.push(RodWarning::NoRatedCurrent { current_a: i_max });
        i_max
    });
    let at_max = curve::moment_at(&levels, rated, bl.level_tol_a);
    if at_max.is_none() {
        warnings.push(RodWarning::RatedCurrentNotLogged { current_a: rated });
    }
    let remanence = curve::remanence(&levels);
    if remanence.is_none() {
        warnings.push(RodWarning::NoRemanenceSegments);
    }
    let stations = response::stations(bench, &levels, &used, i_max);
    for s in &stations {
        if s.rod_lengths < DIPOLE_VALID_ROD_LENGTHS {
            warnings.push(RodWarning::CloseStation {
                label: s.label.clone(),
                distance_m: s.distance_m,
                needed_m: DIPOLE_VALID_ROD_LENGTHS * bench.length_m,
            });
        }
    }
    let falloff = response::falloff(bench, &rod, &stations);
    if falloff.is_none() {
        warnings.push(RodWarning::NoFalloff);
    }
    let air_core = bench.turns * bench.coil_area_m2;
    let demag = bench
        .core_diameter_m
        .and_then(|d| ellipsoid_demag_factor(bench.length_m / d));
    if bench.core_mu_r.is_some() && demag.is_none() {
        warnings.push(RodWarning::NoCoreDiameter);
    }
    let predicted = bench.core_mu_r.zip(demag).map(|(mu, n)| cored_gain(mu, n));
    let reference = at_max.map(|m| m.0).unwrap_or_else(|| line.at(rated).abs());
    let linearity = curve::linearity_pct(&levels, &line, rated, bl.level_tol_a);
    let min_distance = stations
        .iter()
        .map(|s| s.rod_lengths)
        .fold(f64::INFINITY, f64::min);
    let remanence_pct = remanence.map(|r| r.0 / reference * 100.0);
    let gates = gates(plan, &line, at_max, remanence_pct, linearity, min_distance);
    let verdict = Verdict::from_gates(&gates);
    Ok(RodResult {
        moment_per_amp_am2_per_a: line.slope,
        moment_per_amp_sigma: line.slope_sigma,
        air_core_am2_per_a: air_core,
        core_gain: line.slope / air_core,
        core_gain_predicted: predicted,
        linearity_max_dev_pct: linearity,
        saturation_current_a: curve::saturation_current(&levels, &line, bl.level_tol_a),
        remanence_am2: remanence.map(|r| r.0),
        remanence_sigma_am2: remanence.map(|r| r.1),
        remanence_pct,
        time_constant_s: tau.map(|t| t.0),
        falloff_exponent: falloff.as_ref().map(|f| f.exponent),
        polarity: if line.slope > 0.0 {
            RodPolarity::Ok
        } else {
            RodPolarity::Reversed
        },
        pass: verdict.pass(),
        verdict,
        gates,
        warnings,
        serial: bench.serial.clone(),
        batch: bench.batch.clone(),
        intercept_am2: line.intercept,
        rod_current_max_a: rated,
        moment_at_max_am2: at_max.map(|m| m.0),
        moment_at_max_sigma_am2: at_max.map(|m| m.1),
        demag_factor: demag,
        time_constant_sigma_s: tau.map(|t| t.1),
        falloff_exponent_sigma: falloff.as_ref().map(|f| f.sigma),
        falloff_exponent_measurement_sigma: falloff.as_ref().map(|f| f.measurement_sigma),
        falloff_exponent_finite_rod: falloff.as_ref().map(|f| f.finite_rod),
        falloff_stations: falloff.as_ref().map(|f| f.stations),
        levels: levels
            .iter()
            .map(|l| {
                let (m, s) = curve::axial(l);
                RodLevel {
                    current_a: l.current_a,
                    moment_am2: m,
                    moment_sigma_am2: s,
                    t_start_s: l
                        .steps
                        .first()
                        .map_or(f64::NAN, |&k| bl.t_s[all_steps[k].rows.start]),
                }
            })
            .collect(),
        stations,
        rows_used,
        rows_between_levels: dropped,
        responses,
    })
}

/// The gates (docs/rods.md, "Gates"): `polarity`, `moment_min`, `remanence_max`,
/// `linearity_max` (each limit only when the plan gives it) and `point_dipole_distance`.
fn gates(
    plan: &Plan,
    line: &curve::Line,
    at_max: Option<(f64, f64)>,
    remanence_pct: Option<f64>,
    linearity: f64,
    min_distance: f64,
) -> Vec<Gate> {
    let l = &plan.limits.rod;
    let mut gates = vec![Gate::above("polarity", line.slope, 0.0, GateRole::Article)];
    if let Some(min) = l.moment_min_am2 {
        gates.push(match at_max {
            Some((m, _)) => Gate::at_least("moment_min", m, min, GateRole::Article),
            None => Gate::at_least("moment_min", f64::NAN, min, GateRole::Data),
        });
    }
    if let Some(max) = l.remanence_max_pct {
        gates.push(match remanence_pct {
            Some(r) => Gate::at_most("remanence_max", r.abs(), max, GateRole::Article),
            None => Gate::at_most("remanence_max", f64::NAN, max, GateRole::Data),
        });
    }
    if let Some(max) = l.linearity_max_pct {
        gates.push(Gate::at_most(
            "linearity_max",
            linearity,
            max,
            GateRole::Article,
        ));
    }
    gates.push(Gate::at_least(
        "point_dipole_distance",
        min_distance,
        DIPOLE_VALID_ROD_LENGTHS,
        GateRole::Data,
    ));
    gates
}

#[cfg(test)]
mod tests;
