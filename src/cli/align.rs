//! `magproof align LOG --plan P [--calibration FILE.json] [--sensor NAME] [--json]
//! [--report DIR]`: the magnetometer's axes against the body frame and its misalignment,
//! from a turntable test in the plan's `[align_test]` mounts, and the gyro's axes, scale
//! and bias (docs/alignment.md).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{load_plan, read_calibration};
use super::common::{InputArgs, Outcome, OutputArgs};
use super::present::{present_check, read_input, Analysed};
use magproof::check::align::{run_align, AlignOptions};
use magproof::check::CheckRequest;

/// Flags of `magproof align`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Turntable log (CSV): `t, angle, mount, bx, by, bz` [`gx, gy, gz`]; or a hand
    /// tumble: `t, bx, by, bz, gx, gy, gz` (no `angle`).
    log: PathBuf,
    /// Test plan (TOML) with [align_test] and its [[align_test.mount]] entries.
    #[arg(long)]
    plan: PathBuf,
    /// Calibration to apply first: the JSON `calibrate --json` prints or the flight
    /// parameters (`hard_iron_nt`, `soft_iron`); without it the hard iron is fitted.
    #[arg(long, value_name = "FILE.json")]
    calibration: Option<PathBuf>,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    sensor: super::common::SensorArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// Run `align`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = load_plan(&args.plan, args.sensor.sensor.as_deref())?;
    let (calibration, calibration_file) = read_calibration(args.calibration.as_deref())?;
    // The flight magnetometer records the log: its range applies.
    let input = read_input(&args.log, Some(&plan), &args.input, true)?;
    let key = serde_json::json!({
        "calibration": args.calibration.as_ref().map(|p| p.display().to_string()),
        "calibration_sha256": calibration_file.as_ref().map(|(_, h)| h),
    });
    let options = AlignOptions { calibration };
    let result = run_align(&CheckRequest::new(&input, Some(&plan), options))?;
    let mut analysed = Analysed::new(&args.log, &input, &args.input, key);
    analysed.other_inputs.extend(calibration_file);
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
