//! `--record` for the single checks (calibrate, polarity, dipole): flags and the one call
//! that files a check's result in the ledger under the plan's `[article]`.

use std::path::Path;

use super::common::LedgerArgs;
use clap::Args;
use magproof::check::CheckResult;
use magproof::ledger::{record_check_noting_versions, Recorded};
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

/// If `--record` was given, record `result` (the check's result) with the log (path and
/// the hash of the bytes analysed), the plan and the analysis `options` as its key, and say on stderr what happened. Without a plan, or with a plan
/// lacking `[article]`, refuse with a usage error (exit 2) naming what is missing.
pub fn record_if_asked(
    args: &RecordArgs,
    plan: Option<&Plan>,
    result: &dyn CheckResult,
    log: (&Path, &str),
    options: serde_json::Value,
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
    let path = args.ledger.path();
    let (recorded, others) = record_check_noting_versions(&path, plan, result, log, options)
        .map_err(magproof::Error::from)?;
    let shown = magproof::text::printable(&path.display().to_string());
    match recorded {
        Recorded::New(id) => eprintln!("magproof: recorded as run {id} in {shown}"),
        Recorded::AlreadyThere(id) => eprintln!(
            "magproof: same inputs already recorded as run {id} in {shown} (not recorded again)"
        ),
    }
    for other in others {
        eprintln!("magproof: {other}");
    }
    Ok(())
}
