//! `magproof orbit LOG --plan P [--sensor NAME] [--grid-s S] [--no-ground] [--json]
//! [--report DIR] [--record]`: calibration from on-orbit telemetry (docs/orbit.md),
//! compared with the latest ground calibration of the same serial and magnetometer in
//! the ledger, presented by the common writers.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::{InputArgs, Outcome, OutputArgs};
use super::numeric::{number, Domain};
use super::present::{present_check, Analysed};
use magproof::check::orbit::ground::find_ground;
use magproof::check::orbit::{run_orbit, GroundLookup, OrbitOptions, DEFAULT_GRID_S};
use magproof::check::{CheckInput, CheckRequest};
use magproof::log::telemetry::read_telemetry;

/// Flags of `magproof orbit`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Telemetry log (CSV): t, bx by bz, optional rx ry rz or lat lon alt, i_<name>, cmd_<rod>, temp.
    log: PathBuf,
    /// Plan (TOML): [article] for the ledger, [orbit] tle when the log has no positions.
    #[arg(long)]
    plan: PathBuf,
    /// Spacing of the model nodes, s; 0 synthesises IGRF-14 at every sample.
    #[arg(long, value_name = "S", default_value_t = DEFAULT_GRID_S, value_parser = |s: &str| number(s, GRID_S), allow_hyphen_values = true)]
    grid_s: f64,
    /// Plain least squares instead of Tukey reweighting.
    #[arg(long)]
    no_robust: bool,
    /// Do not compare with the ground calibration in the ledger.
    #[arg(long)]
    no_ground: bool,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    sensor: super::common::SensorArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// Model node spacing: 0 (every sample) to 10 minutes.
const GRID_S: Domain = Domain::closed(0.0, 600.0, "s");

/// Run `orbit`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    if args.input.skip_bad_rows {
        return Err(magproof::Error::Usage(
            "orbit reads every row of a telemetry log: --skip-bad-rows is not offered; fix or \
             remove the bad rows"
                .into(),
        )
        .into());
    }
    let mut plan = magproof::log::read_plan(&args.plan).map_err(magproof::Error::from)?;
    // As calibrate: the named magnetometer, which a plan of several needs.
    plan.select_sensor(args.sensor.sensor.as_deref())
        .map_err(magproof::Error::from)?;
    let unit = args
        .input
        .unit
        .or_else(|| plan.magnetometer.as_ref().and_then(|m| m.unit))
        .unwrap_or_default();
    let tele = read_telemetry(&args.log, unit).map_err(magproof::Error::from)?;
    let range = args
        .input
        .range
        .or_else(|| plan.magnetometer.as_ref().and_then(|m| m.range_nt));
    let input = CheckInput::screen(tele.log, unit, range)?;
    let ground = if args.no_ground {
        GroundLookup::NotAsked
    } else {
        find_ground(Some(&args.record.ledger.path()), &plan)?
    };
    let options = OrbitOptions {
        columns: &tele.orbit,
        ground,
        robust: !args.no_robust,
        grid_s: args.grid_s,
        keep_samples: args.output.report.is_some(),
    };
    let key = serde_json::json!({
        "grid_s": args.grid_s,
        "robust": !args.no_robust,
        "ground": !args.no_ground,
    });
    let result = run_orbit(&CheckRequest::new(&input, Some(&plan), options))?;
    let analysed = Analysed::new(&args.log, &input, &args.input, key);
    present_check(
        &result,
        analysed,
        Some(&plan),
        &args.output,
        &args.record,
        Vec::new(),
    )
}
