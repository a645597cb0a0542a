//! `calibrate` at the check seam: its registry entry, how a closeout step runs it, and
//! what its result offers the ledger, the summaries and the writers.

use super::{run_calibrate, CalibrateOptions, CalibrationResult};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("calibrate");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Magnetometer calibration",
    plan_range_applies: |_| true,
    run_step,
};

fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let req = CheckRequest::new(input, Some(plan), CalibrateOptions::default());
    Ok(Box::new(run_calibrate(&req)?))
}

impl CheckResult for CalibrationResult {
    crate::result_basics!(KIND);

    fn flight_part(&self) -> Option<crate::check::FlightPart<'_>> {
        Some(crate::check::FlightPart::Calibration(self))
    }

    /// `hard_iron_{x,y,z}_nt`, `hard_iron_magnitude_nt`, `soft_iron_{r}{c}`,
    /// `calibration_residual_rms_nt`, each with its 1σ.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = Quantity::iron(
            self.hard_iron_nt,
            self.hard_iron_sigma_nt,
            &self.soft_iron,
            &self.soft_iron_sigma,
        );
        out.push(Quantity::number(
            "calibration_residual_rms_nt".into(),
            "nT",
            self.residual_rms_nt,
            Some(self.residual_rms_sigma_nt),
        ));
        out
    }

    fn summary(&self) -> String {
        let h = self.hard_iron_nt;
        format!(
            "hard iron ({:+.0}, {:+.0}, {:+.0}) nT, residual {:.1} nT RMS",
            h[0], h[1], h[2], self.residual_rms_nt
        )
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::calibration_section(self)?])
    }
}
