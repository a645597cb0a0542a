//! `polarity` at the check seam: its registry entry, how a closeout step runs it, and
//! what its result offers the ledger, the summaries and the writers.

use super::{magnetometer_recorded, run_polarity, PolarityOptions, PolarityResult};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("polarity");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Torque-rod polarity",
    plan_range_applies: |plan| magnetometer_recorded(plan, PolarityOptions::default().sensor),
    run_step,
};

fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let req = CheckRequest::new(input, Some(plan), PolarityOptions::default());
    Ok(Box::new(run_polarity(&req)?))
}

impl CheckResult for PolarityResult {
    crate::result_basics!(KIND);

    fn flight_part(&self) -> Option<crate::check::FlightPart<'_>> {
        Some(crate::check::FlightPart::Polarity(self))
    }

    /// `rod_<name>_verdict` per rod.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = Vec::new();
        for rod in &self.rods {
            out.push(Quantity::verdict(
                format!("rod_{}_verdict", rod.name),
                rod.verdict.as_str(),
            ));
        }
        out
    }

    fn summary(&self) -> String {
        self.rods
            .iter()
            .map(|rod| format!("{} {}", rod.name, rod.verdict))
            .collect::<Vec<_>>()
            .join(", ")
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::polarity_section(self)?])
    }
}
