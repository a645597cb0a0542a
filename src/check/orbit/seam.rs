//! `orbit` at the check seam: its registry entry, how a closeout step runs it, and what
//! its result offers the ledger, the summaries and the writers.

use super::{run_orbit, GroundLookup, OrbitOptions, OrbitResult, DEFAULT_GRID_S};
use crate::check::kind::{CheckKind, CheckSpec};
use crate::check::outcome::CheckResult;
use crate::check::{CheckInput, CheckRequest};
use crate::ledger::Quantity;
use crate::log::telemetry::read_telemetry;
use crate::log::Plan;
use crate::report::Section;
use crate::Error;
use std::path::Path;

/// The kind's stable name.
pub const KIND: CheckKind = CheckKind::new("orbit");

/// The registry entry.
pub const SPEC: CheckSpec = CheckSpec {
    kind: KIND,
    title: "Magnetometer calibration on orbit",
    plan_range_applies: |_| true,
    run_step,
};

/// A closeout step: the orbit columns (absolute time, positions, currents) are read with
/// the telemetry reader from the step's log; the field, as screened, comes from `input`.
/// The ground comparison follows in [`CheckResult::compare_with_ledger`], against the
/// ledger the closeout records into.
fn run_step(input: &CheckInput, plan: &Plan) -> Result<Box<dyn CheckResult>, Error> {
    let tele = read_telemetry(&input.log.path, input.unit)?;
    let screened = CheckInput::screen(tele.log, input.unit, input.range_nt)?;
    let options = OrbitOptions {
        columns: &tele.orbit,
        ground: GroundLookup::NotAsked,
        robust: true,
        grid_s: DEFAULT_GRID_S,
        keep_samples: true,
    };
    Ok(Box::new(run_orbit(&CheckRequest::new(
        &screened,
        Some(plan),
        options,
    ))?))
}

impl CheckResult for OrbitResult {
    crate::result_basics!(KIND);

    /// `hard_iron_{x,y,z}_nt` (the names `calibrate` uses, so history puts ground and
    /// orbit side by side), `soft_iron_{r}{c}`, `bias_<regressor>_{x,y,z}_nt_per_unit`,
    /// `temperature_slope_{x,y,z}_nt_per_c`, `orbit_residual_rms_nt`, and
    /// `ground_delta_{x,y,z}_nt` when compared.
    fn quantities(&self) -> Vec<Quantity> {
        let mut out = Quantity::iron(
            self.hard_iron_nt,
            self.hard_iron_sigma_nt,
            &self.soft_iron,
            &self.soft_iron_sigma,
        );
        for r in &self.regressors {
            for (a, axis) in ["x", "y", "z"].iter().enumerate() {
                out.push(Quantity::number(
                    format!("bias_{}_{axis}_nt_per_unit", r.name),
                    &format!("nT/{}", r.unit),
                    r.bias_nt_per_unit[a],
                    Some(r.sigma[a]),
                ));
            }
        }
        if let (Some(s), Some(ss)) = (
            self.temperature_slope_nt_per_c,
            self.temperature_slope_sigma_nt_per_c,
        ) {
            for (a, axis) in ["x", "y", "z"].iter().enumerate() {
                out.push(Quantity::number(
                    format!("temperature_slope_{axis}_nt_per_c"),
                    "nT/°C",
                    s[a],
                    Some(ss[a]),
                ));
            }
        }
        out.push(Quantity::number(
            "orbit_residual_rms_nt".into(),
            "nT",
            self.residual_rms_nt,
            None,
        ));
        if let Some(g) = &self.ground {
            for (a, axis) in ["x", "y", "z"].iter().enumerate() {
                out.push(Quantity::number(
                    format!("ground_delta_{axis}_nt"),
                    "nT",
                    g.hard_iron_delta_nt[a],
                    Some(g.sigma_nt[a]),
                ));
            }
        }
        out
    }

    fn summary(&self) -> String {
        let h = self.hard_iron_nt;
        let mut s = format!(
            "orbit hard iron ({:+.0}, {:+.0}, {:+.0}) nT, residual {:.1} nT RMS ({})",
            h[0],
            h[1],
            h[2],
            self.residual_rms_nt,
            self.reference.word()
        );
        if let Some(g) = &self.ground {
            let d = g.hard_iron_delta_nt;
            s.push_str(&format!(
                "; vs ground {}: ({:+.0}, {:+.0}, {:+.0}) nT{}",
                g.build,
                d[0],
                d[1],
                d[2],
                if g.flag { " CHANGED" } else { "" }
            ));
        }
        s
    }

    fn sections(&self) -> Result<Vec<Section>, Error> {
        Ok(vec![crate::report::sections::orbit_section(self)?])
    }

    /// The latest ground calibration of the plan's serial and magnetometer in `ledger`.
    fn compare_with_ledger(&mut self, plan: &Plan, ledger: Option<&Path>) -> Result<(), Error> {
        let lookup = super::ground::find_ground(ledger, plan)?;
        self.compare_with_ground(&lookup);
        Ok(())
    }
}
