//! What the rod bench measured, gathered once the fits are done, and the verdict on it:
//! the figures read off the m(I) curve, the nominal gain from the rod's build, the gates
//! and the [`RodResult`].

use super::curve::{self, Line};
use super::levels::Level;
use super::response::Falloff;
use super::result::{RodLevel, RodPolarity, RodResult, RodStation, StepResponse};
use super::warning::RodWarning;
use super::DIPOLE_VALID_ROD_LENGTHS;
use crate::check::outcome::{Gate, GateRole, Verdict};
use crate::log::{Plan, RodBench};
use crate::physics::demag::{cored_gain, ellipsoid_demag_factor};

/// Figures read off the levels' m(I) curve around the rated current.
pub(super) struct CurveFigures {
    /// Moment at the rated current (A·m²) and its 1σ, when that current was logged.
    pub(super) at_max: Option<(f64, f64)>,
    /// Remanence (A·m²) and its 1σ, when the log has rod-off steps after current.
    pub(super) remanence: Option<(f64, f64)>,
    /// Largest departure from the line up to the rated current, % of the moment there.
    pub(super) linearity_pct: f64,
    /// Current where the moment falls below the line (A), when it does.
    pub(super) saturation_current_a: Option<f64>,
}

impl CurveFigures {
    /// Read the figures at `rated_a` (levels within `tol_a` of it count as at it); warns
    /// when the rated current was not logged or no remanence step exists.
    pub(super) fn read(
        levels: &[Level],
        line: &Line,
        rated_a: f64,
        tol_a: f64,
        warnings: &mut Vec<RodWarning>,
    ) -> Self {
        let at_max = curve::moment_at(levels, rated_a, tol_a);
        if at_max.is_none() {
            warnings.push(RodWarning::RatedCurrentNotLogged { current_a: rated_a });
        }
        let remanence = curve::remanence(levels);
        if remanence.is_none() {
            warnings.push(RodWarning::NoRemanenceSegments);
        }
        CurveFigures {
            at_max,
            remanence,
            linearity_pct: curve::linearity_pct(levels, line, rated_a, tol_a),
            saturation_current_a: curve::saturation_current(levels, line, tol_a),
        }
    }
}

/// The gain the rod's build predicts: air core N·A (A·m²/A), the core's demagnetising
/// factor and the cored gain (module doc, step 5).
pub(super) struct Nominal {
    pub(super) air_core_am2_per_a: f64,
    pub(super) demag_factor: Option<f64>,
    pub(super) core_gain_predicted: Option<f64>,
}

impl Nominal {
    /// From `[rod_bench]`; warns when μr is given without the core's diameter.
    pub(super) fn of(bench: &RodBench, warnings: &mut Vec<RodWarning>) -> Self {
        let demag = bench
            .core_diameter_m
            .and_then(|d| ellipsoid_demag_factor(bench.length_m / d));
        if bench.core_mu_r.is_some() && demag.is_none() {
            warnings.push(RodWarning::NoCoreDiameter);
        }
        Nominal {
            air_core_am2_per_a: bench.turns * bench.coil_area_m2,
            demag_factor: demag,
            core_gain_predicted: bench.core_mu_r.zip(demag).map(|(mu, n)| cored_gain(mu, n)),
        }
    }
}

/// Everything the bench log gave, before the gates.
pub(super) struct Findings {
    /// The m(I) line (A·m²/A, A·m²).
    pub(super) line: Line,
    /// The rated current (A): the plan's, else the largest logged.
    pub(super) rated_a: f64,
    pub(super) curve: CurveFigures,
    /// Time constant (s) and its 1σ.
    pub(super) tau: Option<(f64, f64)>,
    pub(super) falloff: Option<Falloff>,
    pub(super) nominal: Nominal,
    pub(super) levels: Vec<RodLevel>,
    pub(super) stations: Vec<RodStation>,
    pub(super) rows_used: usize,
    pub(super) rows_between_levels: usize,
    pub(super) responses: Vec<StepResponse>,
    pub(super) warnings: Vec<RodWarning>,
}

impl Findings {
    /// The gates on these findings and the result.
    pub(super) fn into_result(self, plan: &Plan, bench: &RodBench) -> RodResult {
        let Findings {
            line,
            rated_a,
            curve,
            tau,
            falloff,
            nominal,
            levels,
            stations,
            rows_used,
            rows_between_levels,
            responses,
            warnings,
        } = self;
        let reference = curve
            .at_max
            .map(|m| m.0)
            .unwrap_or_else(|| line.at(rated_a).abs());
        let min_distance = stations
            .iter()
            .map(|s| s.rod_lengths)
            .fold(f64::INFINITY, f64::min);
        let remanence_pct = curve.remanence.map(|r| r.0 / reference * 100.0);
        let gates = gates(
            plan,
            &line,
            curve.at_max,
            remanence_pct,
            curve.linearity_pct,
            min_distance,
        );
        let verdict = Verdict::from_gates(&gates);
        let falloff = falloff.as_ref();
        RodResult {
            moment_per_amp_am2_per_a: line.slope,
            moment_per_amp_sigma: line.slope_sigma,
            air_core_am2_per_a: nominal.air_core_am2_per_a,
            core_gain: line.slope / nominal.air_core_am2_per_a,
            core_gain_predicted: nominal.core_gain_predicted,
            linearity_max_dev_pct: curve.linearity_pct,
            saturation_current_a: curve.saturation_current_a,
            remanence_am2: curve.remanence.map(|r| r.0),
            remanence_sigma_am2: curve.remanence.map(|r| r.1),
            remanence_pct,
            time_constant_s: tau.map(|t| t.0),
            falloff_exponent: falloff.map(|f| f.exponent),
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
            rod_current_max_a: rated_a,
            moment_at_max_am2: curve.at_max.map(|m| m.0),
            moment_at_max_sigma_am2: curve.at_max.map(|m| m.1),
            demag_factor: nominal.demag_factor,
            time_constant_sigma_s: tau.map(|t| t.1),
            falloff_exponent_sigma: falloff.map(|f| f.sigma),
            falloff_exponent_measurement_sigma: falloff.map(|f| f.measurement_sigma),
            falloff_exponent_finite_rod: falloff.map(|f| f.finite_rod),
            falloff_stations: falloff.map(|f| f.stations),
            levels,
            stations,
            rows_used,
            rows_between_levels,
            responses,
        }
    }
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
