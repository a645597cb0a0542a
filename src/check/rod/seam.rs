//! `rod` at the check seam: its registry entry, how a closeout step runs it, and what
//! its result offers the ledger (filed under the rod's serial and batch), the summaries
//! and the writers.

use super::{run_rod, RodOptions, RodResult};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("rod");

/// The ledger's build label for a rod whose plan names no batch.
pub const NO_BATCH: &str = "bench";

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Torque rod on the bench",
    // The bench probe is not the flight magnetometer: its range does not apply.
    plan_range_applies: |_| false,
    run_step,
};

fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let req = CheckRequest::new(input, Some(plan), RodOptions);
    Ok(Box::new(run_rod(&req)?))
}

impl CheckResult for RodResult {
    crate::result_basics!(KIND);

    /// `rod_moment_per_amp_am2_per_a`, `rod_remanence_am2` (each with its 1σ),
    /// `rod_linearity_max_dev_pct`, `rod_core_gain`, `rod_moment_at_max_am2`,
    /// `rod_saturation_current_a`, `rod_time_constant_s` when measured, and the polarity.
    fn quantities(&self) -> Vec<Quantity> {
        let mut q = vec![
            Quantity::number(
                "rod_moment_per_amp_am2_per_a".into(),
                "A·m²/A",
                self.moment_per_amp_am2_per_a,
                Some(self.moment_per_amp_sigma),
            ),
            Quantity::number(
                "rod_linearity_max_dev_pct".into(),
                "%",
                self.linearity_max_dev_pct,
                None,
            ),
            Quantity::number("rod_core_gain".into(), "", self.core_gain, None),
            Quantity::verdict("rod_polarity".into(), polarity_word(self)),
        ];
        if let (Some(r), s) = (self.remanence_am2, self.remanence_sigma_am2) {
            q.push(Quantity::number("rod_remanence_am2".into(), "A·m²", r, s));
        }
        if let (Some(m), s) = (self.moment_at_max_am2, self.moment_at_max_sigma_am2) {
            q.push(Quantity::number(
                "rod_moment_at_max_am2".into(),
                "A·m²",
                m,
                s,
            ));
        }
        if let Some(i) = self.saturation_current_a {
            q.push(Quantity::number(
                "rod_saturation_current_a".into(),
                "A",
                i,
                None,
            ));
        }
        if let Some(t) = self.time_constant_s {
            q.push(Quantity::number(
                "rod_time_constant_s".into(),
                "s",
                t,
                self.time_constant_sigma_s,
            ));
        }
        q
    }

    fn summary(&self) -> String {
        let rem = self
            .remanence_pct
            .map(|r| format!(", remanence {r:.1} %"))
            .unwrap_or_default();
        format!(
            "rod {}: {:.4} ± {:.4} A·m²/A ({}){rem}",
            self.serial,
            self.moment_per_amp_am2_per_a,
            self.moment_per_amp_sigma,
            polarity_word(self)
        )
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::rod_section(self)?])
    }

    fn ledger_identity(&self) -> Option<(String, String)> {
        Some((
            self.serial.clone(),
            self.batch.clone().unwrap_or_else(|| NO_BATCH.to_string()),
        ))
    }
}

fn polarity_word(r: &RodResult) -> &'static str {
    match r.polarity {
        super::RodPolarity::Ok => "ok",
        super::RodPolarity::Reversed => "reversed",
    }
}
