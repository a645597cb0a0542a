//! From the final fit to what the polarity check reports: each pulse and what it left
//! behind, the angle limit, what was measured per rod, the rise attached to each rod's
//! result, a better sensor-axis mapping when one fits, and the gates.

use nalgebra::Vector3;

use super::fitting::FinalFit;
use super::gates;
use super::mapping;
use super::timing::{AfterPulse, Pulse};
use super::verdict;
use super::warning::PolarityWarning;
use super::RodResult;
use super::{PulseResult, DEFAULT_ANGLE_MAX_DEG};
use crate::check::outcome::Gate;
use crate::log::Plan;

/// One [`PulseResult`] per pulse: its rod, on and off times (s; the last time when it
/// runs to the end of the log), command and what it left behind (`after`, same order).
pub(super) fn pulse_results(
    t_s: &[f64],
    names: &[String],
    pulses: &[Pulse],
    after: &[Option<AfterPulse>],
) -> Vec<PulseResult> {
    let t = t_s;
    let n = t.len();
    pulses
        .iter()
        .zip(after)
        .map(|(p, a)| PulseResult {
            rod: names[p.column].clone(),
            t_on_s: t[p.start],
            t_off_s: t.get(p.end).copied().unwrap_or(t[n - 1]),
            command: p.command,
            settle_time_s: a.and_then(|a| a.settle_time_s),
            step_nt: a.map(|a| a.step_nt.into()),
            step_sigma_nt: a.map(|a| a.step_sigma_nt.into()),
        })
        .collect()
}

/// The angle limit, deg, and where it came from: the plan's `[limits]
/// polarity_angle_max_deg`, else [`DEFAULT_ANGLE_MAX_DEG`] with a warning.
pub(super) fn angle_limit(plan: &Plan, warnings: &mut Vec<PolarityWarning>) -> (f64, &'static str) {
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
    (angle_max_deg, angle_max_source)
}

/// What was measured for each of the first `n_rods` command columns (the plan's rods):
/// coupling and remanence from the final fit, settle times from the rod's pulses.
/// `rem` lists the columns with a remanence term, in the fit's order after the
/// `n_columns` command columns.
pub(super) fn measured_rods(
    fitted: &FinalFit,
    pulses: &[Pulse],
    after: &[Option<AfterPulse>],
    rem: &[(usize, Vec<f64>)],
    n_rods: usize,
    n_columns: usize,
) -> Vec<verdict::Measured> {
    (0..n_rods)
        .map(|c| {
            let mine: Vec<(&Pulse, &AfterPulse)> = pulses
                .iter()
                .zip(after)
                .filter(|(p, _)| p.column == c)
                .filter_map(|(p, a)| a.as_ref().map(|a| (p, a)))
                .collect();
            let rem_index = rem
                .iter()
                .position(|(rc, _)| *rc == c)
                .map(|r| n_columns + r);
            verdict::Measured::new(&fitted.fit, c, rem_index, &mine)
        })
        .collect()
}

/// Give each rod its rise time constant and 1σ (s) from the delay-and-rise fit.
pub(super) fn attach_rise(rods: &mut [RodResult], fitted: &FinalFit) {
    for (c, r) in rods.iter_mut().enumerate() {
        r.rise_time_s = Some(fitted.rise.tau_s[c]);
        r.rise_time_sigma_s = fitted.rise.tau_sigma_s[c];
    }
}

/// A warning naming the signed permutation of the sensor axes that fits every rod at or
/// above `snr_min` when the plan's mapping does not.
pub(super) fn mapping_warning(rods: &[RodResult], snr_min: f64) -> Option<PolarityWarning> {
    let decidable: Vec<_> = rods
        .iter()
        .filter(|r| r.snr >= snr_min)
        .map(|r| {
            (
                Vector3::from(r.coupling_nt_per_command),
                Vector3::from(r.expected_nt_per_am2),
                verdict::consistency_limit_deg(r.angle_sigma_deg),
            )
        })
        .collect();
    mapping::better_mapping(&decidable).map(|m| PolarityWarning::MappingFits {
        description: m.description,
        worst_angle_deg: m.worst_angle_deg,
    })
}

/// Every rod's gates, in plan order.
pub(super) fn all_gates(rods: &[RodResult], snr_min: f64, angle_max_deg: f64) -> Vec<Gate> {
    rods.iter()
        .flat_map(|r| gates::rod_gates(r, snr_min, angle_max_deg))
        .collect()
}

/// The coupling matrix, sensor frame, nT per command unit: one row per sensor axis,
/// one column per rod.
pub(super) fn coupling_matrix(rods: &[RodResult]) -> Vec<Vec<f64>> {
    (0..3)
        .map(|a| rods.iter().map(|r| r.coupling_nt_per_command[a]).collect())
        .collect()
}
