//! `magproof polarity LOG --plan P [--json] [--report DIR] [--params-out FILE]`: per-rod
//! polarity verdict and coupling, presented by the common writers; optionally the
//! coupling matrix for flight software.

use std::path::PathBuf;

use clap::Args as ClapArgs;

use super::common::load_plan;
use super::common::{InputArgs, Outcome, OutputArgs};
use super::numeric::{number, Domain};
use super::present::{present_check, read_input, Analysed};
use magproof::check::polarity::{
    magnetometer_recorded, run_polarity, DriftModel, PolarityOptions, SensorChoice, DEFAULT_SNR_MIN,
};
use magproof::check::CheckRequest;
use magproof::report::ReportWriter;

/// Flags of `magproof polarity`.
#[derive(Debug, ClapArgs)]
pub struct Args {
    /// Pulse log (CSV) with t, bx by bz and one cmd_<rod> column per rod.
    log: PathBuf,
    /// Test plan (TOML) with [[rod]] and the sensor's geometry.
    #[arg(long)]
    plan: PathBuf,
    #[command(flatten)]
    input: InputArgs,
    #[command(flatten)]
    output: OutputArgs,
    #[command(flatten)]
    record: super::record::RecordArgs,
    /// Write flight parameters (rod coupling, dipoles, blanking window): FILE.json and
    /// FILE.h side by side (give either name; only for a passing verdict unless --force).
    #[arg(long, value_name = "FILE")]
    params_out: Option<PathBuf>,
    /// Which sensor recorded the log: the plan's [probe] if it has one (auto),
    /// magnetometer, probe, or the name of one of the plan's [[magnetometer]] entries.
    #[arg(long, default_value = "auto", value_name = "SENSOR", value_parser = parse_sensor)]
    sensor: SensorArg,
    /// SNR below which a rod is called no-response.
    #[arg(long, default_value_t = DEFAULT_SNR_MIN, value_parser = |s: &str| number(s, SNR), allow_hyphen_values = true)]
    snr_min: f64,
    /// Drift terms: auto, knots:SECONDS (piecewise-linear baseline) or poly:DEGREE.
    #[arg(long, default_value = "auto", value_parser = parse_drift, allow_hyphen_values = true)]
    drift: DriftModel,
    /// Largest lag searched, s (default: half the shortest pulse, at most 2 s).
    #[arg(long, value_name = "SECONDS", value_parser = |s: &str| number(s, MAX_LAG_S), allow_hyphen_values = true)]
    max_lag_s: Option<f64>,
}

#[derive(Debug, Clone)]
enum SensorArg {
    Auto,
    Magnetometer,
    Probe,
    /// A `[[magnetometer]]` of the plan, by name.
    Named(String),
}

fn parse_sensor(s: &str) -> Result<SensorArg, String> {
    Ok(match s.trim() {
        "auto" => SensorArg::Auto,
        "magnetometer" => SensorArg::Magnetometer,
        "probe" => SensorArg::Probe,
        "" => return Err("expected auto, magnetometer, probe or a magnetometer's name".into()),
        name => SensorArg::Named(name.to_string()),
    })
}

/// `--snr-min`: a signal-to-noise ratio.
const SNR: Domain = Domain::closed(0.0, 1e6, "");
/// `--max-lag-s`: the command-to-response lag searched, s (a rod's current settles in
/// milliseconds; a minute is far beyond any drive electronics — common practice).
const MAX_LAG_S: Domain = Domain::positive(60.0, "s");
/// `--drift knots:SECONDS`: the knot spacing, s (up to about eleven days of log).
const KNOT_SPACING_S: Domain = Domain::positive(1e6, "s");

fn parse_drift(s: &str) -> Result<DriftModel, String> {
    let s = s.trim();
    if s.eq_ignore_ascii_case("auto") {
        return Ok(DriftModel::Auto);
    }
    if let Some(v) = s.strip_prefix("knots:") {
        let spacing_s = number(v, KNOT_SPACING_S).map_err(|e| format!("knots:SECONDS: {e}"))?;
        return Ok(DriftModel::Knots { spacing_s });
    }
    if let Some(v) = s.strip_prefix("poly:") {
        let degree: usize = v
            .parse()
            .map_err(|_| format!("poly:DEGREE needs a whole number, found \"{v}\""))?;
        if degree > 5 {
            return Err(format!("polynomial degree must be 0..=5, found {degree}"));
        }
        return Ok(DriftModel::Polynomial { degree });
    }
    Err(format!(
        "expected auto, knots:SECONDS or poly:DEGREE, found \"{s}\""
    ))
}

/// Run `polarity`.
pub fn run(args: Args) -> anyhow::Result<Outcome> {
    let named = match &args.sensor {
        SensorArg::Named(n) => Some(n.as_str()),
        _ => None,
    };
    let plan = load_plan(&args.plan, named)?;
    let sensor = match args.sensor {
        SensorArg::Auto => SensorChoice::Auto,
        SensorArg::Magnetometer | SensorArg::Named(_) => SensorChoice::Magnetometer,
        SensorArg::Probe => SensorChoice::Probe,
    };
    let input = read_input(
        &args.log,
        Some(&plan),
        &args.input,
        magnetometer_recorded(&plan, sensor),
    )?;
    let options = PolarityOptions {
        sensor,
        snr_min: args.snr_min,
        drift: args.drift,
        max_lag_s: args.max_lag_s,
    };
    let key = serde_json::json!({
        "sensor": format!("{:?}", options.sensor),
        "snr_min": options.snr_min,
        "drift": format!("{:?}", options.drift),
        "max_lag_s": options.max_lag_s,
    });
    let result = run_polarity(&CheckRequest::new(&input, Some(&plan), options))?;
    let analysed = Analysed::new(&args.log, &input, &args.input, key);
    drop(input);
    let mut extra: Vec<Box<dyn ReportWriter>> = Vec::new();
    if let Some(p) = &args.params_out {
        extra.push(Box::new(super::flight_out::for_check(
            &result,
            Some(&plan),
            (analysed.log, &analysed.log_sha256),
            p,
            args.output.force,
        )?));
    }
    present_check(
        &result,
        analysed,
        Some(&plan),
        &args.output,
        &args.record,
        extra,
    )
}
