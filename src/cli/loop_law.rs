//! `magproof loop LOG --plan P [--calibration FILE.json] [--smooth-s S] [--json]
//! [--report DIR] [--record]`: the sign of the flight software's magnetic control law
//! from a closed-loop log (docs/loop.md).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{load_plan, read_calibration};
use super::common::{InputArgs, Outcome, OutputArgs};
use super::numeric::{number, Domain};
use super::present::{present_check, read_input, Analysed};
use magproof::check::loop_law::{run_loop, LoopOptions, DEFAULT_SMOOTH_S};
use magproof::check::CheckRequest;

/// Flags of `magproof loop`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Closed-loop log (CSV): `t, bx, by, bz` as the software reads them, `cmd_<rod>`,
    /// optional `gx gy gz` or `angle`/`mount`.
    log: PathBuf,
    /// Test plan (TOML) with [control], [[rod]] and the magnetometer's mapping.
    #[arg(long)]
    plan: PathBuf,
    /// Calibration to apply to the readings: the JSON `calibrate --json` prints or the
    /// flight parameters (`hard_iron_nt`, `soft_iron`).
    #[arg(long, value_name = "FILE.json")]
    calibration: Option<PathBuf>,
    /// Length of the smoothing derivative's window, s [default: 1].
    #[arg(long, value_name = "S", value_parser = |s: &str| number(s, SMOOTH_S), allow_hyphen_values = true)]
    smooth_s: Option<f64>,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    sensor: super::common::SensorArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// `--smooth-s`.
const SMOOTH_S: Domain = Domain::positive(600.0, "s");

/// Run `loop`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = load_plan(&args.plan, args.sensor.sensor.as_deref())?;
    let (calibration, calibration_file) = read_calibration(args.calibration.as_deref())?;
    // The flight magnetometer records the log: its range applies.
    let input = read_input(&args.log, Some(&plan), &args.input, true)?;
    let smooth_s = args.smooth_s.unwrap_or(DEFAULT_SMOOTH_S);
    let key = serde_json::json!({
        "calibration_sha256": calibration_file.as_ref().map(|(_, h)| h),
        "smooth_s": smooth_s,
    });
    let options = LoopOptions {
        calibration,
        smooth_s,
    };
    let result = run_loop(&CheckRequest::new(&input, Some(&plan), options))?;
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
