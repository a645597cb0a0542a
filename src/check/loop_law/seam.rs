//! `loop` at the check seam: its registry entry, how a closeout step runs it (no
//! calibration file: the readings are used as logged, and the result says so), and what
//! its result offers the ledger, the summaries and the writers.

use super::{run_loop, LoopOptions, LoopResult};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("loop");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Control law's sign (closed loop)",
    // The flight magnetometer records the log.
    plan_range_applies: |_| true,
    run_step,
};

fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let req = CheckRequest::new(input, Some(plan), LoopOptions::default());
    Ok(Box::new(run_loop(&req)?))
}

impl CheckResult for LoopResult {
    crate::result_basics!(KIND);

    /// `loop_power_mean_uw` (µW, the scale of a table test, so history reads
    /// `-0.50 ± 0.15 µW` rather than a row of zeros) with its 1σ, `loop_energy` as a
    /// word, and per rod `loop_rod_<name>_slope` / `loop_rod_<name>_correlation`
    /// (dimensionless) and `loop_rod_<name>` as its verdict word.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = vec![
            Quantity::number(
                "loop_power_mean_uw".into(),
                "µW",
                self.power_mean_w * 1e6,
                Some(self.power_sigma_w * 1e6),
            ),
            Quantity::verdict("loop_energy".into(), energy_word(self)),
        ];
        for r in &self.rods {
            if let Some(s) = r.slope {
                out.push(Quantity::number(
                    format!("loop_rod_{}_slope", r.name),
                    "",
                    s,
                    None,
                ));
            }
            if let Some(c) = r.correlation {
                out.push(Quantity::number(
                    format!("loop_rod_{}_correlation", r.name),
                    "",
                    c,
                    None,
                ));
            }
            out.push(Quantity::verdict(
                format!("loop_rod_{}", r.name),
                r.verdict.word(),
            ));
        }
        out
    }

    fn summary(&self) -> String {
        let rods: Vec<String> = self
            .rods
            .iter()
            .map(|r| format!("{} {}", r.name, r.verdict.word()))
            .collect();
        format!(
            "{} law: power {:+.3} ± {:.3} µW, energy {}; rods {}",
            match self.law {
                crate::log::plan::ControlLaw::Bdot => "B-dot",
                crate::log::plan::ControlLaw::Rate => "rate",
            },
            self.power_mean_w * 1e6,
            self.power_sigma_w * 1e6,
            energy_word(self),
            rods.join(", ")
        )
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::loop_section(self)?])
    }
}

/// The energy verdict as its JSON word.
pub fn energy_word(r: &LoopResult) -> &'static str {
    match r.energy {
        super::Energy::Removes => "removes",
        super::Energy::Adds => "adds",
        super::Energy::None => "none",
    }
}
