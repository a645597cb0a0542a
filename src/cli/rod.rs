//! `magproof rod LOG --plan P [--json] [--report DIR] [--record]`: a torque rod on the
//! bench — moment per ampere, linearity, saturation, remanence, time constant, fall-off
//! and polarity against its marked axis (docs/rods.md).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{InputArgs, Outcome, OutputArgs};
use super::present::{present_check, read_input, Analysed};
use magproof::check::rod::{run_rod, RodOptions};
use magproof::check::CheckRequest;
use magproof::log::read_plan;

/// Flags of `magproof rod`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Bench log (CSV) with `t`, `i [A]` (or `[mA]`), `bx by bz` and `position`.
    log: PathBuf,
    /// Test plan (TOML) with [rod_bench] and its [[rod_bench.position]] stations.
    #[arg(long)]
    plan: PathBuf,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// Run `rod`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = read_plan(&args.plan).map_err(magproof::Error::from)?;
    // The bench probe is not the flight magnetometer: the plan's range does not apply.
    let input = read_input(&args.log, Some(&plan), &args.input, false)?;
    let result = run_rod(&CheckRequest::new(&input, Some(&plan), RodOptions))?;
    let analysed = Analysed::new(&args.log, &input, &args.input, serde_json::json!({}));
    drop(input);
    present_check(
        &result,
        analysed,
        Some(&plan),
        &args.output,
        &args.record,
        Vec::new(),
    )
}
