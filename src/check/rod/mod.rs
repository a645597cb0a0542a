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

use crate::check::CheckRequest;
use crate::log::{Plan, RodBench, SweepLog};
use crate::physics::finite_rod::FiniteRod;
use crate::screen::saturation::without_rows;
use crate::Error;

mod curve;
mod findings;
mod levels;
mod response;
mod result;
pub mod seam;
mod steps;
mod warning;

pub use result::{RodLevel, RodPolarity, RodResult, RodStation, StepResponse};
pub use warning::RodWarning;

use findings::{CurveFigures, Findings, Nominal};

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

/// The bench log through the method of the module doc: steps, backgrounds, the time
/// constant, each level's moment (A·m², rod frame), the m(I) line, the stations and the
/// nominal gain; then the gates.
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
    let rated_a = plan.limits.rod.current_max_a.unwrap_or_else(|| {
        warnings.push(RodWarning::NoRatedCurrent { current_a: i_max });
        i_max
    });
    let curve = CurveFigures::read(&levels, &line, rated_a, bl.level_tol_a, &mut warnings);
    let stations = response::stations(bench, &levels, &used, i_max);
    let falloff = falloff_of(bench, &rod, &stations, &mut warnings);
    Ok(Findings {
        nominal: Nominal::of(bench, &mut warnings),
        line,
        rated_a,
        curve,
        tau,
        falloff,
        levels: rod_levels(&levels, &bl, &all_steps),
        stations,
        rows_used,
        rows_between_levels: dropped,
        responses,
        warnings,
    }
    .into_result(plan, bench))
}

/// The stations' fall-off exponent; warns of stations too close for the point dipole
/// (closer than [`DIPOLE_VALID_ROD_LENGTHS`]) and of no usable set of stations.
fn falloff_of(
    bench: &RodBench,
    rod: &FiniteRod,
    stations: &[RodStation],
    warnings: &mut Vec<RodWarning>,
) -> Option<response::Falloff> {
    for s in stations {
        if s.rod_lengths < DIPOLE_VALID_ROD_LENGTHS {
            warnings.push(RodWarning::CloseStation {
                label: s.label.clone(),
                distance_m: s.distance_m,
                needed_m: DIPOLE_VALID_ROD_LENGTHS * bench.length_m,
            });
        }
    }
    let falloff = response::falloff(bench, rod, stations);
    if falloff.is_none() {
        warnings.push(RodWarning::NoFalloff);
    }
    falloff
}

/// Each level's current (A), axial moment (A·m², ±1σ) and the time (s) of its first step.
fn rod_levels(
    levels: &[levels::Level],
    bl: &steps::BenchLog,
    all_steps: &[steps::Step],
) -> Vec<RodLevel> {
    levels
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
        .collect()
}

#[cfg(test)]
mod tests;
