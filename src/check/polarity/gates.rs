//! The gates behind each rod's verdict (docs/polarity.md, "Verdicts").

use super::verdict::{consistency_limit_deg, Verdict};
use super::RodResult;
use crate::check::outcome::{Gate, GateRole};

/// A rod's gates: `snr:<rod>` (data: the response must stand above the noise), then
/// `angle:<rod>` (article: the response within the angle limit of the expected
/// direction) and, for a rod whose swap with another cannot be seen,
/// `distinguishable:<rod>` (data).
pub(super) fn rod_gates(rod: &RodResult, snr_min: f64, angle_max_deg: f64) -> Vec<Gate> {
    let snr = Gate::at_least(
        format!("snr:{}", rod.name),
        rod.snr,
        snr_min,
        GateRole::Data,
    );
    if !snr.ok {
        return vec![snr];
    }
    let angle = rod.angle_to_expected_deg.unwrap_or(f64::NAN);
    let mut gates = vec![
        snr,
        Gate::at_most(
            format!("angle:{}", rod.name),
            angle,
            angle_max_deg,
            GateRole::Article,
        ),
    ];
    if angle <= angle_max_deg {
        gates.push(Gate::at_most(
            format!("model_consistency:{}", rod.name),
            angle,
            consistency_limit_deg(rod.angle_sigma_deg),
            GateRole::Article,
        ));
    }
    if rod.verdict == Verdict::Inconclusive && angle <= angle_max_deg {
        gates.push(Gate::at_least(
            format!("distinguishable:{}", rod.name),
            0.0,
            1.0,
            GateRole::Data,
        ));
    }
    gates
}
