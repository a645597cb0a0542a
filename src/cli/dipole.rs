//! `magproof dipole LOG --plan P [--altitude-km H] [--inclination-deg I] [--fit-offset]
//! [--json] [--report DIR]`: the article's residual magnetic dipole from a turntable or
//! static field map, and the disturbance torque it makes in orbit (docs/dipole.md).

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::load_plan;
use super::common::{InputArgs, Outcome, OutputArgs};
use super::numeric::{number, Domain};
use super::present::{present_check, read_input, Analysed};
use magproof::check::dipole::{run_dipole, DipoleOptions, DipolePosition};
use magproof::check::CheckRequest;

/// Flags of `magproof dipole`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Sweep log (CSV) with `mount` and either `angle` (turntable) or `px py pz`
    /// (static map); rows with `mount` empty or `none` are the background.
    log: PathBuf,
    /// Test plan (TOML) with [dipole_test] mounts (and the probe position for a turntable).
    #[arg(long)]
    plan: PathBuf,
    /// Orbit altitude for the disturbance torque, km [default: the plan's [orbit]
    /// altitude_km, else 500].
    #[arg(long, value_name = "KM", value_parser = |s: &str| number(s, ALTITUDE_KM), allow_hyphen_values = true)]
    altitude_km: Option<f64>,
    /// Orbit inclination, deg [default: the plan's [orbit] inclination_deg, else 97.4,
    /// sun-synchronous; the result says so].
    #[arg(long, value_name = "DEG", value_parser = |s: &str| number(s, INCLINATION_DEG), allow_hyphen_values = true)]
    inclination_deg: Option<f64>,
    /// Fit the dipole's position as well (three more unknowns) instead of placing it at
    /// the table origin.
    #[arg(long)]
    fit_offset: bool,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    sensor: super::common::SensorArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// An orbit altitude, km: above the ground, below the Moon.
const ALTITUDE_KM: Domain = Domain::closed(1.0, 400_000.0, "km");

/// An orbit inclination, deg.
const INCLINATION_DEG: Domain = Domain::closed(0.0, 180.0, "deg");

/// Run `dipole`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = load_plan(&args.plan, args.sensor.sensor.as_deref())?;
    // The map is taken with an external probe: the magnetometer's range does not apply.
    let input = read_input(&args.log, Some(&plan), &args.input, false)?;
    let from_plan = DipoleOptions::for_plan(&plan);
    let options = DipoleOptions {
        altitude_km: args.altitude_km.unwrap_or(from_plan.altitude_km),
        inclination_deg: args.inclination_deg.or(from_plan.inclination_deg),
        position: if args.fit_offset {
            DipolePosition::Fitted
        } else {
            DipolePosition::AtTableOrigin
        },
    };
    let key = serde_json::json!({
        "altitude_km": options.altitude_km,
        "inclination_deg": options.inclination_deg,
        "fit_offset": args.fit_offset,
    });
    let result = run_dipole(&CheckRequest::new(&input, Some(&plan), options))?;
    let analysed = Analysed::new(&args.log, &input, &args.input, key);
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
