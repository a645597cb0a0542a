//! Checks: each turns a log, read and screened once by [`input`], and a plan into a
//! result with a verdict.
//!
//! The seam: every check is registered in [`kind::specs`], is asked through a
//! [`CheckRequest`] (the screened log, the plan and the check's own options), and
//! returns a result implementing [`CheckResult`]. Closeout, the ledger, history and the
//! writers see results only through that trait. `DEVELOPERS.md` lists what a new check
//! adds.

pub mod align;
pub mod calibrate;
pub mod closeout;
pub mod dipole;
#[cfg(test)]
pub(crate) mod dummy;
pub mod flight_part;
pub mod input;
mod input_forms;
pub mod kind;
pub mod loop_law;
pub mod orbit;
pub mod outcome;
pub mod polarity;
pub mod rod;
pub mod sign_chain;
pub mod units_sense;

pub use flight_part::FlightPart;
pub use input::{CheckInput, InputOptions, InputWarning};
pub use kind::{CheckKind, CheckSpec};
pub use outcome::{Bound, CheckResult, Gate, GateRole, Verdict};

use crate::log::Plan;
use crate::Error;

/// What every check is asked: the log, read and screened once, the plan (when there is
/// one) and the check's own options.
#[derive(Debug, Clone, Copy)]
pub struct CheckRequest<'a, O> {
    /// The log, read and screened.
    pub input: &'a CheckInput,
    /// The test plan, when there is one.
    pub plan: Option<&'a Plan>,
    /// The check's own options.
    pub options: O,
}

impl<'a, O> CheckRequest<'a, O> {
    /// A request for `input` under `plan`.
    pub fn new(input: &'a CheckInput, plan: Option<&'a Plan>, options: O) -> Self {
        CheckRequest {
            input,
            plan,
            options,
        }
    }

    /// The plan, or a usage error saying what `check` needs it for.
    pub fn require_plan(&self, check: &str, why: &str) -> Result<&'a Plan, Error> {
        self.plan
            .ok_or_else(|| Error::Usage(format!("{check} needs a test plan: {why}")))
    }
}
