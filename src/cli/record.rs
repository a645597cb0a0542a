//! `--record` for the single checks (calibrate, polarity, dipole): flags and the one call
//! that files a check's result in the ledger under the plan's `[article]`.

use std::path::Path;

use clap::Args;
use serde::Serialize;

use super::common::LedgerArgs;
use magproof::ledger::{record_check, Recorded};
use magproof::log::plan::StepKind;
use magproof::log::Plan;

/// `--record [--ledger PATH]`, to flatten into a check's flags.
#[derive(Debug, Clone, Args)]
pub struct RecordArgs {
    /// Also record this run in the ledger, under the plan's [article] serial and build.
    #[arg(long)]
    pub record: bool,
    #[command(flatten)]
    pub ledger: LedgerArgs,
}

/// If `--record` was given, record `result` (the check's §7 object) with the log and
/// the plan as inputs, and say on stderr what happened. Without a plan, or with a plan
/// lacking `[article]`, refuse with a usage error (exit 2) naming what is missing.
pub fn record_if_asked(
    args: &RecordArgs,
    plan: Option<&Plan>,
    kind: StepKind,
    log: &Path,
    result: &impl Serialize,
) -> anyhow::Result<()> {
    if !args.record {
        return Ok(());
    }
    let Some(plan) = plan else {
        return Err(magproof::Error::Usage(
            "--record needs --plan: the plan's [article] gives the serial and build to file the run under".into(),
        )
        .into());
    };
    let value = serde_json::to_value(result)
        .map_err(|e| magproof::Error::Internal(format!("result is not JSON: {e}")))?;
    let path = args.ledger.path();
    let recorded = record_check(&path, plan, kind, log, value).map_err(magproof::Error::from)?;
    match recorded {
        Recorded::New(id) => eprintln!("magproof: recorded as run {id} in {}", path.display()),
        Recorded::AlreadyThere(id) => eprintln!(
            "magproof: same inputs already recorded as run {id} in {} (not recorded again)",
            path.display()
        ),
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn record_without_a_plan_is_a_usage_error_and_writes_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let db = dir.path().join("l.db");
        let args = RecordArgs {
            record: true,
            ledger: LedgerArgs {
                ledger: Some(db.clone()),
            },
        };
        let e = record_if_asked(&args, None, StepKind::Dipole, Path::new("x.csv"), &1).unwrap_err();
        assert_eq!(super::super::exit_code_for(&e), 2);
        assert!(e.to_string().contains("--plan"), "{e}");
        assert!(!db.exists());
    }
}
