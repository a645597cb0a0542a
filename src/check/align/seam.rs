//! `align` at the check seam: its registry entry, how a closeout step runs it (no
//! calibration: the hard iron is fitted jointly), and what its result offers the ledger,
//! the summaries and the writers.

use super::{run_align, AlignOptions, AlignResult, AxisResult, GyroResult, MagAlignment};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::Plan;
use crate::report::terminal::value_sigma;
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

    /// Magnetometer: `misalignment_{x,y,z}_deg` (observable components) and
    /// `misalignment_total_deg` with their 1σ, `align_axis_{x,y,z}` and
    /// `align_handedness` as words. Gyro: `gyro_scale_{x,y,z}` and
    /// `gyro_bias_{x,y,z}_deg_s` (measured axes) and `gyro_misalignment_total_deg` with
    /// their 1σ, `gyro_axis_{x,y,z}` as words.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = Vec::new();
        if let Some(m) = &self.magnetometer.0 {
            mag_quantities(m, &mut out);
        }
        if let Some(g) = &self.gyro {
            gyro_quantities(g, &mut out);
        }
        out
    }

    fn summary(&self) -> String {
        let words = |axes: &[AxisResult]| {
            axes.iter()
                .map(|a| format!("{} {}", a.axis, a.verdict.word()))
                .collect::<Vec<_>>()
                .join(", ")
        };
        let mut parts = Vec::new();
        if let Some(m) = &self.magnetometer.0 {
            parts.push(format!(
                "axes {}; misalignment {}",
                words(&m.axes),
                value_sigma(
                    m.misalignment_total_deg,
                    m.misalignment_total_sigma_deg,
                    "°"
                )
            ));
        }
        if let Some(g) = &self.gyro {
            parts.push(format!(
                "gyro axes {}; gyro misalignment {}",
                words(&g.axes),
                value_sigma(
                    g.misalignment_total_deg,
                    g.misalignment_total_sigma_deg,
                    "°"
                )
            ));
        }
        parts.join("; ").replace(" °", "°")
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::align_section(
            self, SPEC.title,
        )?])
    }
}

fn mag_quantities(m: &MagAlignment, out: &mut Vec<Quantity>) {
    for (i, axis) in ["x", "y", "z"].iter().enumerate() {
        if let Some(v) = m.misalignment_deg[i] {
            let name = format!("misalignment_{axis}_deg");
            out.push(Quantity::number(
                name,
                "deg",
                v,
                m.misalignment_sigma_deg[i],
            ));
        }
    }
    out.push(Quantity::number(
        "misalignment_total_deg".into(),
        "deg",
        m.misalignment_total_deg,
        Some(m.misalignment_total_sigma_deg),
    ));
    for a in &m.axes {
        out.push(Quantity::verdict(
            format!("align_axis_{}", a.axis),
            a.verdict.word(),
        ));
    }
    let hand = serde_json::to_value(m.handedness)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_default();
    out.push(Quantity::verdict("align_handedness".into(), &hand));
}

fn gyro_quantities(g: &GyroResult, out: &mut Vec<Quantity>) {
    for (i, axis) in ["x", "y", "z"].iter().enumerate() {
        if let Some(v) = g.scale[i] {
            let name = format!("gyro_scale_{axis}");
            out.push(Quantity::number(name, "1", v, g.scale_sigma[i]));
        }
        if let Some(v) = g.bias_deg_s[i] {
            let name = format!("gyro_bias_{axis}_deg_s");
            out.push(Quantity::number(name, "deg/s", v, g.bias_sigma_deg_s[i]));
        }
    }
    if g.misalignment_deg.iter().all(Option::is_some) {
        out.push(Quantity::number(
            "gyro_misalignment_total_deg".into(),
            "deg",
            g.misalignment_total_deg,
            Some(g.misalignment_total_sigma_deg),
        ));
    }
    for a in &g.axes {
        out.push(Quantity::verdict(
            format!("gyro_axis_{}", a.axis),
            a.verdict.word(),
        ));
    }
}
