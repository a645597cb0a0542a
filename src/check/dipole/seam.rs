//! `dipole` at the check seam: its registry entry, how a closeout step runs it, and
//! what its result offers the ledger, the summaries and the writers.

use super::{run_dipole, DipoleOptions, DipoleResult};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("dipole");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Residual dipole",
    // The map is taken with an external probe: the magnetometer's range does not apply.
    plan_range_applies: |_| false,
    run_step,
};

fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let req = CheckRequest::new(input, Some(plan), DipoleOptions::for_plan(plan));
    Ok(Box::new(run_dipole(&req)?))
}

impl CheckResult for DipoleResult {
    crate::result_basics!(KIND);

    /// `dipole_{x,y,z}_am2` and `dipole_magnitude_am2`, each with its 1σ.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = Quantity::vector(
            "dipole",
            "A·m²",
            "am2",
            self.moment_body_am2,
            Some(self.moment_sigma_am2),
            Some(self.magnitude_am2),
        );
        if let Some(q) = out.last_mut() {
            q.set_sigma(self.magnitude_sigma_am2);
        }
        out
    }

    fn summary(&self) -> String {
        let limit = self
            .residual_dipole_max_am2
            .map(|l| format!(" (limit {:.1})", l * 1e3))
            .unwrap_or_default();
        format!(
            "|m| = {:.2} ± {:.2} mA·m²{limit}",
            self.magnitude_am2 * 1e3,
            self.magnitude_sigma_am2 * 1e3
        )
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::dipole_section(self)?])
    }
}
