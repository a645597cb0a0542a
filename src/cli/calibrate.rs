//! `magproof calibrate LOG [--plan P] [--reference-nt F] [--json] [--report DIR]
//! [--params-out FILE]`: cage fit when the log has `hx hy hz`, else tumble fit
//! (see README.md), presented by the common writers.

use std::path::PathBuf;

use clap::{Args as ClapArgs, ValueEnum};

use super::common::load_plan;
use super::common::{InputArgs, Outcome, OutputArgs};
use super::numeric::{number, FIELD_NT};
use super::present::{present_check, read_input, Analysed};
use magproof::check::calibrate::{run_calibrate, CalibrateOptions};
use magproof::check::CheckRequest;
use magproof::fit::tumble::Robust;
use magproof::report::ReportWriter;

/// Robust reweighting of the tumble fit.
#[derive(Debug, Clone, Copy, ValueEnum)]
enum RobustArg {
    /// Tukey biweight: gross outliers get zero weight and are counted.
    Tukey,
    /// Plain least squares.
    None,
}

/// Flags of `magproof calibrate`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Sweep log (CSV): a cage sweep (with hx hy hz) or a tumble test.
    log: PathBuf,
    /// Test plan (TOML): [site], [cage], [magnetometer] and [limits] are used.
    #[arg(long)]
    plan: Option<PathBuf>,
    /// Reference field magnitude for a tumble, nT (beats the plan's [site]).
    #[arg(long, value_name = "NT", value_parser = |s: &str| number(s, FIELD_NT), allow_hyphen_values = true)]
    reference_nt: Option<f64>,
    /// Write flight parameters: FILE.json and FILE.h side by side (give either name;
    /// only for a passing verdict unless --force).
    #[arg(long, value_name = "FILE")]
    params_out: Option<PathBuf>,
    /// Robust reweighting of the tumble fit.
    #[arg(long, value_enum, default_value = "tukey")]
    robust: RobustArg,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    sensor: super::common::SensorArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
}

/// Run `calibrate`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let plan = match &args.plan {
        Some(p) => Some(load_plan(p, args.sensor.sensor.as_deref())?),
        None => None,
    };
    let input = read_input(&args.log, plan.as_ref(), &args.input, true)?;
    let options = CalibrateOptions {
        reference_nt: args.reference_nt,
        robust: match args.robust {
            RobustArg::Tukey => Robust::Tukey,
            RobustArg::None => Robust::Off,
        },
        // The report's plots and the flight parameters' worked example use them.
        keep_samples: args.output.report.is_some() || args.params_out.is_some(),
    };
    let key = serde_json::json!({
        "reference_nt": options.reference_nt,
        "robust": format!("{:?}", options.robust),
    });
    let result = run_calibrate(&CheckRequest::new(&input, plan.as_ref(), options))
        .map_err(|e| flag_hint(e, "--reference-nt"))?;
    let analysed = Analysed::new(&args.log, &input, &args.input, key);
    drop(input);
    let mut extra: Vec<Box<dyn ReportWriter>> = Vec::new();
    if let Some(p) = &args.params_out {
        extra.push(Box::new(super::flight_out::for_check(
            &result,
            plan.as_ref(),
            (analysed.log, &analysed.log_sha256),
            p,
            args.output.force,
        )?));
    }
    present_check(
        &result,
        analysed,
        plan.as_ref(),
        &args.output,
        &args.record,
        extra,
    )
}

/// A usage error of the library, with the flag that sets the value named.
fn flag_hint(e: magproof::Error, flag: &str) -> anyhow::Error {
    match e {
        magproof::Error::Usage(m) => magproof::Error::Usage(format!("{flag}: {m}")).into(),
        other => other.into(),
    }
}
