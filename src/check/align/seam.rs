//! `align` at the check seam: its registry entry, how a closeout step runs it (no
//! calibration: the hard iron is fitted jointly), and what its result offers the ledger,
//! the summaries and the writers.

use super::{run_align, AlignOptions, AlignResult};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("align");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Sensor axes and alignment",
    // The flight magnetometer records the log.
    plan_range_applies: |_| true,
    run_step,
};

fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let req = CheckRequest::new(input, Some(plan), AlignOptions::default());
    Ok(Box::new(run_align(&req)?))
}

impl CheckResult for AlignResult {
    crate::result_basics!(KIND);

    /// `misalignment_{x,y,z}_deg` (observable components) and `misalignment_total_deg`
    /// with their 1σ, `align_axis_{x,y,z}` and `align_handedness` as words.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = Vec::new();
        for (i, axis) in ["x", "y", "z"].iter().enumerate() {
            if let Some(v) = self.misalignment_deg[i] {
                let name = format!("misalignment_{axis}_deg");
                out.push(Quantity::number(
                    name,
                    "deg",
                    v,
                    self.misalignment_sigma_deg[i],
                ));
            }
        }
        out.push(Quantity::number(
            "misalignment_total_deg".into(),
            "deg",
            self.misalignment_total_deg,
            Some(self.misalignment_total_sigma_deg),
        ));
        for a in &self.axes {
            out.push(Quantity::verdict(
                format!("align_axis_{}", a.axis),
                a.verdict.word(),
            ));
        }
        let hand = serde_json::to_value(self.handedness)
            .ok()
            .and_then(|v| v.as_str().map(str::to_string))
            .unwrap_or_default();
        out.push(Quantity::verdict("align_handedness".into(), &hand));
        out
    }

    fn summary(&self) -> String {
        let axes: Vec<String> = self
            .axes
            .iter()
            .map(|a| format!("{} {}", a.axis, a.verdict.word()))
            .collect();
        format!(
            "axes {}; misalignment {:.2} ± {:.2}°",
            axes.join(", "),
            self.misalignment_total_deg,
            self.misalignment_total_sigma_deg
        )
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::align_section(
            self, SPEC.title,
        )?])
    }
}
