//! Closeout: every `[[step]]` of a plan, in order, as one run (`docs/ledger.md`).
//!
//! Each step's kind is looked up in the registry of checks before anything runs (an
//! unknown kind is refused by its line in the plan). Each step reads its log (path
//! relative to the plan file) through the one input builder and runs its check with the
//! plan's geometry and limits. All steps are run before anything is recorded: a step
//! that cannot run (missing log, bad cell, degenerate data) stops the closeout with an
//! error that names the step, and nothing reaches the ledger. A step that runs and
//! fails its limit is a full result with a failing verdict.

use std::path::{Path, PathBuf};

use super::kind::CheckKind;
use super::outcome::{CheckResult, Verdict};
use super::sign_chain::{sign_chain_of, SignChain};
use super::{CheckInput, InputOptions};
use crate::log::plan::read_plan;
use crate::log::Plan;
use crate::Error;

/// What to run.
#[derive(Debug, Clone)]
pub struct CloseoutRequest {
    /// The plan file.
    pub plan: PathBuf,
    /// Skip bad rows in every log instead of refusing them.
    pub skip_bad_rows: bool,
    /// The ledger the closeout records into (`None`: none); steps that compare with
    /// earlier runs (an orbit step with the ground calibration) read it before
    /// anything of this closeout is recorded.
    pub ledger: Option<PathBuf>,
}

/// A step that ran.
#[derive(Debug)]
pub struct StepOutcome {
    /// 1-based position in the plan.
    pub index: usize,
    /// The log it read.
    pub log: PathBuf,
    /// SHA-256 (lower-case hex) of the log's bytes, hashed as they were read.
    pub log_sha256: String,
    /// Its result.
    pub result: Box<dyn CheckResult>,
    /// The magnetometer the step read (`sensor = "NAME"`), when named.
    pub sensor: Option<String>,
    /// Columns of its log that no check uses, as written in the header.
    pub ignored_columns: Vec<String>,
}

/// Every step of a plan.
#[derive(Debug)]
pub struct CloseoutResult {
    /// The plan that was run.
    pub plan: Plan,
    /// The steps, in plan order.
    pub steps: Vec<StepOutcome>,
    /// The sign chain per body axis, when a step is an align, polarity or loop step
    /// (docs/sign-chain.md).
    pub sign_chain: Option<SignChain>,
}

impl CloseoutResult {
    /// Overall verdict: the worst of the steps' and the sign chain's (a broken element
    /// fails; one not proven does not lower it; docs/sign-chain.md).
    pub fn verdict(&self) -> Verdict {
        let chain = self.sign_chain.as_ref().map(SignChain::verdict);
        Verdict::combine(self.steps.iter().map(|s| s.result.verdict()).chain(chain))
    }

    /// Overall pass: false if any step failed or was inconclusive; true if every step
    /// passed; `None` when no step had anything to judge against.
    pub fn pass(&self) -> Option<bool> {
        self.verdict().pass()
    }

    /// One JSON object: serial, build, pass, verdict, and each step's kind, log and
    /// result.
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
                    "pass": s.result.verdict().pass(),
                    "verdict": s.result.verdict(),
                    "sensor": s.sensor,
                    "ignored_columns": s.ignored_columns,
                    "result": s.result.json()?,
                }))
            })
            .collect::<Result<Vec<_>, Error>>()?;
        let mut out = serde_json::json!({
            "serial": article.map(|a| a.serial.clone()),
            "build": article.map(|a| a.build.clone()),
            "plan": self.plan.path.display().to_string(),
            "pass": self.pass(),
            "verdict": self.verdict(),
            "steps": steps,
        });
        if let (Some(chain), Some(o)) = (&self.sign_chain, out.as_object_mut()) {
            o.extend(
                chain
                    .json_keys()
                    .into_iter()
                    .map(|(k, v)| (k.to_string(), v)),
            );
        }
        Ok(out)
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
    let kinds = step_kinds(&plan)?;
    let mut steps = Vec::with_capacity(plan.steps.len());
    for (k, (step, kind)) in plan.steps.iter().zip(kinds).enumerate() {
        let step_error = |e: Error| Error::Step {
            index: k + 1,
            kind: kind.as_str(),
            log: step.log.clone(),
            source: Box::new(e),
        };
        let mut step_plan = plan.clone();
        if step.sensor.is_some() {
            step_plan
                .select_sensor(step.sensor.as_deref())
                .map_err(|e| step_error(e.into()))?;
        }
        let mut ran =
            run_step(&step_plan, kind, &step.log, req.skip_bad_rows).map_err(step_error)?;
        ran.result
            .compare_with_ledger(&step_plan, req.ledger.as_deref())
            .map_err(step_error)?;
        steps.push(StepOutcome {
            index: k + 1,
            log: step.log.clone(),
            log_sha256: ran.log_sha256,
            result: ran.result,
            sensor: step_plan.sensor_name().map(String::from),
            ignored_columns: ran.ignored_columns,
        });
    }
    let sign_chain = sign_chain_of(&plan, &steps)?;
    Ok(CloseoutResult {
        plan,
        steps,
        sign_chain,
    })
}

/// Every step's kind from the registry; an unknown one is refused by its line.
fn step_kinds(plan: &Plan) -> Result<Vec<CheckKind>, Error> {
    plan.steps
        .iter()
        .enumerate()
        .map(|(k, step)| {
            CheckKind::parse(&step.kind).ok_or_else(|| {
                plan.invalid(
                    &format!("step[{k}].kind"),
                    format!(
                        "line {}: unknown check kind \"{}\"; the kinds are {}",
                        step.kind_line,
                        step.kind,
                        CheckKind::names()
                    ),
                )
                .into()
            })
        })
        .collect()
}

/// What one step gave: its result, the SHA-256 of the log's bytes as read, and the
/// log's ignored columns.
#[derive(Debug)]
pub struct StepRun {
    /// The check's result.
    pub result: Box<dyn CheckResult>,
    /// SHA-256 (lower-case hex) of the log's bytes, hashed as they were read.
    pub log_sha256: String,
    /// Columns of the log that no check uses, as written.
    pub ignored_columns: Vec<String>,
}

/// Run one check of a plan on one log: read and screen the log as the check needs,
/// then run it.
pub fn run_step(
    plan: &Plan,
    kind: CheckKind,
    log: &Path,
    skip_bad_rows: bool,
) -> Result<StepRun, Error> {
    let spec = kind.spec()?;
    let options = InputOptions {
        unit: None,
        range_nt: None,
        skip_bad_rows,
        plan_range_applies: (spec.plan_range_applies)(plan),
        decimal_comma: false,
    };
    let input = CheckInput::read(log, Some(plan), &options)?;
    Ok(StepRun {
        result: (spec.run_step)(&input, plan)?,
        log_sha256: input.log.sha256.clone(),
        ignored_columns: input.log.ignored_columns.clone(),
    })
}
