//! Closeout: every `[[step]]` of a plan, in order, as one run (DESIGN §6, issue 7).
//!
//! Each step reads its log (path relative to the plan file) and runs its check with the
//! plan's geometry and limits. All steps are run before anything is recorded: a step
//! that cannot run (missing log, bad cell, degenerate data) stops the closeout with an
//! error that names the step, and nothing reaches the ledger. A step that runs and
//! fails its limit is a full result with `pass: false`.

use std::path::{Path, PathBuf};

use serde::Serialize;

use super::calibrate::{run_calibrate, CalibrateRequest, CalibrationResult};
use super::dipole::{run_dipole, DipoleRequest, DipoleResult};
use super::polarity::{run_polarity, PolarityRequest, PolarityResult};
use crate::fit::tumble::Robust;
use crate::log::plan::{read_plan, StepKind};
use crate::log::{read_sweep, Plan, ReadOptions};
use crate::Error;

/// What to run.
#[derive(Debug, Clone)]
pub struct CloseoutRequest {
    /// The plan file.
    pub plan: PathBuf,
    /// Skip bad rows in every log instead of refusing them.
    pub skip_bad_rows: bool,
}

/// One step's result.
#[derive(Debug, Clone, Serialize)]
#[serde(untagged)]
pub enum StepResult {
    /// Magnetometer calibration.
    Calibrate(Box<CalibrationResult>),
    /// Torque-rod polarity.
    Polarity(Box<PolarityResult>),
    /// Residual dipole.
    Dipole(Box<DipoleResult>),
}

impl StepResult {
    /// The step's kind.
    pub fn kind(&self) -> StepKind {
        match self {
            StepResult::Calibrate(_) => StepKind::Calibrate,
            StepResult::Polarity(_) => StepKind::Polarity,
            StepResult::Dipole(_) => StepKind::Dipole,
        }
    }

    /// The verdict: `None` when the plan sets no limit for this check.
    pub fn pass(&self) -> Option<bool> {
        match self {
            StepResult::Calibrate(r) => r.pass,
            StepResult::Polarity(r) => Some(r.pass),
            StepResult::Dipole(r) => r.pass,
        }
    }

    /// The DESIGN §7 JSON object of this check.
    pub fn to_json(&self) -> Result<serde_json::Value, Error> {
        serde_json::to_value(self).map_err(|e| Error::Internal(format!("result to JSON: {e}")))
    }
}

/// A step that ran.
#[derive(Debug, Clone)]
pub struct StepOutcome {
    /// 1-based position in the plan.
    pub index: usize,
    /// The log it read.
    pub log: PathBuf,
    /// Its result.
    pub result: StepResult,
}

/// Every step of a plan.
#[derive(Debug, Clone)]
pub struct CloseoutResult {
    /// The plan that was run.
    pub plan: Plan,
    /// The steps, in plan order.
    pub steps: Vec<StepOutcome>,
}

impl CloseoutResult {
    /// Overall verdict: false if any step failed; true if every step with a limit passed
    /// and at least one had a limit; `None` when no step had a limit.
    pub fn pass(&self) -> Option<bool> {
        let verdicts: Vec<Option<bool>> = self.steps.iter().map(|s| s.result.pass()).collect();
        if verdicts.contains(&Some(false)) {
            Some(false)
        } else if verdicts.contains(&Some(true)) {
            Some(true)
        } else {
            None
        }
    }

    /// One JSON object: serial, build, pass, and each step's kind, log and §7 result.
    pub fn to_json(&self) -> Result<serde_json::Value, Error> {
        let article = self.plan.article.as_ref();
        let steps = self
            .steps
            .iter()
            .map(|s| {
                Ok(serde_json::json!({
                    "step": s.index,
                    "kind": s.result.kind().as_str(),
                    "log": s.log.display().to_string(),
                    "pass": s.result.pass(),
                    "result": s.result.to_json()?,
                }))
            })
            .collect::<Result<Vec<_>, Error>>()?;
        Ok(serde_json::json!({
            "serial": article.map(|a| a.serial.clone()),
            "build": article.map(|a| a.build.clone()),
            "plan": self.plan.path.display().to_string(),
            "pass": self.pass(),
            "steps": steps,
        }))
    }
}

/// Run every step of the plan at `req.plan`, in order.
pub fn run_closeout(req: &CloseoutRequest) -> Result<CloseoutResult, Error> {
    let plan = read_plan(&req.plan)?;
    if plan.article.is_none() {
        return Err(plan
            .missing(
                "article",
                "closeout files its results under the article's serial and build",
            )
            .into());
    }
    if plan.steps.is_empty() {
        return Err(plan
            .missing(
                "step",
                "closeout runs the [[step]] entries of the plan; the plan lists none",
            )
            .into());
    }
    let mut steps = Vec::with_capacity(plan.steps.len());
    for (k, step) in plan.steps.iter().enumerate() {
        let result =
            run_step(&plan, step.kind, &step.log, req.skip_bad_rows).map_err(|e| Error::Step {
                index: k + 1,
                kind: step.kind.as_str(),
                log: step.log.clone(),
                source: Box::new(e),
            })?;
        steps.push(StepOutcome {
            index: k + 1,
            log: step.log.clone(),
            result,
        });
    }
    Ok(CloseoutResult { plan, steps })
}

fn read_options(plan: &Plan, skip_bad_rows: bool) -> ReadOptions {
    ReadOptions {
        default_unit: plan
            .magnetometer
            .as_ref()
            .and_then(|m| m.unit)
            .unwrap_or_default(),
        skip_bad_rows,
    }
}

/// Run one check of a plan on one log.
pub fn run_step(
    plan: &Plan,
    kind: StepKind,
    log: &Path,
    skip_bad_rows: bool,
) -> Result<StepResult, Error> {
    let read = read_options(plan, skip_bad_rows);
    Ok(match kind {
        StepKind::Calibrate => StepResult::Calibrate(Box::new(run_calibrate(&CalibrateRequest {
            log: log.to_path_buf(),
            plan: Some(plan.clone()),
            reference_nt: None,
            range_nt: None,
            read,
            robust: Robust::Tukey,
            keep_samples: true,
        })?)),
        StepKind::Polarity => {
            let sweep = read_sweep(log, &read)?;
            let mut r = run_polarity(&PolarityRequest::new(&sweep, plan))?;
            if let Some(first) = sweep.skipped_rows.first() {
                r.warnings.push(format!(
                    "{} bad rows were skipped (--skip-bad-rows); the first: {}",
                    sweep.skipped_rows.len(),
                    first.reason
                ));
            }
            StepResult::Polarity(Box::new(r))
        }
        StepKind::Dipole => {
            let mut req = DipoleRequest::new(log.to_path_buf(), plan.clone());
            req.read_options = read;
            StepResult::Dipole(Box::new(run_dipole(&req)?))
        }
    })
}
